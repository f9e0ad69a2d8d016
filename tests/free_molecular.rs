//! Free-molecular aperture flow against the published limits: Knudsen effusion, Clausing's
//! transmission probabilities, Graham's law.

use crate::util::{fm_case, run_case};
use kinflux::analytic;

/// Thin orifice into vacuum: W = Ṁ/Ṁ_fm = 1 (Knudsen effusion law; e.g. Bird 1994 §4.3 for the
/// one-sided flux n c̄/4 it rests on).
#[test]
fn thin_orifice_into_vacuum_gives_knudsen_effusion() {
    let (_, s) = run_case(&fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0 Pa",
        "0.2 mm",
        "0 mm",
        "",
    ));
    let w = s.flow.reduced_flow_rate;
    assert!(
        (w - 1.0).abs() < 0.01,
        "W = {w} ± {}",
        s.flow.reduced_flow_rate_ci95
    );
    assert!(s.flow.reduced_flow_rate_ci95 < 0.005);
    // The interval must be honest enough to contain the exact value most of the time; with a
    // 0.3 % target a miss beyond 2 half-widths would signal a biased estimator.
    assert!(
        (w - 1.0).abs() < 2.0 * s.flow.reduced_flow_rate_ci95 + 1e-3,
        "W = {w}"
    );
    // Knudsen's cosine law of effusion (Knudsen 1909): molecules leave a thin orifice with
    // dN/dΩ ∝ cos θ, so every 5° bin holds its cosine-law share within its statistical error
    // (2.6 × the reported 95 % half-width: 4.3σ even if the true error is the 1.2 × the stated
    // one measured over seeds (see `summary::AngularDistribution`), so that 18 bins pass
    // together with probability above 99.9 %), and within 5 % (the bins hold ≥ 10⁴ molecules).
    let p = &s.plume;
    for ((theta, r), ci) in p
        .theta_deg
        .iter()
        .zip(&p.flux_per_solid_angle_over_cosine_law)
        .zip(&p.flux_per_solid_angle_over_cosine_law_ci95)
    {
        assert!(
            (r - 1.0).abs() < 0.05 && (r - 1.0).abs() < 2.6 * ci,
            "θ = {theta}°: {r} ± {ci} of the cosine law"
        );
    }
    // and the free-molecular reference shown beside it is the cosine law itself
    assert!(p
        .free_molecular_over_cosine_law
        .iter()
        .all(|&x| (x - 1.0).abs() < 1e-9));
    // Centreline: peaking factor 1 for the ideal thin orifice (I(0) = Ṅ/π), within the
    // reported interval (2.6 half-widths) and 5 %.
    eprintln!(
        "thin orifice: peaking factor {:.4} ± {:.4}, centreline intensity {:.4e} /(s sr), Ṅ {:.4e} /s",
        p.peaking_factor, p.peaking_factor_ci95, p.centreline_intensity_per_s_sr, p.molecules_per_s
    );
    assert!((p.peaking_factor - 1.0).abs() < 2.6 * p.peaking_factor_ci95);
    assert!((p.peaking_factor - 1.0).abs() < 0.05);
    assert!(
        (p.centreline_intensity_per_s_sr * std::f64::consts::PI / p.molecules_per_s
            - p.peaking_factor)
            .abs()
            < 1e-12
    );
    // and the effusion flux is uniform over the hole (the upstream gas at rest is uniform)
    for (x, f) in s.aperture.r_over_a.iter().zip(&s.aperture.relative_to_mean) {
        assert!((f - 1.0).abs() < 0.05, "r/a = {x}: flux {f} of the mean");
    }
}

/// Equal temperatures, p2/p1 = 0.5: the back-flow through the hole halves the net flow,
/// W = 1 − p2/p1 (Knudsen effusion from both sides).
#[test]
fn thin_orifice_with_back_pressure_gives_one_minus_pressure_ratio() {
    let (_, s) = run_case(&fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0.25 Pa",
        "0.2 mm",
        "0 mm",
        "",
    ));
    let w = s.flow.reduced_flow_rate;
    assert!(
        (w - 0.5).abs() < 0.01,
        "W = {w} ± {}",
        s.flow.reduced_flow_rate_ci95
    );
}

