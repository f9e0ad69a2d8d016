//! Charts of a run as SVG: the convergence history of the flow rate with its 95 % band,
//! colour maps of number density, Mach number and temperature over the (z, r) half-plane with
//! the partition drawn, and the beam (angular distribution against the cosine law and the
//! free-molecular theory; axis density with its far-field fit). Axes are labelled with units. SVG is an open standard that browsers and
//! reports show directly. Invariant: files are written atomically; a chart that cannot be drawn
//! is reported, never left half-written.

use crate::error::{Error, Result};
use crate::numerics::Plan;
use crate::sample::Fields;
use crate::simulation::Simulation;
use plotters::prelude::*;
use std::path::{Path, PathBuf};

fn fail(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::io(path, std::io::Error::other(e.to_string()))
}

/// Convergence history: per-16-step running mean of the mass flow with its 95 % band.
pub fn convergence(path: &Path, sim: &Simulation) -> Result<()> {
    let f = &sim.flux;
    let dt = sim.plan.dt;
    let start = sim.steady_state_step();
    let mut pts = Vec::new();
    let mut k = start + 64;
    while k <= f.steps() {
        if let Some(e) = crate::monitor::batch_means(&f.mass_per_step[start..k]) {
            pts.push((k as f64, e.mean / dt, e.half_width / dt));
        }
        k += 16.max((f.steps() - start) / 400);
    }
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (900, 560)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(path, e))?;
        let (x0, x1) = (start as f64, f.steps().max(start + 1) as f64);
        let (mut y0, mut y1) = (f64::INFINITY, f64::NEG_INFINITY);
        for &(_, m, h) in &pts {
            y0 = y0.min(m - h);
            y1 = y1.max(m + h);
        }
        if !y0.is_finite() || y1 <= y0 {
            let m = sim.mass_flow_estimate().map(|e| e.mean).unwrap_or(1.0);
            y0 = 0.9 * m;
            y1 = 1.1 * m;
        }
        let pad = 0.05 * (y1 - y0);
        let mut c = ChartBuilder::on(&root)
            .caption(
                "Mass flow rate: running mean with 95 % interval (batch means)",
                ("sans-serif", 22),
            )
            .margin(14)
            .x_label_area_size(50)
            .y_label_area_size(90)
            .build_cartesian_2d(x0..x1, (y0 - pad)..(y1 + pad))
            .map_err(|e| fail(path, e))?;
        c.configure_mesh()
            .x_desc(format!(
                "step (time step {dt:.3e} s); statistics from the steady-state start, step {start}"
            ))
            .y_desc("mass flow rate (kg/s)")
            .y_label_formatter(&|y| format!("{y:.4e}"))
            .draw()
            .map_err(|e| fail(path, e))?;
        let band: Vec<(f64, f64)> = pts
            .iter()
            .map(|&(x, m, h)| (x, m + h))
            .chain(pts.iter().rev().map(|&(x, m, h)| (x, m - h)))
            .collect();
        if band.len() > 2 {
            c.draw_series(std::iter::once(Polygon::new(band, BLUE.mix(0.2))))
                .map_err(|e| fail(path, e))?;
        }
        c.draw_series(LineSeries::new(
            pts.iter().map(|&(x, m, _)| (x, m)),
            BLUE.stroke_width(2),
        ))
        .map_err(|e| fail(path, e))?;
        root.present().map_err(|e| fail(path, e))?;
    }
    crate::output::write_atomic(path, svg.as_bytes())
}

