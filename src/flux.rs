//! Flow-rate measurement at the aperture.
//!
//! The measurement plane is the aperture exit z = t (the hole itself for a thin orifice). Every
//! crossing of it is counted with sign (+1 downstream, −1 upstream) and the weight the molecule
//! carries during that flight, per species. Only the open hole is crossable, so the net count
//! per step is the net number of simulated molecules through the aperture. This module keeps
//! the per-step series (for the batch-means interval) and converts counts to flow rates.
//! Invariant: `steps` equals the length of every per-step series.

/// Crossing counts of one step or one chunk, per species.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Crossings {
    /// Net weighted crossings per species (weight factor units; × F_N for real molecules).
    pub net: Vec<f64>,
    /// Number of crossing events (either direction), for diagnostics.
    pub events: u64,
}

impl Crossings {
    /// Zero counts for `species` species.
    pub fn new(species: usize) -> Self {
        Crossings {
            net: vec![0.0; species],
            events: 0,
        }
    }

    /// Record one crossing.
    #[inline]
    pub fn add(&mut self, species: usize, sign: f64, weight: f64) {
        self.net[species] += sign * weight;
        self.events += 1;
    }

    /// Add another tally (used in chunk order, so sums are reproducible).
    pub fn merge(&mut self, other: &Crossings) {
        for (a, b) in self.net.iter_mut().zip(&other.net) {
            *a += *b;
        }
        self.events += other.events;
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
}

impl FluxHistory {
    /// Empty history for `species` species.
    pub fn new(species: usize) -> Self {
        FluxHistory {
            mass_per_step: Vec::new(),
            molecules_per_step: vec![Vec::new(); species],
            events_per_step: Vec::new(),
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

    /// Number of recorded steps.
    pub fn steps(&self) -> usize {
        self.mass_per_step.len()
    }
}
