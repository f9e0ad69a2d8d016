//! Bad input, table-driven: every mistake gets one clear line naming the file, the key, the
//! value and what was expected, exit code 2, no panic, and no result files.

use crate::util::{run_in, temp_dir, write};

const GOOD: &str = r#"
title = "error table base"
[gas]
species = { Ar = 1.0 }
[upstream]
pressure = "0.5 Pa"
temperature = "295 K"
[downstream]
pressure = "0 Pa"
temperature = "295 K"
[aperture]
shape = "circle"
diameter = "0.2 mm"
thickness = "0 mm"
[walls]
temperature = "295 K"
accommodation = 1.0
[solver]
collisions = false
target_uncertainty = 0.01
max_wall_time = "10 min"
seed = 1
"#;

/// (what, text replaced, replacement, fragments the message must contain)
const TABLE: &[(&str, &str, &str, &[&str])] = &[
    (
        "missing key",
        "pressure = \"0.5 Pa\"\n",
        "",
        &["upstream.pressure", "missing", "pressure"],
    ),
    (
        "unknown key",
        "accommodation = 1.0",
        "accomodation = 1.0",
        &["walls.accomodation", "unknown key", "accommodation"],
    ),
    (
        "unknown section",
        "[solver]",
        "[solvr]",
        &["solvr", "unknown key"],
    ),
    (
        "unknown gas",
        "{ Ar = 1.0 }",
        "{ Argon = 1.0 }",
        &["gas.species.Argon", "unknown gas", "Ar"],
    ),
    (
        "negative pressure",
        "pressure = \"0 Pa\"",
        "pressure = \"-1 Pa\"",
        &["downstream.pressure", "-1 Pa", "0 (vacuum) or more"],
    ),
    (
        "zero upstream pressure",
        "pressure = \"0.5 Pa\"",
        "pressure = \"0 Pa\"",
        &["upstream.pressure", "above 0"],
    ),
    (
        "downstream above upstream",
        "pressure = \"0 Pa\"",
        "pressure = \"2 Pa\"",
        &["downstream.pressure", "2 Pa", "not above upstream.pressure"],
    ),
    (
        "unit missing",
        "diameter = \"0.2 mm\"",
        "diameter = \"0.2\"",
        &["aperture.diameter", "\"0.2\"", "no unit"],
    ),
    (
        "wrong dimension",
        "diameter = \"0.2 mm\"",
        "diameter = \"0.2 Pa\"",
        &["aperture.diameter", "0.2 Pa", "length"],
    ),
    (
        "number without quotes",
        "diameter = \"0.2 mm\"",
        "diameter = 0.2",
        &["aperture.diameter", "0.2", "quoted string with a unit"],
    ),
    (
        "negative thickness",
        "thickness = \"0 mm\"",
        "thickness = \"-0.1 mm\"",
        &["aperture.thickness", "-0.1 mm", "0 (thin orifice) or more"],
    ),
    (
        "fractions not summing to 1",
        "{ Ar = 1.0 }",
        "{ Ar = 0.5, He = 0.4 }",
        &["gas.species", "summing to 1", "0.9"],
    ),
    (
        "temperature below 0 K",
        "temperature = \"295 K\"\n[downstream]",
        "temperature = \"-300 °C\"\n[downstream]",
        &["upstream.temperature", "-300 °C", "above 0 K"],
    ),
    (
        "accommodation out of range",
        "accommodation = 1.0",
        "accommodation = 1.5",
        &["walls.accommodation", "1.5", "between 0"],
    ),
    (
        "bad shape",
        "shape = \"circle\"",
        "shape = \"square\"",
        &["aperture.shape", "square", "circle"],
    ),
    (
        "slit given a diameter",
        "shape = \"circle\"",
        "shape = \"slit\"",
        &["aperture.diameter", "slit", "width"],
    ),
    (
        "bad uncertainty",
        "target_uncertainty = 0.01",
        "target_uncertainty = 0",
        &["solver.target_uncertainty", "between 0 and 1"],
    ),
    (
        "bad time unit",
        "max_wall_time = \"10 min\"",
        "max_wall_time = \"10 m\"",
        &["solver.max_wall_time", "10 m", "time"],
    ),
    (
        "not TOML",
        "[walls]",
        "[walls",
        &["case.toml", "not valid TOML"],
    ),
];

