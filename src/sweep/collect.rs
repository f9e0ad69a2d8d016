//! Collecting a plan's results: one row per case in `results.csv` and `results.h5`, and the
//! design charts.
//!
//! Cases with statistical replicas are merged first (into `runs/case-NNNN/merged`, redone on
//! every collect so late replicas count). Every case of the plan gets a row with its status:
//! `ok`, `partial` (some replicas missing: the finished ones are merged, flagged), `missing`
//! (not run, or interrupted before its end) or `failed` (with the task's error message). Rows
//! are never dropped: a design table with a silent hole is worse than one with a marked gap.

use super::plan::{Plan, PlannedCase};
use super::task::{state, TaskState};
use crate::error::{Error, Result};
use crate::output::csv_field;
use serde_json::Value;
use std::path::{Path, PathBuf};

/// Output file names inside the plan directory.
pub const RESULTS_CSV: &str = "results.csv";
pub const RESULTS_H5: &str = "results.h5";

/// Status of one case in the collected table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Status {
    Ok,
    Partial,
    Missing,
    Failed,
}

impl Status {
    pub fn label(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::Partial => "partial",
            Status::Missing => "missing",
            Status::Failed => "failed",
        }
    }
}

/// One collected case.
#[derive(Debug, Clone)]
pub struct Row {
    pub case: PlannedCase,
    pub status: Status,
    /// Why a case is not ok (which replicas are missing, the failure message).
    pub note: String,
    /// Gas label, reservoir pressures (Pa), upstream temperature (K), aperture shape ("circle"
    /// or "slit") and size (m: a hole's diameter or a slit's width; a slit's flows are per metre).
    pub gas: String,
    pub shape: String,
    pub upstream_pressure_pa: f64,
    pub downstream_pressure_pa: f64,
    pub upstream_temperature_k: f64,
    pub diameter_m: f64,
    pub thickness_m: f64,
    /// The result's summary.json (None when missing or failed).
    pub summary: Option<Value>,
}

/// Numeric result columns: (column name, units, path in summary.json).
pub const RESULT_COLUMNS: [(&str, &str, &str); 16] = [
    ("mass_flow_kg_s", "kg/s", "flow.mass_flow_rate_kg_s"),
    (
        "mass_flow_ci95_kg_s",
        "kg/s",
        "flow.mass_flow_rate_ci95_kg_s",
    ),
    ("reduced_flow_rate_w", "1", "flow.reduced_flow_rate"),
    ("reduced_flow_rate_ci95", "1", "flow.reduced_flow_rate_ci95"),
    ("molar_flow_mol_s", "mol/s", "flow.molar_flow_rate_mol_s"),
    ("throughput_pa_m3_s", "Pa m3/s", "flow.throughput_pa_m3_s"),
    (
        "throughput_mbar_l_s",
        "mbar L/s",
        "flow.throughput_mbar_l_s",
    ),
    ("throughput_sccm", "sccm", "flow.throughput_sccm"),
    ("throughput_slm", "slm", "flow.throughput_slm"),
    ("conductance_l_s", "L/s", "flow.conductance_l_s"),
    ("rarefaction_delta", "1", "regime.rarefaction_parameter"),
    ("knudsen_number", "1", "regime.knudsen_number"),
    (
        "free_molecular_mass_flow_kg_s",
        "kg/s",
        "reference.free_molecular_mass_flow_kg_s",
    ),
    ("clausing_factor", "1", "reference.clausing_factor"),
    (
        "isentropic_reduced_flow",
        "1",
        "reference.isentropic_reduced_flow",
    ),
    ("steps", "1", "run.steps"),
];

/// A number in summary.json by its dotted path (NaN when absent).
pub fn number(summary: &Value, path: &str) -> f64 {
    let mut v = summary;
    for p in path.split('.') {
        v = &v[p];
    }
    v.as_f64().unwrap_or(f64::NAN)
}

/// Quality flags of a result: `budget_stop` when the run stopped on a budget before reaching its
/// target uncertainty, `numerics_warnings=N` when the quality report has warnings.
pub fn quality_flags(summary: &Value) -> String {
    let mut flags = Vec::new();
    match summary["run"]["stop_reason"].as_str() {
        Some("max_steps") | Some("max_wall_time") => flags.push("budget_stop".to_string()),
        _ => {}
    }
    let n = summary["quality"]["warnings"]
        .as_array()
        .map(|w| w.len())
        .unwrap_or(0);
    if n > 0 {
        flags.push(format!("numerics_warnings={n}"));
    }
    flags.join(";")
}

