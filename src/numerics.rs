//! Numerics plan: turns a resolved [`Case`] into everything the step loop needs — domain,
//! radial weights, molecule weight F_N, time step, inflow elements, wall reflection per species,
//! start-up length — and records the choices so they can be printed and stored.
//!
//! Free-molecular mode (collisions off) defaults, in aperture radii a: upstream extent 1.5 a,
//! downstream extent 1.5 a beyond the partition, outer radius 2.5 a, radial weight ratio 2.
//! Without collisions the gas reaching the aperture from an equilibrium boundary is in
//! equilibrium whatever the extents (every boundary and wall at the gas temperature re-emits
//! the equilibrium flux), so a small domain is exact and cheap; the extents only limit how much
//! of the plume is resolved. The time step moves a molecule at the most probable upstream speed
//! by one aperture radius; flights are exact whatever the step, so the step only sets the
//! sampling granularity. Invariants: F_N > 0, dt > 0, every inflow expectation finite.

use crate::analytic::Estimate;
use crate::case::Case;
use crate::constants::BOLTZMANN;
use crate::error::{Error, Result};
use crate::geometry::Axisymmetric;
use crate::mover::WallReflection;
use crate::reservoir::{inflow_elements, InflowElement, ReservoirSide};
use crate::weights::RadialWeights;
use serde::Serialize;

/// Molecules per work chunk of the move stage (fixed: results must not depend on threads).
pub const CHUNK: usize = 4096;

/// Default simulated molecules in the initial fill, free-molecular mode.
pub const DEFAULT_MOLECULES_FREE_MOLECULAR: u64 = 100_000;

/// The numerical choices of a run, as stored in summary.json.
#[derive(Debug, Clone, Serialize)]
pub struct Choices {
    pub upstream_length_radii: f64,
    pub downstream_length_radii: f64,
    pub outer_radius_radii: f64,
    pub radial_weight_ratio: f64,
    pub radial_bands: usize,
    /// Real molecules per simulated molecule of weight 1.
    pub molecule_weight: f64,
    pub time_step_s: f64,
    pub target_molecules: u64,
    pub startup_steps: u64,
}

/// Everything the step loop needs.
#[derive(Debug, Clone)]
pub struct Plan {
    pub case: Case,
    pub geometry: Axisymmetric,
    pub weights: RadialWeights,
    /// Species masses, kg.
    pub masses: Vec<f64>,
    /// Wall reflection per species.
    pub wall: Vec<WallReflection>,
    pub inflow: Vec<InflowElement>,
    /// Upstream and downstream number density per species, 1/m³.
    pub upstream_density: Vec<f64>,
    pub downstream_density: Vec<f64>,
    /// Real molecules per simulated molecule of weight 1.
    pub fnum: f64,
    pub dt: f64,
    /// Axial position of the flow-rate measurement plane (the aperture exit), m.
    pub z_count: f64,
    /// Steps discarded as start-up before sampling.
    pub startup_steps: u64,
    pub estimate: Estimate,
    pub choices: Choices,
}

impl Plan {
    /// Derive the plan of `case`.
    pub fn new(case: &Case) -> Result<Plan> {
        if case.solver.collisions {
            return Err(Error::Input(format!(
                "{}: key `solver.collisions` = true: expected false in this version (collisions not built yet)",
                case.source
            )));
        }
        let a = case.aperture.radius();
        let t = case.aperture.thickness;
        let p1 = case.upstream.pressure;
        let t1 = case.upstream.temperature;
        let p2 = case.downstream.pressure;
        let t2 = case.downstream.temperature;
        let estimate = Estimate::new(&case.gas, p1, t1, p2, t2, a, t);

        let up_len = case.domain.upstream_length.unwrap_or(1.5);
        let down_len = case.domain.downstream_length.unwrap_or(1.5);
        let outer = case.domain.outer_radius.unwrap_or(2.5);
        let ratio = case.domain.radial_weight_ratio.unwrap_or(2.0);
        let bands = 16;
        let geometry = Axisymmetric::new(a, t, up_len * a, down_len * a, outer * a);
        let weights = RadialWeights::linear(geometry.r_max, bands, ratio);

        let masses: Vec<f64> = case.gas.components.iter().map(|c| c.species.mass).collect();
        let fractions: Vec<f64> = case
            .gas
            .components
            .iter()
            .map(|c| c.mole_fraction)
            .collect();
        let n1 = p1 / (BOLTZMANN * t1);
        let n2 = p2 / (BOLTZMANN * t2);
        let upstream_density: Vec<f64> = fractions.iter().map(|x| x * n1).collect();
        let downstream_density: Vec<f64> = fractions.iter().map(|x| x * n2).collect();

        // Expected simulated molecules per unit F_N in the initial fill.
        let mut weighted_count = 0.0;
        for j in 0..weights.bands {
            let (r_lo, r_hi) = weights.band_edges(j);
            let ring = std::f64::consts::PI * (r_hi * r_hi - r_lo * r_lo);
            let bore_ring =
                std::f64::consts::PI * (r_hi.min(a).powi(2) - r_lo.min(a).powi(2)).max(0.0);
            let real = n1 * ring * up_len * a + n1 * bore_ring * t + n2 * ring * down_len * a;
            weighted_count += real / weights.factor[j];
        }
        let target = case
            .solver
            .molecules
            .unwrap_or(DEFAULT_MOLECULES_FREE_MOLECULAR);
        let fnum = weighted_count / target as f64;

        let heavy_vmp = masses
            .iter()
            .map(|&m| (2.0 * BOLTZMANN * t1 / m).sqrt())
            .fold(f64::INFINITY, f64::min);
        let mean_vmp = case.gas.most_probable_speed(t1);
        let dt = case.solver.time_step.unwrap_or(a / mean_vmp);

        // Start-up: a few transits of the whole domain by the slowest species, plus the
        // diffusive residence time of a tube ((L/a)² transits of a radius).
        let span = geometry.z_max - geometry.z_min + geometry.r_max;
        let transit_steps = span / (heavy_vmp * dt);
        let tube_steps = (t / a).powi(2) * a / (heavy_vmp * dt);
        let startup_steps = (4.0 * transit_steps + 2.0 * tube_steps).ceil().max(50.0) as u64;

        let wall = masses
            .iter()
            .map(|&m| WallReflection {
                accommodation: case.walls.accommodation,
                sigma: crate::maxwell::sigma(case.walls.temperature, m),
            })
            .collect();
        let inflow = inflow_elements(
            &geometry,
            &weights,
            &masses,
            &ReservoirSide {
                species_density: upstream_density.clone(),
                temperature: t1,
            },
            &ReservoirSide {
                species_density: downstream_density.clone(),
                temperature: t2,
            },
            fnum,
            dt,
        );
        let choices = Choices {
            upstream_length_radii: up_len,
            downstream_length_radii: down_len,
            outer_radius_radii: outer,
            radial_weight_ratio: ratio,
            radial_bands: bands,
            molecule_weight: fnum,
            time_step_s: dt,
            target_molecules: target,
            startup_steps,
        };
        Ok(Plan {
            case: case.clone(),
            z_count: t,
            geometry,
            weights,
            masses,
            wall,
            inflow,
            upstream_density,
            downstream_density,
            fnum,
            dt,
            startup_steps,
            estimate,
            choices,
        })
    }
}
