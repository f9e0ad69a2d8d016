//! Run monitoring: the flow-rate statistics after start-up and the stopping rule.
//!
//! The per-step net mass crossing of the measurement plane forms a time series. After the
//! start-up steps it is split into `BATCHES` contiguous batches of equal length; the batch
//! means are treated as independent normal samples (method of batch means, e.g. Law & Kelton,
//! Simulation Modeling and Analysis, §9.5.3), and the 95 % half-width is t(0.975, B−1)·s/√B.
//! Batches much longer than the correlation time of the series (here, a few molecule transit
//! times) make the batch means nearly independent. A run stops when the relative half-width
//! is below the target, or at the step or wall-time budget, whichever comes first.

use serde::Serialize;

/// Number of batches for the batch-means interval.
pub const BATCHES: usize = 32;
/// Student t quantile t(0.975, 31) for 32 batches (tables; e.g. Abramowitz & Stegun 26.7).
pub const T_975_31: f64 = 2.0395;
/// Fewest sampling steps per batch before the interval is trusted.
pub const MIN_STEPS_PER_BATCH: usize = 8;

/// Mean and 95 % half-width of a series by batch means.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BatchEstimate {
    /// Mean per step.
    pub mean: f64,
    /// 95 % confidence half-width of the mean per step.
    pub half_width: f64,
    /// Steps used (a multiple of the batch count).
    pub steps_used: usize,
    /// Steps per batch.
    pub batch_len: usize,
}

impl BatchEstimate {
    /// Relative half-width (∞ when the mean is 0).
    pub fn relative(&self) -> f64 {
        if self.mean == 0.0 {
            f64::INFINITY
        } else {
            (self.half_width / self.mean).abs()
        }
    }
}

/// Batch-means estimate of `series`; `None` until there are enough steps. Leading steps that do
/// not fill a whole batch are dropped (they are the oldest, nearest to start-up).
pub fn batch_means(series: &[f64]) -> Option<BatchEstimate> {
    let len = series.len() / BATCHES;
    if len < MIN_STEPS_PER_BATCH {
        return None;
    }
    let used = len * BATCHES;
    let start = series.len() - used;
    let means: Vec<f64> = series[start..]
        .chunks_exact(len)
        .map(|c| c.iter().sum::<f64>() / len as f64)
        .collect();
    let mean = means.iter().sum::<f64>() / BATCHES as f64;
    let var = means.iter().map(|m| (m - mean).powi(2)).sum::<f64>() / (BATCHES as f64 - 1.0);
    Some(BatchEstimate {
        mean,
        half_width: T_975_31 * (var / BATCHES as f64).sqrt(),
        steps_used: used,
        batch_len: len,
    })
}

/// Student t quantile t(0.975, ν) for ν ≥ 31 degrees of freedom, by the Cornish–Fisher
/// expansion about the normal quantile (Abramowitz & Stegun 1964, eq. 26.7.5; error below 1e-4
/// for ν ≥ 31, e.g. 2.0394 at ν = 31 against the tabulated 2.0395).
pub fn t_975(nu: f64) -> f64 {
    let z: f64 = 1.959_963_985;
    let (z3, z5) = (z.powi(3), z.powi(5));
    z + (z3 + z) / (4.0 * nu) + (5.0 * z5 + 16.0 * z3 + 3.0 * z) / (96.0 * nu * nu)
}

/// Batch-means estimate pooled over independent series (statistical replicas of one case):
/// each series is batched on its own; the pooled mean weights each series by its steps, its
/// variance is Σ (n_i/n)² s_i², and the interval uses t with Σ (B − 1) degrees of freedom. With
/// one series this is exactly [`batch_means`]. `None` unless every series has enough steps.
pub fn pooled_batch_means(series: &[&[f64]]) -> Option<BatchEstimate> {
    if series.len() == 1 {
        return batch_means(series[0]);
    }
    let parts: Vec<BatchEstimate> = series
        .iter()
        .map(|s| batch_means(s))
        .collect::<Option<_>>()?;
    let n: f64 = parts.iter().map(|e| e.steps_used as f64).sum();
    if n == 0.0 {
        return None;
    }
    let mean = parts
        .iter()
        .map(|e| e.mean * e.steps_used as f64)
        .sum::<f64>()
        / n;
    let var: f64 = parts
        .iter()
        .map(|e| (e.steps_used as f64 / n * e.half_width / T_975_31).powi(2))
        .sum();
    let dof = (parts.len() * (BATCHES - 1)) as f64;
    Some(BatchEstimate {
        mean,
        half_width: t_975(dof) * var.sqrt(),
        steps_used: n as usize,
        batch_len: parts[0].batch_len,
    })
}

