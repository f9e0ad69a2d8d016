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

fn render_report(
    h: &Header,
    tally: &Tally,
    results: &[CheckResult],
    skipped: &[SkippedCheck],
    runs: &[RunRecord],
    chart: &ChartData,
) -> String {
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
            format!(
                "quick (target_uncertainty {QUICK_TARGET}; {QUICK_MOLECULES} molecules in \
                 free-molecular runs, {QUICK_MOLECULES_PER_CELL} per upstream cell in DSMC runs; \
                 tolerances of simulated quantities at least {:.0} % and at least {} times the \
                 run's relative 95 % half-width; runs planned above \
                 {QUICK_MAX_PARTICLE_STEPS:.0e} particle-steps skipped)",
                100.0 * QUICK_TOLERANCE_FLOOR,
                QUICK_HALF_WIDTHS
            )
        } else {
            "full (numerics and target_uncertainty of each case file)".to_string()
        }
    );
    let _ = writeln!(s, "- references: `{}`", relative(&h.references_file));
    let _ = writeln!(s, "- total wall time: {:.1} s", h.total_wall_time_s);
    let _ = writeln!(
        s,
        "- **result: {} check(s) run: {} passed, {} failed, {} without a published value (not \
         judged){}**",
        results.len(),
        tally.passed,
        tally.failed,
        tally.not_judged,
        if tally.skipped > 0 {
            format!("; {} skipped", tally.skipped)
        } else {
            String::new()
        }
    );
    let _ = writeln!(
        s,
        "- chart: [W versus δ]({PLOT_FILE}) (thin orifice into vacuum, DSMC)\n"
    );
    let _ = writeln!(
        s,
        "Acceptance: |value/reference − 1| ≤ tolerance, and value ≤ upper bound where a check \
         has one. \"dev/U\" is (value − reference)/U with U = sqrt(h² + U_ref²), h the kinflux \
         95 % half-width (batch means) and U_ref the reference's own uncertainty; |dev/U| > 2 \
         is flagged, not failed. A check without a reference (\"no published value\") is a \
         point of the W(δ) curve: it is run and shown but counts neither as passed nor as \
         failed, unless it breaks its upper bound. \"analytic layer\" is the same quantity from \
         kinflux::analytic (Clausing × (1 − p2/p1) for W, sqrt(m_B/m_A) with the gas-table \
         masses for a ratio), shown for comparison only; in DSMC runs it is the free-molecular \
         value, not a prediction.\n"
    );

    let _ = writeln!(s, "## Checks\n");
    let _ = writeln!(
        s,
        "| check | quantity | kinflux ± 95 % | reference ± U_ref | deviation | dev/U | tolerance | upper bound | analytic layer | result | run |"
    );
    let _ = writeln!(s, "|---|---|---|---|---|---|---|---|---|---|---|");
    for r in results {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |",
            md(&r.name),
            md(&r.quantity),
            fmt_value(r.value, r.half_width_95),
            r.reference
                .map_or("no published value".to_string(), |x| fmt_value(
                    x,
                    r.reference_uncertainty
                )),
            r.deviation_relative
                .map_or("—".to_string(), |d| format!("{:+.3} %", 100.0 * d)),
            r.deviation_combined
                .map_or("—".to_string(), |z| format!("{z:+.2}")),
            r.tolerance_applied
                .map_or("—".to_string(), |t| format!("{:.2} %", 100.0 * t)),
            match (r.upper_bound, r.within_upper_bound) {
                (Some(b), Some(true)) => format!("≤ {} ✓", fmt_num(b)),
                (Some(b), _) => format!("≤ {} **✗**", fmt_num(b)),
                (None, _) => "—".to_string(),
            },
            r.analytic_layer.map_or("—".to_string(), fmt_num),
            r.verdict.label(),
            r.run.map_or("—".to_string(), |i| i.to_string())
        );
    }
    if !skipped.is_empty() {
        let _ = writeln!(s, "\nSkipped:\n");
        for k in skipped {
            let _ = writeln!(s, "- **{}**: {}", md(&k.name), k.reason);
        }
    }

    let _ = writeln!(s, "\n## W versus δ\n");
    let _ = writeln!(
        s,
        "![Reduced flow rate W versus rarefaction parameter δ]({PLOT_FILE})\n\n[{PLOT_FILE}]({PLOT_FILE}): \
         the thin-orifice DSMC runs of this report ({} point(s), {} of them numerics variants), \
         with 95 % intervals; published references with their own uncertainty; the \
         free-molecular limit W = 1, the isentropic ideal-nozzle bound W = {} (γ = {}){}. \
         Variants are drawn slightly right of their δ and references slightly left, so that \
         the bars stay apart.\n",
        chart.points.len(),
        chart.points.iter().filter(|p| p.variant.is_some()).count(),
        fmt_num(chart.bound),
        fmt_gamma(chart.gamma),
        chart.slope.as_ref().map_or(String::new(), |(k, src)| format!(
            " and the near-free-molecular line W = 1 + {k} δ ({src}) for δ ≤ {SLOPE_LINE_MAX_DELTA}"
        ))
    );
    if !chart.points.is_empty() {
        let _ = writeln!(s, "| run | δ | W ± 95 % | numerics |");
        let _ = writeln!(s, "|---|---|---|---|");
        for p in &chart.points {
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} |",
                p.run,
                fmt_num(p.delta),
                fmt_value(p.w, Some(p.half_width)),
                p.variant.as_deref().map_or("default".to_string(), md)
            );
        }
        let _ = writeln!(s);
    }

    let _ = writeln!(s, "## Sources and remarks\n");
    for r in results {
        match (&r.reference, &r.source) {
            (Some(x), Some(src)) => {
                let _ = writeln!(
                    s,
                    "- **{}** — reference {} ({}): {}",
                    md(&r.name),
                    fmt_num(*x),
                    r.reference_kind.as_deref().unwrap_or(""),
                    src
                );
            }
            _ => {
                let _ = writeln!(
                    s,
                    "- **{}** — no published value: a point of the curve, {}",
                    md(&r.name),
                    if r.upper_bound.is_some() {
                        "judged only against its upper bound"
                    } else {
                        "not judged"
                    }
                );
            }
        }
        if let (Some(b), Some(kind), Some(src)) =
            (r.upper_bound, &r.upper_bound_kind, &r.upper_bound_source)
        {
            let _ = writeln!(s, "  - upper bound {} ({kind}): {src}", fmt_num(b));
        }
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
        render_dsmc_numerics(&mut s, runs);
    }
    s
}

