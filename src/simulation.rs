//! The step loop: one simulation of one case, stage by stage.
//!
//! A step is a readable list of stages: move (wall hits, aperture counting, radial
//! reweighting; in free-molecular mode each chunk's survivors are compacted to its start, in
//! DSMC mode each molecule's sort key is written) → close the gaps between chunks
//! (free-molecular mode) → inject from the reservoirs → release delayed clones → sort by cell
//! (DSMC mode; the sort also drops the molecules that left) → collide → record the flux →
//! sample the fields (after start-up). The move runs in parallel over fixed
//! chunks of [`CHUNK`] molecules, the collisions and the sampling over fixed blocks of cells,
//! each work unit with its own random stream keyed by (seed, step, stage, unit); results are
//! merged in unit order, so a run is bit-identical for any number of threads. The sort is a
//! stable counting sort, whose result is unique however it is split between threads. The
//! parallel stages run on the simulation's [`Crew`], whose workers stay awake between stages.
//! Buffers that scale with the molecules (sort keys, one spare column per element type,
//! partial field sums) live in the simulation and are reused from step to
//! step. Invariants: after every step
//! no molecule lies inside a wall or outside the domain, and the particle balance
//! `initial + injected + released − left − deleted = population` holds exactly.

use crate::collide::{collide_cell, CellMolecules, CollisionStats, Scratch};
use crate::crew::Crew;
use crate::flux::{Crossings, FluxHistory};
use crate::geometry::SurfaceRole;
use crate::monitor::{batch_means, BatchEstimate, StopReason};
use crate::mover::{advance, Fate, Flight};
use crate::numerics::{Plan, CHUNK};
use crate::particles::{make_room, Molecules, Stored, DEAD};
use crate::sample::FieldSampler;
use crate::streams::{stream, Stage};
use crate::weights::{CloneQueue, CLONE_DELAY_MAX};
use rand::Rng;
use std::time::{Duration, Instant};

/// Cells per collision and sampling work block (fixed, so results do not depend on the thread
/// count).
pub const CELL_BLOCK: usize = 64;

/// Molecules per work block of the free-molecular field sampling (fixed, like [`CHUNK`]; each
/// block has partial sums over all cells, so blocks are larger than the move's chunks).
pub const SAMPLE_BLOCK: usize = 4 * CHUNK;

/// Molecules per work unit (and random stream) of the DSMC mode's move (fixed: results must
/// not depend on threads). The last unit of the move leaves one thread idle while the other
/// finishes it: with units of `CHUNK` = 2048 molecules that idle was 38 µs of thread time per
/// step of the δ ≈ 1 benchmark on two threads, with 1024 about 7 µs (probed in the crew). The
/// free-molecular mode keeps `CHUNK`: its move also closes the gaps chunk by chunk, and its
/// benchmark was 5 % slower with 1024-molecule chunks.
pub const DSMC_MOVE_UNIT: usize = 1024;

pub use crate::weights::PendingClone;

/// Particle bookkeeping since the start of the run (simulated molecules).
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize, serde::Deserialize)]
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

/// What one work unit of the move or inflow stage reports.
struct MoveReport {
    crossings: Crossings,
    left_up: u64,
    left_down: u64,
    deleted: u64,
    clones: Vec<PendingClone>,
    /// Molecules of the chunk still in the domain (the move stage).
    kept: usize,
}

impl MoveReport {
    fn new(species: usize) -> Self {
        MoveReport {
            crossings: Crossings::new(species),
            left_up: 0,
            left_down: 0,
            deleted: 0,
            clones: Vec::new(),
            kept: 0,
        }
    }
}

/// What one inflow element produced in a step: molecules drawn, survivors (flight, rotational
/// energy, species) and the report of their entry flights.
type InflowUnit = (u64, Vec<Born>, MoveReport);

/// A molecule that survived its entry flight: flight, rotational energy, species.
type Born = (Flight, f64, u8);

/// Buffers of the sort, reused from step to step (never part of the saved state).
#[derive(Default)]
struct SortScratch {
    /// Sort key of each molecule (`DEAD_KEY` for the molecules to drop), held as the bit
    /// pattern of a `Stored` (`from_bits`/`to_bits` round-trip every pattern) so that, once
    /// spent, the buffer is the spare column of the 4-byte gathers.
    keys: Vec<Stored>,
    /// Per-block key counts, then per-block write cursors (block-major).
    counts: Vec<u32>,
    /// The one spare column per element type that a column is reordered into.
    f64_column: Vec<f64>,
    stored_column: Vec<Stored>,
    u8_column: Vec<u8>,
}

/// Wall time spent in each stage of the step (for the benchmark and the run summary).
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct StageTimes {
    pub release_s: f64,
    /// The move's job, which also draws a small inflow (under `INJECT_UNIT` molecules).
    pub move_s: f64,
    pub compact_s: f64,
    /// The inflow's counts and bookkeeping, and the drawing of a large inflow.
    pub inject_s: f64,
    pub sort_s: f64,
    pub collide_s: f64,
    pub record_s: f64,
    pub sample_s: f64,
}

/// Time one stage into `acc`.
#[inline]
fn timed<T>(acc: &mut f64, f: impl FnOnce() -> T) -> T {
    let t0 = Instant::now();
    let out = f();
    *acc += t0.elapsed().as_secs_f64();
    out
}

/// Periodic checkpoint: interval and the function that saves one.
pub type CheckpointHook = (Duration, Box<dyn FnMut(&Simulation) + Send>);

/// The state a checkpoint saves: everything that evolves, nothing derived from the case.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SavedState {
    pub step: u64,
    pub balance: Balance,
    pub particle_steps: u64,
    pub collision_stats: CollisionStats,
    pub sampled_cell_molecules: u64,
    pub sampled_upstream_molecules: u64,
    pub flux: FluxHistory,
    pub pending: Vec<PendingClone>,
    /// Wall time of every invocation so far, s (0 in checkpoints written before it was kept).
    #[serde(default)]
    pub wall_time_s: f64,
    #[serde(skip)]
    pub molecules: Molecules,
    #[serde(skip)]
    pub sigma_cr_max: Vec<f64>,
    #[serde(skip)]
    pub fields: FieldSampler,
}

