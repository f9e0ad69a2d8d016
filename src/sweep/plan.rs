//! Sweep files and plan directories.
//!
//! A sweep file (TOML) names a base case and the axes to vary:
//!
//! ```toml
//! base = "orifice.toml"                 # relative to the sweep file, or absolute
//! replicas = 1                          # or one number per point, in plan order
//! zip = [["upstream.pressure", "downstream.pressure"]]   # optional: axes that vary together
//! [axes]
//! "upstream.pressure" = ["1 Pa", "10 Pa", "100 Pa"]     # a list of values, or a range:
//! "aperture.diameter" = { from = "0.1 mm", to = "1 mm", points = 4, spacing = "log" }
//! ```
//!
//! Axis keys are dotted case keys, as with `kinflux run --set`. The points are the cartesian
//! product of the axes (zipped axes count as one), the first axis varying slowest. `write`
//! resolves and checks every point's case before writing anything, then writes the plan
//! directory: `cases/case-NNNN.toml` (the base case with the point's values, self-contained),
//! `plan.json` (everything below), `manifest.csv` (case index → parameters → result directory)
//! and `tasks.csv` (task index → case, replica, run directory).
//! Invariant: indices follow the order of the points, so the same sweep file gives the same
//! plan.

use crate::case::{self, Replica};
use crate::error::{Error, Result};
use crate::output::{csv_field, write_atomic, write_json};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use toml::{Table, Value};

/// File names inside a plan directory.
pub const PLAN_FILE: &str = "plan.json";
pub const MANIFEST_FILE: &str = "manifest.csv";
pub const TASKS_FILE: &str = "tasks.csv";

/// One axis of a sweep: a dotted case key and its values (as written into the case).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Axis {
    pub key: String,
    /// Values as TOML values (quantities are strings such as "10 Pa").
    pub values: Vec<serde_json::Value>,
}

/// One point of the sweep: its own case file and result directory.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlannedCase {
    pub index: usize,
    /// "case-NNNN".
    pub name: String,
    /// Axis key → value as written into the case.
    pub parameters: Vec<(String, String)>,
    /// Case file, relative to the plan directory.
    pub case_file: String,
    /// Statistical replicas of this case (1 = a single run).
    pub replicas: u64,
    /// Directory of the case's result, relative to the plan directory (for replicas, the
    /// merged result).
    pub result_dir: String,
}

/// One unit of work: a case, or one replica of a case (a Slurm array index).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Task {
    pub index: usize,
    pub case: usize,
    pub replica: Replica,
    /// Run directory, relative to the plan directory.
    pub run_dir: String,
}

/// A plan directory's description (plan.json).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    pub kinflux_version: String,
    /// The sweep file and base case the plan was made from (absolute paths).
    pub sweep_file: String,
    pub base_case: String,
    pub axes: Vec<Axis>,
    pub zip: Vec<Vec<String>>,
    pub cases: Vec<PlannedCase>,
    pub tasks: Vec<Task>,
}

impl Plan {
    /// Read `dir/plan.json`.
    pub fn load(dir: &Path) -> Result<Plan> {
        let path = dir.join(PLAN_FILE);
        let bytes = std::fs::read(&path).map_err(|e| {
            Error::Input(format!(
                "{}: cannot read it ({e}); expected a plan directory written by kinflux sweep plan",
                path.display()
            ))
        })?;
        serde_json::from_slice(&bytes).map_err(|e| {
            Error::Input(format!(
                "{}: not a kinflux plan ({e}); expected a plan directory written by kinflux sweep plan",
                path.display()
            ))
        })
    }

    /// The task with array index `i`.
    pub fn task(&self, i: usize) -> Result<&Task> {
        self.tasks.get(i).ok_or_else(|| {
            Error::Input(format!(
                "--index {i}: expected a task index from 0 to {} (the plan has {} tasks)",
                self.tasks.len().saturating_sub(1),
                self.tasks.len()
            ))
        })
    }
}

/// What the sweep file says, checked.
struct SweepFile {
    base: PathBuf,
    base_text: String,
    axes: Vec<Axis>,
    zip: Vec<Vec<String>>,
    replicas: Vec<u64>,
    replicas_given_per_point: bool,
}

fn err(file: &str, key: &str, value: &str, expected: &str) -> Error {
    Error::input(file, key, value, expected)
}

