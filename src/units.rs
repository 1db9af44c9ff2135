//! Quantities with units, as users type them: `8mm`, `0.5 L/min`, `40C`.
//!
//! Owns: the conversion of a number with an optional unit suffix into SI (lengths, flow rates,
//! pressures and pressure gradients, temperatures, viscosities, densities), the exact
//! definitions of the non-SI units it accepts, and the printing of a number with the
//! significant digits its uncertainty supports ([`format_significant`]). A bare number is
//! already SI (metres, m³/s, Pa, kelvin for a temperature written `K`, ...). Knows no physics.

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
        "in" => INCH_M,
        _ => return None,
    })
}

/// A length, e.g. `8mm`, `0.02 mm`, `0.5in`, `1e-3` (metres).
pub fn parse_length(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f = length_unit(&unit).ok_or_else(|| unknown(parameter, &unit, "m, cm, mm, um, in"))?;
    Ok(v * f)
}

/// Inch in metres, exact by definition (international yard and pound agreement, 1959).
pub const INCH_M: f64 = 0.0254;
/// Foot in metres, exact by definition (12 inches).
pub const FOOT_M: f64 = 0.3048;
/// US liquid gallon in m³, exact by definition (231 cubic inches = 3.785411784 L).
pub const US_GALLON_M3: f64 = 3.785_411_784e-3;
/// Pound-force in newtons, exact by definition: the avoirdupois pound 0.45359237 kg (1959)
/// times standard gravity 9.80665 m/s² (3rd CGPM, 1901).
pub const POUND_FORCE_N: f64 = 0.453_592_37 * 9.806_65;
/// Pound-force per square inch in pascals, exact by definition: 6894.757293168… Pa.
pub const PSI_PA: f64 = POUND_FORCE_N / (INCH_M * INCH_M);

/// The flow-rate units [`parse_flow_rate`] accepts, as listed in its error message.
const FLOW_UNITS: &str = "m3/s, m3/h, L/s, L/min, L/h, mL/s, mL/min, mL/h, cm3/s, uL/min, gpm";

/// Factor from a volumetric flow-rate unit to m³/s; `""` is m³/s.
pub fn flow_rate_unit(unit: &str) -> Option<f64> {
    const LITRE: f64 = 1e-3;
    const MINUTE: f64 = 60.0;
    const HOUR: f64 = 3600.0;
    Some(match unit {
        "" | "m3/s" => 1.0,
        "m3/h" => 1.0 / HOUR,
        "L/s" | "l/s" => LITRE,
        "L/min" | "l/min" => LITRE / MINUTE,
        "L/h" | "l/h" => LITRE / HOUR,
        "mL/s" | "ml/s" | "cm3/s" => 1e-3 * LITRE,
        "mL/min" | "ml/min" | "cm3/min" => 1e-3 * LITRE / MINUTE,
        "mL/h" | "ml/h" | "cm3/h" => 1e-3 * LITRE / HOUR,
        // The micro sign (U+00B5) and the Greek mu (U+03BC) both occur in typed text.
        "uL/min" | "ul/min" | "µL/min" | "µl/min" | "μL/min" | "μl/min" => {
            1e-6 * LITRE / MINUTE
        }
        "gpm" => US_GALLON_M3 / MINUTE,
        _ => return None,
    })
}

