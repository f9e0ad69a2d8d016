//! Sweeps, replicas, sizing and the Slurm script, through the command line.
//!
//! Physics checks use the free-molecular regime, where the answer is known in closed form:
//! Knudsen effusion through a thin orifice into vacuum, Ṁ_fm = A·p1·sqrt(m/(2πkT)) (Knudsen
//! 1909; e.g. Bird 1994 eq. 4.22 for the one-sided number flux n·c̄/4). The reference values are
//! computed here from the constants, independently of kinflux's analytic layer.

use crate::util::{run_in, temp_dir, write};
use serde_json::Value;
use std::path::Path;

/// A small free-molecular argon case (0.2 mm thin orifice into vacuum, 295 K, 20 000
/// molecules, ±1 % target) as a sweep base.
pub fn base() -> String {
    crate::util::fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0 Pa",
        "0.2 mm",
        "0 mm",
        "molecules = 20000",
    )
    .replace("target_uncertainty = 0.003", "target_uncertainty = 0.01")
    .replace("max_wall_time = \"2 min\"", "max_wall_time = \"5 min\"")
}

const BOLTZMANN: f64 = 1.380_649e-23;
/// Argon: 39.948 g/mol (IUPAC standard atomic weight) / Avogadro.
const ARGON_MASS: f64 = 39.948e-3 / 6.022_140_76e23;

/// Knudsen effusion mass flow through area π d²/4 at p (Pa), 295 K, argon.
fn knudsen(p: f64, d: f64) -> f64 {
    std::f64::consts::PI * d * d / 4.0
        * p
        * (ARGON_MASS / (2.0 * std::f64::consts::PI * BOLTZMANN * 295.0)).sqrt()
}

pub fn ok(out: &std::process::Output) -> String {
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.status.success(), "kinflux failed: {text}");
    text
}

fn json(path: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(path).expect("read json")).expect("json")
}

/// Rows of a CSV file as maps (our CSV has no quoted commas in these columns).
pub fn csv_rows(path: &Path) -> Vec<std::collections::HashMap<String, String>> {
    let text = std::fs::read_to_string(path).expect("read csv");
    let mut lines = text.lines();
    let head: Vec<String> = lines
        .next()
        .expect("header")
        .split(',')
        .map(String::from)
        .collect();
    lines
        .map(|l| {
            head.iter()
                .cloned()
                .zip(l.split(',').map(String::from))
                .collect()
        })
        .collect()
}

pub fn num(row: &std::collections::HashMap<String, String>, k: &str) -> f64 {
    row[k]
        .parse()
        .unwrap_or_else(|_| panic!("{k} = {:?}", row[k]))
}

#[test]
fn pressure_sweep_gives_knudsen_effusion_at_every_point() {
    let dir = temp_dir();
    write(dir.path(), "base.toml", &base());
    // seeds zipped with the pressures, so the three points are independent samples
    write(
        dir.path(),
        "sweep.toml",
        r#"
base = "base.toml"
zip = [["upstream.pressure", "solver.seed"]]
[axes]
"upstream.pressure" = { from = "0.25 Pa", to = "1 Pa", points = 3, spacing = "log" }
"solver.seed" = [11, 12, 13]
"#,
    );
    ok(&run_in(
        dir.path(),
        &["sweep", "plan", "sweep.toml", "--out", "plan"],
    ));
    let manifest = csv_rows(&dir.path().join("plan/manifest.csv"));
    assert_eq!(manifest.len(), 3);
    assert_eq!(manifest[1]["upstream.pressure"], "0.5 Pa");
    assert_eq!(manifest[2]["solver.seed"], "13");
    let first = ok(&run_in(dir.path(), &["sweep", "run", "plan"]));
    assert!(first.contains("3 run, 0 already finished"), "{first}");
    ok(&run_in(dir.path(), &["sweep", "collect", "plan"]));
    let rows = csv_rows(&dir.path().join("plan/results.csv"));
    assert_eq!(rows.len(), 3);
    for (r, p) in rows.iter().zip([0.25, 0.5, 1.0]) {
        assert_eq!(r["status"], "ok");
        let (m, ci) = (num(r, "mass_flow_kg_s"), num(r, "mass_flow_ci95_kg_s"));
        // Knudsen effusion: Ṁ = A p1 sqrt(m/2πkT), so Ṁ/p1 is the same at every point
        let exact = knudsen(p, 0.2e-3);
        assert!(
            (m - exact).abs() <= ci,
            "p1 = {p} Pa: {m:e} ± {ci:e} against Knudsen {exact:e}"
        );
        let (w, wci) = (
            num(r, "reduced_flow_rate_w"),
            num(r, "reduced_flow_rate_ci95"),
        );
        assert!((w - 1.0).abs() <= wci, "W = {w} ± {wci}");
        assert!(num(r, "throughput_sccm") > 0.0 && num(r, "rarefaction_delta") > 0.0);
    }
    for f in [
        "results.h5",
        "w_vs_rarefaction.svg",
        "mass_flow_vs_pressure.svg",
    ] {
        assert!(dir.path().join("plan").join(f).is_file(), "{f} missing");
    }
    // finished cases are skipped; a case whose result is gone resumes from its checkpoint
    let steps_before = json(&dir.path().join("plan/runs/case-0001/summary.json"))["run"]["steps"]
        .as_u64()
        .unwrap();
    std::fs::remove_file(dir.path().join("plan/runs/case-0001/summary.json")).unwrap();
    let again = ok(&run_in(dir.path(), &["sweep", "run", "plan"]));
    assert!(again.contains("1 run, 2 already finished"), "{again}");
    let steps_after = json(&dir.path().join("plan/runs/case-0001/summary.json"))["run"]["steps"]
        .as_u64()
        .unwrap();
    assert!(
        steps_after >= steps_before,
        "{steps_after} < {steps_before}"
    );
}

