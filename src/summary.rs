//! The result of a run as stored in `summary.json`: flow rates in SI and the trade's units
//! with their 95 % intervals, the analytic references beside them, the regime, the numerics
//! used and run statistics.
//!
//! Key names are a contract (other tools and the tests read them): `flow.mass_flow_rate_kg_s`,
//! `flow.mass_flow_rate_ci95_kg_s`, `flow.reduced_flow_rate`, `flow.reduced_flow_rate_ci95`,
//! `flow.species[]`, `flow.throughput_pa_m3_s`, `flow.throughput_sccm`, `flow.conductance_l_s`,
//! `regime.rarefaction_parameter`, `regime.knudsen_number`, `run.steps`, `run.wall_time_s`,
//! `run.particle_steps_per_s`, `plume.*` (angular distribution of the molecules leaving the
//! aperture, centreline intensity, peaking factor, with the free-molecular theory beside them)
//! and `beam.*` (downstream axis density, its far-field fit, axis composition of mixtures). Add
//! keys freely; never rename or remove one.

use crate::analytic::Estimate;
use crate::constants::AVOGADRO;
use crate::flux::FluxHistory;
use crate::monitor::{pooled_batch_means, StopReason};
use crate::numerics::Choices;
use crate::simulation::{Balance, RunOutcome, Simulation};
use crate::units::TradeFlow;
use serde::Serialize;

/// Caution printed with every result and stored in summary.json.
pub const CAUTION: &str = "Design estimate only. Pressurised, toxic, flammable or asphyxiant gases, vacuum vessels and flow-limiting orifices in safety systems are governed by local codes and licensed engineering practice; a simulated flow rate is not a certification.";

/// Flow of one species.
#[derive(Debug, Clone, Serialize)]
pub struct SpeciesFlow {
    pub name: String,
    pub mole_fraction: f64,
    pub mass_flow_rate_kg_s: f64,
    pub mass_flow_rate_ci95_kg_s: f64,
    pub molar_flow_rate_mol_s: f64,
    pub molar_flow_rate_ci95_mol_s: f64,
    pub molecule_flow_rate_per_s: f64,
    /// This species' flow over its own free-molecular (effusion) flow into vacuum.
    pub reduced_flow_rate: f64,
}

/// Flow through the aperture.
#[derive(Debug, Clone, Serialize)]
pub struct FlowSummary {
    /// What the flows are of: "whole aperture", or "per metre of slit length" (a slit's flows,
    /// throughputs and conductance are per metre, e.g. kg/(s·m) under the `_kg_s` keys).
    pub basis: &'static str,
    pub mass_flow_rate_kg_s: f64,
    pub mass_flow_rate_ci95_kg_s: f64,
    /// W = Ṁ / Ṁ_fm with Ṁ_fm the free-molecular flow into vacuum.
    pub reduced_flow_rate: f64,
    pub reduced_flow_rate_ci95: f64,
    pub molar_flow_rate_mol_s: f64,
    pub throughput_pa_m3_s: f64,
    pub throughput_mbar_l_s: f64,
    pub throughput_torr_l_s: f64,
    pub throughput_sccm: f64,
    pub throughput_slm: f64,
    /// Temperature at which the p·V throughput is stated (upstream), K.
    pub throughput_reference_temperature_k: f64,
    /// Standard conditions of sccm/slm.
    pub standard_conditions: &'static str,
    /// Q / (p1 − p2), L/s.
    pub conductance_l_s: f64,
    pub species: Vec<SpeciesFlow>,
}

/// Regime figures (analytic layer).
#[derive(Debug, Clone, Serialize)]
pub struct RegimeSummary {
    pub rarefaction_parameter: f64,
    pub knudsen_number: f64,
    pub upstream_mean_free_path_m: f64,
    pub label: &'static str,
}

