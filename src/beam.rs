//! Beam and plume figures: where the molecules leaving the aperture go. This module owns the
//! angular distribution of the flux leaving the aperture normalised to the cosine law, the
//! centreline intensity and the peaking factor, the downstream axis profile of the number
//! density with its far-field power-law fit, and the composition on the axis of a mixture
//! (enrichment of the light species).
//!
//! It only derives figures: the crossing tallies come from `flux` (polar bins of the molecules
//! crossing the exit plane downstream, with their weights and squared weights) and the densities
//! from the sampled fields of `sample`; it never touches molecules, and it never decides what is
//! stored (that is `summary`, `field_output` and `plots`).
//!
//! Geometry enters through [`AngularMeasure`] only: a circular aperture measures intensity per
//! solid angle about the axis (the cosine law of a thin orifice is dṄ/dΩ = Ṅ cos θ/π), a planar
//! slit per unit plane angle and unit length (dṄ'/dφ = Ṅ' cos φ/2), so the planar geometry can
//! supply the same figures with the same code. The axis is the first radial row of cells of the
//! axisymmetric grid (for a slit: the first row off the symmetry plane).
//!
//! Invariants: the polar bins are those of `flux` (equal widths of 5° from the axis); a figure
//! that cannot be formed (nothing sampled, a domain too short for the far field) is `None` or
//! NaN, never a guess.

use crate::flux::{FluxHistory, POLAR_BINS};
use crate::numerics::Plan;
use crate::sample::Fields;
use std::f64::consts::PI;

/// Width of a polar bin of `flux`, degrees.
pub const POLAR_BIN_DEG: f64 = 180.0 / 2.0 / POLAR_BINS as f64;

/// The far-field window of the axis starts this many aperture diameters beyond the exit plane
/// ("a few diameters": there the axis density of a thin orifice follows the inverse-square law
/// of a point source to within 3 % in its local exponent; collisionless kinetic theory).
pub const FAR_FIELD_START_DIAMETERS: f64 = 2.0;

/// Fewest axis cells in the far-field window for a fit.
pub const FAR_FIELD_MIN_CELLS: usize = 3;

/// How intensity is measured around the aperture.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AngularMeasure {
    /// Circular aperture: per steradian, θ the polar angle from the axis.
    SolidAngle,
    /// Planar slit: per radian of the angle φ from the symmetry plane and per unit slit length,
    /// both sides of the plane folded into |φ|.
    PlaneAngle,
}

impl AngularMeasure {
    /// Fraction of the molecules of a cosine-law (thin-orifice) source that leave between the
    /// angles `lo` and `hi` (radians from the axis): sin²hi − sin²lo per solid angle,
    /// sin hi − sin lo per plane angle (Knudsen's cosine law).
    pub fn cosine_law_fraction(self, lo: f64, hi: f64) -> f64 {
        match self {
            AngularMeasure::SolidAngle => hi.sin().powi(2) - lo.sin().powi(2),
            AngularMeasure::PlaneAngle => hi.sin() - lo.sin(),
        }
    }

    /// Size of the bin between `lo` and `hi`: its solid angle 2π(cos lo − cos hi), or its plane
    /// angle 2(hi − lo) (both sides of the symmetry plane).
    pub fn bin_measure(self, lo: f64, hi: f64) -> f64 {
        match self {
            AngularMeasure::SolidAngle => 2.0 * PI * (lo.cos() - hi.cos()),
            AngularMeasure::PlaneAngle => 2.0 * (hi - lo),
        }
    }

    /// Centreline intensity of an ideal thin orifice per molecule per second leaving it: 1/π
    /// per steradian (cosine law Ṅ cos θ/π), 1/2 per radian (Ṅ' cos φ/2).
    pub fn cosine_law_centreline(self) -> f64 {
        match self {
            AngularMeasure::SolidAngle => 1.0 / PI,
            AngularMeasure::PlaneAngle => 0.5,
        }
    }
}

/// Angular distribution of the molecules crossing the exit plane downstream.
#[derive(Debug, Clone, PartialEq)]
pub struct Angular {
    /// Bin centres, degrees from the axis.
    pub theta_deg: Vec<f64>,
    /// Fraction of the leaving molecules in each bin over the cosine-law fraction.
    pub over_cosine_law: Vec<f64>,
    /// 95 % half-width of each ratio (Poisson statistics of the weighted counts).
    pub over_cosine_law_ci95: Vec<f64>,
    /// Real molecules leaving downstream per second (the throughput of the beam), 1/s.
    pub molecules_per_s: f64,
    /// Mean intensity over the first bin (the cone θ < 5° about the axis), molecules/(s·sr)
    /// (per radian and metre for a slit).
    pub centreline_intensity: f64,
    pub centreline_intensity_ci95: f64,
    /// Centreline intensity over that of an ideal thin orifice of the same throughput (Ṅ/π).
    pub peaking_factor: f64,
    pub peaking_factor_ci95: f64,
}