#[test]
fn collect_lists_missing_cases_instead_of_dropping_them() {
    let dir = temp_dir();
    write(dir.path(), "base.toml", &base());
    write(
        dir.path(),
        "sweep.toml",
        "base = \"base.toml\"\nreplicas = [1, 2]\n[axes]\n\"upstream.pressure\" = [\"0.5 Pa\", \"1 Pa\"]\n",
    );
    ok(&run_in(
        dir.path(),
        &["sweep", "plan", "sweep.toml", "--out", "plan"],
    ));
    // only task 0 (case 0) and task 1 (replica 1/2 of case 1) run
    for i in ["0", "1"] {
        ok(&run_in(
            dir.path(),
            &["sweep", "task", "plan", "--index", i, "--threads", "1"],
        ));
    }
    let text = ok(&run_in(dir.path(), &["sweep", "collect", "plan"]));
    assert!(text.contains("collected 1 of 2 cases"), "{text}");
    assert!(text.contains("case-0001 partial"), "{text}");
    let rows = csv_rows(&dir.path().join("plan/results.csv"));
    assert_eq!(rows.len(), 2);
    assert_eq!(rows[1]["status"], "partial");
    assert!(rows[1]["note"].contains("replica 2/2 not run"));
    let bad = run_in(dir.path(), &["sweep", "task", "plan", "--index", "7"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("--index 7"));
}

#[test]
fn merged_replicas_shrink_the_interval_like_one_over_root_n() {
    let dir = temp_dir();
    write(dir.path(), "base.toml", &base());
    let n = 4;
    let mut single = Vec::new();
    for k in 1..=n {
        let out = format!("r{k}");
        let replica = format!("{k}/{n}");
        // a fixed step budget, so every replica has the same length
        ok(&run_in(
            dir.path(),
            &[
                "run",
                "base.toml",
                "--out",
                &out,
                "--replica",
                &replica,
                "--threads",
                "1",
                "--quiet",
                "--set",
                "solver.max_steps=1400",
                "--set",
                "solver.target_uncertainty=0.0001",
            ],
        ));
        let s = json(&dir.path().join(&out).join("summary.json"));
        assert_eq!(s["run"]["replica"], replica.as_str());
        single.push(s["flow"]["mass_flow_rate_ci95_kg_s"].as_f64().unwrap());
    }
    ok(&run_in(
        dir.path(),
        &["merge", "r1", "r2", "r3", "r4", "--out", "merged"],
    ));
    let m = json(&dir.path().join("merged/summary.json"));
    assert_eq!(m["run"]["replicas_merged"], 4);
    let merged = m["flow"]["mass_flow_rate_ci95_kg_s"].as_f64().unwrap();
    let one = single.iter().sum::<f64>() / n as f64;
    let expected = one / (n as f64).sqrt();
    // the merged half-width within 25 % of (single-replica half-width)/sqrt(N) (issue 6)
    assert!(
        (merged / expected - 1.0).abs() <= 0.25,
        "merged {merged:e}, single {one:e}, expected {expected:e}"
    );
    // and the merged flow is still Knudsen's (Knudsen effusion)
    let mdot = m["flow"]["mass_flow_rate_kg_s"].as_f64().unwrap();
    let exact = knudsen(0.5, 0.2e-3);
    assert!(
        (mdot - exact).abs() <= merged * 1.5,
        "{mdot:e} vs {exact:e}"
    );
    assert!(dir.path().join("merged/replicas.csv").is_file());
    // the same replica twice, or a different case, is refused
    let twice = run_in(dir.path(), &["merge", "r1", "r1", "--out", "m2"]);
    assert_eq!(twice.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&twice.stderr).contains("same replica"));
    ok(&run_in(
        dir.path(),
        &[
            "run",
            "base.toml",
            "--out",
            "other",
            "--replica",
            "2/2",
            "--quiet",
            "--set",
            "upstream.pressure=1 Pa",
            "--set",
            "solver.max_steps=200",
        ],
    ));
    let other = run_in(dir.path(), &["merge", "r1", "other", "--out", "m3"]);
    assert_eq!(other.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&other.stderr).contains("different case"));
}