#[test]
fn each_bad_input_gets_one_clear_line_and_exit_code_2() {
    let dir = temp_dir();
    for (what, from, to, fragments) in TABLE {
        assert!(GOOD.contains(from), "{what}: table entry does not apply");
        let text = GOOD.replacen(from, to, 1);
        write(dir.path(), "case.toml", &text);
        for args in [
            &["check", "case.toml"][..],
            &["estimate", "case.toml"],
            &["run", "case.toml", "--out", "res"],
        ] {
            let cmd = args[0];
            let out = run_in(dir.path(), args);
            let err = String::from_utf8_lossy(&out.stderr);
            assert_eq!(
                out.status.code(),
                Some(2),
                "{what} ({cmd}): exit code; stderr: {err}"
            );
            assert!(!err.contains("panicked"), "{what}: panic: {err}");
            let line = err
                .lines()
                .find(|l| l.starts_with("kinflux: error:"))
                .unwrap_or_else(|| panic!("{what}: no error line in {err}"));
            assert!(
                line.contains("case.toml"),
                "{what}: message does not name the file: {line}"
            );
            for f in fragments.iter() {
                assert!(line.contains(f), "{what}: message lacks {f:?}: {line}");
            }
            assert!(
                !dir.path().join("res").exists(),
                "{what}: output directory created for bad input"
            );
        }
    }
}

#[test]
fn bad_overrides_and_unusable_output_get_exit_code_2() {
    let dir = temp_dir();
    write(dir.path(), "case.toml", GOOD);
    // override with a wrong unit
    let out = run_in(
        dir.path(),
        &["check", "case.toml", "--set", "upstream.pressure=5 mm"],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("upstream.pressure"));
    // override that is not key=value
    let out = run_in(
        dir.path(),
        &["check", "case.toml", "--set", "upstream.pressure"],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("key=value"));
    // missing case file
    let out = run_in(dir.path(), &["check", "nope.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("nope.toml"));
    // output location that is a file
    write(dir.path(), "occupied", "x");
    let out = run_in(dir.path(), &["run", "case.toml", "--out", "occupied"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--out occupied"));
    // output directory that cannot be created (parent is a file)
    let out = run_in(dir.path(), &["run", "case.toml", "--out", "occupied/sub"]);
    assert_eq!(
        out.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(String::from_utf8_lossy(&out.stderr).contains("occupied/sub"));
}

#[test]
fn overrides_change_the_case_and_earlier_results_are_kept() {
    let dir = temp_dir();
    write(dir.path(), "case.toml", GOOD);
    let quick = ["--set", "solver.max_steps=40", "--quiet"];
    let mut args = vec![
        "run",
        "case.toml",
        "--out",
        "res",
        "--set",
        "upstream.pressure=0.25 Pa",
    ];
    args.extend(quick);
    let out = run_in(dir.path(), &args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("res/summary.json")).unwrap(),
    )
    .unwrap();
    for key in [
        "mass_flow_rate_kg_s",
        "mass_flow_rate_ci95_kg_s",
        "reduced_flow_rate",
        "reduced_flow_rate_ci95",
        "throughput_pa_m3_s",
        "throughput_sccm",
        "conductance_l_s",
    ] {
        assert!(summary["flow"].get(key).is_some(), "flow.{key} missing");
    }
    assert!(summary["flow"]["species"][0]["name"] == "Ar");
    // history.csv: a header and one row per step
    let history = std::fs::read_to_string(dir.path().join("res/history.csv")).unwrap();
    assert!(history
        .starts_with("step,time_s,molecules,mass_flow_kg_s,running_mean_kg_s,running_ci95_kg_s"));
    assert_eq!(
        history.lines().count() as u64,
        1 + summary["run"]["steps"].as_u64().unwrap()
    );
    assert!(summary["regime"]["rarefaction_parameter"].is_number());
    assert!(summary["regime"]["knudsen_number"].is_number());
    for key in ["steps", "wall_time_s", "particle_steps_per_s"] {
        assert!(summary["run"][key].is_number(), "run.{key} missing");
    }
    // the override reached the physics: free-molecular flow is proportional to p1
    let fm = summary["reference"]["free_molecular_mass_flow_kg_s"]
        .as_f64()
        .unwrap();
    let gas = kinflux::gas::lookup("Ar").unwrap();
    let expected = kinflux::analytic::effusion_mass_flow(
        &kinflux::gas::Mixture {
            components: vec![kinflux::gas::Component {
                species: gas,
                mole_fraction: 1.0,
            }],
        },
        0.25,
        295.0,
        std::f64::consts::PI * 1e-8,
    );
    assert!((fm / expected - 1.0).abs() < 1e-12);
    // a second run into the same directory is refused and leaves the first result alone
    let before = std::fs::read(dir.path().join("res/summary.json")).unwrap();
    let mut args = vec!["run", "case.toml", "--out", "res"];
    args.extend(quick);
    let out = run_in(dir.path(), &args);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--force"));
    assert_eq!(
        before,
        std::fs::read(dir.path().join("res/summary.json")).unwrap()
    );
}
