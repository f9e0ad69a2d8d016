//! The W(δ) chart of the validation report (`w_vs_delta.svg`): kinflux points with their
//! intervals, the published references, the free-molecular and isentropic limits and the
//! near-free-molecular slope line. Draws what it is given; runs nothing.

use super::*;

/// Upper end of the near-free-molecular line on the chart (the slope is a first-order result).
pub(crate) const SLOPE_LINE_MAX_DELTA: f64 = 0.3;

/// One kinflux point of the W(δ) chart.
pub(crate) struct ChartPoint {
    pub(crate) run: usize,
    pub(crate) delta: f64,
    pub(crate) w: f64,
    pub(crate) half_width: f64,
    /// The overrides besides the pressure, for a numerics variant; None for default numerics.
    pub(crate) variant: Option<String>,
    /// Whether a check compared this run with a published value.
    pub(crate) has_reference: bool,
}

/// A published reference on the chart.
pub(crate) struct ChartReference {
    pub(crate) delta: f64,
    pub(crate) w: f64,
    pub(crate) uncertainty: f64,
    pub(crate) source: String,
}

/// What the W(δ) chart shows.
pub(crate) struct ChartData {
    pub(crate) points: Vec<ChartPoint>,
    pub(crate) references: Vec<ChartReference>,
    /// Ratio of specific heats of the plotted gas, and the isentropic bound for it.
    pub(crate) gamma: f64,
    pub(crate) bound: f64,
    /// Near-free-molecular slope dW/dδ and its source, from the references file.
    pub(crate) slope: Option<(f64, String)>,
}

impl ChartData {
    /// The DSMC runs of a thin orifice into vacuum, with the references compared with them.
    pub(crate) fn collect(
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
pub(crate) fn draw_w_vs_delta(chart: &ChartData) -> Result<String> {
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