#[test]
fn free_molecular_sizing_returns_the_knudsen_diameter() {
    let dir = temp_dir();
    write(dir.path(), "base.toml", &base());
    let target = 4.0e-11; // kg/s
    let out = ok(&run_in(
        dir.path(),
        &[
            "size",
            "base.toml",
            "--target-flow",
            "4e-11 kg/s",
            "--json",
            "--threads",
            "1",
        ],
    ));
    let json_start = out.find('{').expect("json in output");
    let r: Value = serde_json::from_str(out[json_start..].trim()).expect("json");
    let d = r["diameter_m"].as_f64().unwrap();
    let ci = r["diameter_ci95_m"].as_f64().unwrap();
    assert!(r["converged"].as_bool().unwrap());
    // Knudsen effusion, Ṁ_fm ∝ D²: the exact diameter for the target at 0.5 Pa
    let exact = 0.2e-3 * (target / knudsen(0.5, 0.2e-3)).sqrt();
    assert!(
        (d - exact).abs() <= ci,
        "D = {d:e} ± {ci:e}, exact {exact:e}"
    );
    assert!(ci > 0.0 && ci < 0.01 * d, "uncertainty {ci:e}");
    // Ṁ_fm(D) equals the target within the reported uncertainty (relative 2·δD/D)
    let rel = (knudsen(0.5, d) / target - 1.0).abs();
    assert!(rel <= 2.0 * ci / d, "Ṁ_fm(D)/target − 1 = {rel:e}");
    assert!(!r["runs"].as_array().unwrap().is_empty());
    assert!(dir.path().join("runs/base-sizing/sizing.json").is_file());
    // the trade's units are accepted; a wrong unit is a clear error
    let bad = run_in(
        dir.path(),
        &["size", "base.toml", "--target-flow", "5 Pa", "--out", "x"],
    );
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("--target-flow 5 Pa"));
}

/// (what, sweep file text, fragments the message must contain)
const BAD_SWEEPS: &[(&str, &str, &[&str])] = &[
    (
        "unknown top-level key",
        "base = \"base.toml\"\nrepeats = 2\n[axes]\n\"upstream.pressure\" = [\"1 Pa\"]\n",
        &["sweep.toml", "repeats", "expected only base, axes, zip and replicas"],
    ),
    (
        "unknown case key in an axis",
        "base = \"base.toml\"\n[axes]\n\"upstream.presure\" = [\"1 Pa\"]\n",
        &["sweep.toml", "upstream.presure"],
    ),
    (
        "empty axis",
        "base = \"base.toml\"\n[axes]\n\"upstream.pressure\" = []\n",
        &["sweep.toml", "axes.\"upstream.pressure\"", "at least one value"],
    ),
    (
        "unit mismatch in a list",
        "base = \"base.toml\"\n[axes]\n\"upstream.pressure\" = [\"1 Pa\", \"300 K\"]\n",
        &["sweep.toml", "upstream.pressure", "300 K", "pressure"],
    ),
    (
        "unit mismatch in a range",
        "base = \"base.toml\"\n[axes]\n\"upstream.pressure\" = { from = \"1 Pa\", to = \"300 K\", points = 3 }\n",
        &["sweep.toml", "to", "300 K", "same quantity as `from` (Pa)"],
    ),
    (
        "zipped axes of different lengths",
        "base = \"base.toml\"\nzip = [[\"upstream.pressure\", \"solver.seed\"]]\n[axes]\n\"upstream.pressure\" = [\"1 Pa\", \"2 Pa\"]\n\"solver.seed\" = [1, 2, 3]\n",
        &["sweep.toml", "zip", "has 2", "has 3", "same number of values"],
    ),
    (
        "missing base",
        "[axes]\n\"upstream.pressure\" = [\"1 Pa\"]\n",
        &["sweep.toml", "base"],
    ),
    (
        "no axes",
        "base = \"base.toml\"\n[axes]\n",
        &["sweep.toml", "axes", "at least one axis"],
    ),
    (
        "replicas per point of the wrong length",
        "base = \"base.toml\"\nreplicas = [1, 2]\n[axes]\n\"upstream.pressure\" = [\"1 Pa\", \"2 Pa\", \"3 Pa\"]\n",
        &["sweep.toml", "replicas", "3 points"],
    ),
];

