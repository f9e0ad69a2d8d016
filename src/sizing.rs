//! Aperture sizing: the diameter that delivers a target flow at the case's pressures and gas.
//!
//! Method: start from the analytic free-molecular estimate (Knudsen effusion with the Clausing
//! factor of the fixed partition thickness, Ṁ_fm ∝ D² for a thin orifice, ∝ h for a slit of
//! width h per metre; solved by fixed-point iteration because the transmission probability
//! changes with D), then refine with DSMC runs: after each run the next opening is
//! D·(target/F)^(1/s) on log D, with s the measured log–log slope of flow against the opening
//! between the last two runs (a secant; s = 2 for a hole and 1 for a slit until two runs exist,
//! or when the measured slope is outside 0.5–4, i.e. noise). The search stops when a run's
//! flow is within its own 95 % interval of the target. The answer is the last run's diameter
//! corrected by the same secant step, with the 95 % interval of that correction,
//! D·(half-width/F)/s. Every run is an ordinary run directory under the sizing directory.
//! Invariants: only `aperture.diameter` (a slit: `aperture.width`) changes between runs (the partition thickness stays:
//! it is the plate the hole is made in); the flow is compared in the target's own kind (mass,
//! or molecules for throughput units).

use crate::case;
use crate::error::{Error, Result};
use crate::numerics::Plan;
use crate::runner::{self, Request};
use crate::units::{parse_flow, Flow};
use serde::Serialize;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::Duration;

/// What to size.
pub struct SizingRequest {
    pub case_file: PathBuf,
    pub overrides: Vec<String>,
    /// Target flow as the user wrote it ("5 sccm").
    pub target: String,
    pub out: PathBuf,
    pub max_runs: usize,
    pub threads: Option<usize>,
    pub force: bool,
    pub interrupt: Option<Arc<AtomicBool>>,
}

/// One DSMC run of the search.
#[derive(Debug, Clone, Serialize)]
pub struct SizingRun {
    pub run: usize,
    pub diameter_m: f64,
    /// Flow in the compared quantity (kg/s or molecules/s) and its 95 % half-width.
    pub flow: f64,
    pub flow_ci95: f64,
    pub mass_flow_kg_s: f64,
    pub reduced_flow_rate: f64,
    pub rarefaction_parameter: f64,
    pub within_ci_of_target: bool,
    pub directory: String,
}

/// The answer.
#[derive(Debug, Clone, Serialize)]
pub struct SizingReport {
    pub target_flow: String,
    /// "mass_flow_kg_s" or "molecule_flow_per_s": what `target`, `flow` and `flow_ci95` are.
    pub compared_as: &'static str,
    pub target: f64,
    pub diameter_m: f64,
    pub diameter_ci95_m: f64,
    pub converged: bool,
    pub analytic_start_diameter_m: f64,
    pub slope_used: f64,
    pub partition_thickness_m: f64,
    /// The case key that was sized: `aperture.diameter`, or `aperture.width` for a slit (whose
    /// flows and target are then per metre of slit length).
    pub sized_key: &'static str,
    pub runs: Vec<SizingRun>,
    pub caution: &'static str,
}

/// Free-molecular net flow of the case at diameter `d`, in the compared quantity.
fn analytic_flow(
    text: &str,
    file: &str,
    overrides: &[String],
    key: &str,
    d: f64,
    molecules: bool,
) -> Result<f64> {
    let mut o = overrides.to_vec();
    o.push(format!("{key}=\"{d:e} m\""));
    let c = case::parse(text, file, &o)?;
    let p = Plan::new(&c)?;
    Ok(if molecules {
        p.estimate.free_molecular_species_molecule_flow.iter().sum()
    } else {
        p.estimate.free_molecular_net_mass_flow
    })
}