/// A simulation in progress.
pub struct Simulation {
    pub plan: Plan,
    pub molecules: Molecules,
    pub pending: CloneQueue,
    /// Steps completed.
    pub step: u64,
    pub flux: FluxHistory,
    pub balance: Balance,
    /// Sum over steps of the molecules moved (particle-steps).
    pub particle_steps: u64,
    /// Wall time spent in `run` since the start, over every invocation (resumes add up), s.
    pub wall_time_s: f64,
    /// (σ c_r)_max per cell and species pair (cell · S² + p · S + q).
    pub sigma_cr_max: Vec<f64>,
    /// Collision counters since the end of start-up.
    pub collision_stats: CollisionStats,
    /// Molecule-steps counted in cells during sampling (for molecules per cell).
    pub sampled_cell_molecules: u64,
    /// Molecule-steps counted in the upstream cells (z < 0) during sampling.
    pub sampled_upstream_molecules: u64,
    /// Start offsets of each (cell, subcell) in the sorted molecule arrays (length keys + 1).
    pub cell_offsets: Vec<u32>,
    /// Time per stage since the start.
    pub times: StageTimes,
    /// Per-cell samples accumulated after start-up.
    pub fields: FieldSampler,
    /// Set (by a signal handler) to stop the run at the end of the current step.
    pub interrupt: Option<std::sync::Arc<std::sync::atomic::AtomicBool>>,
    /// Called about every `.0` of wall time with the simulation, to save a checkpoint.
    pub checkpoint_hook: Option<CheckpointHook>,
    sort: SortScratch,
    /// Partial field sums of the unsorted (free-molecular) sampling, reused from step to step.
    sample_partial: Vec<f64>,
    /// Survivors per move chunk, compacted to the chunk's start (free-molecular mode).
    kept: Vec<usize>,
    /// Leading molecules whose sort keys the move has written (DSMC mode).
    keyed: usize,
    /// Survivor buffers of the inflow units, reused from step to step: allocated afresh, a
    /// free-molecular step's 60 units of 57 kB each made the allocator return and re-fault
    /// pages every step (2–4 % of workload (a) in page faults and kernel time).
    inflow_buffers: Vec<Vec<Born>>,
    /// The threads that run the parallel stages (as many as the rayon pool the simulation
    /// was built in).
    crew: Crew,
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
        let fields = FieldSampler::new(plan.grid.cells(), species);
        let sigma_cr_max = if plan.collisions.is_some() {
            let mut v = Vec::with_capacity(plan.grid.cells() * species * species);
            for _ in 0..plan.grid.cells() {
                v.extend_from_slice(&plan.initial_sigma_cr_max);
            }
            v
        } else {
            Vec::new()
        };
        Simulation {
            plan,
            molecules,
            pending: CloneQueue::default(),
            step: 0,
            flux: FluxHistory::new(species),
            balance,
            particle_steps: 0,
            wall_time_s: 0.0,
            sigma_cr_max,
            collision_stats: CollisionStats::default(),
            sampled_cell_molecules: 0,
            sampled_upstream_molecules: 0,
            cell_offsets: Vec::new(),
            times: StageTimes::default(),
            fields,
            interrupt: None,
            checkpoint_hook: None,
            sort: SortScratch::default(),
            sample_partial: Vec::new(),
            kept: Vec::new(),
            keyed: 0,
            inflow_buffers: Vec::new(),
            crew: Crew::new(rayon::current_num_threads()),
        }
    }

    /// The evolving state, for a checkpoint.
    pub fn saved_state(&self) -> SavedState {
        SavedState {
            step: self.step,
            balance: self.balance,
            particle_steps: self.particle_steps,
            collision_stats: self.collision_stats,
            sampled_cell_molecules: self.sampled_cell_molecules,
            sampled_upstream_molecules: self.sampled_upstream_molecules,
            flux: self.flux.clone(),
            pending: self.pending.to_vec(self.step),
            wall_time_s: self.wall_time_s,
            molecules: self.molecules.clone(),
            sigma_cr_max: self.sigma_cr_max.clone(),
            fields: self.fields.clone(),
        }
    }

    /// Continue a simulation from a saved state (the plan must come from the same case).
    /// Random streams are keyed by the step number, so the continuation is bit-identical to
    /// an uninterrupted run.
    pub fn resume(plan: Plan, s: SavedState) -> Simulation {
        let mut sim = Simulation::new(plan);
        sim.step = s.step;
        sim.balance = s.balance;
        sim.particle_steps = s.particle_steps;
        sim.collision_stats = s.collision_stats;
        sim.sampled_cell_molecules = s.sampled_cell_molecules;
        sim.sampled_upstream_molecules = s.sampled_upstream_molecules;
        sim.flux = s.flux;
        sim.pending = CloneQueue::from_saved(s.step, s.pending);
        sim.wall_time_s = s.wall_time_s;
        sim.molecules = s.molecules;
        sim.sigma_cr_max = s.sigma_cr_max;
        sim.fields = s.fields;
        sim
    }

    /// Advance by one time step.
    pub fn step(&mut self) {
        let mut t = self.times;
        // The inflow does not depend on the move (its molecules fly their own fraction of the
        // step), so a small one is drawn inside the move's job, where its few tens of
        // microseconds fill the job's tail instead of running alone on one thread.
        let inflow = timed(&mut t.inject_s, || self.inflow_units());
        let small = inflow.iter().map(|u| u.2).sum::<u64>() < INJECT_UNIT;
        // One reused survivor buffer per unit (they come back in `absorb_inflow`).
        let pool = &mut self.inflow_buffers;
        let mut buffers = pool.split_off(pool.len() - inflow.len().min(pool.len()));
        buffers.resize_with(inflow.len(), Vec::new);
        let (mut crossings, drawn) = timed(&mut t.move_s, || {
            self.move_molecules(if small { &inflow[..] } else { &[] }, &mut buffers)
        });
        // With collisions the sort drops the dead molecules, after the newcomers joined.
        if self.plan.collisions.is_none() {
            let (m, kept) = (&mut self.molecules, &self.kept);
            timed(&mut t.compact_s, || m.close_gaps(CHUNK, kept));
        }
        timed(&mut t.inject_s, || {
            let drawn = if small {
                drawn
            } else {
                self.draw_inflow(inflow, &mut buffers)
            };
            self.absorb_inflow(drawn, &mut crossings)
        });
        // Clones join at the end of their release step, where the time-shifted copy of the
        // original sits at the cloning position; they fly from the next step on.
        timed(&mut t.release_s, || self.release_clones());
        if self.plan.collisions.is_some() {
            timed(&mut t.sort_s, || self.sort_by_cell());
            timed(&mut t.collide_s, || self.collide());
        }
        let (fnum, masses) = (self.plan.fnum, &self.plan.masses);
        timed(&mut t.record_s, || {
            self.flux.record(&crossings, fnum, masses)
        });
        if self.sampling() {
            self.flux.record_profiles(&crossings);
        }
        self.flux
            .population_per_step
            .push(self.molecules.len() as u64);
        if self.sampling() {
            let (plan, m, f) = (&self.plan, &self.molecules, &mut self.fields);
            let (offsets, partial) = (&self.cell_offsets, &mut self.sample_partial);
            let crew = &self.crew;
            timed(&mut t.sample_s, || {
                if plan.collisions.is_some() {
                    f.sample_sorted(crew, plan, m, offsets, plan.grid.subcells(), CELL_BLOCK)
                } else {
                    let cell_of = |i: usize| plan.grid.cell(m.z[i], m.r[i]);
                    f.sample(crew, plan, m, cell_of, SAMPLE_BLOCK, partial)
                }
            });
        }
        self.times = t;
        self.step += 1;
    }

    /// True once the start-up steps are over.
    pub fn sampling(&self) -> bool {
        self.step >= self.plan.startup_steps
    }

    /// Stage: clones whose delay has passed join the domain (at the end of the step, so that
    /// they are present in this step's collisions and samples at the position where they were
    /// made, exactly as a time-shifted copy of the original; released before the move, a clone
    /// would skip that snapshot and bias the density low where clones are made).
    fn release_clones(&mut self) {
        let step = self.step;
        let due = self.pending.take_due(step);
        let mol = &mut self.molecules;
        mol.reserve(due.len());
        for c in &due {
            mol.push(&c.flight, c.erot, c.species);
        }
        self.balance.clones_released += due.len() as u64;
        self.pending.recycle(step, due);
    }

    /// Stage: move every molecule for one step, in parallel over fixed chunks; the `inflow`
    /// units given are drawn in the same job (one work item after the chunks). Returns the
    /// crossings of the move and the drawn inflow units.
    fn move_molecules(
        &mut self,
        inflow: &[InflowPlan],
        buffers: &mut Vec<Vec<Born>>,
    ) -> (Crossings, Vec<InflowUnit>) {
        let plan = &self.plan;
        let step = self.step;
        let seed = plan.case.solver.seed;
        let nspecies = plan.masses.len();
        let compacting = plan.collisions.is_none();
        let grid = &plan.grid;
        let (rows, one_subcell) = (grid.r.len(), grid.sub == 1);
        let m = &mut self.molecules;
        self.particle_steps += m.len() as u64;
        // With collisions the move also writes each molecule's sort key: it knows the new
        // radial row already (the weight row is the grid row), which saves the sort a pass and
        // a lookup. The keys array has the molecules' length in both modes (zip stops at the
        // shortest), but only the DSMC mode writes it.
        let keys = &mut self.sort.keys;
        let grow = m.len().saturating_sub(keys.len());
        make_room(keys, grow);
        keys.resize(m.len(), 0.0);
        self.keyed = m.len();
        let unit = if compacting { CHUNK } else { DSMC_MOVE_UNIT };
        let chunks =
            m.z.chunks_mut(unit)
                .zip(m.r.chunks_mut(unit))
                .zip(m.vz.chunks_mut(unit))
                .zip(m.vr.chunks_mut(unit))
                .zip(m.vt.chunks_mut(unit))
                .zip(m.erot.chunks_mut(unit))
                .zip(m.species.chunks_mut(unit))
                .zip(keys.chunks_mut(unit));
        let items: Vec<_> = chunks
            .map(MoveItem::Chunk)
            .chain((!inflow.is_empty()).then(|| MoveItem::Inflow(buffers.split_off(0))))
            .collect();
        let outcomes: Vec<MoveOutcome> = self.crew.map(items, |ci, item| {
            let (((((((z, r), vz), vr), vt), erot), sp), key) = match item {
                MoveItem::Chunk(c) => c,
                MoveItem::Inflow(buffers) => {
                    let drawn = inflow
                        .iter()
                        .zip(buffers)
                        .map(|(&u, born)| inflow_unit(plan, step, u, born));
                    return MoveOutcome::Inflow(drawn.collect());
                }
            };
            MoveOutcome::Chunk({
                let mut rng = stream(seed, step, Stage::Move, ci as u64);
                let mut rep = MoveReport::new(nspecies);
                // Survivors are written to `w` ≤ i: compacted inside the chunk while
                // moving (free-molecular mode), or left in place and the dead marked (DSMC
                // mode, where the sort drops them).
                let mut w = 0;
                for i in 0..z.len() {
                    let s = sp[i] as usize;
                    let mut f = Flight {
                        z: z[i],
                        r: r[i],
                        vz: f64::from(vz[i]),
                        vr: f64::from(vr[i]),
                        vt: f64::from(vt[i]),
                    };
                    let mut e = f64::from(erot[i]);
                    let mut row = 0;
                    match fly_one(
                        plan, step, &mut f, &mut e, s, plan.dt, None, &mut rng, &mut rep, &mut row,
                    ) {
                        Fate::Stays => {
                            if !compacting {
                                key[i] = Stored::from_bits(if one_subcell {
                                    (grid.z.locate(f.z).0 * rows + row) as u32
                                } else {
                                    grid.key(f.z, f.r) as u32
                                });
                            }
                            let j = if compacting { w } else { i };
                            z[j] = f.z;
                            r[j] = f.r;
                            vz[j] = f.vz as Stored;
                            vr[j] = f.vr as Stored;
                            vt[j] = f.vt as Stored;
                            erot[j] = e as Stored;
                            sp[j] = s as u8;
                            w += 1;
                        }
                        Fate::Left(_) => {
                            if !compacting {
                                sp[i] = DEAD;
                                key[i] = Stored::from_bits(DEAD_KEY);
                            }
                        }
                    }
                }
                rep.kept = w;
                rep
            })
        });
        let mut total = Crossings::new(nspecies);
        let mut drawn = Vec::new();
        self.kept.clear();
        for outcome in outcomes {
            let rep = match outcome {
                MoveOutcome::Chunk(rep) => rep,
                MoveOutcome::Inflow(units) => {
                    drawn = units;
                    continue;
                }
            };
            self.kept.push(rep.kept);
            total.merge(&rep.crossings);
            self.balance.left_upstream += rep.left_up;
            self.balance.left_downstream += rep.left_down;
            self.balance.deleted_by_weighting += rep.deleted;
            self.pending.extend(step, rep.clones);
        }
        (total, drawn)
    }

    /// The inflow's work units of this step (stage: molecules entering from the reservoirs
    /// fly a random fraction of the step).
    fn inflow_units(&self) -> Vec<InflowPlan> {
        let plan = &self.plan;
        let step = self.step;
        let seed = plan.case.solver.seed;
        // Each element draws its count from its own stream; its molecules are then split into
        // fixed units of at most INJECT_UNIT, each with its own stream (element, unit). The
        // split depends only on the counts, so the outcome does not depend on the thread
        // count, and an element that injects most of the molecules (the outer cylinder of a
        // small free-molecular domain) is shared between threads.
        let mut units = Vec::new();
        for (ei, el) in plan.inflow.iter().enumerate() {
            let mut left = el.count(&mut stream(seed, step, Stage::InjectCount, ei as u64));
            let mut k = 0u64;
            while left > 0 {
                let n = left.min(INJECT_UNIT);
                units.push((ei, k, n));
                left -= n;
                k += 1;
            }
        }
        units
    }

    /// Draw a large inflow's units in parallel (a small one is drawn in the move's job).
    fn draw_inflow(&self, units: Vec<InflowPlan>, buffers: &mut Vec<Vec<Born>>) -> Vec<InflowUnit> {
        let (plan, step) = (&self.plan, self.step);
        let items: Vec<_> = units.into_iter().zip(buffers.drain(..)).collect();
        self.crew
            .map(items, |_, (u, born)| inflow_unit(plan, step, u, born))
    }

    /// Book the drawn inflow units (in unit order) and append their survivors.
    fn absorb_inflow(&mut self, units: Vec<InflowUnit>, crossings: &mut Crossings) {
        for (n, _, rep) in &units {
            self.balance.injected += n;
            self.balance.left_upstream += rep.left_up;
            self.balance.left_downstream += rep.left_down;
            self.balance.deleted_by_weighting += rep.deleted;
            self.pending.extend(self.step, rep.clones.iter().copied());
            crossings.merge(&rep.crossings);
        }
        append(&self.crew, &mut self.molecules, &units);
        self.inflow_buffers
            .extend(units.into_iter().map(|(_, born, _)| born));
    }

    /// Stage: stable counting sort of the molecules by (cell, subcell), dropping the molecules
    /// marked dead (this is the compaction of the DSMC mode). Every cell's molecules end up
    /// contiguous, ordered by subcell, and in their previous relative order inside a subcell.
    /// The move has written the keys of the molecules it moved; only newcomers are keyed here.
    ///
    /// A stable sort has exactly one result, so the split into sort blocks (one per thread)
    /// cannot change it. The permutation is applied column by column, each a gather into one
    /// reused scratch column per element type instead of a second copy of every array (that
    /// keeps the resident memory near the arrays' own footprint); a gather writes its output
    /// in contiguous blocks, so no two threads write the same cache line.
    fn sort_by_cell(&mut self) {
        let grid = &self.plan.grid;
        let nkeys = grid.cells() * grid.subcells();
        let m = &mut self.molecules;
        let n = m.len();
        let s = &mut self.sort;
        let crew = &self.crew;
        let grow = n.saturating_sub(s.keys.len());
        make_room(&mut s.keys, grow);
        s.keys.resize(n, 0.0);
        // The move keyed the molecules it moved; the ones that joined since need keys.
        let keyed = self.keyed.min(n);
        let key_of = |k: &mut [Stored], z: &[f64], r: &[f64], sp: &[u8]| {
            for i in 0..k.len() {
                k[i] = Stored::from_bits(if sp[i] == DEAD {
                    DEAD_KEY
                } else {
                    grid.key(z[i], r[i]) as u32
                });
            }
        };
        // Usually a few hundred newcomers: not worth waking the other threads.
        if n - keyed <= CHUNK {
            key_of(
                &mut s.keys[keyed..],
                &m.z[keyed..],
                &m.r[keyed..],
                &m.species[keyed..],
            );
        } else {
            let items: Vec<_> = s.keys[keyed..]
                .chunks_mut(CHUNK)
                .zip(m.z[keyed..].chunks(CHUNK))
                .zip(m.r[keyed..].chunks(CHUNK))
                .zip(m.species[keyed..].chunks(CHUNK))
                .collect();
            crew.for_each(items, |_, (((k, z), r), sp)| key_of(k, z, r, sp));
        }
        // Source blocks, two per thread: per-block key counts, turned into per-block write
        // cursors, then each block writes the source index of each of its molecules at its
        // cursor (the permutation: sorted position → molecule). The molecules come sorted from
        // the last step and move less than a cell per step, so block b's molecules land in
        // about the b-th part of the permutation: the threads' writes meet only near their
        // share's boundary, and the crew gives thread t the same share in every stage.
        // A thread walks its two blocks side by side: consecutive molecules mostly share a key,
        // and one block's counter increments then wait on each other through memory; two
        // blocks give two independent chains.
        let pairs = crew.threads().clamp(1, n.div_ceil(2 * CHUNK).max(1));
        let parts = 2 * pairs;
        let block_len = n.div_ceil(parts).max(1);
        s.counts.clear();
        s.counts.resize(parts * nkeys, 0);
        let keys = &s.keys;
        let items = block_pairs(&mut s.counts, keys, nkeys, block_len);
        crew.for_each(items, |_, ((c0, c1), (k0, k1))| {
            let count = |c: &mut [u32], k: Stored| {
                let k = k.to_bits();
                if k != DEAD_KEY {
                    c[k as usize] += 1;
                }
            };
            for (&a, &b) in k0.iter().zip(k1) {
                count(c0, a);
                count(c1, b);
            }
            for &a in &k0[k1.len()..] {
                count(c0, a);
            }
        });
        // Offsets: the key totals, summed block by block, then a running sum. Cursors, from
        // the last block back: block b starts each key where block b + 1 starts less its own
        // count, and the last block where the next key starts. (Whole-slice passes: the
        // per-key loop over blocks was a third of the step's serial time on two threads.)
        let off = &mut self.cell_offsets;
        off.clear();
        off.resize(nkeys + 1, 0);
        for c in s.counts.chunks(nkeys) {
            for (o, &c) in off[1..].iter_mut().zip(c) {
                *o += c;
            }
        }
        let mut pos = 0u32;
        for o in off.iter_mut() {
            pos += *o;
            *o = pos;
        }
        for b in (0..parts).rev() {
            let (lower, upper) = s.counts.split_at_mut((b + 1) * nkeys);
            let next = if b + 1 == parts {
                &off[1..]
            } else {
                &upper[..nkeys]
            };
            for (c, &n) in lower[b * nkeys..].iter_mut().zip(next) {
                *c = n - *c;
            }
        }
        let alive = pos as usize;
        // The permutation has no array of its own (that would cost 4 B per molecule): it is
        // written into the spare 4-byte column, each index as the bit pattern of a `Stored`
        // (`from_bits`/`to_bits` round-trip every pattern; indices stay far below the NaN
        // patterns, asserted). The 4-byte columns are then gathered into the spent keys.
        assert!(
            alive < 0x7F80_0000,
            "too many molecules for the sort's index encoding"
        );
        let perm_bits = &mut s.stored_column;
        perm_bits.clear();
        make_room(perm_bits, alive);
        let out = SharedWrites(perm_bits.as_mut_ptr(), alive);
        let items = block_pairs(&mut s.counts, keys, nkeys, block_len);
        crew.for_each(items, |u, ((c0, c1), (k0, k1))| {
            let (base0, base1) = (2 * u * block_len, (2 * u + 1) * block_len);
            let place = |c: &mut [u32], i: usize, k: Stored| {
                let k = k.to_bits();
                if k != DEAD_KEY {
                    let c = &mut c[k as usize];
                    out.write(*c as usize, Stored::from_bits(i as u32));
                    *c += 1;
                }
            };
            for (j, (&a, &b)) in k0.iter().zip(k1).enumerate() {
                place(c0, base0 + j, a);
                place(c1, base1 + j, b);
            }
            for (j, &a) in k0.iter().enumerate().skip(k1.len()) {
                place(c0, base0 + j, a);
            }
        });
        // SAFETY: the cursors enumerate exactly the positions 0..alive, one per live molecule,
        // so the loop above wrote each of them once (within the capacity: make_room).
        unsafe { perm_bits.set_len(alive) };
        let perm = &s.stored_column[..];
        gather(crew, &mut m.z, &mut s.f64_column, perm);
        gather(crew, &mut m.r, &mut s.f64_column, perm);
        // A one-species gas has nothing to reorder in the species column: every live molecule
        // is species 0 (only the dead marks differ, and the sort drops those).
        if self.plan.masses.len() == 1 {
            m.species.clear();
            m.species.resize(alive, 0);
        } else {
            gather(crew, &mut m.species, &mut s.u8_column, perm);
        }
        // The keys are spent: their buffer is the 4-byte columns' spare (it ends up holding
        // one of the old columns, and the next move overwrites every key).
        gather(crew, &mut m.vz, &mut s.keys, perm);
        gather(crew, &mut m.vr, &mut s.keys, perm);
        gather(crew, &mut m.vt, &mut s.keys, perm);
        // Without rotational modes every rotational energy is exactly zero (drawn as 0 at
        // entry and at walls, never changed by a collision), so the column only shrinks.
        if self.plan.rot_dof.iter().all(|&d| d == 0) {
            debug_assert!(m.erot.iter().all(|&e| e == 0.0));
            m.erot.truncate(alive);
        } else {
            gather(crew, &mut m.erot, &mut s.keys, perm);
        }
    }

    /// Stage: NTC collisions in every cell, in parallel over fixed blocks of cells.
    fn collide(&mut self) {
        let plan = &self.plan;
        let Some(model) = &plan.collisions else {
            return;
        };
        let grid = &plan.grid;
        let ns = plan.masses.len();
        let ss = grid.subcells();
        let rows = grid.r.len();
        let cells = grid.cells();
        let offsets = &self.cell_offsets;
        let seed = plan.case.solver.seed;
        let step = self.step;
        // Split the sorted arrays into disjoint per-block slices.
        struct Block<'a> {
            first_cell: usize,
            z: &'a [f64],
            r: &'a [f64],
            vz: &'a mut [Stored],
            vr: &'a mut [Stored],
            vt: &'a mut [Stored],
            erot: &'a mut [Stored],
            species: &'a [u8],
            scm: &'a mut [f64],
        }
        let m = &mut self.molecules;
        let mut blocks = Vec::with_capacity(cells.div_ceil(CELL_BLOCK));
        let (mut z, mut r, mut vz, mut vr, mut vt, mut erot, mut sp, mut scm) = (
            &m.z[..],
            &m.r[..],
            &mut m.vz[..],
            &mut m.vr[..],
            &mut m.vt[..],
            &mut m.erot[..],
            &m.species[..],
            &mut self.sigma_cr_max[..],
        );
        for first in (0..cells).step_by(CELL_BLOCK) {
            let last = (first + CELL_BLOCK).min(cells);
            let len = (offsets[last * ss] - offsets[first * ss]) as usize;
            let (a, b) = z.split_at(len);
            z = b;
            let (ra, rb) = r.split_at(len);
            r = rb;
            let (vza, vzb) = std::mem::take(&mut vz).split_at_mut(len);
            vz = vzb;
            let (vra, vrb) = std::mem::take(&mut vr).split_at_mut(len);
            vr = vrb;
            let (vta, vtb) = std::mem::take(&mut vt).split_at_mut(len);
            vt = vtb;
            let (ea, eb) = std::mem::take(&mut erot).split_at_mut(len);
            erot = eb;
            let (sa, sb) = sp.split_at(len);
            sp = sb;
            let (ca, cb) = std::mem::take(&mut scm).split_at_mut((last - first) * ns * ns);
            scm = cb;
            blocks.push(Block {
                first_cell: first,
                z: a,
                r: ra,
                vz: vza,
                vr: vra,
                vt: vta,
                erot: ea,
                species: sa,
                scm: ca,
            });
        }
        let fnum = plan.fnum;
        let dt = plan.dt;
        let starts = crate::sample::thread_starts(
            offsets,
            CELL_BLOCK * ss,
            blocks.len(),
            self.crew.threads(),
        );
        let stats: Vec<CollisionStats> = self.crew.map_split(
            blocks,
            |t| starts[t],
            |_, b| {
                let mut rng = stream(
                    seed,
                    step,
                    Stage::Collide,
                    (b.first_cell / CELL_BLOCK) as u64,
                );
                let mut scratch = Scratch::default();
                let mut st = CollisionStats::default();
                let base = offsets[b.first_cell * ss] as usize;
                let Block {
                    z,
                    r,
                    vz,
                    vr,
                    vt,
                    erot,
                    species,
                    scm,
                    first_cell,
                } = b;
                let ncells = scm.len() / (ns * ns);
                let mut sub_offsets = vec![0u32; ss + 1];
                for k in 0..ncells {
                    let c = first_cell + k;
                    let lo = offsets[c * ss] as usize - base;
                    let hi = offsets[(c + 1) * ss] as usize - base;
                    if hi - lo < 2 {
                        continue;
                    }
                    for (s, o) in sub_offsets.iter_mut().enumerate() {
                        *o = offsets[c * ss + s] - offsets[c * ss];
                    }
                    let mut cell = CellMolecules {
                        z: &z[lo..hi],
                        r: &r[lo..hi],
                        vz: &mut vz[lo..hi],
                        vr: &mut vr[lo..hi],
                        vt: &mut vt[lo..hi],
                        erot: &mut erot[lo..hi],
                        species: &species[lo..hi],
                        sub_offsets: &sub_offsets,
                    };
                    let w = plan.weights.factor[c % rows];
                    collide_cell(
                        model,
                        &mut cell,
                        fnum * w,
                        plan.grid.volume[c],
                        dt,
                        &mut scm[k * ns * ns..(k + 1) * ns * ns],
                        &mut rng,
                        &mut scratch,
                        &mut st,
                    );
                }
                st
            },
        );
        if self.sampling() {
            for s in &stats {
                self.collision_stats.merge(s);
            }
            self.sampled_cell_molecules += self.molecules.len() as u64;
            // Upstream cells are the first axial zone, so they lead the sorted arrays.
            let up_cells = self.plan.grid.upstream_columns() * rows;
            self.sampled_upstream_molecules += self.cell_offsets[up_cells * ss] as u64;
        }
    }

    /// Heap bytes held by the per-molecule buffers: the molecule arrays and the sort's
    /// scratch, at their allocated capacity (the memory a large run needs per molecule).
    pub fn molecule_buffer_bytes(&self) -> usize {
        fn bytes<T>(v: &Vec<T>) -> usize {
            v.capacity() * std::mem::size_of::<T>()
        }
        let m = &self.molecules;
        let s = &self.sort;
        bytes(&m.z)
            + bytes(&m.r)
            + bytes(&m.vz)
            + bytes(&m.vr)
            + bytes(&m.vt)
            + bytes(&m.erot)
            + bytes(&m.species)
            + bytes(&s.keys)
            + bytes(&s.f64_column)
            + bytes(&s.stored_column)
            + bytes(&s.u8_column)
    }

    /// Simulated molecules in the domain (clones waiting for release are not counted).
    pub fn population(&self) -> u64 {
        self.molecules.len() as u64
    }

    /// First step of the steady state: the planned start-up, or later if the MSER-5 rule
    /// applied to the flow-rate history says the transient lasted longer.
    pub fn steady_state_step(&self) -> usize {
        let s = &self.flux.mass_per_step;
        (self.plan.startup_steps as usize)
            .max(crate::monitor::mser5(s))
            .min(s.len())
    }

    /// Flow-rate estimate from the steady-state steps (None until enough steps).
    pub fn mass_flow_estimate(&self) -> Option<BatchEstimate> {
        let start = self.steady_state_step();
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
        let mut last_checkpoint = Instant::now();
        let wall_before = self.wall_time_s;
        let stop = loop {
            self.step();
            let elapsed = started.elapsed();
            self.wall_time_s = wall_before + elapsed.as_secs_f64();
            let sampling = self.step.saturating_sub(self.plan.startup_steps);
            let mut estimate = None;
            // The stopping test runs on fixed steps only, so where a run stops does not depend
            // on wall time (a resumed run stops where an uninterrupted one would).
            if self.step.is_multiple_of(check_every) {
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
                let e = estimate.or_else(|| self.mass_flow_estimate());
                report(self, e, elapsed);
                last_report = Instant::now();
            }
            let due = matches!(&self.checkpoint_hook, Some((every, _)) if last_checkpoint.elapsed() >= *every);
            if due {
                if let Some((every, mut save)) = self.checkpoint_hook.take() {
                    save(self);
                    self.checkpoint_hook = Some((every, save));
                }
                last_checkpoint = Instant::now();
            }
            if let Some(flag) = &self.interrupt {
                if flag.load(std::sync::atomic::Ordering::SeqCst) {
                    break StopReason::Interrupted;
                }
            }
            if matches!(solver.max_steps, Some(n) if self.step >= n) {
                break StopReason::MaxSteps;
            }
            if elapsed.as_secs_f64() >= solver.max_wall_time {
                break StopReason::MaxWallTime;
            }
        };
        let wall_time = started.elapsed();
        self.wall_time_s = wall_before + wall_time.as_secs_f64();
        RunOutcome { stop, wall_time }
    }
}

