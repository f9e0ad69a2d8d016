//! Quantities with units: parsing what the user writes ("50 Pa", "0.2 mm", "22 °C", "10 min")
//! into SI values, and the trade's output units (sccm, slm, mbar·L/s, Torr·L/s).
//!
//! Invariant: every dimensional input passes through [`parse`], which rejects a missing unit or a
//! unit of the wrong dimension; values are returned in SI (Pa, K, m, s, kg/s, Pa·m³/s).

use crate::constants::{BOLTZMANN, STANDARD_PRESSURE, STANDARD_TEMPERATURE};

/// Physical dimension of an input quantity.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dimension {
    Pressure,
    Temperature,
    Length,
    Time,
    /// Gas flow: mass flow (kg/s, g/s, mg/s) or a throughput-like unit (sccm, slm, Pa·m³/s,
    /// mbar·L/s, Torr·L/s), which needs the molecular mass to become a mass flow.
    Flow,
}

impl Dimension {
    /// Human description of the accepted units, used in error messages.
    pub fn expected(self) -> &'static str {
        match self {
            Dimension::Pressure => "a pressure with a unit (Pa, hPa, kPa, MPa, µbar, mbar, bar, mTorr, Torr, psi, atm), e.g. \"50 Pa\"",
            Dimension::Temperature => "a temperature with a unit (K, °C or degC), e.g. \"295 K\"",
            Dimension::Length => "a length with a unit (m, cm, mm, µm or um, nm, in), e.g. \"0.2 mm\"",
            Dimension::Time => "a time with a unit (µs, ms, s, min, h), e.g. \"10 min\"",
            Dimension::Flow => "a flow with a unit (kg/s, g/s, mg/s, mol/s, sccm, slm, Pa·m3/s, mbar·L/s, Torr·L/s), e.g. \"5 sccm\"",
        }
    }
}

/// A gas flow as the user wrote it: either a mass flow, or an amount-of-gas flow expressed as
/// a number of molecules per second (what sccm and throughput units measure).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Flow {
    /// kg/s.
    Mass(f64),
    /// molecules per second.
    Molecules(f64),
}

/// Throughput units (p·V per time) are converted to molecules/s at this temperature unless the
/// caller says otherwise: 0 °C for sccm/slm (standard conditions), and the stated gas
/// temperature for Pa·m³/s-type units.
fn pv_per_s_to_molecules(pv: f64, temperature: f64) -> f64 {
    pv / (BOLTZMANN * temperature)
}

/// Parse `text` as a quantity of dimension `dim`; returns the SI value.
///
/// Temperatures are absolute (K). Errors are plain strings describing what is wrong; the
/// caller adds file and key.
pub fn parse(text: &str, dim: Dimension) -> Result<f64, String> {
    let (number, unit) = split(text)?;
    let value = match dim {
        Dimension::Pressure => {
            number * pressure_factor(unit).ok_or_else(|| wrong_unit(unit, dim))?
        }
        Dimension::Length => number * length_factor(unit).ok_or_else(|| wrong_unit(unit, dim))?,
        Dimension::Time => number * time_factor(unit).ok_or_else(|| wrong_unit(unit, dim))?,
        Dimension::Temperature => match unit {
            "K" | "kelvin" => number,
            "°C" | "ºC" | "degC" | "C" | "celsius" => number + 273.15,
            _ => return Err(wrong_unit(unit, dim)),
        },
        Dimension::Flow => return Err("use parse_flow for flows".into()),
    };
    if !value.is_finite() {
        return Err(format!("{text:?} is not a finite number"));
    }
    Ok(value)
}

/// Parse a gas flow ("5 sccm", "1e-6 kg/s", "0.1 mbar·L/s"). `gas_temperature` (K) converts
/// p·V throughput units to molecules/s; sccm and slm use 0 °C and 101325 Pa (trade convention).
pub fn parse_flow(text: &str, gas_temperature: f64) -> Result<Flow, String> {
    let (number, unit) = split(text)?;
    let u = unit.replace(['·', '*', ' '], "").to_ascii_lowercase();
    let std_molecules_per_m3 = STANDARD_PRESSURE / (BOLTZMANN * STANDARD_TEMPERATURE);
    let flow = match u.as_str() {
        "kg/s" => Flow::Mass(number),
        "g/s" => Flow::Mass(number * 1e-3),
        "mg/s" => Flow::Mass(number * 1e-6),
        "mol/s" => Flow::Molecules(number * crate::constants::AVOGADRO),
        "sccm" => Flow::Molecules(number * 1e-6 / 60.0 * std_molecules_per_m3),
        "slm" | "slpm" => Flow::Molecules(number * 1e-3 / 60.0 * std_molecules_per_m3),
        "pam3/s" | "pam^3/s" | "pa.m3/s" => {
            Flow::Molecules(pv_per_s_to_molecules(number, gas_temperature))
        }
        "mbarl/s" | "mbar.l/s" => {
            Flow::Molecules(pv_per_s_to_molecules(number * 0.1, gas_temperature))
        }
        "torrl/s" | "torr.l/s" => {
            Flow::Molecules(pv_per_s_to_molecules(number * TORR * 1e-3, gas_temperature))
        }
        _ => return Err(wrong_unit(unit, Dimension::Flow)),
    };
    Ok(flow)
}

/// One torr in pascals (101325/760, exact by definition).
pub const TORR: f64 = 101_325.0 / 760.0;
/// One pound-force per square inch in pascals.
pub const PSI: f64 = 6_894.757_293_168;

