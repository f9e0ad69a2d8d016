//! One task of a plan: a case, or one replica of a case, run into its run directory.
//!
//! The same code serves `kinflux sweep run` (many tasks on this machine) and `kinflux sweep
//! task` (one Slurm array task). A task's state is read from its run directory alone, so any
//! mix of local and cluster execution, preemption and reruns is safe:
//! finished (summary.json of a run that was not interrupted) → skipped; a checkpoint.bin →
//! resumed; otherwise started afresh. A task that fails leaves `error.txt` with the reason, which
//! `collect` reports.

use super::plan::{Plan, Task};
use crate::error::{Error, Result};
use crate::monitor::StopReason;
use crate::runner::{self, Finished, Request};
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::Duration;

/// File a failed task leaves in its run directory.
pub const ERROR_FILE: &str = "error.txt";

/// Where a task stands, read from its run directory.
#[derive(Debug, Clone, PartialEq)]
pub enum TaskState {
    /// Never started (or nothing saved yet).
    New,
    /// Has a checkpoint but no final result: resume it.
    Interrupted,
    /// Finished; its summary.json is final.
    Finished,
    /// Failed with this message (error.txt).
    Failed(String),
}

/// The state of the task whose run directory is `dir`.
pub fn state(dir: &Path) -> TaskState {
    if let Ok(bytes) = std::fs::read(dir.join("summary.json")) {
        if let Ok(v) = serde_json::from_slice::<serde_json::Value>(&bytes) {
            if v["run"]["stop_reason"].as_str() != Some("interrupted") {
                return TaskState::Finished;
            }
        }
    }
    if dir.join(crate::checkpoint::FILE).is_file() {
        return TaskState::Interrupted;
    }
    if let Ok(msg) = std::fs::read_to_string(dir.join(ERROR_FILE)) {
        return TaskState::Failed(msg.trim().to_string());
    }
    TaskState::New
}

/// What running a task did.
pub enum TaskOutcome {
    /// Already finished before; nothing run.
    AlreadyFinished,
    /// Ran (to its end, or until interrupted: see `Finished::stop`).
    Ran(Box<Finished>),
}

/// Run task `task` of the plan in `plan_dir` with `threads` worker threads.
pub fn run_task(
    plan_dir: &Path,
    plan: &Plan,
    task: &Task,
    threads: Option<usize>,
    interrupt: Option<Arc<AtomicBool>>,
) -> Result<TaskOutcome> {
    let case = &plan.cases[task.case];
    let dir = plan_dir.join(&task.run_dir);
    let st = state(&dir);
    if st == TaskState::Finished {
        return Ok(TaskOutcome::AlreadyFinished);
    }
    let mut overrides = Vec::new();
    if task.replica.count > 1 {
        overrides.push(format!("solver.replica=\"{}\"", task.replica.label()));
    }
    let resume = st == TaskState::Interrupted;
    let req = Request {
        case_file: plan_dir.join(&case.case_file),
        overrides: if resume { Vec::new() } else { overrides },
        out: dir.clone(),
        resume,
        // a failed or never-saved attempt leaves nothing worth keeping
        force: true,
        threads,
        interrupt,
        report_every: Duration::from_secs(3600),
    };
    let _ = std::fs::remove_file(dir.join(ERROR_FILE));
    match runner::execute(&req, |_, _| {}, |_, _, _| {}) {
        Ok(f) => Ok(TaskOutcome::Ran(Box::new(f))),
        Err(e) => {
            let _ = std::fs::create_dir_all(&dir);
            let _ = std::fs::write(dir.join(ERROR_FILE), format!("{e}\n"));
            Err(e)
        }
    }
}

/// One line for the log about a task that ran.
pub fn describe(plan: &Plan, task: &Task, outcome: &TaskOutcome, seconds: f64) -> String {
    let case = &plan.cases[task.case];
    let who = if task.replica.count > 1 {
        format!("{} replica {}", case.name, task.replica.label())
    } else {
        case.name.clone()
    };
    match outcome {
        TaskOutcome::AlreadyFinished => format!("{who}: already finished"),
        TaskOutcome::Ran(f) => {
            let fl = &f.summary.flow;
            let how = if f.stop == StopReason::Interrupted {
                "interrupted, checkpoint saved"
            } else {
                f.stop.describe()
            };
            format!(
                "{who}: W = {:.5} ± {:.5}, {:.5e} kg/s ({how}; {seconds:.1} s)",
                fl.reduced_flow_rate, fl.reduced_flow_rate_ci95, fl.mass_flow_rate_kg_s
            )
        }
    }
}

/// The plan directory's absolute path (tasks and scripts use absolute paths).
pub fn absolute(dir: &Path) -> Result<PathBuf> {
    std::path::absolute(dir).map_err(|e| Error::io(dir, e))
}