/// Short tubes into vacuum: W = Clausing factor (Cole 1976 / Berman 1965 tables; values from
/// memory: 0.8013, 0.6720, 0.5142 for L/R = 0.5, 1, 2), within 1 %.
///
/// The same runs check the beam against Clausing's free-molecular angular distribution of a
/// tube (Clausing 1930, Z. Physik 66; direct + wall-emission form as in Dayton 1956 — citation
/// details from memory; `analytic::TubeBeam`, itself checked against a test-particle Monte
/// Carlo in tests/analytic.rs): every 5° bin up to 60° within 3 % of the theory's bin average
/// (and all bins within 2.6 reported half-widths, over 4σ of the scatter measured over seeds),
/// and the centreline peaking factor
/// (mean over the cone θ < 5°) within 3 % of the theory's mean over the same cone.
#[test]
fn short_tubes_give_clausing_factors() {
    for (l_over_r, published) in [(0.5, 0.8013), (1.0, 0.6720), (2.0, 0.5142)] {
        let t = format!("{} mm", 0.1 * l_over_r);
        let (_, s) = run_case(&fm_case("{ N2 = 1.0 }", "0.5 Pa", "0 Pa", "0.2 mm", &t, ""));
        let w = s.flow.reduced_flow_rate;
        assert!(
            (w - published).abs() / published < 0.01,
            "L/R = {l_over_r}: W = {w} ± {}, published {published}",
            s.flow.reduced_flow_rate_ci95
        );
        // and the analytic layer's own Clausing solution agrees with the published value
        assert!((analytic::clausing_factor(l_over_r) - published).abs() < 5e-4);
        let p = &s.plume;
        eprintln!(
            "L/R = {l_over_r}: peaking factor {:.4} ± {:.4} (theory over the cone {:.4}, on the axis {:.4})",
            p.peaking_factor,
            p.peaking_factor_ci95,
            p.free_molecular_over_cosine_law[0],
            p.free_molecular_peaking_factor
        );
        for (k, ((r, ci), th)) in p
            .flux_per_solid_angle_over_cosine_law
            .iter()
            .zip(&p.flux_per_solid_angle_over_cosine_law_ci95)
            .zip(&p.free_molecular_over_cosine_law)
            .enumerate()
        {
            assert!(
                (r - th).abs() < 2.6 * ci,
                "L/R = {l_over_r}, bin {k}: {r} ± {ci}, theory {th}"
            );
            if k < 12 {
                assert!(
                    (r / th - 1.0).abs() < 0.03,
                    "L/R = {l_over_r}, bin {k}: {r} ± {ci}, theory {th}"
                );
            }
        }
        let cone = p.free_molecular_over_cosine_law[0];
        assert!((p.peaking_factor / cone - 1.0).abs() < 0.03);
        assert!((p.free_molecular_peaking_factor - 1.0 / published).abs() < 2e-3);
    }
}