fn pressure_factor(unit: &str) -> Option<f64> {
    Some(match unit {
        "Pa" => 1.0,
        "hPa" => 1e2,
        "kPa" => 1e3,
        "MPa" => 1e6,
        "mbar" => 1e2,
        "bar" => 1e5,
        "µbar" | "μbar" | "ubar" => 0.1,
        "Torr" | "torr" => TORR,
        "mTorr" | "mtorr" => TORR * 1e-3,
        "psi" => PSI,
        "atm" => 101_325.0,
        _ => return None,
    })
}

fn length_factor(unit: &str) -> Option<f64> {
    Some(match unit {
        "m" => 1.0,
        "cm" => 1e-2,
        "mm" => 1e-3,
        "µm" | "μm" | "um" => 1e-6,
        "nm" => 1e-9,
        "in" => 0.0254,
        _ => return None,
    })
}

fn time_factor(unit: &str) -> Option<f64> {
    Some(match unit {
        "s" => 1.0,
        "ms" => 1e-3,
        "µs" | "μs" | "us" => 1e-6,
        "min" => 60.0,
        "h" => 3600.0,
        _ => return None,
    })
}

fn wrong_unit(unit: &str, _dim: Dimension) -> String {
    format!("the unit {unit:?} is not one of these")
}

/// Split "12.5 mbar" or "12.5mbar" into (12.5, "mbar").
fn split(text: &str) -> Result<(f64, &str), String> {
    let t = text.trim();
    let end = t
        .char_indices()
        .find(|&(i, c)| {
            !(c.is_ascii_digit()
                || c == '.'
                || c == '+'
                || c == '-'
                || ((c == 'e' || c == 'E')
                    && t[i + 1..]
                        .starts_with(|d: char| d.is_ascii_digit() || d == '-' || d == '+')))
        })
        .map(|(i, _)| i)
        .unwrap_or(t.len());
    let number: f64 = t[..end]
        .parse()
        .map_err(|_| format!("{text:?} does not start with a number"))?;
    let unit = t[end..].trim();
    if unit.is_empty() {
        return Err(format!("{text:?} has no unit"));
    }
    Ok((number, unit))
}

/// Throughput units and flows for output, from a molecular flow (molecules/s).
#[derive(Debug, Clone, Copy, serde::Serialize, serde::Deserialize, PartialEq)]
pub struct TradeFlow {
    /// p·V flow at the reference temperature, Pa·m³/s.
    pub throughput_pa_m3_s: f64,
    /// The same in mbar·L/s.
    pub throughput_mbar_l_s: f64,
    /// The same in Torr·L/s.
    pub throughput_torr_l_s: f64,
    /// Standard cubic centimetres per minute (0 °C, 101325 Pa).
    pub sccm: f64,
    /// Standard litres per minute (0 °C, 101325 Pa).
    pub slm: f64,
}

impl TradeFlow {
    /// `molecules_per_s` expressed in the trade's units; throughput at `temperature` (K).
    pub fn from_molecules(molecules_per_s: f64, temperature: f64) -> Self {
        let pv = molecules_per_s * BOLTZMANN * temperature;
        let std_volume_m3_s =
            molecules_per_s * BOLTZMANN * STANDARD_TEMPERATURE / STANDARD_PRESSURE;
        TradeFlow {
            throughput_pa_m3_s: pv,
            throughput_mbar_l_s: pv * 10.0,
            throughput_torr_l_s: pv / TORR * 1e3,
            sccm: std_volume_m3_s * 1e6 * 60.0,
            slm: std_volume_m3_s * 1e3 * 60.0,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_units() {
        assert_eq!(parse("50 Pa", Dimension::Pressure).unwrap(), 50.0);
        assert!((parse("1 Torr", Dimension::Pressure).unwrap() - 133.322_368).abs() < 1e-5);
        assert!((parse("2.5mbar", Dimension::Pressure).unwrap() - 250.0).abs() < 1e-12);
        assert!((parse("1e-3 bar", Dimension::Pressure).unwrap() - 100.0).abs() < 1e-9);
        assert!((parse("22 °C", Dimension::Temperature).unwrap() - 295.15).abs() < 1e-12);
        assert!((parse("200 µm", Dimension::Length).unwrap() - 2e-4).abs() < 1e-15);
        assert!((parse("200 um", Dimension::Length).unwrap() - 2e-4).abs() < 1e-15);
        assert_eq!(parse("10 min", Dimension::Time).unwrap(), 600.0);
        assert!(parse("50", Dimension::Pressure).is_err());
        assert!(parse("50 K", Dimension::Pressure).is_err());
        assert!(parse("Pa", Dimension::Pressure).is_err());
    }

    #[test]
    fn sccm_round_trip() {
        // 1 sccm is 4.4615e-5 mol/min = 7.4358e-7 mol/s at 0 °C, 101325 Pa (ideal-gas molar
        // volume 22.414 L/mol; trade convention).
        let Flow::Molecules(n) = parse_flow("1 sccm", 295.0).unwrap() else {
            panic!()
        };
        let mol = n / crate::constants::AVOGADRO;
        assert!((mol - 7.4358e-7).abs() / 7.4358e-7 < 1e-4, "{mol}");
        assert!((TradeFlow::from_molecules(n, 295.0).sccm - 1.0).abs() < 1e-12);
    }
}