/// Angular figures from the polar tallies of `flux`: `counts[k]` and `counts_sq[k]` are the sums
/// of the weights and squared weights (weight-factor units) of the molecules that crossed the exit
/// plane downstream in bin k over `time` seconds of sampling; `fnum` converts to real molecules.
///
/// The relative standard error of a bin is sqrt(Σw²)/Σw (compound Poisson statistics of
/// independent crossings. Free-molecular crossings are independent except for the clones of the
/// radial weighting, which repeat their original's direction: measured over 14 seeds each of a
/// thin orifice and an L/R = 2 tube, the deviations scatter 1.0 to 1.2 times the stated standard
/// error. With collisions, crossings close in time are correlated and the interval is a lower
/// bound.) The ratio's uncertainty ignores that of the total, which is smaller by the square
/// root of the bin's share.
pub fn angular(
    measure: AngularMeasure,
    counts: &[f64],
    counts_sq: &[f64],
    fnum: f64,
    time: f64,
) -> Angular {
    let total: f64 = counts.iter().sum();
    let mut theta_deg = Vec::with_capacity(counts.len());
    let mut ratio = Vec::with_capacity(counts.len());
    let mut ratio_ci = Vec::with_capacity(counts.len());
    for (k, (&n, &n2)) in counts.iter().zip(counts_sq).enumerate() {
        let (lo, hi) = bin_edges(k);
        theta_deg.push(POLAR_BIN_DEG * (k as f64 + 0.5));
        let law = measure.cosine_law_fraction(lo, hi);
        let r = if total > 0.0 {
            n / total / law
        } else {
            f64::NAN
        };
        ratio.push(r);
        ratio_ci.push(1.96 * r * relative_error(n, n2));
    }
    let molecules_per_s = total * fnum / time;
    let (lo, hi) = bin_edges(0);
    let omega = measure.bin_measure(lo, hi);
    let centreline = counts.first().copied().unwrap_or(0.0) * fnum / time / omega;
    let rel0 = relative_error(
        counts.first().copied().unwrap_or(0.0),
        counts_sq.first().copied().unwrap_or(0.0),
    );
    let peaking = if molecules_per_s > 0.0 {
        centreline / (molecules_per_s * measure.cosine_law_centreline())
    } else {
        f64::NAN
    };
    Angular {
        theta_deg,
        over_cosine_law: ratio,
        over_cosine_law_ci95: ratio_ci,
        molecules_per_s,
        centreline_intensity: centreline,
        centreline_intensity_ci95: 1.96 * centreline * rel0,
        peaking_factor: peaking,
        peaking_factor_ci95: 1.96 * peaking * rel0,
    }
}

/// How intensity is measured for the aperture of `plan`: per solid angle about a hole's axis,
/// per in-plane angle (and metre) for a slit.
pub fn measure_of(plan: &Plan) -> AngularMeasure {
    match plan.geometry.symmetry {
        crate::geometry::Symmetry::Axisymmetric => AngularMeasure::SolidAngle,
        crate::geometry::Symmetry::Planar => AngularMeasure::PlaneAngle,
    }
}

/// The angular figures of a run: its exit-plane tallies over the sampling steps.
pub fn angular_of_run(plan: &Plan, flux: &FluxHistory) -> Angular {
    let time = flux.profile_steps.max(1) as f64 * plan.dt;
    angular(
        measure_of(plan),
        &flux.polar_sum,
        &flux.polar_sq_sum,
        plan.fnum,
        time,
    )
}

/// Edges of polar bin `k`, radians.
pub fn bin_edges(k: usize) -> (f64, f64) {
    (
        (POLAR_BIN_DEG * k as f64).to_radians(),
        (POLAR_BIN_DEG * (k + 1) as f64).to_radians(),
    )
}

/// sqrt(Σw²)/Σw, NaN for an empty bin.
fn relative_error(sum: f64, sum_sq: f64) -> f64 {
    if sum > 0.0 {
        sum_sq.sqrt() / sum
    } else {
        f64::NAN
    }
}

