//! Design charts of a collected sweep (SVG, and PNG where fonts exist):
//! - `w_vs_rarefaction.svg`: reduced flow rate W = Ṁ/Ṁ_fm against the rarefaction parameter δ
//!   with 95 % bars, the free-molecular limit of a thin orifice (W = 1, Knudsen effusion) and the
//!   continuum limit of an ideal isentropic nozzle (W = √π·(2/(γ+1))^((γ+1)/(2(γ−1)))·√(γ/2), per
//!   gas) drawn as lines;
//! - `mass_flow_vs_pressure.svg`: mass flow rate against upstream pressure, one series per
//!   combination of the other parameters (gas, geometry, …), with the free-molecular line of
//!   each series dashed.
//!
//! Only cases with a result are drawn; the chart notes how many are missing.

use super::collect::{number, parameter, Row, Status};
use super::plan::Plan;
use crate::error::{Error, Result};
use plotters::prelude::*;
use std::path::{Path, PathBuf};

fn fail(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::io(path, std::io::Error::other(e.to_string()))
}

const PALETTE: [RGBColor; 8] = [
    RGBColor(31, 119, 180),
    RGBColor(214, 39, 40),
    RGBColor(44, 160, 44),
    RGBColor(148, 103, 189),
    RGBColor(255, 127, 14),
    RGBColor(140, 86, 75),
    RGBColor(227, 119, 194),
    RGBColor(23, 190, 207),
];

/// Keys that set the pressures (the x axis of the mass-flow chart, not a series).
fn is_pressure_key(k: &str) -> bool {
    k.ends_with(".pressure")
}

/// Series of rows: one per combination of the non-pressure parameters, in first-seen order.
fn series<'a>(plan: &Plan, rows: &'a [&'a Row]) -> Vec<(String, Vec<&'a Row>)> {
    let mut out: Vec<(String, Vec<&Row>)> = Vec::new();
    for r in rows {
        let label: Vec<String> = plan
            .axes
            .iter()
            .filter(|a| !is_pressure_key(&a.key))
            .map(|a| format!("{} = {}", a.key, parameter(r, &a.key)))
            .collect();
        let label = if label.is_empty() {
            r.gas.clone()
        } else {
            label.join(", ")
        };
        match out.iter_mut().find(|(l, _)| *l == label) {
            Some((_, v)) => v.push(r),
            None => out.push((label, vec![r])),
        }
    }
    out
}

/// A chart title that says how many cases have no point on it.
fn caption(title: &str, missing: usize) -> String {
    if missing > 0 {
        format!("{title} ({missing} case(s) without result not drawn)")
    } else {
        title.to_string()
    }
}

fn log_range(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite() && *v > 0.0) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return None;
    }
    if hi <= lo * 1.0001 {
        return Some((lo / 2.0, hi * 2.0));
    }
    let pad = (hi / lo).powf(0.06);
    Some((lo / pad, hi * pad))
}

