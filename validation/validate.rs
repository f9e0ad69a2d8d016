//! Validation suite: runs every check of `validation/references.toml` through the kinflux
//! library, compares each result with its published or exact reference, and writes
//! `report.md` and `results.json`.
//!
//! ```text
//! cargo run --release --example validate -- [--quick] [--only NAME]... [--out DIR]
//! ```
//!
//! A check names a case file under `validation/cases/`, optional `--set`-style overrides, a
//! quantity and a reference. Checks with the same case and overrides share one simulation.
//! The acceptance rule is relative: |value/reference − 1| ≤ tolerance. The report also gives
//! the deviation in units of the combined 95 % uncertainty sqrt(h² + U_ref²), h the kinflux
//! 95 % half-width and U_ref the reference's own uncertainty (read as a 95 % half-width too).
//! Exit status: 0 all checks pass, 1 a check failed, 2 bad input (references or case file).

use anyhow::{anyhow, bail, Context, Result};
use clap::Parser;
use kinflux::case::{self, Case};
use kinflux::numerics::Plan;
use kinflux::simulation::Simulation;
use kinflux::summary::Summary;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

/// Target uncertainty of a `--quick` run.
const QUICK_TARGET: f64 = 0.01;
/// Simulated molecules of a `--quick` run. The stopping rule trusts an interval only after 640
/// sampling steps, and at the default 100 000 molecules the interval is then already below
/// 0.3 %; so a looser target alone barely shortens a run, and the smoke run also uses fewer
/// molecules (about 5 times faster per step, interval still well below the quick target).
const QUICK_MOLECULES: u64 = 20_000;
/// Smallest relative tolerance applied to simulated quantities in a `--quick` run (three
/// times the quick target, so that a correct engine passes a smoke run).
const QUICK_TOLERANCE_FLOOR: f64 = 0.03;
/// Absolute accuracy of kinflux::analytic::clausing_factor for L/R ≤ 160, from its documentation.
const CLAUSING_SOLVER_ACCURACY: f64 = 1e-7;
/// How often a running case prints a progress line.
const PROGRESS_EVERY: Duration = Duration::from_secs(10);

#[derive(Parser, Debug)]
#[command(
    name = "validate",
    about = "Run the kinflux validation suite and write report.md and results.json"
)]
struct Cli {
    /// Smoke run: target_uncertainty loosened to 0.01, 20 000 simulated molecules, and
    /// tolerances of simulated quantities widened to at least 3 %.
    #[arg(long)]
    quick: bool,
    /// Run only this check (exact name, or else every check whose name contains it); repeatable.
    #[arg(long, value_name = "NAME")]
    only: Vec<String>,
    /// Output directory (default validation/results, or validation/results-quick with --quick).
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
    /// References file (default validation/references.toml); case files are looked up in the
    /// `cases/` directory beside it.
    #[arg(long, value_name = "FILE")]
    references: Option<PathBuf>,
}

/// The references file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ReferencesFile {
    check: Vec<CheckSpec>,
}

/// One `[[check]]`.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
struct CheckSpec {
    name: String,
    case: String,
    #[serde(default)]
    set: Vec<String>,
    quantity: String,
    reference: ReferenceSpec,
    reference_uncertainty: f64,
    tolerance: f64,
    source: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    note: Option<String>,
}

/// A reference: a number, or the name of an analytic function evaluated for the case.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(untagged)]
enum ReferenceSpec {
    Value(f64),
    Analytic(String),
}

/// What a check measures.
#[derive(Debug, Clone, PartialEq)]
enum Quantity {
    /// W = Ṁ/Ṁ_fm of the whole gas.
    ReducedFlowRate,
    /// W_i of one species (its molecule flow over its own effusion flow into vacuum).
    SpeciesReducedFlowRate(String),
    /// (ṅ_A/x_A)/(ṅ_B/x_B): molar flow ratio per unit upstream mole fraction.
    SpeciesMolarRatio(String, String),
    /// kinflux::analytic::clausing_factor(thickness/radius) of the case (no simulation).
    AnalyticClausingFactor,
}

