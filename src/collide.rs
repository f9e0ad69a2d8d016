//! The collision stage: Bird's no-time-counter (NTC) scheme per cell, VHS/VSS binary collisions
//! and Larsen–Borgnakke rotational energy exchange.
//!
//! Per cell and per species pair (p, q) the number of candidate pairs per step is
//! ½ N_p (N_p − 1) F (σ c_r)_max Δt / V for p = q and N_p N_q F (σ c_r)_max Δt / V for p ≠ q,
//! F being the real molecules per simulated molecule of the cell (F_N × radial weight; every
//! molecule of a cell has the same weight), rounded randomly to an integer (Bird 1994 §11.1,
//! with the N(N−1) form that needs no time-averaged N̄). A candidate is accepted with
//! probability σ c_r / (σ c_r)_max; the maximum is kept per cell and pair and raised whenever a
//! larger value is met. Partners are taken from the same subcell when it holds one, otherwise
//! from the cell, so the mean collision separation stays below the cell size.
//!
//! Cross-sections: VHS/VSS with collision-pair parameters by the usual mixing rules
//! d_pq = (d_p + d_q)/2, ω_pq = (ω_p + ω_q)/2, α_pq = (α_p + α_q)/2, T_ref averaged
//! (Bird 1994 §4.3, eqs. 4.63 and 4.76): σ_T = π d² (2kT_ref/(m_r c_r²))^(ω−½) / Γ(5/2 − ω).
//! Scattering: isotropic (VHS, hard sphere) or VSS with cos χ = 2U^(1/α) − 1 about the
//! pre-collision relative velocity (Koura & Matsumoto 1991; Bird 1994 eq. 11.xx form).
//! Rotation: serial Larsen–Borgnakke (Larsen & Borgnakke 1975; Bird 1994 §5.3): each partner
//! with rotational modes is, with probability 1/Z_rot, given a new share of the energy
//! E_c = ½ m_r c_r² + E_rot,i drawn from ε = E_tr/E_c ~ Beta(5/2 − ω, ζ_i/2). Vibration is
//! frozen (room-temperature aperture flows); a vibrational mode would be another serial
//! exchange after rotation. Invariants: momentum and total (translational + rotational)
//! energy of every pair are conserved to round-off.

use crate::constants::BOLTZMANN;
use crate::gas::Mixture;
use crate::particles::{Store, Stored};
use rand::Rng;
use rand_distr::{Beta, Distribution};
use serde::Serialize;
use std::f64::consts::PI;

/// How the rotational collision number Z_rot is set.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum RotationalRelaxation {
    /// Constant Z_rot (probability 1/Z_rot per molecule per collision).
    Constant { z_rot: f64 },
    /// Parker's temperature-dependent form (Parker 1959, Phys. Fluids 2, 449):
    /// Z = Z_∞ / (1 + (π^{3/2}/2)(T*/T)^{1/2} + (π + π²/4)(T*/T)), with T the collision
    /// temperature E_c/((5/2 − ω + ζ/2) k). Constants for N2 as commonly quoted (Parker 1959,
    /// Z_∞ = 18.1, T* = 91.5 K; from memory).
    Parker { z_inf: f64, t_star: f64 },
}

impl RotationalRelaxation {
    /// Collision number at temperature t.
    #[inline]
    pub fn z_rot(&self, t: f64) -> f64 {
        match *self {
            RotationalRelaxation::Constant { z_rot } => z_rot,
            RotationalRelaxation::Parker { z_inf, t_star } => {
                let x = t_star / t.max(1e-3);
                (z_inf / (1.0 + 0.5 * PI.powf(1.5) * x.sqrt() + (PI + 0.25 * PI * PI) * x)).max(1.0)
            }
        }
    }
}

/// Collision parameters of one species pair.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PairModel {
    /// σ_T c_r = coef · c_r^exponent.
    pub coef: f64,
    pub exponent: f64,
    pub omega: f64,
    /// VSS scattering exponent (1 = isotropic).
    pub alpha: f64,
    pub reduced_mass: f64,
    pub d_ref: f64,
    pub t_ref: f64,
}