fn read_summary(dir: &Path) -> Option<Value> {
    let bytes = std::fs::read(dir.join("summary.json")).ok()?;
    serde_json::from_slice(&bytes).ok()
}

/// Collect one case: merge replicas when needed, read its result.
fn collect_case(plan_dir: &Path, plan: &Plan, c: &PlannedCase, warnings: &mut Vec<String>) -> Row {
    let resolved = crate::case::load(&plan_dir.join(&c.case_file), &[]).ok();
    let mut row = Row {
        case: c.clone(),
        status: Status::Missing,
        note: String::new(),
        gas: resolved.as_ref().map(|r| r.gas.label()).unwrap_or_default(),
        shape: resolved
            .as_ref()
            .map(|r| {
                if r.aperture.per_unit_length() {
                    "slit"
                } else {
                    "circle"
                }
            })
            .unwrap_or_default()
            .to_string(),
        upstream_pressure_pa: resolved.as_ref().map_or(f64::NAN, |r| r.upstream.pressure),
        downstream_pressure_pa: resolved
            .as_ref()
            .map_or(f64::NAN, |r| r.downstream.pressure),
        upstream_temperature_k: resolved
            .as_ref()
            .map_or(f64::NAN, |r| r.upstream.temperature),
        diameter_m: resolved.as_ref().map_or(f64::NAN, |r| r.aperture.diameter),
        thickness_m: resolved.as_ref().map_or(f64::NAN, |r| r.aperture.thickness),
        summary: None,
    };
    let tasks: Vec<_> = plan.tasks.iter().filter(|t| t.case == c.index).collect();
    let mut finished: Vec<PathBuf> = Vec::new();
    let mut problems = Vec::new();
    let mut failed = false;
    for t in &tasks {
        let dir = plan_dir.join(&t.run_dir);
        let who = if t.replica.count > 1 {
            format!("replica {}", t.replica.label())
        } else {
            "run".to_string()
        };
        match state(&dir) {
            TaskState::Finished => finished.push(dir),
            TaskState::New => problems.push(format!("{who} not run (task {})", t.index)),
            TaskState::Interrupted => problems.push(format!(
                "{who} interrupted; rerun task {} to resume it",
                t.index
            )),
            TaskState::Failed(m) => {
                failed = true;
                problems.push(format!("{who} failed: {m}"));
            }
        }
    }
    row.note = problems.join("; ");
    if finished.is_empty() {
        row.status = if failed {
            Status::Failed
        } else {
            Status::Missing
        };
        return row;
    }
    // one run (or one finished replica so far) is its own result
    let result_dir = if finished.len() == 1 {
        finished[0].clone()
    } else {
        let out = plan_dir.join(&c.result_dir);
        match crate::ensemble::merge(&finished, &out, true) {
            Ok(m) => {
                warnings.extend(m.warnings.into_iter().map(|w| format!("{}: {w}", c.name)));
                out
            }
            Err(e) => {
                row.status = Status::Failed;
                row.note = format!("merging the replicas failed: {e}");
                return row;
            }
        }
    };
    row.summary = read_summary(&result_dir);
    row.status = match (&row.summary, finished.len() == tasks.len()) {
        (None, _) => {
            row.note = format!("{} has no readable summary.json", result_dir.display());
            Status::Failed
        }
        (Some(_), true) => Status::Ok,
        (Some(_), false) => Status::Partial,
    };
    row
}

/// What collect produced.
pub struct Collected {
    pub rows: Vec<Row>,
    pub files: Vec<PathBuf>,
    pub warnings: Vec<String>,
}

impl Collected {
    /// Cases that are not ok, with why.
    pub fn incomplete(&self) -> Vec<String> {
        self.rows
            .iter()
            .filter(|r| r.status != Status::Ok)
            .map(|r| format!("{} {}: {}", r.case.name, r.status.label(), r.note))
            .collect()
    }
}

