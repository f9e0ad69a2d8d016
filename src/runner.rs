//! One run of one case, from its case file to a finished result directory.
//!
//! Owns what `kinflux run`, a sweep task and the sizing loop share: reading the case (or the
//! case saved in a checkpoint when resuming), refusing to overwrite earlier results, running
//! the simulation on its own thread pool with periodic checkpoints and an interrupt flag, and
//! writing every result file (checkpoint.bin, summary.json, history.csv, fields, charts).
//! Invariants: a resumed run uses the case text saved in its checkpoint, and only solver
//! budgets may change on resume; the final state is always saved, so an interrupted or
//! finished run can be continued; nothing here prints (callers are told through callbacks and
//! the returned [`Finished`]).

use crate::error::{Error, Result};
use crate::monitor::{BatchEstimate, StopReason};
use crate::numerics::Plan;
use crate::simulation::{RunOutcome, Simulation};
use crate::summary::Summary;
use crate::{case, checkpoint, output};
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::Duration;

/// Solver keys that may change when a run is resumed (they change budgets, not physics).
pub const RESUMABLE_KEYS: [&str; 4] = [
    "solver.max_wall_time",
    "solver.max_steps",
    "solver.target_uncertainty",
    "solver.checkpoint_interval",
];

/// What to run and where.
pub struct Request {
    /// The case file (read for a new run; compared with the saved case on resume).
    pub case_file: PathBuf,
    /// `key=value` overrides (on resume: only [`RESUMABLE_KEYS`]).
    pub overrides: Vec<String>,
    /// Result directory.
    pub out: PathBuf,
    /// Continue the run saved in `out` instead of starting a new one.
    pub resume: bool,
    /// Overwrite a directory that already holds results (new runs only).
    pub force: bool,
    /// Worker threads (None = all cores).
    pub threads: Option<usize>,
    /// Set by a signal handler: finish the step, save, stop.
    pub interrupt: Option<Arc<AtomicBool>>,
    /// Wall time between calls of the progress callback.
    pub report_every: Duration,
}

/// A run that ended (by its stopping rule, a budget or an interrupt) with its results written.
pub struct Finished {
    pub summary: Summary,
    pub stop: StopReason,
    /// Every file written, in order.
    pub files: Vec<PathBuf>,
    /// Result files that could not be written (the run itself is saved).
    pub warnings: Vec<String>,
    /// Final step number.
    pub step: u64,
}

/// The case of a request: its text, overrides and, on resume, the saved state.
struct Prepared {
    text: String,
    file: String,
    overrides: Vec<String>,
    saved: Option<crate::simulation::SavedState>,
}

fn prepare(req: &Request) -> Result<Prepared> {
    let file = req.case_file.display().to_string();
    if !req.resume {
        let text = std::fs::read_to_string(&req.case_file)
            .map_err(|e| Error::Input(format!("{file}: cannot read the case file: {e}")))?;
        return Ok(Prepared {
            text,
            file,
            overrides: req.overrides.clone(),
            saved: None,
        });
    }
    let l = checkpoint::load(&req.out)?;
    let given = std::fs::read_to_string(&req.case_file).unwrap_or_default();
    if given != l.case_text {
        return Err(Error::Input(format!(
            "{file}: differs from the case saved in {}; expected the same case file to resume (edit budgets with --set solver.max_wall_time=... instead)",
            req.out.display()
        )));
    }
    for s in &req.overrides {
        let key = s.split('=').next().unwrap_or("").trim();
        if !RESUMABLE_KEYS.contains(&key) {
            return Err(Error::Input(format!(
                "--set {s}: expected only {} when resuming (other keys would change the physics)",
                RESUMABLE_KEYS.join(", ")
            )));
        }
    }
    let mut overrides = l.overrides;
    overrides.extend(req.overrides.iter().cloned());
    Ok(Prepared {
        text: l.case_text,
        file,
        overrides,
        saved: Some(l.state),
    })
}

/// Check the request, build the plan and prepare the result directory, without running.
/// Returns the plan so a caller can show it before [`execute`].
pub fn plan(req: &Request) -> Result<Plan> {
    let p = prepare(req)?;
    let c = case::parse(&p.text, &p.file, &p.overrides)?;
    Plan::new(&c)
}

