//! Axisymmetric radial weighting: how many real molecules one simulated molecule stands for.
//! (A planar slit domain uses ratio 1: its cells do not grow with the distance from the
//! mid-plane, so every weight is 1 and nothing is deleted or cloned.)
//!
//! Weights are constant over each radial row of the cell grid: a molecule in row j stands for
//! F_N · w_j real molecules with w_j = 1 + (ratio − 1) r_j/R (r_j the row centre), so the outer,
//! larger-volume rows hold fewer simulated molecules and every molecule of a cell has the same
//! weight (which the collision stage relies on). When a molecule changes row, it is kept with
//! probability w_old/w_new (outward) or duplicated so that on average w_old/w_new copies exist
//! (inward). Duplicates are NOT released at once: identical copies flying in lock-step stay
//! correlated until a wall or a collision separates them, so each clone waits in a queue for a
//! random 1..=CLONE_DELAY_MAX steps and is then released, at the end of a step, at the position
//! and velocity the original had when it was cloned — a time-shifted copy of the original. (Delayed insertion is Bird's remedy for clone correlation,
//! Bird 1994 §15.2; the random delay spreads the clones of one molecule over several steps. In a
//! steady flow a delayed release changes nothing in expectation.)
//! This module also owns the queue of waiting clones ([`CloneQueue`]).
//! Invariant: the expected real-molecule count is conserved by every row change.

use crate::geometry::Flight;
use crate::grid::Axis;

/// Largest clone release delay, steps.
pub const CLONE_DELAY_MAX: u32 = 4;

/// Radial weight rows.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RadialWeights {
    /// The radial rows (the grid's radial axis).
    #[serde(skip)]
    pub rows: Axis,
    /// Number of rows.
    pub bands: usize,
    /// Weight factor per row (≥ 1, non-decreasing outward).
    pub factor: Vec<f64>,
    /// What a move from row i to row j does, at `i * bands + j` (see [`RowChange`]): worked
    /// out once here, so the move loop needs no division and no rounding per molecule.
    #[serde(skip)]
    pub changes: Vec<RowChange>,
}

/// The outcome rule of a molecule that moves from one row to another: its expected number of
/// copies is `ratio` = w_old/w_new. Below 1 it is kept with probability `ratio`; otherwise it
/// gets `whole` = ⌊ratio − 1⌋ clones, and one more with probability `fraction` = the rest.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RowChange {
    pub ratio: f64,
    pub whole: u32,
    pub fraction: f64,
}

impl RowChange {
    fn new(w_old: f64, w_new: f64) -> Self {
        let ratio = w_old / w_new;
        let extra = ratio - 1.0;
        RowChange {
            ratio,
            whole: if ratio < 1.0 { 0 } else { extra.floor() as u32 },
            fraction: if ratio < 1.0 {
                0.0
            } else {
                extra - extra.floor()
            },
        }
    }
}

impl RadialWeights {
    /// Linear weighting from 1 on the axis to `ratio` at the outer radius, per row of `rows`.
    pub fn linear(rows: &Axis, ratio: f64) -> Self {
        assert!(ratio >= 1.0 && !rows.is_empty());
        let r_max = rows.edges(rows.len() - 1).1;
        let factor = (0..rows.len())
            .map(|j| 1.0 + (ratio - 1.0) * rows.center(j) / r_max)
            .collect::<Vec<f64>>();
        let changes = factor
            .iter()
            .flat_map(|&a| factor.iter().map(move |&b| RowChange::new(a, b)))
            .collect();
        RadialWeights {
            rows: rows.clone(),
            bands: rows.len(),
            factor,
            changes,
        }
    }

    /// Row of radius r.
    #[inline]
    pub fn band(&self, r: f64) -> usize {
        self.rows.locate(r).0
    }

    /// The rule for a move from row `from` to row `to`.
    #[inline]
    pub fn change(&self, from: usize, to: usize) -> RowChange {
        self.changes[from * self.bands + to]
    }

    /// Weight factor at radius r.
    #[inline]
    pub fn factor_at(&self, r: f64) -> f64 {
        self.factor[self.band(r)]
    }

    /// Inner and outer radius of row j.
    pub fn band_edges(&self, j: usize) -> (f64, f64) {
        self.rows.edges(j)
    }

    /// True when every row has weight 1 (no reweighting needed).
    pub fn is_uniform(&self) -> bool {
        self.factor.iter().all(|&f| f == 1.0)
    }
}

/// A clone waiting for release.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct PendingClone {
    pub flight: Flight,
    pub erot: f64,
    pub species: u8,
    /// Step at whose end the clone joins the domain.
    pub release_step: u64,
}