/// Reduced flow rate against δ.
fn w_vs_delta(path: &Path, plan: &Plan, rows: &[&Row], missing: usize) -> Result<()> {
    let pts: Vec<(f64, f64, f64, usize)> = series(plan, rows)
        .iter()
        .enumerate()
        .flat_map(|(k, (_, rs))| {
            rs.iter().filter_map(move |r| {
                let s = r.summary.as_ref()?;
                let (d, w, ci) = (
                    number(s, "regime.rarefaction_parameter"),
                    number(s, "flow.reduced_flow_rate"),
                    number(s, "flow.reduced_flow_rate_ci95"),
                );
                (d.is_finite() && d > 0.0 && w.is_finite()).then_some((d, w, ci, k))
            })
        })
        .collect();
    let Some((x0, x1)) = log_range(pts.iter().map(|p| p.0)) else {
        return Ok(());
    };
    let mut limits: Vec<f64> = Vec::new();
    for r in rows {
        if let Some(s) = &r.summary {
            let w = number(s, "reference.isentropic_reduced_flow");
            if w.is_finite() && !limits.iter().any(|l| (l - w).abs() < 1e-3) {
                limits.push(w);
            }
        }
    }
    let y1 = pts
        .iter()
        .map(|p| p.1 + if p.2.is_finite() { p.2 } else { 0.0 })
        .chain(limits.iter().copied())
        .fold(1.0f64, f64::max)
        * 1.08;
    let y0 = pts
        .iter()
        .map(|p| p.1 - if p.2.is_finite() { p.2 } else { 0.0 })
        .fold(0.9f64, f64::min)
        .max(0.0)
        * 0.95;
    let labels = series(plan, rows);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 600)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(path, e))?;
        let mut c = ChartBuilder::on(&root)
            .caption(
                caption("Reduced flow rate W = Ṁ/Ṁ_fm against rarefaction", missing),
                ("sans-serif", 22),
            )
            .margin(14)
            .x_label_area_size(50)
            .y_label_area_size(70)
            .build_cartesian_2d((x0..x1).log_scale(), y0..y1)
            .map_err(|e| fail(path, e))?;
        c.configure_mesh()
            .x_desc("rarefaction parameter δ = p₁a/(μ₁v₀) (1)")
            .y_desc("reduced flow rate W (1), bars: 95 %")
            .x_labels(6)
            .x_label_formatter(&|x| format!("{x:.1e}"))
            .draw()
            .map_err(|e| fail(path, e))?;
        c.draw_series(LineSeries::new(
            [(x0, 1.0), (x1, 1.0)],
            BLACK.stroke_width(1),
        ))
        .map_err(|e| fail(path, e))?
        .label("free-molecular limit, thin orifice (W = 1)")
        .legend(|(x, y)| PathElement::new([(x, y), (x + 20, y)], BLACK));
        for w in &limits {
            c.draw_series(DashedLineSeries::new(
                [(x0, *w), (x1, *w)],
                6,
                4,
                BLACK.stroke_width(1),
            ))
            .map_err(|e| fail(path, e))?
            .label(format!("continuum limit, isentropic nozzle (W = {w:.3})"))
            .legend(|(x, y)| PathElement::new([(x, y), (x + 20, y)], BLACK));
        }
        for (k, (label, _)) in labels.iter().enumerate() {
            let col = PALETTE[k % PALETTE.len()];
            let mine: Vec<_> = pts.iter().filter(|p| p.3 == k).collect();
            c.draw_series(
                mine.iter().filter(|p| p.2.is_finite()).map(|p| {
                    ErrorBar::new_vertical(p.0, p.1 - p.2, p.1, p.1 + p.2, col.filled(), 6)
                }),
            )
            .map_err(|e| fail(path, e))?;
            c.draw_series(
                mine.iter()
                    .map(|p| Circle::new((p.0, p.1), 4, col.filled())),
            )
            .map_err(|e| fail(path, e))?
            .label(label.clone())
            .legend(move |(x, y)| Circle::new((x + 10, y), 4, col.filled()));
        }
        c.configure_series_labels()
            .position(SeriesLabelPosition::LowerRight)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .map_err(|e| fail(path, e))?;
        root.present().map_err(|e| fail(path, e))?;
    }
    crate::output::write_atomic(path, svg.as_bytes())
}

