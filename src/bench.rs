//! The benchmark: fixed reference workloads run in-process, so that speed can be compared
//! across commits and machines, beside the machine's measured memory bandwidth.
//!
//! Workload (a): free-molecular moves only (argon orifice, collisions off, 200 000 molecules).
//! Workload (b): a collisional orifice at δ ≈ 1 (argon into vacuum, default DSMC numerics) with
//! moves, sorting and collisions. Each runs a fixed number of warm-up and timed steps from a
//! fixed seed, so the work is identical every time. Memory bandwidth is measured by copying a
//! 256 MiB buffer (single thread and all threads). Memory per molecule is measured on case (b)
//! run with ten times the molecules, where the program and the per-cell arrays no longer
//! dominate the resident memory. Nothing here asserts on time.

use crate::case;
use crate::numerics::Plan;
use crate::particles::Molecules;
use crate::simulation::{Simulation, StageTimes};
use rayon::prelude::*;
use serde::Serialize;
use std::time::Instant;

/// The free-molecular workload's case.
pub const FREE_MOLECULAR_CASE: &str = r#"
title = "benchmark (a): free-molecular argon orifice"
[gas]
species = { Ar = 1.0 }
[upstream]
pressure = "0.5 Pa"
temperature = "295 K"
[downstream]
pressure = "0 Pa"
[aperture]
diameter = "0.2 mm"
thickness = "0.1 mm"
[solver]
collisions = false
molecules = 200000
seed = 1
"#;

/// The collisional workload's case: δ ≈ 1.
pub const DSMC_CASE: &str = r#"
title = "benchmark (b): argon orifice at delta = 1"
[gas]
species = { Ar = 1.0 }
[upstream]
pressure = "79.06 Pa"
temperature = "295 K"
[downstream]
pressure = "0 Pa"
[aperture]
diameter = "0.2 mm"
thickness = "0 mm"
[solver]
collisions = true
seed = 1
"#;

/// Result of one workload.
#[derive(Debug, Clone, Serialize)]
pub struct WorkloadResult {
    pub name: &'static str,
    pub steps: u64,
    pub mean_molecules: f64,
    pub wall_time_s: f64,
    pub particle_steps_per_s: f64,
    pub particle_steps_per_s_per_core: f64,
    pub collisions_per_s: f64,
    pub stage_times: StageTimes,
    /// Bytes of the molecule arrays per molecule (structure of arrays, one copy).
    pub array_bytes_per_molecule: usize,
    /// Heap held by every per-molecule buffer of the simulation (the arrays and the sort's
    /// reused scratch, at their allocated capacity) over the molecule count at the end.
    pub buffer_bytes_per_molecule: f64,
    /// Resident memory of the whole process divided by the molecule count at the end
    /// (includes the program, its libraries and the per-cell arrays, so it falls as the
    /// molecule count grows).
    pub resident_bytes_per_molecule: f64,
    /// Growth of the resident memory from just before the simulation was built to the end of
    /// the timed steps, over the molecule count at the end: what the run itself costs.
    pub resident_growth_bytes_per_molecule: f64,
    /// Model of the bytes moved per particle-step (array passes × bytes per molecule).
    pub modelled_bytes_per_particle_step: f64,
    /// Achieved (modelled) bytes per second over the measured copy bandwidth.
    pub fraction_of_copy_bandwidth: f64,
}

/// The whole benchmark report.
#[derive(Debug, Clone, Serialize)]
pub struct BenchReport {
    pub kinflux_version: &'static str,
    pub threads: usize,
    pub copy_bandwidth_single_thread_gb_s: f64,
    pub copy_bandwidth_all_threads_gb_s: f64,
    pub workloads: Vec<WorkloadResult>,
    /// Memory of a steady run large enough that per-molecule memory dominates (not measured
    /// when only one workload runs).
    pub memory: Option<MemoryResult>,
}

/// Resident memory of the collisional case run with ten times the molecules.
#[derive(Debug, Clone, Serialize)]
pub struct MemoryResult {
    pub molecules: u64,
    pub steps: u64,
    /// Growth of the process's resident memory from before the simulation was built to the
    /// end of the steps, over the molecule count.
    pub resident_growth_bytes_per_molecule: f64,
    /// Heap of the per-molecule buffers at capacity over the molecule count.
    pub buffer_bytes_per_molecule: f64,
}

/// Case (b) with 150 instead of 15 molecules per upstream cell (about 350 000 molecules), so
/// that the per-cell arrays and the program weigh little per molecule; `steps` steps.
pub fn memory(steps: u64) -> MemoryResult {
    let rss0 = resident_bytes().unwrap_or(f64::NAN);
    let c = case::parse(
        DSMC_CASE,
        "memory",
        &["solver.molecules_per_cell=150".to_string()],
    )
    .expect("benchmark case is valid");
    let mut sim = Simulation::new(Plan::new(&c).expect("benchmark plan"));
    for _ in 0..steps {
        sim.step();
    }
    let n = sim.population().max(1) as f64;
    let rss = resident_bytes().unwrap_or(f64::NAN);
    MemoryResult {
        molecules: sim.population(),
        steps,
        resident_growth_bytes_per_molecule: (rss - rss0) / n,
        buffer_bytes_per_molecule: sim.molecule_buffer_bytes() as f64 / n,
    }
}

/// Memory bandwidth of a buffer copy, GB/s (bytes read + bytes written, per second).
pub fn copy_bandwidth(parallel: bool) -> f64 {
    let n = 32 * 1024 * 1024; // 32 Mi f64 = 256 MiB
    let src: Vec<f64> = (0..n).map(|i| i as f64).collect();
    let mut dst = vec![0.0f64; n];
    let mut best = f64::INFINITY;
    for _ in 0..5 {
        let t0 = Instant::now();
        if parallel {
            dst.par_chunks_mut(1 << 16)
                .zip(src.par_chunks(1 << 16))
                .for_each(|(d, s)| d.copy_from_slice(s));
        } else {
            dst.copy_from_slice(&src);
        }
        best = best.min(t0.elapsed().as_secs_f64());
        std::hint::black_box(&dst);
    }
    2.0 * (n * 8) as f64 / best / 1e9
}