/// Run the search; `log` receives one line per run.
pub fn size(req: &SizingRequest, log: impl Fn(&str)) -> Result<SizingReport> {
    let file = req.case_file.display().to_string();
    let text = std::fs::read_to_string(&req.case_file)
        .map_err(|e| Error::Input(format!("{file}: cannot read the case file: {e}")))?;
    let base = case::parse(&text, &file, &req.overrides)?;
    let key = base.aperture.size_key();
    // free-molecular scaling of the flow with the opening: area ∝ D², or ∝ h per metre of slit
    let power = if base.aperture.per_unit_length() {
        1.0
    } else {
        2.0
    };
    let target_flow = parse_flow(&req.target, base.upstream.temperature)
        .map_err(|e| Error::Input(format!("--target-flow {}: {e}", req.target)))?;
    let (target, molecules) = match target_flow {
        Flow::Mass(m) => (m, false),
        Flow::Molecules(n) => (n, true),
    };
    if !(target > 0.0 && target.is_finite()) {
        return Err(Error::Input(format!(
            "--target-flow {}: expected a flow above 0",
            req.target
        )));
    }
    if req.max_runs == 0 {
        return Err(Error::Input("--max-runs 0: expected at least 1 run".into()));
    }
    let f0 = analytic_flow(
        &text,
        &file,
        &req.overrides,
        key,
        base.aperture.diameter,
        molecules,
    )?;
    if f0.is_nan() || f0 <= 0.0 {
        return Err(Error::Input(format!(
            "{file}: upstream pressure {} Pa is not above downstream {} Pa at equal conditions; expected a case with a forward flow to size",
            base.upstream.pressure, base.downstream.pressure
        )));
    }
    // Analytic start: fixed point of D = D·(target/F_fm(D))^(1/power).
    let mut d = base.aperture.diameter * (target / f0).powf(1.0 / power);
    for _ in 0..30 {
        let f = analytic_flow(&text, &file, &req.overrides, key, d, molecules)?;
        let next = d * (target / f).powf(1.0 / power);
        let done = (next / d - 1.0).abs() < 1e-10;
        d = next;
        if done {
            break;
        }
    }
    let start = d;
    crate::output::prepare_run_dir(&req.out, req.force)?;
    let mut runs: Vec<SizingRun> = Vec::new();
    let mut slope = power;
    let mut converged = false;
    for k in 1..=req.max_runs {
        let dir = req.out.join(format!("run-{k:02}"));
        let mut overrides = req.overrides.clone();
        overrides.push(format!("{key}=\"{d:e} m\""));
        let r = Request {
            case_file: req.case_file.clone(),
            overrides,
            out: dir.clone(),
            resume: false,
            force: true,
            threads: req.threads,
            interrupt: req.interrupt.clone(),
            report_every: Duration::from_secs(3600),
        };
        let done = runner::execute(&r, |_, _| {}, |_, _, _| {})?;
        if done.stop == crate::monitor::StopReason::Interrupted {
            return Err(Error::Interrupted);
        }
        let fl = &done.summary.flow;
        let rel = fl.mass_flow_rate_ci95_kg_s / fl.mass_flow_rate_kg_s;
        let flow = if molecules {
            fl.molar_flow_rate_mol_s * crate::constants::AVOGADRO
        } else {
            fl.mass_flow_rate_kg_s
        };
        let ci = rel * flow;
        let within = (flow - target).abs() <= ci;
        runs.push(SizingRun {
            run: k,
            diameter_m: d,
            flow,
            flow_ci95: ci,
            mass_flow_kg_s: fl.mass_flow_rate_kg_s,
            reduced_flow_rate: fl.reduced_flow_rate,
            rarefaction_parameter: done.summary.regime.rarefaction_parameter,
            within_ci_of_target: within,
            directory: dir.display().to_string(),
        });
        log(&format!(
            "run {k}: D = {d:.6e} m, flow {flow:.5e} ± {ci:.2e} (target {target:.5e}), W = {:.4}, δ = {:.3e}{}",
            fl.reduced_flow_rate,
            done.summary.regime.rarefaction_parameter,
            if within { "  within the interval" } else { "" }
        ));
        if runs.len() >= 2 {
            let (a, b) = (&runs[runs.len() - 2], &runs[runs.len() - 1]);
            if (b.diameter_m / a.diameter_m).ln().abs() > 1e-6 {
                let s = (b.flow / a.flow).ln() / (b.diameter_m / a.diameter_m).ln();
                slope = if (0.5..=4.0).contains(&s) { s } else { power };
            }
        }
        let next = d * (target / flow).powf(1.0 / slope);
        if within || flow.is_nan() || flow <= 0.0 {
            converged = within;
            if within {
                d = next;
            }
            break;
        }
        d = next;
    }
    let last = runs.last().expect("at least one run");
    let rel = last.flow_ci95 / last.flow;
    let (diameter, half) = if converged {
        (d, d * rel / slope)
    } else {
        (last.diameter_m, f64::INFINITY)
    };
    let report = SizingReport {
        target_flow: req.target.clone(),
        compared_as: if molecules {
            "molecule_flow_per_s"
        } else {
            "mass_flow_kg_s"
        },
        target,
        diameter_m: diameter,
        diameter_ci95_m: half,
        converged,
        analytic_start_diameter_m: start,
        slope_used: slope,
        partition_thickness_m: base.aperture.thickness,
        sized_key: key,
        runs,
        caution: crate::summary::CAUTION,
    };
    crate::output::write_json(&req.out.join("sizing.json"), &report)?;
    Ok(report)
}

/// The default sizing directory for a case file: runs/<stem>-sizing.
pub fn default_dir(case_file: &Path) -> PathBuf {
    let stem = case_file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "case".into());
    PathBuf::from("runs").join(format!("{stem}-sizing"))
}
