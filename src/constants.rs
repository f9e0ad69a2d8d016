//! Physical constants (CODATA 2018 exact SI values) and the trade's standard conditions.
//!
//! Invariant: every other module takes these from here; no module repeats a constant.

/// Boltzmann constant, J/K (exact since the 2019 SI redefinition).
pub const BOLTZMANN: f64 = 1.380_649e-23;
/// Avogadro constant, 1/mol (exact).
pub const AVOGADRO: f64 = 6.022_140_76e23;
/// Molar gas constant, J/(mol K) = k N_A.
pub const GAS_CONSTANT: f64 = BOLTZMANN * AVOGADRO;
/// Atomic mass constant (dalton), kg (CODATA 2018).
pub const DALTON: f64 = 1.660_539_066_60e-27;
/// Standard temperature for sccm/slm, K (0 °C; trade convention, stated in every output).
pub const STANDARD_TEMPERATURE: f64 = 273.15;
/// Standard pressure for sccm/slm, Pa (1 atm; trade convention).
pub const STANDARD_PRESSURE: f64 = 101_325.0;
