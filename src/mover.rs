//! The move stage: straight flights over one time step with exact wall hits.
//!
//! A molecule flies in 3-D from its (z, r) position; every intersection with a surface is found
//! exactly (`geometry::Domain::first_hit`), so any number of wall hits per step is
//! handled and no molecule can end a step inside a wall or pass through one. Walls reflect by
//! the Maxwell model (diffuse at the wall temperature with probability equal to the
//! accommodation, specular otherwise); molecules reaching a reservoir boundary leave the domain.
//! Crossings of the flow-rate measurement plane are reported to a callback while flying.
//! Invariant: after `advance` returns `Fate::Stays`, the molecule is inside the gas region.

pub use crate::geometry::Flight;
use crate::geometry::{fly, land, Domain, SurfaceId, SurfaceRole, SurfaceShape};
use rand::Rng;
use rand_distr::StandardNormal;

/// Outcome of a step for one molecule.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Fate {
    /// Still in the domain.
    Stays,
    /// Left through an open boundary (deleted).
    Left(SurfaceRole),
}

/// Reflection parameters of the walls for one species.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WallReflection {
    /// Fraction of diffuse reflections.
    pub accommodation: f64,
    /// sqrt(k T_w / m) of the species, m/s: standard deviation of each tangential component.
    pub sigma: f64,
}

/// Maximum number of wall hits followed in one step before the flight is cut short (the
/// molecule then stays at its last wall point, inside the gas, and flies on next step). Reached
/// only by pathological grazing flights.
pub const MAX_HITS_PER_STEP: usize = 10_000;

/// Fly `m` for time `dt`. `last` is the surface the molecule starts on (an injection boundary),
/// `z_count` the measurement plane; `on_cross(sign, r, cos θ)` is called for each crossing of
/// that plane (sign +1 in the +z direction, −1 against), with the crossing radius and the cosine
/// of the angle between the velocity and the axis (planar: between the velocity's projection on
/// the (z, y) plane and the axis, the angle of the slit's beam). `diffused` is set
/// when the molecule was re-emitted diffusely by a wall (its internal energy must then be
/// resampled at the wall temperature by the caller; specular hits keep it).
#[allow(clippy::too_many_arguments)]
#[inline(always)] // the fast path belongs in the caller's loop; the search is a call
pub fn advance<R: Rng + ?Sized, F: FnMut(f64, f64, f64)>(
    geom: &Domain,
    wall: &WallReflection,
    m: &mut Flight,
    dt: f64,
    last: Option<SurfaceId>,
    z_count: f64,
    rng: &mut R,
    on_cross: &mut F,
    diffused: &mut bool,
) -> Fate {
    // Fast path: a flight that stays inside its region meets no surface, and one that does not
    // pass the measurement plane crosses nothing. (The same end point as the search below
    // would give: `fly` computes it by the same expressions.) It holds whatever surface the
    // molecule starts on, so entering molecules take it too.
    {
        let x = m.r + m.vr * dt;
        let y = geom.symmetry.in_plane(m.vt) * dt;
        let zn = m.z + m.vz * dt;
        let r2 = x * x + y * y;
        let crosses = (m.z < z_count && zn > z_count) || (m.z > z_count && zn < z_count);
        // (r² along a straight flight is convex in time, about an axis and across a mirror
        // plane alike, so the ends bound the whole flight)
        if !crosses && geom.flight_stays_in_region(m.z, m.r * m.r, zn, r2) {
            let (zn, rn, vrn, vtn) = land(geom.symmetry, zn, x, y, r2, m.vr, m.vt);
            m.z = zn;
            m.r = rn;
            m.vr = vrn;
            m.vt = vtn;
            return Fate::Stays;
        }
        // Most other flights of a small domain simply leave it.
        if !crosses {
            if let Some(role) = geom.flight_leaves_reservoir(m.z, zn, r2) {
                return Fate::Left(role);
            }
        }
    }
    search(geom, wall, m, dt, last, z_count, rng, on_cross, diffused)
}