/// Analytic references shown beside the result.
#[derive(Debug, Clone, Serialize)]
pub struct References {
    /// Ṁ_fm = π a² Σ x_i p1 sqrt(m_i/(2πkT1)) (Knudsen effusion), kg/s.
    pub free_molecular_mass_flow_kg_s: f64,
    /// Free-molecular net flow with the Clausing factor and back-flow, kg/s.
    pub free_molecular_net_mass_flow_kg_s: f64,
    pub clausing_factor: f64,
    /// Ideal isentropic nozzle (discharge coefficient 1), kg/s.
    pub isentropic_mass_flow_kg_s: f64,
    pub isentropic_reduced_flow: f64,
}

/// Run statistics.
#[derive(Debug, Clone, Serialize)]
pub struct RunSummary {
    pub steps: u64,
    pub startup_steps: u64,
    /// First step of the flow-rate statistics: the planned start-up or the MSER-5 truncation
    /// point (White 1997), whichever is later.
    pub steady_state_step: u64,
    pub sampling_steps: u64,
    /// Wall time of this invocation, s.
    pub wall_time_s: f64,
    /// Wall time of every invocation of the run (a resumed run adds its earlier ones), s; for
    /// merged replicas, the sum over the replicas.
    pub total_wall_time_s: f64,
    pub particle_steps: u64,
    /// Particle-steps over the total wall time (every invocation, all threads).
    pub particle_steps_per_s: f64,
    pub threads: usize,
    pub stop_reason: StopReason,
    pub stop_reason_text: &'static str,
    pub molecules_at_end: u64,
    pub aperture_crossing_events: u64,
    pub batch_length_steps: usize,
    pub balance: Balance,
    pub seed: u64,
    /// "K/N" when this run is statistical replica K of N (`kinflux run --replica`).
    pub replica: Option<String>,
    /// Number of replicas pooled into this result (`kinflux merge`); absent for a single run.
    pub replicas_merged: Option<usize>,
    /// Wall time per stage of the step, s.
    pub stage_times: crate::simulation::StageTimes,
}

/// Quality figures that decide whether a DSMC result can be trusted: the planned values at
/// upstream conditions and the values measured over the sampling steps (domain averages).
/// Limits are common practice (see `numerics::limits`).
#[derive(Debug, Clone, Serialize)]
pub struct QualityReport {
    pub planned_cell_over_mean_free_path: f64,
    pub planned_separation_over_mean_free_path: f64,
    pub planned_time_step_over_collision_time: f64,
    /// Measured mean distance between collision partners over the upstream mean free path.
    pub measured_separation_over_upstream_mean_free_path: Option<f64>,
    /// Measured collisions per molecule per step (= Δt / mean collision time, domain average).
    pub measured_time_step_over_collision_time: Option<f64>,
    /// Mean simulated molecules per gas cell over the sampling steps (whole domain, including
    /// the nearly empty cells of a plume into vacuum).
    pub mean_molecules_per_cell: f64,
    /// Mean simulated molecules per upstream cell over the sampling steps (what the numerics
    /// plan targets; the common-practice limit applies to it).
    pub mean_molecules_per_upstream_cell: f64,
    /// Over the sampled gas cells (from the sampled fields; DSMC mode): the largest cell size
    /// over the local mean free path, the largest time step over the local mean collision time
    /// λ/c̄, and the fewest and most simulated molecules per cell.
    pub local: Option<LocalQuality>,
    pub warnings: Vec<String>,
}

/// Radial profile of the mass flux through the aperture (measurement plane).
#[derive(Debug, Clone, Serialize)]
pub struct ApertureProfile {
    /// Bin centres in r/a.
    pub r_over_a: Vec<f64>,
    /// Net mass flux per unit area in each annulus, kg/(m² s).
    pub mass_flux_kg_m2_s: Vec<f64>,
    /// The same over the mean flux Ṁ/(π a²).
    pub relative_to_mean: Vec<f64>,
}

