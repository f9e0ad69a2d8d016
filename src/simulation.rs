//! The step loop: one simulation of one case, stage by stage.
//!
//! A step is a readable list of stages: release delayed clones → move (with wall hits, aperture
//! counting and radial reweighting) → compact → inject from the reservoirs → record the flux.
//! The move runs in parallel over fixed chunks of [`CHUNK`] molecules, each with its own random
//! stream keyed by (seed, step, chunk); chunk results are merged in chunk order, so a run is
//! bit-identical for any number of threads. Invariants: after every step no molecule lies
//! inside a wall or outside the domain, and the particle balance
//! `initial + injected + released − left − deleted = population` holds exactly.

use crate::flux::{Crossings, FluxHistory};
use crate::geometry::SurfaceRole;
use crate::monitor::{batch_means, BatchEstimate, StopReason};
use crate::mover::{advance, Fate, Flight};
use crate::numerics::{Plan, CHUNK};
use crate::particles::{Molecules, DEAD};
use crate::streams::{stream, Stage};
use crate::weights::CLONE_DELAY_MAX;
use rand::Rng;
use rayon::prelude::*;
use std::time::{Duration, Instant};

/// A clone waiting for release (see `weights`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PendingClone {
    pub flight: Flight,
    pub species: u8,
    /// Step at whose start the clone enters the domain.
    pub release_step: u64,
}

/// Particle bookkeeping since the start of the run (simulated molecules).
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct Balance {
    pub initial: u64,
    pub injected: u64,
    pub clones_released: u64,
    pub left_upstream: u64,
    pub left_downstream: u64,
    pub deleted_by_weighting: u64,
}

impl Balance {
    /// Population implied by the counters.
    pub fn expected_population(&self) -> u64 {
        self.initial + self.injected + self.clones_released
            - self.left_upstream
            - self.left_downstream
            - self.deleted_by_weighting
    }
}

/// What one chunk of the move stage reports.
struct ChunkReport {
    crossings: Crossings,
    left_up: u64,
    left_down: u64,
    deleted: u64,
    clones: Vec<PendingClone>,
}

/// A simulation in progress.
pub struct Simulation {
    pub plan: Plan,
    pub molecules: Molecules,
    pub pending: Vec<PendingClone>,
    /// Steps completed.
    pub step: u64,
    pub flux: FluxHistory,
    pub balance: Balance,
    /// Sum over steps of the molecules moved (particle-steps).
    pub particle_steps: u64,
}

impl Simulation {
    /// Start a simulation: fill the domain with equilibrium gas at the reservoir states.
    pub fn new(plan: Plan) -> Simulation {
        let mut molecules = Molecules::default();
        fill(&plan, &mut molecules);
        let species = plan.masses.len();
        let balance = Balance {
            initial: molecules.len() as u64,
            ..Balance::default()
        };
        Simulation {
            plan,
            molecules,
            pending: Vec::new(),
            step: 0,
            flux: FluxHistory::new(species),
            balance,
            particle_steps: 0,
        }
    }

    /// Advance by one time step.
    pub fn step(&mut self) {
        self.release_clones();
        let mut crossings = self.move_molecules();
        self.molecules.compact();
        self.inject(&mut crossings);
        self.flux
            .record(&crossings, self.plan.fnum, &self.plan.masses);
        self.step += 1;
    }

    /// Stage: clones whose delay has passed join the domain.
    fn release_clones(&mut self) {
        let step = self.step;
        let mut released = 0;
        let mol = &mut self.molecules;
        self.pending.retain(|c| {
            if c.release_step <= step {
                mol.push(&c.flight, c.species);
                released += 1;
                false
            } else {
                true
            }
        });
        self.balance.clones_released += released;
    }

