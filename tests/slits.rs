//! Slits: the planar geometry against the published free-molecular limits, and with collisions.
//!
//! A slit of width h is simulated on the half-plane y ≥ 0 with a mirror at its mid-plane;
//! every flow is per metre of slit length.

use crate::util::{check_axis_density, fm_case, run_case};
use kinflux::analytic;

const BOLTZMANN: f64 = 1.380_649e-23;
/// Argon: 39.948 g/mol (IUPAC standard atomic weight) / Avogadro.
const ARGON_MASS: f64 = 39.948e-3 / 6.022_140_76e23;

/// A free-molecular argon case with a slit of `width` in a plate of `thickness` (both in mm).
fn slit_case(width_mm: f64, thickness_mm: f64, extra: &str) -> String {
    fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0 Pa",
        &format!("{width_mm} mm"),
        &format!("{thickness_mm} mm"),
        extra,
    )
    .replace("shape = \"circle\"", "shape = \"slit\"")
    .replace("diameter = ", "width = ")
}

/// Thin slit into vacuum: the flow per unit length is the effusion value h·p1·sqrt(m/(2πkT))
/// (Knudsen effusion law: the one-sided flux n c̄/4 through the slit's area per metre), within
/// 1 %; computed here from the constants, independently of kinflux's analytic layer. The
/// molecules leave by the in-plane cosine law (Knudsen's cosine law projected on the plane
/// across the slit: an equilibrium flux through a plane has dṄ/dφ ∝ cos φ in the angle φ of the
/// velocity's projection), and the centreline intensity per radian is Ṅ'/2.
#[test]
fn thin_slit_gives_knudsen_effusion_per_unit_length_and_the_cosine_law() {
    let (sim, s) = run_case(&slit_case(0.2, 0.0, ""));
    assert_eq!(s.flow.basis, "per metre of slit length");
    let exact =
        0.2e-3 * 0.5 * (ARGON_MASS / (2.0 * std::f64::consts::PI * BOLTZMANN * 295.0)).sqrt();
    let m = s.flow.mass_flow_rate_kg_s;
    let ci = s.flow.mass_flow_rate_ci95_kg_s;
    eprintln!("thin slit: {m:.5e} ± {ci:.2e} kg/(s m), Knudsen {exact:.5e}");
    assert!((m / exact - 1.0).abs() < 0.01, "{m:e} vs {exact:e}");
    assert!(
        (m - exact).abs() < 2.0 * ci + 1e-3 * exact,
        "{m:e} ± {ci:e}"
    );
    // (the gas table's argon mass differs from the IUPAC value in the fifth digit)
    assert!((s.reference.free_molecular_mass_flow_kg_s / exact - 1.0).abs() < 1e-3);
    // every 5° bin holds its cosine-law share within its statistical error (2.3 half-widths,
    // so that 18 bins pass together with probability above 99.9 %) and within 5 %
    let p = &s.plume;
    assert!(p.intensity_measure.contains("per radian"));
    for ((theta, r), c) in p
        .theta_deg
        .iter()
        .zip(&p.flux_per_solid_angle_over_cosine_law)
        .zip(&p.flux_per_solid_angle_over_cosine_law_ci95)
    {
        assert!(
            (r - 1.0).abs() < 0.05 && (r - 1.0).abs() < 2.3 * c,
            "φ = {theta}°: {r} ± {c} of the in-plane cosine law"
        );
    }
    assert!((p.peaking_factor - 1.0).abs() < 2.3 * p.peaking_factor_ci95);
    assert!(
        (p.centreline_intensity_per_s_sr * 2.0 / p.molecules_per_s - p.peaking_factor).abs()
            < 1e-12
    );
    // the effusion flux is uniform across the slit
    for (x, f) in s.aperture.r_over_a.iter().zip(&s.aperture.relative_to_mean) {
        assert!((f - 1.0).abs() < 0.05, "y/a = {x}: flux {f} of the mean");
    }
    // a planar grid needs no radial weighting
    assert!(sim.plan.weights.is_uniform());
}

