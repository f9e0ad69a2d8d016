//! Slurm job arrays for a plan: the sbatch script, and its submission.
//!
//! The script (`PLAN/sweep.sbatch`) is a job array with one array task per plan task; each runs
//! `kinflux sweep task PLAN --index $SLURM_ARRAY_TASK_ID`. Slurm's time limit and preemption
//! send SIGTERM, on which the task saves its checkpoint and exits with code 75; a rerun resumes.
//! Invariants: nothing from the case files (titles, values) reaches the script; the only paths
//! in it (the kinflux binary and the plan directory) are single-quoted for the shell with
//! embedded quotes escaped, and `#SBATCH` lines carry only values checked against strict
//! patterns, so no name can break the script or inject a command. Logs go to
//! `slurm-logs/` relative to the plan directory, from which the script is submitted.

use super::plan::{sanitize_comment, Plan};
use crate::error::{Error, Result};
use std::path::{Path, PathBuf};

/// Script file name inside the plan directory.
pub const SCRIPT_FILE: &str = "sweep.sbatch";
/// Where the array tasks' standard output and error go (relative to the plan directory).
pub const LOG_DIR: &str = "slurm-logs";

/// What the user asked of the job.
#[derive(Debug, Clone, Default)]
pub struct JobOptions {
    pub partition: Option<String>,
    /// Slurm time limit per array task ("30", "1:00:00", "2-00:00:00").
    pub time: Option<String>,
    pub cpus_per_task: Option<u32>,
    /// Memory per node ("4G").
    pub mem: Option<String>,
    /// At most this many array tasks at once (the `%` limit).
    pub max_parallel: Option<u32>,
    /// Account to charge.
    pub account: Option<String>,
}

/// Quote `s` for the POSIX shell: one single-quoted word, any `'` written as `'\''`.
pub fn shell_quote(s: &str) -> String {
    format!("'{}'", s.replace('\'', "'\\''"))
}

fn check(option: &str, value: &str, ok: impl Fn(char) -> bool, expected: &str) -> Result<()> {
    if value.is_empty() || value.len() > 200 || !value.chars().all(ok) {
        return Err(Error::Input(format!(
            "--{option} {value:?}: expected {expected}"
        )));
    }
    Ok(())
}