/// Resident set size of this process, bytes (Linux /proc; None elsewhere).
pub fn resident_bytes() -> Option<f64> {
    let statm = std::fs::read_to_string("/proc/self/statm").ok()?;
    let pages: f64 = statm.split_whitespace().nth(1)?.parse().ok()?;
    Some(pages * 4096.0)
}

/// Run one workload: `warmup` untimed steps, then `steps` timed ones.
pub fn workload(
    name: &'static str,
    text: &str,
    warmup: u64,
    steps: u64,
    threads: usize,
    bandwidth: f64,
) -> WorkloadResult {
    let rss0 = resident_bytes().unwrap_or(f64::NAN);
    let c = case::parse(text, name, &[]).expect("benchmark case is valid");
    let mut plan = Plan::new(&c).expect("benchmark plan");
    plan.startup_steps = warmup; // collision counters start with the timed steps
    let mut sim = Simulation::new(plan);
    for _ in 0..warmup {
        sim.step();
    }
    let ps0 = sim.particle_steps;
    let times0 = sim.times;
    let t0 = Instant::now();
    for _ in 0..steps {
        sim.step();
    }
    let wall = t0.elapsed().as_secs_f64();
    let ps = (sim.particle_steps - ps0) as f64;
    let mut st = sim.times;
    st.release_s -= times0.release_s;
    st.move_s -= times0.move_s;
    st.compact_s -= times0.compact_s;
    st.inject_s -= times0.inject_s;
    st.sort_s -= times0.sort_s;
    st.collide_s -= times0.collide_s;
    st.record_s -= times0.record_s;
    st.sample_s -= times0.sample_s;
    let array_bytes = Molecules::BYTES_PER_MOLECULE;
    // Bytes moved per particle-step, modelled from the passes over the arrays (b bytes per
    // molecule): the move reads and writes them (2b); with collisions it also writes the sort
    // keys (4), the sort counts them (4), reads them again to write the permutation (8) and
    // gathers the columns through it (read and write each gathered column, plus 4 for its
    // permutation entry; a one-species gas rewrites its 1-byte species column instead, a gas
    // without rotational modes leaves its 4-byte rotational energies as they are), then the
    // collision stage and the sampling read the arrays once each (2b); without collisions the
    // gaps are closed (2b) and the sampling reads them (b).
    let b = array_bytes as f64;
    let one_species = sim.plan.masses.len() == 1;
    let no_rotation = sim.plan.rot_dof.iter().all(|&d| d == 0);
    let (mut gathered_bytes, mut gathered_columns) = (b, 7.0);
    if one_species {
        gathered_bytes -= 1.0;
        gathered_columns -= 1.0;
    }
    if no_rotation {
        gathered_bytes -= 4.0;
        gathered_columns -= 1.0;
    }
    let species_rewrite = if one_species { 1.0 } else { 0.0 };
    let modelled = if sim.plan.collisions.is_some() {
        2.0 * b
            + 4.0
            + (4.0 + 8.0 + 2.0 * gathered_bytes + 4.0 * gathered_columns + species_rewrite)
            + 2.0 * b
    } else {
        2.0 * b + 2.0 * b + b
    };
    let rate = ps / wall;
    let molecules = sim.population().max(1) as f64;
    let rss = resident_bytes().unwrap_or(f64::NAN);
    WorkloadResult {
        name,
        steps,
        mean_molecules: ps / steps as f64,
        wall_time_s: wall,
        particle_steps_per_s: rate,
        particle_steps_per_s_per_core: rate / threads as f64,
        collisions_per_s: sim.collision_stats.collisions as f64 / wall,
        stage_times: st,
        array_bytes_per_molecule: array_bytes,
        buffer_bytes_per_molecule: sim.molecule_buffer_bytes() as f64 / molecules,
        resident_bytes_per_molecule: rss / molecules,
        resident_growth_bytes_per_molecule: (rss - rss0) / molecules,
        modelled_bytes_per_particle_step: modelled,
        fraction_of_copy_bandwidth: rate * modelled / (bandwidth * 1e9),
    }
}

/// Which workloads to run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Selection {
    All,
    /// Workload (a) only.
    FreeMolecular,
    /// Workload (b) only.
    Dsmc,
}

/// Run the benchmark on the current rayon pool. The memory measurement runs first and (b)
/// before (a): each resident-memory growth is then not hidden by heap that a larger run before
/// it has freed.
pub fn run(threads: usize, selection: Selection) -> BenchReport {
    let single = copy_bandwidth(false);
    let all = copy_bandwidth(true);
    let memory = (selection == Selection::All).then(|| memory(50));
    let mut workloads = Vec::new();
    if selection != Selection::FreeMolecular {
        workloads.push(workload(
            "dsmc_orifice_delta_1",
            DSMC_CASE,
            300,
            600,
            threads,
            all,
        ));
    }
    if selection != Selection::Dsmc {
        workloads.push(workload(
            "free_molecular_moves",
            FREE_MOLECULAR_CASE,
            50,
            300,
            threads,
            all,
        ));
    }
    workloads.reverse();
    BenchReport {
        kinflux_version: env!("CARGO_PKG_VERSION"),
        threads,
        copy_bandwidth_single_thread_gb_s: single,
        copy_bandwidth_all_threads_gb_s: all,
        workloads,
        memory,
    }
}
