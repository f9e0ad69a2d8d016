//! Checkpoint and resume: a saved and restored run continues bit-identically, and a run
//! stopped by SIGTERM resumes to the same result as an uninterrupted one.

use crate::util::{fm_case, kinflux, run_in, temp_dir, write};
use kinflux::case;
use kinflux::checkpoint;
use kinflux::numerics::Plan;
use kinflux::simulation::Simulation;

/// Save after k steps, load, continue: identical to the run that never stopped (random
/// streams are keyed by step, so no generator state is needed). DSMC with a He/N2 mixture
/// (rotation, clones, collisions) and field sampling on.
#[test]
fn saved_and_restored_run_continues_bit_identically() {
    let text = fm_case(
        "{ He = 0.4, N2 = 0.6 }",
        "40 Pa",
        "2 Pa",
        "0.2 mm",
        "0.05 mm",
        "molecules_per_cell = 6\n[domain]\nupstream_length = 3\ndownstream_length = 3\nouter_radius = 3",
    )
    .replace("collisions = false", "collisions = true");
    let c = case::parse(&text, "t.toml", &[]).unwrap();
    let mut plan = Plan::new(&c).unwrap();
    plan.startup_steps = 20;
    let mut straight = Simulation::new(plan.clone());
    for _ in 0..120 {
        straight.step();
    }
    let dir = temp_dir();
    let mut first = Simulation::new(plan.clone());
    for _ in 0..55 {
        first.step();
    }
    checkpoint::save(dir.path(), &first, &text, "t.toml", &[]).unwrap();
    let loaded = checkpoint::load(dir.path()).unwrap();
    assert_eq!(loaded.case_text, text);
    let mut resumed = Simulation::resume(plan, loaded.state);
    while resumed.step < 120 {
        resumed.step();
    }
    assert_eq!(straight.flux, resumed.flux);
    assert_eq!(straight.molecules, resumed.molecules);
    assert_eq!(straight.fields, resumed.fields);
    assert_eq!(straight.balance, resumed.balance);
    assert_eq!(straight.collision_stats, resumed.collision_stats);
    // The clones still waiting (radial weighting makes them here), in release order.
    assert!(!straight.pending.is_empty());
    assert_eq!(
        straight.pending.to_vec(straight.step),
        resumed.pending.to_vec(resumed.step)
    );
}

/// `kinflux run` stopped by SIGTERM mid-sampling exits with code 75 after saving; `--resume`
/// finishes it, and summary.json counts every step and gives exactly the uninterrupted result.
#[test]
fn sigterm_then_resume_matches_an_uninterrupted_run() {
    let dir = temp_dir();
    let text = fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0 Pa",
        "0.2 mm",
        "0 mm",
        "molecules = 20000\nmax_steps = 2500",
    )
    .replace("target_uncertainty = 0.003", "target_uncertainty = 0.0001");
    write(dir.path(), "case.toml", &text);
    let whole = run_in(
        dir.path(),
        &["run", "case.toml", "--out", "whole", "--quiet"],
    );
    assert!(
        whole.status.success(),
        "{}",
        String::from_utf8_lossy(&whole.stderr)
    );
    let child = kinflux()
        .args(["run", "case.toml", "--out", "cut", "--quiet"])
        .current_dir(dir.path())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(std::time::Duration::from_millis(1500));
    let killed = std::process::Command::new("kill")
        .args(["-TERM", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(75), "{err}");
    assert!(err.contains("--resume"), "{err}");
    let read = |name: &str| -> serde_json::Value {
        serde_json::from_str(
            &std::fs::read_to_string(dir.path().join(name).join("summary.json")).unwrap(),
        )
        .unwrap()
    };
    let cut = read("cut");
    let stopped_at = cut["run"]["steps"].as_u64().unwrap();
    assert!(
        stopped_at > 50 && stopped_at < 2500,
        "interrupted at step {stopped_at}"
    );
    assert_eq!(cut["run"]["stop_reason"], "interrupted");
    let first_wall = cut["run"]["total_wall_time_s"].as_f64().unwrap();
    let again = run_in(
        dir.path(),
        &["run", "case.toml", "--resume", "cut", "--quiet"],
    );
    assert!(
        again.status.success(),
        "{}",
        String::from_utf8_lossy(&again.stderr)
    );
    let (a, b) = (read("whole"), read("cut"));
    assert_eq!(b["run"]["steps"], 2500);
    assert_eq!(a["run"]["sampling_steps"], b["run"]["sampling_steps"]);
    assert_eq!(
        a["flow"]["mass_flow_rate_kg_s"],
        b["flow"]["mass_flow_rate_kg_s"]
    );
    assert_eq!(
        a["flow"]["mass_flow_rate_ci95_kg_s"],
        b["flow"]["mass_flow_rate_ci95_kg_s"]
    );
    // the resumed run's speed counts the wall time of both invocations
    let (wall, total) = (
        b["run"]["wall_time_s"].as_f64().unwrap(),
        b["run"]["total_wall_time_s"].as_f64().unwrap(),
    );
    assert!(
        (total - (first_wall + wall)).abs() < 1e-9 * total,
        "{total} vs {first_wall} + {wall}"
    );
}

/// Bad resumes: no checkpoint, a different case, an override that would change the physics.
#[test]
fn bad_resume_requests_get_exit_code_2() {
    let dir = temp_dir();
    let text = fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0 Pa",
        "0.2 mm",
        "0 mm",
        "molecules = 5000\nmax_steps = 60",
    );
    write(dir.path(), "case.toml", &text);
    let out = run_in(dir.path(), &["run", "case.toml", "--resume", "nowhere"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--resume nowhere"));
    assert!(
        run_in(dir.path(), &["run", "case.toml", "--out", "r", "--quiet"])
            .status
            .success()
    );
    let out = run_in(
        dir.path(),
        &[
            "run",
            "case.toml",
            "--resume",
            "r",
            "--set",
            "upstream.pressure=1 Pa",
        ],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("would change the physics"));
    write(dir.path(), "case.toml", &text.replace("0.5 Pa", "0.6 Pa"));
    let out = run_in(dir.path(), &["run", "case.toml", "--resume", "r"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("differs from the case saved"));
}
