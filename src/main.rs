//! `kinflux` command line: a thin layer over the engine library.
//!
//! Exit codes: 0 success, 2 bad input or unusable output location (message names the file,
//! key, value and expectation), 1 any other failure.

use clap::{Parser, Subcommand};
use kinflux::{case, gas, numerics::Plan, output, simulation::Simulation, summary::Summary};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Duration;

#[derive(Parser)]
#[command(
    name = "kinflux",
    version,
    about = "DSMC flow through small apertures: orifices and short tubes from free-molecular to near-continuum"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Simulate a case and write summary.json into the output directory.
    Run {
        /// Case file (TOML).
        case: PathBuf,
        /// Output directory (default: runs/<case name>).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Override a case value, e.g. --set upstream.pressure="10 Pa" (repeatable).
        #[arg(long = "set", value_name = "KEY=VALUE")]
        set: Vec<String>,
        /// Worker threads (default: all cores). Results do not depend on it.
        #[arg(long)]
        threads: Option<usize>,
        /// Overwrite an output directory that already holds results.
        #[arg(long)]
        force: bool,
        /// Print only the final result.
        #[arg(long)]
        quiet: bool,
        /// Continue the run saved in this directory (its checkpoint.bin); statistics include
        /// every sample before and after. Only solver budgets may be changed with --set.
        #[arg(long, value_name = "DIR")]
        resume: Option<PathBuf>,
    },
    /// Validate a case and print the derived regime and numerics without running.
    Check {
        /// Case file (TOML).
        case: PathBuf,
        /// Override a case value, e.g. --set upstream.pressure="10 Pa" (repeatable).
        #[arg(long = "set", value_name = "KEY=VALUE")]
        set: Vec<String>,
    },
    /// Analytic estimates (mean free path, Kn, δ, free-molecular and isentropic flow).
    Estimate {
        /// Case file (TOML).
        case: PathBuf,
        /// Override a case value, e.g. --set upstream.pressure="10 Pa" (repeatable).
        #[arg(long = "set", value_name = "KEY=VALUE")]
        set: Vec<String>,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// List the built-in gas library with sources.
    Gases,
    /// Measure speed on fixed reference workloads beside the memory bandwidth.
    Bench {
        /// Worker threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
        /// Run one workload only: `a` (free-molecular moves) or `b` (DSMC at δ ≈ 1), for
        /// profiling.
        #[arg(long, value_parser = ["a", "b"])]
        only: Option<String>,
    },
}

/// Exit code of a run stopped by SIGINT/SIGTERM after saving its checkpoint (EX_TEMPFAIL of
/// sysexits.h: "try again later", i.e. resume).
const EXIT_INTERRUPTED: u8 = 75;

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("kinflux: error: {e}");
            match e.downcast_ref::<kinflux::Error>() {
                Some(k) if k.is_user_error() => ExitCode::from(2),
                _ => ExitCode::from(1),
            }
        }
    }
}

fn run(cli: Cli) -> anyhow::Result<ExitCode> {
    if let Command::Run {
        case,
        out,
        set,
        threads,
        force,
        quiet,
        resume,
    } = cli.command
    {
        return cmd_run(&case, out, &set, threads, force, quiet, resume);
    }
    other(cli.command).map(|()| ExitCode::SUCCESS)
}