/// Angular distribution of the molecules leaving the aperture downstream (crossings of the exit
/// plane in the +z direction over the sampling steps; see `beam`).
#[derive(Debug, Clone, Serialize)]
pub struct AngularDistribution {
    /// Polar-angle bin centres from the axis, degrees (bins of 5°).
    pub theta_deg: Vec<f64>,
    /// Fraction of the downstream-leaving molecules in each bin over the cosine-law fraction
    /// sin²θ_hi − sin²θ_lo (1 everywhere for Knudsen's cosine law of effusion): the intensity
    /// over that of an ideal thin orifice of the same throughput.
    pub flux_per_solid_angle_over_cosine_law: Vec<f64>,
    /// Molecules (real) leaving downstream per second, the normalisation.
    pub molecules_per_s: f64,
    /// 95 % half-width of each bin's ratio (Poisson statistics of the weighted crossings; with
    /// collisions a lower bound). Measured free-molecular, over 14 seeds each of a thin orifice
    /// and an L/R = 2 tube, the deviations scatter 1.0 to 1.2 times the stated standard error:
    /// the clones of the radial weighting cross in the same direction as their originals.
    pub flux_per_solid_angle_over_cosine_law_ci95: Vec<f64>,
    /// Half-angle of the cone about the axis over which the centreline intensity is averaged
    /// (the first bin), degrees.
    pub centreline_cone_deg: f64,
    /// Centreline intensity: molecules per second per steradian, mean over the cone.
    pub centreline_intensity_per_s_sr: f64,
    pub centreline_intensity_ci95_per_s_sr: f64,
    /// Centreline intensity over Ṅ/π, the value of an ideal thin orifice of the same throughput
    /// (the first bin's ratio to the cosine law, weighted per solid angle).
    pub peaking_factor: f64,
    pub peaking_factor_ci95: f64,
    /// Free-molecular reference (diffuse walls, vacuum downstream): Clausing's angular
    /// distribution of a tube of the aperture's thickness/radius averaged over each bin
    /// (`analytic::TubeBeam`; 1 everywhere for a thin orifice). Its first bin is the reference
    /// of `peaking_factor`.
    pub free_molecular_over_cosine_law: Vec<f64>,
    /// Free-molecular centreline peaking factor exactly on the axis, 1/W (W the Clausing
    /// factor); larger than the first bin's mean for a tube, whose intensity falls off within
    /// the cone.
    pub free_molecular_peaking_factor: f64,
    /// Unit of the intensities: "per steradian" (hole), or "per radian of the in-plane angle and
    /// per metre of slit length" (slit).
    pub intensity_measure: &'static str,
}

/// The beam downstream of the aperture, from the sampled fields: number density along the
/// axis (first radial row of cells), its far-field decay and, for mixtures, the composition on
/// the axis. Arrays are empty and the fit `None` when no field was sampled.
#[derive(Debug, Clone, Serialize)]
pub struct BeamSummary {
    /// Distance of each downstream axis cell centre beyond the exit plane (z − thickness), m.
    pub axis_distance_from_exit_plane_m: Vec<f64>,
    /// Number density in those cells, 1/m³ (null where nothing was sampled).
    pub axis_number_density_per_m3: Vec<f64>,
    /// The same over the upstream reservoir's p1/(k T1).
    pub axis_number_density_over_upstream: Vec<f64>,
    /// Lightest species of a mixture (`None` for a pure gas) and its mole fraction in those
    /// cells.
    pub light_species: Option<String>,
    pub axis_light_mole_fraction: Option<Vec<f64>>,
    /// Lightest species' share of the molecule flow through the aperture over its upstream
    /// mole fraction (the enrichment of the beam's flux; Graham's law in free-molecular flow).
    pub aperture_light_enrichment: Option<f64>,
    /// Far-field window and fit; `None` when the domain ends before the window holds enough
    /// cells (it starts `beam::FAR_FIELD_START_DIAMETERS` = 2 diameters beyond the exit plane).
    pub far_field: Option<FarFieldSummary>,
}

