//! Planar Couette flow near continuum: the shear stress and velocity gradient sampled in the
//! middle of the channel give the gas viscosity, compared with the Chapman–Enskog VHS value
//! μ = 15 sqrt(m k T_ref/π)(T/T_ref)^ω / (2(5−2ω)(7−2ω) d_ref²) (Bird 1994 eq. 4.62).
//!
//! The harness is one-dimensional (plates at y = 0 and y = H moving at ∓U/2, diffuse at T0,
//! periodic in x and z) and uses the engine's collision stage cell by cell. The viscosity is
//! taken from the Navier–Stokes constitutive relation P_xy = −μ du/dy evaluated in the core,
//! away from the Knudsen layers, so no velocity-slip correction is needed (it would be needed
//! if the plate speed were used in place of the measured gradient); the local temperature,
//! raised slightly by viscous heating, is measured in the same region.

#![allow(clippy::needless_range_loop)]

use kinflux::collide::{
    collide_cell, CellMolecules, CollisionModel, CollisionStats, RotationalRelaxation, Scratch,
};
use kinflux::constants::BOLTZMANN;
use kinflux::gas::{self, Component, Mixture, MolecularModel};
use kinflux::mover::flux_normal_speed;
use rand::rngs::SmallRng;
use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;

/// Outcome of a Couette run.
pub struct CouetteResult {
    pub mu_dsmc: f64,
    pub mu_chapman_enskog: f64,
    pub core_temperature: f64,
    pub knudsen: f64,
}

