//! Aperture geometry: one two-dimensional computational half-plane (z, r) standing for the
//! three-dimensional gas in one of two ways ([`Symmetry`]):
//! - **axisymmetric** (circular hole or short tube): r is the distance from the z axis, the
//!   partition is pierced by a hole of radius a, the outer boundary is a cylinder;
//! - **planar** (slit): r is the distance |y| from the slit's mid-plane, the slit has half-width
//!   a and is infinitely long along x; everything is per metre of slit length, and the
//!   mid-plane y = 0 is a mirror plane.
//!
//! Coordinates: z along the axis (flow direction +z), the partition occupies
//! 0 ≤ z ≤ t, a ≤ r ≤ R; upstream region z_min ≤ z < 0, downstream t < z ≤ z_max, r < R.
//! This module owns the surfaces and the exact ray–surface intersections (planes z = const and
//! surfaces r = const) of a straight 3-D flight written in the molecule's local frame: position
//! (r, 0, z), velocity (v_r, v_θ, v_z), where v_θ is the azimuthal velocity (axisymmetric) or the
//! velocity along the slit, v_x (planar). The two symmetries share every routine: a planar flight
//! is an axisymmetric one whose out-of-plane velocity does not move it off its plane (v_x never
//! changes |y|), and returning from the far side of the mirror plane is the planar form of the
//! rotation back into the meridian half-plane ([`fly`]). It also owns the measures (face areas,
//! cell volumes) of each symmetry. It decides nothing about what a hit does; that is the
//! `mover`'s job. Invariant: a valid flight segment never enters the solid.

/// Flight state of one molecule in its local frame: position (r, 0, z), velocity (v_r, v_θ, v_z).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Flight {
    pub z: f64,
    pub r: f64,
    pub vz: f64,
    pub vr: f64,
    pub vt: f64,
}

/// What happens to a molecule at a surface.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SurfaceRole {
    /// Open boundary to the upstream reservoir: molecules leaving are deleted.
    UpstreamBoundary,
    /// Open boundary to the downstream reservoir: molecules leaving are deleted.
    DownstreamBoundary,
    /// Solid wall of the partition or tube bore.
    Wall,
}

/// Shape of a surface in (z, r).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SurfaceShape {
    /// Plane z = `z`, covering `r_lo ≤ r ≤ r_hi`.
    PlaneZ { z: f64, r_lo: f64, r_hi: f64 },
    /// Cylinder r = `r`, covering `z_lo ≤ z ≤ z_hi`.
    CylinderR { r: f64, z_lo: f64, z_hi: f64 },
}

/// One surface of the domain.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Surface {
    pub shape: SurfaceShape,
    pub role: SurfaceRole,
}

/// How the computational half-plane (z, r) stands for the 3-D gas.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Symmetry {
    /// Rotation about the z axis: r is the distance from the axis; measures are whole 3-D
    /// volumes and areas (m³, m²).
    Axisymmetric,
    /// Translation along x and mirror symmetry about y = 0: r = |y|; measures are per metre of
    /// length along x and count both sides of the mirror plane (m² per m, m per m).
    Planar,
}

impl Symmetry {
    /// Area of the part r_lo ≤ r ≤ r_hi of a plane z = const: an annulus π(r_hi² − r_lo²), or
    /// two strips 2(r_hi − r_lo) per metre.
    #[inline]
    pub fn ring_area(self, r_lo: f64, r_hi: f64) -> f64 {
        match self {
            Symmetry::Axisymmetric => std::f64::consts::PI * (r_hi * r_hi - r_lo * r_lo),
            Symmetry::Planar => 2.0 * (r_hi - r_lo),
        }
    }

    /// Area of the surface r = `r` over an axial length `len`: a cylinder 2π r len, or two
    /// planes y = ±r, 2 len per metre.
    #[inline]
    pub fn band_area(self, r: f64, len: f64) -> f64 {
        match self {
            Symmetry::Axisymmetric => 2.0 * std::f64::consts::PI * r * len,
            Symmetry::Planar => 2.0 * len,
        }
    }