/// The general case of [`advance`]: surface search, hits and crossings, hit after hit.
#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn search<R: Rng + ?Sized, F: FnMut(f64, f64, f64)>(
    geom: &Domain,
    wall: &WallReflection,
    m: &mut Flight,
    dt: f64,
    mut last: Option<SurfaceId>,
    z_count: f64,
    rng: &mut R,
    on_cross: &mut F,
    diffused: &mut bool,
) -> Fate {
    let mut remaining = dt;
    for _ in 0..MAX_HITS_PER_STEP {
        let hit = geom.first_hit(m, remaining, last);
        let t = hit.map_or(remaining, |(t, _)| t);
        let z0 = m.z;
        let (mut zn, mut rn, vrn, vtn) = fly(geom.symmetry, m.z, m.r, m.vz, m.vr, m.vt, t);
        // Snap onto the surface hit exactly, so that a wall point on the measurement plane is
        // never mistaken for a crossing and the next search excludes the zero root.
        if let Some((_, id)) = hit {
            match geom.surfaces[id].shape {
                SurfaceShape::PlaneZ { z, .. } => zn = z,
                SurfaceShape::CylinderR { r, .. } => rn = r,
            }
        }
        // Crossing of the measurement plane inside this straight segment (strict on both ends:
        // flights that start or end on the plane sit on a wall there, never in the aperture).
        if (z0 < z_count && zn > z_count) || (z0 > z_count && zn < z_count) {
            let s = (z_count - z0) / m.vz;
            let vt = geom.symmetry.in_plane(m.vt);
            let x = m.r + m.vr * s;
            let y = vt * s;
            let speed = (m.vz * m.vz + m.vr * m.vr + vt * vt).sqrt();
            on_cross(m.vz.signum(), (x * x + y * y).sqrt(), m.vz.abs() / speed);
        }
        match hit {
            None => {
                m.z = zn;
                m.r = rn;
                m.vr = vrn;
                m.vt = vtn;
                return Fate::Stays;
            }
            Some((_, id)) => {
                let s = geom.surfaces[id];
                m.z = zn;
                m.r = rn;
                m.vr = vrn;
                m.vt = vtn;
                remaining -= t;
                match s.role {
                    SurfaceRole::Wall => {
                        if reflect(&s.shape, wall, m, rng) {
                            *diffused = true;
                        }
                        last = Some(id);
                    }
                    role => return Fate::Left(role),
                }
            }
        }
    }
    Fate::Stays
}

/// Maxwell-model reflection at a wall: diffuse with probability `accommodation`, else specular.
/// Returns true for a diffuse re-emission.
#[inline]
fn reflect<R: Rng + ?Sized>(
    shape: &SurfaceShape,
    wall: &WallReflection,
    m: &mut Flight,
    rng: &mut R,
) -> bool {
    let diffuse = wall.accommodation >= 1.0 || rng.random::<f64>() < wall.accommodation;
    match *shape {
        SurfaceShape::PlaneZ { .. } => {
            let into_gas = -m.vz.signum();
            if diffuse {
                m.vz = into_gas * flux_normal_speed(wall.sigma, rng);
                m.vr = wall.sigma * rng.sample::<f64, _>(StandardNormal);
                m.vt = wall.sigma * rng.sample::<f64, _>(StandardNormal);
            } else {
                m.vz = -m.vz;
            }
        }
        SurfaceShape::CylinderR { .. } => {
            // Only the tube bore is a cylindrical wall; the gas is inside it.
            if diffuse {
                m.vr = -flux_normal_speed(wall.sigma, rng);
                m.vz = wall.sigma * rng.sample::<f64, _>(StandardNormal);
                m.vt = wall.sigma * rng.sample::<f64, _>(StandardNormal);
            } else {
                m.vr = -m.vr;
            }
        }
    }
    diffuse
}

/// Normal speed of a molecule crossing a surface from an equilibrium gas (flux-weighted
/// distribution f(v) ∝ v exp(−v²/(2σ²)), Bird 1994 §4.3): v = σ sqrt(−2 ln U).
#[inline]
pub fn flux_normal_speed<R: Rng + ?Sized>(sigma: f64, rng: &mut R) -> f64 {
    // 1 − U lies in (0, 1], so the logarithm is finite.
    let u: f64 = 1.0 - rng.random::<f64>();
    sigma * (-2.0 * u.ln()).sqrt()
}