/// Graham's law: in the free-molecular limit the molar effusion rates of an equimolar He/Ar
/// mixture stand in the ratio sqrt(M_Ar/M_He) (Graham's law of effusion), within 2 %.
///
/// The same run (with the downstream domain lengthened to 10 radii for the beam's far field)
/// checks the axis figures against collisionless kinetic theory (the axis density of a thin
/// orifice is n_i = n_i1 (1 − d/sqrt(d² + a²))/2 for every species, the solid-angle fraction of
/// the hole; e.g. Bird 1994 ch. 7, section from memory; see tests/fields.rs): the reported
/// far-field decay exponent and inverse-square coefficient within 3 % of the same fit applied
/// to that formula at the same cells, and the axis enrichment of the light species equal to 1
/// (each species' density scales with the same solid angle, so the beam's density keeps the
/// upstream composition although its flux is enriched by Graham's factor) within 4.5 standard
/// errors. The samples are not independent: a molecule flying along the axis is sampled in
/// every step it spends in the window, on average (window length)/(v dt) times, so the
/// binomial variance of each species' count is inflated by ⟨k²⟩/⟨k⟩ = 1.128 L/(v_mp dt) for
/// flux-weighted speeds (an upper bound: oblique flights leave the axis cells sooner).
#[test]
fn helium_argon_mixture_follows_grahams_law() {
    let (_, s) = run_case(&fm_case(
        "{ He = 0.5, Ar = 0.5 }",
        "0.5 Pa",
        "0 Pa",
        "0.2 mm",
        "0 mm",
        "[domain]\ndownstream_length = 10",
    ));
    let he = s.flow.species.iter().find(|x| x.name == "He").unwrap();
    let ar = s.flow.species.iter().find(|x| x.name == "Ar").unwrap();
    let measured = he.molar_flow_rate_mol_s / ar.molar_flow_rate_mol_s;
    let m_he = kinflux::gas::lookup("He").unwrap().mass;
    let m_ar = kinflux::gas::lookup("Ar").unwrap().mass;
    let graham = (m_ar / m_he).sqrt();
    assert!(
        (measured / graham - 1.0).abs() < 0.02,
        "He/Ar molar flow ratio {measured}, Graham {graham}"
    );
    // The flux leaving the aperture is enriched in helium by Graham's factor:
    // x_He,flux / x_He,1 = 2 g/(1 + g), g = sqrt(M_Ar/M_He).
    let b = &s.beam;
    assert_eq!(b.light_species.as_deref(), Some("He"));
    let flux_enrichment = b.aperture_light_enrichment.unwrap();
    assert!((flux_enrichment / (2.0 * graham / (1.0 + graham)) - 1.0).abs() < 0.01);
    // Far field of the axis.
    let f = b
        .far_field
        .as_ref()
        .expect("a far-field window in a 10-radius domain");
    let a = 0.1e-3;
    let exact = |d: f64| 0.5 * (1.0 - d / (d * d + a * a).sqrt());
    let window: Vec<f64> = b
        .axis_distance_from_exit_plane_m
        .iter()
        .copied()
        .filter(|&d| {
            d >= f.from_exit_plane_m * (1.0 - 1e-9) && d <= f.to_exit_plane_m * (1.0 + 1e-9)
        })
        .collect();
    assert_eq!(window.len(), f.cells);
    let xs: Vec<f64> = window.iter().map(|d| d.ln()).collect();
    let ys: Vec<f64> = window.iter().map(|&d| exact(d).ln()).collect();
    let exponent = -crate::util::least_squares_slope(&xs, &ys);
    let coefficient = (window
        .iter()
        .map(|&d| (exact(d) * d * d / (a * a)).ln())
        .sum::<f64>()
        / window.len() as f64)
        .exp();
    eprintln!(
        "He/Ar: far field {:.2}–{:.2} mm, {} cells, {:.0} samples: exponent {:.3} ± {:.3} (theory {exponent:.3}), \
         C {:.4} (theory {coefficient:.4}); axis He enrichment {:.4}; flux enrichment {flux_enrichment:.4}",
        f.from_exit_plane_m * 1e3,
        f.to_exit_plane_m * 1e3,
        f.cells,
        f.samples,
        f.density_decay_exponent,
        f.density_decay_exponent_ci95,
        f.inverse_square_coefficient,
        f.light_enrichment.unwrap()
    );
    // The fit's CI comes from the scatter of the cell densities about the line, but
    // neighbouring axis cells are correlated (a molecule flying along the axis is counted in
    // several of them), so the fit scatters more than its CI says: over seeds 11–14 the
    // exponent was 1.881 ± 0.051, 1.951 ± 0.062, 2.019 ± 0.061 and 2.010 ± 0.064 and the
    // coefficient within −2.3 % and +2.7 % of theory. Hence 3 % or two CIs, and 4 %.
    let tolerance = (0.03 * exponent).max(2.0 * f.density_decay_exponent_ci95);
    assert!((f.density_decay_exponent - exponent).abs() < tolerance);
    assert!((f.inverse_square_coefficient / coefficient - 1.0).abs() < 0.04);
    let x = f.light_mole_fraction.unwrap();
    let dt = s.numerics.time_step_s;
    let length = f.to_exit_plane_m - f.from_exit_plane_m + 0.25 * a;
    let inflation = |m: f64| {
        let v_mp = (2.0 * kinflux::constants::BOLTZMANN * 295.0 / m).sqrt();
        1.0 + 1.128 * length / (v_mp * dt)
    };
    let var = (x * (1.0 - x)).powi(2)
        * (inflation(m_he) / (x * f.samples) + inflation(m_ar) / ((1.0 - x) * f.samples));
    let sigma = var.sqrt();
    eprintln!("axis x_He {x:.4} ± {sigma:.4} (1σ, correlated samples)");
    assert!((x - 0.5).abs() < 4.5 * sigma, "axis x_He {x} ± {sigma}");
    assert!((f.light_enrichment.unwrap() - x / 0.5).abs() < 1e-12);
}

/// Honest uncertainty: over 40 seeds of a cheap free-molecular case the exact value W = 1
/// (Knudsen effusion) lies inside the reported 95 % interval in roughly 95 % of the runs; the
/// test asserts at least 85 % (34 of 40), which a correct interval fails with probability
/// below 1 % (binomial tail), and also that the intervals are not grossly too wide (at most 40
/// of 40 inside while the mean half-width stays below 2 %).
#[test]
fn reported_interval_covers_the_exact_value() {
    let runs = 40;
    let mut inside = 0;
    let mut width = 0.0;
    for seed in 0..runs {
        let text = fm_case(
            "{ Ar = 1.0 }",
            "0.5 Pa",
            "0 Pa",
            "0.2 mm",
            "0 mm",
            "molecules = 5000",
        )
        .replace("seed = 11", &format!("seed = {}", 1000 + seed))
        .replace("target_uncertainty = 0.003", "target_uncertainty = 0.02");
        let (_, s) = run_case(&text);
        let (w, ci) = (s.flow.reduced_flow_rate, s.flow.reduced_flow_rate_ci95);
        if (w - 1.0).abs() <= ci {
            inside += 1;
        }
        width += ci / runs as f64;
    }
    eprintln!("coverage {inside}/{runs}, mean half-width {width:.4}");
    assert!(
        inside >= 34,
        "only {inside} of {runs} intervals contain W = 1"
    );
    assert!(width < 0.02, "mean half-width {width}");
}