/// Collision model of a gas mixture.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CollisionModel {
    pub species: usize,
    pub masses: Vec<f64>,
    /// Rotational degrees of freedom per species.
    pub rot_dof: Vec<u32>,
    /// Pair models, index p * species + q (symmetric).
    pub pairs: Vec<PairModel>,
    pub rotation: RotationalRelaxation,
}

impl CollisionModel {
    /// Build from a mixture with the given rotational relaxation rule.
    pub fn new(mix: &Mixture, rotation: RotationalRelaxation) -> Self {
        let sp: Vec<_> = mix.components.iter().map(|c| &c.species).collect();
        let n = sp.len();
        let mut pairs = Vec::with_capacity(n * n);
        for p in &sp {
            for q in &sp {
                let d = 0.5 * (p.d_ref + q.d_ref);
                let omega = 0.5 * (p.omega + q.omega);
                let alpha = 0.5 * (p.alpha + q.alpha);
                let t_ref = 0.5 * (p.t_ref + q.t_ref);
                let mr = p.mass * q.mass / (p.mass + q.mass);
                // σ c_r = π d² (2kT_ref/m_r)^(ω−½) c_r^(2−2ω) / Γ(5/2−ω)
                let coef = PI * d * d * (2.0 * BOLTZMANN * t_ref / mr).powf(omega - 0.5)
                    / libm::tgamma(2.5 - omega);
                pairs.push(PairModel {
                    coef,
                    exponent: 2.0 - 2.0 * omega,
                    omega,
                    alpha,
                    reduced_mass: mr,
                    d_ref: d,
                    t_ref,
                });
            }
        }
        CollisionModel {
            species: n,
            masses: sp.iter().map(|s| s.mass).collect(),
            rot_dof: sp.iter().map(|s| s.rot_dof).collect(),
            pairs,
            rotation,
        }
    }

    /// Pair model of species p and q.
    #[inline]
    pub fn pair(&self, p: usize, q: usize) -> &PairModel {
        &self.pairs[p * self.species + q]
    }

    /// σ_T c_r of a pair at relative speed c_r.
    #[inline]
    pub fn sigma_cr(&self, p: usize, q: usize, cr: f64) -> f64 {
        let m = self.pair(p, q);
        if m.exponent == 0.0 {
            m.coef
        } else if m.exponent == 1.0 {
            m.coef * cr
        } else {
            m.coef * cr.powf(m.exponent)
        }
    }

    /// A starting value of (σ c_r)_max for a gas at temperature t: σ c_r at three times the
    /// most probable relative speed (raised adaptively as larger values are met).
    pub fn initial_sigma_cr_max(&self, p: usize, q: usize, t: f64) -> f64 {
        let mr = self.pair(p, q).reduced_mass;
        let cr = 3.0 * (2.0 * BOLTZMANN * t / mr).sqrt();
        self.sigma_cr(p, q, cr)
    }

    /// Equilibrium collision rate per molecule of species p with species q at density n_q and
    /// temperature t: n_q ⟨σ c_r⟩ (Bird 1994 eq. 4.64/4.75 for VHS).
    pub fn equilibrium_rate(&self, p: usize, q: usize, n_q: f64, t: f64) -> f64 {
        let m = self.pair(p, q);
        // ⟨σ c_r⟩ = 2 π^{1/2} d² (T/T_ref)^{1−ω} (2kT_ref/m_r)^{1/2} for VHS.
        n_q * 2.0
            * PI.sqrt()
            * m.d_ref
            * m.d_ref
            * (t / m.t_ref).powf(1.0 - m.omega)
            * (2.0 * BOLTZMANN * m.t_ref / m.reduced_mass).sqrt()
    }
}

/// Counters of the collision stage.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, serde::Deserialize)]
pub struct CollisionStats {
    /// Candidate pairs tested.
    pub candidates: u64,
    /// Collisions performed.
    pub collisions: u64,
    /// Sum of partner separations in (z, r), m (for the mean collision separation).
    pub separation_sum: f64,
    /// Rotational exchanges performed.
    pub rotational_exchanges: u64,
}