    /// The r of a point distributed uniformly over the ring r_lo ≤ r ≤ r_hi, from u ∈ [0, 1).
    #[inline]
    pub fn ring_point(self, r_lo: f64, r_hi: f64, u: f64) -> f64 {
        match self {
            Symmetry::Axisymmetric => (r_lo * r_lo + u * (r_hi * r_hi - r_lo * r_lo)).sqrt(),
            Symmetry::Planar => r_lo + u * (r_hi - r_lo),
        }
    }

    /// The share of the out-of-plane velocity v_θ in the motion across the half-plane: all of
    /// it about an axis, none along a slit (v_x never changes |y|).
    #[inline]
    pub fn in_plane(self, vt: f64) -> f64 {
        match self {
            Symmetry::Axisymmetric => vt,
            Symmetry::Planar => 0.0,
        }
    }
}

/// The computational domain of an aperture.
#[derive(Debug, Clone, PartialEq)]
pub struct Domain {
    /// How the half-plane stands for the gas.
    pub symmetry: Symmetry,
    /// Aperture radius a (a slit's half-width), m.
    pub radius: f64,
    /// Partition thickness t, m.
    pub thickness: f64,
    /// Upstream end of the domain (< 0), m.
    pub z_min: f64,
    /// Downstream end of the domain (> t), m.
    pub z_max: f64,
    /// Outer radius R (> a), m.
    pub r_max: f64,
    /// All surfaces; indices are stable and used as surface ids.
    pub surfaces: Vec<Surface>,
}

/// Index of a surface in [`Domain::surfaces`].
pub type SurfaceId = usize;

impl Domain {
    /// Build the domain; lengths in m.
    pub fn new(
        symmetry: Symmetry,
        radius: f64,
        thickness: f64,
        upstream: f64,
        downstream: f64,
        r_max: f64,
    ) -> Self {
        assert!(
            radius > 0.0
                && thickness >= 0.0
                && upstream > 0.0
                && downstream > 0.0
                && r_max > radius
        );
        let t = thickness;
        let z_min = -upstream;
        let z_max = t + downstream;
        let mut s = vec![
            Surface {
                shape: SurfaceShape::PlaneZ {
                    z: z_min,
                    r_lo: 0.0,
                    r_hi: r_max,
                },
                role: SurfaceRole::UpstreamBoundary,
            },
            Surface {
                shape: SurfaceShape::CylinderR {
                    r: r_max,
                    z_lo: z_min,
                    z_hi: 0.0,
                },
                role: SurfaceRole::UpstreamBoundary,
            },
            Surface {
                shape: SurfaceShape::PlaneZ {
                    z: z_max,
                    r_lo: 0.0,
                    r_hi: r_max,
                },
                role: SurfaceRole::DownstreamBoundary,
            },
            Surface {
                shape: SurfaceShape::CylinderR {
                    r: r_max,
                    z_lo: t,
                    z_hi: z_max,
                },
                role: SurfaceRole::DownstreamBoundary,
            },
            Surface {
                shape: SurfaceShape::PlaneZ {
                    z: 0.0,
                    r_lo: radius,
                    r_hi: r_max,
                },
                role: SurfaceRole::Wall,
            },
        ];
        if t > 0.0 {
            s.push(Surface {
                shape: SurfaceShape::PlaneZ {
                    z: t,
                    r_lo: radius,
                    r_hi: r_max,
                },
                role: SurfaceRole::Wall,
            });
            s.push(Surface {
                shape: SurfaceShape::CylinderR {
                    r: radius,
                    z_lo: 0.0,
                    z_hi: t,
                },
                role: SurfaceRole::Wall,
            });
        }
        Domain {
            symmetry,
            radius,
            thickness,
            z_min,
            z_max,
            r_max,
            surfaces: s,
        }
    }