impl Quantity {
    fn parse(text: &str) -> Result<Quantity> {
        let text = text.trim();
        if text == "reduced_flow_rate" {
            return Ok(Quantity::ReducedFlowRate);
        }
        if text == "analytic_clausing_factor" {
            return Ok(Quantity::AnalyticClausingFactor);
        }
        if let Some(sp) = text.strip_prefix("species_reduced_flow_rate:") {
            if !sp.trim().is_empty() {
                return Ok(Quantity::SpeciesReducedFlowRate(sp.trim().to_string()));
            }
        }
        if let Some(pair) = text.strip_prefix("species_molar_ratio:") {
            if let Some((a, b)) = pair.split_once('/') {
                if !a.trim().is_empty() && !b.trim().is_empty() {
                    return Ok(Quantity::SpeciesMolarRatio(
                        a.trim().to_string(),
                        b.trim().to_string(),
                    ));
                }
            }
        }
        bail!(
            "quantity `{text}`: expected reduced_flow_rate, species_reduced_flow_rate:X, \
             species_molar_ratio:A/B or analytic_clausing_factor"
        )
    }

    fn needs_run(&self) -> bool {
        !matches!(self, Quantity::AnalyticClausingFactor)
    }

    /// Species the quantity names (checked against the case before any run).
    fn species(&self) -> Vec<&str> {
        match self {
            Quantity::SpeciesReducedFlowRate(s) => vec![s.as_str()],
            Quantity::SpeciesMolarRatio(a, b) => vec![a.as_str(), b.as_str()],
            _ => Vec::new(),
        }
    }
}

/// A check with its case resolved and its quantity parsed.
struct Prepared {
    spec: CheckSpec,
    quantity: Quantity,
    case: Case,
    /// Overrides actually applied (the check's `set`, plus the quick target).
    overrides: Vec<String>,
    reference: f64,
    /// Words for the report on where `reference` came from.
    reference_kind: String,
    run_key: Option<String>,
}

/// One simulation and what it produced.
#[derive(Serialize)]
struct RunRecord {
    id: usize,
    case: String,
    set: Vec<String>,
    wall_time_s: f64,
    summary: Summary,
}

/// The result of one check.
#[derive(Serialize)]
struct CheckResult {
    name: String,
    case: String,
    set: Vec<String>,
    quantity: String,
    value: f64,
    /// 95 % half-width of `value` (0 for analytic quantities, ∞ when unknown → null in JSON).
    half_width_95: Option<f64>,
    reference: f64,
    reference_kind: String,
    reference_uncertainty: f64,
    source: String,
    note: Option<String>,
    /// The same quantity from kinflux's analytic layer, where it has one.
    analytic_layer: Option<f64>,
    deviation_relative: f64,
    /// (value − reference) / sqrt(h² + U_ref²); None when both are 0.
    deviation_combined: Option<f64>,
    tolerance: f64,
    tolerance_applied: f64,
    pass: bool,
    /// Why a check failed or deserves a look, in words.
    remarks: Vec<String>,
    run: Option<usize>,
}

#[derive(Serialize)]
struct ResultsFile<'a> {
    generated_utc: String,
    commit: String,
    kinflux_version: &'static str,
    machine_threads: usize,
    rayon_threads: usize,
    quick: bool,
    references_file: String,
    total_wall_time_s: f64,
    checks_total: usize,
    checks_passed: usize,
    checks_failed: usize,
    checks: &'a [CheckResult],
    runs: &'a [RunRecord],
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(true) => ExitCode::SUCCESS,
        Ok(false) => ExitCode::from(1),
        Err(e) => {
            eprintln!("validate: error: {e:#}");
            ExitCode::from(2)
        }
    }
}