/// Run the request to its end and write its results. `on_start` sees the plan and the thread
/// count before the first step; `progress` is called about once per `report_every`.
pub fn execute(
    req: &Request,
    on_start: impl FnOnce(&Plan, usize),
    progress: impl FnMut(&Simulation, Option<BatchEstimate>, Duration) + Send,
) -> Result<Finished> {
    if req.threads == Some(0) {
        return Err(Error::Input(
            "--threads 0: expected at least 1 thread".into(),
        ));
    }
    let p = prepare(req)?;
    let c = case::parse(&p.text, &p.file, &p.overrides)?;
    let plan = Plan::new(&c)?;
    if p.saved.is_none() {
        output::prepare_run_dir(&req.out, req.force)?;
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(req.threads.unwrap_or(0))
        .build()
        .map_err(|e| Error::Input(format!("cannot start the worker threads: {e}")))?;
    let threads = pool.current_num_threads();
    on_start(&plan, threads);
    let (sim, outcome) = pool.install(|| {
        let mut sim = match p.saved {
            Some(state) => Simulation::resume(plan, state),
            None => Simulation::new(plan),
        };
        sim.interrupt = req.interrupt.clone();
        let (dir, text, name, ovr) = (
            req.out.clone(),
            p.text.clone(),
            p.file.clone(),
            p.overrides.clone(),
        );
        sim.checkpoint_hook = Some((
            Duration::from_secs_f64(c.solver.checkpoint_interval),
            Box::new(move |s: &Simulation| {
                if let Err(e) = checkpoint::save(&dir, s, &text, &name, &ovr) {
                    eprintln!("kinflux: warning: checkpoint not written: {e}");
                }
            }),
        ));
        let outcome = sim.run(req.report_every, progress);
        sim.checkpoint_hook = None;
        (sim, outcome)
    });
    // The final state is always saved, so a finished run can also be extended.
    checkpoint::save(&req.out, &sim, &p.text, &p.file, &p.overrides)?;
    let mut files = vec![req.out.join(checkpoint::FILE)];
    let (summary, more, warnings) = write_results(&req.out, &sim, &outcome, threads)?;
    files.extend(more);
    Ok(Finished {
        summary,
        stop: outcome.stop,
        files,
        warnings,
        step: sim.step,
    })
}

/// Write summary.json, history.csv, the field files and the charts of a finished simulation.
/// Field files and charts are best effort: their failures come back as warnings.
pub fn write_results(
    out: &Path,
    sim: &Simulation,
    outcome: &RunOutcome,
    threads: usize,
) -> Result<(Summary, Vec<PathBuf>, Vec<String>)> {
    let summary = Summary::new(sim, outcome, threads);
    output::write_json(&out.join("summary.json"), &summary)?;
    output::write_atomic(
        &out.join("history.csv"),
        output::history_csv(sim).as_bytes(),
    )?;
    let mut files = vec![out.join("summary.json"), out.join("history.csv")];
    let mut warnings = Vec::new();
    write_fields_and_charts(out, sim, &summary, true, &mut files, &mut warnings);
    Ok((summary, files, warnings))
}

/// fields.h5 / fields.xdmf and the charts (the convergence chart only when `convergence`).
pub fn write_fields_and_charts(
    out: &Path,
    sim: &Simulation,
    summary: &Summary,
    convergence: bool,
    files: &mut Vec<PathBuf>,
    warnings: &mut Vec<String>,
) {
    let c = &sim.plan.case;
    let meta = [
        ("title", c.title.clone()),
        ("kinflux_version", env!("CARGO_PKG_VERSION").to_string()),
        ("case_file", c.source.clone()),
        ("gas", c.gas.label()),
        ("mode", summary.mode.to_string()),
        ("sampling_steps", sim.fields.steps.to_string()),
        ("molecule_weight", format!("{:e}", sim.plan.fnum)),
        ("time_step_s", format!("{:e}", sim.plan.dt)),
        (
            if c.aperture.per_unit_length() {
                "aperture_width_m"
            } else {
                "aperture_diameter_m"
            },
            format!("{:e}", c.aperture.diameter),
        ),
        (
            "partition_thickness_m",
            format!("{:e}", c.aperture.thickness),
        ),
        (
            "coordinates",
            if c.aperture.per_unit_length() {
                "z across the slit plate (flow +z, partition at 0 <= z <= thickness), r = |y| distance from the slit's mid-plane; planar, per metre of slit length; arrays [nz][nr]"
            } else {
                "z axial (flow +z, partition at 0 <= z <= thickness), r radial; arrays [nz][nr]"
            }
            .to_string(),
        ),
        ("caution", crate::summary::CAUTION.to_string()),
    ];
    let fields = sim.fields.fields(&sim.plan);
    match crate::field_output::write(out, &sim.plan, &fields, &meta) {
        Ok(f) => files.extend(f),
        Err(e) => warnings.push(format!("field files not written: {e}")),
    }
    match crate::plots::write_all(out, sim, &fields, convergence) {
        Ok(f) => files.extend(f),
        Err(e) => warnings.push(format!("charts not written: {e}")),
    }
}