/// Far-field fit of the axis density (see `beam::far_field`).
#[derive(Debug, Clone, Serialize)]
pub struct FarFieldSummary {
    /// Window: first and last cell centre beyond the exit plane, m, and the number of cells.
    pub from_exit_plane_m: f64,
    pub to_exit_plane_m: f64,
    pub cells: usize,
    /// p in n ∝ (z − thickness)^(−p), least squares in log–log (2 for a point source).
    pub density_decay_exponent: f64,
    /// Approximate 95 % half-width of p from the fit residuals.
    pub density_decay_exponent_ci95: f64,
    /// C in n = C n1 (a/(z − thickness))², fitted in the window (1/4 far from a thin orifice in
    /// free-molecular flow); for a slit C in n = C n1 a/(z − thickness) (1/π far from a thin
    /// slit).
    pub inverse_square_coefficient: f64,
    /// Simulated molecules sampled in the window (all steps).
    pub samples: f64,
    /// Mole fraction of the lightest species in the window (sample-weighted), its upstream value
    /// and their ratio, the axis enrichment (1 in free-molecular flow: each species' density is
    /// its upstream density times the same solid-angle fraction); `None` for a pure gas.
    pub light_mole_fraction: Option<f64>,
    pub upstream_light_mole_fraction: Option<f64>,
    pub light_enrichment: Option<f64>,
}

/// Extremes of the quality figures over the domain.
#[derive(Debug, Clone, Serialize)]
pub struct LocalQuality {
    pub cell_over_mean_free_path_max: f64,
    pub cell_over_mean_free_path_min: f64,
    pub time_step_over_collision_time_max: f64,
    pub molecules_per_cell_min: f64,
    pub molecules_per_cell_max: f64,
    /// Cells whose size exceeds the local mean free path (common-practice limit).
    pub cells_larger_than_mean_free_path: usize,
    pub cells_sampled: usize,
}

/// Everything written to summary.json.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    pub kinflux_version: &'static str,
    pub title: String,
    pub case_file: String,
    pub gas: String,
    pub mode: &'static str,
    pub flow: FlowSummary,
    pub regime: RegimeSummary,
    pub reference: References,
    pub numerics: Choices,
    pub quality: QualityReport,
    pub aperture: ApertureProfile,
    pub plume: AngularDistribution,
    pub beam: BeamSummary,
    pub run: RunSummary,
    pub caution: &'static str,
}

/// Pooled estimate of the per-step series of several histories (each from its steady-state
/// step), per second; a plain mean with an unknown (infinite) interval when there are too few
/// steps for batches. Returns (mean, 95 % half-width, batch length).
fn rate(
    parts: &[(&FluxHistory, usize)],
    dt: f64,
    pick: impl Fn(&FluxHistory) -> &[f64],
) -> (f64, f64, usize) {
    let series: Vec<&[f64]> = parts.iter().map(|(f, s)| &pick(f)[*s..]).collect();
    match pooled_batch_means(&series) {
        Some(e) => (e.mean / dt, e.half_width / dt, e.batch_len),
        None => {
            let n: usize = series.iter().map(|s| s.len()).sum();
            let sum: f64 = series.iter().map(|s| s.iter().sum::<f64>()).sum();
            let mean = if n == 0 { 0.0 } else { sum / n as f64 / dt };
            (mean, f64::INFINITY, 0)
        }
    }
}

impl Summary {
    /// Build the summary of a finished (or interrupted) simulation.
    pub fn new(sim: &Simulation, outcome: &RunOutcome, threads: usize) -> Summary {
        Summary::pooled(
            sim,
            &[(&sim.flux, sim.steady_state_step())],
            outcome,
            threads,
        )
    }