/// Mass flow against upstream pressure, per series, with the free-molecular lines.
fn mass_flow_vs_pressure(path: &Path, plan: &Plan, rows: &[&Row], missing: usize) -> Result<()> {
    let groups = series(plan, rows);
    let data: Vec<Vec<(f64, f64, f64, f64)>> = groups
        .iter()
        .map(|(_, rs)| {
            let mut v: Vec<_> = rs
                .iter()
                .filter_map(|r| {
                    let s = r.summary.as_ref()?;
                    Some((
                        r.upstream_pressure_pa,
                        number(s, "flow.mass_flow_rate_kg_s"),
                        number(s, "flow.mass_flow_rate_ci95_kg_s"),
                        number(s, "reference.free_molecular_mass_flow_kg_s"),
                    ))
                })
                .filter(|p| p.0 > 0.0 && p.1 > 0.0)
                .collect();
            v.sort_by(|a, b| a.0.total_cmp(&b.0));
            v
        })
        .collect();
    let Some((x0, x1)) = log_range(data.iter().flatten().map(|p| p.0)) else {
        return Ok(());
    };
    let Some((y0, y1)) = log_range(
        data.iter()
            .flatten()
            .flat_map(|p| [p.1 - p.2.min(0.9 * p.1), p.1 + p.2, p.3]),
    ) else {
        return Ok(());
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 600)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(path, e))?;
        let mut c = ChartBuilder::on(&root)
            .caption(
                caption("Mass flow rate against upstream pressure", missing),
                ("sans-serif", 22),
            )
            .margin(14)
            .x_label_area_size(50)
            .y_label_area_size(90)
            .build_cartesian_2d((x0..x1).log_scale(), (y0..y1).log_scale())
            .map_err(|e| fail(path, e))?;
        c.configure_mesh()
            .x_desc("upstream pressure p₁ (Pa)")
            .y_desc("mass flow rate (kg/s)")
            .x_labels(12)
            .y_labels(12)
            .x_label_formatter(&|x| format!("{x:.1e}"))
            .y_label_formatter(&|y| format!("{y:.2e}"))
            .draw()
            .map_err(|e| fail(path, e))?;
        for (k, ((label, _), pts)) in groups.iter().zip(&data).enumerate() {
            let col = PALETTE[k % PALETTE.len()];
            c.draw_series(DashedLineSeries::new(
                pts.iter().map(|p| (p.0, p.3)),
                6,
                4,
                col.stroke_width(1),
            ))
            .map_err(|e| fail(path, e))?;
            c.draw_series(pts.iter().filter(|p| p.2.is_finite()).map(|p| {
                ErrorBar::new_vertical(p.0, (p.1 - p.2).max(y0), p.1, p.1 + p.2, col.filled(), 6)
            }))
            .map_err(|e| fail(path, e))?;
            c.draw_series(LineSeries::new(
                pts.iter().map(|p| (p.0, p.1)),
                col.stroke_width(2),
            ))
            .map_err(|e| fail(path, e))?;
            c.draw_series(pts.iter().map(|p| Circle::new((p.0, p.1), 4, col.filled())))
                .map_err(|e| fail(path, e))?
                .label(format!("{label} (dashed: free-molecular)"))
                .legend(move |(x, y)| Circle::new((x + 10, y), 4, col.filled()));
        }
        c.configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .map_err(|e| fail(path, e))?;
        root.present().map_err(|e| fail(path, e))?;
    }
    crate::output::write_atomic(path, svg.as_bytes())
}

/// Both charts into `dir`; returns the files written.
pub fn write_all(dir: &Path, plan: &Plan, rows: &[Row]) -> Result<Vec<PathBuf>> {
    let with: Vec<&Row> = rows
        .iter()
        .filter(|r| r.summary.is_some() && r.status != Status::Failed)
        .collect();
    let missing = rows.len() - with.len();
    let mut svgs = Vec::new();
    let p = dir.join("w_vs_rarefaction.svg");
    w_vs_delta(&p, plan, &with, missing)?;
    svgs.push(p);
    let p = dir.join("mass_flow_vs_pressure.svg");
    mass_flow_vs_pressure(&p, plan, &with, missing)?;
    svgs.push(p);
    let svgs: Vec<PathBuf> = svgs.into_iter().filter(|p| p.exists()).collect();
    let mut out = svgs.clone();
    for s in svgs {
        let png = s.with_extension("png");
        if crate::plots::svg_to_png(&s, &png)? {
            out.push(png);
        }
    }
    Ok(out)
}