impl CollisionStats {
    /// Add another set of counters.
    pub fn merge(&mut self, o: &CollisionStats) {
        self.candidates += o.candidates;
        self.collisions += o.collisions;
        self.separation_sum += o.separation_sum;
        self.rotational_exchanges += o.rotational_exchanges;
    }
}

/// The molecules of one cell, ordered by subcell. Velocities and rotational energies are
/// stored as `V` (the engine's [`Stored`]) and computed with in f64.
pub struct CellMolecules<'a, V: Store = Stored> {
    pub z: &'a [f64],
    pub r: &'a [f64],
    pub vz: &'a mut [V],
    pub vr: &'a mut [V],
    pub vt: &'a mut [V],
    pub erot: &'a mut [V],
    pub species: &'a [u8],
    /// Subcell boundaries within the cell (length subcells + 1, from 0 to N).
    pub sub_offsets: &'a [u32],
}

/// Reusable per-worker buffers.
#[derive(Debug, Default, Clone)]
pub struct Scratch {
    /// Molecule indices grouped by (species, subcell).
    idx: Vec<u32>,
    /// Group starts, index species * subcells + subcell; length species * subcells + 1.
    start: Vec<u32>,
    /// Fill cursors of the grouping sort.
    fill: Vec<u32>,
}

/// Collide the molecules of one cell for one step.
///
/// `fnum` is the number of real molecules per simulated molecule of this cell, `volume` the
/// cell's gas volume (m³), `sigma_cr_max` the cell's per-pair maxima (species² entries, p·S+q).
#[allow(clippy::too_many_arguments)]
pub fn collide_cell<R: Rng + ?Sized, V: Store>(
    model: &CollisionModel,
    cell: &mut CellMolecules<V>,
    fnum: f64,
    volume: f64,
    dt: f64,
    sigma_cr_max: &mut [f64],
    rng: &mut R,
    scratch: &mut Scratch,
    stats: &mut CollisionStats,
) {
    let n = cell.species.len();
    if n < 2 {
        return;
    }
    let ns = model.species;
    let nsub = cell.sub_offsets.len() - 1;
    // Group by (species, subcell): counting sort into scratch (a pure gas is already grouped).
    let groups = ns * nsub;
    scratch.start.clear();
    scratch.idx.clear();
    if ns == 1 {
        scratch.start.extend_from_slice(cell.sub_offsets);
        scratch.idx.extend(0..n as u32);
    } else {
        scratch.start.resize(groups + 1, 0);
        for s in 0..nsub {
            for i in cell.sub_offsets[s]..cell.sub_offsets[s + 1] {
                let g = cell.species[i as usize] as usize * nsub + s;
                scratch.start[g + 1] += 1;
            }
        }
        for g in 0..groups {
            scratch.start[g + 1] += scratch.start[g];
        }
        scratch.idx.resize(n, 0);
        scratch.fill.clear();
        scratch.fill.extend_from_slice(&scratch.start[..groups]);
        for s in 0..nsub {
            for i in cell.sub_offsets[s]..cell.sub_offsets[s + 1] {
                let g = cell.species[i as usize] as usize * nsub + s;
                scratch.idx[scratch.fill[g] as usize] = i;
                scratch.fill[g] += 1;
            }
        }
    }
    let start = &scratch.start;
    let idx = &scratch.idx;
    let count_of = |p: usize| (start[(p + 1) * nsub] - start[p * nsub]) as usize;

    let factor = fnum * dt / volume;
    for p in 0..ns {
        let np = count_of(p);
        if np == 0 {
            continue;
        }
        for q in p..ns {
            let nq = count_of(q);
            let pairs = if p == q {
                0.5 * np as f64 * (np as f64 - 1.0)
            } else {
                np as f64 * nq as f64
            };
            if pairs <= 0.0 {
                continue;
            }
            let k = p * ns + q;
            let expected = pairs * factor * sigma_cr_max[k];
            let mut m = expected.floor() as u64;
            if rng.random::<f64>() < expected - expected.floor() {
                m += 1;
            }
            for _ in 0..m {
                stats.candidates += 1;
                // first molecule: uniform among species p of the cell
                let a = start[p * nsub] as usize + rng.random_range(0..np);
                let i = idx[a] as usize;
                // its subcell: locate group of position a
                let sub_i = subcell_of_position(start, p * nsub, nsub, a);
                let j = match pick_partner(start, idx, p, q, nsub, sub_i, i, nq, rng) {
                    Some(j) => j,
                    None => continue,
                };
                let (vi, vj) = (
                    [cell.vz[i].get(), cell.vr[i].get(), cell.vt[i].get()],
                    [cell.vz[j].get(), cell.vr[j].get(), cell.vt[j].get()],
                );
                let g = [vi[0] - vj[0], vi[1] - vj[1], vi[2] - vj[2]];
                let cr2 = g[0] * g[0] + g[1] * g[1] + g[2] * g[2];
                let cr = cr2.sqrt();
                let scr = model.sigma_cr(p, q, cr);
                if scr > sigma_cr_max[k] {
                    sigma_cr_max[k] = scr;
                }
                if rng.random::<f64>() * sigma_cr_max[k] >= scr {
                    continue;
                }
                stats.collisions += 1;
                stats.separation_sum +=
                    ((cell.z[i] - cell.z[j]).powi(2) + (cell.r[i] - cell.r[j]).powi(2)).sqrt();
                let (si, sj) = (cell.species[i] as usize, cell.species[j] as usize);
                let (mut ei, mut ej) = (cell.erot[i].get(), cell.erot[j].get());
                let (vi2, vj2) =
                    binary_collision(model, si, sj, vi, vj, &mut ei, &mut ej, rng, stats);
                cell.vz[i] = V::put(vi2[0]);
                cell.vr[i] = V::put(vi2[1]);
                cell.vt[i] = V::put(vi2[2]);
                cell.vz[j] = V::put(vj2[0]);
                cell.vr[j] = V::put(vj2[1]);
                cell.vt[j] = V::put(vj2[2]);
                cell.erot[i] = V::put(ei);
                cell.erot[j] = V::put(ej);
            }
        }
    }
}