/// The numerics behind each DSMC run: the planned and measured quality figures of
/// summary.json (`quality.*`), the domain and cells (`numerics.*`) and the run statistics.
fn render_dsmc_numerics(s: &mut String, runs: &[RunRecord]) {
    let dsmc: Vec<&RunRecord> = runs.iter().filter(|r| r.summary.mode == "dsmc").collect();
    if dsmc.is_empty() {
        return;
    }
    let _ = writeln!(s, "\n## DSMC numerics\n");
    let _ = writeln!(
        s,
        "From each run's summary (`numerics.*`, `quality.*`, `run.*`). λ1 and τ1 are the \
         upstream mean free path and mean collision time; \"planned\" figures are at upstream \
         conditions, \"measured\" ones are domain averages over the sampling steps. Common \
         practice: cell/λ1 < {}, separation/λ1 < {}, Δt/τ1 < {}, at least {} molecules per \
         cell.\n",
        kinflux::numerics::limits::CELL_OVER_LAMBDA,
        kinflux::numerics::limits::SEPARATION_OVER_LAMBDA,
        kinflux::numerics::limits::DT_OVER_TAU,
        kinflux::numerics::limits::MOLECULES_PER_CELL
    );
    let _ = writeln!(
        s,
        "| run | δ | Kn | domain up/down/outer (a) | cell (a) × subcells | cell/λ1 | separation/λ1 planned / measured | Δt/τ1 planned / measured | molecules per cell (mean) | molecules at end | steps (start-up) | wall time | warnings |"
    );
    let _ = writeln!(s, "|---|---|---|---|---|---|---|---|---|---|---|---|---|");
    let opt = |x: Option<f64>| x.map_or("—".to_string(), |v| format!("{v:.3}"));
    for r in dsmc {
        let sm = &r.summary;
        let n = &sm.numerics;
        let q = &sm.quality;
        let _ = writeln!(
            s,
            "| {} | {} | {} | {}/{}/{} | {:.4} × {}² | {:.3} | {:.3} / {} | {:.3} / {} | {:.1} | {} | {} ({}) | {:.1} s | {} |",
            r.id,
            fmt_num(sm.regime.rarefaction_parameter),
            fmt_num(sm.regime.knudsen_number),
            n.upstream_length_radii,
            n.downstream_length_radii,
            n.outer_radius_radii,
            n.cell_size_radii,
            n.subcells_per_direction,
            q.planned_cell_over_mean_free_path,
            q.planned_separation_over_mean_free_path,
            opt(q.measured_separation_over_upstream_mean_free_path),
            q.planned_time_step_over_collision_time,
            opt(q.measured_time_step_over_collision_time),
            q.mean_molecules_per_cell,
            sm.run.molecules_at_end,
            sm.run.steps,
            sm.run.startup_steps,
            r.wall_time_s,
            if q.warnings.is_empty() {
                "none".to_string()
            } else {
                md(&q.warnings.join("; "))
            }
        );
    }
}

