//! The case file: what the user wrote (TOML with units) read, checked and resolved into a
//! [`Case`] with SI values.
//!
//! Two layers, as the design asks: [`load`] reads the TOML into a tree, applies `--set`
//! overrides, then walks the tree with a [`Section`] reader that knows every allowed key, so
//! that each bad input yields one line naming the file, the key, the value and what was
//! expected (an [`Error::Input`], exit code 2). Nothing here starts a simulation or touches an
//! output directory. Invariants of a resolved `Case`: pressures ≥ 0 with p_up > 0 and
//! p_down ≤ p_up; temperatures > 0; diameter > 0; thickness ≥ 0; mole fractions sum to 1.

use crate::error::{Error, Result};
use crate::gas::{self, Component, Mixture, MolecularModel, Species};
use crate::units::{self, Dimension};
use serde::Serialize;
use std::collections::BTreeSet;
use std::path::Path;
use toml::{Table, Value};

/// Thermodynamic state of a reservoir.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ReservoirState {
    /// Pressure, Pa (0 = vacuum).
    pub pressure: f64,
    /// Temperature, K.
    pub temperature: f64,
}

/// Aperture shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ApertureShape {
    /// Circular orifice (thickness 0) or short tube (thickness > 0), axisymmetric.
    Circle,
    /// Slit of a given width, infinitely long: a thin slit (thickness 0) or a parallel-plate
    /// channel (thickness > 0), planar; results are per metre of slit length.
    Slit,
}

/// Aperture geometry.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Aperture {
    pub shape: ApertureShape,
    /// The opening across the flow, m: a hole's diameter (`aperture.diameter`), a slit's width
    /// (`aperture.width`).
    pub diameter: f64,
    /// Partition thickness (tube or channel length), m; 0 = thin orifice or slit.
    pub thickness: f64,
}

impl Aperture {
    /// Half the opening: a hole's radius, a slit's half-width, m.
    pub fn radius(&self) -> f64 {
        0.5 * self.diameter
    }
    /// Open area, m² (a slit: per metre of its length, width × 1 m).
    pub fn area(&self) -> f64 {
        match self.shape {
            ApertureShape::Circle => std::f64::consts::PI * self.radius() * self.radius(),
            ApertureShape::Slit => self.diameter,
        }
    }
    /// The case key of the opening: `aperture.diameter` or `aperture.width`.
    pub fn size_key(&self) -> &'static str {
        match self.shape {
            ApertureShape::Circle => "aperture.diameter",
            ApertureShape::Slit => "aperture.width",
        }
    }
    /// The computational symmetry of this aperture.
    pub fn symmetry(&self) -> crate::geometry::Symmetry {
        match self.shape {
            ApertureShape::Circle => crate::geometry::Symmetry::Axisymmetric,
            ApertureShape::Slit => crate::geometry::Symmetry::Planar,
        }
    }
    /// True when flows are per metre of slit length.
    pub fn per_unit_length(&self) -> bool {
        self.shape == ApertureShape::Slit
    }
}

/// Wall properties (partition faces and tube bore).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Walls {
    /// Wall temperature, K.
    pub temperature: f64,
    /// Fraction of diffuse reflection (Maxwell model); the rest is specular.
    pub accommodation: f64,
}

/// Optional domain settings; extents in aperture radii. `None` = automatic (see `numerics`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Default)]
pub struct DomainSpec {
    /// Upstream extent from the partition's upstream face, in aperture radii.
    pub upstream_length: Option<f64>,
    /// Downstream extent from the partition's downstream face, in aperture radii.
    pub downstream_length: Option<f64>,
    /// Outer radius of the domain, in aperture radii (> 1).
    pub outer_radius: Option<f64>,
    /// Ratio of the molecule weight at the outer radius to the weight on the axis (≥ 1).
    pub radial_weight_ratio: Option<f64>,
    /// Cell size, in aperture radii.
    pub cell_size: Option<f64>,
    /// Subcells per cell along each direction (1 to 8).
    pub subcells: Option<u64>,
}