    /// Surface ids of the reservoir boundaries: (upstream plane, upstream cylinder,
    /// downstream plane, downstream cylinder).
    pub const UPSTREAM_PLANE: SurfaceId = 0;
    pub const UPSTREAM_CYLINDER: SurfaceId = 1;
    pub const DOWNSTREAM_PLANE: SurfaceId = 2;
    pub const DOWNSTREAM_CYLINDER: SurfaceId = 3;

    /// True when (z, r) lies inside the solid partition or outside the domain (tolerance
    /// `eps` m). Points on a surface count as inside the gas.
    pub fn is_outside_gas(&self, z: f64, r: f64, eps: f64) -> bool {
        if !(z >= self.z_min - eps && z <= self.z_max + eps && r <= self.r_max + eps && r >= 0.0) {
            return true;
        }
        let in_partition_z = if self.thickness > 0.0 {
            z > eps && z < self.thickness - eps
        } else {
            false
        };
        in_partition_z && r > self.radius + eps
    }

    /// True when a straight flight from (z, r² = `r2`) to (`z_end`, `r2_end`) meets no surface
    /// at any time after its start: it stays inside the region it starts in (upstream z < 0,
    /// bore 0 < z < t inside the hole, downstream z > t), where it may start on the region's
    /// boundary (an entering molecule on a reservoir face, a molecule on the bore wall) but
    /// must end strictly inside. r² along a straight 3-D flight is a convex function of time,
    /// so r² ≤ R² at the start and r² < R² at the end give r² < R² at every later time; z is
    /// monotonic. The test is exact and needs no division or square root.
    /// The open boundary through which a straight flight from axial position `z` to
    /// (`z_end`, r² = `r2_end`) leaves the domain, when it starts in a reservoir region
    /// (upstream z < 0 or downstream z > t), stays on that side of the partition and ends
    /// outside the domain; None otherwise (the general search decides). A reservoir region is
    /// convex and its only wall is the partition face, which a flight that stays on its side
    /// never reaches, so such a flight meets nothing before the region's open outer boundary
    /// (plane or cylinder, both open to the same reservoir): the search would give the same
    /// fate, and a leaving molecule draws no random numbers, so results are unchanged.
    #[inline]
    pub fn flight_leaves_reservoir(&self, z: f64, z_end: f64, r2_end: f64) -> Option<SurfaceRole> {
        let outside =
            z_end <= self.z_min || z_end >= self.z_max || r2_end >= self.r_max * self.r_max;
        if !outside {
            None
        } else if z < 0.0 && z_end < 0.0 {
            Some(SurfaceRole::UpstreamBoundary)
        } else if z > self.thickness && z_end > self.thickness {
            Some(SurfaceRole::DownstreamBoundary)
        } else {
            None
        }
    }

    /// See [`Domain::flight_leaves_reservoir`].
    #[inline]
    pub fn flight_stays_in_region(&self, z: f64, r2: f64, z_end: f64, r2_end: f64) -> bool {
        let t = self.thickness;
        let inside = |rc: f64| r2 <= rc * rc && r2_end < rc * rc;
        if z < 0.0 {
            z >= self.z_min && z_end > self.z_min && z_end < 0.0 && inside(self.r_max)
        } else if z > t {
            z <= self.z_max && z_end < self.z_max && z_end > t && inside(self.r_max)
        } else {
            z > 0.0 && z_end > 0.0 && z < t && z_end < t && inside(self.radius)
        }
    }

    /// Gas volume of the upstream region (z < 0), m³ (planar: m² per metre).
    pub fn upstream_volume(&self) -> f64 {
        self.symmetry.ring_area(0.0, self.r_max) * (-self.z_min)
    }

    /// Gas volume of the bore (0 ≤ z ≤ t, r < a), m³ (planar: m² per metre).
    pub fn bore_volume(&self) -> f64 {
        self.symmetry.ring_area(0.0, self.radius) * self.thickness
    }