    /// Build a summary whose flow rates pool the steady parts of several flow histories
    /// (`(history, steady-state step)`, one per statistical replica of the case); everything
    /// else (fields, profiles, counters) comes from `sim`, which holds the summed samples.
    pub fn pooled(
        sim: &Simulation,
        parts: &[(&FluxHistory, usize)],
        outcome: &RunOutcome,
        threads: usize,
    ) -> Summary {
        let plan = &sim.plan;
        let case = &plan.case;
        let est: &Estimate = &plan.estimate;
        let dt = plan.dt;
        let start = parts[0].1;
        let sampled: usize = parts.iter().map(|(f, s)| f.steps() - s).sum();
        let (mdot, mdot_ci, batch_len) = rate(parts, dt, |f| &f.mass_per_step);
        let fm = est.free_molecular_mass_flow;
        let mut molecules_total = 0.0;
        let species: Vec<SpeciesFlow> = case
            .gas
            .components
            .iter()
            .enumerate()
            .map(|(s, c)| {
                let (n, n_ci, _) = rate(parts, dt, |f| &f.molecules_per_step[s]);
                molecules_total += n;
                let fm_s = crate::analytic::effusion_molecule_flow(
                    &case.gas,
                    case.upstream.pressure,
                    case.upstream.temperature,
                    case.aperture.area(),
                )[s];
                SpeciesFlow {
                    name: c.species.name.clone(),
                    mole_fraction: c.mole_fraction,
                    mass_flow_rate_kg_s: n * c.species.mass,
                    mass_flow_rate_ci95_kg_s: n_ci * c.species.mass,
                    molar_flow_rate_mol_s: n / AVOGADRO,
                    molar_flow_rate_ci95_mol_s: n_ci / AVOGADRO,
                    molecule_flow_rate_per_s: n,
                    reduced_flow_rate: n / fm_s,
                }
            })
            .collect();
        let t_ref = case.upstream.temperature;
        let trade = TradeFlow::from_molecules(molecules_total, t_ref);
        let dp = case.upstream.pressure - case.downstream.pressure;
        let conductance = if dp > 0.0 {
            trade.throughput_pa_m3_s / dp * 1e3
        } else {
            f64::NAN
        };
        let wall = outcome.wall_time.as_secs_f64();
        // a resumed run's earlier invocations count (the simulation keeps their sum; a merge
        // sets it to the sum over the replicas)
        let total_wall = if sim.wall_time_s > 0.0 {
            sim.wall_time_s
        } else {
            wall
        };
        let quality = quality_report(sim, sampled as u64);
        let (aperture, plume) = profiles(sim, mdot);
        let beam = beam_summary(sim, &species);
        Summary {
            kinflux_version: env!("CARGO_PKG_VERSION"),
            title: case.title.clone(),
            case_file: case.source.clone(),
            gas: case.gas.label(),
            mode: if case.solver.collisions {
                "dsmc"
            } else {
                "free_molecular"
            },
            flow: FlowSummary {
                mass_flow_rate_kg_s: mdot,
                mass_flow_rate_ci95_kg_s: mdot_ci,
                reduced_flow_rate: mdot / fm,
                reduced_flow_rate_ci95: mdot_ci / fm,
                molar_flow_rate_mol_s: molecules_total / AVOGADRO,
                throughput_pa_m3_s: trade.throughput_pa_m3_s,
                throughput_mbar_l_s: trade.throughput_mbar_l_s,
                throughput_torr_l_s: trade.throughput_torr_l_s,
                throughput_sccm: trade.sccm,
                throughput_slm: trade.slm,
                throughput_reference_temperature_k: t_ref,
                standard_conditions: "sccm and slm at 0 °C (273.15 K) and 101325 Pa",
                basis: if case.aperture.per_unit_length() {
                    "per metre of slit length"
                } else {
                    "whole aperture"
                },
                conductance_l_s: conductance,
                species,
            },
            regime: RegimeSummary {
                rarefaction_parameter: est.rarefaction_parameter,
                knudsen_number: est.knudsen_number,
                upstream_mean_free_path_m: est.upstream_mean_free_path,
                label: est.regime.label(),
            },
            reference: References {
                free_molecular_mass_flow_kg_s: fm,
                free_molecular_net_mass_flow_kg_s: est.free_molecular_net_mass_flow,
                clausing_factor: est.clausing_factor,
                isentropic_mass_flow_kg_s: est.isentropic_mass_flow,
                isentropic_reduced_flow: est.isentropic_reduced_flow,
            },
            numerics: plan.choices.clone(),
            quality,
            aperture,
            plume,
            beam,
            run: RunSummary {
                steps: sim.step,
                startup_steps: plan.startup_steps,
                steady_state_step: start as u64,
                sampling_steps: sampled as u64,
                wall_time_s: wall,
                total_wall_time_s: total_wall,
                particle_steps: sim.particle_steps,
                particle_steps_per_s: if total_wall > 0.0 {
                    sim.particle_steps as f64 / total_wall
                } else {
                    0.0
                },
                threads,
                stop_reason: outcome.stop,
                stop_reason_text: outcome.stop.describe(),
                molecules_at_end: sim.population(),
                aperture_crossing_events: parts
                    .iter()
                    .map(|(f, s)| f.events_per_step[*s..].iter().sum::<u64>())
                    .sum(),
                batch_length_steps: batch_len,
                balance: sim.balance,
                seed: case.solver.seed,
                replica: (case.solver.replica.count > 1).then(|| case.solver.replica.label()),
                replicas_merged: (parts.len() > 1).then_some(parts.len()),
                stage_times: sim.times,
            },
            caution: CAUTION,
        }
    }
}