fn other(command: Command) -> anyhow::Result<()> {
    match command {
        Command::Run { .. } => unreachable!("handled by run"),
        Command::Check { case, set } => {
            let c = case::load(&case, &set)?;
            let plan = Plan::new(&c)?;
            println!("{}: valid case \"{}\"", case.display(), c.title);
            print_estimate(&plan);
            print_numerics(&plan);
            Ok(())
        }
        Command::Estimate { case, set, json } => {
            let c = case::load(&case, &set)?;
            let plan = Plan::new(&c)?;
            if json {
                println!("{}", serde_json::to_string_pretty(&plan.estimate)?);
            } else {
                print_estimate(&plan);
            }
            Ok(())
        }
        Command::Bench {
            threads,
            json,
            only,
        } => {
            if threads == Some(0) {
                return Err(kinflux::Error::Input(
                    "--threads 0: expected at least 1 thread".into(),
                )
                .into());
            }
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads.unwrap_or(0))
                .build()?;
            let n = pool.current_num_threads();
            let selection = match only.as_deref() {
                Some("a") => kinflux::bench::Selection::FreeMolecular,
                Some("b") => kinflux::bench::Selection::Dsmc,
                _ => kinflux::bench::Selection::All,
            };
            let report = pool.install(|| kinflux::bench::run(n, selection));
            if json {
                println!("{}", serde_json::to_string_pretty(&report)?);
            } else {
                println!(
                    "kinflux {} benchmark on {} thread(s)",
                    report.kinflux_version, report.threads
                );
                println!(
                    "memory copy bandwidth   {:.1} GB/s (1 thread), {:.1} GB/s (all threads)",
                    report.copy_bandwidth_single_thread_gb_s,
                    report.copy_bandwidth_all_threads_gb_s
                );
                if let Some(mem) = &report.memory {
                    println!(
                        "memory: case (b) with {} molecules after {} steps: {:.0} B/molecule resident growth, {:.0} B/molecule in the per-molecule buffers",
                        mem.molecules, mem.steps, mem.resident_growth_bytes_per_molecule, mem.buffer_bytes_per_molecule
                    );
                }
                for w in &report.workloads {
                    println!("{}:", w.name);
                    println!(
                        "  {:.3e} particle-steps/s ({:.3e} per core), {:.3e} collisions/s",
                        w.particle_steps_per_s, w.particle_steps_per_s_per_core, w.collisions_per_s
                    );
                    println!(
                        "  {} steps, {:.0} molecules, {:.2} s",
                        w.steps, w.mean_molecules, w.wall_time_s
                    );
                    let t = &w.stage_times;
                    println!(
                        "  stages (s): move {:.2}, sort {:.2}, collide {:.2}, sample {:.2}, inject {:.2}, compact {:.2}, release {:.2}, record {:.3}",
                        t.move_s, t.sort_s, t.collide_s, t.sample_s, t.inject_s, t.compact_s, t.release_s, t.record_s
                    );
                    println!(
                        "  memory per molecule: {} B in the arrays, {:.0} B in all per-molecule buffers, {:.0} B resident growth during the run, {:.0} B whole process resident",
                        w.array_bytes_per_molecule, w.buffer_bytes_per_molecule, w.resident_growth_bytes_per_molecule, w.resident_bytes_per_molecule
                    );
                    println!(
                        "  modelled {:.0} B per particle-step = {:.1} % of the copy bandwidth",
                        w.modelled_bytes_per_particle_step,
                        100.0 * w.fraction_of_copy_bandwidth
                    );
                }
            }
            Ok(())
        }
        Command::Gases => {
            println!(
                "{:<5} {:>10} {:>8} {:>8} {:>6} {:>6} {:>5} {:>11}",
                "gas", "M g/mol", "d_VHS Å", "d_VSS Å", "ω", "α_VSS", "ζrot", "μ(273K) Pa·s"
            );
            let vss = gas::library_with(gas::MolecularModel::Vss);
            for (s, v) in gas::library().iter().zip(&vss) {
                println!(
                    "{:<5} {:>10.3} {:>8.3} {:>8.3} {:>6.2} {:>6.2} {:>5} {:>11.4e}",
                    s.name,
                    s.molar_mass() * 1e3,
                    s.d_ref * 1e10,
                    v.d_ref * 1e10,
                    s.omega,
                    v.alpha,
                    s.rot_dof,
                    s.mu_ref
                );
            }
            println!("reference temperature {} K for d and μ", gas::BIRD_T_REF);
            println!("source: {}", gas::BIRD_1994_A);
            for s in gas::library() {
                if let Some(note) = s.source.strip_prefix(gas::BIRD_1994_A) {
                    if !note.is_empty() {
                        println!("note on {}: {}", s.name, note.trim_start_matches("; "));
                    }
                }
            }
            Ok(())
        }
    }
}

