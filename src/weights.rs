//! Axisymmetric radial weighting: how many real molecules one simulated molecule stands for.
//!
//! The domain is split into `bands` radial bands of equal width; a molecule in band j stands for
//! F_N · w_j real molecules with w_j = 1 + (ratio − 1)(j + ½)/bands, so the outer, larger-volume
//! bands hold fewer simulated molecules. When a molecule changes band, it is kept with
//! probability w_old/w_new (outward) or duplicated so that on average w_old/w_new copies exist
//! (inward). Duplicates are NOT released at once: identical copies flying in lock-step would
//! stay correlated until a wall or collision separates them, so each clone waits in a queue for
//! a random 1..=CLONE_DELAY_MAX steps and is then released at the position and velocity the
//! original had when it was cloned. (Delayed insertion follows Bird 1994 §15.2's remedy for
//! clone correlation; the random delay spreads clones of one molecule over several steps.)
//! Invariant: expected real-molecule count is conserved by every band change.

/// Largest clone release delay, steps.
pub const CLONE_DELAY_MAX: u32 = 4;

/// Radial weight bands.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RadialWeights {
    /// Outer radius covered, m.
    pub r_max: f64,
    /// Number of bands.
    pub bands: usize,
    /// Weight factor per band (≥ 1, non-decreasing outward).
    pub factor: Vec<f64>,
    #[serde(skip)]
    inv_width: f64,
}

impl RadialWeights {
    /// Linear weighting from 1 at the axis to `ratio` at `r_max`.
    pub fn linear(r_max: f64, bands: usize, ratio: f64) -> Self {
        assert!(bands >= 1 && ratio >= 1.0 && r_max > 0.0);
        let factor = (0..bands)
            .map(|j| 1.0 + (ratio - 1.0) * (j as f64 + 0.5) / bands as f64)
            .collect();
        RadialWeights {
            r_max,
            bands,
            factor,
            inv_width: bands as f64 / r_max,
        }
    }

    /// Band of radius r.
    #[inline]
    pub fn band(&self, r: f64) -> usize {
        ((r * self.inv_width) as usize).min(self.bands - 1)
    }

    /// Weight factor at radius r.
    #[inline]
    pub fn factor_at(&self, r: f64) -> f64 {
        self.factor[self.band(r)]
    }

    /// Inner and outer radius of band j.
    pub fn band_edges(&self, j: usize) -> (f64, f64) {
        let w = self.r_max / self.bands as f64;
        (
            j as f64 * w,
            if j + 1 == self.bands {
                self.r_max
            } else {
                (j + 1) as f64 * w
            },
        )
    }

    /// True when every band has weight 1 (no reweighting needed).
    pub fn is_uniform(&self) -> bool {
        self.factor.iter().all(|&f| f == 1.0)
    }
}
