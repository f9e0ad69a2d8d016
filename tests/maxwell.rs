//! Equilibrium sampling: Maxwell–Boltzmann speeds and the reservoir inflow, checked against
//! kinetic theory (Bird 1994 ch. 4) and an independent equilibrium-gas crossing count.

#![allow(clippy::needless_range_loop)]

use kinflux::constants::BOLTZMANN;
use kinflux::maxwell;
use kinflux::reservoir::ElementShape;
use rand::rngs::SmallRng;
use rand::SeedableRng;
use statrs::distribution::{ChiSquared, ContinuousCDF};
use statrs::function::erf::erf;

const T: f64 = 295.0;

fn argon_mass() -> f64 {
    kinflux::gas::lookup("Ar").unwrap().mass
}

fn speeds(n: usize, seed: u64) -> Vec<f64> {
    let sigma = maxwell::sigma(T, argon_mass());
    let mut rng = SmallRng::seed_from_u64(seed);
    (0..n)
        .map(|_| {
            let v = maxwell::velocity(sigma, &mut rng);
            (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt()
        })
        .collect()
}

/// Mean speed sqrt(8kT/πm) and rms speed sqrt(3kT/m) (kinetic theory, Bird 1994 eqs. 4.8,
/// 4.10), within 0.2 % for 10⁶ samples (standard errors ≈ 0.04 %).
#[test]
fn speed_moments_match_kinetic_theory() {
    let m = argon_mass();
    let c = speeds(1_000_000, 1);
    let mean = c.iter().sum::<f64>() / c.len() as f64;
    let rms = (c.iter().map(|x| x * x).sum::<f64>() / c.len() as f64).sqrt();
    let mean_ref = (8.0 * BOLTZMANN * T / (std::f64::consts::PI * m)).sqrt();
    let rms_ref = (3.0 * BOLTZMANN * T / m).sqrt();
    assert!(
        (mean / mean_ref - 1.0).abs() < 2e-3,
        "mean {mean} vs {mean_ref}"
    );
    assert!((rms / rms_ref - 1.0).abs() < 2e-3, "rms {rms} vs {rms_ref}");
    assert!((maxwell::mean_speed(T, m) / mean_ref - 1.0).abs() < 1e-14);
}

/// Most probable speed sqrt(2kT/m) (Bird 1994 eq. 4.7): the peak of a fine histogram of
/// sampled speeds, located by a parabola through the three highest bins of a smoothed
/// histogram, lies within 2 % of it.
#[test]
fn most_probable_speed_is_the_histogram_peak() {
    let m = argon_mass();
    let vmp = (2.0 * BOLTZMANN * T / m).sqrt();
    let c = speeds(2_000_000, 2);
    let bins = 120;
    let width = 3.0 * vmp / bins as f64;
    let mut h = vec![0.0; bins];
    for &x in &c {
        let b = (x / width) as usize;
        if b < bins {
            h[b] += 1.0;
        }
    }
    // 7-bin moving average
    let s: Vec<f64> = (0..bins)
        .map(|i| {
            let lo = i.saturating_sub(3);
            let hi = (i + 4).min(bins);
            h[lo..hi].iter().sum::<f64>() / (hi - lo) as f64
        })
        .collect();
    let k = (1..bins - 1)
        .max_by(|&a, &b| s[a].partial_cmp(&s[b]).unwrap())
        .unwrap();
    let denom = s[k - 1] - 2.0 * s[k] + s[k + 1];
    let offset = 0.5 * (s[k - 1] - s[k + 1]) / denom;
    let peak = (k as f64 + 0.5 + offset) * width;
    assert!((peak / vmp - 1.0).abs() < 0.02, "peak {peak} vs {vmp}");
    assert!((maxwell::most_probable_speed(T, m) / vmp - 1.0).abs() < 1e-14);
}

/// Chi-square goodness of fit of sampled speeds against the Maxwell–Boltzmann distribution
/// (CDF F(c) = erf(x) − (2/√π) x e^{−x²}, x = c/v_mp; Bird 1994 eq. 4.7 integrated), 50
/// equal-width bins up to 3.5 v_mp plus a tail bin, at significance 0.001.
#[test]
fn sampled_speeds_pass_chi_square_against_maxwell_boltzmann() {
    let m = argon_mass();
    let vmp = (2.0 * BOLTZMANN * T / m).sqrt();
    let n = 400_000;
    let c = speeds(n, 3);
    let bins = 50;
    let top = 3.5 * vmp;
    let mut obs = vec![0.0; bins + 1];
    for &v in &c {
        let b = ((v / top) * bins as f64) as usize;
        obs[b.min(bins)] += 1.0;
    }
    // chi-square of the observed bins against the Maxwell–Boltzmann distribution with most
    // probable speed `mp`: CDF erf(x) − (2/√π) x e^{−x²}, x = c/mp
    let chi2_for = |mp: f64| {
        let cdf = |v: f64| {
            let x = v / mp;
            erf(x) - 2.0 / std::f64::consts::PI.sqrt() * x * (-x * x).exp()
        };
        (0..=bins)
            .map(|b| {
                let lo = b as f64 * top / bins as f64;
                let p = if b == bins {
                    1.0 - cdf(top)
                } else {
                    cdf(lo + top / bins as f64) - cdf(lo)
                };
                let e = p * n as f64;
                (obs[b] - e).powi(2) / e
            })
            .sum::<f64>()
    };
    let chi2 = chi2_for(vmp);
    let critical = ChiSquared::new(bins as f64).unwrap().inverse_cdf(0.999);
    assert!(chi2 < critical, "chi2 = {chi2}, critical {critical}");
    // A wrong temperature must fail the same test (the test can fail).
    let chi2_hot = chi2_for(vmp * 1.03);
    assert!(
        chi2_hot > critical,
        "a 6 % temperature error went unnoticed: {chi2_hot}"
    );
}

/// Reservoir inflow: the simulated flux through a boundary is n c̄/4 and the mean translational
/// energy of a crossing molecule is 2kT (Bird 1994 §4.3, eqs. 4.22 and 4.25). The reference is
/// counted independently: an equilibrium gas filling a slab behind a plane, moved for dt,
/// with the crossers counted.
#[test]
fn reservoir_inflow_matches_equilibrium_crossing() {
    let m = argon_mass();
    let sigma = maxwell::sigma(T, m);
    let kt = BOLTZMANN * T;
    let mut rng = SmallRng::seed_from_u64(4);

    // Independent count: N molecules uniform in a slab of depth D behind the plane z = 0.
    let dt = 1e-6;
    let depth = 8.0 * sigma * dt;
    let area = 1.0;
    let n_mol = 4_000_000usize;
    let density = n_mol as f64 / (area * depth);
    let mut crossed = 0usize;
    let mut energy = 0.0;
    let mut vn_sum = 0.0;
    for _ in 0..n_mol {
        let z = -depth * rand::Rng::random::<f64>(&mut rng);
        let v = maxwell::velocity(sigma, &mut rng);
        if z + v[2] * dt > 0.0 {
            crossed += 1;
            energy += 0.5 * m * (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]);
            vn_sum += v[2];
        }
    }
    let counted_flux = crossed as f64 / (area * dt);
    let theory_flux = maxwell::one_sided_flux(density, T, m);
    assert!(
        (counted_flux / theory_flux - 1.0).abs() < 0.01,
        "{counted_flux} vs {theory_flux}"
    );
    assert!((energy / crossed as f64 / (2.0 * kt) - 1.0).abs() < 0.01);

    // kinflux's inflow element sampling: same energy per molecule and same mean normal speed.
    let case = kinflux::case::parse(
        &crate::util::fm_case("{ Ar = 1.0 }", "0.5 Pa", "0 Pa", "0.2 mm", "0 mm", ""),
        "t.toml",
        &[],
    )
    .unwrap();
    let plan = kinflux::numerics::Plan::new(&case).unwrap();
    let el = &plan.inflow[0];
    assert!(matches!(el.shape, ElementShape::Annulus { into, .. } if into > 0.0));
    let k = 1_000_000;
    let (mut e_sum, mut vn) = (0.0, 0.0);
    for _ in 0..k {
        let f = el.sample(&mut rng);
        e_sum += 0.5 * m * (f.vz * f.vz + f.vr * f.vr + f.vt * f.vt);
        vn += f.vz;
    }
    assert!(
        (e_sum / k as f64 / (2.0 * kt) - 1.0).abs() < 0.005,
        "energy per entering molecule"
    );
    let vn_ref = vn_sum / crossed as f64;
    assert!(
        (vn / k as f64 / vn_ref - 1.0).abs() < 0.01,
        "mean normal speed of entering molecules"
    );
    // and its expected count per step is n c̄/4 · area · dt in simulated molecules
    let ElementShape::Annulus { r_lo, r_hi, .. } = el.shape else {
        unreachable!()
    };
    let el_area = std::f64::consts::PI * (r_hi * r_hi - r_lo * r_lo);
    let n1 = 0.5 / (BOLTZMANN * 295.0);
    let real_per_s = el.expected_per_step * plan.fnum * plan.weights.factor[0] / plan.dt / el_area;
    assert!((real_per_s / (0.25 * n1 * maxwell::mean_speed(295.0, m)) - 1.0).abs() < 1e-12);
}
