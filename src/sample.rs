//! The sampling stage: per-cell accumulation of molecular moments after start-up, and the
//! macroscopic fields derived from them.
//!
//! Each sampling step adds, per cell, the count of simulated molecules (per species), Σ m, the
//! mass-weighted velocity sums Σ m v and Σ m v² per direction (z, r, θ in the molecule's local
//! frame), Σ E_rot and Σ ζ_rot. Every molecule of a cell carries the cell row's weight, so real
//! amounts are count × F_N × w / V. Fields follow the usual DSMC definitions (Bird 1994 §1.4,
//! §11.2): number density, mass density, mass-average velocity, translational temperature per
//! direction from the peculiar velocity, rotational temperature 2ΣE_rot/(kΣζ), overall
//! temperature (3T_tr + ζ̄T_rot)/(3 + ζ̄), pressure n k T_tr, Mach number |u|/sqrt(γkT_tr/m̄),
//! local mean free path and Knudsen number λ/D. Samples are taken after the collision stage, which
//! is exact for n, u and T but understates non-equilibrium moments (the anisotropy of the
//! directional temperatures) by about ½(p/μ)Δt, a few per cent at the default time step (the
//! collision stage relaxes them and the next flight rebuilds them). Invariant: accumulators only grow during
//! sampling; a cell never sampled reports NaN fields, not zeros.

use crate::constants::BOLTZMANN;
use crate::crew::Crew;
use crate::numerics::Plan;
use crate::particles::Molecules;
use serde::{Deserialize, Serialize};

/// Number of per-cell accumulators besides the species counts.
pub const MOMENTS: usize = 9;
/// Indices of the moments.
const M_MASS: usize = 0;
const M_PZ: usize = 1;
const M_PR: usize = 2;
const M_PT: usize = 3;
const M_EZ: usize = 4;
const M_ER: usize = 5;
const M_ET: usize = 6;
const M_EROT: usize = 7;
const M_ZETA: usize = 8;

/// Accumulated samples over the cells of the grid.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct FieldSampler {
    pub cells: usize,
    pub species: usize,
    /// Sampling steps accumulated.
    pub steps: u64,
    /// Simulated molecules counted, per cell and species (cell · S + s).
    pub counts: Vec<f64>,
    /// Moments per cell (cell · MOMENTS + k).
    pub moments: Vec<f64>,
}

/// First work block of each thread when `blocks` blocks of `keys_per_block` sort keys each
/// are shared by `threads` threads in proportion to their molecules (`offsets`: the sort's
/// offsets, one per key and a final total), so that thread t works on about the t-th part of
/// the sorted arrays, as in the move and the sort.
pub fn thread_starts(
    offsets: &[u32],
    keys_per_block: usize,
    blocks: usize,
    threads: usize,
) -> Vec<usize> {
    let total = offsets.last().copied().unwrap_or(0) as usize;
    let keys = offsets.len().saturating_sub(1);
    (0..threads)
        .map(|t| {
            let target = (total * t / threads) as u32;
            let key = offsets[..keys].partition_point(|&o| o < target);
            key.div_ceil(keys_per_block.max(1)).min(blocks)
        })
        .collect()
}

impl FieldSampler {
    /// Empty sampler for `cells` cells and `species` species.
    pub fn new(cells: usize, species: usize) -> Self {
        FieldSampler {
            cells,
            species,
            steps: 0,
            counts: vec![0.0; cells * species],
            moments: vec![0.0; cells * MOMENTS],
        }
    }

    /// Add one step's molecules, sorted by cell: `offsets[c · subcells]` is the first molecule
    /// of cell c (the sort's offsets). Parallel over blocks of `block` cells, each adding its
    /// own cells' molecules in array order, so the sums do not depend on the thread count.
    pub fn sample_sorted(
        &mut self,
        crew: &Crew,
        plan: &Plan,
        m: &Molecules,
        offsets: &[u32],
        subcells: usize,
        block: usize,
    ) {
        let ns = self.species;
        let items: Vec<_> = self
            .counts
            .chunks_mut(block * ns)
            .zip(self.moments.chunks_mut(block * MOMENTS))
            .collect();
        let starts = thread_starts(offsets, block * subcells, items.len(), crew.threads());
        crew.map_split(
            items,
            |t| starts[t],
            |b, (counts, moments)| {
                for k in 0..counts.len() / ns {
                    let c = b * block + k;
                    let lo = offsets[c * subcells] as usize;
                    let hi = offsets[(c + 1) * subcells] as usize;
                    let a = &mut moments[k * MOMENTS..(k + 1) * MOMENTS];
                    let n = &mut counts[k * ns..(k + 1) * ns];
                    // The cell's sums are taken in a local array (kept in registers), then
                    // added to the accumulators once: adding each molecule straight into
                    // memory chained every sum through a store and a reload.
                    let mut cell = [0.0; MOMENTS];
                    for i in lo..hi {
                        add(plan, m, i, n, &mut cell);
                    }
                    for (a, c) in a.iter_mut().zip(cell) {
                        *a += c;
                    }
                }
            },
        );
        self.steps += 1;
    }