/// Run the suite; Ok(true) when every check passed.
fn run(cli: Cli) -> Result<bool> {
    let started = Instant::now();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("validation");
    let references_path = cli
        .references
        .clone()
        .unwrap_or_else(|| root.join("references.toml"));
    let cases_dir = references_path
        .parent()
        .unwrap_or_else(|| Path::new("."))
        .join("cases");
    let out_dir = cli.out.clone().unwrap_or_else(|| {
        root.join(if cli.quick {
            "results-quick"
        } else {
            "results"
        })
    });

    let text = std::fs::read_to_string(&references_path)
        .with_context(|| format!("cannot read {}", references_path.display()))?;
    let file: ReferencesFile = toml::from_str(&text).map_err(|e| {
        anyhow!(
            "{}: {}",
            references_path.display(),
            e.to_string().replace('\n', " ").trim()
        )
    })?;
    let specs = select(file.check, &cli.only)?;
    let prepared = prepare(specs, &cases_dir, cli.quick)?;

    let threads = rayon::current_num_threads();
    let machine_threads = std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(threads);
    let runs_needed: Vec<&String> = {
        let mut keys: Vec<&String> = Vec::new();
        for p in &prepared {
            if let Some(k) = &p.run_key {
                if !keys.contains(&k) {
                    keys.push(k);
                }
            }
        }
        keys
    };
    eprintln!(
        "validate: {} check(s), {} simulation(s), {} thread(s){}; references {}",
        prepared.len(),
        runs_needed.len(),
        threads,
        if cli.quick {
            ", quick mode (target_uncertainty 0.01, 20 000 molecules)"
        } else {
            ""
        },
        references_path.display()
    );

    let mut runs: Vec<RunRecord> = Vec::new();
    let mut run_index: BTreeMap<String, usize> = BTreeMap::new();
    let mut results = Vec::new();
    for (i, p) in prepared.iter().enumerate() {
        let run_id = match &p.run_key {
            None => None,
            Some(key) => Some(match run_index.get(key) {
                Some(&id) => id,
                None => {
                    let id = runs.len();
                    eprintln!(
                        "[{}/{}] run {}: {}{}",
                        id + 1,
                        runs_needed.len(),
                        id + 1,
                        p.spec.case,
                        describe_set(&p.spec.set)
                    );
                    let rec = simulate(id, p, threads)?;
                    eprintln!(
                        "      done in {:.1} s: W = {:.5} ± {:.5}, {} steps, {}",
                        rec.wall_time_s,
                        rec.summary.flow.reduced_flow_rate,
                        rec.summary.flow.reduced_flow_rate_ci95,
                        rec.summary.run.steps,
                        rec.summary.run.stop_reason_text
                    );
                    run_index.insert(key.clone(), id);
                    runs.push(rec);
                    id
                }
            }),
        };
        let r = evaluate(p, run_id.map(|id| &runs[id]), cli.quick)?;
        eprintln!(
            "  check {}/{} {}: {} = {} vs {} ({:+.3} %) {}",
            i + 1,
            prepared.len(),
            r.name,
            r.quantity,
            fmt_value(r.value, r.half_width_95),
            fmt_num(r.reference),
            100.0 * r.deviation_relative,
            if r.pass { "PASS" } else { "FAIL" }
        );
        results.push(r);
    }

    let total = started.elapsed().as_secs_f64();
    let passed = results.iter().filter(|r| r.pass).count();
    let failed = results.len() - passed;
    let header = Header {
        generated_utc: utc_now(),
        commit: git_commit(&root),
        machine_threads,
        rayon_threads: threads,
        quick: cli.quick,
        references_file: references_path.display().to_string(),
        total_wall_time_s: total,
    };

    std::fs::create_dir_all(&out_dir)
        .with_context(|| format!("cannot create {}", out_dir.display()))?;
    let report = render_report(&header, &results, &runs);
    kinflux::output::write_atomic(&out_dir.join("report.md"), report.as_bytes())?;
    let json = ResultsFile {
        generated_utc: header.generated_utc.clone(),
        commit: header.commit.clone(),
        kinflux_version: env!("CARGO_PKG_VERSION"),
        machine_threads,
        rayon_threads: threads,
        quick: cli.quick,
        references_file: header.references_file.clone(),
        total_wall_time_s: total,
        checks_total: results.len(),
        checks_passed: passed,
        checks_failed: failed,
        checks: &results,
        runs: &runs,
    };
    kinflux::output::write_json(&out_dir.join("results.json"), &json)?;
    eprintln!(
        "validate: {passed} of {} check(s) passed, {failed} failed, {:.1} s; wrote {} and {}",
        results.len(),
        total,
        out_dir.join("report.md").display(),
        out_dir.join("results.json").display()
    );
    Ok(failed == 0)
}