    /// Gas volume of the downstream region (z > t), m³ (planar: m² per metre).
    pub fn downstream_volume(&self) -> f64 {
        self.symmetry.ring_area(0.0, self.r_max) * (self.z_max - self.thickness)
    }

    /// First intersection of the flight from (z, r) with velocity (v_z, v_r, v_θ) with any
    /// surface, at a flight time in (0, `t_max`]. `last` is the surface the molecule sits on
    /// (just reflected from or injected through), whose zero-time root is excluded.
    /// Returns (time, surface id).
    pub fn first_hit(
        &self,
        f: &Flight,
        t_max: f64,
        last: Option<SurfaceId>,
    ) -> Option<(f64, SurfaceId)> {
        let Flight { z, r, vz, vr, vt } = *f;
        let vt = self.symmetry.in_plane(vt);
        let mut best: Option<(f64, SurfaceId)> = None;
        let mut limit = t_max;
        // Cheap rejection of cylinders: r² along a straight flight is convex in time, so the
        // largest radius of the whole flight is at one of its ends; and z is monotonic.
        let (xe, ye) = (r + vr * t_max, vt * t_max);
        let r_far2 = (r * r).max(xe * xe + ye * ye);
        let ze = z + vz * t_max;
        let (z_a, z_b) = if ze < z { (ze, z) } else { (z, ze) };
        // Axial reach of the flight, widened by far more than the rounding of a quotient, so
        // that the division-free screen of the planes below never drops a plane that the exact
        // test would accept: the screen only saves divisions, the exact test still decides.
        let reach = vz.abs() * t_max * (1.0 + 1e-12);
        for (id, s) in self.surfaces.iter().enumerate() {
            let on_it = last == Some(id);
            let hit = match s.shape {
                SurfaceShape::PlaneZ { z: zp, r_lo, r_hi } => {
                    let dz = zp - z;
                    // Behind the flight (t ≤ 0) or out of its reach: no division needed.
                    if on_it
                        || vz == 0.0
                        || dz == 0.0
                        || (dz > 0.0) != (vz > 0.0)
                        || dz.abs() > reach
                    {
                        None
                    } else {
                        let t = (zp - z) / vz;
                        if t > 0.0 && t <= limit {
                            let x = r + vr * t;
                            let y = vt * t;
                            let rh2 = x * x + y * y;
                            (rh2 >= r_lo * r_lo && rh2 <= r_hi * r_hi).then_some(t)
                        } else {
                            None
                        }
                    }
                }
                SurfaceShape::CylinderR { r: rc, z_lo, z_hi } => {
                    if (!on_it && r_far2 < rc * rc) || z_b < z_lo || z_a > z_hi {
                        continue;
                    }
                    cylinder_time(r, vr, vt, rc, on_it, limit).and_then(|ts| {
                        ts.into_iter().flatten().find(|&t| {
                            let zh = z + vz * t;
                            zh >= z_lo && zh <= z_hi
                        })
                    })
                }
            };
            if let Some(t) = hit {
                if t <= limit {
                    limit = t;
                    best = Some((t, id));
                }
            }
        }
        best
    }
}

/// Positive flight times (ascending, at most two) at which the flight from radius `r` with
/// transverse velocity (v_r, v_θ) reaches radius `rc`, not later than `t_max`.
/// `on_it`: the molecule sits on this cylinder, so the zero root is dropped exactly.
#[inline]
fn cylinder_time(
    r: f64,
    vr: f64,
    vt: f64,
    rc: f64,
    on_it: bool,
    t_max: f64,
) -> Option<[Option<f64>; 2]> {
    let a = vr * vr + vt * vt;
    if a == 0.0 {
        return None;
    }
    let b = r * vr;
    if on_it {
        // r = rc: roots t = 0 and t = -2 r v_r / A.
        let t = -2.0 * b / a;
        return (t > 0.0 && t <= t_max).then_some([Some(t), None]);
    }
    let c = r * r - rc * rc;
    let disc = b * b - a * c;
    if disc < 0.0 {
        return None;
    }
    let sq = disc.sqrt();
    // Numerically stable pair of roots.
    let q = -(b + b.signum() * sq);
    let (t1, t2) = if q != 0.0 {
        let x1 = q / a;
        let x2 = c / q;
        if x1 < x2 {
            (x1, x2)
        } else {
            (x2, x1)
        }
    } else {
        (0.0, 0.0)
    };
    let ok = |t: f64| (t > 0.0 && t <= t_max).then_some(t);
    let out = [ok(t1), ok(t2)];
    if out[0].is_none() && out[1].is_none() {
        None
    } else if out[0].is_none() {
        Some([out[1], None])
    } else {
        Some(out)
    }
}