/// Measured quality figures of a simulation (see [`QualityReport`]).
pub fn quality_report(sim: &Simulation, sampling_steps: u64) -> QualityReport {
    let plan = &sim.plan;
    let c = &plan.choices;
    let st = &sim.collision_stats;
    let lambda1 = plan.estimate.upstream_mean_free_path;
    let gas_cells = plan.grid.volume.iter().filter(|&&v| v > 0.0).count() as f64;
    let (sep, dt_tau) =
        if plan.collisions.is_some() && st.collisions > 0 && sim.sampled_cell_molecules > 0 {
            (
                Some(st.separation_sum / st.collisions as f64 / lambda1),
                Some(2.0 * st.collisions as f64 / sim.sampled_cell_molecules as f64),
            )
        } else {
            (None, None)
        };
    let mean_ppc = if sampling_steps > 0 && plan.collisions.is_some() {
        sim.sampled_cell_molecules as f64 / sampling_steps as f64 / gas_cells
    } else {
        sim.population() as f64 / gas_cells
    };
    let up_cells = (plan.grid.upstream_columns() * plan.grid.r.len()) as f64;
    let mean_up = if sampling_steps > 0 && plan.collisions.is_some() {
        sim.sampled_upstream_molecules as f64 / sampling_steps as f64 / up_cells
    } else {
        f64::NAN
    };
    let local = (plan.collisions.is_some() && sim.fields.steps > 0).then(|| local_quality(sim));
    let mut warnings = plan.warnings();
    if let Some(l) = &local {
        if l.cell_over_mean_free_path_max > limits::CELL_OVER_LAMBDA {
            warnings.push(format!(
                "{} of {} cells are larger than the local mean free path (largest {:.2} λ; common practice: below {})",
                l.cells_larger_than_mean_free_path, l.cells_sampled, l.cell_over_mean_free_path_max, limits::CELL_OVER_LAMBDA
            ));
        }
        if l.time_step_over_collision_time_max > limits::DT_OVER_TAU {
            warnings.push(format!(
                "the time step reaches {:.2} local mean collision times (common practice: below {})",
                l.time_step_over_collision_time_max,
                limits::DT_OVER_TAU
            ));
        }
    }
    use crate::numerics::limits;
    if let Some(s) = sep {
        if s > limits::SEPARATION_OVER_LAMBDA {
            warnings.push(format!(
                "measured collision separation is {s:.2} upstream mean free paths (common practice: below {})",
                limits::SEPARATION_OVER_LAMBDA
            ));
        }
    }
    if plan.collisions.is_some() && mean_up < limits::MOLECULES_PER_CELL {
        warnings.push(format!(
            "mean of {mean_up:.1} simulated molecules per upstream cell (common practice: at least {})",
            limits::MOLECULES_PER_CELL
        ));
    }
    QualityReport {
        planned_cell_over_mean_free_path: c.cell_over_upstream_mean_free_path,
        planned_separation_over_mean_free_path: c.expected_separation_over_upstream_mean_free_path,
        planned_time_step_over_collision_time: c.time_step_over_upstream_collision_time,
        measured_separation_over_upstream_mean_free_path: sep,
        measured_time_step_over_collision_time: dt_tau,
        mean_molecules_per_cell: mean_ppc,
        mean_molecules_per_upstream_cell: mean_up,
        local,
        warnings,
    }
}