#[allow(clippy::too_many_arguments)]
fn cmd_run(
    case_path: &Path,
    out: Option<PathBuf>,
    set: &[String],
    threads: Option<usize>,
    force: bool,
    quiet: bool,
    resume: Option<PathBuf>,
) -> anyhow::Result<ExitCode> {
    let file = case_path.display().to_string();
    // On resume the case is the checkpoint's own copy; only solver budgets may change.
    let (case_text, mut overrides, saved) = match &resume {
        None => {
            let text = std::fs::read_to_string(case_path).map_err(|e| {
                kinflux::Error::Input(format!("{file}: cannot read the case file: {e}"))
            })?;
            (text, set.to_vec(), None)
        }
        Some(dir) => {
            let l = kinflux::checkpoint::load(dir)?;
            let given = std::fs::read_to_string(case_path).unwrap_or_default();
            if given != l.case_text {
                return Err(kinflux::Error::Input(format!(
                    "{file}: differs from the case saved in {}; expected the same case file to resume (edit budgets with --set solver.max_wall_time=... instead)",
                    dir.display()
                ))
                .into());
            }
            for s in set {
                let key = s.split('=').next().unwrap_or("").trim();
                if !matches!(
                    key,
                    "solver.max_wall_time"
                        | "solver.max_steps"
                        | "solver.target_uncertainty"
                        | "solver.checkpoint_interval"
                ) {
                    return Err(kinflux::Error::Input(format!(
                        "--set {s}: expected only solver.max_wall_time, solver.max_steps, solver.target_uncertainty or solver.checkpoint_interval when resuming (other keys would change the physics)"
                    ))
                    .into());
                }
            }
            (l.case_text, l.overrides, Some(l.state))
        }
    };
    if saved.is_some() {
        overrides.extend(set.iter().cloned());
    }
    let c = case::parse(&case_text, &file, &overrides)?;
    let plan = Plan::new(&c)?;
    let out = resume.clone().or(out).unwrap_or_else(|| {
        let stem = case_path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "case".into());
        PathBuf::from("runs").join(stem)
    });
    if threads == Some(0) {
        return Err(kinflux::Error::Input("--threads 0: expected at least 1 thread".into()).into());
    }
    if resume.is_none() {
        output::prepare_run_dir(&out, force)?;
    }
    // SIGINT/SIGTERM (Slurm preemption): finish the step, save, exit with EXIT_INTERRUPTED.
    let interrupted = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    {
        let flag = interrupted.clone();
        // A second signal while the first is being handled ends the process at once.
        let _ = ctrlc::set_handler(move || {
            if flag.swap(true, std::sync::atomic::Ordering::SeqCst) {
                eprintln!("kinflux: second signal, exiting without saving");
                std::process::exit(i32::from(EXIT_INTERRUPTED));
            }
        });
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.unwrap_or(0))
        .build()?;
    let nthreads = pool.current_num_threads();
    if !quiet {
        eprintln!(
            "kinflux {}: {} ({})",
            env!("CARGO_PKG_VERSION"),
            c.title,
            case_path.display()
        );
        eprintln!("caution: {}", kinflux::summary::CAUTION);
        print_estimate(&plan);
        print_numerics(&plan);
        eprintln!(
            "running on {nthreads} thread(s); results in {}",
            out.display()
        );
    }
    // A live progress line on a terminal; plain periodic log lines otherwise (batch jobs).
    let terminal = std::io::IsTerminal::is_terminal(&std::io::stderr());
    let bar = (terminal && !quiet).then(|| {
        let b = indicatif::ProgressBar::new_spinner();
        b.set_style(
            indicatif::ProgressStyle::with_template("{spinner} {elapsed_precise} {msg}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner()),
        );
        b
    });
    let every = Duration::from_secs(if bar.is_some() { 1 } else { 30 });
    let target = c.solver.target_uncertainty;
    let (mut sim, outcome) = pool.install(|| {
        let mut sim = match saved {
            Some(state) => Simulation::resume(plan, state),
            None => Simulation::new(plan),
        };
        sim.interrupt = Some(interrupted.clone());
        let (dir, text, name, ovr) = (
            out.clone(),
            case_text.clone(),
            file.clone(),
            overrides.clone(),
        );
        sim.checkpoint_hook = Some((
            Duration::from_secs_f64(c.solver.checkpoint_interval),
            Box::new(move |s: &Simulation| {
                if let Err(e) = kinflux::checkpoint::save(&dir, s, &text, &name, &ovr) {
                    eprintln!("kinflux: warning: checkpoint not written: {e}");
                }
            }),
        ));
        let outcome = sim.run(every, |s, e, t| {
            if quiet {
                return;
            }
            let (flow, left) = match e {
                Some(e) => {
                    // batch-means width shrinks like 1/sqrt(steps): steps still needed
                    let done = s.step as f64 - s.steady_state_step() as f64;
                    let more = done * ((e.relative() / target).powi(2) - 1.0).max(0.0);
                    let rate = s.step as f64 / t.as_secs_f64().max(1e-9);
                    (
                        format!("{:.5e} kg/s ± {:.2} %", e.mean, 100.0 * e.relative()),
                        format!("~{:.0} s to ±{:.2} %", more / rate, 100.0 * target),
                    )
                }
                None => ("(start-up)".to_string(), String::new()),
            };
            let line = format!(
                "step {:>8}  molecules {:>9}  flow {}  {}",
                s.step,
                s.population(),
                flow,
                left
            );
            match &bar {
                Some(b) => {
                    b.set_message(line);
                    b.tick();
                }
                None => eprintln!("  t = {:>7.1} s  {line}", t.as_secs_f64()),
            }
        });
        (sim, outcome)
    });
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    // The final state is always saved, so a finished run can also be extended (--resume).
    sim.checkpoint_hook = None;
    kinflux::checkpoint::save(&out, &sim, &case_text, &file, &overrides)?;
    let summary = Summary::new(&sim, &outcome, nthreads);
    output::write_json(&out.join("summary.json"), &summary)?;
    output::write_atomic(
        &out.join("history.csv"),
        output::history_csv(&sim).as_bytes(),
    )?;
    print_result(&summary);
    println!("wrote {}", out.join("summary.json").display());
    println!("wrote {}", out.join("history.csv").display());
    let c = &sim.plan.case;
    let meta = [
        ("title", c.title.clone()),
        ("kinflux_version", env!("CARGO_PKG_VERSION").to_string()),
        ("case_file", c.source.clone()),
        ("gas", c.gas.label()),
        ("mode", summary.mode.to_string()),
        ("sampling_steps", sim.fields.steps.to_string()),
        ("molecule_weight", format!("{:e}", sim.plan.fnum)),
        ("time_step_s", format!("{:e}", sim.plan.dt)),
        ("aperture_diameter_m", format!("{:e}", c.aperture.diameter)),
        (
            "partition_thickness_m",
            format!("{:e}", c.aperture.thickness),
        ),
        (
            "coordinates",
            "z axial (flow +z, partition at 0 <= z <= thickness), r radial; arrays [nz][nr]"
                .to_string(),
        ),
        ("caution", kinflux::summary::CAUTION.to_string()),
    ];
    let fields = sim.fields.fields(&sim.plan);
    match kinflux::field_output::write(&out, &sim.plan, &fields, &meta) {
        Ok(files) => {
            for f in files {
                println!("wrote {}", f.display());
            }
        }
        Err(e) => eprintln!("kinflux: warning: field files not written: {e}"),
    }
    match kinflux::plots::write_all(&out, &sim, &fields) {
        Ok(files) => {
            for f in files {
                println!("wrote {}", f.display());
            }
        }
        Err(e) => eprintln!("kinflux: warning: charts not written: {e}"),
    }
    if outcome.stop == kinflux::monitor::StopReason::Interrupted {
        eprintln!(
            "kinflux: interrupted at step {}; state saved in {}. Continue with: kinflux run {} --resume {}",
            sim.step,
            out.join(kinflux::checkpoint::FILE).display(),
            case_path.display(),
            out.display()
        );
        return Ok(ExitCode::from(EXIT_INTERRUPTED));
    }
    Ok(ExitCode::SUCCESS)
}