/// Free-molecular reference of the angular distribution for the aperture of `plan` (a slit: the
/// in-plane cosine law when thin, NaN for a channel, whose theory is not implemented): Clausing's
/// tube theory ([`crate::analytic::TubeBeam`]) for thickness/radius, averaged over each polar
/// bin as the molecules are (a thin orifice gives 1 everywhere), and its exact centreline
/// peaking factor 1/W. Valid for diffuse walls and a downstream vacuum; shown beside every
/// result as the Kn → ∞ limit.
pub fn free_molecular_reference(plan: &Plan) -> (Vec<f64>, f64) {
    let l = plan.case.aperture.thickness / plan.case.aperture.radius();
    if plan.geometry.symmetry == crate::geometry::Symmetry::Planar {
        // a thin slit follows the in-plane cosine law; no channel theory is implemented here
        return if l == 0.0 {
            (vec![1.0; POLAR_BINS], 1.0)
        } else {
            (vec![f64::NAN; POLAR_BINS], f64::NAN)
        };
    }
    let beam = crate::analytic::TubeBeam::new(l);
    let bins = (0..POLAR_BINS)
        .map(|k| {
            let (lo, hi) = bin_edges(k);
            beam.bin_average(lo, hi)
        })
        .collect();
    (bins, beam.peaking_factor())
}

/// The number density along the axis (first radial row of cells) and the composition there.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisProfile {
    /// Cell centres along the axis, m (flow +z; the partition spans 0 ≤ z ≤ thickness).
    pub z: Vec<f64>,
    /// Number density, 1/m³ (NaN where nothing was sampled).
    pub number_density: Vec<f64>,
    /// Number density over the upstream reservoir's p1/(k T1).
    pub over_upstream: Vec<f64>,
    /// Mole fraction of each species (component order), NaN where nothing was sampled.
    pub mole_fraction: Vec<Vec<f64>>,
    /// Simulated molecules sampled in each axis cell (all steps).
    pub samples: Vec<f64>,
}

/// The axis profile of sampled `fields` over the whole length of the domain.
pub fn axis_profile(plan: &Plan, fields: &Fields) -> AxisProfile {
    let g = &plan.grid;
    let nr = g.r.len();
    let n1 = plan.estimate.upstream_number_density;
    let ns = fields.species_density.len();
    let mut p = AxisProfile {
        z: Vec::new(),
        number_density: Vec::new(),
        over_upstream: Vec::new(),
        mole_fraction: vec![Vec::new(); ns],
        samples: Vec::new(),
    };
    for iz in 0..g.z.len() {
        let c = iz * nr;
        let n = fields.number_density[c];
        p.z.push(g.z.center(iz));
        p.number_density.push(n);
        p.over_upstream.push(n / n1);
        for (s, x) in p.mole_fraction.iter_mut().enumerate() {
            x.push(fields.species_density[s][c] / n);
        }
        p.samples.push(fields.samples[c]);
    }
    p
}

/// Far-field figures of the downstream axis.
#[derive(Debug, Clone, PartialEq)]
pub struct FarField {
    /// Window of the fit: distances beyond the exit plane, m (cell centres).
    pub from_m: f64,
    pub to_m: f64,
    pub cells: usize,
    /// p of the least-squares fit ln n = ln A − p ln(z − t) (2 for a point source).
    pub exponent: f64,
    /// Approximate 95 % half-width of p (1.96 standard errors of the slope from the residuals).
    pub exponent_ci95: f64,
    /// C of the inverse-square law n = C n1 (a/(z − t))² fitted in the window (geometric mean of
    /// n (z − t)²/(n1 a²)); 1/4 far from a thin orifice in free-molecular flow, where
    /// n = n1 (1 − d/sqrt(d² + a²))/2 (collisionless kinetic theory). For a slit (a line
    /// source) the law is n = C n1 a/(z − t), and C = 1/π far from a thin slit, where
    /// n = n1 atan(a/d)/π (the strip's solid angle 4 atan(a/d) over 4π).
    pub inverse_square_coefficient: f64,
    /// Mole fraction of the lightest species in the window (sample-weighted), its upstream mole
    /// fraction, and their ratio (the axis enrichment); `None` for a pure gas.
    pub light_species: Option<Enrichment>,
    /// Simulated molecules sampled in the window (all steps), for judging the statistics.
    pub samples: f64,
}

/// Composition of the far-field axis in the lightest species.
#[derive(Debug, Clone, PartialEq)]
pub struct Enrichment {
    pub species: String,
    pub upstream_mole_fraction: f64,
    pub axis_mole_fraction: f64,
    /// axis_mole_fraction / upstream_mole_fraction.
    pub enrichment: f64,
}

