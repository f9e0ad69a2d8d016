//! Run directories and atomic file writing.
//!
//! Invariants: a run never overwrites an earlier run's results unless asked (`force`); every
//! file is written to a temporary name in the same directory and renamed into place, so a
//! reader never sees a half-written file and an interrupted write leaves no partial result.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Prepare the output directory: create it (and parents), refuse a non-empty one unless
/// `force`, and check that it is writable.
pub fn prepare_run_dir(dir: &Path, force: bool) -> Result<()> {
    if dir.exists() {
        if !dir.is_dir() {
            return Err(Error::Output(format!(
                "--out {}: exists and is not a directory; expected a new or empty directory",
                dir.display()
            )));
        }
        let non_empty = std::fs::read_dir(dir)
            .map_err(|e| {
                Error::Output(format!(
                    "--out {}: cannot read it ({e}); expected a writable directory",
                    dir.display()
                ))
            })?
            .next()
            .is_some();
        if non_empty && !force {
            return Err(Error::Output(format!(
                "--out {}: already holds results; expected a new or empty directory (use --force to overwrite)",
                dir.display()
            )));
        }
    } else {
        std::fs::create_dir_all(dir).map_err(|e| {
            Error::Output(format!(
                "--out {}: cannot create it ({e}); expected a writable location",
                dir.display()
            ))
        })?;
    }
    let probe = dir.join(".kinflux-write-test");
    std::fs::write(&probe, b"").map_err(|e| {
        Error::Output(format!(
            "--out {}: not writable ({e}); expected a writable directory",
            dir.display()
        ))
    })?;
    let _ = std::fs::remove_file(&probe);
    Ok(())
}

/// Write `bytes` to `path` atomically (temporary file in the same directory, then rename).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = path.parent().unwrap_or_else(|| Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    let tmp: PathBuf = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    result.map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        Error::io(path, e)
    })
}

/// Write a value as pretty JSON, atomically.
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    let mut text = serde_json::to_string_pretty(value)
        .map_err(|e| Error::io(path, std::io::Error::other(e)))?;
    text.push('\n');
    write_atomic(path, text.as_bytes())
}

/// One CSV field: quoted (with inner quotes doubled) when it holds a comma, quote or line break.
pub fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// The run history as CSV: one row per step with the step's net mass flow, and every 16 steps
/// after the steady-state start the running mean and 95 % half-width (batch means), so the
/// convergence of the estimate can be plotted.
pub fn history_csv(sim: &crate::simulation::Simulation) -> String {
    let f = &sim.flux;
    let dt = sim.plan.dt;
    let start = sim.steady_state_step();
    let mut out =
        String::from("step,time_s,molecules,mass_flow_kg_s,running_mean_kg_s,running_ci95_kg_s\n");
    for k in 0..f.steps() {
        let step = k + 1;
        let (mean, ci) = if step > start && step % 16 == 0 {
            match crate::monitor::batch_means(&f.mass_per_step[start..step]) {
                Some(e) => (
                    format!("{:e}", e.mean / dt),
                    format!("{:e}", e.half_width / dt),
                ),
                None => (String::new(), String::new()),
            }
        } else {
            (String::new(), String::new())
        };
        let molecules = f
            .population_per_step
            .get(k)
            .map(|m| m.to_string())
            .unwrap_or_default();
        out.push_str(&format!(
            "{step},{:e},{molecules},{:e},{mean},{ci}\n",
            step as f64 * dt,
            f.mass_per_step[k] / dt
        ));
    }
    out
}
