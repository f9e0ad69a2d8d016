// Integration tests of the analytic layer (included as a module of tests/tests.rs).
// Every physics check names its published source beside it; values from memory say so.

use kinflux::analytic::*;
use kinflux::constants::BOLTZMANN;
use kinflux::gas::*;
use std::f64::consts::PI;

fn pure_gas(name: &str) -> Mixture {
    Mixture {
        components: vec![Component {
            species: lookup(name).unwrap(),
            mole_fraction: 1.0,
        }],
    }
}

fn relative(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

#[test]
fn clausing_factor_matches_published_table() {
    // Cole 1976 / Berman 1965 tables of the Clausing factor (values from memory).
    for (l, table) in [(0.5, 0.8013), (1.0, 0.6720), (2.0, 0.5142), (10.0, 0.1910)] {
        let w = clausing_factor(l);
        assert!((w - table).abs() < 2e-4, "L/R = {l}: {w} vs {table}");
    }
}

#[test]
fn clausing_factor_agrees_with_berman_approximation() {
    // Berman 1965, J. Appl. Phys. 36, 3365: closed-form approximation, within 0.5 %.
    for k in 0..=40 {
        let l = 0.1 * (100.0f64).powf(k as f64 / 40.0); // 0.1 .. 10, log-spaced
        let (w, b) = (clausing_factor(l), berman_clausing(l));
        assert!(relative(b, w) < 0.005, "L/R = {l}: {w} vs Berman {b}");
    }
    // Berman 1965 at L = 1 gives 0.6720 (value from memory).
    assert!((berman_clausing(1.0) - 0.6720).abs() < 1e-4);
}

#[test]
fn clausing_factor_limits_and_monotonicity() {
    // A thin orifice transmits everything that enters (Knudsen effusion law).
    assert_eq!(clausing_factor(0.0), 1.0);
    assert_eq!(berman_clausing(0.0), 1.0);
    // Transmission decreases with tube length (Clausing 1932).
    let mut previous = 1.0;
    for k in 1..=60 {
        let l = 0.05 * k as f64 * k as f64 / 4.0; // 0.0125 .. 45
        let w = clausing_factor(l);
        assert!(w < previous, "not decreasing at L/R = {l}");
        previous = w;
    }
}

#[test]
fn clausing_factor_long_tube_limit() {
    // Knudsen 1909 long-tube limit W → 8/(3 L/R). The approach is slow (logarithmic end
    // corrections): at L/R = 100 the exact transmission is 5.2 % below 8/(3l) (confirmed by a
    // test-particle calculation of this crate: 0.02537 ± 0.00011), so the tolerance there is 6 %;
    // at L/R = 1000 it is within 1 %.
    let l = 100.0;
    let w = clausing_factor(l);
    let knudsen = 8.0 / (3.0 * l);
    assert!(relative(w, knudsen) < 0.06, "{w} vs {knudsen}");
    assert!(w < knudsen);
    let l = 1000.0;
    assert!(relative(clausing_factor(l), 8.0 / (3.0 * l)) < 0.01);
    // Berman 1965 tends to the same limit.
    assert!(relative(berman_clausing(100.0), w) < 0.002);
}

#[test]
fn choked_reduced_flow_monatomic() {
    // Isentropic gas dynamics (ideal nozzle, sonic throat): sqrt(2πγ)(2/(γ+1))^((γ+1)/(2(γ−1)))
    // = 1.820 for γ = 5/3.
    assert!((choked_reduced_flow(5.0 / 3.0) - 1.820).abs() < 1e-3);
}

#[test]
fn isentropic_mass_flow_choked_continuous_and_zero() {
    // Isentropic gas dynamics: choked flow for p_back/p0 ≤ (2/(γ+1))^(γ/(γ−1)), subsonic
    // Saint-Venant–Wantzel flow above, continuous at the critical ratio, zero at p_back = p0.
    let ar = pure_gas("Ar");
    let (gamma, m) = (ar.gamma(), ar.mean_mass());
    let (p0, t0, a) = (50.0, 295.0, PI * 1e-8);
    let choked = isentropic_mass_flow(gamma, m, p0, t0, a, 0.0);
    let fm = effusion_mass_flow(&ar, p0, t0, a);
    assert!(relative(choked / fm, choked_reduced_flow(gamma)) < 1e-12);
    let critical = (2.0 / (gamma + 1.0)).powf(gamma / (gamma - 1.0));
    let below = isentropic_mass_flow(gamma, m, p0, t0, a, p0 * critical * (1.0 - 1e-9));
    let above = isentropic_mass_flow(gamma, m, p0, t0, a, p0 * critical * (1.0 + 1e-9));
    assert_eq!(below, choked);
    assert!(relative(above, choked) < 1e-8, "{above} vs {choked}");
    assert!(above <= choked * (1.0 + 1e-12)); // the choked flow is the maximum
    assert_eq!(isentropic_mass_flow(gamma, m, p0, t0, a, p0), 0.0);
    // Monotone in back pressure in the subsonic range.
    let mid = isentropic_mass_flow(gamma, m, p0, t0, a, 0.8 * p0);
    assert!(mid > 0.0 && mid < above);
}

#[test]
fn effusion_mass_flow_argon() {
    // Knudsen effusion: Ṁ_fm = π a² p sqrt(m/(2πkT)); Ar, 50 Pa, 295 K, 0.2 mm diameter hole.
    let ar = pure_gas("Ar");
    let (p, t, a) = (50.0, 295.0, 0.1e-3);
    let m = ar.components[0].species.mass;
    let expected = PI * a * a * p * (m / (2.0 * PI * BOLTZMANN * t)).sqrt();
    let area = PI * a * a;
    assert!(relative(effusion_mass_flow(&ar, p, t, area), expected) < 1e-14);
    let molecules = effusion_molecule_flow(&ar, p, t, area);
    assert_eq!(molecules.len(), 1);
    assert!(relative(molecules[0] * m, expected) < 1e-14);
}

#[test]
fn effusion_follows_grahams_law() {
    // Graham's law: free-molecular effusion rates per unit partial pressure ∝ 1/sqrt(M).
    let mix = Mixture {
        components: vec![
            Component {
                species: lookup("He").unwrap(),
                mole_fraction: 0.5,
            },
            Component {
                species: lookup("Ar").unwrap(),
                mole_fraction: 0.5,
            },
        ],
    };
    let flow = effusion_molecule_flow(&mix, 50.0, 295.0, 1e-8);
    let (m_he, m_ar) = (
        mix.components[0].species.mass,
        mix.components[1].species.mass,
    );
    let graham = (m_ar / m_he).sqrt();
    assert!(relative(flow[0] / flow[1], graham) < 1e-14);
    let e = Estimate::new(&mix, 50.0, 295.0, 0.0, 295.0, 1e-4, 0.0);
    assert!(relative(e.graham_ratio.unwrap(), graham) < 1e-14);
    let net = &e.free_molecular_species_molecule_flow;
    assert!(relative(net[0] / net[1], graham) < 1e-14);
}

#[test]
fn mean_free_path_equals_mean_speed_over_collision_rate() {
    // Identity λ = c̄/ν with the Maxwellian mean speed c̄ = sqrt(8kT/(πm)) (Bird 1994 ch. 4) and
    // the VHS equilibrium collision rate ν = 4 d_ref² n sqrt(πkT_ref/m) (T/T_ref)^(1−ω)
    // (Bird 1994 eq. 4.64), checked for Ar at 273 K and 101325 Pa and at 500 K, 50 Pa.
    let ar = lookup("Ar").unwrap();
    for (t, p) in [(273.0, 101_325.0), (500.0, 50.0)] {
        let n = p / (BOLTZMANN * t);
        let mean_speed = (8.0 * BOLTZMANN * t / (PI * ar.mass)).sqrt();
        let rate = 4.0
            * ar.d_ref
            * ar.d_ref
            * n
            * (PI * BOLTZMANN * ar.t_ref / ar.mass).sqrt()
            * (t / ar.t_ref).powf(1.0 - ar.omega);
        assert!(relative(mean_free_path(&ar, n, t), mean_speed / rate) < 1e-12);
    }
    // Order of magnitude at standard conditions: tens of nanometres (VHS d_ref = 4.17e-10 m).
    let n = 101_325.0 / (BOLTZMANN * 273.0);
    let lambda = mean_free_path(&ar, n, 273.0);
    assert!(lambda > 4e-8 && lambda < 7e-8, "{lambda}");
}

#[test]
fn mixture_mean_free_path_of_pure_gas_is_the_pure_value() {
    // Bird 1994 eq. 4.76 reduces to eq. 4.65 for a single species.
    let n2 = pure_gas("N2");
    let (p, t) = (10.0, 300.0);
    let n = p / (BOLTZMANN * t);
    let pure = mean_free_path(&n2.components[0].species, n, t);
    assert!(relative(mixture_mean_free_path(&n2, p, t), pure) < 1e-14);
}

#[test]
fn mixture_mean_free_path_he_ar() {
    // Bird 1994 eqs. 4.76-4.77 written out for a 50/50 He/Ar mixture with the pair rules
    // d_pq = (d_p+d_q)/2, ω_pq = (ω_p+ω_q)/2:
    // λ_p = 1/Σ_q π d_pq² n_q (T_ref/T)^(ω_pq−1/2) sqrt(1 + m_p/m_q), λ = Σ_p x_p λ_p.
    // The mixture value must lie between the pure-gas values.
    let he = lookup("He").unwrap();
    let ar = lookup("Ar").unwrap();
    let mix = Mixture {
        components: vec![
            Component {
                species: he.clone(),
                mole_fraction: 0.5,
            },
            Component {
                species: ar.clone(),
                mole_fraction: 0.5,
            },
        ],
    };
    let (p, t) = (50.0, 295.0);
    let n = p / (BOLTZMANN * t);
    let term = |a: &Species, b: &Species| {
        let d = 0.5 * (a.d_ref + b.d_ref);
        let w = 0.5 * (a.omega + b.omega);
        PI * d * d * 0.5 * n * (273.0 / t).powf(w - 0.5) * (1.0 + a.mass / b.mass).sqrt()
    };
    let lam_he = 1.0 / (term(&he, &he) + term(&he, &ar));
    let lam_ar = 1.0 / (term(&ar, &he) + term(&ar, &ar));
    let by_hand = 0.5 * lam_he + 0.5 * lam_ar;
    let lam = mixture_mean_free_path(&mix, p, t);
    assert!(relative(lam, by_hand) < 1e-13, "{lam} vs {by_hand}");
    let (pure_he, pure_ar) = (mean_free_path(&he, n, t), mean_free_path(&ar, n, t));
    assert!(
        lam > pure_ar && lam < pure_he,
        "{pure_ar} < {lam} < {pure_he}"
    );
}

#[test]
fn rarefaction_parameter_consistent_with_knudsen_number() {
    // Sharipov 2004 (J. Fluid Mech. 518, 35) defines δ = p a/(μ v0), v0 = sqrt(2kT/m).
    // For a hard-sphere gas, Bird 1994 eq. 4.62 with ω = 1/2, α = 1 gives
    // μ = (5/16) sqrt(mkT/π)/d², and eq. 4.65 gives λ = kT/(√2 π d² p). With Kn = λ/(2a):
    // δ·Kn = p λ/(2 μ v0) = [kT/(√2 π d²)] / [2 (5/16) sqrt(mkT/π)/d² · sqrt(2kT/m)]
    //      = 4/(5√π) ≈ 0.4514, independent of p, T and a.
    let hs = Mixture {
        components: vec![Component {
            species: lookup_with("Ar", MolecularModel::HardSphere).unwrap(),
            mole_fraction: 1.0,
        }],
    };
    let expected = 4.0 / (5.0 * PI.sqrt());
    for (p, t, a) in [(50.0, 295.0, 1e-4), (1e3, 500.0, 1e-6), (0.1, 100.0, 1e-2)] {
        let delta = rarefaction_parameter(&hs, p, t, a);
        let kn = mixture_mean_free_path(&hs, p, t) / (2.0 * a);
        assert!(relative(delta * kn, expected) < 1e-12, "{}", delta * kn);
        let e = Estimate::new(&hs, p, t, 0.0, t, a, 0.0);
        assert!(relative(e.rarefaction_parameter * e.knudsen_number, expected) < 1e-12);
    }
}

#[test]
fn regime_boundaries() {
    // Common-practice limits on Kn = λ1/D.
    assert_eq!(Regime::from_knudsen(1e3), Regime::FreeMolecular);
    assert_eq!(Regime::from_knudsen(10.0), Regime::FreeMolecular);
    assert_eq!(Regime::from_knudsen(9.999), Regime::Transitional);
    assert_eq!(Regime::from_knudsen(0.1), Regime::Transitional);
    assert_eq!(Regime::from_knudsen(0.0999), Regime::SlipNearContinuum);
    assert_eq!(Regime::from_knudsen(0.01), Regime::SlipNearContinuum);
    assert_eq!(Regime::from_knudsen(0.00999), Regime::Continuum);
    assert_eq!(Regime::from_knudsen(f64::INFINITY), Regime::FreeMolecular);
    assert_eq!(Regime::FreeMolecular.label(), "free-molecular");
    assert_eq!(Regime::Transitional.label(), "transitional");
    assert_eq!(Regime::SlipNearContinuum.label(), "slip / near-continuum");
    assert_eq!(Regime::Continuum.label(), "continuum");
}

#[test]
fn estimate_of_a_thin_argon_orifice() {
    // Ar, 50 Pa, 295 K into vacuum through a 0.2 mm diameter thin orifice: λ ≈ 0.1 mm, so
    // Kn ≈ 0.5 (transitional); Ṁ_fm by Knudsen effusion; isentropic bound 1.820 Ṁ_fm.
    let ar = pure_gas("Ar");
    let (p, t, a) = (50.0, 295.0, 0.1e-3);
    let e = Estimate::new(&ar, p, t, 0.0, t, a, 0.0);
    assert_eq!(e.regime, Regime::Transitional);
    assert!(relative(e.upstream_number_density, p / (BOLTZMANN * t)) < 1e-15);
    assert!(e.downstream_mean_free_path.is_none());
    assert_eq!(e.clausing_factor, 1.0);
    assert!(relative(e.gamma, 5.0 / 3.0) < 1e-15);
    assert!(relative(e.isentropic_reduced_flow, 1.8203) < 1e-4);
    assert!(relative(e.free_molecular_net_mass_flow, e.free_molecular_mass_flow) < 1e-14);
    assert!(e.graham_ratio.is_none());
    // A thick plate (t = 2a) multiplies the free-molecular flow by the Clausing factor.
    let thick = Estimate::new(&ar, p, t, 0.0, t, a, 2.0 * a);
    assert!(relative(thick.clausing_factor, clausing_factor(2.0)) < 1e-15);
    assert!(
        relative(
            thick.free_molecular_net_mass_flow,
            clausing_factor(2.0) * e.free_molecular_mass_flow
        ) < 1e-14
    );
}

// ---------------------------------------------------------------------------------------------
// Slit channel and tube beam: independent test-particle Monte Carlo checks
// ---------------------------------------------------------------------------------------------

/// Direction cosines of a diffuse (cosine-law) emission: (along the normal, two tangential).
fn cosine_direction(rng: &mut rand::rngs::SmallRng) -> (f64, f64, f64) {
    use rand::Rng;
    let c = rng.random::<f64>().sqrt();
    let s = (1.0 - c * c).sqrt();
    let psi = 2.0 * PI * rng.random::<f64>();
    (c, s * psi.cos(), s * psi.sin())
}

/// Test-particle Monte Carlo of a parallel-plate channel, gap 1, length `l`, infinite in y,
/// diffuse plates: the fraction of `molecules` entering at x = 0 (uniform over the gap, cosine
/// law about +x) that leave through x = l. Written for this check, independent of the
/// integral equation: it only flies straight lines between the plates.
fn slit_monte_carlo(l: f64, molecules: usize, seed: u64) -> f64 {
    use rand::{Rng, SeedableRng};
    let mut rng = rand::rngs::SmallRng::seed_from_u64(seed);
    let mut passed = 0usize;
    for _ in 0..molecules {
        let mut x = 0.0;
        let mut z: f64 = rng.random();
        let (cn, t1, _) = cosine_direction(&mut rng);
        let (mut dx, mut dz) = (cn, t1);
        loop {
            let t = if dz > 0.0 {
                (1.0 - z) / dz
            } else if dz < 0.0 {
                -z / dz
            } else {
                f64::INFINITY
            };
            let xh = x + t * dx;
            if xh >= l {
                passed += 1;
                break;
            }
            if xh <= 0.0 {
                break;
            }
            x = xh;
            let upper = dz > 0.0;
            z = if upper { 1.0 } else { 0.0 };
            let (cn, t1, _) = cosine_direction(&mut rng);
            dz = if upper { -cn } else { cn };
            dx = t1;
        }
    }
    passed as f64 / molecules as f64
}

/// Planar slit channel, free-molecular, diffuse walls: the project's solution of the
/// parallel-plate Clausing-type integral equation (`slit_transmission`) against a test-particle
/// Monte Carlo written for this check, within 1 % at L/h = 0.5, 1, 2 (the checks of issue 7; the
/// Monte Carlo standard error is below 0.1 %, so 1 % is 10σ and failing it means a wrong kernel).
#[test]
fn slit_transmission_matches_test_particle_monte_carlo() {
    for (l, seed) in [(0.5, 21), (1.0, 22), (2.0, 23)] {
        let n = 400_000;
        let mc = slit_monte_carlo(l, n, seed);
        let sigma = (mc * (1.0 - mc) / n as f64).sqrt();
        let w = slit_transmission(l);
        eprintln!("slit L/h = {l}: integral equation {w:.5}, Monte Carlo {mc:.5} ± {sigma:.5}");
        assert!(relative(mc, w) < 0.01, "L/h = {l}: MC {mc} vs {w}");
        assert!(
            (mc - w).abs() < 4.5 * sigma,
            "L/h = {l}: MC {mc} ± {sigma} vs {w}"
        );
    }
}

/// Long slit channels: W → (h/L) ln(L/h) + O(h/L) (the logarithmic divergence of the
/// free-molecular conductance of a plane channel; Clausing 1932, and e.g. Cercignani's
/// discussion of plane Poiseuille flow at large Knudsen numbers — from memory). The approach is
/// slow (relative corrections of order 1/ln(L/h)), so the check is the slope
/// d(W L/h)/d ln(L/h) → 1, which removes the unknown constant, within 3 % between L/h = 160 and
/// 640, and the ratio W / ((h/L) ln(L/h)) within 3 % of 1 at L/h = 640.
#[test]
fn slit_transmission_long_channel_limit() {
    let g = |l: f64| slit_transmission(l) * l;
    let slope = (g(640.0) - g(160.0)) / 4f64.ln();
    let ratio = g(640.0) / 640f64.ln();
    eprintln!(
        "slit: d(W L/h)/d ln(L/h) = {slope:.4} (160..640), W L/h / ln(L/h) = {ratio:.4} (640)"
    );
    assert!((slope - 1.0).abs() < 0.03, "{slope}");
    assert!((ratio - 1.0).abs() < 0.03, "{ratio}");
    // The slit transmits more than the tube of radius h/2 of the same length (it is open
    // sideways): W_slit(L/h) > Clausing(L/R = 2 L/h).
    for l in [0.5, 1.0, 2.0, 5.0] {
        assert!(slit_transmission(l) > clausing_factor(2.0 * l));
    }
}

/// Published parallel-plate (infinite slit) transmission probabilities, as recalled from the
/// tables of Berman 1965 (J. Appl. Phys. 36, 3365) and the vacuum handbooks that reproduce them
/// — values from memory: 0.9525 (L/h = 0.1) and 0.9096 (0.2) to the printed four digits; about
/// 0.685 (1) and 0.542 (2), recalled less surely, within 0.5 %.
#[test]
fn slit_transmission_matches_recalled_published_values() {
    for (l, published, tol) in [
        (0.1, 0.9525, 1.5e-4),
        (0.2, 0.9096, 1.5e-4),
        (1.0, 0.685, 0.005 * 0.685),
        (2.0, 0.542, 0.005 * 0.542),
    ] {
        let w = slit_transmission(l);
        assert!((w - published).abs() < tol, "L/h = {l}: {w} vs {published}");
    }
}

/// Angular histogram (5° bins) of the molecules leaving a tube of unit radius and length `l`
/// with diffuse walls, per `molecules` entering with a cosine law, from a test-particle Monte
/// Carlo written for this check; also the count inside the cone θ < `cone`.
fn tube_beam_monte_carlo(l: f64, molecules: usize, seed: u64, cone: f64) -> (Vec<u64>, u64, u64) {
    use rand::{Rng, SeedableRng};
    let mut rng = rand::rngs::SmallRng::seed_from_u64(seed);
    let mut bins = vec![0u64; 18];
    let (mut passed, mut in_cone) = (0u64, 0u64);
    for _ in 0..molecules {
        let r = rng.random::<f64>().sqrt();
        let phi = 2.0 * PI * rng.random::<f64>();
        let (mut x, mut y, mut z) = (0.0, r * phi.cos(), r * phi.sin());
        let (c, t1, t2) = cosine_direction(&mut rng);
        let (mut dx, mut dy, mut dz) = (c, t1, t2);
        loop {
            let a = dy * dy + dz * dz;
            let b = y * dy + z * dz;
            let cc = y * y + z * z - 1.0;
            let t = if a > 0.0 {
                (-b + (b * b - a * cc).max(0.0).sqrt()) / a
            } else {
                f64::INFINITY
            };
            let xh = x + t * dx;
            if xh >= l {
                passed += 1;
                let theta = dx.clamp(-1.0, 1.0).acos();
                bins[((theta.to_degrees() / 5.0) as usize).min(17)] += 1;
                if theta < cone {
                    in_cone += 1;
                }
                break;
            }
            if xh <= 0.0 {
                break;
            }
            x = xh;
            let (yh, zh) = (y + t * dy, z + t * dz);
            let q = (yh * yh + zh * zh).sqrt();
            y = yh / q;
            z = zh / q;
            // Diffuse re-emission about the inward normal (0, −y, −z).
            let (cn, a1, a2) = cosine_direction(&mut rng);
            dx = a1;
            dy = -cn * y - a2 * z;
            dz = -cn * z + a2 * y;
        }
    }
    (bins, passed, in_cone)
}

/// Clausing's angular distribution of a tube (Clausing 1930, Z. Physik 66; direct + wall
/// emission as in Dayton 1956 — citation details from memory), as implemented in
/// `TubeBeam`, against a test-particle Monte Carlo written for this check, at L/R = 1 and 2:
/// every 5° bin within 4.5σ, every bin up to 60° within 3 %, and the transmission within 4.5σ;
/// the on-axis cone θ < 3° against the theory's average over the same cone within 3 %.
#[test]
fn tube_angular_distribution_matches_test_particle_monte_carlo() {
    for (l, seed) in [(1.0, 31), (2.0, 32)] {
        let n = 3_000_000;
        let cone = 3f64.to_radians();
        let (bins, passed, in_cone) = tube_beam_monte_carlo(l, n, seed, cone);
        let beam = TubeBeam::new(l);
        let w_mc = passed as f64 / n as f64;
        let sw = (w_mc * (1.0 - w_mc) / n as f64).sqrt();
        assert!(
            (w_mc - beam.transmission()).abs() < 4.5 * sw,
            "L/R = {l}: W {w_mc}"
        );
        let total = passed as f64;
        for (k, &count) in bins.iter().enumerate() {
            let (lo, hi) = (
                (5.0 * k as f64).to_radians(),
                (5.0 * (k + 1) as f64).to_radians(),
            );
            let cosine = hi.sin().powi(2) - lo.sin().powi(2);
            let expected = beam.bin_average(lo, hi) * cosine;
            let measured = count as f64 / total;
            let sigma = (expected * (1.0 - expected) / total).sqrt();
            let ratio = measured / expected;
            assert!(
                (measured - expected).abs() < 4.5 * sigma,
                "L/R = {l}, bin {k}: MC {ratio:.4} of theory ({count} molecules)"
            );
            if k < 12 {
                assert!((ratio - 1.0).abs() < 0.03, "L/R = {l}, bin {k}: {ratio}");
            }
        }
        let expected = beam.bin_average(0.0, cone);
        let measured = in_cone as f64 / total / cone.sin().powi(2);
        eprintln!(
            "tube L/R = {l}: W {:.4} (MC {w_mc:.4}); peaking factor 1/W = {:.4}; cone θ < 3°: \
             theory {expected:.4}, MC {measured:.4} ({in_cone} molecules)",
            beam.transmission(),
            beam.peaking_factor()
        );
        assert!((measured / expected - 1.0).abs() < 0.03);
    }
}
