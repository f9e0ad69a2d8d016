//! Shared helpers: case text builders, running a case through the library, running the CLI.

use kinflux::case;
use kinflux::numerics::Plan;
use kinflux::simulation::Simulation;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A free-molecular case text with the given pieces (pressures and lengths with units).
pub fn fm_case(
    species: &str,
    p_up: &str,
    p_down: &str,
    diameter: &str,
    thickness: &str,
    extra: &str,
) -> String {
    format!(
        r#"
title = "test case"
[gas]
species = {species}
[upstream]
pressure = "{p_up}"
temperature = "295 K"
[downstream]
pressure = "{p_down}"
temperature = "295 K"
[aperture]
shape = "circle"
diameter = "{diameter}"
thickness = "{thickness}"
[walls]
temperature = "295 K"
accommodation = 1.0
[solver]
collisions = false
target_uncertainty = 0.003
max_wall_time = "2 min"
seed = 11
{extra}
"#
    )
}

/// Run a case text to its stopping rule through the library.
pub fn run_case(text: &str) -> (Simulation, kinflux::summary::Summary) {
    let c = case::parse(text, "test.toml", &[]).expect("valid case");
    let plan = Plan::new(&c).expect("plan");
    let mut sim = Simulation::new(plan);
    let outcome = sim.run(std::time::Duration::from_secs(3600), |_, _, _| {});
    let s = kinflux::summary::Summary::new(&sim, &outcome, rayon::current_num_threads());
    (sim, s)
}

/// The kinflux binary built for these tests.
pub fn kinflux() -> Command {
    Command::new(env!("CARGO_BIN_EXE_kinflux"))
}

/// Run the binary with `args` in `dir`.
pub fn run_in(dir: &Path, args: &[&str]) -> Output {
    kinflux()
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run kinflux")
}

/// A fresh temporary directory for one test.
pub fn temp_dir() -> tempfile::TempDir {
    tempfile::tempdir().expect("temp dir")
}

/// Write `text` to `dir/name`, return the path.
pub fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).expect("write");
    p
}

/// Least-squares slope of ys against xs.
pub fn least_squares_slope(xs: &[f64], ys: &[f64]) -> f64 {
    let n = xs.len() as f64;
    let (mx, my) = (xs.iter().sum::<f64>() / n, ys.iter().sum::<f64>() / n);
    let sxy: f64 = xs.iter().zip(ys).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
    sxy / sxx
}