/// Solver settings.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SolverSpec {
    /// Intermolecular collisions on (DSMC) or off (free-molecular test-particle mode).
    pub collisions: bool,
    /// Stop when the relative 95 % half-width of the mass flow rate falls below this.
    pub target_uncertainty: f64,
    /// Wall-time budget, s.
    pub max_wall_time: f64,
    /// Optional step budget.
    pub max_steps: Option<u64>,
    /// Seed of the random streams. For a statistical replica K of N (N > 1) this is the
    /// case's seed mixed with K (`streams::replica_seed`), so replicas are independent.
    pub seed: u64,
    /// Which statistical replica of the case this run is (`solver.replica = "K/N"`, default 1/1).
    pub replica: Replica,
    /// Time step, s (None = automatic).
    pub time_step: Option<f64>,
    /// Target number of simulated molecules in the initial fill (None = automatic).
    pub molecules: Option<u64>,
    /// Target simulated molecules per upstream cell (collisional runs; None = automatic).
    pub molecules_per_cell: Option<u64>,
    /// Rotational relaxation: constant collision number, or Parker's temperature-dependent form.
    pub rotational_relaxation: crate::collide::RotationalRelaxation,
    /// Wall time between checkpoints, s.
    pub checkpoint_interval: f64,
}

/// Statistical replica K of N of one case: same physics, independent random streams.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
pub struct Replica {
    /// 1-based index K.
    pub index: u64,
    /// Number of replicas N.
    pub count: u64,
}

impl Replica {
    /// The single run of a case (1/1).
    pub const ONE: Replica = Replica { index: 1, count: 1 };

    /// Read "K/N" with 1 ≤ K ≤ N.
    pub fn parse(text: &str) -> Option<Replica> {
        let (k, n) = text.trim().split_once('/')?;
        let (index, count) = (k.trim().parse().ok()?, n.trim().parse().ok()?);
        (index >= 1 && index <= count && count <= 1_000_000).then_some(Replica { index, count })
    }

    /// "K/N".
    pub fn label(&self) -> String {
        format!("{}/{}", self.index, self.count)
    }
}

/// A resolved case: every value in SI, checked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Case {
    /// File the case came from (for messages).
    pub source: String,
    pub title: String,
    pub model: MolecularModel,
    pub gas: Mixture,
    pub upstream: ReservoirState,
    pub downstream: ReservoirState,
    pub aperture: Aperture,
    pub walls: Walls,
    pub domain: DomainSpec,
    pub solver: SolverSpec,
}

/// Read a case file, apply `key=value` overrides, resolve and check it.
pub fn load(path: &Path, overrides: &[String]) -> Result<Case> {
    let file = path.display().to_string();
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::Input(format!("{file}: cannot read the case file: {e}")))?;
    parse(&text, &file, overrides)
}

/// Parse case text (`file` names it in messages), apply overrides, resolve and check it.
pub fn parse(text: &str, file: &str, overrides: &[String]) -> Result<Case> {
    let mut table: Table = text.parse().map_err(|e: toml::de::Error| {
        Error::Input(format!(
            "{file}: not valid TOML: {}",
            e.to_string().replace('\n', " ").trim()
        ))
    })?;
    for o in overrides {
        apply_override(&mut table, o)?;
    }
    resolve(&table, file)
}

/// Apply one `--set key=value` override to the TOML tree. The value is read as a TOML value
/// when it is one (`true`, `3`, `{ Ar = 1.0 }`, `"text"`), otherwise as a plain string
/// (`50 Pa`), so shells need no extra quoting for quantities.
pub fn apply_override(table: &mut Table, text: &str) -> Result<()> {
    let Some((key, raw)) = text.split_once('=') else {
        return Err(Error::Input(format!(
            "--set {text}: expected key=value, e.g. upstream.pressure=\"10 Pa\""
        )));
    };
    let key = key.trim();
    let raw = raw.trim();
    if key.is_empty() || key.split('.').any(|p| p.is_empty()) {
        return Err(Error::Input(format!(
            "--set {text}: expected a dotted key such as upstream.pressure"
        )));
    }
    let value = match format!("v = {raw}").parse::<Table>() {
        Ok(mut t) => t.remove("v").expect("parsed key"),
        Err(_) => Value::String(raw.to_string()),
    };
    let parts: Vec<&str> = key.split('.').collect();
    let mut node = table;
    for p in &parts[..parts.len() - 1] {
        let entry = node
            .entry(p.to_string())
            .or_insert_with(|| Value::Table(Table::new()));
        node = match entry {
            Value::Table(t) => t,
            _ => {
                return Err(Error::Input(format!(
                    "--set {text}: `{p}` is a value, not a section"
                )))
            }
        };
    }
    node.insert(parts[parts.len() - 1].to_string(), value);
    Ok(())
}