/// Subcell of the molecule at position `a` of the grouped index, given its species' groups
/// start at `g0`.
#[inline]
fn subcell_of_position(start: &[u32], g0: usize, nsub: usize, a: usize) -> usize {
    let a = a as u32;
    let mut s = 0;
    while s + 1 < nsub && start[g0 + s + 1] <= a {
        s += 1;
    }
    s
}

/// A partner of species q for molecule `i` (species p) in subcell `sub`: from the same subcell
/// when it holds another molecule of species q, otherwise from the whole cell. None if no
/// partner exists.
#[allow(clippy::too_many_arguments)]
#[inline]
fn pick_partner<R: Rng + ?Sized>(
    start: &[u32],
    idx: &[u32],
    p: usize,
    q: usize,
    nsub: usize,
    sub: usize,
    i: usize,
    nq: usize,
    rng: &mut R,
) -> Option<usize> {
    // i belongs to the groups of species q only when p == q (and then to subcell `sub`).
    let own = usize::from(p == q);
    let g = q * nsub + sub;
    let (lo, hi) = (start[g] as usize, start[g + 1] as usize);
    let (lo, hi) = if hi - lo > own {
        (lo, hi)
    } else {
        if nq <= own {
            return None;
        }
        (start[q * nsub] as usize, start[(q + 1) * nsub] as usize)
    };
    // uniform among the group's members other than i
    loop {
        let j = idx[rng.random_range(lo..hi)] as usize;
        if j != i {
            return Some(j);
        }
    }
}

