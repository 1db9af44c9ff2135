//! Quantities with units, as users type them: `8mm`, `0.5 L/min`, `40C`.
//!
//! Owns: the conversion of a number with an optional unit suffix into SI. A bare number is
//! already SI (metres, m³/s, kelvin for a temperature written `K`, ...). Knows no physics.

use crate::error::{Error, Result};

/// Splits "12.5mm" into (12.5, "mm"); white space between number and unit is allowed. None
/// when the text does not start with a number.
pub fn split_number(text: &str) -> Option<(f64, &str)> {
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
                        .chars()
                        .next()
                        .is_some_and(|n| n.is_ascii_digit() || n == '-' || n == '+')
                    && i > 0))
        })
        .map(|(i, _)| i)
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(end);
    Some((num.parse().ok()?, unit.trim()))
}

/// [`split_number`] with the errors a user sees.
fn split(text: &str, parameter: &str) -> Result<(f64, String)> {
    let (value, unit) = split_number(text)
        .ok_or_else(|| Error::param(parameter, format!("'{text}' does not start with a number")))?;
    if !value.is_finite() {
        return Err(Error::param(
            parameter,
            format!("'{text}' is not a finite number"),
        ));
    }
    Ok((value, unit.to_string()))
}

fn unknown(parameter: &str, unit: &str, known: &str) -> Error {
    Error::param(parameter, format!("unknown unit '{unit}' (known: {known})"))
}

/// Factor from a length unit to metres; `""` is metres.
pub fn length_unit(unit: &str) -> Option<f64> {
    Some(match unit {
        "" | "m" => 1.0,
        "cm" => 1e-2,
        "mm" => 1e-3,
        "um" | "µm" | "μm" => 1e-6,
        "in" => 0.0254,
        _ => return None,
    })
}

/// A length, e.g. `8mm`, `0.02 mm`, `0.5in`, `1e-3` (metres).
pub fn parse_length(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f = length_unit(&unit).ok_or_else(|| unknown(parameter, &unit, "m, cm, mm, um, in"))?;
    Ok(v * f)
}

/// A volumetric flow rate in m³/s, e.g. `2 L/min`, `1e-5 m3/s`, `0.5gpm` (US gallons).
pub fn parse_flow_rate(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    // US liquid gallon = 3.785411784 L exactly (NIST SP 811, from memory).
    let f = match unit.as_str() {
        "" | "m3/s" => 1.0,
        "m3/h" => 1.0 / 3600.0,
        "L/s" | "l/s" => 1e-3,
        "L/min" | "l/min" => 1e-3 / 60.0,
        "mL/min" | "ml/min" => 1e-6 / 60.0,
        "mL/s" | "ml/s" => 1e-6,
        "gpm" => 3.785_411_784e-3 / 60.0,
        _ => {
            return Err(unknown(
                parameter,
                &unit,
                "m3/s, m3/h, L/s, L/min, mL/min, mL/s, gpm",
            ))
        }
    };
    Ok(v * f)
}

/// A temperature in kelvin: `40C`, `313.15K`, or a bare number in °C (what engineers type).
pub fn parse_temperature(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    match unit.as_str() {
        "" | "C" | "°C" | "degC" => Ok(v + 273.15),
        "K" => Ok(v),
        "F" | "°F" => Ok((v - 32.0) / 1.8 + 273.15),
        _ => Err(unknown(parameter, &unit, "C, K, F")),
    }
}

/// A pressure gradient in Pa/m: `1200`, `1.2 kPa/m`, `0.5 bar/m`.
pub fn parse_pressure_gradient(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f = match unit.as_str() {
        "" | "Pa/m" => 1.0,
        "kPa/m" => 1e3,
        "MPa/m" => 1e6,
        "bar/m" => 1e5,
        "mbar/m" => 1e2,
        "Pa/mm" => 1e3,
        _ => {
            return Err(unknown(
                parameter,
                &unit,
                "Pa/m, kPa/m, MPa/m, bar/m, mbar/m, Pa/mm",
            ))
        }
    };
    Ok(v * f)
}

/// A dynamic viscosity in Pa·s: `1e-3`, `1 mPa.s`, `1cP`.
pub fn parse_viscosity(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f = match unit.as_str() {
        "" | "Pa.s" | "Pa*s" | "Pas" | "Pa·s" => 1.0,
        "mPa.s" | "mPa*s" | "mPas" | "mPa·s" | "cP" => 1e-3,
        _ => return Err(unknown(parameter, &unit, "Pa.s, mPa.s, cP")),
    };
    Ok(v * f)
}

/// A density in kg/m³: `998`, `998 kg/m3`, `0.998 g/cm3`.
pub fn parse_density(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f = match unit.as_str() {
        "" | "kg/m3" => 1.0,
        "g/cm3" | "g/mL" | "g/ml" => 1e3,
        _ => return Err(unknown(parameter, &unit, "kg/m3, g/cm3")),
    };
    Ok(v * f)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lengths() {
        assert_eq!(parse_length("8mm", "d").unwrap(), 8e-3);
        assert_eq!(parse_length(" 0.5 in ", "d").unwrap(), 0.0127);
        assert_eq!(parse_length("1e-3", "d").unwrap(), 1e-3);
        assert_eq!(parse_length("2.5e-1mm", "d").unwrap(), 2.5e-4);
        assert!(parse_length("8 furlong", "d")
            .unwrap_err()
            .to_string()
            .contains("unknown unit 'furlong'"));
        assert!(parse_length("mm", "d").is_err());
        assert!(parse_length("inf", "d").is_err());
    }

    #[test]
    fn flows_and_temperatures() {
        assert!((parse_flow_rate("6 L/min", "q").unwrap() - 1e-4).abs() < 1e-18);
        // 1 US gpm = 6.30902e-5 m³/s (NIST SP 811 appendix B, from memory).
        assert!((parse_flow_rate("1gpm", "q").unwrap() - 6.309_02e-5).abs() < 1e-9);
        assert!((parse_temperature("40C", "t").unwrap() - 313.15).abs() < 1e-12);
        assert!((parse_temperature("300K", "t").unwrap() - 300.0).abs() < 1e-12);
        assert_eq!(parse_pressure_gradient("1.5kPa/m", "g").unwrap(), 1500.0);
        assert_eq!(parse_viscosity("1cP", "mu").unwrap(), 1e-3);
    }
}