/// Reads one TOML table, knowing its allowed keys; every accessor names file and dotted key.
pub struct Section<'a> {
    file: &'a str,
    prefix: String,
    table: &'a Table,
}

impl<'a> Section<'a> {
    /// Wrap `table` found at dotted `prefix` ("" for the top level); reject unknown keys.
    pub fn new(file: &'a str, prefix: &str, table: &'a Table, allowed: &[&str]) -> Result<Self> {
        let s = Section {
            file,
            prefix: prefix.to_string(),
            table,
        };
        for k in table.keys() {
            if !allowed.contains(&k.as_str()) {
                return Err(Error::input(
                    file,
                    &s.key(k),
                    "",
                    &format!("unknown key; expected one of: {}", allowed.join(", ")),
                ));
            }
        }
        Ok(s)
    }

    /// Dotted key of `k` in this section.
    pub fn key(&self, k: &str) -> String {
        if self.prefix.is_empty() {
            k.to_string()
        } else {
            format!("{}.{k}", self.prefix)
        }
    }

    fn err(&self, k: &str, v: &Value, expected: &str) -> Error {
        Error::input(self.file, &self.key(k), &v.to_string(), expected)
    }

    fn missing(&self, k: &str, expected: &str) -> Error {
        Error::input(
            self.file,
            &self.key(k),
            "",
            &format!("missing; expected {expected}"),
        )
    }

    /// Optional sub-table.
    pub fn table(&self, k: &str) -> Result<Option<&'a Table>> {
        match self.table.get(k) {
            None => Ok(None),
            Some(Value::Table(t)) => Ok(Some(t)),
            Some(v) => Err(self.err(k, v, "a table (section)")),
        }
    }

    /// Required sub-table.
    pub fn req_table(&self, k: &str) -> Result<&'a Table> {
        self.table(k)?
            .ok_or_else(|| self.missing(k, &format!("a [{}] section", self.key(k))))
    }

    /// Optional quantity with a unit, in SI.
    pub fn quantity(&self, k: &str, dim: Dimension) -> Result<Option<f64>> {
        match self.table.get(k) {
            None => Ok(None),
            Some(Value::String(s)) => units::parse(s, dim).map(Some).map_err(|why| {
                self.err(
                    k,
                    &Value::String(s.clone()),
                    &format!("{} ({why})", dim.expected()),
                )
            }),
            Some(v) => Err(self.err(
                k,
                v,
                &format!("{} (a quoted string with a unit)", dim.expected()),
            )),
        }
    }

    /// Required quantity with a unit, in SI.
    pub fn req_quantity(&self, k: &str, dim: Dimension) -> Result<f64> {
        self.quantity(k, dim)?
            .ok_or_else(|| self.missing(k, dim.expected()))
    }

    /// Optional plain number (integers accepted).
    pub fn number(&self, k: &str, expected: &str) -> Result<Option<f64>> {
        match self.table.get(k) {
            None => Ok(None),
            Some(Value::Float(x)) if x.is_finite() => Ok(Some(*x)),
            Some(Value::Integer(i)) => Ok(Some(*i as f64)),
            Some(v) => Err(self.err(k, v, expected)),
        }
    }

    /// Optional non-negative integer.
    pub fn unsigned(&self, k: &str, expected: &str) -> Result<Option<u64>> {
        match self.table.get(k) {
            None => Ok(None),
            Some(Value::Integer(i)) if *i >= 0 => Ok(Some(*i as u64)),
            Some(v) => Err(self.err(k, v, expected)),
        }
    }

    /// Optional boolean.
    pub fn boolean(&self, k: &str) -> Result<Option<bool>> {
        match self.table.get(k) {
            None => Ok(None),
            Some(Value::Boolean(b)) => Ok(Some(*b)),
            Some(v) => Err(self.err(k, v, "true or false")),
        }
    }

    /// Optional string.
    pub fn string(&self, k: &str, expected: &str) -> Result<Option<&'a str>> {
        match self.table.get(k) {
            None => Ok(None),
            Some(Value::String(s)) => Ok(Some(s.as_str())),
            Some(v) => Err(self.err(k, v, expected)),
        }
    }

    /// Error for key `k` with the value the user gave.
    pub fn reject(&self, k: &str, expected: &str) -> Error {
        match self.table.get(k) {
            Some(v) => self.err(k, v, expected),
            None => self.missing(k, expected),
        }
    }
}