/// The sbatch script for the plan in `plan_dir` (absolute), running `kinflux` (absolute).
pub fn script(plan_dir: &Path, plan: &Plan, kinflux: &Path, o: &JobOptions) -> Result<String> {
    let n = plan.tasks.len();
    if n == 0 {
        return Err(Error::Input(format!(
            "{}: the plan has no tasks",
            plan_dir.display()
        )));
    }
    for (what, p) in [("plan directory", plan_dir), ("kinflux binary", kinflux)] {
        let s = p.to_str().ok_or_else(|| {
            Error::Input(format!(
                "{what} {}: expected a path that is valid UTF-8",
                p.display()
            ))
        })?;
        if s.contains('\0') {
            return Err(Error::Input(format!("{what}: a NUL byte in the path")));
        }
    }
    let name_char = |c: char| c.is_ascii_alphanumeric() || "_-.".contains(c);
    let mut lines = vec![
        "#!/bin/bash".to_string(),
        format!(
            "# kinflux sweep: {} array tasks for the plan in {}",
            n,
            sanitize_comment(&plan_dir.display().to_string())
        ),
        format!(
            "# Written by kinflux {}. Submit from the plan directory: cd <plan> && sbatch {SCRIPT_FILE}",
            env!("CARGO_PKG_VERSION")
        ),
        "# (kinflux sweep slurm --submit does this). Each array task runs one case or one".into(),
        "# statistical replica; on SIGTERM (time limit, preemption) it saves a checkpoint and a".into(),
        "# rerun of the same index resumes it.".into(),
    ];
    let job_name: String = plan_dir
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default()
        .chars()
        .filter(|&c| name_char(c))
        .take(40)
        .collect();
    lines.push(format!(
        "#SBATCH --job-name=kinflux-{}",
        if job_name.is_empty() {
            "sweep"
        } else {
            &job_name
        }
    ));
    let array = match o.max_parallel {
        Some(0) => {
            return Err(Error::Input(
                "--max-parallel 0: expected at least 1 array task at a time".into(),
            ))
        }
        Some(k) => format!("0-{}%{k}", n - 1),
        None => format!("0-{}", n - 1),
    };
    lines.push(format!("#SBATCH --array={array}"));
    let cpus = o.cpus_per_task.unwrap_or(1);
    if cpus == 0 {
        return Err(Error::Input(
            "--cpus-per-task 0: expected at least 1 CPU per task".into(),
        ));
    }
    lines.push(format!("#SBATCH --cpus-per-task={cpus}"));
    lines.push("#SBATCH --ntasks=1".into());
    if let Some(t) = &o.time {
        check(
            "time",
            t,
            |c| c.is_ascii_digit() || c == ':' || c == '-',
            "a Slurm time limit such as 30, 1:00:00 or 2-00:00:00",
        )?;
        lines.push(format!("#SBATCH --time={t}"));
    }
    if let Some(p) = &o.partition {
        check(
            "partition",
            p,
            |c| name_char(c) || c == ',',
            "partition names of letters, digits, _ - . and commas",
        )?;
        lines.push(format!("#SBATCH --partition={p}"));
    }
    if let Some(m) = &o.mem {
        check(
            "mem",
            m,
            |c| c.is_ascii_alphanumeric(),
            "a memory size such as 4G or 500M",
        )?;
        lines.push(format!("#SBATCH --mem={m}"));
    }
    if let Some(a) = &o.account {
        check(
            "account",
            a,
            name_char,
            "an account name of letters, digits, _ - .",
        )?;
        lines.push(format!("#SBATCH --account={a}"));
    }
    lines.push(format!("#SBATCH --output={LOG_DIR}/task-%a.out"));
    lines.push("#SBATCH --open-mode=append".into());
    lines.push(String::new());
    lines.push("set -euo pipefail".into());
    lines.push(format!(
        "kinflux={}",
        shell_quote(&kinflux.display().to_string())
    ));
    lines.push(format!(
        "plan={}",
        shell_quote(&plan_dir.display().to_string())
    ));
    lines.push(
        "exec \"$kinflux\" sweep task \"$plan\" --index \"$SLURM_ARRAY_TASK_ID\" --threads \"${SLURM_CPUS_PER_TASK:-1}\""
            .into(),
    );
    lines.push(String::new());
    Ok(lines.join("\n"))
}

/// Write the script into the plan directory; returns its path.
pub fn write(plan_dir: &Path, kinflux: &Path, o: &JobOptions) -> Result<PathBuf> {
    let plan_dir = super::task::absolute(plan_dir)?;
    let plan = Plan::load(&plan_dir)?;
    let text = script(&plan_dir, &plan, kinflux, o)?;
    let logs = plan_dir.join(LOG_DIR);
    std::fs::create_dir_all(&logs).map_err(|e| Error::io(&logs, e))?;
    let path = plan_dir.join(SCRIPT_FILE);
    crate::output::write_atomic(&path, text.as_bytes())?;
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let _ = std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o755));
    }
    Ok(path)
}

/// Submit the script with `sbatch --parsable` from the plan directory; returns the job id.
pub fn submit(plan_dir: &Path) -> Result<String> {
    let out = std::process::Command::new("sbatch")
        .arg("--parsable")
        .arg(SCRIPT_FILE)
        .current_dir(plan_dir)
        .output()
        .map_err(|e| {
            Error::External(format!(
                "sbatch could not be started ({e}); expected Slurm's sbatch on PATH (or submit {} yourself)",
                plan_dir.join(SCRIPT_FILE).display()
            ))
        })?;
    if !out.status.success() {
        return Err(Error::External(format!(
            "sbatch refused the job ({}): {}",
            out.status,
            String::from_utf8_lossy(&out.stderr).trim()
        )));
    }
    let id = String::from_utf8_lossy(&out.stdout)
        .trim()
        .split(';')
        .next()
        .unwrap_or("")
        .to_string();
    crate::output::write_atomic(
        &plan_dir.join("slurm-job-id.txt"),
        format!("{id}\n").as_bytes(),
    )?;
    Ok(id)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quoting_survives_every_special_character() {
        assert_eq!(shell_quote("a b"), "'a b'");
        assert_eq!(shell_quote("it's"), "'it'\\''s'");
        assert_eq!(shell_quote("$(x)`y`"), "'$(x)`y`'");
    }
}