    /// Add one step's molecules in any order; `cell_of(i)` gives molecule i's cell. Parallel
    /// over fixed blocks of `block` molecules, each summing into its own partial accumulators
    /// (`partial`, reused from step to step), which are then added in block order, so the sums
    /// do not depend on the thread count.
    pub fn sample(
        &mut self,
        crew: &Crew,
        plan: &Plan,
        m: &Molecules,
        cell_of: impl Fn(usize) -> usize + Sync,
        block: usize,
        partial: &mut Vec<f64>,
    ) {
        let ns = self.species;
        let width = self.cells * (ns + MOMENTS);
        let blocks = m.len().div_ceil(block);
        partial.clear();
        partial.resize(blocks * width, 0.0);
        let items: Vec<_> = partial.chunks_mut(width.max(1)).collect();
        crew.for_each(items, |b, acc| {
            let (counts, moments) = acc.split_at_mut(self.cells * ns);
            for i in b * block..((b + 1) * block).min(m.len()) {
                let c = cell_of(i);
                add(
                    plan,
                    m,
                    i,
                    &mut counts[c * ns..(c + 1) * ns],
                    &mut moments[c * MOMENTS..(c + 1) * MOMENTS],
                );
            }
        });
        for acc in partial.chunks(width.max(1)) {
            let (counts, moments) = acc.split_at(self.cells * ns);
            for (a, b) in self.counts.iter_mut().zip(counts) {
                *a += b;
            }
            for (a, b) in self.moments.iter_mut().zip(moments) {
                *a += b;
            }
        }
        self.steps += 1;
    }

    /// Add another sampler's accumulators (replicas of the same case).
    pub fn merge(&mut self, other: &FieldSampler) {
        for (a, b) in self.counts.iter_mut().zip(&other.counts) {
            *a += b;
        }
        for (a, b) in self.moments.iter_mut().zip(&other.moments) {
            *a += b;
        }
        self.steps += other.steps;
    }

    /// Derived fields.
    pub fn fields(&self, plan: &Plan) -> Fields {
        let g = &plan.grid;
        let (nz, nr) = (g.z.len(), g.r.len());
        let ns = self.species;
        let mut f = Fields::empty(nz, nr, ns);
        let steps = self.steps.max(1) as f64;
        let diameter = plan.case.aperture.diameter;
        for c in 0..self.cells {
            let vol = g.volume[c];
            let a = &self.moments[c * MOMENTS..(c + 1) * MOMENTS];
            let count: f64 = self.counts[c * ns..(c + 1) * ns].iter().sum();
            f.samples[c] = count;
            if vol <= 0.0 || count < 1.0 {
                continue;
            }
            let real_per_sim = plan.fnum * plan.weights.factor[c % nr] / (vol * steps);
            let n = count * real_per_sim;
            for s in 0..ns {
                f.species_density[s][c] = self.counts[c * ns + s] * real_per_sim;
            }
            let mass = a[M_MASS];
            let u = [a[M_PZ] / mass, a[M_PR] / mass, a[M_PT] / mass];
            let k = BOLTZMANN * count;
            let tz = (a[M_EZ] - mass * u[0] * u[0]) / k;
            let tr = (a[M_ER] - mass * u[1] * u[1]) / k;
            let tt = (a[M_ET] - mass * u[2] * u[2]) / k;
            let ttr = (tz + tr + tt) / 3.0;
            let zeta = a[M_ZETA] / count;
            let trot = if a[M_ZETA] > 0.0 {
                2.0 * a[M_EROT] / (BOLTZMANN * a[M_ZETA])
            } else {
                f64::NAN
            };
            let tov = if zeta > 0.0 {
                (3.0 * ttr + zeta * trot) / (3.0 + zeta)
            } else {
                ttr
            };
            let mbar = mass / count;
            let gamma = (zeta + 5.0) / (zeta + 3.0);
            let speed = (u[0] * u[0] + u[1] * u[1] + u[2] * u[2]).sqrt();
            f.number_density[c] = n;
            f.mass_density[c] = n * mbar;
            f.velocity_z[c] = u[0];
            f.velocity_r[c] = u[1];
            f.velocity_theta[c] = u[2];
            f.temperature_z[c] = tz;
            f.temperature_r[c] = tr;
            f.temperature_theta[c] = tt;
            f.translational_temperature[c] = ttr;
            f.rotational_temperature[c] = trot;
            f.temperature[c] = tov;
            f.pressure[c] = n * BOLTZMANN * ttr;
            f.mach_number[c] = speed / (gamma * BOLTZMANN * ttr / mbar).sqrt();
            let p = n * BOLTZMANN * tov;
            let lambda = crate::analytic::mixture_mean_free_path(&plan.case.gas, p, tov.max(1.0));
            f.mean_free_path[c] = lambda;
            f.knudsen_number[c] = lambda / diameter;
        }
        f
    }
}

