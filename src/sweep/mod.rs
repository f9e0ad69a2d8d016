//! Sweeps: from one case to a table of cases, run locally or as a Slurm job array, collected
//! into one results table and design charts.
//!
//! Data flow:
//!
//! ```text
//! sweep.toml --plan::write--> PLAN/ (plan.json, manifest.csv, tasks.csv, cases/case-NNNN.toml)
//!   tasks (one per case, or per statistical replica of a case):
//!     local::run_all (this machine)  or  slurm::script (sbatch job array) -> task::run_task
//!   --> PLAN/runs/case-NNNN[/replica-K-of-N]/ (ordinary run directories)
//! collect::collect --> PLAN/results.csv, results.h5, design charts (replicas merged first)
//! ```
//!
//! Invariants: a plan's case and task indices are stable (they are the Slurm array indices);
//! every case file in a plan has already been checked; a finished task is never run again, and
//! an interrupted one resumes from its checkpoint; collect never drops a case silently (missing
//! and failed cases are rows with their status).

pub mod charts;
pub mod collect;
pub mod local;
pub mod plan;
pub mod slurm;
pub mod task;

pub use plan::{Plan as SweepPlan, PlannedCase, Task};
