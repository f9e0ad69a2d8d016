//! The inflow stage: molecules entering from the upstream and downstream reservoirs.
//!
//! Every open boundary face injects, each step, the equilibrium one-sided flux n c̄/4 of each
//! species at its reservoir's partial pressure and temperature (Bird 1994 §4.3). The number of
//! simulated molecules per face element is Poisson-distributed with the exact expected value
//! (no remainder bookkeeping, stationary statistics). The normal velocity component is drawn
//! from the flux-weighted distribution, the tangential ones from the Maxwellian, and each new
//! molecule then flies for a uniformly random fraction of the step so that entries are spread
//! over the step. Face elements follow the radial weight bands, so each element has one weight.

use crate::geometry::{Domain, SurfaceId, Symmetry};
use crate::mover::{flux_normal_speed, Flight};
use crate::weights::RadialWeights;
use rand::Rng;
use rand_distr::{Distribution, Poisson, StandardNormal};

/// Where on the boundary an element lies.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ElementShape {
    /// Annulus of the plane z = `z` between radii `r_lo` and `r_hi` (planar: two strips
    /// r_lo ≤ |y| ≤ r_hi); `into` is the sign of v_z of entering molecules.
    Annulus {
        z: f64,
        r_lo: f64,
        r_hi: f64,
        into: f64,
    },
    /// Band of the outer surface r = `r` (cylinder, or planes y = ±r) between `z_lo` and `z_hi`;
    /// entering molecules have v_r < 0.
    Band { r: f64, z_lo: f64, z_hi: f64 },
}

/// One injecting boundary element for one species.
#[derive(Debug, Clone, PartialEq)]
pub struct InflowElement {
    pub shape: ElementShape,
    /// Surface the element belongs to (excluded from the first intersection search).
    pub surface: SurfaceId,
    pub species: u8,
    /// sqrt(kT/m) of the reservoir for this species, m/s.
    pub sigma: f64,
    /// Expected number of simulated molecules entering per step.
    pub expected_per_step: f64,
    /// Whether this element belongs to the upstream reservoir.
    pub upstream: bool,
    /// The domain's symmetry (how a point is placed uniformly on an annulus).
    pub symmetry: Symmetry,
}

impl InflowElement {
    /// Draw the number of molecules entering this step.
    pub fn count<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        if self.expected_per_step <= 0.0 {
            return 0;
        }
        Poisson::new(self.expected_per_step)
            .map(|p| p.sample(rng) as u64)
            .unwrap_or(0)
    }

    /// A new molecule on the element with an inflow velocity (not yet moved into the domain).
    #[inline]
    pub fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> Flight {
        let vn = flux_normal_speed(self.sigma, rng);
        let g1: f64 = self.sigma * rng.sample::<f64, _>(StandardNormal);
        let g2: f64 = self.sigma * rng.sample::<f64, _>(StandardNormal);
        match self.shape {
            ElementShape::Annulus {
                z,
                r_lo,
                r_hi,
                into,
            } => {
                let r = self.symmetry.ring_point(r_lo, r_hi, rng.random());
                Flight {
                    z,
                    r,
                    vz: into * vn,
                    vr: g1,
                    vt: g2,
                }
            }
            ElementShape::Band { r, z_lo, z_hi } => {
                let z = z_lo + rng.random::<f64>() * (z_hi - z_lo);
                Flight {
                    z,
                    r,
                    vz: g1,
                    vr: -vn,
                    vt: g2,
                }
            }
        }
    }
}

/// Reservoir description for building the inflow elements.
#[derive(Debug, Clone)]
pub struct ReservoirSide {
    /// Number density per species, 1/m³.
    pub species_density: Vec<f64>,
    pub temperature: f64,
}

/// Build the inflow elements of both reservoirs.
///
/// `masses[s]` are the species masses, `fnum` the real molecules per simulated molecule of
/// weight 1, `dt` the time step. A reservoir with zero density contributes no element.
pub fn inflow_elements(
    geom: &Domain,
    weights: &RadialWeights,
    masses: &[f64],
    upstream: &ReservoirSide,
    downstream: &ReservoirSide,
    fnum: f64,
    dt: f64,
) -> Vec<InflowElement> {
    let mut out = Vec::new();
    for (upstream_side, side) in [(true, upstream), (false, downstream)] {
        for (s, &mass) in masses.iter().enumerate() {
            let n = side.species_density[s];
            if n <= 0.0 {
                continue;
            }
            let flux = crate::maxwell::one_sided_flux(n, side.temperature, mass);
            let sigma = crate::maxwell::sigma(side.temperature, mass);
            let (plane_id, plane_z, into, cyl_id, z_lo, z_hi) = if upstream_side {
                (
                    Domain::UPSTREAM_PLANE,
                    geom.z_min,
                    1.0,
                    Domain::UPSTREAM_CYLINDER,
                    geom.z_min,
                    0.0,
                )
            } else {
                (
                    Domain::DOWNSTREAM_PLANE,
                    geom.z_max,
                    -1.0,
                    Domain::DOWNSTREAM_CYLINDER,
                    geom.thickness,
                    geom.z_max,
                )
            };
            for j in 0..weights.bands {
                let (r_lo, r_hi) = weights.band_edges(j);
                let area = geom.symmetry.ring_area(r_lo, r_hi);
                out.push(InflowElement {
                    shape: ElementShape::Annulus {
                        z: plane_z,
                        r_lo,
                        r_hi,
                        into,
                    },
                    surface: plane_id,
                    species: s as u8,
                    sigma,
                    expected_per_step: flux * area * dt / (fnum * weights.factor[j]),
                    upstream: upstream_side,
                    symmetry: geom.symmetry,
                });
            }
            let area = geom.symmetry.band_area(geom.r_max, z_hi - z_lo);
            out.push(InflowElement {
                shape: ElementShape::Band {
                    r: geom.r_max,
                    z_lo,
                    z_hi,
                },
                surface: cyl_id,
                species: s as u8,
                sigma,
                expected_per_step: flux * area * dt / (fnum * weights.factor[weights.bands - 1]),
                upstream: upstream_side,
                symmetry: geom.symmetry,
            });
        }
    }
    out
}