/// Viridis-like colour scale (anchor colours of the perceptually uniform "viridis" map of
/// van der Walt & Smith, interpolated linearly).
fn colour(t: f64) -> RGBColor {
    const A: [(f64, f64, f64); 5] = [
        (68.0, 1.0, 84.0),
        (59.0, 82.0, 139.0),
        (33.0, 145.0, 140.0),
        (94.0, 201.0, 98.0),
        (253.0, 231.0, 37.0),
    ];
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let x = t * 4.0;
    let i = (x as usize).min(3);
    let u = x - i as f64;
    let (a, b) = (A[i], A[i + 1]);
    let mix = |p: f64, q: f64| (p + (q - p) * u).round() as u8;
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// Colour map of one field over the (z, r) grid, with the partition and the axis drawn.
pub fn field_map(
    path: &Path,
    plan: &Plan,
    values: &[f64],
    title: &str,
    units: &str,
    log: bool,
) -> Result<()> {
    let g = &plan.grid;
    let (nz, nr) = (g.z.len(), g.r.len());
    let a = plan.geometry.radius;
    let tr = |v: f64| if log { v.log10() } else { v };
    let finite: Vec<f64> = values
        .iter()
        .copied()
        .filter(|v| v.is_finite() && (!log || *v > 0.0))
        .map(tr)
        .collect();
    let (lo, hi) = finite
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), &v| {
            (l.min(v), h.max(v))
        });
    // nothing sampled yet (a run stopped before the end of start-up): an empty map on a unit scale
    let (lo, hi) = if lo.is_finite() && hi.is_finite() {
        (lo, hi)
    } else {
        (0.0, 1.0)
    };
    // a uniform field still needs a scale of finite width
    let (lo, hi) = if hi - lo > 1e-9 * lo.abs().max(1e-300) {
        (lo, hi)
    } else {
        (lo - 0.5 * lo.abs().max(1.0), hi + 0.5 * hi.abs().max(1.0))
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (1000, 520)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(path, e))?;
        let (main, bar) = root.split_horizontally(860);
        let (z0, z1) = (plan.geometry.z_min / a, plan.geometry.z_max / a);
        let r1 = plan.geometry.r_max / a;
        let mut c = ChartBuilder::on(&main)
            .caption(title, ("sans-serif", 20))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(55)
            .build_cartesian_2d(z0..z1, 0.0..r1)
            .map_err(|e| fail(path, e))?;
        c.configure_mesh()
            .x_desc(match plan.geometry.symmetry {
                crate::geometry::Symmetry::Axisymmetric => {
                    "z / a (axial, flow from left to right; a = aperture radius)"
                }
                crate::geometry::Symmetry::Planar => {
                    "z / a (flow from left to right; a = slit half-width)"
                }
            })
            .y_desc(match plan.geometry.symmetry {
                crate::geometry::Symmetry::Axisymmetric => "r / a (radial)",
                crate::geometry::Symmetry::Planar => "y / a (from the slit's mid-plane)",
            })
            .disable_mesh()
            .draw()
            .map_err(|e| fail(path, e))?;
        let mut cells = Vec::with_capacity(nz * nr);
        for iz in 0..nz {
            let (za, zb) = g.z.edges(iz);
            for ir in 0..nr {
                let v = values[iz * nr + ir];
                if g.volume[iz * nr + ir] <= 0.0 || !v.is_finite() || (log && v <= 0.0) {
                    continue;
                }
                let (ra, rb) = g.r.edges(ir);
                let t = if hi > lo {
                    (tr(v) - lo) / (hi - lo)
                } else {
                    0.5
                };
                cells.push(Rectangle::new(
                    [(za / a, ra / a), (zb / a, rb / a)],
                    colour(t).filled(),
                ));
            }
        }
        c.draw_series(cells).map_err(|e| fail(path, e))?;
        // the partition (solid) and its faces
        let t = plan.geometry.thickness / a;
        c.draw_series(std::iter::once(Rectangle::new(
            [(0.0, 1.0), (t.max(0.02), r1)],
            BLACK.mix(0.75).filled(),
        )))
        .map_err(|e| fail(path, e))?;
        // colour bar
        let mut b = ChartBuilder::on(&bar)
            .margin_top(40)
            .margin_bottom(50)
            .margin_right(10)
            .y_label_area_size(75)
            .build_cartesian_2d(0.0..1.0, lo..hi)
            .map_err(|e| fail(path, e))?;
        b.configure_mesh()
            .disable_x_axis()
            .disable_mesh()
            .y_desc(if log {
                format!("log10({units})")
            } else {
                units.to_string()
            })
            .axis_desc_style(("sans-serif", 14))
            .label_style(("sans-serif", 13))
            .y_label_formatter(&|y| format!("{y:.3}"))
            .draw()
            .map_err(|e| fail(path, e))?;
        let steps = 64;
        b.draw_series((0..steps).map(|k| {
            let (ya, yb) = (
                lo + (hi - lo) * k as f64 / steps as f64,
                lo + (hi - lo) * (k + 1) as f64 / steps as f64,
            );
            Rectangle::new(
                [(0.0, ya), (1.0, yb)],
                colour(k as f64 / (steps - 1) as f64).filled(),
            )
        }))
        .map_err(|e| fail(path, e))?;
        root.present().map_err(|e| fail(path, e))?;
    }
    crate::output::write_atomic(path, svg.as_bytes())
}