    /// Stage: move every molecule for one step, in parallel over fixed chunks.
    fn move_molecules(&mut self) -> Crossings {
        let plan = &self.plan;
        let step = self.step;
        let seed = plan.case.solver.seed;
        let nspecies = plan.masses.len();
        let m = &mut self.molecules;
        self.particle_steps += m.len() as u64;
        let reports: Vec<ChunkReport> =
            m.z.par_chunks_mut(CHUNK)
                .zip(m.r.par_chunks_mut(CHUNK))
                .zip(m.vz.par_chunks_mut(CHUNK))
                .zip(m.vr.par_chunks_mut(CHUNK))
                .zip(m.vt.par_chunks_mut(CHUNK))
                .zip(m.species.par_chunks_mut(CHUNK))
                .enumerate()
                .map(|(ci, (((((z, r), vz), vr), vt), sp))| {
                    let mut rng = stream(seed, step, Stage::Move, ci as u64);
                    let mut rep = ChunkReport {
                        crossings: Crossings::new(nspecies),
                        left_up: 0,
                        left_down: 0,
                        deleted: 0,
                        clones: Vec::new(),
                    };
                    for i in 0..z.len() {
                        let s = sp[i] as usize;
                        let mut f = Flight {
                            z: z[i],
                            r: r[i],
                            vz: vz[i],
                            vr: vr[i],
                            vt: vt[i],
                        };
                        match fly_one(plan, step, &mut f, s, plan.dt, None, &mut rng, &mut rep) {
                            Fate::Stays => {
                                z[i] = f.z;
                                r[i] = f.r;
                                vz[i] = f.vz;
                                vr[i] = f.vr;
                                vt[i] = f.vt;
                            }
                            Fate::Left(_) => sp[i] = DEAD,
                        }
                    }
                    rep
                })
                .collect();
        let mut total = Crossings::new(nspecies);
        for rep in reports {
            total.merge(&rep.crossings);
            self.balance.left_upstream += rep.left_up;
            self.balance.left_downstream += rep.left_down;
            self.balance.deleted_by_weighting += rep.deleted;
            self.pending.extend(rep.clones);
        }
        total
    }

    /// Stage: molecules entering from the reservoirs fly a random fraction of the step.
    fn inject(&mut self, crossings: &mut Crossings) {
        let plan = &self.plan;
        let step = self.step;
        let seed = plan.case.solver.seed;
        let mut rep = ChunkReport {
            crossings: Crossings::new(plan.masses.len()),
            left_up: 0,
            left_down: 0,
            deleted: 0,
            clones: Vec::new(),
        };
        let mut injected = 0;
        for (ei, el) in plan.inflow.iter().enumerate() {
            let mut rng = stream(seed, step, Stage::Inject, ei as u64);
            let n = el.count(&mut rng);
            injected += n;
            let s = el.species as usize;
            for _ in 0..n {
                let mut f = el.sample(&mut rng);
                let t = plan.dt * rng.random::<f64>();
                if fly_one(
                    plan,
                    step,
                    &mut f,
                    s,
                    t,
                    Some(el.surface),
                    &mut rng,
                    &mut rep,
                ) == Fate::Stays
                {
                    // `fly_one` may already have counted this molecule as deleted by weighting.
                    self.molecules.push(&f, el.species);
                }
            }
        }
        // Molecules that died during their entry flight were never pushed: count them as
        // injected and then left/deleted, so the balance still closes.
        self.balance.injected += injected;
        self.balance.left_upstream += rep.left_up;
        self.balance.left_downstream += rep.left_down;
        self.balance.deleted_by_weighting += rep.deleted;
        self.pending.extend(rep.clones);
        crossings.merge(&rep.crossings);
    }

    /// Simulated molecules in the domain plus clones waiting for release.
    pub fn population(&self) -> u64 {
        self.molecules.len() as u64
    }

    /// Flow-rate estimate from the steps after start-up (None until enough steps).
    pub fn mass_flow_estimate(&self) -> Option<BatchEstimate> {
        let start = (self.plan.startup_steps as usize).min(self.flux.steps());
        batch_means(&self.flux.mass_per_step[start..]).map(|mut e| {
            e.mean /= self.plan.dt;
            e.half_width /= self.plan.dt;
            e
        })
    }

    /// Run until the stopping rule says so. `report` is called about once per `report_every`
    /// of wall time with the current state.
    pub fn run(
        &mut self,
        report_every: Duration,
        mut report: impl FnMut(&Simulation, Option<BatchEstimate>, Duration),
    ) -> RunOutcome {
        let solver = self.plan.case.solver;
        let started = Instant::now();
        let mut last_report = Instant::now();
        let check_every = 16;
        let stop = loop {
            self.step();
            let elapsed = started.elapsed();
            let sampling = self.step.saturating_sub(self.plan.startup_steps);
            let mut estimate = None;
            if self.step.is_multiple_of(check_every) || last_report.elapsed() >= report_every {
                estimate = self.mass_flow_estimate();
                // Trust the interval only after enough sampling steps (≥ 20 per batch), so the
                // stop is not triggered by an early lucky batch spread.
                if let Some(e) = estimate {
                    if sampling >= 640 && e.relative() <= solver.target_uncertainty {
                        break StopReason::TargetUncertainty;
                    }
                }
            }
            if last_report.elapsed() >= report_every {
                report(self, estimate, elapsed);
                last_report = Instant::now();
            }
            if matches!(solver.max_steps, Some(n) if self.step >= n) {
                break StopReason::MaxSteps;
            }
            if elapsed.as_secs_f64() >= solver.max_wall_time {
                break StopReason::MaxWallTime;
            }
        };
        RunOutcome {
            stop,
            wall_time: started.elapsed(),
        }
    }
}