/// Advance a straight 3-D flight by time `t` and bring it back into the (z, r) half-plane:
/// rotate about the axis (axisymmetric), or mirror a point that crossed y = 0 (planar; v_θ is the
/// velocity along the slit and never changes). Returns (z, r, v_r, v_θ); v_z is unchanged.
#[inline]
pub fn fly(
    symmetry: Symmetry,
    z: f64,
    r: f64,
    vz: f64,
    vr: f64,
    vt: f64,
    t: f64,
) -> (f64, f64, f64, f64) {
    let x = r + vr * t;
    let y = symmetry.in_plane(vt) * t;
    land(symmetry, z + vz * t, x, y, x * x + y * y, vr, vt)
}

/// The end (x, y, zn) of a straight flight in its starting frame, x² + y² = `r2`, brought back
/// into the (z, r) half-plane: rotated about the axis ([`rotate`]), or, planar (y = 0, x the
/// signed distance from the mid-plane), mirrored across y = 0 when it lies beyond.
#[inline]
pub fn land(
    symmetry: Symmetry,
    zn: f64,
    x: f64,
    y: f64,
    r2: f64,
    vr: f64,
    vt: f64,
) -> (f64, f64, f64, f64) {
    match symmetry {
        Symmetry::Axisymmetric => rotate(zn, x, y, r2, vr, vt),
        Symmetry::Planar if x >= 0.0 => (zn, x, vr, vt),
        Symmetry::Planar => (zn, -x, -vr, vt),
    }
}