/// One binary collision: Larsen–Borgnakke rotational exchange (serial), then VHS/VSS
/// scattering in the centre-of-mass frame. Returns the new velocities; rotational energies are
/// updated in place.
#[allow(clippy::too_many_arguments)]
#[inline]
pub fn binary_collision<R: Rng + ?Sized>(
    model: &CollisionModel,
    p: usize,
    q: usize,
    vi: [f64; 3],
    vj: [f64; 3],
    ei: &mut f64,
    ej: &mut f64,
    rng: &mut R,
    stats: &mut CollisionStats,
) -> ([f64; 3], [f64; 3]) {
    let pm = model.pair(p, q);
    let (mi, mj) = (model.masses[p], model.masses[q]);
    let mt = mi + mj;
    let vcm = [
        (mi * vi[0] + mj * vj[0]) / mt,
        (mi * vi[1] + mj * vj[1]) / mt,
        (mi * vi[2] + mj * vj[2]) / mt,
    ];
    let g = [vi[0] - vj[0], vi[1] - vj[1], vi[2] - vj[2]];
    let cr2 = g[0] * g[0] + g[1] * g[1] + g[2] * g[2];
    let mut e_tr = 0.5 * pm.reduced_mass * cr2;
    // Serial Larsen–Borgnakke exchange with each partner that has rotational modes.
    for (dof, erot) in [(model.rot_dof[p], &mut *ei), (model.rot_dof[q], &mut *ej)] {
        if dof == 0 {
            continue;
        }
        let ec = e_tr + *erot;
        let t_coll = ec / ((2.5 - pm.omega + 0.5 * dof as f64) * BOLTZMANN);
        let z = model.rotation.z_rot(t_coll);
        if rng.random::<f64>() * z >= 1.0 {
            continue;
        }
        let a = 2.5 - pm.omega;
        let eps = if dof == 2 {
            // Beta(a, 1): inverse CDF
            rng.random::<f64>().powf(1.0 / a)
        } else {
            Beta::new(a, 0.5 * dof as f64)
                .map(|b| b.sample(rng))
                .unwrap_or(0.5)
        };
        e_tr = eps * ec;
        *erot = ec - e_tr;
        stats.rotational_exchanges += 1;
    }
    let cr_new = (2.0 * e_tr / pm.reduced_mass).sqrt();
    let cr_old = cr2.sqrt();
    let gn = if pm.alpha == 1.0 || cr_old == 0.0 {
        // isotropic scattering
        let cos_chi = 2.0 * rng.random::<f64>() - 1.0;
        let sin_chi = (1.0 - cos_chi * cos_chi).max(0.0).sqrt();
        let eps = 2.0 * PI * rng.random::<f64>();
        [
            cr_new * cos_chi,
            cr_new * sin_chi * eps.cos(),
            cr_new * sin_chi * eps.sin(),
        ]
    } else {
        // VSS deflection about the pre-collision relative velocity (Bird 1994 eq. 2.22 form)
        let cos_chi = 2.0 * rng.random::<f64>().powf(1.0 / pm.alpha) - 1.0;
        let sin_chi = (1.0 - cos_chi * cos_chi).max(0.0).sqrt();
        let eps = 2.0 * PI * rng.random::<f64>();
        let (ce, se) = (eps.cos(), eps.sin());
        let (u, v, w) = (g[0], g[1], g[2]);
        let vw = (v * v + w * w).sqrt();
        let s = cr_new / cr_old;
        if vw > 1e-12 * cr_old {
            [
                s * (cos_chi * u + sin_chi * se * vw),
                s * (cos_chi * v + sin_chi * (cr_old * w * ce - u * v * se) / vw),
                s * (cos_chi * w - sin_chi * (cr_old * v * ce + u * w * se) / vw),
            ]
        } else {
            let sign = u.signum();
            [
                sign * cr_new * cos_chi,
                cr_new * sin_chi * ce,
                cr_new * sin_chi * se,
            ]
        }
    };
    let (fi, fj) = (mj / mt, mi / mt);
    (
        [
            vcm[0] + fi * gn[0],
            vcm[1] + fi * gn[1],
            vcm[2] + fi * gn[2],
        ],
        [
            vcm[0] - fj * gn[0],
            vcm[1] - fj * gn[1],
            vcm[2] - fj * gn[2],
        ],
    )
}