/// Collect every case of the plan in `plan_dir` into results.csv, results.h5 and the charts.
pub fn collect(plan_dir: &Path) -> Result<Collected> {
    let plan = Plan::load(plan_dir)?;
    let mut warnings = Vec::new();
    let rows: Vec<Row> = plan
        .cases
        .iter()
        .map(|c| collect_case(plan_dir, &plan, c, &mut warnings))
        .collect();
    let mut files = Vec::new();
    let csv = plan_dir.join(RESULTS_CSV);
    crate::output::write_atomic(&csv, results_csv(&plan, &rows).as_bytes())?;
    files.push(csv);
    match write_h5(&plan_dir.join(RESULTS_H5), &plan, &rows) {
        Ok(Some(p)) => files.push(p),
        Ok(None) => warnings.push("results.h5 not written: built without HDF5 support".into()),
        Err(e) => warnings.push(format!("results.h5 not written: {e}")),
    }
    match super::charts::write_all(plan_dir, &plan, &rows) {
        Ok(f) => files.extend(f),
        Err(e) => warnings.push(format!("design charts not written: {e}")),
    }
    Ok(Collected {
        rows,
        files,
        warnings,
    })
}

/// The parameter value of `row` for axis `key` ("" when the case has none).
pub fn parameter<'a>(row: &'a Row, key: &str) -> &'a str {
    row.case
        .parameters
        .iter()
        .find(|(k, _)| k == key)
        .map(|(_, v)| v.as_str())
        .unwrap_or("")
}

fn fmt(x: f64) -> String {
    if x.is_nan() {
        String::new()
    } else {
        format!("{x:e}")
    }
}

fn results_csv(plan: &Plan, rows: &[Row]) -> String {
    let mut s = String::from("index,name,status");
    for a in &plan.axes {
        s.push(',');
        s.push_str(&csv_field(&a.key));
    }
    s.push_str(",replicas,gas,upstream_pressure_pa,downstream_pressure_pa,upstream_temperature_k,aperture_shape,diameter_m,thickness_m");
    for (name, _, _) in RESULT_COLUMNS {
        s.push(',');
        s.push_str(name);
    }
    s.push_str(",quality_flags,result_dir,note\n");
    for r in rows {
        s.push_str(&format!(
            "{},{},{}",
            r.case.index,
            r.case.name,
            r.status.label()
        ));
        for a in &plan.axes {
            s.push(',');
            s.push_str(&csv_field(parameter(r, &a.key)));
        }
        s.push_str(&format!(
            ",{},{},{},{},{},{},{},{}",
            r.case.replicas,
            csv_field(&r.gas),
            fmt(r.upstream_pressure_pa),
            fmt(r.downstream_pressure_pa),
            fmt(r.upstream_temperature_k),
            r.shape,
            fmt(r.diameter_m),
            fmt(r.thickness_m)
        ));
        for (_, _, path) in RESULT_COLUMNS {
            s.push(',');
            s.push_str(
                &r.summary
                    .as_ref()
                    .map(|v| fmt(number(v, path)))
                    .unwrap_or_default(),
            );
        }
        s.push_str(&format!(
            ",{},{},{}\n",
            csv_field(&r.summary.as_ref().map(quality_flags).unwrap_or_default()),
            csv_field(&r.case.result_dir),
            csv_field(&r.note)
        ));
    }
    s
}