/// Sort key of a molecule marked dead: it is not placed, so the sort also compacts.
const DEAD_KEY: u32 = u32::MAX;

/// One inflow work unit to draw: (element index, unit index within the element, molecules).
type InflowPlan = (usize, u64, u64);

/// A work item of the move's job: a chunk of the molecule columns (z, r, vz, vr, vt, erot,
/// species, sort keys), or the whole small inflow of the step.
#[allow(clippy::type_complexity)]
enum MoveItem<'a> {
    Chunk(
        (
            (
                (
                    (
                        (
                            ((&'a mut [f64], &'a mut [f64]), &'a mut [Stored]),
                            &'a mut [Stored],
                        ),
                        &'a mut [Stored],
                    ),
                    &'a mut [Stored],
                ),
                &'a mut [u8],
            ),
            &'a mut [Stored],
        ),
    ),
    /// The small inflow, with one reused survivor buffer per unit.
    Inflow(Vec<Vec<Born>>),
}

/// What a work item of the move's job produced. (All but at most one are chunk reports, so
/// the size difference costs nothing that boxing the report would not cost more.)
#[allow(clippy::large_enum_variant)]
enum MoveOutcome {
    Chunk(MoveReport),
    Inflow(Vec<InflowUnit>),
}

/// Draw one inflow unit: its molecules enter on their element and fly a uniformly random
/// fraction of the step. A molecule that dies on its entry flight (left or deleted by
/// weighting) is counted by `fly_one`, so the balance still closes.
fn inflow_unit(plan: &Plan, step: u64, (ei, k, n): InflowPlan, mut born: Vec<Born>) -> InflowUnit {
    let el = &plan.inflow[ei];
    let seed = plan.case.solver.seed;
    let mut rng = stream(seed, step, Stage::Inject, (ei as u64) << 32 | k);
    let mut rep = MoveReport::new(plan.masses.len());
    let s = el.species as usize;
    let t_res = if el.upstream {
        plan.case.upstream.temperature
    } else {
        plan.case.downstream.temperature
    };
    born.clear();
    born.reserve(n as usize);
    for _ in 0..n {
        let mut f = el.sample(&mut rng);
        let mut erot = crate::maxwell::rotational_energy(plan.rot_dof[s], t_res, &mut rng);
        let t = plan.dt * rng.random::<f64>();
        let fate = fly_one(
            plan,
            step,
            &mut f,
            &mut erot,
            s,
            t,
            Some(el.surface),
            &mut rng,
            &mut rep,
            &mut 0,
        );
        if fate == Fate::Stays {
            born.push((f, erot, el.species));
        }
    }
    (n, born, rep)
}