/// Split "10 Pa" into (10, "Pa"); a bare number has an empty unit.
fn number_and_unit(v: &Value) -> Option<(f64, String)> {
    match v {
        Value::Integer(i) => Some((*i as f64, String::new())),
        Value::Float(x) => Some((*x, String::new())),
        Value::String(s) => {
            let s = s.trim();
            let end = s
                .find(|c: char| !(c.is_ascii_digit() || "+-.eE".contains(c)))
                .unwrap_or(s.len());
            let x: f64 = s[..end].trim().parse().ok()?;
            Some((x, s[end..].trim().to_string()))
        }
        _ => None,
    }
}

/// `x` in unit `from` expressed in unit `to`, when both are units of one proportional quantity
/// (pressure, length, time; temperatures have offsets and must use one unit).
fn convert(x: f64, from: &str, to: &str) -> Option<f64> {
    use crate::units::{parse, Dimension};
    if from.is_empty() || to.is_empty() {
        return None;
    }
    [Dimension::Pressure, Dimension::Length, Dimension::Time]
        .into_iter()
        .find_map(|d| {
            let a = parse(&format!("{x} {from}"), d).ok()?;
            let b = parse(&format!("1 {to}"), d).ok()?;
            Some(a / b)
        })
}

/// Six significant digits, without trailing zeros (1, 2.5, 3.16228e-5).
fn short_number(x: f64) -> String {
    if x != 0.0 && (x.abs() >= 1e6 || x.abs() < 1e-3) {
        let s = format!("{x:.5e}");
        let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
        let m = m.trim_end_matches('0').trim_end_matches('.');
        format!("{m}e{e}")
    } else {
        let s = format!("{x:.6}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    }
}

/// The values of one axis: a non-empty list, or a range table.
fn axis_values(file: &str, key: &str, v: &Value) -> Result<Vec<Value>> {
    let name = format!("axes.\"{key}\"");
    match v {
        Value::Array(a) => {
            if a.is_empty() {
                return Err(err(
                    file,
                    &name,
                    "[]",
                    "at least one value, e.g. [\"1 Pa\", \"10 Pa\"]",
                ));
            }
            Ok(a.clone())
        }
        Value::Table(t) => {
            for k in t.keys() {
                if !["from", "to", "points", "spacing"].contains(&k.as_str()) {
                    return Err(err(
                        file,
                        &format!("{name}.{k}"),
                        &t[k].to_string(),
                        "only from, to, points and spacing in a range",
                    ));
                }
            }
            let get = |k: &str| {
                t.get(k).ok_or_else(|| {
                    Error::Input(format!(
                        "{file}: {name}: missing `{k}`; expected a range {{ from = \"1 Pa\", to = \"100 Pa\", points = 5, spacing = \"log\" }}"
                    ))
                })
            };
            let (from_v, to_v, n_v) = (get("from")?, get("to")?, get("points")?);
            let quantity = "a number or a quantity with its unit, e.g. \"1 Pa\"";
            let (from, unit) = number_and_unit(from_v)
                .ok_or_else(|| err(file, &format!("{name}.from"), &from_v.to_string(), quantity))?;
            let (to, unit_to) = number_and_unit(to_v)
                .ok_or_else(|| err(file, &format!("{name}.to"), &to_v.to_string(), quantity))?;
            let to = if unit == unit_to {
                to
            } else {
                // "1 Pa" to "1 kPa": the range is written in `from`'s unit
                convert(to, &unit_to, &unit).ok_or_else(|| {
                    err(
                        file,
                        &format!("{name}.to"),
                        &to_v.to_string(),
                        &format!(
                            "a value in the same quantity as `from` ({})",
                            if unit.is_empty() {
                                "a bare number"
                            } else {
                                &unit
                            }
                        ),
                    )
                })?
            };
            let n = match n_v {
                Value::Integer(n) if *n >= 1 && *n <= 100_000 => *n as usize,
                _ => {
                    return Err(err(
                        file,
                        &format!("{name}.points"),
                        &n_v.to_string(),
                        "a whole number of points from 1 to 100000",
                    ))
                }
            };
            let log = match t.get("spacing") {
                None => false,
                Some(Value::String(s)) if s == "linear" => false,
                Some(Value::String(s)) if s == "log" => true,
                Some(v) => {
                    return Err(err(
                        file,
                        &format!("{name}.spacing"),
                        &v.to_string(),
                        "\"linear\" or \"log\"",
                    ))
                }
            };
            if log && !(from > 0.0 && to > 0.0) {
                return Err(err(
                    file,
                    &format!("{name}.from"),
                    &from_v.to_string(),
                    "values above 0 for a logarithmic range",
                ));
            }
            Ok((0..n)
                .map(|i| {
                    let f = if n == 1 {
                        0.0
                    } else {
                        i as f64 / (n - 1) as f64
                    };
                    let x = if log {
                        (from.ln() + f * (to.ln() - from.ln())).exp()
                    } else {
                        from + f * (to - from)
                    };
                    if unit.is_empty() {
                        Value::Float(x)
                    } else {
                        Value::String(format!("{} {unit}", short_number(x)))
                    }
                })
                .collect())
        }
        other => Err(err(
            file,
            &name,
            &other.to_string(),
            "a list of values or a range { from, to, points, spacing }",
        )),
    }
}

fn read_sweep(path: &Path) -> Result<SweepFile> {
    let file = path.display().to_string();
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::Input(format!("{file}: cannot read the sweep file: {e}")))?;
    let root: Table = text.parse().map_err(|e: toml::de::Error| {
        Error::Input(format!(
            "{file}: not valid TOML: {}",
            e.to_string().replace('\n', " ").trim()
        ))
    })?;
    for k in root.keys() {
        if !["base", "axes", "zip", "replicas"].contains(&k.as_str()) {
            return Err(err(
                &file,
                k,
                &root[k].to_string(),
                "only base, axes, zip and replicas in a sweep file",
            ));
        }
    }
    let base_rel = match root.get("base") {
        Some(Value::String(s)) => s.clone(),
        Some(v) => {
            return Err(err(
                &file,
                "base",
                &v.to_string(),
                "the base case file's path as a string",
            ))
        }
        None => {
            return Err(Error::Input(format!(
                "{file}: missing `base`; expected base = \"case.toml\" (relative to the sweep file)"
            )))
        }
    };
    let dir = path.parent().unwrap_or_else(|| Path::new("."));
    let base = if Path::new(&base_rel).is_absolute() {
        PathBuf::from(&base_rel)
    } else {
        dir.join(&base_rel)
    };
    let base = std::path::absolute(&base).unwrap_or(base);
    let base_text = std::fs::read_to_string(&base).map_err(|e| {
        Error::Input(format!(
            "{file}: base = \"{base_rel}\": cannot read {} ({e}); expected a case file",
            base.display()
        ))
    })?;
    let axes_t = match root.get("axes") {
        Some(Value::Table(t)) if !t.is_empty() => t,
        Some(v) => {
            return Err(err(
                &file,
                "axes",
                &v.to_string(),
                "a table of at least one axis, e.g. [axes] \"upstream.pressure\" = [\"1 Pa\", \"10 Pa\"]",
            ))
        }
        None => {
            return Err(Error::Input(format!(
                "{file}: missing [axes]; expected at least one axis, e.g. [axes] \"upstream.pressure\" = [\"1 Pa\", \"10 Pa\"]"
            )))
        }
    };
    let mut axes = Vec::new();
    for (k, v) in axes_t {
        if k == "solver.replica" {
            return Err(err(
                &file,
                &format!("axes.\"{k}\""),
                &v.to_string(),
                "a case key; give statistical replicas with the top-level `replicas`",
            ));
        }
        let values = axis_values(&file, k, v)?;
        axes.push(Axis {
            key: k.clone(),
            values: values
                .iter()
                .map(|v| serde_json::to_value(v).unwrap_or(serde_json::Value::Null))
                .collect(),
        });
    }
    let zip: Vec<Vec<String>> = match root.get("zip") {
        None => Vec::new(),
        Some(v) => {
            let expected = "a list of groups of axis keys, e.g. zip = [[\"upstream.pressure\", \"downstream.pressure\"]]";
            let groups = v
                .as_array()
                .ok_or_else(|| err(&file, "zip", &v.to_string(), expected))?;
            let mut out = Vec::new();
            for g in groups {
                let keys: Option<Vec<String>> = g
                    .as_array()
                    .map(|a| a.iter().map(|k| k.as_str().map(String::from)).collect())
                    .and_then(|x| x);
                match keys {
                    Some(keys) if keys.len() >= 2 => out.push(keys),
                    _ => return Err(err(&file, "zip", &g.to_string(), expected)),
                }
            }
            out
        }
    };
    let mut seen = std::collections::HashSet::new();
    for g in &zip {
        let lens: Vec<usize> = g
            .iter()
            .map(|k| {
                axes.iter()
                    .find(|a| &a.key == k)
                    .map(|a| a.values.len())
                    .ok_or_else(|| {
                        err(
                            &file,
                            "zip",
                            &format!("\"{k}\""),
                            "keys of axes listed in [axes]",
                        )
                    })
            })
            .collect::<Result<_>>()?;
        if lens.iter().any(|&l| l != lens[0]) {
            let desc: Vec<String> = g
                .iter()
                .zip(&lens)
                .map(|(k, l)| format!("\"{k}\" has {l}"))
                .collect();
            return Err(Error::Input(format!(
                "{file}: zip group {:?}: {}; expected zipped axes with the same number of values",
                g,
                desc.join(", ")
            )));
        }
        for k in g {
            if !seen.insert(k.clone()) {
                return Err(err(
                    &file,
                    "zip",
                    &format!("\"{k}\""),
                    "each axis in at most one zip group",
                ));
            }
        }
    }
    let (replicas, per_point) =
        match root.get("replicas") {
            None => (vec![1], false),
            Some(Value::Integer(n)) if *n >= 1 && *n <= 100_000 => (vec![*n as u64], false),
            Some(Value::Array(a)) if !a.is_empty() => {
                let v: Option<Vec<u64>> = a
                    .iter()
                    .map(|x| match x {
                        Value::Integer(n) if *n >= 1 && *n <= 100_000 => Some(*n as u64),
                        _ => None,
                    })
                    .collect();
                match v {
                    Some(v) => (v, true),
                    None => {
                        return Err(err(
                            &file,
                            "replicas",
                            &root["replicas"].to_string(),
                            "whole numbers from 1 to 100000",
                        ))
                    }
                }
            }
            Some(v) => return Err(err(
                &file,
                "replicas",
                &v.to_string(),
                "a whole number of replicas per case (1 to 100000), or one per point in plan order",
            )),
        };
    Ok(SweepFile {
        base,
        base_text,
        axes,
        zip,
        replicas,
        replicas_given_per_point: per_point,
    })
}

/// The points: for each, the (axis, value index) choices, first axis slowest.
fn points(axes: &[Axis], zip: &[Vec<String>]) -> Vec<Vec<(usize, usize)>> {
    // Dimensions: each zip group is one dimension, each other axis its own.
    let mut dims: Vec<Vec<usize>> = Vec::new();
    for (i, a) in axes.iter().enumerate() {
        match zip.iter().find(|g| g.contains(&a.key)) {
            None => dims.push(vec![i]),
            // a zip group is one dimension, placed where its first axis appears
            Some(g) if !dims.iter().flatten().any(|&j| g.contains(&axes[j].key)) => dims.push(
                (0..axes.len())
                    .filter(|&j| g.contains(&axes[j].key))
                    .collect(),
            ),
            Some(_) => {}
        }
    }
    let lens: Vec<usize> = dims.iter().map(|d| axes[d[0]].values.len()).collect();
    let total: usize = lens.iter().product();
    (0..total)
        .map(|mut n| {
            let mut pick = vec![0; dims.len()];
            for d in (0..dims.len()).rev() {
                pick[d] = n % lens[d];
                n /= lens[d];
            }
            let mut choice: Vec<(usize, usize)> = dims
                .iter()
                .zip(&pick)
                .flat_map(|(d, &k)| d.iter().map(move |&j| (j, k)))
                .collect();
            choice.sort();
            choice
        })
        .collect()
}

/// A value as it goes into a case file and into the manifest.
fn value_text(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::String(s) => s.clone(),
        // tables as the TOML the user wrote them in ({ Ar = 1.0 })
        other => toml::Value::try_from(other)
            .map(|t| t.to_string())
            .unwrap_or_else(|_| other.to_string()),
    }
}

