//! Validation suite: runs every check of `validation/references.toml` through the kinflux
//! library, compares each result with its published or exact reference, and writes
//! `report.md`, `results.json` and the chart `w_vs_delta.svg`.
//!
//! ```text
//! cargo run --release --example validate -- [--quick] [--only NAME]... [--out DIR]
//! ```
//!
//! A check names a case file under `validation/cases/`, optional `--set`-style overrides, a
//! quantity and, optionally, a reference and an upper bound. Checks with the same case and
//! overrides share one simulation. The acceptance rule is relative: |value/reference − 1| ≤
//! tolerance, and value ≤ upper bound where one is given. The report also gives the deviation
//! in units of the combined 95 % uncertainty sqrt(h² + U_ref²), h the kinflux 95 % half-width
//! and U_ref the reference's own uncertainty (read as a 95 % half-width too). A check without a
//! reference is a curve point: it is run, reported and plotted ("no published value") and
//! counts neither as passed nor as failed, unless it breaks its upper bound, which fails it.
//! Exit status: 0 no check failed, 1 a check failed, 2 bad input (references or case file).
//!
//! This file reads, selects, runs and evaluates the checks; `report` writes report.md and
//! `chart` draws the W(δ) chart from the evaluated results.

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

mod chart;
mod report;
use chart::*;
use report::*;

/// Target uncertainty of a `--quick` run.
const QUICK_TARGET: f64 = 0.01;
/// Simulated molecules of a `--quick` run. The stopping rule trusts an interval only after 640
/// sampling steps, and at the default 100 000 molecules the interval is then already below
/// 0.3 %; so a looser target alone barely shortens a run, and the smoke run also uses fewer
/// molecules (about 5 times faster per step, interval still well below the quick target).
const QUICK_MOLECULES: u64 = 20_000;
/// Simulated molecules per upstream cell of a collisional (DSMC) `--quick` run: the common-
/// practice floor (`kinflux::numerics::limits::MOLECULES_PER_CELL`) instead of the default 15,
/// so the cells stay resolved while the run is about half as costly. A fixed total such as
/// `QUICK_MOLECULES` would leave less than one molecule per cell at δ = 10.
const QUICK_MOLECULES_PER_CELL: u64 = 8;
/// Largest planned cost of one `--quick` run, in particle-steps (simulated molecules at the
/// start × (start-up steps + the fewest sampling steps)); a costlier run is skipped in quick
/// mode and listed in the report. About a minute of DSMC on two cores.
const QUICK_MAX_PARTICLE_STEPS: f64 = 1.0e9;
/// Fewest sampling steps before the engine's stopping rule trusts an interval (simulation.rs).
const MIN_SAMPLING_STEPS: u64 = 640;
/// Smallest relative tolerance applied to simulated quantities in a `--quick` run (three
/// times the quick target, so that a correct engine passes a smoke run).
const QUICK_TOLERANCE_FLOOR: f64 = 0.03;
/// In a `--quick` run the tolerance of a simulated quantity is also at least this many times
/// the run's own relative 95 % half-width: a quantity that amplifies the noise of W, such as
/// the slope (W − 1)/δ near δ = 0, would otherwise fail a smoke run by chance.
const QUICK_HALF_WIDTHS: f64 = 2.0;
/// Name of the W(δ) chart written beside the report.
const PLOT_FILE: &str = "w_vs_delta.svg";
/// Absolute accuracy of kinflux::analytic::clausing_factor for L/R ≤ 160, from its documentation.
const CLAUSING_SOLVER_ACCURACY: f64 = 1e-7;
/// How often a running case prints a progress line.
const PROGRESS_EVERY: Duration = Duration::from_secs(10);

#[derive(Parser, Debug)]
#[command(
    name = "validate",
    about = "Run the kinflux validation suite and write report.md, results.json and w_vs_delta.svg"
)]
struct Cli {
    /// Smoke run: target_uncertainty loosened to 0.01, 20 000 simulated molecules
    /// (free-molecular) or 8 per upstream cell (DSMC), tolerances of simulated quantities
    /// widened to at least 3 % and twice the run's relative half-width, and runs planned above
    /// 1e9 particle-steps (the δ = 10 orifice runs) skipped.
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
    /// Absent for a curve point (no published value): run, reported, plotted, not judged.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    reference: Option<ReferenceSpec>,
    /// Required with `reference`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    reference_uncertainty: Option<f64>,
    /// Required with `reference`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    tolerance: Option<f64>,
    /// Required with `reference`: where the reference comes from.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    source: Option<String>,
    /// Optional upper bound of the quantity: a number, or "isentropic_nozzle".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    upper_bound: Option<ReferenceSpec>,
    /// Required with `upper_bound`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    upper_bound_source: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    note: Option<String>,
}

