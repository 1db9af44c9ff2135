//! Hydraulic resistance, pressure gradient and mean wall shear from a friction factor, in SI
//! units.
//!
//! # The laminar resistance per length
//!
//! Fully developed flow balances the pressure force on the cross-section against the wall
//! shear on the perimeter: G·A = τ̄_w·P with G = −dp/dx, so τ̄_w = G·D_h/4. The Fanning friction
//! factor is f = τ̄_w/(½·ρ·ū²) and Re = ρ·ū·D_h/μ, hence
//!
//! ```text
//! f·Re = 2·τ̄_w·D_h/(μ·ū) = G·D_h²/(2·μ·ū),   so   G = 2·μ·(f·Re)·ū/D_h² = 2·μ·(f·Re)·Q/(A·D_h²),
//! ```
//!
//! and the resistance per unit length R' = G/Q = 2·μ·(f·Re)/(D_h²·A) (Pa·s/m⁴), independent of
//! Q in laminar flow. Check: a circle, f·Re = 16, A = π·D²/4, D_h = D gives R' = 128·μ/(π·D⁴),
//! Hagen–Poiseuille. Over a length L, R = R'·L (Pa·s/m³) for fully developed flow; with entrance
//! and minor losses, R = Δp/Q from the total pressure drop ([`resistance`]).
//!
//! Beyond the laminar range, with the Darcy factor f_D of [`super::Duct::darcy_friction`]:
//! G = f_D·ρ·ū²/(2·D_h) ([`pressure_gradient`]), τ̄_w = f_D·ρ·ū²/8 ([`wall_shear_mean`]),
//! R' = G/Q = f_D·ρ·ū/(2·D_h·A) ([`resistance_per_length`] from G and Q), which grows with Q.

use super::{non_negative, positive};
use crate::error::Result;

/// Laminar hydraulic resistance per unit length R' = 2·μ·(f·Re)/(D_h²·A) in Pa·s/m⁴, from the
/// Fanning Poiseuille number, the viscosity (Pa·s), D_h (m) and the area A (m²).
pub fn laminar_resistance_per_length(
    fanning_f_re: f64,
    viscosity: f64,
    hydraulic_diameter: f64,
    area: f64,
) -> Result<f64> {
    positive(fanning_f_re, "laminar f·Re")?;
    positive(viscosity, "viscosity")?;
    positive(hydraulic_diameter, "hydraulic diameter")?;
    positive(area, "area")?;
    Ok(2.0 * viscosity * fanning_f_re / (hydraulic_diameter * hydraulic_diameter * area))
}

/// Hydraulic resistance per unit length R' = G/Q in Pa·s/m⁴ from a pressure gradient (Pa/m,
/// ≥ 0) and a flow rate (m³/s, > 0): any regime.
pub fn resistance_per_length(pressure_gradient: f64, flow_rate: f64) -> Result<f64> {
    non_negative(pressure_gradient, "pressure gradient")?;
    positive(flow_rate, "flow rate")?;
    Ok(pressure_gradient / flow_rate)
}

/// Hydraulic resistance R = Δp/Q in Pa·s/m³ over a length, from the pressure drop (Pa, ≥ 0;
/// the total one, with entrance and minor losses where they apply) and the flow rate (m³/s, > 0).
pub fn resistance(pressure_drop: f64, flow_rate: f64) -> Result<f64> {
    non_negative(pressure_drop, "pressure drop")?;
    positive(flow_rate, "flow rate")?;
    Ok(pressure_drop / flow_rate)
}

/// Fully developed pressure gradient G = f_D·ρ·ū²/(2·D_h) in Pa/m from the Darcy friction
/// factor, the density (kg/m³), the mean velocity (m/s, ≥ 0) and D_h (m).
pub fn pressure_gradient(
    darcy_f: f64,
    density: f64,
    mean_velocity: f64,
    hydraulic_diameter: f64,
) -> Result<f64> {
    positive(darcy_f, "Darcy friction factor")?;
    positive(density, "density")?;
    non_negative(mean_velocity, "mean velocity")?;
    positive(hydraulic_diameter, "hydraulic diameter")?;
    Ok(darcy_f * density * mean_velocity * mean_velocity / (2.0 * hydraulic_diameter))
}

/// Perimeter-mean wall shear stress τ̄_w = f_D·ρ·ū²/8 in Pa (the force balance τ̄_w·P = G·A).
pub fn wall_shear_mean(darcy_f: f64, density: f64, mean_velocity: f64) -> Result<f64> {
    positive(darcy_f, "Darcy friction factor")?;
    positive(density, "density")?;
    non_negative(mean_velocity, "mean velocity")?;
    Ok(darcy_f * density * mean_velocity * mean_velocity / 8.0)
}

/// The dimensionless pressure gradient f_D·Re² = 2·ρ·D_h³·G/μ² (the square of Kármán's
/// Re·√f_D), which fixes the operating point of a given gradient without knowing the flow
/// rate: pass it to [`super::Duct::reynolds_at`]. G in Pa/m (> 0), ρ in kg/m³, μ in Pa·s, D_h
/// in m.
pub fn darcy_re2(
    pressure_gradient: f64,
    density: f64,
    viscosity: f64,
    hydraulic_diameter: f64,
) -> Result<f64> {
    positive(pressure_gradient, "pressure gradient")?;
    positive(density, "density")?;
    positive(viscosity, "viscosity")?;
    positive(hydraulic_diameter, "hydraulic diameter")?;
    let value =
        2.0 * density * hydraulic_diameter.powi(3) * pressure_gradient / (viscosity * viscosity);
    positive(value, "f_D·Re² (pressure gradient)")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hagen_poiseuille() {
        // R' = 128·μ/(π·D⁴) for a circle (Hagen–Poiseuille, exact).
        let (mu, d) = (1e-3, 2e-3);
        let area = std::f64::consts::PI * d * d / 4.0;
        let r = laminar_resistance_per_length(16.0, mu, d, area).unwrap();
        let exact = 128.0 * mu / (std::f64::consts::PI * d.powi(4));
        assert!((r / exact - 1.0).abs() < 1e-14);
        assert!(laminar_resistance_per_length(16.0, f64::NAN, d, area).is_err());
        assert!(resistance(1.0, 0.0).is_err());
        assert!(darcy_re2(1.0, 1e300, 1e-300, 1e100).is_err());
    }
}
