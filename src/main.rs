//! `kinflux` command line: a thin layer over the engine library.
//!
//! Exit codes: 0 success, 2 bad input or unusable output location (message names the file,
//! key, value and expectation), 1 any other failure.

use clap::{Parser, Subcommand};
use kinflux::{case, gas, numerics::Plan, runner, simulation::Simulation, summary::Summary};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
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
        /// Run statistical replica K of N of the case (independent random streams); combine
        /// the N result directories with `kinflux merge`.
        #[arg(long, value_name = "K/N")]
        replica: Option<String>,
    },
    /// Combine statistical replicas of one case (from `run --replica K/N`) into one result.
    Merge {
        /// Result directories of the replicas (each with its checkpoint.bin).
        #[arg(required = true, num_args = 1..)]
        dirs: Vec<PathBuf>,
        /// Directory for the merged result.
        #[arg(long)]
        out: PathBuf,
        /// Overwrite a directory that already holds results.
        #[arg(long)]
        force: bool,
    },
    /// Parameter sweeps: plan the cases, run them here or as a Slurm job array, collect.
    Sweep {
        #[command(subcommand)]
        action: SweepAction,
    },
    /// Find the aperture diameter that delivers a target flow at the case's pressures and gas.
    Size {
        /// Case file (TOML); its aperture diameter is the starting guess's scale.
        case: PathBuf,
        /// Target flow with its unit: sccm, slm, kg/s, g/s, mol/s, Pa·m3/s, mbar·L/s, Torr·L/s.
        #[arg(long, value_name = "FLOW")]
        target_flow: String,
        /// Override a case value (repeatable).
        #[arg(long = "set", value_name = "KEY=VALUE")]
        set: Vec<String>,
        /// Directory for the sizing runs (default: runs/<case name>-sizing).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Most DSMC runs to make.
        #[arg(long, default_value_t = 8)]
        max_runs: usize,
        /// Worker threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
        /// Overwrite a sizing directory that already holds runs.
        #[arg(long)]
        force: bool,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
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

#[derive(Subcommand)]
enum SweepAction {
    /// Read a sweep file, check every case, write the plan directory.
    Plan {
        /// Sweep file (TOML): base case and axes.
        sweep: PathBuf,
        /// Plan directory to create.
        #[arg(long)]
        out: PathBuf,
        /// Overwrite a plan directory that is not empty.
        #[arg(long)]
        force: bool,
    },
    /// Run the plan's unfinished tasks on this machine (finished ones are skipped, interrupted
    /// ones resume).
    Run {
        /// Plan directory.
        plan: PathBuf,
        /// Cases at once (default: all cores when every case is small, else 1).
        #[arg(long)]
        jobs: Option<usize>,
        /// Threads in all (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
    },
    /// Run one task of the plan (a Slurm array task runs this with its index).
    Task {
        /// Plan directory.
        plan: PathBuf,
        /// Task index (0-based; tasks.csv).
        #[arg(long)]
        index: usize,
        /// Worker threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
    },
    /// Write the plan's sbatch job-array script (and submit it with --submit).
    Slurm {
        /// Plan directory.
        plan: PathBuf,
        /// Slurm partition(s).
        #[arg(long)]
        partition: Option<String>,
        /// Time limit per array task (e.g. 30, 1:00:00, 2-00:00:00).
        #[arg(long)]
        time: Option<String>,
        /// CPUs per array task (also the task's thread count).
        #[arg(long)]
        cpus_per_task: Option<u32>,
        /// Memory per array task's node (e.g. 4G).
        #[arg(long)]
        mem: Option<String>,
        /// Account to charge.
        #[arg(long)]
        account: Option<String>,
        /// At most this many array tasks at once.
        #[arg(long)]
        max_parallel: Option<u32>,
        /// The kinflux binary the cluster nodes run (default: this one).
        #[arg(long)]
        kinflux: Option<PathBuf>,
        /// Submit the script with sbatch after writing it.
        #[arg(long)]
        submit: bool,
    },
    /// Gather every case into results.csv and results.h5 and draw the design charts.
    Collect {
        /// Plan directory.
        plan: PathBuf,
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
        replica,
    } = cli.command
    {
        return cmd_run(&case, out, &set, threads, force, quiet, resume, replica);
    }
    if let Command::Sweep { action } = cli.command {
        return cmd_sweep(action);
    }
    if let Command::Size {
        case,
        target_flow,
        set,
        out,
        max_runs,
        threads,
        force,
        json,
    } = cli.command
    {
        return cmd_size(
            &case,
            &target_flow,
            &set,
            out,
            max_runs,
            threads,
            force,
            json,
        );
    }
    other(cli.command).map(|()| ExitCode::SUCCESS)
}

fn other(command: Command) -> anyhow::Result<()> {
    match command {
        Command::Run { .. } | Command::Sweep { .. } | Command::Size { .. } => {
            unreachable!("handled by run")
        }
        Command::Merge { dirs, out, force } => {
            let m = kinflux::ensemble::merge(&dirs, &out, force)?;
            println!("merged {} replicas", dirs.len());
            print_result(&m.summary);
            for f in &m.files {
                println!("wrote {}", f.display());
            }
            for w in &m.warnings {
                eprintln!("kinflux: warning: {w}");
            }
            Ok(())
        }
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

/// The interrupt flag set by SIGINT/SIGTERM (installed once per process). A second signal while
/// the first is being handled ends the process at once.
fn interrupt_flag() -> Arc<AtomicBool> {
    static FLAG: std::sync::OnceLock<Arc<AtomicBool>> = std::sync::OnceLock::new();
    FLAG.get_or_init(|| {
        let flag = Arc::new(AtomicBool::new(false));
        let f = flag.clone();
        let _ = ctrlc::set_handler(move || {
            if f.swap(true, Ordering::SeqCst) {
                eprintln!("kinflux: second signal, exiting without saving");
                std::process::exit(i32::from(EXIT_INTERRUPTED));
            }
        });
        flag
    })
    .clone()
}

/// A live progress line on a terminal (None for batch jobs, which get plain log lines, or quiet).
fn progress_bar(quiet: bool) -> Option<indicatif::ProgressBar> {
    let terminal = std::io::IsTerminal::is_terminal(&std::io::stderr());
    (terminal && !quiet).then(|| {
        let b = indicatif::ProgressBar::new_spinner();
        b.set_style(
            indicatif::ProgressStyle::with_template("{spinner} {elapsed_precise} {msg}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner()),
        );
        b
    })
}

/// The progress callback: updates `bar`, or prints a log line when there is none; silent when
/// quiet.
fn progress_callback(
    quiet: bool,
    bar: Option<indicatif::ProgressBar>,
) -> impl FnMut(&Simulation, Option<kinflux::monitor::BatchEstimate>, Duration) + Send {
    move |s: &Simulation, e: Option<kinflux::monitor::BatchEstimate>, t: Duration| {
        if quiet {
            return;
        }
        let (flow, left) = match e {
            Some(e) => {
                let target = s.plan.case.solver.target_uncertainty;
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
    }
}

/// Run one case to its end with the usual console output; the exit code says how it ended.
pub(crate) fn run_one(mut req: runner::Request, quiet: bool) -> anyhow::Result<ExitCode> {
    req.interrupt = Some(interrupt_flag());
    let bar = progress_bar(quiet);
    req.report_every = Duration::from_secs(if bar.is_some() { 1 } else { 30 });
    let report = progress_callback(quiet, bar.clone());
    let case_path = req.case_file.clone();
    let out = req.out.clone();
    let done = runner::execute(
        &req,
        |plan, threads| {
            if quiet {
                return;
            }
            let c = &plan.case;
            eprintln!(
                "kinflux {}: {} ({})",
                env!("CARGO_PKG_VERSION"),
                c.title,
                case_path.display()
            );
            if c.solver.replica.count > 1 {
                eprintln!("statistical replica {}", c.solver.replica.label());
            }
            eprintln!("caution: {}", kinflux::summary::CAUTION);
            print_estimate(plan);
            print_numerics(plan);
            eprintln!(
                "running on {threads} thread(s); results in {}",
                out.display()
            );
        },
        report,
    );
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let done = done?;
    print_result(&done.summary);
    for f in &done.files {
        if f.file_name()
            .is_some_and(|n| n != kinflux::checkpoint::FILE)
        {
            println!("wrote {}", f.display());
        }
    }
    for w in &done.warnings {
        eprintln!("kinflux: warning: {w}");
    }
    if done.stop == kinflux::monitor::StopReason::Interrupted {
        eprintln!(
            "kinflux: interrupted at step {}; state saved in {}. Continue with: kinflux run {} --resume {}",
            done.step,
            out.join(kinflux::checkpoint::FILE).display(),
            case_path.display(),
            out.display()
        );
        return Ok(ExitCode::from(EXIT_INTERRUPTED));
    }
    Ok(ExitCode::SUCCESS)
}

fn cmd_sweep(action: SweepAction) -> anyhow::Result<ExitCode> {
    use kinflux::sweep::{collect, local, plan, slurm, task};
    match action {
        SweepAction::Plan { sweep, out, force } => {
            let p = plan::write(&sweep, &out, force)?;
            println!(
                "plan in {}: {} cases, {} tasks",
                out.display(),
                p.cases.len(),
                p.tasks.len()
            );
            println!("  manifest {}", out.join(plan::MANIFEST_FILE).display());
            println!(
                "next: kinflux sweep run {0}   (this machine)  or  kinflux sweep slurm {0} --submit",
                out.display()
            );
            Ok(ExitCode::SUCCESS)
        }
        SweepAction::Run {
            plan,
            jobs,
            threads,
        } => {
            if jobs == Some(0) || threads == Some(0) {
                return Err(kinflux::Error::Input(
                    "--jobs/--threads 0: expected at least 1".into(),
                )
                .into());
            }
            eprintln!("caution: {}", kinflux::summary::CAUTION);
            let r = local::run_all(&plan, jobs, threads, Some(interrupt_flag()), |line| {
                println!("{line}")
            })?;
            println!(
                "{} run, {} already finished, {} interrupted, {} failed ({} at once, {} thread(s) each)",
                r.ran,
                r.already_finished,
                r.interrupted,
                r.failed.len(),
                r.jobs,
                r.threads_per_job
            );
            if r.interrupted > 0 || interrupt_flag().load(Ordering::SeqCst) {
                eprintln!(
                    "kinflux: interrupted; run `kinflux sweep run {}` again to continue",
                    plan.display()
                );
                return Ok(ExitCode::from(EXIT_INTERRUPTED));
            }
            if !r.failed.is_empty() {
                return Ok(ExitCode::from(1));
            }
            println!("next: kinflux sweep collect {}", plan.display());
            Ok(ExitCode::SUCCESS)
        }
        SweepAction::Task {
            plan,
            index,
            threads,
        } => {
            let p = plan::Plan::load(&plan)?;
            let t = p.task(index)?;
            let started = std::time::Instant::now();
            let o = task::run_task(&plan, &p, t, threads, Some(interrupt_flag()))?;
            println!(
                "{}",
                task::describe(&p, t, &o, started.elapsed().as_secs_f64())
            );
            match o {
                task::TaskOutcome::Ran(f)
                    if f.stop == kinflux::monitor::StopReason::Interrupted =>
                {
                    Ok(ExitCode::from(EXIT_INTERRUPTED))
                }
                _ => Ok(ExitCode::SUCCESS),
            }
        }
        SweepAction::Slurm {
            plan,
            partition,
            time,
            cpus_per_task,
            mem,
            account,
            max_parallel,
            kinflux,
            submit,
        } => {
            let bin = match kinflux {
                Some(b) => std::path::absolute(&b)?,
                None => std::env::current_exe()?,
            };
            let opts = slurm::JobOptions {
                partition,
                time,
                cpus_per_task,
                mem,
                max_parallel,
                account,
            };
            let path = slurm::write(&plan, &bin, &opts)?;
            println!("wrote {}", path.display());
            if submit {
                let id = slurm::submit(&plan)?;
                println!("submitted job array {id}");
                println!(
                    "when it has finished: kinflux sweep collect {}",
                    plan.display()
                );
            } else {
                println!(
                    "submit with: cd {} && sbatch {}",
                    plan.display(),
                    slurm::SCRIPT_FILE
                );
            }
            Ok(ExitCode::SUCCESS)
        }
        SweepAction::Collect { plan } => {
            let c = collect::collect(&plan)?;
            let ok = c
                .rows
                .iter()
                .filter(|r| r.status == collect::Status::Ok)
                .count();
            println!("collected {ok} of {} cases", c.rows.len());
            for line in c.incomplete() {
                println!("  not complete: {line}");
            }
            for f in &c.files {
                println!("wrote {}", f.display());
            }
            for w in &c.warnings {
                eprintln!("kinflux: warning: {w}");
            }
            Ok(ExitCode::SUCCESS)
        }
    }
}

#[allow(clippy::too_many_arguments)]
fn cmd_size(
    case: &Path,
    target_flow: &str,
    set: &[String],
    out: Option<PathBuf>,
    max_runs: usize,
    threads: Option<usize>,
    force: bool,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let req = kinflux::sizing::SizingRequest {
        case_file: case.to_path_buf(),
        overrides: set.to_vec(),
        target: target_flow.to_string(),
        out: out.unwrap_or_else(|| kinflux::sizing::default_dir(case)),
        max_runs,
        threads,
        force,
        interrupt: Some(interrupt_flag()),
    };
    if !json {
        eprintln!("caution: {}", kinflux::summary::CAUTION);
    }
    let r = kinflux::sizing::size(&req, |line| {
        if !json {
            eprintln!("{line}");
        }
    })?;
    if json {
        println!("{}", serde_json::to_string_pretty(&r)?);
    } else {
        println!(
            "{} for {}: {:.6e} m ± {:.2e} m (95 %){}",
            r.sized_key,
            r.target_flow,
            r.diameter_m,
            r.diameter_ci95_m,
            if r.converged {
                String::new()
            } else {
                format!(
                    "; NOT converged in {} runs (last run's diameter shown)",
                    r.runs.len()
                )
            }
        );
        println!(
            "analytic free-molecular start {:.6e} m; partition thickness {:.3e} m kept; {} DSMC run(s)",
            r.analytic_start_diameter_m,
            r.partition_thickness_m,
            r.runs.len()
        );
        println!("wrote {}", req.out.join("sizing.json").display());
    }
    Ok(if r.converged {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
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
    replica: Option<String>,
) -> anyhow::Result<ExitCode> {
    let mut overrides = set.to_vec();
    if let Some(r) = replica {
        if kinflux::case::Replica::parse(&r).is_none() {
            return Err(kinflux::Error::Input(format!(
                "--replica {r}: expected K/N with whole numbers 1 <= K <= N, e.g. 2/8"
            ))
            .into());
        }
        if resume.is_some() {
            return Err(kinflux::Error::Input(format!(
                "--replica {r}: a resumed run keeps the replica it was started as; drop --replica"
            ))
            .into());
        }
        overrides.push(format!("solver.replica=\"{r}\""));
    }
    let out = resume.clone().or(out).unwrap_or_else(|| {
        let stem = case_path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "case".into());
        PathBuf::from("runs").join(stem)
    });
    let req = runner::Request {
        case_file: case_path.to_path_buf(),
        overrides,
        out,
        resume: resume.is_some(),
        force,
        threads,
        interrupt: None,
        report_every: Duration::from_secs(30),
    };
    run_one(req, quiet)
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
    let slit = c.aperture.per_unit_length();
    if slit {
        println!(
            "aperture                 slit of width {:.6e} m, thickness {:.6e} m (L/h = {:.4}); flows per metre of slit length",
            c.aperture.diameter,
            c.aperture.thickness,
            c.aperture.thickness / c.aperture.diameter
        );
    } else {
        println!(
            "aperture                 diameter {:.6e} m, thickness {:.6e} m (L/R = {:.4})",
            c.aperture.diameter,
            c.aperture.thickness,
            c.aperture.thickness / c.aperture.radius()
        );
    }
    let per = if slit { "/m" } else { "" };
    println!(
        "mean free path upstream  {:.4e} m",
        e.upstream_mean_free_path
    );
    println!(
        "Knudsen number λ1/{}      {:.4e}   regime: {}",
        if slit { "h" } else { "D" },
        e.knudsen_number,
        e.regime.label()
    );
    println!(
        "rarefaction δ = p a/(μ v0) {:.4e}{}",
        e.rarefaction_parameter,
        if slit { " (a = half-width)" } else { "" }
    );
    println!(
        "{}{:.5}",
        if slit {
            "slit transmission        "
        } else {
            "Clausing factor          "
        },
        e.clausing_factor
    );
    if !slit {
        println!(
            "free-molecular beam      peaking factor 1/W = {:.4} (Clausing's angular distribution)",
            1.0 / e.clausing_factor
        );
    }
    let fm_q = kinflux::units::TradeFlow::from_molecules(
        e.free_molecular_net_mass_flow / c.gas.mean_mass(),
        c.upstream.temperature,
    );
    println!(
        "free-molecular flow      {:.5e} kg/s{per} into vacuum; net {:.5e} kg/s{per} = {:.5e} sccm{per}",
        e.free_molecular_mass_flow, e.free_molecular_net_mass_flow, fm_q.sccm
    );
    println!(
        "isentropic nozzle (Cd=1) {:.5e} kg/s{per} (W = {:.4})",
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
    if f.basis != "whole aperture" {
        println!("  flows below are {}", f.basis);
    }
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
    let p = &s.plume;
    let slit = f.basis != "whole aperture";
    if p.molecules_per_s > 0.0 {
        println!(
            "  beam                   centreline {:.4e} ± {:.1e} {} over θ < {}°, peaking factor {:.3} ± {:.3} (free-molecular {:.3} over the cone, {:.3} on the axis)",
            p.centreline_intensity_per_s_sr,
            p.centreline_intensity_ci95_per_s_sr,
            if slit { "/(s·rad·m)" } else { "/(s·sr)" },
            p.centreline_cone_deg,
            p.peaking_factor,
            p.peaking_factor_ci95,
            p.free_molecular_over_cosine_law[0],
            p.free_molecular_peaking_factor
        );
    }
    if let Some(f) = &s.beam.far_field {
        println!(
            "  axis far field         n ∝ (z − t)^−{:.2} ± {:.2} over {:.3e}–{:.3e} m, n = {:.3} n1 {}",
            f.density_decay_exponent,
            f.density_decay_exponent_ci95,
            f.from_exit_plane_m,
            f.to_exit_plane_m,
            f.inverse_square_coefficient,
            if slit { "a/(z − t)" } else { "(a/(z − t))²" }
        );
        if let (Some(sp), Some(e), Some(x)) = (
            &s.beam.light_species,
            f.light_enrichment,
            f.light_mole_fraction,
        ) {
            println!(
                "  axis composition       {sp} mole fraction {x:.4} on the far axis, enrichment {e:.4} (flux through the aperture: {:.4})",
                s.beam.aperture_light_enrichment.unwrap_or(f64::NAN)
            );
        }
    }
    println!("caution: {}", s.caution);
}