/// Molecules per inflow work unit (fixed: results must not depend on threads).
const INJECT_UNIT: u64 = 1024;

/// Append the survivors of the inflow units to the arrays, in unit order, each unit copied
/// by one thread into its own range of every column.
fn append(crew: &Crew, m: &mut Molecules, units: &[InflowUnit]) {
    let total: usize = units.iter().map(|u| u.1.len()).sum();
    if total == 0 {
        return;
    }
    m.reserve(total);
    fn split<'a, T>(
        v: &'a mut Vec<T>,
        total: usize,
        units: &[InflowUnit],
    ) -> Vec<&'a mut [std::mem::MaybeUninit<T>]> {
        let mut rest = &mut v.spare_capacity_mut()[..total];
        let mut out = Vec::with_capacity(units.len());
        for u in units {
            let (a, b) = std::mem::take(&mut rest).split_at_mut(u.1.len());
            out.push(a);
            rest = b;
        }
        out
    }
    type Slot<'a, T> = &'a mut [std::mem::MaybeUninit<T>];
    type Columns<'a> = (
        (
            (
                (
                    ((Slot<'a, f64>, Slot<'a, f64>), Slot<'a, Stored>),
                    Slot<'a, Stored>,
                ),
                Slot<'a, Stored>,
            ),
            Slot<'a, Stored>,
        ),
        Slot<'a, u8>,
    );
    let items: Vec<Columns> = split(&mut m.z, total, units)
        .into_iter()
        .zip(split(&mut m.r, total, units))
        .zip(split(&mut m.vz, total, units))
        .zip(split(&mut m.vr, total, units))
        .zip(split(&mut m.vt, total, units))
        .zip(split(&mut m.erot, total, units))
        .zip(split(&mut m.species, total, units))
        .collect();
    let copy = |u: usize, ((((((z, r), vz), vr), vt), erot), sp): Columns| {
        for (j, (f, e, s)) in units[u].1.iter().enumerate() {
            z[j].write(f.z);
            r[j].write(f.r);
            vz[j].write(f.vz as Stored);
            vr[j].write(f.vr as Stored);
            vt[j].write(f.vt as Stored);
            erot[j].write(*e as Stored);
            sp[j].write(*s);
        }
    };
    if total < INJECT_UNIT as usize {
        items.into_iter().enumerate().for_each(|(u, c)| copy(u, c));
    } else {
        crew.for_each(items, copy);
    }
    // SAFETY: the units' ranges tile len..len + total of every column (split above), and
    // each unit wrote every element of its range; the capacity was reserved.
    unsafe {
        let n = m.len() + total;
        m.z.set_len(n);
        m.r.set_len(n);
        m.vz.set_len(n);
        m.vr.set_len(n);
        m.vt.set_len(n);
        m.erot.set_len(n);
        m.species.set_len(n);
    }
}