/// Add molecule i to its cell's species counts `n` and moments `a`.
#[inline(always)]
fn add(plan: &Plan, m: &Molecules, i: usize, n: &mut [f64], a: &mut [f64]) {
    let a: &mut [f64; MOMENTS] = a.try_into().expect("one cell's moments");
    let s = m.species[i] as usize;
    let mass = plan.masses[s];
    let (vz, vr, vt) = (f64::from(m.vz[i]), f64::from(m.vr[i]), f64::from(m.vt[i]));
    n[s] += 1.0;
    a[M_MASS] += mass;
    a[M_PZ] += mass * vz;
    a[M_PR] += mass * vr;
    a[M_PT] += mass * vt;
    a[M_EZ] += mass * vz * vz;
    a[M_ER] += mass * vr * vr;
    a[M_ET] += mass * vt * vt;
    a[M_EROT] += f64::from(m.erot[i]);
    a[M_ZETA] += plan.rot_dof[s] as f64;
}

/// Macroscopic fields on the (z, r) grid, each a row-major nz × nr array (cell = iz · nr + ir).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Fields {
    pub nz: usize,
    pub nr: usize,
    pub number_density: Vec<f64>,
    pub species_density: Vec<Vec<f64>>,
    pub mass_density: Vec<f64>,
    pub velocity_z: Vec<f64>,
    pub velocity_r: Vec<f64>,
    pub velocity_theta: Vec<f64>,
    pub temperature_z: Vec<f64>,
    pub temperature_r: Vec<f64>,
    pub temperature_theta: Vec<f64>,
    pub translational_temperature: Vec<f64>,
    pub rotational_temperature: Vec<f64>,
    pub temperature: Vec<f64>,
    pub pressure: Vec<f64>,
    pub mach_number: Vec<f64>,
    pub mean_free_path: Vec<f64>,
    pub knudsen_number: Vec<f64>,
    /// Simulated molecules sampled per cell (all steps).
    pub samples: Vec<f64>,
}

impl Fields {
    fn empty(nz: usize, nr: usize, ns: usize) -> Self {
        let v = || vec![f64::NAN; nz * nr];
        Fields {
            nz,
            nr,
            number_density: v(),
            species_density: (0..ns).map(|_| v()).collect(),
            mass_density: v(),
            velocity_z: v(),
            velocity_r: v(),
            velocity_theta: v(),
            temperature_z: v(),
            temperature_r: v(),
            temperature_theta: v(),
            translational_temperature: v(),
            rotational_temperature: v(),
            temperature: v(),
            pressure: v(),
            mach_number: v(),
            mean_free_path: v(),
            knudsen_number: v(),
            samples: vec![0.0; nz * nr],
        }
    }

    /// Every field with its name, units and description (for files and plots).
    pub fn named(&self) -> Vec<(&'static str, &'static str, &'static str, &Vec<f64>)> {
        vec![
            (
                "number_density",
                "1/m^3",
                "number density",
                &self.number_density,
            ),
            ("mass_density", "kg/m^3", "mass density", &self.mass_density),
            ("velocity_z", "m/s", "axial velocity", &self.velocity_z),
            ("velocity_r", "m/s", "radial velocity", &self.velocity_r),
            (
                "velocity_theta",
                "m/s",
                "azimuthal velocity",
                &self.velocity_theta,
            ),
            (
                "temperature_z",
                "K",
                "axial translational temperature",
                &self.temperature_z,
            ),
            (
                "temperature_r",
                "K",
                "radial translational temperature",
                &self.temperature_r,
            ),
            (
                "temperature_theta",
                "K",
                "azimuthal translational temperature",
                &self.temperature_theta,
            ),
            (
                "translational_temperature",
                "K",
                "translational temperature",
                &self.translational_temperature,
            ),
            (
                "rotational_temperature",
                "K",
                "rotational temperature",
                &self.rotational_temperature,
            ),
            ("temperature", "K", "overall temperature", &self.temperature),
            ("pressure", "Pa", "pressure n k T_tr", &self.pressure),
            ("mach_number", "1", "Mach number", &self.mach_number),
            (
                "mean_free_path",
                "m",
                "local mean free path",
                &self.mean_free_path,
            ),
            (
                "knudsen_number",
                "1",
                "local Knudsen number (mean free path over aperture diameter)",
                &self.knudsen_number,
            ),
            ("samples", "1", "simulated molecules sampled", &self.samples),
        ]
    }
}