/// Read `sweep`, check every point's case, and write the plan directory `out` (which must be
/// new or empty unless `force`). Returns the plan.
pub fn write(sweep: &Path, out: &Path, force: bool) -> Result<Plan> {
    let s = read_sweep(sweep)?;
    let file = sweep.display().to_string();
    let base_table: Table = s.base_text.parse().map_err(|e: toml::de::Error| {
        Error::Input(format!(
            "{}: not valid TOML: {}",
            s.base.display(),
            e.to_string().replace('\n', " ").trim()
        ))
    })?;
    let pts = points(&s.axes, &s.zip);
    if s.replicas_given_per_point && s.replicas.len() != pts.len() {
        return Err(err(
            &file,
            "replicas",
            &format!("a list of {}", s.replicas.len()),
            &format!(
                "one number per point ({} points), or a single number for every case",
                pts.len()
            ),
        ));
    }
    let mut cases = Vec::new();
    let mut texts = Vec::new();
    for (index, choice) in pts.iter().enumerate() {
        let name = format!("case-{index:04}");
        let mut table = base_table.clone();
        let mut parameters = Vec::new();
        for &(a, k) in choice {
            let axis = &s.axes[a];
            let value: Value = serde_json::from_value(axis.values[k].clone())
                .map_err(|e| Error::Input(format!("{file}: axes.\"{}\": {e}", axis.key)))?;
            set_key(&mut table, &axis.key).map(|slot| *slot = value.clone()).map_err(|why| {
                Error::Input(format!(
                    "{file}: axes.\"{}\": {why}; expected a dotted case key such as upstream.pressure",
                    axis.key
                ))
            })?;
            parameters.push((axis.key.clone(), value_text(&axis.values[k])));
        }
        let desc: Vec<String> = parameters
            .iter()
            .map(|(k, v)| format!("{k} = {v}"))
            .collect();
        let title = base_table
            .get("title")
            .and_then(|t| t.as_str())
            .unwrap_or("case")
            .to_string();
        if !parameters.iter().any(|(k, _)| k == "title") {
            table.insert(
                "title".into(),
                Value::String(format!("{title} [{name}: {}]", desc.join(", "))),
            );
        }
        let text = format!(
            "# {name} of the sweep {}\n# base case {}; generated by kinflux {}\n{}",
            sanitize_comment(&file),
            sanitize_comment(&s.base.display().to_string()),
            env!("CARGO_PKG_VERSION"),
            toml::to_string(&table).map_err(|e| Error::Input(format!("{file}: {e}")))?
        );
        // Every point must be a valid case before anything is written.
        let case_name = format!("cases/{name}.toml");
        let resolved = case::parse(&text, &case_name, &[]).map_err(|e| {
            Error::Input(format!("{file}: point {index} ({}): {e}", desc.join(", ")))
        })?;
        crate::numerics::Plan::new(&resolved).map_err(|e| {
            Error::Input(format!("{file}: point {index} ({}): {e}", desc.join(", ")))
        })?;
        let replicas = if s.replicas_given_per_point {
            s.replicas[index]
        } else {
            s.replicas[0]
        };
        cases.push(PlannedCase {
            index,
            name: name.clone(),
            parameters,
            case_file: case_name,
            replicas,
            result_dir: if replicas == 1 {
                format!("runs/{name}")
            } else {
                format!("runs/{name}/merged")
            },
        });
        texts.push(text);
    }
    let mut tasks = Vec::new();
    for c in &cases {
        for k in 1..=c.replicas {
            tasks.push(Task {
                index: tasks.len(),
                case: c.index,
                replica: Replica {
                    index: k,
                    count: c.replicas,
                },
                run_dir: if c.replicas == 1 {
                    format!("runs/{}", c.name)
                } else {
                    format!("runs/{}/replica-{k}-of-{}", c.name, c.replicas)
                },
            });
        }
    }
    let plan = Plan {
        kinflux_version: env!("CARGO_PKG_VERSION").into(),
        sweep_file: std::path::absolute(sweep)
            .unwrap_or(sweep.to_path_buf())
            .display()
            .to_string(),
        base_case: s.base.display().to_string(),
        axes: s.axes,
        zip: s.zip,
        cases,
        tasks,
    };
    crate::output::prepare_run_dir(out, force)?;
    let cases_dir = out.join("cases");
    std::fs::create_dir_all(&cases_dir).map_err(|e| Error::io(&cases_dir, e))?;
    for (c, text) in plan.cases.iter().zip(&texts) {
        write_atomic(&out.join(&c.case_file), text.as_bytes())?;
    }
    write_json(&out.join(PLAN_FILE), &plan)?;
    write_atomic(&out.join(MANIFEST_FILE), manifest_csv(&plan).as_bytes())?;
    write_atomic(&out.join(TASKS_FILE), tasks_csv(&plan).as_bytes())?;
    Ok(plan)
}