/// Keep the checks named by `--only` (exact name first, else substring), all when empty.
fn select(all: Vec<CheckSpec>, only: &[String]) -> Result<Vec<CheckSpec>> {
    let mut seen = std::collections::BTreeSet::new();
    for c in &all {
        if !seen.insert(c.name.clone()) {
            bail!("check name `{}` is used twice in the references", c.name);
        }
    }
    if only.is_empty() {
        return Ok(all);
    }
    let mut keep = vec![false; all.len()];
    for o in only {
        let exact: Vec<usize> = (0..all.len()).filter(|&i| all[i].name == *o).collect();
        let hits = if exact.is_empty() {
            (0..all.len())
                .filter(|&i| all[i].name.contains(o.as_str()))
                .collect()
        } else {
            exact
        };
        if hits.is_empty() {
            let names: Vec<&str> = all.iter().map(|c| c.name.as_str()).collect();
            bail!(
                "--only {o}: no check of that name; expected one of: {}",
                names.join(", ")
            );
        }
        for i in hits {
            keep[i] = true;
        }
    }
    Ok(all
        .into_iter()
        .zip(keep)
        .filter(|(_, k)| *k)
        .map(|(c, _)| c)
        .collect())
}

/// Resolve every check (case file, overrides, quantity, reference) before running anything,
/// so a typo fails in a second rather than after an hour of simulation.
fn prepare(specs: Vec<CheckSpec>, cases_dir: &Path, quick: bool) -> Result<Vec<Prepared>> {
    let mut out = Vec::new();
    for spec in specs {
        let ctx = || format!("check `{}`", spec.name);
        let quantity = Quantity::parse(&spec.quantity).with_context(ctx)?;
        if !(spec.tolerance > 0.0 && spec.tolerance.is_finite()) {
            bail!("check `{}`: tolerance must be a number above 0", spec.name);
        }
        if !(spec.reference_uncertainty >= 0.0 && spec.reference_uncertainty.is_finite()) {
            bail!(
                "check `{}`: reference_uncertainty must be a number of 0 or more",
                spec.name
            );
        }
        let mut overrides = spec.set.clone();
        if quick && quantity.needs_run() {
            overrides.push(format!("solver.target_uncertainty={QUICK_TARGET}"));
            overrides.push(format!("solver.molecules={QUICK_MOLECULES}"));
        }
        let case_path = cases_dir.join(&spec.case);
        let case = case::load(&case_path, &overrides).with_context(ctx)?;
        // Check that the planner accepts it too (same errors as `kinflux check`).
        Plan::new(&case).with_context(ctx)?;
        for sp in quantity.species() {
            if !case.gas.components.iter().any(|c| c.species.name == sp) {
                bail!(
                    "check `{}`: quantity `{}` names species `{sp}`, which is not in {}",
                    spec.name,
                    spec.quantity,
                    spec.case
                );
            }
        }
        let l_over_r = case.aperture.thickness / case.aperture.radius();
        let (reference, reference_kind) = match &spec.reference {
            ReferenceSpec::Value(x) => (*x, "published or exact value".to_string()),
            ReferenceSpec::Analytic(f) if f == "clausing_factor" => (
                kinflux::analytic::clausing_factor(l_over_r),
                format!("kinflux::analytic::clausing_factor({})", fmt_num(l_over_r)),
            ),
            ReferenceSpec::Analytic(f) => bail!(
                "check `{}`: reference \"{f}\": expected a number or \"clausing_factor\"",
                spec.name
            ),
        };
        if !(reference.is_finite() && reference != 0.0) {
            bail!(
                "check `{}`: reference must be a finite number other than 0",
                spec.name
            );
        }
        let run_key = quantity
            .needs_run()
            .then(|| format!("{}\u{1f}{}", spec.case, overrides.join("\u{1f}")));
        out.push(Prepared {
            spec,
            quantity,
            case,
            overrides,
            reference,
            reference_kind,
            run_key,
        });
    }
    if out.is_empty() {
        bail!("no checks to run");
    }
    Ok(out)
}