#[test]
fn bad_sweep_files_get_clear_errors_and_exit_code_2() {
    let dir = temp_dir();
    write(dir.path(), "base.toml", &base());
    for (what, text, fragments) in BAD_SWEEPS {
        write(dir.path(), "sweep.toml", text);
        let out = run_in(
            dir.path(),
            &["sweep", "plan", "sweep.toml", "--out", "plan", "--force"],
        );
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{what}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{what}: one line: {err}");
        for f in *fragments {
            assert!(err.contains(f), "{what}: `{f}` missing from: {err}");
        }
        assert!(!err.contains("panicked"), "{what}: {err}");
        assert!(
            !dir.path().join("plan/plan.json").exists(),
            "{what}: a plan was written"
        );
    }
}

#[test]
fn slurm_script_quotes_paths_and_keeps_case_text_out() {
    let dir = temp_dir();
    // a title that would run commands if it reached the shell
    let evil_title = "x $(touch PWNED1) `touch PWNED2` '; touch PWNED3; '\\nline two \\\"q\\\"";
    let base = base().replace(
        "title = \"test case\"",
        &format!("title = \"{evil_title}\""),
    );
    write(dir.path(), "base.toml", &base);
    write(
        dir.path(),
        "sweep.toml",
        "base = \"base.toml\"\n[axes]\n\"upstream.pressure\" = [\"0.5 Pa\"]\n",
    );
    let plan_name = "it's a \"plan\" $HOME `x`";
    ok(&run_in(
        dir.path(),
        &["sweep", "plan", "sweep.toml", "--out", plan_name],
    ));
    // the binary behind a path with the same hazards
    let bin_dir = dir.path().join("bin $x 'y'");
    std::fs::create_dir_all(&bin_dir).unwrap();
    let bin = bin_dir.join("kin flux");
    std::os::unix::fs::symlink(env!("CARGO_BIN_EXE_kinflux"), &bin).unwrap();
    ok(&run_in(
        dir.path(),
        &[
            "sweep",
            "slurm",
            plan_name,
            "--kinflux",
            bin.to_str().unwrap(),
            "--time",
            "0:30:00",
            "--partition",
            "debug",
        ],
    ));
    let plan = dir.path().join(plan_name);
    let script = std::fs::read_to_string(plan.join("sweep.sbatch")).unwrap();
    assert!(script.contains("#SBATCH --array=0-0"), "{script}");
    assert!(script.contains("#SBATCH --time=0:30:00"));
    assert!(script.contains("#SBATCH --partition=debug"));
    assert!(!script.contains("PWNED"), "case text reached the script");
    let check = std::process::Command::new("bash")
        .arg("-n")
        .arg(plan.join("sweep.sbatch"))
        .output()
        .unwrap();
    assert!(check.status.success(), "{:?}", check);
    // run the script as an array task would, from an unrelated directory
    let elsewhere = temp_dir();
    let run = std::process::Command::new("bash")
        .arg(plan.join("sweep.sbatch"))
        .env("SLURM_ARRAY_TASK_ID", "0")
        .env("SLURM_CPUS_PER_TASK", "1")
        .current_dir(elsewhere.path())
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}{}",
        String::from_utf8_lossy(&run.stdout),
        String::from_utf8_lossy(&run.stderr)
    );
    assert!(plan.join("runs/case-0000/summary.json").is_file());
    for d in [dir.path(), elsewhere.path(), plan.as_path()] {
        for k in 1..=3 {
            assert!(!d.join(format!("PWNED{k}")).exists(), "injection ran");
        }
    }
    // option values that could break the #SBATCH lines are refused
    let bad = run_in(
        dir.path(),
        &[
            "sweep",
            "slurm",
            plan_name,
            "--partition",
            "a b\n#SBATCH --x",
        ],
    );
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("--partition"));
}