/// Thick slits (parallel-plate channels) L/h = 0.5, 1, 2 into vacuum: W equals the channel's
/// transmission probability within 1 %. The reference is the numerical solution of the
/// Clausing-type integral equation of the parallel-plate channel that the analytic layer
/// computes independently of the simulation (`analytic::slit_transmission`: 0.80472, 0.68438,
/// 0.54206; Berman 1965's parallel-plate values, from memory, agree to about 0.5 %).
#[test]
fn thick_slits_give_the_parallel_plate_transmission_probability() {
    for l_over_h in [0.5, 1.0, 2.0] {
        let (_, s) = run_case(&slit_case(0.2, 0.2 * l_over_h, ""));
        let w = s.flow.reduced_flow_rate;
        let exact = analytic::slit_transmission(l_over_h);
        eprintln!(
            "slit L/h = {l_over_h}: W = {w:.5} ± {:.5}, transmission {exact:.5}",
            s.flow.reduced_flow_rate_ci95
        );
        assert!(
            (w / exact - 1.0).abs() < 0.01,
            "L/h = {l_over_h}: {w} vs {exact}"
        );
        assert!((s.reference.clausing_factor - exact).abs() < 1e-12);
    }
}

/// The slit with collisions (DSMC, argon at δ ≈ 2 on a small domain, a short run): the planar
/// geometry goes
/// through the same collision, sampling and quality stages as the axisymmetric one. Bounds:
/// collisions raise W above the free-molecular 1, and it stays below the ideal isentropic
/// nozzle's W = 1.820 for γ = 5/3 (gas dynamics; an ideal nozzle's mass flux over the effusion
/// flux, the same ratio per metre of slit as for a hole).
#[test]
fn dsmc_slit_lies_between_the_free_molecular_and_continuum_limits() {
    let text = fm_case(
        "{ Ar = 1.0 }",
        "300 Pa",
        "0 Pa",
        "0.1 mm",
        "0 mm",
        "max_steps = 2500\nmolecules_per_cell = 10\n[domain]\nupstream_length = 4\ndownstream_length = 4\nouter_radius = 4",
    )
    .replace("collisions = false", "collisions = true")
    .replace("shape = \"circle\"", "shape = \"slit\"")
    .replace("diameter = ", "width = ")
    .replace("target_uncertainty = 0.003", "target_uncertainty = 0.02");
    let (sim, s) = run_case(&text);
    let w = s.flow.reduced_flow_rate;
    let delta = s.regime.rarefaction_parameter;
    eprintln!(
        "DSMC slit δ = {delta:.3}: W = {w:.4} ± {:.4}, {} steps, {} collisions",
        s.flow.reduced_flow_rate_ci95, s.run.steps, sim.collision_stats.collisions
    );
    assert!(delta > 1.0 && delta < 4.0, "δ = {delta}");
    assert!(sim.collision_stats.collisions > 0);
    assert!(w > 1.02 && w < 1.820, "W = {w}");
    assert!(s
        .quality
        .measured_separation_over_upstream_mean_free_path
        .is_some());
    assert_eq!(sim.population(), sim.balance.expected_population());
}

/// Collisionless flow through a thin slit into vacuum: on the mid-plane the density is n1 times
/// the fraction of directions whose backward ray ends in the upstream gas (collisionless kinetic
/// theory, as for the hole in `fields.rs`). An infinite strip of half-width a seen from distance
/// d subtends the solid angle 4 atan(a/d), so n = n1 atan(a/d)/π downstream and
/// n = n1 (1 − atan(a/d)/π) upstream. Checked within 3 % (or four standard errors of a sparse
/// cell's count) on the mid-plane cells, which also checks the mirror at y = 0 (a wrong mirror
/// would empty or double the cells beside it).
#[test]
fn thin_slit_mid_plane_density_follows_the_strip_solid_angle() {
    let text = slit_case(
        0.2,
        0.0,
        "molecules = 200000\nmax_steps = 700\n[domain]\ncell_size = 0.125\ndownstream_length = 4",
    );
    let a = 0.1e-3;
    let checked = check_axis_density(
        &text,
        700,
        |d| (a / d).atan() / std::f64::consts::PI,
        0.03,
        1.0,
    );
    assert!(checked >= 10);
}