/// A reference or a bound: a number, or the name of an analytic function evaluated for the case.
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
    /// (W − 1)/δ of the run, δ = p1 a/(μ1 v0) its rarefaction parameter: the slope of W(δ)
    /// from the free-molecular limit W = 1.
    NearFreeMolecularSlope,
    /// Centreline peaking factor of the run's beam (`plume.peaking_factor`, the mean over the
    /// cone θ < 5° over the cosine law of the same throughput).
    PeakingFactor,
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
        if text == "near_free_molecular_slope" {
            return Ok(Quantity::NearFreeMolecularSlope);
        }
        if text == "peaking_factor" {
            return Ok(Quantity::PeakingFactor);
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
             species_molar_ratio:A/B, near_free_molecular_slope, peaking_factor or \
             analytic_clausing_factor"
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

/// A reference resolved for its case.
#[derive(Debug, Clone)]
struct Reference {
    value: f64,
    /// Words for the report on where `value` came from.
    kind: String,
    uncertainty: f64,
    tolerance: f64,
    source: String,
}

/// An upper bound resolved for its case.
#[derive(Debug, Clone)]
struct UpperBound {
    value: f64,
    kind: String,
    source: String,
}

/// A check with its case resolved and its quantity parsed.
struct Prepared {
    spec: CheckSpec,
    quantity: Quantity,
    case: Case,
    /// Overrides actually applied (the check's `set`, plus the quick settings).
    overrides: Vec<String>,
    reference: Option<Reference>,
    upper_bound: Option<UpperBound>,
    run_key: Option<String>,
    /// Why the check is not run (quick mode over its budget).
    skip: Option<String>,
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

/// How a check came out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
enum Verdict {
    Pass,
    Fail,
    /// A curve point without a published value (within its upper bound, if any).
    NoPublishedValue,
}

impl Verdict {
    fn label(self) -> &'static str {
        match self {
            Verdict::Pass => "PASS",
            Verdict::Fail => "**FAIL**",
            Verdict::NoPublishedValue => "no published value",
        }
    }
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
    /// None for a curve point (no published value).
    reference: Option<f64>,
    reference_kind: Option<String>,
    reference_uncertainty: Option<f64>,
    source: Option<String>,
    note: Option<String>,
    /// The same quantity from kinflux's analytic layer, where it has one.
    analytic_layer: Option<f64>,
    deviation_relative: Option<f64>,
    /// (value − reference) / sqrt(h² + U_ref²); None when both are 0 or without reference.
    deviation_combined: Option<f64>,
    tolerance: Option<f64>,
    tolerance_applied: Option<f64>,
    upper_bound: Option<f64>,
    upper_bound_kind: Option<String>,
    upper_bound_source: Option<String>,
    /// value ≤ upper_bound; None without a bound.
    within_upper_bound: Option<bool>,
    verdict: Verdict,
    /// true passed, false failed, null not judged (no published value).
    pass: Option<bool>,
    /// Why a check failed or deserves a look, in words.
    remarks: Vec<String>,
    run: Option<usize>,
}

/// A check not run (quick mode).
#[derive(Serialize)]
struct SkippedCheck {
    name: String,
    reason: String,
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
    /// Curve points without a published value (run, not judged).
    checks_without_reference: usize,
    checks_skipped: usize,
    plot: &'static str,
    checks: &'a [CheckResult],
    skipped: &'a [SkippedCheck],
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

/// Run the suite; Ok(true) when no check failed.
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
    // The chart's near-free-molecular line comes from the references file, whichever checks
    // `--only` selects.
    let slope_line = file.check.iter().find_map(|c| {
        let is_slope = Quantity::parse(&c.quantity).ok()? == Quantity::NearFreeMolecularSlope;
        match (&c.reference, is_slope) {
            (Some(ReferenceSpec::Value(x)), true) => {
                Some((*x, short_source(c.source.as_deref().unwrap_or(""))))
            }
            _ => None,
        }
    });
    let specs = select(file.check, &cli.only)?;
    let prepared = prepare(specs, &cases_dir, cli.quick)?;

    let threads = rayon::current_num_threads();
    let machine_threads = std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(threads);
    let runs_needed: Vec<&String> = {
        let mut keys: Vec<&String> = Vec::new();
        for p in prepared.iter().filter(|p| p.skip.is_none()) {
            if let Some(k) = &p.run_key {
                if !keys.contains(&k) {
                    keys.push(k);
                }
            }
        }
        keys
    };
    let skipping = prepared.iter().filter(|p| p.skip.is_some()).count();
    eprintln!(
        "validate: {} check(s), {} simulation(s), {} thread(s){}; references {}",
        prepared.len() - skipping,
        runs_needed.len(),
        threads,
        if cli.quick {
            format!(
                ", quick mode (target_uncertainty {QUICK_TARGET}; {QUICK_MOLECULES} molecules \
                 free-molecular, {QUICK_MOLECULES_PER_CELL} per cell DSMC; {skipping} check(s) \
                 over the {QUICK_MAX_PARTICLE_STEPS:.0e} particle-step budget skipped)"
            )
        } else {
            String::new()
        },
        references_path.display()
    );

    let mut runs: Vec<RunRecord> = Vec::new();
    // For each run, the index in `prepared` of the first check that used it.
    let mut run_prepared: Vec<usize> = Vec::new();
    let mut run_index: BTreeMap<String, usize> = BTreeMap::new();
    let mut results = Vec::new();
    let mut skipped = Vec::new();
    for (i, p) in prepared.iter().enumerate() {
        if let Some(reason) = &p.skip {
            eprintln!(
                "  check {}/{} {}: skipped ({reason})",
                i + 1,
                prepared.len(),
                p.spec.name
            );
            skipped.push(SkippedCheck {
                name: p.spec.name.clone(),
                reason: reason.clone(),
            });
            continue;
        }
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
                    run_prepared.push(i);
                    id
                }
            }),
        };
        let r = evaluate(p, run_id.map(|id| &runs[id]), cli.quick)?;
        eprintln!(
            "  check {}/{} {}: {} = {} vs {}{} {}",
            i + 1,
            prepared.len(),
            r.name,
            r.quantity,
            fmt_value(r.value, r.half_width_95),
            match (r.reference, r.deviation_relative) {
                (Some(x), Some(d)) => format!("{} ({:+.3} %)", fmt_num(x), 100.0 * d),
                _ => "no published value".to_string(),
            },
            r.upper_bound
                .map_or(String::new(), |b| format!(", bound ≤ {}", fmt_num(b))),
            match r.verdict {
                Verdict::Pass => "PASS",
                Verdict::Fail => "FAIL",
                Verdict::NoPublishedValue => "(not judged)",
            }
        );
        results.push(r);
    }

    let total = started.elapsed().as_secs_f64();
    let tally = Tally::of(&results, skipped.len());
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
    let chart = ChartData::collect(&prepared, &run_prepared, &runs, &results, slope_line);
    let svg = draw_w_vs_delta(&chart)?;
    kinflux::output::write_atomic(&out_dir.join(PLOT_FILE), svg.as_bytes())?;
    let report = render_report(&header, &tally, &results, &skipped, &runs, &chart);
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
        checks_passed: tally.passed,
        checks_failed: tally.failed,
        checks_without_reference: tally.not_judged,
        checks_skipped: tally.skipped,
        plot: PLOT_FILE,
        checks: &results,
        skipped: &skipped,
        runs: &runs,
    };
    kinflux::output::write_json(&out_dir.join("results.json"), &json)?;
    eprintln!(
        "validate: {} check(s): {} passed, {} failed, {} without a published value (not \
         judged), {} skipped; {:.1} s; wrote {}, {} and {}",
        results.len(),
        tally.passed,
        tally.failed,
        tally.not_judged,
        tally.skipped,
        total,
        out_dir.join("report.md").display(),
        out_dir.join("results.json").display(),
        out_dir.join(PLOT_FILE).display()
    );
    Ok(tally.failed == 0)
}