/// Aperture radial profile and angular distribution from the sampled crossings.
fn profiles(sim: &Simulation, mdot: f64) -> (ApertureProfile, AngularDistribution) {
    use crate::flux::RADIAL_BINS;
    let plan = &sim.plan;
    let f = &sim.flux;
    let a = plan.geometry.radius;
    let time = f.profile_steps.max(1) as f64 * plan.dt;
    let mean = mdot / plan.case.aperture.area();
    let mut r_over_a = Vec::with_capacity(RADIAL_BINS);
    let mut flux = Vec::with_capacity(RADIAL_BINS);
    for (k, m) in f.radial_sum.iter().enumerate() {
        let (lo, hi) = (
            k as f64 / RADIAL_BINS as f64,
            (k + 1) as f64 / RADIAL_BINS as f64,
        );
        r_over_a.push(0.5 * (lo + hi));
        let area = plan.geometry.symmetry.ring_area(a * lo, a * hi);
        flux.push(m * plan.fnum / (time * area));
    }
    let relative = flux.iter().map(|x| x / mean).collect();
    let ang = crate::beam::angular_of_run(plan, f);
    let (theory, theory_peak) = crate::beam::free_molecular_reference(plan);
    (
        ApertureProfile {
            r_over_a,
            mass_flux_kg_m2_s: flux,
            relative_to_mean: relative,
        },
        AngularDistribution {
            theta_deg: ang.theta_deg,
            flux_per_solid_angle_over_cosine_law: ang.over_cosine_law,
            molecules_per_s: ang.molecules_per_s,
            flux_per_solid_angle_over_cosine_law_ci95: ang.over_cosine_law_ci95,
            centreline_cone_deg: crate::beam::POLAR_BIN_DEG,
            centreline_intensity_per_s_sr: ang.centreline_intensity,
            centreline_intensity_ci95_per_s_sr: ang.centreline_intensity_ci95,
            peaking_factor: ang.peaking_factor,
            peaking_factor_ci95: ang.peaking_factor_ci95,
            free_molecular_over_cosine_law: theory,
            free_molecular_peaking_factor: theory_peak,
            intensity_measure: match crate::beam::measure_of(plan) {
                crate::beam::AngularMeasure::SolidAngle => "per steradian",
                crate::beam::AngularMeasure::PlaneAngle => {
                    "per radian of the in-plane angle and per metre of slit length"
                }
            },
        },
    )
}