/// The sort's work items: per pair of blocks, the two blocks' per-key counters (`nkeys` each)
/// and the two blocks' keys (`block_len` each; the last pair's may be short or empty).
#[allow(clippy::type_complexity)]
fn block_pairs<'a>(
    counts: &'a mut [u32],
    keys: &'a [Stored],
    nkeys: usize,
    block_len: usize,
) -> Vec<((&'a mut [u32], &'a mut [u32]), (&'a [Stored], &'a [Stored]))> {
    counts
        .chunks_mut(2 * nkeys)
        .zip(keys.chunks(2 * block_len))
        .map(|(c, k)| (c.split_at_mut(nkeys), k.split_at(block_len.min(k.len()))))
        .collect()
}

/// Write access to the capacity of one vector, shared by the workers of the sort's placement.
struct SharedWrites<T>(*mut T, usize);

// SAFETY: the workers write through the pointer only at the positions handed out by the
// counting sort's cursors, a one-to-one map, so no two of them ever touch the same element,
// and nothing reads the vector until the job has finished.
unsafe impl<T: Send> Send for SharedWrites<T> {}
unsafe impl<T: Send> Sync for SharedWrites<T> {}

impl<T> SharedWrites<T> {
    #[inline]
    fn write(&self, i: usize, v: T) {
        assert!(i < self.1, "destination out of range");
        // SAFETY: within the allocated capacity (checked above) and written by exactly one
        // worker (see the impls).
        unsafe { self.0.add(i).write(v) }
    }
}