/// Run the case of `p` to its stopping rule.
fn simulate(id: usize, p: &Prepared, threads: usize) -> Result<RunRecord> {
    let plan = Plan::new(&p.case)?;
    let fm = plan.estimate.free_molecular_mass_flow;
    let mut sim = Simulation::new(plan);
    let outcome = sim.run(PROGRESS_EVERY, |s, e, t| match e {
        Some(e) => eprintln!(
            "      {:>5.0} s  step {:>7}  W = {:.5} ± {:.5}",
            t.as_secs_f64(),
            s.step,
            e.mean / fm,
            e.half_width / fm
        ),
        None => eprintln!(
            "      {:>5.0} s  step {:>7}  (start-up)",
            t.as_secs_f64(),
            s.step
        ),
    });
    let summary = Summary::new(&sim, &outcome, threads);
    Ok(RunRecord {
        id: id + 1,
        case: p.spec.case.clone(),
        set: p.overrides.clone(),
        wall_time_s: outcome.wall_time.as_secs_f64(),
        summary,
    })
}

/// Compare one check's quantity with its reference.
fn evaluate(p: &Prepared, run: Option<&RunRecord>, quick: bool) -> Result<CheckResult> {
    let mut remarks = Vec::new();
    let (value, half_width, analytic_layer) = match (&p.quantity, run) {
        (Quantity::AnalyticClausingFactor, _) => {
            let l = p.case.aperture.thickness / p.case.aperture.radius();
            // Stated accuracy of the solver (its documentation: better than 1e-7 absolute
            // for L/R ≤ 160).
            (
                kinflux::analytic::clausing_factor(l),
                CLAUSING_SOLVER_ACCURACY,
                None,
            )
        }
        (Quantity::ReducedFlowRate, Some(r)) => {
            let s = &r.summary;
            let analytic = s.reference.free_molecular_net_mass_flow_kg_s
                / s.reference.free_molecular_mass_flow_kg_s;
            (
                s.flow.reduced_flow_rate,
                s.flow.reduced_flow_rate_ci95,
                Some(analytic),
            )
        }
        (Quantity::SpeciesReducedFlowRate(name), Some(r)) => {
            let sp = species(&r.summary, name)?;
            let rel = sp.molar_flow_rate_ci95_mol_s / sp.molar_flow_rate_mol_s;
            let idx = p
                .case
                .gas
                .components
                .iter()
                .position(|c| c.species.name == *name)
                .expect("species checked in prepare");
            let plan_est = kinflux::analytic::Estimate::new(
                &p.case.gas,
                p.case.upstream.pressure,
                p.case.upstream.temperature,
                p.case.downstream.pressure,
                p.case.downstream.temperature,
                p.case.aperture.radius(),
                p.case.aperture.thickness,
            );
            let effusion = kinflux::analytic::effusion_molecule_flow(
                &p.case.gas,
                p.case.upstream.pressure,
                p.case.upstream.temperature,
                p.case.aperture.area(),
            );
            let analytic = plan_est.free_molecular_species_molecule_flow[idx] / effusion[idx];
            (
                sp.reduced_flow_rate,
                rel.abs() * sp.reduced_flow_rate,
                Some(analytic),
            )
        }
        (Quantity::SpeciesMolarRatio(a, b), Some(r)) => {
            let sa = species(&r.summary, a)?;
            let sb = species(&r.summary, b)?;
            let ratio = (sa.molar_flow_rate_mol_s / sa.mole_fraction)
                / (sb.molar_flow_rate_mol_s / sb.mole_fraction);
            // The species streams are independent in free-molecular flow: relative
            // half-widths add in quadrature.
            let ra = sa.molar_flow_rate_ci95_mol_s / sa.molar_flow_rate_mol_s;
            let rb = sb.molar_flow_rate_ci95_mol_s / sb.molar_flow_rate_mol_s;
            let hw = ratio.abs() * (ra * ra + rb * rb).sqrt();
            let ma = p.case.gas.components.iter().find(|c| c.species.name == *a);
            let mb = p.case.gas.components.iter().find(|c| c.species.name == *b);
            let analytic = match (ma, mb) {
                (Some(x), Some(y)) => Some((y.species.mass / x.species.mass).sqrt()),
                _ => None,
            };
            (ratio, hw, analytic)
        }
        (_, None) => bail!(
            "check `{}`: internal: no run for a simulated quantity",
            p.spec.name
        ),
    };

    let reference = p.reference;
    let deviation = value / reference - 1.0;
    let combined = (half_width * half_width + p.spec.reference_uncertainty.powi(2)).sqrt();
    let deviation_combined = if combined > 0.0 && combined.is_finite() {
        Some((value - reference) / combined)
    } else {
        None
    };
    let tolerance_applied = if quick && p.quantity.needs_run() {
        p.spec.tolerance.max(QUICK_TOLERANCE_FLOOR)
    } else {
        p.spec.tolerance
    };
    let mut pass = value.is_finite() && deviation.abs() <= tolerance_applied;
    if !half_width.is_finite() {
        pass = false;
        remarks.push("no confidence interval (too few sampling steps)".to_string());
    }
    if !value.is_finite() {
        remarks.push("value is not a finite number".to_string());
    }
    if deviation.abs() > tolerance_applied {
        remarks.push(format!(
            "deviation {:.3} % exceeds the tolerance {:.3} %",
            100.0 * deviation.abs(),
            100.0 * tolerance_applied
        ));
    }
    if let Some(z) = deviation_combined {
        if z.abs() > 2.0 {
            remarks.push(format!(
                "outside the combined 95 % band ({z:+.2} U): possible bias, or a 1-in-20 draw"
            ));
        }
    }
    if p.case.walls.accommodation < 1.0
        && p.case.aperture.thickness > 0.0
        && analytic_layer.is_some()
        && p.quantity == Quantity::ReducedFlowRate
    {
        remarks.push(format!(
            "the analytic layer's value assumes diffuse walls (Clausing); it does not apply at \
             walls.accommodation = {}",
            p.case.walls.accommodation
        ));
    }
    if let Some(r) = run {
        if r.summary.run.stop_reason != kinflux::monitor::StopReason::TargetUncertainty {
            remarks.push(format!(
                "run stopped early: {}",
                r.summary.run.stop_reason_text
            ));
        }
    }
    Ok(CheckResult {
        name: p.spec.name.clone(),
        case: p.spec.case.clone(),
        set: p.spec.set.clone(),
        quantity: p.spec.quantity.clone(),
        value,
        half_width_95: half_width.is_finite().then_some(half_width),
        reference,
        reference_kind: p.reference_kind.clone(),
        reference_uncertainty: p.spec.reference_uncertainty,
        source: p.spec.source.clone(),
        note: p.spec.note.clone(),
        analytic_layer,
        deviation_relative: deviation,
        deviation_combined,
        tolerance: p.spec.tolerance,
        tolerance_applied,
        pass,
        remarks,
        run: run.map(|r| r.id),
    })
}