/// Counts of the verdicts.
struct Tally {
    passed: usize,
    failed: usize,
    not_judged: usize,
    skipped: usize,
}

impl Tally {
    fn of(results: &[CheckResult], skipped: usize) -> Tally {
        let count = |v: Verdict| results.iter().filter(|r| r.verdict == v).count();
        Tally {
            passed: count(Verdict::Pass),
            failed: count(Verdict::Fail),
            not_judged: count(Verdict::NoPublishedValue),
            skipped,
        }
    }
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

/// Resolve every check (case file, overrides, quantity, reference, bound) before running
/// anything, so a typo fails in a second rather than after an hour of simulation.
fn prepare(specs: Vec<CheckSpec>, cases_dir: &Path, quick: bool) -> Result<Vec<Prepared>> {
    let mut out = Vec::new();
    for spec in specs {
        let ctx = || format!("check `{}`", spec.name);
        let quantity = Quantity::parse(&spec.quantity).with_context(ctx)?;
        let case_path = cases_dir.join(&spec.case);
        let mut overrides = spec.set.clone();
        if quick && quantity.needs_run() {
            let base = case::load(&case_path, &overrides).with_context(ctx)?;
            overrides.push(format!("solver.target_uncertainty={QUICK_TARGET}"));
            if !base.solver.collisions {
                overrides.push(format!("solver.molecules={QUICK_MOLECULES}"));
            } else if base.solver.molecules.is_none() {
                overrides.push(format!(
                    "solver.molecules_per_cell={QUICK_MOLECULES_PER_CELL}"
                ));
            }
        }
        let case = case::load(&case_path, &overrides).with_context(ctx)?;
        // Check that the planner accepts it too (same errors as `kinflux check`).
        let plan = Plan::new(&case).with_context(ctx)?;
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
        if quantity == Quantity::NearFreeMolecularSlope && !case.solver.collisions {
            bail!(
                "check `{}`: quantity near_free_molecular_slope needs solver.collisions = true \
                 (without collisions W stays at its free-molecular value)",
                spec.name
            );
        }
        let reference = resolve_reference(&spec, &case)?;
        let upper_bound = resolve_upper_bound(&spec, &quantity, &plan)?;
        let run_key = quantity
            .needs_run()
            .then(|| format!("{}\u{1f}{}", spec.case, overrides.join("\u{1f}")));
        let cost =
            plan.choices.target_molecules as f64 * (plan.startup_steps + MIN_SAMPLING_STEPS) as f64;
        let skip = (quick && quantity.needs_run() && cost > QUICK_MAX_PARTICLE_STEPS).then(|| {
            format!(
                "quick mode: planned {cost:.1e} particle-steps ({} molecules × ({} start-up + \
                 {MIN_SAMPLING_STEPS} sampling steps)) exceed the {QUICK_MAX_PARTICLE_STEPS:.0e} \
                 budget",
                plan.choices.target_molecules, plan.startup_steps
            )
        });
        out.push(Prepared {
            spec,
            quantity,
            case,
            overrides,
            reference,
            upper_bound,
            run_key,
            skip,
        });
    }
    if out.is_empty() {
        bail!("no checks to run");
    }
    Ok(out)
}

/// The reference of a check, or None for a curve point; the keys that go with a reference
/// (`reference_uncertainty`, `tolerance`, `source`) are required with it and refused without.
fn resolve_reference(spec: &CheckSpec, case: &Case) -> Result<Option<Reference>> {
    let name = &spec.name;
    let Some(reference) = &spec.reference else {
        for (key, given) in [
            (
                "reference_uncertainty",
                spec.reference_uncertainty.is_some(),
            ),
            ("tolerance", spec.tolerance.is_some()),
            ("source", spec.source.is_some()),
        ] {
            if given {
                bail!(
                    "check `{name}`: `{key}` is given without a `reference` (a check without \
                     a reference is a curve point; put what it is in `note`)"
                );
            }
        }
        return Ok(None);
    };
    let missing = |key: &str| anyhow!("check `{name}`: `{key}` is required with a `reference`");
    let tolerance = spec.tolerance.ok_or_else(|| missing("tolerance"))?;
    let uncertainty = spec
        .reference_uncertainty
        .ok_or_else(|| missing("reference_uncertainty"))?;
    let source = spec.source.clone().ok_or_else(|| missing("source"))?;
    if !(tolerance > 0.0 && tolerance.is_finite()) {
        bail!("check `{name}`: tolerance must be a number above 0");
    }
    if !(uncertainty >= 0.0 && uncertainty.is_finite()) {
        bail!("check `{name}`: reference_uncertainty must be a number of 0 or more");
    }
    let l_over_r = case.aperture.thickness / case.aperture.radius();
    let (value, kind) = match reference {
        ReferenceSpec::Value(x) => (*x, "published or exact value".to_string()),
        ReferenceSpec::Analytic(f) if f == "clausing_factor" => (
            kinflux::analytic::clausing_factor(l_over_r),
            format!("kinflux::analytic::clausing_factor({})", fmt_num(l_over_r)),
        ),
        ReferenceSpec::Analytic(f) if f == "clausing_beam_centre" => {
            // Clausing's tube beam averaged over the first polar bin, the cone the simulation's
            // peaking factor is measured in.
            let (lo, hi) = kinflux::beam::bin_edges(0);
            (
                kinflux::analytic::TubeBeam::new(l_over_r).bin_average(lo, hi),
                format!(
                    "kinflux::analytic::TubeBeam::new({}).bin_average(0°, {}°)",
                    fmt_num(l_over_r),
                    kinflux::beam::POLAR_BIN_DEG
                ),
            )
        }
        ReferenceSpec::Analytic(f) => {
            bail!(
                "check `{name}`: reference \"{f}\": expected a number, \"clausing_factor\" or \
                 \"clausing_beam_centre\""
            )
        }
    };
    if !(value.is_finite() && value != 0.0) {
        bail!("check `{name}`: reference must be a finite number other than 0");
    }
    Ok(Some(Reference {
        value,
        kind,
        uncertainty,
        tolerance,
        source,
    }))
}

/// The upper bound of a check, if it has one (`upper_bound_source` is required with it).
fn resolve_upper_bound(
    spec: &CheckSpec,
    quantity: &Quantity,
    plan: &Plan,
) -> Result<Option<UpperBound>> {
    let name = &spec.name;
    let Some(bound) = &spec.upper_bound else {
        if spec.upper_bound_source.is_some() {
            bail!("check `{name}`: `upper_bound_source` is given without an `upper_bound`");
        }
        return Ok(None);
    };
    let source = spec.upper_bound_source.clone().ok_or_else(|| {
        anyhow!("check `{name}`: `upper_bound_source` is required with an `upper_bound`")
    })?;
    let (value, kind) = match bound {
        ReferenceSpec::Value(x) => (*x, "stated bound".to_string()),
        ReferenceSpec::Analytic(f) if f == "isentropic_nozzle" => {
            if *quantity != Quantity::ReducedFlowRate {
                bail!(
                    "check `{name}`: upper_bound \"isentropic_nozzle\" bounds W; it needs \
                     quantity = \"reduced_flow_rate\""
                );
            }
            let gamma = plan.estimate.gamma;
            (
                kinflux::analytic::choked_reduced_flow(gamma),
                format!(
                    "kinflux::analytic::choked_reduced_flow(γ = {})",
                    fmt_gamma(gamma)
                ),
            )
        }
        ReferenceSpec::Analytic(f) => {
            bail!("check `{name}`: upper_bound \"{f}\": expected a number or \"isentropic_nozzle\"")
        }
    };
    if !value.is_finite() {
        bail!("check `{name}`: upper_bound must be a finite number");
    }
    Ok(Some(UpperBound {
        value,
        kind,
        source,
    }))
}

/// γ as a fraction where it is one of the usual ones (5/3, 7/5), else with 4 decimals.
fn fmt_gamma(gamma: f64) -> String {
    for (num, den) in [(5, 3), (7, 5), (4, 3)] {
        if (gamma - num as f64 / den as f64).abs() < 1e-9 {
            return format!("{num}/{den}");
        }
    }
    format!("{gamma:.4}")
}

/// The author-and-year part of a source text (up to the first comma).
fn short_source(source: &str) -> String {
    source.split(',').next().unwrap_or("").trim().to_string()
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
        (Quantity::PeakingFactor, Some(r)) => {
            let pl = &r.summary.plume;
            (
                pl.peaking_factor,
                pl.peaking_factor_ci95,
                pl.free_molecular_over_cosine_law.first().copied(),
            )
        }
        (Quantity::NearFreeMolecularSlope, Some(r)) => {
            let s = &r.summary;
            let delta = s.regime.rarefaction_parameter;
            (
                (s.flow.reduced_flow_rate - 1.0) / delta,
                s.flow.reduced_flow_rate_ci95 / delta,
                None,
            )
        }
        (_, None) => bail!(
            "check `{}`: internal: no run for a simulated quantity",
            p.spec.name
        ),
    };

