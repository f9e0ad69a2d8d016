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

/// Run a collisionless case `text` for `steps` steps and compare the density of the cells on the
/// axis (the first radial row) with collisionless theory, `frac(d)` being the fraction of
/// directions from the axis point at distance d from the plate that see the upstream gas
/// through the opening: n = n1 (1 − frac) upstream, n1 frac downstream. Cells closer than 0.4 a
/// are skipped (too close to the opening for a cell average). Each cell must agree within
/// `tolerance`, or within four standard errors of its sampled count where that is wider (the
/// sparse far cells), the count divided by `correlation` (2 where delayed clones repeat their
/// originals' trajectories, 1 without radial weighting). Returns the number of cells checked.
pub fn check_axis_density(
    text: &str,
    steps: u64,
    frac: impl Fn(f64) -> f64,
    tolerance: f64,
    correlation: f64,
) -> usize {
    let c = case::parse(text, "t.toml", &[]).expect("valid case");
    let mut sim = Simulation::new(Plan::new(&c).expect("plan"));
    while sim.step < steps {
        sim.step();
    }
    let f = sim.fields.fields(&sim.plan);
    let g = &sim.plan.grid;
    let a = c.aperture.radius();
    let n1 = c.upstream.pressure / (kinflux::constants::BOLTZMANN * c.upstream.temperature);
    let nr = g.r.len();
    let mut checked = 0;
    for iz in 0..g.z.len() {
        let z = g.z.center(iz);
        let d = z.abs();
        if d < 0.4 * a {
            continue;
        }
        let expected = if z < 0.0 {
            n1 * (1.0 - frac(d))
        } else {
            n1 * frac(d)
        };
        let got = f.number_density[iz * nr];
        let samples = f.samples[iz * nr];
        let tol = (4.0 * (correlation / samples).sqrt()).max(tolerance);
        assert!(
            (got / expected - 1.0).abs() < tol,
            "z = {:.2} a: n = {got:e}, theory {expected:e} ({samples} samples, tolerance {tol})",
            z / a
        );
        checked += 1;
    }
    checked
}
