//! Equilibrium (Maxwell–Boltzmann) velocity sampling and its closed-form moments.
//!
//! Each Cartesian velocity component of an equilibrium gas at temperature T is normal with
//! variance kT/m (Bird 1994 §4.1). The speed moments below are the textbook results used as
//! test references: mean sqrt(8kT/πm), rms sqrt(3kT/m), most probable sqrt(2kT/m).

use crate::constants::BOLTZMANN;
use rand::Rng;
use rand_distr::StandardNormal;
use std::f64::consts::PI;

/// sqrt(kT/m), m/s: standard deviation of one velocity component.
#[inline]
pub fn sigma(t: f64, mass: f64) -> f64 {
    (BOLTZMANN * t / mass).sqrt()
}

/// Mean speed sqrt(8kT/(πm)), m/s.
pub fn mean_speed(t: f64, mass: f64) -> f64 {
    (8.0 * BOLTZMANN * t / (PI * mass)).sqrt()
}

/// Root-mean-square speed sqrt(3kT/m), m/s.
pub fn rms_speed(t: f64, mass: f64) -> f64 {
    (3.0 * BOLTZMANN * t / mass).sqrt()
}

/// Most probable speed sqrt(2kT/m), m/s.
pub fn most_probable_speed(t: f64, mass: f64) -> f64 {
    (2.0 * BOLTZMANN * t / mass).sqrt()
}

/// Maxwell–Boltzmann speed probability density at speed c.
pub fn speed_pdf(c: f64, t: f64, mass: f64) -> f64 {
    let s2 = BOLTZMANN * t / mass;
    (2.0 / PI).sqrt() * c * c / (s2 * s2.sqrt()) * (-c * c / (2.0 * s2)).exp()
}

/// One equilibrium velocity (v_x, v_y, v_z) at rest, with component deviation `sigma`.
#[inline]
pub fn velocity<R: Rng + ?Sized>(sigma: f64, rng: &mut R) -> [f64; 3] {
    [
        sigma * rng.sample::<f64, _>(StandardNormal),
        sigma * rng.sample::<f64, _>(StandardNormal),
        sigma * rng.sample::<f64, _>(StandardNormal),
    ]
}

/// Equilibrium one-sided number flux n c̄ / 4 through a surface, 1/(m² s) (Bird 1994 eq. 4.22).
pub fn one_sided_flux(n: f64, t: f64, mass: f64) -> f64 {
    0.25 * n * mean_speed(t, mass)
}

/// Rotational energy of a molecule with `dof` rotational degrees of freedom in equilibrium at
/// temperature t, J: Gamma-distributed with shape dof/2 and scale kT (Bird 1994 eq. 5.14);
/// for dof = 2 the exponential −kT ln U.
#[inline]
pub fn rotational_energy<R: Rng + ?Sized>(dof: u32, t: f64, rng: &mut R) -> f64 {
    match dof {
        0 => 0.0,
        2 => -BOLTZMANN * t * (1.0 - rng.random::<f64>()).ln(),
        d => rand_distr::Gamma::new(0.5 * d as f64, BOLTZMANN * t)
            .map(|g| rand_distr::Distribution::sample(&g, rng))
            .unwrap_or(0.0),
    }
}