    let mut failed = false;
    if !value.is_finite() {
        failed = true;
        remarks.push("value is not a finite number".to_string());
    }
    if !half_width.is_finite() {
        failed = true;
        remarks.push("no confidence interval (too few sampling steps)".to_string());
    }
    let mut deviation_relative = None;
    let mut deviation_combined = None;
    let mut tolerance_applied = None;
    if let Some(rf) = &p.reference {
        let deviation = value / rf.value - 1.0;
        let combined = (half_width * half_width + rf.uncertainty.powi(2)).sqrt();
        if combined > 0.0 && combined.is_finite() {
            deviation_combined = Some((value - rf.value) / combined);
        }
        let tol = if quick && p.quantity.needs_run() {
            let own = QUICK_HALF_WIDTHS * half_width / rf.value.abs();
            rf.tolerance
                .max(QUICK_TOLERANCE_FLOOR)
                .max(if own.is_finite() { own } else { 0.0 })
        } else {
            rf.tolerance
        };
        // NaN deviations fail too.
        if deviation.is_nan() || deviation.abs() > tol {
            failed = true;
            remarks.push(format!(
                "deviation {:.3} % exceeds the tolerance {:.3} %",
                100.0 * deviation.abs(),
                100.0 * tol
            ));
        }
        if let Some(z) = deviation_combined {
            if z.abs() > 2.0 {
                remarks.push(format!(
                    "outside the combined 95 % band ({z:+.2} U): possible bias, or a 1-in-20 draw"
                ));
            }
        }
        deviation_relative = Some(deviation);
        tolerance_applied = Some(tol);
    }
    let within_upper_bound = p.upper_bound.as_ref().map(|b| value <= b.value);
    if let (Some(false), Some(b)) = (within_upper_bound, &p.upper_bound) {
        failed = true;
        remarks.push(format!(
            "value {} is above the upper bound {} ({})",
            fmt_num(value),
            fmt_num(b.value),
            b.kind
        ));
    }
    let verdict = if failed {
        Verdict::Fail
    } else if p.reference.is_some() {
        Verdict::Pass
    } else {
        Verdict::NoPublishedValue
    };
    if p.case.walls.accommodation < 1.0
        && p.case.aperture.thickness > 0.0
        && analytic_layer.is_some()
        && matches!(
            p.quantity,
            Quantity::ReducedFlowRate | Quantity::PeakingFactor
        )
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
        if !r.summary.quality.warnings.is_empty() && r.summary.mode == "dsmc" {
            remarks.push(format!(
                "the run's numerics carry {} warning(s); see the DSMC numerics table",
                r.summary.quality.warnings.len()
            ));
        }
    }
    let rf = p.reference.as_ref();
    let ub = p.upper_bound.as_ref();
    Ok(CheckResult {
        name: p.spec.name.clone(),
        case: p.spec.case.clone(),
        set: p.spec.set.clone(),
        quantity: p.spec.quantity.clone(),
        value,
        half_width_95: half_width.is_finite().then_some(half_width),
        reference: rf.map(|r| r.value),
        reference_kind: rf.map(|r| r.kind.clone()),
        reference_uncertainty: rf.map(|r| r.uncertainty),
        source: rf.map(|r| r.source.clone()),
        note: p.spec.note.clone(),
        analytic_layer,
        deviation_relative,
        deviation_combined,
        tolerance: rf.map(|r| r.tolerance),
        tolerance_applied,
        upper_bound: ub.map(|b| b.value),
        upper_bound_kind: ub.map(|b| b.kind.clone()),
        upper_bound_source: ub.map(|b| b.source.clone()),
        within_upper_bound,
        verdict,
        pass: match verdict {
            Verdict::Pass => Some(true),
            Verdict::Fail => Some(false),
            Verdict::NoPublishedValue => None,
        },
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