/// The end of a flight at 3-D position (x, y, zn), x² + y² = `r2`, with transverse velocity
/// (v_r, v_θ) in the starting frame, rotated into the (z, r) half-plane: (z, r, v_r, v_θ).
/// One square root and one division per flight, the least the rotation needs.
#[inline]
pub fn rotate(zn: f64, x: f64, y: f64, r2: f64, vr: f64, vt: f64) -> (f64, f64, f64, f64) {
    let rn = r2.sqrt();
    if rn > 0.0 {
        let inv = 1.0 / rn;
        (zn, rn, (x * vr + y * vt) * inv, (x * vt - y * vr) * inv)
    } else {
        (zn, 0.0, vr, vt)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    /// The shortcut for leaving flights must agree with the exact search: whenever it names a
    /// boundary, the first surface the search finds is an open boundary of that reservoir.
    /// Random flights start anywhere in the gas (half of them on a reservoir face, as entering
    /// molecules do), in both symmetries and for a thin and a thick partition.
    #[test]
    fn leaving_shortcut_agrees_with_the_search() {
        let mut rng = rand::rngs::SmallRng::seed_from_u64(7);
        for symmetry in [Symmetry::Axisymmetric, Symmetry::Planar] {
            for thickness in [0.0, 0.8] {
                let d = Domain::new(symmetry, 1.0, thickness, 1.5, 1.5, 2.5);
                let (mut named, mut checked) = (0, 0);
                while checked < 20_000 {
                    let mut f = Flight {
                        z: rng.random_range(d.z_min..d.z_max),
                        r: rng.random_range(0.0..d.r_max),
                        vz: rng.random_range(-1.0..1.0),
                        vr: rng.random_range(-1.0..1.0),
                        vt: rng.random_range(-1.0..1.0),
                    };
                    let mut last = None;
                    if rng.random::<bool>() {
                        // On the upstream plane or the outer cylinder, moving inwards.
                        if rng.random::<bool>() {
                            f.z = d.z_min;
                            f.vz = f.vz.abs();
                            last = Some(Domain::UPSTREAM_PLANE);
                        } else {
                            f.r = d.r_max;
                            f.z = rng.random_range(d.z_min..0.0);
                            f.vr = -f.vr.abs();
                            last = Some(Domain::UPSTREAM_CYLINDER);
                        }
                    }
                    let in_wall = f.z >= 0.0 && f.z <= thickness && f.r >= 1.0;
                    if in_wall {
                        continue;
                    }
                    checked += 1;
                    let dt = rng.random_range(0.1..3.0);
                    let x = f.r + f.vr * dt;
                    let y = symmetry.in_plane(f.vt) * dt;
                    let Some(role) = d.flight_leaves_reservoir(f.z, f.z + f.vz * dt, x * x + y * y)
                    else {
                        continue;
                    };
                    named += 1;
                    let (_, id) = d.first_hit(&f, dt, last).expect("a leaving flight hits");
                    assert_eq!(d.surfaces[id].role, role, "{f:?} dt {dt}");
                }
                assert!(named > 2_000, "too few leaving flights tested: {named}");
            }
        }
    }

    #[test]
    fn cylinder_roots_from_inside_and_outside() {
        // From r = 0.5 moving radially outward at 1 m/s to rc = 1: t = 0.5.
        let t = cylinder_time(0.5, 1.0, 0.0, 1.0, false, 10.0).unwrap();
        assert!((t[0].unwrap() - 0.5).abs() < 1e-15);
        // From r = 2 moving inward: enters at t = 1, leaves at t = 3.
        let t = cylinder_time(2.0, -1.0, 0.0, 1.0, false, 10.0).unwrap();
        assert!((t[0].unwrap() - 1.0).abs() < 1e-15 && (t[1].unwrap() - 3.0).abs() < 1e-15);
        // On the cylinder moving inward: chord time 2.
        let t = cylinder_time(1.0, -1.0, 0.0, 1.0, true, 10.0).unwrap();
        assert!((t[0].unwrap() - 2.0).abs() < 1e-15);
    }

    #[test]
    fn planar_flights_mirror_at_the_mid_plane_and_keep_the_slit_velocity() {
        let (z, y, vy, vx) = fly(Symmetry::Planar, 0.0, 0.5, 2.0, -1.0, 7.0, 1.5);
        assert_eq!((z, y, vy, vx), (3.0, 1.0, 1.0, 7.0));
        // a slit wall y = 1 seen from y = 0.5 moving away from it at -1 m/s: reached at t = 1.5
        // through the mirror plane; v_x plays no part
        let d = Domain::new(Symmetry::Planar, 1.0, 0.5, 2.0, 2.0, 3.0);
        let f = Flight {
            z: 0.2,
            r: 0.5,
            vz: 0.0,
            vr: -1.0,
            vt: 100.0,
        };
        let (t, id) = d.first_hit(&f, 10.0, None).unwrap();
        assert!((t - 1.5).abs() < 1e-12, "{t}");
        assert_eq!(d.surfaces[id].role, SurfaceRole::Wall);
        assert_eq!(Symmetry::Planar.ring_area(0.5, 1.0), 1.0);
        assert_eq!(Symmetry::Planar.ring_point(0.5, 1.0, 0.5), 0.75);
    }

    #[test]
    fn fly_keeps_distance() {
        let (z, r, vr, vt) = fly(Symmetry::Axisymmetric, 0.0, 1.0, 1.0, 0.0, 1.0, 1.0);
        assert!((z - 1.0).abs() < 1e-15);
        assert!((r - 2f64.sqrt()).abs() < 1e-15);
        // speed in the transverse plane is conserved
        assert!(((vr * vr + vt * vt) - 1.0).abs() < 1e-15);
    }
}
