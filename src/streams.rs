//! Random-number streams keyed by (seed, step, stage, index).
//!
//! Each stage of each step draws from streams derived only from the run seed, the step number,
//! a stage tag and a fixed work-unit index (a molecule chunk, a boundary face). The work
//! decomposition is fixed independently of the thread count, so results are identical for any
//! number of threads, and no generator state needs saving in a checkpoint.

use rand::rngs::SmallRng;
use rand::SeedableRng;

/// Stage tags of the random streams.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[repr(u64)]
pub enum Stage {
    Fill = 1,
    Move = 2,
    Inject = 3,
    Reweight = 4,
    Collide = 5,
    /// The number of molecules each inflow element injects in a step.
    InjectCount = 6,
}

/// SplitMix64 finaliser (Steele, Lea & Flood 2014): a bijective 64-bit mixer.
#[inline]
fn mix(mut x: u64) -> u64 {
    x = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    x = (x ^ (x >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    x = (x ^ (x >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    x ^ (x >> 31)
}

/// Stream seed of statistical replica `k` (1-based) of a case with seed `seed`: a different
/// bijective mix than the per-step keys, so replica streams do not overlap any other run's.
pub fn replica_seed(seed: u64, k: u64) -> u64 {
    mix(mix(seed ^ 0x5245_504C_4943_4100) ^ k)
}

/// The generator for one work unit.
#[inline]
pub fn stream(seed: u64, step: u64, stage: Stage, index: u64) -> SmallRng {
    let k = mix(mix(mix(mix(seed) ^ step) ^ stage as u64) ^ index);
    SmallRng::seed_from_u64(k)
}
