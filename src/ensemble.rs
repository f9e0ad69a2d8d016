//! Statistical replicas of one case combined into one result (`kinflux merge`).
//!
//! Replica K of N (`solver.replica = "K/N"`, or `kinflux run --replica K/N`) is the same case
//! with independent random streams. Because the flow is steady, replicas merge exactly: the
//! field samples, aperture profiles and collision counters are summed, and the flow rate pools
//! every replica's steady-state history (`monitor::pooled_batch_means`), so the 95 % interval
//! of N merged replicas shrinks like 1/√N. Each replica is read from its own checkpoint.bin,
//! which every run writes at its end.
//! Invariants: only replicas of the same physical case merge (the resolved cases must agree in
//! everything but the replica index, seed and budgets); no replica is counted twice.

use crate::case::{self, Case, Replica};
use crate::checkpoint;
use crate::error::{Error, Result};
use crate::numerics::Plan;
use crate::output;
use crate::simulation::{RunOutcome, Simulation};
use crate::summary::Summary;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// A merged result.
pub struct Merged {
    pub summary: Summary,
    /// Files written.
    pub files: Vec<PathBuf>,
    /// Field files or charts that could not be written, replicas that had not finished.
    pub warnings: Vec<String>,
}

/// One replica as read from its directory.
struct Member {
    dir: PathBuf,
    case: Case,
    sim: Simulation,
    finished: bool,
    wall_time_s: f64,
}

/// The case with everything that may differ between replicas of it set to fixed values.
fn physics_only(c: &Case) -> Case {
    let mut c = c.clone();
    c.source = String::new();
    c.solver.seed = 0;
    c.solver.replica = Replica::ONE;
    c.solver.target_uncertainty = 0.0;
    c.solver.max_wall_time = 0.0;
    c.solver.max_steps = None;
    c.solver.checkpoint_interval = 0.0;
    c
}

fn read_member(dir: &Path) -> Result<Member> {
    let l = checkpoint::load(dir)?;
    let case = case::parse(&l.case_text, &l.case_file, &l.overrides)?;
    let plan = Plan::new(&case)?;
    let summary: Option<serde_json::Value> = std::fs::read(dir.join("summary.json"))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok());
    let finished = summary
        .as_ref()
        .and_then(|s| s["run"]["steps"].as_u64())
        .is_some_and(|steps| steps == l.state.step);
    let wall_time_s = summary
        .as_ref()
        .and_then(|s| s["run"]["wall_time_s"].as_f64())
        .unwrap_or(0.0);
    Ok(Member {
        dir: dir.to_path_buf(),
        case,
        sim: Simulation::resume(plan, l.state),
        finished,
        wall_time_s,
    })
}

