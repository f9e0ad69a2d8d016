//! Numerics plan: turns a resolved [`Case`] into everything the step loop needs — domain, cell
//! grid, radial weights, molecule weight F_N, time step, inflow elements, wall reflection per
//! species, collision model, start-up length — and records the choices (with the quality
//! figures they imply) so they can be printed and stored.
//!
//! Free-molecular mode (collisions off), in aperture radii a: upstream extent 1.5 a, downstream
//! 1.5 a beyond the partition, outer radius 2.5 a, radial weight ratio 2, cells a/4. Without
//! collisions the gas reaching the aperture from an equilibrium boundary is in equilibrium
//! whatever the extents (every boundary and wall at the gas temperature re-emits the
//! equilibrium flux), so a small domain is exact and cheap; the extents only limit how much of
//! the plume is seen. The step moves a molecule at the most probable speed by one radius;
//! flights are exact whatever the step.
//!
//! DSMC mode (collisions on), common practice of the method (Bird 1994 §11.1, and the
//! orifice studies of Sharipov 2004 which used domains of several radii): extents 8 a upstream,
//! 8 a downstream and 8 a outer radius, where the flow disturbance of the hole has decayed to a
//! few per cent of its aperture value (it falls like (a/r)² in the sink-flow region); cell size
//! min(a/6, λ1/2) but not below a/40, with subcells so that the expected partner separation
//! (≈ 0.52 × subcell size) is at most 0.2 λ1 (at most 4 × 4); 15 simulated molecules per
//! upstream cell; radial weight ratio equal to the outer radius in radii (weight ≈ r/a far out,
//! so cells hold similar numbers of molecules); time step min(0.4 cell/v_mp, 0.2 τ1) with τ1 the
//! upstream mean collision time; start-up 5 transits of the domain. λ1 is the upstream mean
//! free path. Every choice can be overridden in the case file. Invariants: F_N > 0, dt > 0,
//! every inflow expectation finite.

use crate::analytic::Estimate;
use crate::case::Case;
use crate::collide::CollisionModel;
use crate::constants::BOLTZMANN;
use crate::error::{Error, Result};
use crate::geometry::{Domain, Symmetry};
use crate::grid::Grid;
use crate::mover::WallReflection;
use crate::reservoir::{inflow_elements, InflowElement, ReservoirSide};
use crate::weights::RadialWeights;
use serde::Serialize;

/// Molecules per work chunk of the free-molecular move, of its gap closing and of the
/// newcomers' sort keys (fixed: results must not depend on threads). The DSMC move uses the
/// smaller `simulation::DSMC_MOVE_UNIT`.
pub const CHUNK: usize = 2048;

/// Default simulated molecules in the initial fill, free-molecular mode.
pub const DEFAULT_MOLECULES_FREE_MOLECULAR: u64 = 100_000;

/// Default simulated molecules per upstream cell, DSMC mode (common practice: 10 to 20).
pub const DEFAULT_MOLECULES_PER_CELL: u64 = 15;

/// Common-practice limits of the quality report.
pub mod limits {
    /// Cell size over the local mean free path.
    pub const CELL_OVER_LAMBDA: f64 = 1.0;
    /// Mean collision separation over the local mean free path.
    pub const SEPARATION_OVER_LAMBDA: f64 = 0.3;
    /// Time step over the local mean collision time.
    pub const DT_OVER_TAU: f64 = 0.5;
    /// Fewest simulated molecules per cell.
    pub const MOLECULES_PER_CELL: f64 = 8.0;
}

/// The numerical choices of a run, as stored in summary.json.
#[derive(Debug, Clone, Serialize)]
pub struct Choices {
    pub upstream_length_radii: f64,
    pub downstream_length_radii: f64,
    pub outer_radius_radii: f64,
    pub radial_weight_ratio: f64,
    pub radial_bands: usize,
    pub axial_cells: usize,
    pub cell_size_radii: f64,
    pub subcells_per_direction: usize,
    /// Real molecules per simulated molecule of weight 1.
    pub molecule_weight: f64,
    pub time_step_s: f64,
    pub target_molecules: u64,
    pub startup_steps: u64,
    /// Planned quality figures at upstream conditions (λ1, τ1 upstream).
    pub cell_over_upstream_mean_free_path: f64,
    pub expected_separation_over_upstream_mean_free_path: f64,
    pub time_step_over_upstream_collision_time: f64,
}

