//! Flow-rate measurement at the aperture.
//!
//! The measurement plane is the aperture exit z = t (the hole itself for a thin orifice). Every
//! crossing of it is counted with sign (+1 downstream, −1 upstream) and the weight the molecule
//! carries during that flight, per species. Only the open hole is crossable, so the net count
//! per step is the net number of simulated molecules through the aperture. This module keeps
//! the per-step series (for the batch-means interval) and converts counts to flow rates. It
//! also tallies, over the sampling steps, the radial profile of the mass flux and the polar
//! angles of the molecules leaving downstream (sums of weights and of squared weights, from
//! which `beam` forms the angular distribution and its statistical error).
//! Invariant: `steps` equals the length of every per-step series.

/// Radial bins of the aperture mass-flux profile (equal widths in r/a).
pub const RADIAL_BINS: usize = 20;
/// Polar-angle bins (equal widths of 5° from the axis) of the angular distribution of the
/// molecules leaving the aperture downstream.
pub const POLAR_BINS: usize = 18;

/// Crossing counts of one step or one chunk, per species.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Crossings {
    /// Net weighted crossings per species (weight factor units; × F_N for real molecules).
    pub net: Vec<f64>,
    /// Number of crossing events (either direction), for diagnostics.
    pub events: u64,
    /// Net weighted mass crossing per radial bin (kg per F_N).
    pub radial: [f64; RADIAL_BINS],
    /// Weighted molecules leaving downstream per polar-angle bin (per F_N).
    pub polar: [f64; POLAR_BINS],
    /// Sum of the squared weights per polar-angle bin (for the bins' statistical error).
    pub polar_sq: [f64; POLAR_BINS],
}

impl Crossings {
    /// Zero counts for `species` species.
    pub fn new(species: usize) -> Self {
        Crossings {
            net: vec![0.0; species],
            events: 0,
            radial: [0.0; RADIAL_BINS],
            polar: [0.0; POLAR_BINS],
            polar_sq: [0.0; POLAR_BINS],
        }
    }

    /// Record one crossing.
    #[inline]
    pub fn add(
        &mut self,
        species: usize,
        sign: f64,
        weight: f64,
        mass: f64,
        r_over_a: f64,
        cos_theta: f64,
    ) {
        self.net[species] += sign * weight;
        self.events += 1;
        let rb = ((r_over_a * RADIAL_BINS as f64) as usize).min(RADIAL_BINS - 1);
        self.radial[rb] += sign * weight * mass;
        if sign > 0.0 {
            let theta = cos_theta.clamp(0.0, 1.0).acos().to_degrees();
            let pb = ((theta / 5.0) as usize).min(POLAR_BINS - 1);
            self.polar[pb] += weight;
            self.polar_sq[pb] += weight * weight;
        }
    }

    /// Add another tally (used in chunk order, so sums are reproducible).
    pub fn merge(&mut self, other: &Crossings) {
        for (a, b) in self.net.iter_mut().zip(&other.net) {
            *a += *b;
        }
        self.events += other.events;
        for (a, b) in self.radial.iter_mut().zip(&other.radial) {
            *a += *b;
        }
        for (a, b) in self.polar.iter_mut().zip(&other.polar) {
            *a += *b;
        }
        for (a, b) in self.polar_sq.iter_mut().zip(&other.polar_sq) {
            *a += *b;
        }
    }
}

/// Per-step history of the aperture flux.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FluxHistory {
    /// Net real mass through the aperture in each step, kg.
    pub mass_per_step: Vec<f64>,
    /// Net real molecules per species in each step (species-major: `species[s][step]`).
    pub molecules_per_step: Vec<Vec<f64>>,
    /// Crossing events per step.
    pub events_per_step: Vec<u64>,
    /// Radial mass-crossing profile summed over the sampling steps (kg per F_N).
    #[serde(default)]
    pub radial_sum: Vec<f64>,
    /// Polar-angle counts of molecules leaving downstream over the sampling steps (per F_N).
    #[serde(default)]
    pub polar_sum: Vec<f64>,
    /// Squared weights of those molecules per polar bin (per F_N²), for the bins' statistical
    /// error; NaN in a checkpoint written before it was recorded (the error is then unknown).
    #[serde(default = "unknown_polar_sq")]
    pub polar_sq_sum: Vec<f64>,
    /// Steps summed into the profiles.
    #[serde(default)]
    pub profile_steps: u64,
    /// Simulated molecules in the domain at the end of each step.
    #[serde(default)]
    pub population_per_step: Vec<u64>,
}

impl FluxHistory {
    /// Empty history for `species` species.
    pub fn new(species: usize) -> Self {
        FluxHistory {
            mass_per_step: Vec::new(),
            molecules_per_step: vec![Vec::new(); species],
            events_per_step: Vec::new(),
            radial_sum: vec![0.0; RADIAL_BINS],
            polar_sum: vec![0.0; POLAR_BINS],
            polar_sq_sum: vec![0.0; POLAR_BINS],
            profile_steps: 0,
            population_per_step: Vec::new(),
        }
    }

    /// Append one step's crossings.
    pub fn record(&mut self, c: &Crossings, fnum: f64, masses: &[f64]) {
        let mut mass = 0.0;
        for (s, &n) in c.net.iter().enumerate() {
            let real = n * fnum;
            mass += real * masses[s];
            self.molecules_per_step[s].push(real);
        }
        self.mass_per_step.push(mass);
        self.events_per_step.push(c.events);
    }

    /// Add one sampling step's crossings to the aperture profiles.
    pub fn record_profiles(&mut self, c: &Crossings) {
        for (a, b) in self.radial_sum.iter_mut().zip(&c.radial) {
            *a += *b;
        }
        for (a, b) in self.polar_sum.iter_mut().zip(&c.polar) {
            *a += *b;
        }
        for (a, b) in self.polar_sq_sum.iter_mut().zip(&c.polar_sq) {
            *a += *b;
        }
        self.profile_steps += 1;
    }

    /// Number of recorded steps.
    pub fn steps(&self) -> usize {
        self.mass_per_step.len()
    }
}

/// Serde default of [`FluxHistory::polar_sq_sum`] for older checkpoints: unknown.
fn unknown_polar_sq() -> Vec<f64> {
    vec![f64::NAN; POLAR_BINS]
}