/// Merge the replicas saved in `dirs` into `out` (summary.json, replicas.csv, fields, charts).
pub fn merge(dirs: &[PathBuf], out: &Path, force: bool) -> Result<Merged> {
    if dirs.len() < 2 {
        return Err(Error::Input(format!(
            "merge: {} result director{} given; expected at least 2 replicas of one case",
            dirs.len(),
            if dirs.len() == 1 { "y" } else { "ies" }
        )));
    }
    let members: Vec<Member> = dirs.iter().map(|d| read_member(d)).collect::<Result<_>>()?;
    let reference = physics_only(&members[0].case);
    let mut warnings = Vec::new();
    for (i, m) in members.iter().enumerate() {
        if physics_only(&m.case) != reference {
            return Err(Error::Input(format!(
                "merge: {} holds a different case than {} (\"{}\"); expected replicas of one case (same case file and settings, different --replica)",
                m.dir.display(),
                members[0].dir.display(),
                members[0].case.title
            )));
        }
        for o in &members[..i] {
            if o.case.solver.seed == m.case.solver.seed {
                return Err(Error::Input(format!(
                    "merge: {} and {} are the same replica ({}, seed {}); expected different replicas (kinflux run --replica K/N)",
                    o.dir.display(),
                    m.dir.display(),
                    m.case.solver.replica.label(),
                    m.case.solver.seed
                )));
            }
        }
        if !m.finished {
            warnings.push(format!(
                "{} has not finished (no summary.json for its last step); its samples so far are included",
                m.dir.display()
            ));
        }
    }
    output::prepare_run_dir(out, force)?;

    // Sum every accumulator into the first replica; keep each flow history for pooling.
    let mut members = members;
    let histories: Vec<_> = members
        .iter()
        .map(|m| (m.sim.flux.clone(), m.sim.steady_state_step()))
        .collect();
    let (first, rest) = members.split_at_mut(1);
    let total = &mut first[0].sim;
    let (mut steps, mut molecules) = (total.step, total.population());
    for m in rest.iter() {
        let s = &m.sim;
        total.fields.merge(&s.fields);
        total.collision_stats.merge(&s.collision_stats);
        total.sampled_cell_molecules += s.sampled_cell_molecules;
        total.sampled_upstream_molecules += s.sampled_upstream_molecules;
        total.particle_steps += s.particle_steps;
        for (a, b) in total.flux.radial_sum.iter_mut().zip(&s.flux.radial_sum) {
            *a += b;
        }
        for (a, b) in total.flux.polar_sum.iter_mut().zip(&s.flux.polar_sum) {
            *a += b;
        }
        for (a, b) in total.flux.polar_sq_sum.iter_mut().zip(&s.flux.polar_sq_sum) {
            *a += b;
        }
        total.flux.profile_steps += s.flux.profile_steps;
        let (b, o) = (&mut total.balance, &s.balance);
        b.initial += o.initial;
        b.injected += o.injected;
        b.clones_released += o.clones_released;
        b.left_upstream += o.left_upstream;
        b.left_downstream += o.left_downstream;
        b.deleted_by_weighting += o.deleted_by_weighting;
        steps += s.step;
        molecules += s.population();
    }
    // every replica's whole wall time (its checkpoint's total, or its summary's for older runs)
    let wall: f64 = members
        .iter()
        .map(|m| m.sim.wall_time_s.max(m.wall_time_s))
        .sum();
    members[0].sim.wall_time_s = wall;
    let total = &members[0].sim;
    let parts: Vec<_> = histories.iter().map(|(f, s)| (f, *s)).collect();
    let outcome = RunOutcome {
        stop: crate::monitor::StopReason::Merged,
        wall_time: Duration::from_secs_f64(wall),
    };
    let mut summary = Summary::pooled(total, &parts, &outcome, 0);
    // Counters over all replicas (the balance was summed above).
    summary.run.steps = steps;
    summary.run.molecules_at_end = molecules;
    summary.run.replica = None;
    output::write_json(&out.join("summary.json"), &summary)?;
    let mut files = vec![out.join("summary.json")];
    output::write_atomic(&out.join("replicas.csv"), replicas_csv(&members).as_bytes())?;
    files.push(out.join("replicas.csv"));
    crate::runner::write_fields_and_charts(out, total, &summary, false, &mut files, &mut warnings);
    Ok(Merged {
        summary,
        files,
        warnings,
    })
}

/// One row per replica: its directory, index, seed, steps and its own flow-rate estimate.
fn replicas_csv(members: &[Member]) -> String {
    let mut s =
        String::from("directory,replica,seed,steps,finished,mass_flow_kg_s,mass_flow_ci95_kg_s\n");
    for m in members {
        let (mean, ci) = m
            .sim
            .mass_flow_estimate()
            .map(|e| (format!("{:e}", e.mean), format!("{:e}", e.half_width)))
            .unwrap_or_default();
        s.push_str(&format!(
            "{},{},{},{},{},{mean},{ci}\n",
            crate::output::csv_field(&m.dir.display().to_string()),
            m.case.solver.replica.label(),
            m.case.solver.seed,
            m.sim.step,
            m.finished,
        ));
    }
    s
}