/// Everything the step loop needs.
#[derive(Debug, Clone)]
pub struct Plan {
    pub case: Case,
    pub geometry: Domain,
    pub grid: Grid,
    pub weights: RadialWeights,
    /// Species masses, kg.
    pub masses: Vec<f64>,
    /// Rotational degrees of freedom per species.
    pub rot_dof: Vec<u32>,
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
    /// Collision model (None in free-molecular mode).
    pub collisions: Option<CollisionModel>,
    /// Starting (σ c_r)_max per species pair.
    pub initial_sigma_cr_max: Vec<f64>,
    pub estimate: Estimate,
    pub choices: Choices,
}

impl Plan {
    /// Derive the plan of `case`.
    pub fn new(case: &Case) -> Result<Plan> {
        let a = case.aperture.radius();
        let t = case.aperture.thickness;
        let p1 = case.upstream.pressure;
        let t1 = case.upstream.temperature;
        let p2 = case.downstream.pressure;
        let t2 = case.downstream.temperature;
        let estimate = Estimate::for_aperture(&case.gas, p1, t1, p2, t2, &case.aperture);
        let dsmc = case.solver.collisions;
        let lambda1 = estimate.upstream_mean_free_path;
        let mean_vmp = case.gas.most_probable_speed(t1);
        let mean_speed = 2.0 / std::f64::consts::PI.sqrt() * mean_vmp;
        let tau1 = lambda1 / mean_speed;

        let d = &case.domain;
        let (up_len, down_len, outer) = if dsmc {
            (
                d.upstream_length.unwrap_or(8.0),
                d.downstream_length.unwrap_or(8.0),
                d.outer_radius.unwrap_or(8.0),
            )
        } else {
            (
                d.upstream_length.unwrap_or(1.5),
                d.downstream_length.unwrap_or(1.5),
                d.outer_radius.unwrap_or(2.5),
            )
        };
        if outer <= 1.0 {
            return Err(Error::Input(format!(
                "{}: key `domain.outer_radius` = {outer}: expected more than 1 aperture radius",
                case.source
            )));
        }
        // Radial weighting evens out the molecules of an axisymmetric grid, whose cell volumes
        // grow with r; a planar grid's do not, so a slit needs none.
        let planar = case.aperture.symmetry() == Symmetry::Planar;
        let ratio = d.radial_weight_ratio.unwrap_or(if planar {
            1.0
        } else if dsmc {
            outer
        } else {
            2.0
        });
        let cell = match d.cell_size {
            Some(c) => c * a,
            None if dsmc => (a / 6.0).min(0.5 * lambda1).max(a / 40.0),
            None => a / 4.0,
        };
        let sub = match d.subcells {
            Some(s) => s as usize,
            None if dsmc => ((0.52 * cell / (0.2 * lambda1)).ceil() as usize).clamp(1, 4),
            None => 1,
        };
        let symmetry = case.aperture.symmetry();
        let geometry = Domain::new(symmetry, a, t, up_len * a, down_len * a, outer * a);
        let grid = Grid::new(
            symmetry,
            a,
            t,
            geometry.z_min,
            geometry.z_max,
            geometry.r_max,
            cell,
            sub,
        );
        let weights = RadialWeights::linear(&grid.r, ratio);

        let masses: Vec<f64> = case.gas.components.iter().map(|c| c.species.mass).collect();
        let rot_dof: Vec<u32> = case
            .gas
            .components
            .iter()
            .map(|c| c.species.rot_dof)
            .collect();
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

        // Simulated molecules per unit F_N in the initial fill, and in the upstream cells alone.
        let rows = grid.r.len();
        let mut weighted_count = 0.0;
        let mut upstream_weighted = 0.0;
        let mut upstream_cells = 0usize;
        for iz in 0..grid.z.len() {
            let zc = grid.z.center(iz);
            let n = if zc < t { n1 } else { n2 };
            for ir in 0..rows {
                let v = grid.volume[iz * rows + ir];
                if v > 0.0 {
                    weighted_count += n * v / weights.factor[ir];
                    if zc < 0.0 {
                        upstream_weighted += n1 * v / weights.factor[ir];
                        upstream_cells += 1;
                    }
                }
            }
        }
        let (fnum, target) = match (case.solver.molecules, case.solver.molecules_per_cell) {
            (Some(m), _) => (weighted_count / m as f64, m),
            (None, per_cell) if dsmc => {
                let ppc = per_cell.unwrap_or(DEFAULT_MOLECULES_PER_CELL) as f64;
                let f = upstream_weighted / (ppc * upstream_cells.max(1) as f64);
                (f, (weighted_count / f).round() as u64)
            }
            (None, _) => (
                weighted_count / DEFAULT_MOLECULES_FREE_MOLECULAR as f64,
                DEFAULT_MOLECULES_FREE_MOLECULAR,
            ),
        };

        let heavy_vmp = masses
            .iter()
            .map(|&m| (2.0 * BOLTZMANN * t1 / m).sqrt())
            .fold(f64::INFINITY, f64::min);
        let dt = case.solver.time_step.unwrap_or(if dsmc {
            (0.4 * cell / mean_vmp).min(0.2 * tau1)
        } else {
            a / mean_vmp
        });

        // Start-up: transits of the whole domain by the slowest species, plus the diffusive
        // residence time of a tube ((L/a)² transits of a radius).
        let span = geometry.z_max - geometry.z_min + geometry.r_max;
        let transit_steps = span / (heavy_vmp * dt);
        let tube_steps = (t / a).powi(2) * a / (heavy_vmp * dt);
        let transits = if dsmc { 5.0 } else { 4.0 };
        let startup_steps = (transits * transit_steps + 2.0 * tube_steps)
            .ceil()
            .max(50.0) as u64;

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
        let collisions =
            dsmc.then(|| CollisionModel::new(&case.gas, case.solver.rotational_relaxation));
        let t_hot = t1.max(t2).max(case.walls.temperature);
        let ns = masses.len();
        let initial_sigma_cr_max = match &collisions {
            Some(m) => (0..ns * ns)
                .map(|k| m.initial_sigma_cr_max(k / ns, k % ns, t_hot))
                .collect(),
            None => Vec::new(),
        };
        let choices = Choices {
            upstream_length_radii: up_len,
            downstream_length_radii: down_len,
            outer_radius_radii: outer,
            radial_weight_ratio: ratio,
            radial_bands: weights.bands,
            axial_cells: grid.z.len(),
            cell_size_radii: cell / a,
            subcells_per_direction: grid.sub,
            molecule_weight: fnum,
            time_step_s: dt,
            target_molecules: target,
            startup_steps,
            cell_over_upstream_mean_free_path: cell / lambda1,
            expected_separation_over_upstream_mean_free_path: 0.52 * cell
                / grid.sub as f64
                / lambda1,
            time_step_over_upstream_collision_time: dt / tau1,
        };
        Ok(Plan {
            case: case.clone(),
            z_count: t,
            geometry,
            grid,
            weights,
            masses,
            rot_dof,
            wall,
            inflow,
            upstream_density,
            downstream_density,
            fnum,
            dt,
            startup_steps,
            collisions,
            initial_sigma_cr_max,
            estimate,
            choices,
        })
    }