fn print_estimate(plan: &Plan) {
    let e = &plan.estimate;
    let c = &plan.case;
    println!("gas                      {}", c.gas.label());
    println!(
        "upstream / downstream    {:.6e} Pa, {:.2} K / {:.6e} Pa, {:.2} K",
        c.upstream.pressure,
        c.upstream.temperature,
        c.downstream.pressure,
        c.downstream.temperature
    );
    println!(
        "aperture                 diameter {:.6e} m, thickness {:.6e} m (L/R = {:.4})",
        c.aperture.diameter,
        c.aperture.thickness,
        c.aperture.thickness / c.aperture.radius()
    );
    println!(
        "mean free path upstream  {:.4e} m",
        e.upstream_mean_free_path
    );
    println!(
        "Knudsen number λ1/D      {:.4e}   regime: {}",
        e.knudsen_number,
        e.regime.label()
    );
    println!("rarefaction δ = p a/(μ v0) {:.4e}", e.rarefaction_parameter);
    println!("Clausing factor          {:.5}", e.clausing_factor);
    let fm_q = kinflux::units::TradeFlow::from_molecules(
        e.free_molecular_net_mass_flow / c.gas.mean_mass(),
        c.upstream.temperature,
    );
    println!(
        "free-molecular flow      {:.5e} kg/s into vacuum; net {:.5e} kg/s = {:.5e} sccm",
        e.free_molecular_mass_flow, e.free_molecular_net_mass_flow, fm_q.sccm
    );
    println!(
        "isentropic nozzle (Cd=1) {:.5e} kg/s (W = {:.4})",
        e.isentropic_mass_flow, e.isentropic_reduced_flow
    );
}