#[cfg(feature = "hdf5-output")]
fn write_h5(path: &Path, plan: &Plan, rows: &[Row]) -> Result<Option<PathBuf>> {
    use hdf5::types::VarLenUnicode;
    let tmp = path.with_file_name(format!(".{RESULTS_H5}.{}.tmp", std::process::id()));
    let fail = |e: hdf5::Error| Error::io(path, std::io::Error::other(e.to_string()));
    let text = |s: &str| -> Result<VarLenUnicode> {
        s.replace('\0', " ")
            .parse::<VarLenUnicode>()
            .map_err(|e| Error::io(path, std::io::Error::other(e.to_string())))
    };
    let result = (|| -> Result<()> {
        let file = hdf5::File::create(&tmp).map_err(fail)?;
        let attr = |ds: &hdf5::Dataset, k: &str, v: &str| -> Result<()> {
            ds.new_attr::<VarLenUnicode>()
                .create(k)
                .map_err(fail)?
                .write_scalar(&text(v)?)
                .map_err(fail)
        };
        let strings = |name: &str, values: Vec<String>, what: &str| -> Result<()> {
            let data: Vec<VarLenUnicode> = values.iter().map(|s| text(s)).collect::<Result<_>>()?;
            let ds = file
                .new_dataset_builder()
                .with_data(&data)
                .create(name)
                .map_err(fail)?;
            attr(&ds, "description", what)
        };
        let numbers = |name: &str, values: Vec<f64>, units: &str, what: &str| -> Result<()> {
            let ds = file
                .new_dataset_builder()
                .with_data(&values)
                .create(name)
                .map_err(fail)?;
            attr(&ds, "units", units)?;
            attr(&ds, "description", what)
        };
        file.new_attr::<VarLenUnicode>()
            .create("sweep_file")
            .map_err(fail)?
            .write_scalar(&text(&plan.sweep_file)?)
            .map_err(fail)?;
        file.new_attr::<VarLenUnicode>()
            .create("caution")
            .map_err(fail)?
            .write_scalar(&text(crate::summary::CAUTION)?)
            .map_err(fail)?;
        strings(
            "name",
            rows.iter().map(|r| r.case.name.clone()).collect(),
            "case name (plan index order)",
        )?;
        strings(
            "status",
            rows.iter().map(|r| r.status.label().to_string()).collect(),
            "ok, partial, missing or failed",
        )?;
        strings(
            "note",
            rows.iter().map(|r| r.note.clone()).collect(),
            "why a case is not ok",
        )?;
        strings(
            "gas",
            rows.iter().map(|r| r.gas.clone()).collect(),
            "gas or mixture",
        )?;
        strings(
            "aperture_shape",
            rows.iter().map(|r| r.shape.clone()).collect(),
            "circle (flows of the whole hole) or slit (flows per metre of slit length)",
        )?;
        strings(
            "quality_flags",
            rows.iter()
                .map(|r| r.summary.as_ref().map(quality_flags).unwrap_or_default())
                .collect(),
            "budget_stop: target uncertainty not reached; numerics_warnings=N: see the case's summary.json",
        )?;
        let params = file.create_group("parameters").map_err(fail)?;
        for a in &plan.axes {
            let data: Vec<VarLenUnicode> = rows
                .iter()
                .map(|r| text(parameter(r, &a.key)))
                .collect::<Result<_>>()?;
            let ds = params
                .new_dataset_builder()
                .with_data(&data)
                .create(a.key.as_str())
                .map_err(fail)?;
            attr(
                &ds,
                "description",
                "sweep axis value as written into the case",
            )?;
        }
        numbers(
            "upstream_pressure",
            rows.iter().map(|r| r.upstream_pressure_pa).collect(),
            "Pa",
            "upstream reservoir pressure",
        )?;
        numbers(
            "downstream_pressure",
            rows.iter().map(|r| r.downstream_pressure_pa).collect(),
            "Pa",
            "downstream reservoir pressure",
        )?;
        numbers(
            "upstream_temperature",
            rows.iter().map(|r| r.upstream_temperature_k).collect(),
            "K",
            "upstream reservoir temperature",
        )?;
        numbers(
            "diameter",
            rows.iter().map(|r| r.diameter_m).collect(),
            "m",
            "aperture diameter (a slit's width)",
        )?;
        numbers(
            "thickness",
            rows.iter().map(|r| r.thickness_m).collect(),
            "m",
            "partition thickness",
        )?;
        for (name, units, p) in RESULT_COLUMNS {
            numbers(
                name,
                rows.iter()
                    .map(|r| r.summary.as_ref().map_or(f64::NAN, |v| number(v, p)))
                    .collect(),
                units,
                &format!("summary.json {p} (NaN where the case has no result)"),
            )?;
        }
        file.flush().map_err(fail)?;
        Ok(())
    })();
    match result {
        Ok(()) => {
            std::fs::rename(&tmp, path).map_err(|e| Error::io(path, e))?;
            Ok(Some(path.to_path_buf()))
        }
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            Err(e)
        }
    }
}

#[cfg(not(feature = "hdf5-output"))]
fn write_h5(_path: &Path, _plan: &Plan, _rows: &[Row]) -> Result<Option<PathBuf>> {
    Ok(None)
}