fn species<'a>(s: &'a Summary, name: &str) -> Result<&'a kinflux::summary::SpeciesFlow> {
    s.flow
        .species
        .iter()
        .find(|x| x.name == name)
        .ok_or_else(|| anyhow!("species `{name}` missing from the run summary"))
}

/// Report header facts.
struct Header {
    generated_utc: String,
    commit: String,
    machine_threads: usize,
    rayon_threads: usize,
    quick: bool,
    references_file: String,
    total_wall_time_s: f64,
}

fn render_report(h: &Header, results: &[CheckResult], runs: &[RunRecord]) -> String {
    let passed = results.iter().filter(|r| r.pass).count();
    let failed = results.len() - passed;
    let mut s = String::new();
    let _ = writeln!(s, "# kinflux validation report\n");
    let _ = writeln!(s, "- generated: {} (UTC)", h.generated_utc);
    let _ = writeln!(s, "- commit: {}", h.commit);
    let _ = writeln!(s, "- kinflux version: {}", env!("CARGO_PKG_VERSION"));
    let _ = writeln!(
        s,
        "- machine: {} hardware thread(s), {} used by the engine",
        h.machine_threads, h.rayon_threads
    );
    let _ = writeln!(
        s,
        "- mode: {}",
        if h.quick {
            "quick (target_uncertainty 0.01, 20 000 molecules, tolerances of simulated quantities at least 3 %)"
        } else {
            "full (target_uncertainty of each case file)"
        }
    );
    let _ = writeln!(s, "- references: `{}`", relative(&h.references_file));
    let _ = writeln!(s, "- total wall time: {:.1} s", h.total_wall_time_s);
    let _ = writeln!(
        s,
        "- **result: {} check(s), {passed} passed, {failed} failed**\n",
        results.len()
    );
    let _ = writeln!(
        s,
        "Acceptance: |value/reference − 1| ≤ tolerance. \"dev/U\" is (value − reference)/U with \
         U = sqrt(h² + U_ref²), h the kinflux 95 % half-width (batch means) and U_ref the \
         reference's own uncertainty; |dev/U| > 2 is flagged, not failed. \"analytic layer\" is \
         the same quantity from kinflux::analytic (Clausing × (1 − p2/p1) for W, \
         sqrt(m_B/m_A) with the gas-table masses for a ratio), shown for comparison only.\n"
    );

    let _ = writeln!(s, "## Checks\n");
    let _ = writeln!(
        s,
        "| check | quantity | kinflux ± 95 % | reference ± U_ref | deviation | dev/U | tolerance | analytic layer | result | run |"
    );
    let _ = writeln!(s, "|---|---|---|---|---|---|---|---|---|---|");
    for r in results {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {:+.3} % | {} | {:.2} % | {} | {} | {} |",
            md(&r.name),
            md(&r.quantity),
            fmt_value(r.value, r.half_width_95),
            fmt_value(r.reference, Some(r.reference_uncertainty)),
            100.0 * r.deviation_relative,
            r.deviation_combined
                .map_or("—".to_string(), |z| format!("{z:+.2}")),
            100.0 * r.tolerance_applied,
            r.analytic_layer.map_or("—".to_string(), fmt_num),
            if r.pass { "PASS" } else { "**FAIL**" },
            r.run.map_or("—".to_string(), |i| i.to_string())
        );
    }

    let _ = writeln!(s, "\n## Sources and remarks\n");
    for r in results {
        let _ = writeln!(
            s,
            "- **{}** — reference {} ({}): {}",
            md(&r.name),
            fmt_num(r.reference),
            r.reference_kind,
            r.source
        );
        if let Some(n) = &r.note {
            let _ = writeln!(s, "  - note: {n}");
        }
        for rem in &r.remarks {
            let _ = writeln!(s, "  - {rem}");
        }
    }

    let _ = writeln!(s, "\n## Runs\n");
    if runs.is_empty() {
        let _ = writeln!(s, "No simulation was needed.");
    } else {
        let _ = writeln!(
            s,
            "| run | case | overrides | W ± 95 % | steps (start-up) | molecules at end | stop | wall time | particle-steps/s |"
        );
        let _ = writeln!(s, "|---|---|---|---|---|---|---|---|---|");
        for r in runs {
            let f = &r.summary.flow;
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} ({}) | {} | {} | {:.1} s | {:.3e} |",
                r.id,
                md(&r.case),
                if r.set.is_empty() {
                    "—".to_string()
                } else {
                    md(&r.set.join("; "))
                },
                fmt_value(
                    f.reduced_flow_rate,
                    Some(f.reduced_flow_rate_ci95).filter(|x| x.is_finite())
                ),
                r.summary.run.steps,
                r.summary.run.startup_steps,
                r.summary.run.molecules_at_end,
                r.summary.run.stop_reason_text,
                r.wall_time_s,
                r.summary.run.particle_steps_per_s
            );
        }
        let sum: f64 = runs.iter().map(|r| r.wall_time_s).sum();
        let _ = writeln!(s, "\nSimulation wall time, all runs: {sum:.1} s.");
    }
    s
}