/// The slot for a dotted key in a TOML tree (sections created as needed).
fn set_key<'t>(table: &'t mut Table, key: &str) -> std::result::Result<&'t mut Value, String> {
    let parts: Vec<&str> = key.split('.').collect();
    if parts.iter().any(|p| p.is_empty()) {
        return Err("an empty part in the key".into());
    }
    let mut node = table;
    for p in &parts[..parts.len() - 1] {
        let entry = node
            .entry(p.to_string())
            .or_insert_with(|| Value::Table(Table::new()));
        node = match entry {
            Value::Table(t) => t,
            _ => return Err(format!("`{p}` is a value, not a section")),
        };
    }
    Ok(node
        .entry(parts[parts.len() - 1].to_string())
        .or_insert(Value::Boolean(false)))
}

/// Text safe inside a one-line comment (no line breaks or control characters).
pub fn sanitize_comment(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

fn manifest_csv(plan: &Plan) -> String {
    let mut s = String::from("index,name");
    for a in &plan.axes {
        s.push(',');
        s.push_str(&csv_field(&a.key));
    }
    s.push_str(",replicas,case_file,result_dir\n");
    for c in &plan.cases {
        s.push_str(&format!("{},{}", c.index, c.name));
        for a in &plan.axes {
            let v = c
                .parameters
                .iter()
                .find(|(k, _)| k == &a.key)
                .map(|(_, v)| v.as_str())
                .unwrap_or("");
            s.push(',');
            s.push_str(&csv_field(v));
        }
        s.push_str(&format!(
            ",{},{},{}\n",
            c.replicas,
            csv_field(&c.case_file),
            csv_field(&c.result_dir)
        ));
    }
    s
}

fn tasks_csv(plan: &Plan) -> String {
    let mut s = String::from("task,case,replica,run_dir\n");
    for t in &plan.tasks {
        s.push_str(&format!(
            "{},{},{},{}\n",
            t.index,
            t.case,
            t.replica.label(),
            csv_field(&t.run_dir)
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn axis(key: &str, n: usize) -> Axis {
        Axis {
            key: key.into(),
            values: (0..n).map(|i| serde_json::json!(i)).collect(),
        }
    }

    #[test]
    fn product_with_first_axis_slowest_and_zipped_axes_together() {
        let axes = [axis("a", 2), axis("b", 3), axis("c", 3)];
        let p = points(&axes, &[]);
        assert_eq!(p.len(), 18);
        assert_eq!(p[0], vec![(0, 0), (1, 0), (2, 0)]);
        assert_eq!(p[1], vec![(0, 0), (1, 0), (2, 1)]);
        assert_eq!(p[17], vec![(0, 1), (1, 2), (2, 2)]);
        let z = points(&axes, &[vec!["b".into(), "c".into()]]);
        assert_eq!(z.len(), 6);
        assert!(z.iter().all(|pt| pt[1].1 == pt[2].1));
        assert_eq!(z[4], vec![(0, 1), (1, 1), (2, 1)]);
    }

    #[test]
    fn ranges_convert_between_units_of_one_quantity() {
        assert!((convert(1.0, "kPa", "Pa").unwrap() - 1000.0).abs() < 1e-9);
        assert!((convert(2.0, "mm", "m").unwrap() - 2e-3).abs() < 1e-15);
        assert_eq!(convert(10.0, "K", "Pa"), None);
        assert_eq!(convert(10.0, "°C", "K"), None);
    }

    #[test]
    fn numbers_print_short() {
        assert_eq!(short_number(10.0), "10");
        assert_eq!(short_number(2.5), "2.5");
        assert_eq!(short_number(3.16227766e-5), "3.16228e-5");
        assert_eq!(short_number(31.6227766), "31.622777");
    }
}