/// Reorder one column: position d receives molecule `perm[d]`. The result is built in
/// `spare` (its old contents are not read) and the two vectors are swapped, so the old column
/// becomes the next column's scratch. One unit per thread, each writing a contiguous range (a
/// gather is a plain copy of even cost; smaller units measured no better). Each entry of
/// `perm` is a source index held as the bit pattern of a `Stored` (see `sort_by_cell`).
fn gather<T: Copy + Send + Sync>(
    crew: &Crew,
    column: &mut Vec<T>,
    spare: &mut Vec<T>,
    perm: &[Stored],
) {
    let n = perm.len();
    spare.clear();
    make_room(spare, n);
    let src = &column[..];
    let block = n.div_ceil(crew.threads()).max(1);
    let items: Vec<_> = spare.spare_capacity_mut()[..n]
        .chunks_mut(block)
        .zip(perm.chunks(block))
        .collect();
    crew.for_each(items, |_, (out, p)| {
        for (o, i) in out.iter_mut().zip(p) {
            o.write(src[i.to_bits() as usize]);
        }
    });
    // SAFETY: every one of the first n elements was written just above (the zip covers
    // 0..n, as `out` and `perm` have the same length n and the same block split).
    unsafe { spare.set_len(n) };
    std::mem::swap(column, spare);
}