/// The beam chart: left, the angular distribution of the molecules leaving the aperture over
/// the cosine law of a thin orifice of the same throughput, with 95 % bars, the cosine law
/// itself and Clausing's free-molecular theory for the aperture; right, the axis number density
/// over the upstream density against the distance beyond the exit plane (log–log), with the
/// far-field power-law fit and the collisionless thin-orifice curve (1 − d/sqrt(d² + a²))/2
/// (a thin slit: atan(a/d)/π).
pub fn beam_chart(path: &Path, sim: &Simulation, fields: &Fields) -> Result<()> {
    let plan = &sim.plan;
    let slit = plan.geometry.symmetry == crate::geometry::Symmetry::Planar;
    let ang = crate::beam::angular_of_run(plan, &sim.flux);
    let (theory, _) = crate::beam::free_molecular_reference(plan);
    let axis = crate::beam::axis_profile(plan, fields);
    let far = crate::beam::far_field(plan, &axis);
    let a = plan.case.aperture.radius();
    let t = plan.case.aperture.thickness;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (1200, 520)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(path, e))?;
        let (left, right) = root.split_horizontally(600);
        // Angular distribution.
        let top = ang
            .over_cosine_law
            .iter()
            .zip(&ang.over_cosine_law_ci95)
            .map(|(r, c)| r + if c.is_finite() { *c } else { 0.0 })
            .chain(theory.iter().copied())
            .filter(|v| v.is_finite())
            .fold(1.2f64, f64::max)
            .min(20.0)
            * 1.1;
        let mut c = ChartBuilder::on(&left)
            .caption(
                "Angular distribution of the molecules leaving the aperture",
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(0.0..90.0, 0.0..top)
            .map_err(|e| fail(path, e))?;
        c.configure_mesh()
            .x_desc(match plan.geometry.symmetry {
                crate::geometry::Symmetry::Axisymmetric => "polar angle from the axis (degrees)",
                crate::geometry::Symmetry::Planar => {
                    "in-plane angle from the axis, across the slit (degrees)"
                }
            })
            .y_desc("intensity / cosine law of the same throughput")
            .draw()
            .map_err(|e| fail(path, e))?;
        c.draw_series(LineSeries::new(
            [(0.0, 1.0), (90.0, 1.0)],
            BLACK.mix(0.5).stroke_width(1),
        ))
        .map_err(|e| fail(path, e))?
        .label(if slit {
            "in-plane cosine law (thin slit, Knudsen)"
        } else {
            "cosine law (thin orifice, Knudsen)"
        })
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.mix(0.5)));
        c.draw_series(LineSeries::new(
            ang.theta_deg
                .iter()
                .zip(&theory)
                .filter(|(_, y)| y.is_finite())
                .map(|(x, y)| (*x, *y)),
            RED.stroke_width(2),
        ))
        .map_err(|e| fail(path, e))?
        .label(if slit {
            "free-molecular theory (thin slit), bin averages"
        } else {
            "free-molecular theory (Clausing), bin averages"
        })
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], RED.stroke_width(2)));
        let points: Vec<(f64, f64, f64)> = ang
            .theta_deg
            .iter()
            .zip(&ang.over_cosine_law)
            .zip(&ang.over_cosine_law_ci95)
            .filter(|((_, r), _)| r.is_finite())
            .map(|((x, r), ci)| (*x, *r, if ci.is_finite() { *ci } else { 0.0 }))
            .collect();
        c.draw_series(points.iter().map(|&(x, r, ci)| {
            PathElement::new(vec![(x, (r - ci).max(0.0)), (x, (r + ci).min(top))], BLUE)
        }))
        .map_err(|e| fail(path, e))?;
        c.draw_series(
            points
                .iter()
                .map(|&(x, r, _)| Circle::new((x, r), 4, BLUE.filled())),
        )
        .map_err(|e| fail(path, e))?
        .label("simulation, 95 % bars")
        .legend(|(x, y)| Circle::new((x + 10, y), 4, BLUE.filled()));
        c.configure_series_labels()
            .background_style(WHITE.mix(0.8))
            .border_style(BLACK)
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(|e| fail(path, e))?;
        // Axis density, log–log.
        let pts: Vec<(f64, f64)> = axis
            .z
            .iter()
            .zip(&axis.over_upstream)
            .filter(|(z, n)| **z > t && n.is_finite() && **n > 0.0)
            .map(|(z, n)| ((z - t) / a, *n))
            .collect();
        let (x0, x1) = pts.iter().fold((f64::INFINITY, 0.0f64), |(l, h), p| {
            (l.min(p.0), h.max(p.0))
        });
        let (y0, y1) = pts.iter().fold((f64::INFINITY, 0.0f64), |(l, h), p| {
            (l.min(p.1), h.max(p.1))
        });
        let (x0, x1) = if x0.is_finite() && x1 > x0 {
            (x0, x1)
        } else {
            (0.1, 10.0)
        };
        let (y0, y1) = if y0.is_finite() && y1 > y0 {
            (y0 / 2.0, y1 * 2.0)
        } else {
            (1e-4, 1.0)
        };
        let mut c = ChartBuilder::on(&right)
            .caption("Number density on the axis", ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(70)
            .build_cartesian_2d((x0..x1).log_scale(), (y0..y1).log_scale())
            .map_err(|e| fail(path, e))?;
        c.configure_mesh()
            .x_desc("distance beyond the exit plane / aperture radius")
            .y_desc("n / n1 (upstream)")
            .x_labels(8)
            .y_labels(8)
            .x_label_formatter(&|x| compact(*x))
            .y_label_formatter(&|y| format!("{y:.1e}"))
            .draw()
            .map_err(|e| fail(path, e))?;
        // collisionless theory: n/n1 = Ω/4π, the opening's solid angle seen from the axis point
        // (d in units of a): a disc 2π(1 − d/sqrt(d² + 1)), an infinite strip 4 atan(1/d)
        let curve: Vec<(f64, f64)> = (0..=100)
            .map(|k| {
                let d = x0 * (x1 / x0).powf(k as f64 / 100.0);
                let n = if slit {
                    (1.0 / d).atan() / std::f64::consts::PI
                } else {
                    0.5 * (1.0 - d / (d * d + 1.0).sqrt())
                };
                (d, n)
            })
            .collect();
        c.draw_series(LineSeries::new(curve, BLACK.mix(0.5)))
            .map_err(|e| fail(path, e))?
            .label(if slit {
                "collisionless thin slit"
            } else {
                "collisionless thin orifice"
            })
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.mix(0.5)));
        if let Some(f) = &far {
            // The fit through the window's geometric means, drawn over the window.
            let (d0, d1) = (f.from_m / a, f.to_m / a);
            let inside: Vec<(f64, f64)> = pts
                .iter()
                .filter(|p| p.0 >= d0 * (1.0 - 1e-9) && p.0 <= d1 * (1.0 + 1e-9))
                .copied()
                .collect();
            let k = inside.len().max(1) as f64;
            let mx = inside.iter().map(|p| p.0.ln()).sum::<f64>() / k;
            let my = inside.iter().map(|p| p.1.ln()).sum::<f64>() / k;
            let line = |d: f64| (my - f.exponent * (d.ln() - mx)).exp();
            c.draw_series(LineSeries::new(
                [(d0, line(d0)), (d1, line(d1))],
                RED.stroke_width(2),
            ))
            .map_err(|e| fail(path, e))?
            .label(format!(
                "far-field fit n ∝ d^-{:.2}, C = {:.3}",
                f.exponent, f.inverse_square_coefficient
            ))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], RED.stroke_width(2)));
        }
        c.draw_series(pts.iter().map(|&p| Circle::new(p, 3, BLUE.filled())))
            .map_err(|e| fail(path, e))?
            .label("simulation (axis cells)")
            .legend(|(x, y)| Circle::new((x + 10, y), 3, BLUE.filled()));
        c.configure_series_labels()
            .background_style(WHITE.mix(0.8))
            .border_style(BLACK)
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(|e| fail(path, e))?;
        root.present().map_err(|e| fail(path, e))?;
    }
    crate::output::write_atomic(path, svg.as_bytes())
}