/// Upper end of the near-free-molecular line on the chart (the slope is a first-order result).
const SLOPE_LINE_MAX_DELTA: f64 = 0.3;

/// One kinflux point of the W(δ) chart.
struct ChartPoint {
    run: usize,
    delta: f64,
    w: f64,
    half_width: f64,
    /// The overrides besides the pressure, for a numerics variant; None for default numerics.
    variant: Option<String>,
    /// Whether a check compared this run with a published value.
    has_reference: bool,
}

/// A published reference on the chart.
struct ChartReference {
    delta: f64,
    w: f64,
    uncertainty: f64,
    source: String,
}

/// What the W(δ) chart shows.
struct ChartData {
    points: Vec<ChartPoint>,
    references: Vec<ChartReference>,
    /// Ratio of specific heats of the plotted gas, and the isentropic bound for it.
    gamma: f64,
    bound: f64,
    /// Near-free-molecular slope dW/dδ and its source, from the references file.
    slope: Option<(f64, String)>,
}

impl ChartData {
    /// The DSMC runs of a thin orifice into vacuum, with the references compared with them.
    fn collect(
        prepared: &[Prepared],
        run_prepared: &[usize],
        runs: &[RunRecord],
        results: &[CheckResult],
        slope: Option<(f64, String)>,
    ) -> ChartData {
        let mut points = Vec::new();
        let mut references: Vec<ChartReference> = Vec::new();
        let mut gamma = None;
        for (rec, &pi) in runs.iter().zip(run_prepared) {
            let p = &prepared[pi];
            let c = &p.case;
            if !(c.solver.collisions && c.aperture.thickness == 0.0 && c.downstream.pressure == 0.0)
            {
                continue;
            }
            gamma.get_or_insert(c.gas.gamma());
            let delta = rec.summary.regime.rarefaction_parameter;
            let others: Vec<&str> = p
                .spec
                .set
                .iter()
                .map(|x| x.as_str())
                .filter(|x| x.split('=').next().map(str::trim) != Some("upstream.pressure"))
                .collect();
            let on_run: Vec<&CheckResult> =
                results.iter().filter(|r| r.run == Some(rec.id)).collect();
            points.push(ChartPoint {
                run: rec.id,
                delta,
                w: rec.summary.flow.reduced_flow_rate,
                half_width: rec.summary.flow.reduced_flow_rate_ci95,
                variant: (!others.is_empty()).then(|| others.join("; ")),
                has_reference: on_run.iter().any(|r| r.reference.is_some()),
            });
            for r in on_run {
                if let (Some(w), Some(u), Some(src), true) = (
                    r.reference,
                    r.reference_uncertainty,
                    &r.source,
                    r.quantity.trim() == "reduced_flow_rate",
                ) {
                    let dup = references
                        .iter()
                        .any(|x| (x.delta / delta - 1.0).abs() < 0.01 && x.w == w);
                    if !dup {
                        references.push(ChartReference {
                            delta,
                            w,
                            uncertainty: u,
                            source: short_source(src),
                        });
                    }
                }
            }
        }
        let gamma = gamma.unwrap_or(5.0 / 3.0);
        ChartData {
            points,
            references,
            gamma,
            bound: kinflux::analytic::choked_reduced_flow(gamma),
            slope,
        }
    }
}