/// How a run ended.
#[derive(Debug, Clone, Copy)]
pub struct RunOutcome {
    pub stop: StopReason,
    pub wall_time: Duration,
}

/// Fly one molecule of species `s` for time `dt`, count aperture crossings with its weight,
/// resample its rotational energy after a diffuse wall re-emission, and reweight it if it
/// changed radial row (see `weights`). Returns its fate; a molecule deleted by reweighting is
/// reported as `Fate::Left(SurfaceRole::Wall)` and counted in `rep.deleted`.
#[allow(clippy::too_many_arguments)]
#[inline(always)] // in the move loop's body: the call itself was a tenth of a move's cost
fn fly_one<R: Rng>(
    plan: &Plan,
    step: u64,
    f: &mut Flight,
    erot: &mut f64,
    s: usize,
    dt: f64,
    last: Option<usize>,
    rng: &mut R,
    rep: &mut MoveReport,
    row: &mut usize,
) -> Fate {
    let w = &plan.weights;
    let band0 = w.band(f.r);
    let weight = w.factor[band0];
    let crossings = &mut rep.crossings;
    let (mass, a) = (plan.masses[s], plan.geometry.radius);
    let mut diffused = false;
    let fate = advance(
        &plan.geometry,
        &plan.wall[s],
        f,
        dt,
        last,
        plan.z_count,
        rng,
        // The division happens only at a crossing, not once per molecule.
        &mut |sign, r, cos| crossings.add(s, sign, weight, mass, r / a, cos),
        &mut diffused,
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
    if diffused && plan.rot_dof[s] > 0 {
        *erot =
            crate::maxwell::rotational_energy(plan.rot_dof[s], plan.case.walls.temperature, rng);
    }
    let band1 = w.band(f.r);
    *row = band1;
    if band1 != band0 {
        let change = w.change(band0, band1);
        if change.ratio < 1.0 {
            if rng.random::<f64>() >= change.ratio {
                rep.deleted += 1;
                return Fate::Left(SurfaceRole::Wall);
            }
        } else {
            let mut copies = change.whole;
            if rng.random::<f64>() < change.fraction {
                copies += 1;
            }
            for _ in 0..copies {
                let delay = rng.random_range(1..=CLONE_DELAY_MAX) as u64;
                rep.clones.push(PendingClone {
                    flight: *f,
                    erot: *erot,
                    species: s as u8,
                    release_step: step + delay,
                });
            }
        }
    }
    Fate::Stays
}

/// Initial fill: equilibrium gas at the upstream state upstream and in the bore, at the
/// downstream state downstream, per radial row with the row's weight.
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
            let volume = g.symmetry.ring_area(r_lo, r_hi) * (z_hi - z_lo);
            for (s, &n) in dens.iter().enumerate() {
                let mut rng = stream(plan.case.solver.seed, 0, Stage::Fill, index);
                index += 1;
                let expected = n * volume / (plan.fnum * w.factor[j]);
                let count =
                    expected.floor() as u64 + u64::from(rng.random::<f64>() < expected.fract());
                let sigma = crate::maxwell::sigma(temp, plan.masses[s]);
                mol.reserve(count as usize);
                for _ in 0..count {
                    let r = g.symmetry.ring_point(r_lo, r_hi, rng.random());
                    let z = z_lo + rng.random::<f64>() * (z_hi - z_lo);
                    let v = crate::maxwell::velocity(sigma, &mut rng);
                    let erot = crate::maxwell::rotational_energy(plan.rot_dof[s], temp, &mut rng);
                    mol.push(
                        &Flight {
                            z,
                            r,
                            vz: v[2],
                            vr: v[0],
                            vt: v[1],
                        },
                        erot,
                        s as u8,
                    );
                }
            }
        }
    }
}