/// Clones waiting for release, one bucket per step of the delay window.
///
/// A clone made in step s is released at the end of a step in s+1..=s+CLONE_DELAY_MAX, and
/// every step releases all clones due by then, so the waiting clones' release steps span at
/// most CLONE_DELAY_MAX + 1 consecutive steps: bucket k mod (CLONE_DELAY_MAX + 1) holds exactly
/// step k's clones, in the order they were made (the order results depend on). A release takes
/// its bucket whole instead of walking every waiting clone (tens of thousands in a
/// free-molecular run, two passes per step). Invariant: every clone in bucket b has
/// release_step ≡ b mod (CLONE_DELAY_MAX + 1), and none is overdue.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CloneQueue {
    buckets: Vec<Vec<PendingClone>>,
}

impl CloneQueue {
    const WINDOW: u64 = CLONE_DELAY_MAX as u64 + 1;

    /// Queue clones made in step `step` (in order); each must be due within the window.
    pub fn extend(&mut self, step: u64, clones: impl IntoIterator<Item = PendingClone>) {
        if self.buckets.is_empty() {
            self.buckets = vec![Vec::new(); Self::WINDOW as usize];
        }
        for c in clones {
            debug_assert!(c.release_step > step && c.release_step <= step + CLONE_DELAY_MAX as u64);
            self.buckets[(c.release_step % Self::WINDOW) as usize].push(c);
        }
    }

    /// The clones due at the end of step `step`, in the order they were queued; the caller
    /// hands the bucket back with [`CloneQueue::recycle`] once it has copied them out.
    pub fn take_due(&mut self, step: u64) -> Vec<PendingClone> {
        match self.buckets.get_mut((step % Self::WINDOW) as usize) {
            Some(b) => std::mem::take(b),
            None => Vec::new(),
        }
    }

    /// Give an emptied bucket's allocation back (no allocation in the step loop).
    pub fn recycle(&mut self, step: u64, mut bucket: Vec<PendingClone>) {
        bucket.clear();
        if let Some(b) = self.buckets.get_mut((step % Self::WINDOW) as usize) {
            if b.is_empty() {
                *b = bucket;
            }
        }
    }

    /// Every waiting clone, by release step and then in queue order (for checkpoints).
    pub fn to_vec(&self, step: u64) -> Vec<PendingClone> {
        (0..Self::WINDOW)
            .filter_map(|k| self.buckets.get(((step + k) % Self::WINDOW) as usize))
            .flatten()
            .copied()
            .collect()
    }

    /// Rebuild from a checkpoint's list, at the start of step `step`: clones already due are
    /// released at the end of this step, the first release.
    pub fn from_saved(step: u64, clones: Vec<PendingClone>) -> Self {
        let mut q = CloneQueue {
            buckets: vec![Vec::new(); Self::WINDOW as usize],
        };
        for mut c in clones {
            c.release_step = c.release_step.max(step);
            q.buckets[(c.release_step % Self::WINDOW) as usize].push(c);
        }
        q
    }

    /// Number of waiting clones.
    pub fn len(&self) -> usize {
        self.buckets.iter().map(Vec::len).sum()
    }

    /// True when no clone waits.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn clone(tag: f64, release_step: u64) -> PendingClone {
        PendingClone {
            flight: Flight {
                z: tag,
                r: 0.0,
                vz: 0.0,
                vr: 0.0,
                vt: 0.0,
            },
            erot: 0.0,
            species: 0,
            release_step,
        }
    }

    fn tags(v: &[PendingClone]) -> Vec<f64> {
        v.iter().map(|c| c.flight.z).collect()
    }

    /// Each step releases exactly its own clones, in the order they were made, whatever the
    /// order of their release steps; a checkpoint's list rebuilds the same queue.
    #[test]
    fn clones_leave_the_queue_on_their_step_in_the_order_made() {
        let mut q = CloneQueue::default();
        q.extend(10, [clone(1.0, 13), clone(2.0, 11), clone(3.0, 13)]);
        q.extend(11, [clone(4.0, 12), clone(5.0, 15), clone(6.0, 13)]);
        // (step 10 released nothing due at 10; step 11 releases the clone made for it)
        let due = q.take_due(11);
        assert_eq!(tags(&due), [2.0]);
        q.recycle(11, due);
        let saved = q.to_vec(12);
        assert_eq!(tags(&saved), [4.0, 1.0, 3.0, 6.0, 5.0]);
        let mut r = CloneQueue::from_saved(12, saved);
        assert_eq!(r.len(), 5);
        for (step, want) in [
            (12, vec![4.0]),
            (13, vec![1.0, 3.0, 6.0]),
            (14, vec![]),
            (15, vec![5.0]),
        ] {
            assert_eq!(tags(&q.take_due(step)), want, "step {step}");
            assert_eq!(tags(&r.take_due(step)), want, "resumed, step {step}");
        }
        assert!(q.is_empty() && r.is_empty());
    }

    /// The tabulated row changes are the quotients of the weights, split into whole clones
    /// and a remainder.
    #[test]
    fn row_changes_hold_the_weight_ratios() {
        let c = RowChange::new(2.5, 1.0);
        assert_eq!((c.ratio, c.whole, c.fraction), (2.5, 1, 0.5));
        let c = RowChange::new(1.0, 4.0);
        assert_eq!((c.ratio, c.whole, c.fraction), (0.25, 0, 0.0));
    }
}