/// Draw W versus δ (logarithmic δ axis) as SVG text.
fn draw_w_vs_delta(chart: &ChartData) -> Result<String> {
    use plotters::prelude::*;
    use plotters::style::text_anchor::{HPos, Pos, VPos};

    const KINFLUX: RGBColor = RGBColor(31, 90, 180);
    const VARIANT: RGBColor = RGBColor(0, 140, 110);
    const PUBLISHED: RGBColor = RGBColor(200, 40, 30);
    const LIMIT: RGBColor = RGBColor(90, 90, 90);
    const BOUND: RGBColor = RGBColor(150, 60, 160);
    const SLOPE: RGBColor = RGBColor(220, 130, 0);
    // Horizontal offsets (factors on δ) that keep bars at the same δ apart.
    const VARIANT_SHIFT: f64 = 1.07;
    const REFERENCE_SHIFT: f64 = 1.0 / 1.07;

    let finite = |x: &f64| x.is_finite();
    let mut x_lo: f64 = 0.005;
    let mut x_hi: f64 = 20.0;
    let mut y_lo: f64 = 0.9;
    let mut y_hi: f64 = 1.9;
    for p in &chart.points {
        if p.delta.is_finite() && p.delta > 0.0 {
            x_lo = x_lo.min(p.delta / 1.5);
            x_hi = x_hi.max(p.delta * 1.5);
        }
        let hw = Some(p.half_width).filter(finite).unwrap_or(0.0);
        if p.w.is_finite() {
            y_lo = y_lo.min(p.w - hw - 0.05);
            y_hi = y_hi.max(p.w + hw + 0.05);
        }
    }

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 640)).into_drawing_area();
        let err = |e: &dyn std::fmt::Display| anyhow!("drawing {PLOT_FILE}: {e}");
        root.fill(&WHITE).map_err(|e| err(&e))?;
        let mut c = ChartBuilder::on(&root)
            .caption(
                "Thin orifice into vacuum: reduced flow rate W versus rarefaction δ",
                ("sans-serif", 24),
            )
            .margin(16)
            .x_label_area_size(56)
            .y_label_area_size(70)
            .build_cartesian_2d((x_lo..x_hi).log_scale(), y_lo..y_hi)
            .map_err(|e| err(&e))?;
        c.configure_mesh()
            .x_desc(
                "rarefaction parameter δ = p₁a/(μ₁v₀), v₀ = √(2kT₁/m), a = hole radius (log scale)",
            )
            .y_desc("reduced flow rate W = Ṁ/Ṁ_fm, Ṁ_fm = πa²p₁√(m/(2πkT₁))")
            .axis_desc_style(("sans-serif", 17))
            .label_style(("sans-serif", 15))
            .x_label_formatter(&|x| format!("{x}"))
            .y_label_formatter(&|y| format!("{y:.1}"))
            .light_line_style(WHITE.mix(0.0))
            .draw()
            .map_err(|e| err(&e))?;

        // Horizontal limits and the near-free-molecular line.
        c.draw_series(LineSeries::new(
            [(x_lo, 1.0), (x_hi, 1.0)],
            LIMIT.stroke_width(2),
        ))
        .map_err(|e| err(&e))?
        .label("free-molecular limit W = 1 (Knudsen effusion)")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], LIMIT.stroke_width(2)));
        c.draw_series(DashedLineSeries::new(
            [(x_lo, chart.bound), (x_hi, chart.bound)],
            8,
            5,
            BOUND.stroke_width(2),
        ))
        .map_err(|e| err(&e))?
        .label(format!(
            "isentropic ideal-nozzle bound W = {:.3} (γ = {}, gas dynamics)",
            chart.bound,
            fmt_gamma(chart.gamma)
        ))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BOUND.stroke_width(2)));
        if let Some((k, src)) = &chart.slope {
            let n = 60;
            let line: Vec<(f64, f64)> = (0..=n)
                .map(|i| {
                    let d = x_lo * (SLOPE_LINE_MAX_DELTA / x_lo).powf(i as f64 / n as f64);
                    (d, 1.0 + k * d)
                })
                .collect();
            c.draw_series(DashedLineSeries::new(line, 4, 4, SLOPE.stroke_width(2)))
                .map_err(|e| err(&e))?
                .label(format!(
                    "near-free-molecular estimate W = 1 + {k} δ, δ ≤ {SLOPE_LINE_MAX_DELTA} ({src})"
                ))
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], SLOPE.stroke_width(2))
                });
        }

        // Error bars: a vertical line with caps 8 px wide.
        let bar = |x: f64, w: f64, h: f64, color: RGBColor| {
            let style = color.stroke_width(1);
            let h = if h.is_finite() { h } else { 0.0 };
            vec![
                EmptyElement::at((x, w - h)) + PathElement::new(vec![(-4, 0), (4, 0)], style),
                EmptyElement::at((x, w + h)) + PathElement::new(vec![(-4, 0), (4, 0)], style),
            ]
        };
        let vertical = |x: f64, w: f64, h: f64, color: RGBColor| {
            let h = if h.is_finite() { h } else { 0.0 };
            PathElement::new(vec![(x, w - h), (x, w + h)], color.stroke_width(1))
        };

        // Published references.
        if !chart.references.is_empty() {
            let refs = &chart.references;
            c.draw_series(
                refs.iter()
                    .map(|r| vertical(r.delta * REFERENCE_SHIFT, r.w, r.uncertainty, PUBLISHED)),
            )
            .map_err(|e| err(&e))?;
            c.draw_series(
                refs.iter()
                    .flat_map(|r| bar(r.delta * REFERENCE_SHIFT, r.w, r.uncertainty, PUBLISHED)),
            )
            .map_err(|e| err(&e))?;
            let mut sources: Vec<&str> = refs.iter().map(|r| r.source.as_str()).collect();
            sources.dedup();
            c.draw_series(refs.iter().map(|r| {
                TriangleMarker::new((r.delta * REFERENCE_SHIFT, r.w), 7, PUBLISHED.filled())
            }))
            .map_err(|e| err(&e))?
            .label(format!(
                "published value ± its uncertainty ({})",
                sources.join("; ")
            ))
            .legend(|(x, y)| TriangleMarker::new((x + 10, y), 7, PUBLISHED.filled()));
        }

        // kinflux points: default numerics with and without a published value, and variants.
        let shift = |p: &ChartPoint| {
            if p.variant.is_some() {
                p.delta * VARIANT_SHIFT
            } else {
                p.delta
            }
        };
        let color = |p: &ChartPoint| {
            if p.variant.is_some() {
                VARIANT
            } else {
                KINFLUX
            }
        };
        c.draw_series(
            chart
                .points
                .iter()
                .map(|p| vertical(shift(p), p.w, p.half_width, color(p))),
        )
        .map_err(|e| err(&e))?;
        c.draw_series(
            chart
                .points
                .iter()
                .flat_map(|p| bar(shift(p), p.w, p.half_width, color(p))),
        )
        .map_err(|e| err(&e))?;
        let judged: Vec<&ChartPoint> = chart
            .points
            .iter()
            .filter(|p| p.variant.is_none() && p.has_reference)
            .collect();
        let unjudged: Vec<&ChartPoint> = chart
            .points
            .iter()
            .filter(|p| p.variant.is_none() && !p.has_reference)
            .collect();
        let variants: Vec<&ChartPoint> = chart
            .points
            .iter()
            .filter(|p| p.variant.is_some())
            .collect();
        if !judged.is_empty() {
            c.draw_series(
                judged
                    .iter()
                    .map(|p| Circle::new((p.delta, p.w), 5, KINFLUX.filled())),
            )
            .map_err(|e| err(&e))?
            .label("kinflux DSMC, default numerics ± 95 %, compared with a published value")
            .legend(|(x, y)| Circle::new((x + 10, y), 5, KINFLUX.filled()));
        }
        if !unjudged.is_empty() {
            c.draw_series(unjudged.iter().map(|p| {
                Circle::new(
                    (p.delta, p.w),
                    5,
                    ShapeStyle::from(&KINFLUX).stroke_width(2),
                )
            }))
            .map_err(|e| err(&e))?
            .label("kinflux DSMC, default numerics ± 95 %, no published value")
            .legend(|(x, y)| {
                Circle::new((x + 10, y), 5, ShapeStyle::from(&KINFLUX).stroke_width(2))
            });
        }
        if !variants.is_empty() {
            c.draw_series(
                variants
                    .iter()
                    .map(|p| Cross::new((shift(p), p.w), 5, VARIANT.stroke_width(2))),
            )
            .map_err(|e| err(&e))?
            .label("kinflux DSMC, domain or cell-size variant ± 95 %")
            .legend(|(x, y)| Cross::new((x + 10, y), 5, VARIANT.stroke_width(2)));
        }
        if chart.points.is_empty() {
            let (w, h) = root.dim_in_pixel();
            root.draw(&Text::new(
                "no thin-orifice DSMC run in this report",
                (w as i32 / 2, h as i32 / 2),
                ("sans-serif", 18)
                    .into_font()
                    .color(&LIMIT)
                    .pos(Pos::new(HPos::Center, VPos::Center)),
            ))
            .map_err(|e| err(&e))?;
        }

        // The legend goes just below the isentropic bound, at the left, where W(δ) stays near 1.
        let (_, plot_height) = c.plotting_area().dim_in_pixel();
        let legend_top = ((y_hi - chart.bound + 0.04) / (y_hi - y_lo) * plot_height as f64)
            .clamp(0.0, plot_height as f64 / 2.0) as i32;
        c.configure_series_labels()
            .position(SeriesLabelPosition::Coordinate(12, legend_top))
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK)
            .label_font(("sans-serif", 15))
            .draw()
            .map_err(|e| err(&e))?;
        root.present().map_err(|e| err(&e))?;
    }
    Ok(svg)
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
