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
//! Invariant: the expected real-molecule count is conserved by every row change.

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
