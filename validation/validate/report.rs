//! The validation report: `report.md` (header, one row per check, the DSMC numerics table)
//! and the small formatting helpers it and the chart share. Reads the results; runs nothing.

use super::*;

/// Report header facts.
pub(crate) struct Header {
    pub(crate) generated_utc: String,
    pub(crate) commit: String,
    pub(crate) machine_threads: usize,
    pub(crate) rayon_threads: usize,
    pub(crate) quick: bool,
    pub(crate) references_file: String,
    pub(crate) total_wall_time_s: f64,
}

pub(crate) fn render_report(
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
pub(crate) fn render_dsmc_numerics(s: &mut String, runs: &[RunRecord]) {
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

/// Escape a table cell.
pub(crate) fn md(text: &str) -> String {
    text.replace('|', "\\|")
}

/// A path relative to the crate root when it lies inside it.
pub(crate) fn relative(path: &str) -> String {
    let root = env!("CARGO_MANIFEST_DIR");
    path.strip_prefix(root)
        .map(|p| p.trim_start_matches('/').to_string())
        .unwrap_or_else(|| path.to_string())
}

pub(crate) fn describe_set(set: &[String]) -> String {
    if set.is_empty() {
        String::new()
    } else {
        format!(" (set {})", set.join(", "))
    }
}

/// Decimals that show about five significant digits of `x`.
pub(crate) fn decimals(x: f64) -> usize {
    if x == 0.0 || !x.is_finite() {
        return 5;
    }
    (4 - x.abs().log10().floor() as i32).clamp(0, 9) as usize
}

pub(crate) fn fmt_num(x: f64) -> String {
    format!("{:.*}", decimals(x), x)
}

/// `value ± half-width` with matching decimals; the half-width is omitted when 0 or unknown.
pub(crate) fn fmt_value(x: f64, hw: Option<f64>) -> String {
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
pub(crate) fn git_commit(dir: &Path) -> String {
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
pub(crate) fn utc_now() -> String {
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