fn resolve(root: &Table, file: &str) -> Result<Case> {
    let top = Section::new(
        file,
        "",
        root,
        &[
            "title",
            "gas",
            "upstream",
            "downstream",
            "aperture",
            "walls",
            "domain",
            "solver",
        ],
    )?;
    let title = top
        .string("title", "a quoted string")?
        .unwrap_or("untitled case")
        .to_string();

    // Gas and molecular model.
    let gas_t = top.req_table("gas")?;
    let gas_s = Section::new(file, "gas", gas_t, &["species", "model", "custom"])?;
    let model = match gas_s.string("model", "\"hard_sphere\", \"vhs\" or \"vss\"")? {
        None | Some("vhs") => MolecularModel::Vhs,
        Some("vss") => MolecularModel::Vss,
        Some("hard_sphere") => MolecularModel::HardSphere,
        Some(_) => return Err(gas_s.reject("model", "\"hard_sphere\", \"vhs\" or \"vss\"")),
    };
    let custom = read_custom_species(&gas_s, file)?;
    let species_t = gas_s.req_table("species").map_err(|_| {
        gas_s.reject(
            "species",
            "a table of mole fractions such as { Ar = 1.0 } or { He = 0.5, Ar = 0.5 }",
        )
    })?;
    if species_t.is_empty() {
        return Err(gas_s.reject("species", "at least one species, e.g. { Ar = 1.0 }"));
    }
    let mut components = Vec::new();
    let known = gas::library()
        .iter()
        .map(|s| s.name.clone())
        .chain(custom.iter().map(|s| s.name.clone()))
        .collect::<Vec<_>>()
        .join(", ");
    for (name, v) in species_t {
        let key = format!("gas.species.{name}");
        let x = match v {
            Value::Float(x) => *x,
            Value::Integer(i) => *i as f64,
            _ => {
                return Err(Error::input(
                    file,
                    &key,
                    &v.to_string(),
                    "a mole fraction between 0 and 1",
                ))
            }
        };
        if !(x > 0.0 && x <= 1.0) {
            return Err(Error::input(
                file,
                &key,
                &v.to_string(),
                "a mole fraction in (0, 1]",
            ));
        }
        let species = custom
            .iter()
            .find(|s| s.name == *name)
            .cloned()
            .or_else(|| gas::lookup_with(name, model))
            .ok_or_else(|| {
                Error::input(
                    file,
                    &key,
                    "",
                    &format!(
                        "unknown gas `{name}`; expected a library gas ({known}) or one defined in [gas.custom.{name}]"
                    ),
                )
            })?;
        components.push(Component {
            species,
            mole_fraction: x,
        });
    }
    let sum: f64 = components.iter().map(|c| c.mole_fraction).sum();
    if (sum - 1.0).abs() > 1e-6 {
        return Err(Error::input(
            file,
            "gas.species",
            &Value::Table(species_t.clone())
                .to_string()
                .trim()
                .replace('\n', ", "),
            &format!("mole fractions summing to 1 within 1e-6 (they sum to {sum})"),
        ));
    }
    let gas = Mixture { components };

    // Reservoirs.
    let up_t = top.req_table("upstream")?;
    let up = Section::new(file, "upstream", up_t, &["pressure", "temperature"])?;
    let p1 = up.req_quantity("pressure", Dimension::Pressure)?;
    if p1 <= 0.0 {
        return Err(up.reject(
            "pressure",
            "a pressure above 0 (the upstream side drives the flow)",
        ));
    }
    let t1 = up.req_quantity("temperature", Dimension::Temperature)?;
    check_temperature(&up, "temperature", t1)?;

    let down_t = top.req_table("downstream")?;
    let down = Section::new(file, "downstream", down_t, &["pressure", "temperature"])?;
    let p2 = down.req_quantity("pressure", Dimension::Pressure)?;
    if p2 < 0.0 {
        return Err(down.reject("pressure", "a pressure of 0 (vacuum) or more"));
    }
    if p2 > p1 {
        return Err(down.reject(
            "pressure",
            &format!("a pressure not above upstream.pressure ({p1} Pa); swap the sides to reverse the flow"),
        ));
    }
    let t2 = down
        .quantity("temperature", Dimension::Temperature)?
        .unwrap_or(t1);
    check_temperature(&down, "temperature", t2)?;

    // Aperture.
    let ap_t = top.req_table("aperture")?;
    let ap = Section::new(
        file,
        "aperture",
        ap_t,
        &["shape", "diameter", "width", "thickness"],
    )?;
    let shapes =
        "\"circle\" (circular orifice or short tube) or \"slit\" (slit or parallel-plate channel)";
    let shape = match ap.string("shape", shapes)? {
        None | Some("circle") => ApertureShape::Circle,
        Some("slit") => ApertureShape::Slit,
        Some(_) => return Err(ap.reject("shape", shapes)),
    };
    let (size_key, other_key) = match shape {
        ApertureShape::Circle => ("diameter", "width"),
        ApertureShape::Slit => ("width", "diameter"),
    };
    if ap_t.contains_key(other_key) {
        return Err(ap.reject(
            other_key,
            &format!(
                "no `{other_key}` for shape = \"{}\"; give its `{size_key}`",
                if shape == ApertureShape::Slit {
                    "slit"
                } else {
                    "circle"
                }
            ),
        ));
    }
    let diameter = ap.req_quantity(size_key, Dimension::Length)?;
    if diameter <= 0.0 {
        return Err(ap.reject(size_key, "a length above 0"));
    }
    let thickness = ap.quantity("thickness", Dimension::Length)?.unwrap_or(0.0);
    if thickness < 0.0 {
        return Err(ap.reject(
            "thickness",
            "a length of 0 (thin orifice) or more (short tube)",
        ));
    }
    if thickness > 200.0 * diameter {
        return Err(ap.reject(
            "thickness",
            &format!(
                "at most 200 times the {size_key} (longer channels are outside the aperture scope)"
            ),
        ));
    }

    // Walls.
    let (wall_t, accommodation) = match top.table("walls")? {
        None => (t1, 1.0),
        Some(t) => {
            let w = Section::new(file, "walls", t, &["temperature", "accommodation"])?;
            let tw = w
                .quantity("temperature", Dimension::Temperature)?
                .unwrap_or(t1);
            check_temperature(&w, "temperature", tw)?;
            let acc = w
                .number("accommodation", "a number between 0 and 1")?
                .unwrap_or(1.0);
            if !(0.0..=1.0).contains(&acc) {
                return Err(w.reject(
                    "accommodation",
                    "a number between 0 (specular) and 1 (diffuse)",
                ));
            }
            (tw, acc)
        }
    };

    // Domain.
    let domain = match top.table("domain")? {
        None => DomainSpec::default(),
        Some(t) => {
            let d = Section::new(
                file,
                "domain",
                t,
                &[
                    "upstream_length",
                    "downstream_length",
                    "outer_radius",
                    "radial_weight_ratio",
                    "cell_size",
                    "subcells",
                ],
            )?;
            let positive = |k: &str, min: f64| -> Result<Option<f64>> {
                let exp = format!("a number of aperture radii of at least {min}");
                match d.number(k, &exp)? {
                    Some(x) if x < min => Err(d.reject(k, &exp)),
                    other => Ok(other),
                }
            };
            DomainSpec {
                upstream_length: positive("upstream_length", 0.5)?,
                downstream_length: positive("downstream_length", 0.5)?,
                outer_radius: positive("outer_radius", 1.5)?,
                radial_weight_ratio: match d
                    .number("radial_weight_ratio", "a number from 1 to 1000")?
                {
                    Some(x) if !(1.0..=1000.0).contains(&x) => {
                        return Err(d.reject("radial_weight_ratio", "a number from 1 to 1000"))
                    }
                    other => other,
                },
                cell_size: match d.number(
                    "cell_size",
                    "a cell size in aperture radii between 0.001 and 2",
                )? {
                    Some(x) if !(0.001..=2.0).contains(&x) => {
                        return Err(d.reject(
                            "cell_size",
                            "a cell size in aperture radii between 0.001 and 2",
                        ))
                    }
                    other => other,
                },
                subcells: match d.unsigned(
                    "subcells",
                    "a whole number of subcells per direction from 1 to 8",
                )? {
                    Some(n) if !(1..=8).contains(&n) => {
                        return Err(d.reject(
                            "subcells",
                            "a whole number of subcells per direction from 1 to 8",
                        ))
                    }
                    other => other,
                },
            }
        }
    };

    // Solver.
    let solver = {
        let empty = Table::new();
        let t = top.table("solver")?.unwrap_or(&empty);
        let s = Section::new(
            file,
            "solver",
            t,
            &[
                "collisions",
                "target_uncertainty",
                "max_wall_time",
                "max_steps",
                "seed",
                "time_step",
                "molecules",
                "molecules_per_cell",
                "rotational_collision_number",
                "checkpoint_interval",
                "replica",
            ],
        )?;
        let replica = match s.string("replica", "a replica \"K/N\" such as \"2/8\"")? {
            None => Replica::ONE,
            Some(x) => Replica::parse(x).ok_or_else(|| {
                s.reject(
                    "replica",
                    "a replica \"K/N\" with whole numbers 1 <= K <= N, e.g. \"2/8\"",
                )
            })?,
        };
        let seed = s
            .unsigned("seed", "a whole number of 0 or more")?
            .unwrap_or(1);
        let target = s
            .number("target_uncertainty", "a relative uncertainty such as 0.01")?
            .unwrap_or(0.01);
        if !(target > 0.0 && target < 1.0) {
            return Err(s.reject(
                "target_uncertainty",
                "a relative 95 % half-width between 0 and 1, e.g. 0.01",
            ));
        }
        let wall = s
            .quantity("max_wall_time", Dimension::Time)?
            .unwrap_or(600.0);
        if wall <= 0.0 {
            return Err(s.reject("max_wall_time", "a time above 0, e.g. \"10 min\""));
        }
        let dt = s.quantity("time_step", Dimension::Time)?;
        if matches!(dt, Some(x) if x <= 0.0) {
            return Err(s.reject("time_step", "a time above 0"));
        }
        let molecules = s.unsigned(
            "molecules",
            "a whole number of simulated molecules, at least 1000",
        )?;
        if matches!(molecules, Some(n) if !(1000..=2_000_000_000).contains(&n)) {
            return Err(s.reject(
                "molecules",
                "a whole number of simulated molecules from 1000 to 2e9",
            ));
        }
        let per_cell = s.unsigned(
            "molecules_per_cell",
            "a whole number of molecules per cell from 2 to 1000",
        )?;
        if matches!(per_cell, Some(n) if !(2..=1000).contains(&n)) {
            return Err(s.reject(
                "molecules_per_cell",
                "a whole number of molecules per cell from 2 to 1000",
            ));
        }
        if per_cell.is_some() && molecules.is_some() {
            return Err(s.reject(
                "molecules_per_cell",
                "either solver.molecules or solver.molecules_per_cell, not both",
            ));
        }
        let zrot_expected = "a rotational collision number of at least 1 (e.g. 5), or \"parker\"";
        let rotational_relaxation = match t.get("rotational_collision_number") {
            None => crate::collide::RotationalRelaxation::Constant { z_rot: 5.0 },
            Some(Value::String(x)) if x == "parker" => {
                crate::collide::RotationalRelaxation::Parker {
                    z_inf: 18.1,
                    t_star: 91.5,
                }
            }
            Some(_) => match s.number("rotational_collision_number", zrot_expected)? {
                Some(z) if z >= 1.0 => crate::collide::RotationalRelaxation::Constant { z_rot: z },
                _ => return Err(s.reject("rotational_collision_number", zrot_expected)),
            },
        };
        let max_steps = s.unsigned("max_steps", "a whole number of steps above 0")?;
        if max_steps == Some(0) {
            return Err(s.reject("max_steps", "a whole number of steps above 0"));
        }
        SolverSpec {
            collisions: s.boolean("collisions")?.unwrap_or(true),
            target_uncertainty: target,
            max_wall_time: wall,
            max_steps,
            seed: if replica.count > 1 {
                crate::streams::replica_seed(seed, replica.index)
            } else {
                seed
            },
            replica,
            time_step: dt,
            molecules,
            molecules_per_cell: per_cell,
            rotational_relaxation,
            checkpoint_interval: {
                let every = s
                    .quantity("checkpoint_interval", Dimension::Time)?
                    .unwrap_or(600.0);
                if every < 1.0 {
                    return Err(s.reject(
                        "checkpoint_interval",
                        "a time of at least 1 s, e.g. \"10 min\"",
                    ));
                }
                every
            },
        }
    };

    Ok(Case {
        source: file.to_string(),
        title,
        model,
        gas,
        upstream: ReservoirState {
            pressure: p1,
            temperature: t1,
        },
        downstream: ReservoirState {
            pressure: p2,
            temperature: t2,
        },
        aperture: Aperture {
            shape,
            diameter,
            thickness,
        },
        walls: Walls {
            temperature: wall_t,
            accommodation,
        },
        domain,
        solver,
    })
}