/// Escape a table cell.
fn md(text: &str) -> String {
    text.replace('|', "\\|")
}

/// A path relative to the crate root when it lies inside it.
fn relative(path: &str) -> String {
    let root = env!("CARGO_MANIFEST_DIR");
    path.strip_prefix(root)
        .map(|p| p.trim_start_matches('/').to_string())
        .unwrap_or_else(|| path.to_string())
}

fn describe_set(set: &[String]) -> String {
    if set.is_empty() {
        String::new()
    } else {
        format!(" (set {})", set.join(", "))
    }
}

/// Decimals that show about five significant digits of `x`.
fn decimals(x: f64) -> usize {
    if x == 0.0 || !x.is_finite() {
        return 5;
    }
    (4 - x.abs().log10().floor() as i32).clamp(0, 9) as usize
}

fn fmt_num(x: f64) -> String {
    format!("{:.*}", decimals(x), x)
}

/// `value ± half-width` with matching decimals; the half-width is omitted when 0 or unknown.
fn fmt_value(x: f64, hw: Option<f64>) -> String {
    let d = decimals(x);
    match hw {
        Some(h) if h > 0.0 && h.is_finite() => {
            // Show at least two significant digits of the half-width.
            let dh = ((1 - h.log10().floor() as i32).clamp(0, 12) as usize).max(d);
            format!("{x:.dh$} ± {h:.dh$}")
        }
        Some(_) => format!("{x:.d$} (exact)"),
        None => format!("{x:.d$} ± ?"),
    }
}

/// Short commit of the working tree, with a mark when it has uncommitted changes.
fn git_commit(dir: &Path) -> String {
    let out = std::process::Command::new("git")
        .args(["rev-parse", "--short", "HEAD"])
        .current_dir(dir)
        .output();
    let Ok(out) = out else {
        return "unknown (git not available)".to_string();
    };
    if !out.status.success() {
        return "unknown (not a git work tree)".to_string();
    }
    let hash = String::from_utf8_lossy(&out.stdout).trim().to_string();
    let dirty = std::process::Command::new("git")
        .args(["status", "--porcelain", "--untracked-files=no"])
        .current_dir(dir)
        .output()
        .map(|o| !o.stdout.is_empty())
        .unwrap_or(false);
    if dirty {
        format!("{hash} (with uncommitted changes to tracked files)")
    } else {
        hash
    }
}

/// Current UTC time as `YYYY-MM-DD HH:MM:SS`.
fn utc_now() -> String {
    let secs = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    let (days, rem) = ((secs / 86_400) as i64, secs % 86_400);
    // Civil date from days since 1970-01-01 (the proleptic Gregorian calendar algorithm
    // "civil_from_days" of H. Hinnant, public domain).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02} {:02}:{:02}:{:02}",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}