/// A short tick label: three significant digits, no trailing zeros.
fn compact(x: f64) -> String {
    let digits = (2 - x.abs().log10().floor() as i32).max(0) as usize;
    let text = format!("{x:.digits$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// Rasterise an SVG chart to PNG (resvg; text with the system's fonts). Returns false, writing
/// nothing, when the machine has no font to draw the labels with.
pub fn svg_to_png(svg_path: &Path, png_path: &Path) -> Result<bool> {
    use resvg::{tiny_skia, usvg};
    use std::sync::OnceLock;
    static FONTS: OnceLock<std::sync::Arc<usvg::fontdb::Database>> = OnceLock::new();
    let fonts = FONTS.get_or_init(|| {
        let mut db = usvg::fontdb::Database::new();
        db.load_system_fonts();
        // Charts ask for the generic "sans-serif"; map it to a family this machine has.
        let families: Vec<String> = db
            .faces()
            .flat_map(|f| f.families.iter().map(|(name, _)| name.clone()))
            .collect();
        let pick = ["DejaVu Sans", "Liberation Sans", "Noto Sans", "FreeSans"]
            .iter()
            .map(|s| s.to_string())
            .find(|want| families.contains(want))
            .or_else(|| families.first().cloned());
        if let Some(family) = pick {
            db.set_sans_serif_family(family.clone());
            db.set_serif_family(family);
        }
        std::sync::Arc::new(db)
    });
    if fonts.is_empty() {
        return Ok(false);
    }
    let svg = std::fs::read_to_string(svg_path).map_err(|e| Error::io(svg_path, e))?;
    let opt = usvg::Options {
        fontdb: fonts.clone(),
        font_family: "sans-serif".to_string(),
        ..usvg::Options::default()
    };
    let tree = usvg::Tree::from_str(&svg, &opt).map_err(|e| fail(svg_path, e))?;
    let size = tree.size().to_int_size();
    let mut pixmap = tiny_skia::Pixmap::new(size.width(), size.height())
        .ok_or_else(|| fail(png_path, "empty image"))?;
    pixmap.fill(tiny_skia::Color::WHITE);
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pixmap.as_mut());
    let png = pixmap.encode_png().map_err(|e| fail(png_path, e))?;
    crate::output::write_atomic(png_path, &png)?;
    Ok(true)
}

/// Every chart of a run into `dir` (SVG, and PNG where fonts exist); returns the files written.
/// The convergence chart (of `sim`'s own flow-rate history) only when `with_convergence`.
pub fn write_all(
    dir: &Path,
    sim: &Simulation,
    fields: &Fields,
    with_convergence: bool,
) -> Result<Vec<PathBuf>> {
    let mut svgs = Vec::new();
    if with_convergence {
        let p = dir.join("convergence.svg");
        convergence(&p, sim)?;
        svgs.push(p);
    }
    let p = dir.join("beam.svg");
    beam_chart(&p, sim, fields)?;
    svgs.push(p);
    for (file, values, title, units, log) in [
        (
            "number_density.svg",
            &fields.number_density,
            "Number density",
            "1/m³",
            true,
        ),
        (
            "mach_number.svg",
            &fields.mach_number,
            "Mach number",
            "Mach number (1)",
            false,
        ),
        (
            "temperature.svg",
            &fields.temperature,
            "Overall temperature",
            "K",
            false,
        ),
    ] {
        let p = dir.join(file);
        field_map(&p, &sim.plan, values, title, units, log)?;
        svgs.push(p);
    }
    let mut out = svgs.clone();
    for s in svgs {
        let png = s.with_extension("png");
        if svg_to_png(&s, &png)? {
            out.push(png);
        } else {
            eprintln!("kinflux: note: no system font found, PNG charts skipped (install fonts-dejavu-core)");
            break;
        }
    }
    Ok(out)
}