/// Run planar Couette flow of argon (`model`, optionally with ω replaced) at Knudsen number
/// `kn` = λ/H and plate speed difference `u_over_vmp` × v_mp, with `per_cell` molecules per cell,
/// `cells_per_lambda`, a time step of `dt_over_tau` mean collision times, `startup` and `sample`
/// steps.
#[allow(clippy::too_many_arguments)]
pub fn run_couette_with(
    model: MolecularModel,
    kn: f64,
    u_over_vmp: f64,
    per_cell: usize,
    startup: usize,
    sample: usize,
    seed: u64,
    cells_per_lambda: f64,
    dt_over_tau: f64,
    omega: Option<f64>,
) -> CouetteResult {
    let mut sp = gas::lookup_with("Ar", model).unwrap();
    if let Some(w) = omega {
        sp.omega = w;
    }
    let t0 = 273.0;
    let m = sp.mass;
    let h = 1e-3;
    let lambda = kn * h;
    let n = (t0 / sp.t_ref).powf(sp.omega - 0.5)
        / (2f64.sqrt() * std::f64::consts::PI * sp.d_ref * sp.d_ref * lambda);
    let cells = (cells_per_lambda / kn).round() as usize;
    let dy = h / cells as f64;
    let total = cells * per_cell;
    let area = 1.0;
    let fnum = n * area * h / total as f64;
    let sigma = (BOLTZMANN * t0 / m).sqrt();
    let vmp = 2f64.sqrt() * sigma;
    let u_wall = u_over_vmp * vmp;
    let cbar = (8.0 * BOLTZMANN * t0 / (std::f64::consts::PI * m)).sqrt();
    let dt = dt_over_tau * lambda / cbar;
    let mix = Mixture {
        components: vec![Component {
            species: sp.clone(),
            mole_fraction: 1.0,
        }],
    };
    let model_c = CollisionModel::new(&mix, RotationalRelaxation::Constant { z_rot: 5.0 });
    let mut rng = SmallRng::seed_from_u64(seed);
    let (mut y, mut vx, mut vy, mut vz) = (
        vec![0.0; total],
        vec![0.0; total],
        vec![0.0; total],
        vec![0.0; total],
    );
    for i in 0..total {
        y[i] = h * rng.random::<f64>();
        vx[i] = u_wall * (y[i] / h - 0.5) + sigma * rng.sample::<f64, _>(StandardNormal);
        vy[i] = sigma * rng.sample::<f64, _>(StandardNormal);
        vz[i] = sigma * rng.sample::<f64, _>(StandardNormal);
    }
    let mut erot = vec![0.0; total];
    let species = vec![0u8; total];
    let mut scm = vec![model_c.initial_sigma_cr_max(0, 0, 2.0 * t0); cells];
    let mut scratch = Scratch::default();
    let mut stats = CollisionStats::default();
    // per-cell sums: count, vx, vy, vx², vy², vz², vx·vy
    let mut sums = vec![[0.0f64; 7]; cells];
    let mut order: Vec<usize> = Vec::with_capacity(total);
    let mut counts = vec![0usize; cells + 1];
    let (mut y2, mut vx2, mut vy2, mut vz2) = (
        vec![0.0; total],
        vec![0.0; total],
        vec![0.0; total],
        vec![0.0; total],
    );
    for step in 0..startup + sample {
        // move with diffuse plates moving at ∓U/2
        for i in 0..total {
            let mut rem = dt;
            loop {
                let yn = y[i] + vy[i] * rem;
                if (0.0..=h).contains(&yn) {
                    y[i] = yn;
                    break;
                }
                let (wall, into, uw) = if yn < 0.0 {
                    (0.0, 1.0, -0.5 * u_wall)
                } else {
                    (h, -1.0, 0.5 * u_wall)
                };
                let tw = (wall - y[i]) / vy[i];
                rem -= tw;
                y[i] = wall;
                vy[i] = into * flux_normal_speed(sigma, &mut rng);
                vx[i] = uw + sigma * rng.sample::<f64, _>(StandardNormal);
                vz[i] = sigma * rng.sample::<f64, _>(StandardNormal);
            }
        }
        // sort by cell
        counts.iter_mut().for_each(|c| *c = 0);
        let cell_of = |yy: f64| ((yy / dy) as usize).min(cells - 1);
        for &yy in &y {
            counts[cell_of(yy) + 1] += 1;
        }
        for c in 0..cells {
            counts[c + 1] += counts[c];
        }
        order.clear();
        order.resize(total, 0);
        let mut next = counts.clone();
        for i in 0..total {
            let c = cell_of(y[i]);
            order[next[c]] = i;
            next[c] += 1;
        }
        for (k, &i) in order.iter().enumerate() {
            y2[k] = y[i];
            vx2[k] = vx[i];
            vy2[k] = vy[i];
            vz2[k] = vz[i];
        }
        std::mem::swap(&mut y, &mut y2);
        std::mem::swap(&mut vx, &mut vx2);
        std::mem::swap(&mut vy, &mut vy2);
        std::mem::swap(&mut vz, &mut vz2);
        // collide cell by cell (vx plays v_z, vy plays v_r, vz plays v_θ)
        for c in 0..cells {
            let (lo, hi) = (counts[c], counts[c + 1]);
            let offs = [0u32, (hi - lo) as u32];
            let mut cell = CellMolecules {
                z: &y[lo..hi],
                r: &y[lo..hi],
                vz: &mut vx[lo..hi],
                vr: &mut vy[lo..hi],
                vt: &mut vz[lo..hi],
                erot: &mut erot[lo..hi],
                species: &species[lo..hi],
                sub_offsets: &offs,
            };
            collide_cell(
                &model_c,
                &mut cell,
                fnum,
                area * dy,
                dt,
                &mut scm[c..c + 1],
                &mut rng,
                &mut scratch,
                &mut stats,
            );
        }
        if step >= startup {
            for c in 0..cells {
                let s = &mut sums[c];
                for i in counts[c]..counts[c + 1] {
                    s[0] += 1.0;
                    s[1] += vx[i];
                    s[2] += vy[i];
                    s[3] += vx[i] * vx[i];
                    s[4] += vy[i] * vy[i];
                    s[5] += vz[i] * vz[i];
                    s[6] += vx[i] * vy[i];
                }
            }
        }
    }
    // core region: the middle half of the channel
    let core: Vec<usize> = (0..cells)
        .filter(|&c| {
            let yc = (c as f64 + 0.5) * dy;
            yc > 0.25 * h && yc < 0.75 * h
        })
        .collect();
    let (mut sx, mut sy, mut sxx, mut sxy, mut pxy, mut temp) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    for &c in &core {
        let s = &sums[c];
        let u = s[1] / s[0];
        let v = s[2] / s[0];
        let yc = (c as f64 + 0.5) * dy;
        sx += yc;
        sy += u;
        sxx += yc * yc;
        sxy += yc * u;
        let density = s[0] / sample as f64 * fnum / (area * dy);
        pxy += density * m * (s[6] / s[0] - u * v);
        let c2 = (s[3] + s[4] + s[5]) / s[0] - u * u - v * v;
        temp += m * c2 / (3.0 * BOLTZMANN);
    }
    let k = core.len() as f64;
    let slope = (k * sxy - sx * sy) / (k * sxx - sx * sx);
    pxy /= k;
    temp /= k;
    let mu_ref = gas::vss_viscosity(m, sp.d_ref, sp.omega, sp.alpha, sp.t_ref);
    CouetteResult {
        mu_dsmc: -pxy / slope,
        mu_chapman_enskog: mu_ref * (temp / sp.t_ref).powf(sp.omega),
        core_temperature: temp,
        knudsen: kn,
    }
}

/// Diagnostic, not a check (run with `cargo test --release couette -- --ignored --nocapture`):
/// steady Couette flow of VHS argon at Kn = 0.02, four seeds, about a minute. In this version
/// it gives μ_DSMC/μ_CE ≈ 0.96 ± 0.01 where ≈ 1.00–1.02 is expected, while the homogeneous
/// stress relaxation (tests/collisions.rs) agrees with p/μ_CE within 1 %; the discrepancy is
/// under investigation, so no assertion is made here yet.
#[test]
#[ignore]
fn couette_viscosity_diagnostic() {
    for seed in 1..=4 {
        let r = run_couette_with(
            MolecularModel::Vhs,
            0.02,
            1.0,
            40,
            60000,
            200000,
            seed,
            2.0,
            0.1,
            None,
        );
        eprintln!(
            "Couette Kn {}: μ_DSMC/μ_CE = {:.4} at core T = {:.1} K",
            r.knudsen,
            r.mu_dsmc / r.mu_chapman_enskog,
            r.core_temperature
        );
    }
}