/// How a run ended.
#[derive(Debug, Clone, Copy)]
pub struct RunOutcome {
    pub stop: StopReason,
    pub wall_time: Duration,
}

/// Fly one molecule of species `s` for time `dt`, count aperture crossings with its weight and
/// reweight it if it changed radial band (see `weights`). Returns its fate; a molecule deleted
/// by reweighting is reported as `Fate::Left(SurfaceRole::Wall)` and counted in `rep.deleted`.
#[allow(clippy::too_many_arguments)]
#[inline]
fn fly_one<R: Rng>(
    plan: &Plan,
    step: u64,
    f: &mut Flight,
    s: usize,
    dt: f64,
    last: Option<usize>,
    rng: &mut R,
    rep: &mut ChunkReport,
) -> Fate {
    let w = &plan.weights;
    let band0 = w.band(f.r);
    let weight = w.factor[band0];
    let crossings = &mut rep.crossings;
    let fate = advance(
        &plan.geometry,
        &plan.wall[s],
        f,
        dt,
        last,
        plan.z_count,
        rng,
        &mut |sign, _r| crossings.add(s, sign, weight),
    );
    match fate {
        Fate::Left(SurfaceRole::UpstreamBoundary) => {
            rep.left_up += 1;
            return fate;
        }
        Fate::Left(_) => {
            rep.left_down += 1;
            return fate;
        }
        Fate::Stays => {}
    }
    let band1 = w.band(f.r);
    if band1 != band0 {
        let ratio = weight / w.factor[band1];
        if ratio < 1.0 {
            if rng.random::<f64>() >= ratio {
                rep.deleted += 1;
                return Fate::Left(SurfaceRole::Wall);
            }
        } else {
            let extra = ratio - 1.0;
            let mut copies = extra.floor() as u32;
            if rng.random::<f64>() < extra - extra.floor() {
                copies += 1;
            }
            for _ in 0..copies {
                let delay = rng.random_range(1..=CLONE_DELAY_MAX) as u64;
                rep.clones.push(PendingClone {
                    flight: *f,
                    species: s as u8,
                    release_step: step + delay,
                });
            }
        }
    }
    Fate::Stays
}

/// Initial fill: equilibrium gas at the upstream state upstream and in the bore, at the
/// downstream state downstream, per radial band with the band's weight.
fn fill(plan: &Plan, mol: &mut Molecules) {
    let g = &plan.geometry;
    let w = &plan.weights;
    let a = g.radius;
    let t1 = plan.case.upstream.temperature;
    let t2 = plan.case.downstream.temperature;
    // (z range, temperature, densities, radius limit)
    let regions = [
        (g.z_min, 0.0, t1, &plan.upstream_density, g.r_max),
        (0.0, g.thickness, t1, &plan.upstream_density, a),
        (g.thickness, g.z_max, t2, &plan.downstream_density, g.r_max),
    ];
    let mut index = 0u64;
    for (z_lo, z_hi, temp, dens, r_lim) in regions {
        if z_hi <= z_lo {
            continue;
        }
        for j in 0..w.bands {
            let (r_lo, r_hi) = w.band_edges(j);
            let (r_lo, r_hi) = (r_lo.min(r_lim), r_hi.min(r_lim));
            if r_hi <= r_lo {
                continue;
            }
            let volume = std::f64::consts::PI * (r_hi * r_hi - r_lo * r_lo) * (z_hi - z_lo);
            for (s, &n) in dens.iter().enumerate() {
                let mut rng = stream(plan.case.solver.seed, 0, Stage::Fill, index);
                index += 1;
                let expected = n * volume / (plan.fnum * w.factor[j]);
                let count =
                    expected.floor() as u64 + u64::from(rng.random::<f64>() < expected.fract());
                let sigma = crate::maxwell::sigma(temp, plan.masses[s]);
                mol.reserve(count as usize);
                for _ in 0..count {
                    let u: f64 = rng.random();
                    let r = (r_lo * r_lo + u * (r_hi * r_hi - r_lo * r_lo)).sqrt();
                    let z = z_lo + rng.random::<f64>() * (z_hi - z_lo);
                    let v = crate::maxwell::velocity(sigma, &mut rng);
                    mol.push(
                        &Flight {
                            z,
                            r,
                            vz: v[2],
                            vr: v[0],
                            vt: v[1],
                        },
                        s as u8,
                    );
                }
            }
        }
    }
}