fn print_numerics(plan: &Plan) {
    let n = &plan.choices;
    for w in plan.warnings() {
        println!("warning: {w}");
    }
    println!(
        "numerics                 domain {}a upstream, {}a downstream, outer radius {}a; radial weight ratio {} over {} bands",
        n.upstream_length_radii, n.downstream_length_radii, n.outer_radius_radii, n.radial_weight_ratio, n.radial_bands
    );
    println!(
        "                         time step {:.4e} s, {} molecules at start, weight {:.4e}, start-up {} steps",
        n.time_step_s, n.target_molecules, n.molecule_weight, n.startup_steps
    );
    println!(
        "                         {} x {} cells of {:.4} a, {}x{} subcells; mode {}",
        n.axial_cells,
        n.radial_bands,
        n.cell_size_radii,
        n.subcells_per_direction,
        n.subcells_per_direction,
        if plan.collisions.is_some() {
            "DSMC (collisions on)"
        } else {
            "free-molecular (collisions off)"
        }
    );
    if plan.collisions.is_some() {
        println!(
            "quality (planned)        cell/λ1 {:.3}, collision separation/λ1 {:.3}, Δt/τ1 {:.3}",
            n.cell_over_upstream_mean_free_path,
            n.expected_separation_over_upstream_mean_free_path,
            n.time_step_over_upstream_collision_time
        );
    }
}

fn print_result(s: &Summary) {
    let f = &s.flow;
    println!(
        "result ({}; {} steps, {:.1} s, {:.3e} particle-steps/s)",
        s.run.stop_reason_text, s.run.steps, s.run.wall_time_s, s.run.particle_steps_per_s
    );
    println!(
        "  mass flow rate         {:.5e} ± {:.2e} kg/s (95 %)",
        f.mass_flow_rate_kg_s, f.mass_flow_rate_ci95_kg_s
    );
    println!(
        "  reduced flow rate W    {:.5} ± {:.5}",
        f.reduced_flow_rate, f.reduced_flow_rate_ci95
    );
    println!(
        "  throughput             {:.5e} Pa·m³/s = {:.5e} mbar·L/s = {:.5e} sccm ({})",
        f.throughput_pa_m3_s, f.throughput_mbar_l_s, f.throughput_sccm, f.standard_conditions
    );
    println!("  conductance            {:.5e} L/s", f.conductance_l_s);
    let q = &s.quality;
    if let (Some(sep), Some(dtt)) = (
        q.measured_separation_over_upstream_mean_free_path,
        q.measured_time_step_over_collision_time,
    ) {
        println!(
            "  quality (measured)     collision separation/λ1 {sep:.3}, Δt/τ {dtt:.3}, {:.1} molecules per upstream cell",
            q.mean_molecules_per_upstream_cell
        );
    }
    if let Some(l) = &q.local {
        println!(
            "  quality (over cells)   cell/λ up to {:.3}, Δt/τ up to {:.3}, {:.1} to {:.1} molecules per cell ({} cells sampled)",
            l.cell_over_mean_free_path_max,
            l.time_step_over_collision_time_max,
            l.molecules_per_cell_min,
            l.molecules_per_cell_max,
            l.cells_sampled
        );
    }
    for w in &q.warnings {
        println!("  warning: {w}");
    }
    for sp in &f.species {
        println!(
            "  {:<6} {:.5e} kg/s, {:.5e} mol/s (W_i = {:.5})",
            sp.name, sp.mass_flow_rate_kg_s, sp.molar_flow_rate_mol_s, sp.reduced_flow_rate
        );
    }
    println!("caution: {}", s.caution);
}