/// Axis profile, far-field fit and axis composition from the sampled fields.
fn beam_summary(sim: &Simulation, species: &[SpeciesFlow]) -> BeamSummary {
    let plan = &sim.plan;
    let t = plan.case.aperture.thickness;
    let light = crate::beam::lightest_species(plan);
    let total: f64 = species.iter().map(|s| s.molecule_flow_rate_per_s).sum();
    let aperture_light_enrichment = light.map(|s| {
        species[s].molecule_flow_rate_per_s / total / plan.case.gas.components[s].mole_fraction
    });
    let mut b = BeamSummary {
        axis_distance_from_exit_plane_m: Vec::new(),
        axis_number_density_per_m3: Vec::new(),
        axis_number_density_over_upstream: Vec::new(),
        light_species: light.map(|s| plan.case.gas.components[s].species.name.clone()),
        axis_light_mole_fraction: light.map(|_| Vec::new()),
        aperture_light_enrichment,
        far_field: None,
    };
    if sim.fields.steps == 0 {
        return b;
    }
    let fields = sim.fields.fields(plan);
    let axis = crate::beam::axis_profile(plan, &fields);
    for i in (0..axis.z.len()).filter(|&i| axis.z[i] > t) {
        b.axis_distance_from_exit_plane_m.push(axis.z[i] - t);
        b.axis_number_density_per_m3.push(axis.number_density[i]);
        b.axis_number_density_over_upstream
            .push(axis.over_upstream[i]);
        if let (Some(s), Some(x)) = (light, b.axis_light_mole_fraction.as_mut()) {
            x.push(axis.mole_fraction[s][i]);
        }
    }
    b.far_field = crate::beam::far_field(plan, &axis).map(|f| FarFieldSummary {
        from_exit_plane_m: f.from_m,
        to_exit_plane_m: f.to_m,
        cells: f.cells,
        density_decay_exponent: f.exponent,
        density_decay_exponent_ci95: f.exponent_ci95,
        inverse_square_coefficient: f.inverse_square_coefficient,
        samples: f.samples,
        light_mole_fraction: f.light_species.as_ref().map(|e| e.axis_mole_fraction),
        upstream_light_mole_fraction: f.light_species.as_ref().map(|e| e.upstream_mole_fraction),
        light_enrichment: f.light_species.as_ref().map(|e| e.enrichment),
    });
    b
}

/// Quality extremes over the sampled gas cells.
fn local_quality(sim: &Simulation) -> LocalQuality {
    let plan = &sim.plan;
    let g = &plan.grid;
    let f = sim.fields.fields(plan);
    let nr = g.r.len();
    let steps = sim.fields.steps.max(1) as f64;
    let mbar = plan.case.gas.mean_mass();
    let mut q = LocalQuality {
        cell_over_mean_free_path_max: 0.0,
        cell_over_mean_free_path_min: f64::INFINITY,
        time_step_over_collision_time_max: 0.0,
        molecules_per_cell_min: f64::INFINITY,
        molecules_per_cell_max: 0.0,
        cells_larger_than_mean_free_path: 0,
        cells_sampled: 0,
    };
    for c in 0..g.cells() {
        let lambda = f.mean_free_path[c];
        if g.volume[c] <= 0.0 || !lambda.is_finite() || lambda <= 0.0 {
            continue;
        }
        let (za, zb) = g.z.edges(c / nr);
        let (ra, rb) = g.r.edges(c % nr);
        let size = (zb - za).max(rb - ra);
        let ratio = size / lambda;
        let t = f.temperature[c].max(1.0);
        let cbar = (8.0 * crate::constants::BOLTZMANN * t / (std::f64::consts::PI * mbar)).sqrt();
        let per_cell = f.samples[c] / steps;
        q.cells_sampled += 1;
        q.cell_over_mean_free_path_max = q.cell_over_mean_free_path_max.max(ratio);
        q.cell_over_mean_free_path_min = q.cell_over_mean_free_path_min.min(ratio);
        q.time_step_over_collision_time_max = q
            .time_step_over_collision_time_max
            .max(plan.dt * cbar / lambda);
        q.molecules_per_cell_min = q.molecules_per_cell_min.min(per_cell);
        q.molecules_per_cell_max = q.molecules_per_cell_max.max(per_cell);
        if ratio > crate::numerics::limits::CELL_OVER_LAMBDA {
            q.cells_larger_than_mean_free_path += 1;
        }
    }
    q
}