fn check_temperature(s: &Section, k: &str, t: f64) -> Result<()> {
    if !(t > 0.0 && t < 1.0e5) {
        return Err(s.reject(k, "an absolute temperature above 0 K (and below 1e5 K)"));
    }
    Ok(())
}

/// `[gas.custom.NAME]` tables: user-defined species.
fn read_custom_species(gas_s: &Section, file: &str) -> Result<Vec<Species>> {
    let Some(custom) = gas_s.table("custom")? else {
        return Ok(Vec::new());
    };
    let mut out = Vec::new();
    let mut seen = BTreeSet::new();
    for (name, v) in custom {
        let key = format!("gas.custom.{name}");
        let Value::Table(t) = v else {
            return Err(Error::input(
                file,
                &key,
                &v.to_string(),
                "a table describing the species",
            ));
        };
        let s = Section::new(
            file,
            &key,
            t,
            &[
                "molar_mass",
                "diameter",
                "omega",
                "alpha",
                "reference_temperature",
                "rotational_dof",
            ],
        )?;
        let molar = s
            .number("molar_mass", "a molar mass in g/mol, e.g. 40.0")?
            .ok_or_else(|| s.reject("molar_mass", "a molar mass in g/mol, e.g. 40.0"))?;
        if !(molar > 0.0 && molar < 1.0e4) {
            return Err(s.reject("molar_mass", "a molar mass in g/mol between 0 and 10000"));
        }
        let d = s.req_quantity("diameter", Dimension::Length)?;
        if !(d > 1e-11 && d < 1e-8) {
            return Err(s.reject(
                "diameter",
                "a molecular diameter between 0.01 nm and 10 nm, e.g. \"0.42 nm\"",
            ));
        }
        let omega = s
            .number("omega", "a viscosity exponent between 0.5 and 1")?
            .unwrap_or(0.75);
        if !(0.5..=1.0).contains(&omega) {
            return Err(s.reject("omega", "a viscosity exponent between 0.5 and 1"));
        }
        let alpha = s
            .number("alpha", "a VSS scattering exponent between 1 and 2")?
            .unwrap_or(1.0);
        if !(1.0..=2.0).contains(&alpha) {
            return Err(s.reject("alpha", "a VSS scattering exponent between 1 and 2"));
        }
        let t_ref = s
            .quantity("reference_temperature", Dimension::Temperature)?
            .unwrap_or(gas::BIRD_T_REF);
        check_temperature(&s, "reference_temperature", t_ref)?;
        let rot = s.unsigned("rotational_dof", "0, 2 or 3")?.unwrap_or(0);
        if !matches!(rot, 0 | 2 | 3) {
            return Err(s.reject(
                "rotational_dof",
                "0 (atom), 2 (linear) or 3 (non-linear molecule)",
            ));
        }
        if gas::lookup(name).is_some() || !seen.insert(name.clone()) {
            return Err(Error::input(
                file,
                &key,
                "",
                "a name not already used by a library gas",
            ));
        }
        let mass = gas::mass_from_molar_g(molar);
        out.push(Species {
            name: name.clone(),
            mass,
            d_ref: d,
            omega,
            alpha,
            t_ref,
            rot_dof: rot as u32,
            mu_ref: gas::vss_viscosity(mass, d, omega, alpha, t_ref),
            source: format!("user-defined in {file}"),
        });
    }
    Ok(out)
}