/// The far-field window and fit of `axis`: axis cells at least
/// [`FAR_FIELD_START_DIAMETERS`] diameters beyond the exit plane with a positive density;
/// `None` when fewer than [`FAR_FIELD_MIN_CELLS`] (a domain too short for the far field).
pub fn far_field(plan: &Plan, axis: &AxisProfile) -> Option<FarField> {
    let case = &plan.case;
    let t = case.aperture.thickness;
    let a = case.aperture.radius();
    let start = FAR_FIELD_START_DIAMETERS * case.aperture.diameter;
    let cells: Vec<usize> = (0..axis.z.len())
        .filter(|&i| axis.z[i] - t >= start && axis.number_density[i] > 0.0)
        .collect();
    if cells.len() < FAR_FIELD_MIN_CELLS {
        return None;
    }
    let xs: Vec<f64> = cells.iter().map(|&i| (axis.z[i] - t).ln()).collect();
    let ys: Vec<f64> = cells.iter().map(|&i| axis.number_density[i].ln()).collect();
    let k = xs.len() as f64;
    let (mx, my) = (xs.iter().sum::<f64>() / k, ys.iter().sum::<f64>() / k);
    let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
    let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| (x - mx) * (y - my)).sum();
    let slope = sxy / sxx;
    let residual: f64 = xs
        .iter()
        .zip(&ys)
        .map(|(x, y)| (y - my - slope * (x - mx)).powi(2))
        .sum();
    let slope_se = (residual / (k - 2.0).max(1.0) / sxx).sqrt();
    let n1 = plan.estimate.upstream_number_density;
    // a hole is a point source far away (n ∝ z⁻²), a slit a line source (n ∝ z⁻¹)
    let p = match plan.geometry.symmetry {
        crate::geometry::Symmetry::Axisymmetric => 2,
        crate::geometry::Symmetry::Planar => 1,
    };
    let log_c = cells
        .iter()
        .map(|&i| (axis.number_density[i] * ((axis.z[i] - t) / a).powi(p) / n1).ln())
        .sum::<f64>()
        / k;
    let samples: f64 = cells.iter().map(|&i| axis.samples[i]).sum();
    let light_species = lightest_species(plan).map(|s| {
        let x: f64 = cells
            .iter()
            .map(|&i| axis.samples[i] * axis.mole_fraction[s][i])
            .sum::<f64>()
            / samples;
        let c = &case.gas.components[s];
        Enrichment {
            species: c.species.name.clone(),
            upstream_mole_fraction: c.mole_fraction,
            axis_mole_fraction: x,
            enrichment: x / c.mole_fraction,
        }
    });
    Some(FarField {
        from_m: axis.z[cells[0]] - t,
        to_m: axis.z[*cells.last().unwrap()] - t,
        cells: cells.len(),
        exponent: -slope,
        exponent_ci95: 1.96 * slope_se,
        inverse_square_coefficient: log_c.exp(),
        light_species,
        samples,
    })
}

/// Index of the lightest species of a mixture; `None` for a pure gas.
pub fn lightest_species(plan: &Plan) -> Option<usize> {
    let comps = &plan.case.gas.components;
    if comps.len() < 2 {
        return None;
    }
    (0..comps.len()).min_by(|&i, &j| comps[i].species.mass.total_cmp(&comps[j].species.mass))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cosine_law_bins_sum_to_one_and_centreline_matches() {
        for m in [AngularMeasure::SolidAngle, AngularMeasure::PlaneAngle] {
            let total: f64 = (0..POLAR_BINS)
                .map(|k| {
                    let (lo, hi) = bin_edges(k);
                    m.cosine_law_fraction(lo, hi)
                })
                .sum();
            assert!((total - 1.0).abs() < 1e-12, "{m:?}");
            // A source that follows the cosine law exactly gives ratio 1 and peaking factor 1
            // (up to the cos θ variation across the first bin, below 0.2 %).
            let counts: Vec<f64> = (0..POLAR_BINS)
                .map(|k| {
                    let (lo, hi) = bin_edges(k);
                    1e6 * m.cosine_law_fraction(lo, hi)
                })
                .collect();
            let sq: Vec<f64> = counts.clone();
            let a = angular(m, &counts, &sq, 2.0, 0.5);
            assert!(a.over_cosine_law.iter().all(|r| (r - 1.0).abs() < 1e-12));
            assert!((a.molecules_per_s - 4e6).abs() < 1e-3);
            assert!(
                (a.peaking_factor - 1.0).abs() < 2e-3,
                "{}",
                a.peaking_factor
            );
            // unit weights: Poisson, 1.96/sqrt(count)
            let k0 = counts[0];
            assert!((a.peaking_factor_ci95 / a.peaking_factor - 1.96 / k0.sqrt()).abs() < 1e-12);
        }
    }
}