/// MSER-5 truncation point of a time series (White 1997, Simulation 69; White, Cobb & Spratt
/// 2000, Proc. Winter Simulation Conf.): the series is averaged in batches of 5; the number d
/// of leading batches to discard minimises the marginal standard error
/// Σ_{j≥d} (x_j − x̄_d)² / (m − d)², searched over the first half of the m batches. Returns the
/// truncation point in steps (5d).
pub fn mser5(series: &[f64]) -> usize {
    let m = series.len() / 5;
    if m < 10 {
        return 0;
    }
    let batch: Vec<f64> = series
        .chunks_exact(5)
        .map(|c| c.iter().sum::<f64>() / 5.0)
        .collect();
    // suffix sums of x and x² give each candidate's statistic in O(1)
    let mut s1 = vec![0.0; m + 1];
    let mut s2 = vec![0.0; m + 1];
    for j in (0..m).rev() {
        s1[j] = s1[j + 1] + batch[j];
        s2[j] = s2[j + 1] + batch[j] * batch[j];
    }
    let mut best = (f64::INFINITY, 0);
    for d in 0..m / 2 {
        let k = (m - d) as f64;
        let ss = s2[d] - s1[d] * s1[d] / k;
        let stat = ss / (k * k);
        if stat < best.0 {
            best = (stat, d);
        }
    }
    5 * best.1
}

/// Why a run stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum StopReason {
    /// The relative 95 % half-width reached the target.
    TargetUncertainty,
    /// The step budget (`solver.max_steps`) was used up.
    MaxSteps,
    /// The wall-time budget (`solver.max_wall_time`) was used up.
    MaxWallTime,
    /// Interrupted by a signal.
    Interrupted,
    /// Several statistical replicas combined by `kinflux merge` (each stopped by its own rule).
    Merged,
}

impl StopReason {
    /// Words for the log.
    pub fn describe(self) -> &'static str {
        match self {
            StopReason::TargetUncertainty => "target uncertainty reached",
            StopReason::MaxSteps => "step budget (solver.max_steps) used up",
            StopReason::MaxWallTime => "wall-time budget (solver.max_wall_time) used up",
            StopReason::Interrupted => "interrupted",
            StopReason::Merged => "statistical replicas merged",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mser_cuts_an_initial_transient() {
        // 2000 steps of a decaying start-up on top of a stationary alternating signal
        let s: Vec<f64> = (0..6000)
            .map(|i| 1.0 + 5.0 * (-(i as f64) / 300.0).exp() + if i % 2 == 0 { 0.1 } else { -0.1 })
            .collect();
        let d = mser5(&s);
        assert!(d > 900 && d < 3000, "truncation at {d}");
        let flat: Vec<f64> = (0..6000)
            .map(|i| if i % 2 == 0 { 0.1 } else { -0.1 })
            .collect();
        assert!(mser5(&flat) < 100);
    }

    #[test]
    fn t_quantile_matches_tables() {
        // t(0.975, ν) from tables (Abramowitz & Stegun 1964, table 26.10): 31 → 2.0395,
        // 60 → 2.0003, 120 → 1.9799
        for (nu, t) in [(31.0, 2.0395), (60.0, 2.0003), (120.0, 1.9799)] {
            assert!((t_975(nu) - t).abs() < 2e-4, "ν = {nu}: {}", t_975(nu));
        }
    }

    #[test]
    fn pooling_equal_series_halves_the_variance() {
        // two copies of one alternating series: same mean, variance of the pooled mean halved
        let s: Vec<f64> = (0..32 * 20).map(|i| ((i / 20) % 3) as f64).collect();
        let one = batch_means(&s).unwrap();
        let two = pooled_batch_means(&[&s, &s]).unwrap();
        assert!((two.mean - one.mean).abs() < 1e-12);
        let expected = one.half_width / 2f64.sqrt() * t_975(62.0) / T_975_31;
        assert!((two.half_width - expected).abs() < 1e-12 * expected.max(1.0));
        assert_eq!(pooled_batch_means(&[&s]), Some(one));
        assert!(pooled_batch_means(&[&s, &s[..10]]).is_none());
    }

    #[test]
    fn constant_series_has_zero_width() {
        let s = vec![2.0; 32 * 10];
        let e = batch_means(&s).unwrap();
        assert_eq!(e.mean, 2.0);
        assert_eq!(e.half_width, 0.0);
        assert!(batch_means(&s[..32 * 7]).is_none());
    }
}