    /// Warnings of the planned numerics against common-practice limits (DSMC mode only).
    pub fn warnings(&self) -> Vec<String> {
        let mut w = Vec::new();
        if self.collisions.is_none() {
            if self.estimate.knudsen_number < 10.0 {
                w.push(format!(
                    "collisions are off but Kn = {:.3} (< 10): the result is the free-molecular limit, not the physical flow; set solver.collisions = true",
                    self.estimate.knudsen_number
                ));
            }
            return w;
        }
        let c = &self.choices;
        if c.cell_over_upstream_mean_free_path > limits::CELL_OVER_LAMBDA {
            w.push(format!(
                "cell size is {:.2} upstream mean free paths (common practice: below {})",
                c.cell_over_upstream_mean_free_path,
                limits::CELL_OVER_LAMBDA
            ));
        }
        if c.expected_separation_over_upstream_mean_free_path > limits::SEPARATION_OVER_LAMBDA {
            w.push(format!(
                "expected collision separation is {:.2} upstream mean free paths (common practice: below {})",
                c.expected_separation_over_upstream_mean_free_path,
                limits::SEPARATION_OVER_LAMBDA
            ));
        }
        if c.time_step_over_upstream_collision_time > limits::DT_OVER_TAU {
            w.push(format!(
                "time step is {:.2} upstream mean collision times (common practice: below {})",
                c.time_step_over_upstream_collision_time,
                limits::DT_OVER_TAU
            ));
        }
        w
    }
}
