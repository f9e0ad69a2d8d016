//! Running a plan's tasks on this machine.
//!
//! Tasks run in index order. Large cases run one at a time on every thread; small ones
//! (free-molecular or few molecules) run side by side, one thread each, because a small case
//! cannot keep several threads busy. A signal stops the launching of new tasks and makes the
//! running ones save their checkpoints; running the plan again continues where it stopped.
//! Invariant: the choice of side-by-side or sequential execution changes wall time only, never
//! results (each run's results do not depend on its thread count).

use super::plan::Plan;
use super::task::{self, TaskOutcome};
use crate::error::Result;
use crate::monitor::StopReason;
use std::path::Path;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Instant;

/// Planned molecules below which a case counts as small (runs side by side).
pub const SMALL_CASE_MOLECULES: u64 = 300_000;

/// How a local sweep run ended.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct LocalReport {
    pub ran: usize,
    pub already_finished: usize,
    /// (task index, error message)
    pub failed: Vec<(usize, String)>,
    pub interrupted: usize,
    /// Cases run at once, threads per case.
    pub jobs: usize,
    pub threads_per_job: usize,
}

/// Side-by-side jobs for this plan on `cores` cores: `requested`, or all cores when every
/// case is small, else one.
pub fn choose_jobs(plan_dir: &Path, plan: &Plan, cores: usize, requested: Option<usize>) -> usize {
    if let Some(j) = requested {
        return j.clamp(1, plan.tasks.len().max(1));
    }
    let small = plan.cases.iter().all(|c| {
        crate::case::load(&plan_dir.join(&c.case_file), &[])
            .and_then(|c| crate::numerics::Plan::new(&c))
            .is_ok_and(|p| p.choices.target_molecules < SMALL_CASE_MOLECULES)
    });
    if small {
        cores.min(plan.tasks.len()).max(1)
    } else {
        1
    }
}

/// Run every unfinished task of the plan in `plan_dir`. `log` receives one line per task.
pub fn run_all(
    plan_dir: &Path,
    jobs: Option<usize>,
    threads: Option<usize>,
    interrupt: Option<Arc<AtomicBool>>,
    log: impl Fn(&str) + Sync,
) -> Result<LocalReport> {
    let plan = Plan::load(plan_dir)?;
    let cores = threads.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
    });
    let jobs = choose_jobs(plan_dir, &plan, cores, jobs);
    let per_job = (cores / jobs).max(1);
    let next = AtomicUsize::new(0);
    let report = Mutex::new(LocalReport {
        jobs,
        threads_per_job: per_job,
        ..Default::default()
    });
    let n = plan.tasks.len();
    std::thread::scope(|scope| {
        for _ in 0..jobs {
            scope.spawn(|| loop {
                if interrupt.as_ref().is_some_and(|f| f.load(Ordering::SeqCst)) {
                    break;
                }
                let i = next.fetch_add(1, Ordering::SeqCst);
                if i >= n {
                    break;
                }
                let t = &plan.tasks[i];
                let started = Instant::now();
                let result = task::run_task(plan_dir, &plan, t, Some(per_job), interrupt.clone());
                let secs = started.elapsed().as_secs_f64();
                let mut r = report.lock().unwrap_or_else(|e| e.into_inner());
                match result {
                    Ok(o) => {
                        log(&format!(
                            "[task {}/{}] {}",
                            i + 1,
                            n,
                            task::describe(&plan, t, &o, secs)
                        ));
                        match &o {
                            TaskOutcome::AlreadyFinished => r.already_finished += 1,
                            TaskOutcome::Ran(f) if f.stop == StopReason::Interrupted => {
                                r.interrupted += 1
                            }
                            TaskOutcome::Ran(_) => r.ran += 1,
                        }
                    }
                    Err(e) => {
                        log(&format!(
                            "[task {}/{}] {}: FAILED: {e}",
                            i + 1,
                            n,
                            plan.cases[t.case].name
                        ));
                        r.failed.push((i, e.to_string()));
                    }
                }
            });
        }
    });
    Ok(report.into_inner().unwrap_or_else(|e| e.into_inner()))
}