/// A volumetric flow rate in m³/s, e.g. `2 L/min`, `1e-5 m3/s`, `50 uL/min`, `0.5gpm` (US
/// gallons per minute). The units are those of [`flow_rate_unit`].
pub fn parse_flow_rate(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f = flow_rate_unit(&unit).ok_or_else(|| unknown(parameter, &unit, FLOW_UNITS))?;
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

/// The pressure-gradient units [`parse_pressure_gradient`] accepts.
const GRADIENT_UNITS: &str = "Pa/m, Pa/mm, kPa/m, MPa/m, bar/m, mbar/m, mbar/mm, psi/ft";

/// Factor from a pressure-gradient unit to Pa/m; `""` is Pa/m.
pub fn pressure_gradient_unit(unit: &str) -> Option<f64> {
    Some(match unit {
        "" | "Pa/m" => 1.0,
        "Pa/mm" => 1e3,
        "kPa/m" => 1e3,
        "MPa/m" => 1e6,
        "bar/m" => 1e5,
        "mbar/m" => 1e2,
        "mbar/mm" => 1e2 / 1e-3,
        "psi/ft" => PSI_PA / FOOT_M,
        _ => return None,
    })
}

/// A pressure gradient in Pa/m: `1200`, `1.2 kPa/m`, `0.5 bar/m`, `3 mbar/mm`, `0.1 psi/ft`.
pub fn parse_pressure_gradient(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f =
        pressure_gradient_unit(&unit).ok_or_else(|| unknown(parameter, &unit, GRADIENT_UNITS))?;
    Ok(v * f)
}

/// The pressure units [`parse_pressure`] accepts.
const PRESSURE_UNITS: &str = "Pa, hPa, kPa, MPa, mbar, bar, psi";

/// Factor from a pressure unit to pascals; `""` is Pa.
pub fn pressure_unit(unit: &str) -> Option<f64> {
    Some(match unit {
        "" | "Pa" => 1.0,
        "hPa" | "mbar" => 1e2,
        "kPa" => 1e3,
        "MPa" => 1e6,
        "bar" => 1e5,
        "psi" => PSI_PA,
        _ => return None,
    })
}

/// A pressure (difference) in Pa, e.g. the `--pressure-drop` over a length: `250`, `2.5 kPa`,
/// `0.3 bar`, `40 mbar`, `5 psi`.
pub fn parse_pressure(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    let f = pressure_unit(&unit).ok_or_else(|| unknown(parameter, &unit, PRESSURE_UNITS))?;
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

/// Fewest significant digits [`format_significant`] prints.
pub const MIN_SIGNIFICANT_DIGITS: usize = 3;
/// Most significant digits [`format_significant`] prints.
pub const MAX_SIGNIFICANT_DIGITS: usize = 6;

/// The number of significant digits a relative uncertainty supports: the digits of `value`
/// down to the decade of its absolute uncertainty u = r·|value|, that is
/// 1 + ⌊log10 |value|⌋ − ⌊log10 u⌋, clamped to [3, 6].
///
/// The last digit printed is the first uncertain one (2 % of 120 is 2.4: "120"; 0.1 % of 120 is
/// 0.12: "120.0"). At least three digits, because a figure is compared with others and two
/// digits hide differences users care about; at most six, because no figure of this program is
/// better than that. An exact value (r = 0) gets six; an unknown one (r NaN, negative or
/// infinite) gets three.
pub fn significant_digits(value: f64, relative_uncertainty: f64) -> usize {
    let r = relative_uncertainty;
    if r == 0.0 {
        return MAX_SIGNIFICANT_DIGITS;
    }
    if !(r.is_finite() && r > 0.0 && value.is_finite() && value != 0.0) {
        return MIN_SIGNIFICANT_DIGITS;
    }
    // ⌊log10 |v|⌋ − ⌊log10 (r·|v|)⌋, computed without forming r·|v| (it could underflow).
    let lv = value.abs().log10();
    let digits = 1.0 + lv.floor() - (lv + r.log10()).floor();
    digits.clamp(MIN_SIGNIFICANT_DIGITS as f64, MAX_SIGNIFICANT_DIGITS as f64) as usize
}

/// `value` with the significant digits its relative uncertainty supports
/// ([`significant_digits`]): `format_significant(0.12003, 0.01)` is "0.120",
/// `format_significant(123456.7, 0.01)` is "123000", `format_significant(1.5e-7, 0.01)` is
/// "1.50e-7". Plain decimals from 1e-3 up to 1e6, scientific notation outside; "0" for zero and
/// Rust's "NaN", "inf", "-inf" for the rest. Never panics.
pub fn format_significant(value: f64, relative_uncertainty: f64) -> String {
    if !value.is_finite() {
        return format!("{value}");
    }
    if value == 0.0 {
        return "0".to_string();
    }
    let digits = significant_digits(value, relative_uncertainty);
    // Round first: the rounded value decides the decade (9.9996 to three digits is 10.0).
    let scientific = format!("{:.*e}", digits - 1, value);
    let rounded: f64 = scientific.parse().unwrap_or(value);
    let magnitude = rounded.abs();
    if !(1e-3..1e6).contains(&magnitude) {
        return scientific;
    }
    let exponent = magnitude.log10().floor() as i32;
    let decimals = (digits as i32 - 1 - exponent).max(0) as usize;
    format!("{rounded:.decimals$}")
}

/// A heat rate in W: `250`, `250W`, `1.5kW` (negative: heat taken from the fluid).
pub fn parse_heat_rate(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    match unit.as_str() {
        "" | "W" => Ok(v),
        "kW" => Ok(v * 1e3),
        _ => Err(unknown(parameter, &unit, "W, kW")),
    }
}

/// A heat flux in W/m²: `5000`, `5000W/m2`, `5kW/m2`, `0.5W/cm2`.
pub fn parse_heat_flux(text: &str, parameter: &str) -> Result<f64> {
    let (v, unit) = split(text, parameter)?;
    match unit.as_str() {
        "" | "W/m2" | "W/m²" => Ok(v),
        "kW/m2" | "kW/m²" => Ok(v * 1e3),
        "W/cm2" | "W/cm²" => Ok(v * 1e4),
        _ => Err(unknown(parameter, &unit, "W/m2, kW/m2, W/cm2")),
    }
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

    /// Relative difference, for factors that are exact in decimal but not in binary.
    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 4.0 * f64::EPSILON * b.abs()
    }

    #[test]
    fn flow_rate_units() {
        // Each against its definition: 1 L = 1e-3 m³, 1 mL = 1 cm³ = 1e-6 m³, 1 µL = 1e-9 m³.
        let cases = [
            ("60 uL/min", 1e-9),
            ("60 µL/min", 1e-9),
            ("60 μL/min", 1e-9),
            ("3600 mL/h", 1e-6),
            ("1 mL/s", 1e-6),
            ("1 cm3/s", 1e-6),
            ("3600 L/h", 1e-3),
            ("3600 m3/h", 1.0),
            ("60 gpm", 3.785_411_784e-3),
        ];
        for (text, si) in cases {
            assert!(close(parse_flow_rate(text, "q").unwrap(), si), "{text}");
        }
        let e = parse_flow_rate("1 bbl/d", "--flow")
            .unwrap_err()
            .to_string();
        assert!(e.contains("--flow") && e.contains("uL/min"), "{e}");
    }

    #[test]
    fn pressure_units() {
        // psi = 0.45359237 kg · 9.80665 m/s² / (0.0254 m)² = 6894.757293168361… Pa (exact
        // definitions; the reference is the quotient worked out by hand to 13 digits).
        assert!((PSI_PA / 6_894.757_293_168 - 1.0).abs() < 1e-12);
        assert!(close(
            parse_pressure_gradient("1 psi/ft", "g").unwrap(),
            PSI_PA / 0.3048
        ));
        assert!(close(
            parse_pressure_gradient("1 mbar/mm", "g").unwrap(),
            1e5
        ));
        assert!(close(parse_pressure("2.5 kPa", "dp").unwrap(), 2500.0));
        assert!(close(parse_pressure("40 mbar", "dp").unwrap(), 4000.0));
        assert!(close(parse_pressure("1 psi", "dp").unwrap(), PSI_PA));
        assert!(parse_pressure("1 atm", "dp").is_err());
        assert!(parse_pressure("NaN Pa", "dp").is_err());
    }

    #[test]
    fn significant_formatting() {
        assert_eq!(format_significant(0.120_003, 0.01), "0.120");
        assert_eq!(format_significant(120.034, 1e-3), "120.0");
        assert_eq!(format_significant(120.034, 0.02), "120");
        assert_eq!(format_significant(123_456.7, 0.01), "123000");
        assert_eq!(format_significant(1.5e-7, 0.01), "1.50e-7");
        assert_eq!(format_significant(9.9996, 0.01), "10.0");
        assert_eq!(format_significant(-0.5, 0.0), "-0.500000");
        assert_eq!(format_significant(1.234_567_89, 1e-12), "1.23457");
        assert_eq!(format_significant(1.234_567_89, f64::NAN), "1.23");
        assert_eq!(format_significant(0.0, 0.1), "0");
        assert_eq!(format_significant(f64::NAN, 0.1), "NaN");
        assert_eq!(format_significant(f64::INFINITY, 0.1), "inf");
        assert_eq!(format_significant(f64::MAX, 0.5), "1.80e308");
        assert_eq!(
            format_significant(f64::MIN_POSITIVE, 1e-300),
            "2.22507e-308"
        );
    }

    #[test]
    fn heat_rates_and_fluxes() {
        // Definitions of the SI prefixes (common practice, no source).
        assert_eq!(parse_heat_rate("1.5kW", "--heat-load").unwrap(), 1500.0);
        assert_eq!(parse_heat_rate("-20 W", "--heat-load").unwrap(), -20.0);
        assert_eq!(parse_heat_flux("0.5W/cm2", "--heat-flux").unwrap(), 5000.0);
        assert_eq!(parse_heat_flux("5kW/m2", "--heat-flux").unwrap(), 5000.0);
        assert!(parse_heat_flux("5 W/ft2", "--heat-flux").is_err());
    }
}
