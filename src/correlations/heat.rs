//! Heat transfer beyond the laminar range: Gnielinski's Nusselt number, his interpolation
//! across the transition, his entrance factor for the mean Nusselt number over a length, the
//! turbulent entrance lengths, and a duct's Nusselt number in every regime ([`Duct::nusselt`]).
//!
//! Nusselt numbers are on D_h. The laminar Nusselt number is an input (canalis's own, fully
//! developed or the thermal-entrance mean over the length), never a correlation here.

use super::{interpolate, positive, push_unique, Duct, Estimate, Model};
use crate::correlations::friction::{colebrook, konakov};
use crate::error::{Error, Result};

/// Lower anchor of Gnielinski's transitional interpolation: the laminar Nusselt number is
/// taken at Re = 2300 (Gnielinski 2013).
pub const NUSSELT_TRANSITION_LOW_RE: f64 = 2300.0;

/// Upper anchor of Gnielinski's transitional interpolation: his turbulent equation at
/// Re = 10⁴ (VDI Heat Atlas, chapter G1, from memory). Note: the abstract of Gnielinski (2013)
/// speaks of an interpolation between Re = 2300 and 4000; the body of that paper was not
/// available to check which anchor it finally recommends. Changing this constant moves the
/// anchor everywhere (the continuity tests follow it).
pub const NUSSELT_TRANSITION_HIGH_RE: f64 = 1e4;

/// Gnielinski's (1976) Nusselt number for fully developed turbulent flow in a tube,
///
/// ```text
/// Nu = (f/8)·(Re − 1000)·Pr / (1 + 12.7·√(f/8)·(Pr^(2/3) − 1)),
/// ```
///
/// with the Darcy friction factor `darcy_f` supplied by the caller (smooth tubes: [`konakov`],
/// as Gnielinski does; rough tubes: Colebrook–White). Valid for 2300 ≤ Re ≤ 5·10⁶ and
/// 0.5 ≤ Pr ≤ 2000 (warned outside); about ±20 %. An error where the equation gives no positive
/// value (Re ≤ 1000, or a denominator ≤ 0 at very small Pr with a large f).
pub fn gnielinski(re: f64, pr: f64, darcy_f: f64) -> Result<Estimate> {
    positive(re, "Reynolds number")?;
    positive(pr, "Prandtl number")?;
    positive(darcy_f, "Darcy friction factor")?;
    let f8 = darcy_f / 8.0;
    let denominator = 1.0 + 12.7 * f8.sqrt() * (pr.powf(2.0 / 3.0) - 1.0);
    let nu = f8 * (re - 1000.0) * pr / denominator;
    if !(nu.is_finite() && nu > 0.0 && denominator > 0.0) {
        return Err(Error::param(
            "Reynolds/Prandtl number",
            format!(
                "Gnielinski's equation gives no positive Nusselt number at Re = {re}, Pr = {pr}, \
                 f = {darcy_f}"
            ),
        ));
    }
    let mut e = Estimate::new(nu, Model::Gnielinski, Some(re));
    Model::Gnielinski.check(&[("Re", re), ("Pr", pr)], &mut e.warnings);
    Ok(e)
}

/// Gnielinski's factor for the mean Nusselt number over a length L from the inlet,
/// Nu_m = Nu_∞·(1 + (D_h/L)^(2/3)), for turbulent flow (Gnielinski 1976; VDI Heat Atlas, G1,
/// from memory). `length_ratio` = L/D_h > 0; +∞ gives 1. Warned for L < D_h.
pub fn gnielinski_entrance_factor(length_ratio: f64) -> Result<Estimate> {
    if length_ratio.is_nan() || length_ratio <= 0.0 {
        return Err(Error::param(
            "length L/D_h",
            format!("must be a positive number, got {length_ratio}"),
        ));
    }
    let value = 1.0 + (1.0 / length_ratio).powf(2.0 / 3.0);
    let mut e = Estimate::new(value, Model::GnielinskiEntrance, None);
    Model::GnielinskiEntrance.check(&[("L/D_h", length_ratio)], &mut e.warnings);
    Ok(e)
}

/// Turbulent hydrodynamic entrance length L_h/D_h = 1.359·Re^(1/4) (Zhi-qing 1982, from memory,
/// not confirmed; 14 at Re = 10⁴, 43 at 10⁶). Re on D_h; warned below 4000 (not turbulent).
pub fn turbulent_entrance_length_hydrodynamic(re: f64) -> Result<Estimate> {
    positive(re, "Reynolds number")?;
    let mut e = Estimate::new(
        1.359 * re.powf(0.25),
        Model::EntranceLengthHydrodynamic,
        None,
    );
    Model::EntranceLengthHydrodynamic.check(&[("Re", re)], &mut e.warnings);
    Ok(e)
}

/// Turbulent thermal entrance length L_t/D_h ≈ 10 (common practice, no source): for Pr ≳ 0.7
/// the local Nusselt number is within a few per cent of its fully developed value about ten
/// diameters from a heated inlet, nearly independent of Re. Warned below Re = 4000.
pub fn turbulent_entrance_length_thermal(re: f64) -> Result<Estimate> {
    positive(re, "Reynolds number")?;
    let mut e = Estimate::new(10.0, Model::EntranceLengthThermal, None);
    Model::EntranceLengthThermal.check(&[("Re", re)], &mut e.warnings);
    Ok(e)
}

impl Duct {
    /// Gnielinski's Nusselt number (on D_h) of the duct at `re` (on D_h), evaluated at the
    /// laminar-equivalent Re* = Re·D_le/D_h (Jones 1976; module docs) with the friction factor
    /// at Re*: Konakov's for a smooth wall (ε = 0, as Gnielinski), Colebrook–White's with
    /// ε/D_h for a rough one (the switch is not continuous in ε: as ε → 0 the two differ by up
    /// to 1.5 %, measured in tests/correlations.rs). With `length_ratio` = Some(L/D_h), the
    /// mean over the length: times [`gnielinski_entrance_factor`].
    pub fn turbulent_nusselt(
        &self,
        re: f64,
        pr: f64,
        length_ratio: Option<f64>,
    ) -> Result<Estimate> {
        positive(re, "Reynolds number")?;
        let re_star = self.reynolds_star(re);
        let friction = if self.relative_roughness == 0.0 {
            konakov(re_star)?
        } else {
            colebrook(re_star, self.relative_roughness)?
        };
        let mut e = gnielinski(re_star, pr, friction.value)?;
        e.absorb(&friction.warnings);
        if let Some(ld) = length_ratio {
            let factor = gnielinski_entrance_factor(ld)?;
            e.value *= factor.value;
            e.absorb(&factor.warnings);
        }
        for w in &mut e.warnings {
            if let Some(rest) = w.strip_prefix("Re = ") {
                *w = format!("Re* = {rest}");
            }
        }
        Ok(e)
    }

    /// The duct's Nusselt number (on D_h) at Reynolds number `re` ≥ 0 (on D_h) and Prandtl
    /// number `pr`, in every regime:
    ///
    /// - Re < 2300: `laminar(re)`, canalis's laminar Nusselt number at that Re (a constant for
    ///   fully developed flow; the thermal-entrance mean over the length otherwise, which
    ///   depends on Re through x* = L/(D_h·Re·Pr));
    /// - 2300 ≤ Re < 10⁴: Gnielinski's (2013) interpolation
    ///   Nu = (1 − γ)·Nu_lam(2300) + γ·Nu_turb(10⁴), γ = (Re − 2300)/(10⁴ − 2300), with
    ///   Nu_lam(2300) = `laminar(2300)` and Nu_turb from [`Duct::turbulent_nusselt`];
    /// - Re ≥ 10⁴: [`Duct::turbulent_nusselt`].
    ///
    /// The anchors are Gnielinski's published ones, not the regime thresholds: in a duct with
    /// sharp corners (transitional from 2000) the Nusselt number stays laminar up to 2300,
    /// which is conservative for heat transfer. Continuous at 2300 and 10⁴ to the last bit.
    /// `length_ratio` = Some(L/D_h) applies the entrance factor to the turbulent values; the
    /// laminar function is expected to include the length itself.
    pub fn nusselt(
        &self,
        re: f64,
        pr: f64,
        laminar: impl Fn(f64) -> f64,
        length_ratio: Option<f64>,
    ) -> Result<Estimate> {
        super::non_negative(re, "Reynolds number")?;
        positive(pr, "Prandtl number")?;
        let laminar_at = |re: f64| -> Result<f64> {
            let nu = laminar(re);
            if nu.is_finite() && nu > 0.0 {
                Ok(nu)
            } else {
                Err(Error::param(
                    "laminar Nusselt number",
                    format!("must be a positive finite number, got {nu} at Re = {re}"),
                ))
            }
        };
        let (lo, hi) = (NUSSELT_TRANSITION_LOW_RE, NUSSELT_TRANSITION_HIGH_RE);
        if re < lo {
            // The laminar solution holds at any Pr: nothing to check.
            return Ok(Estimate::new(laminar_at(re)?, Model::Laminar, None));
        }
        if re >= hi {
            return self.turbulent_nusselt(re, pr, length_ratio);
        }
        let nu_lam = laminar_at(lo)?;
        let turbulent_end = self.turbulent_nusselt(hi, pr, length_ratio)?;
        let value = interpolate(re, lo, hi, nu_lam, turbulent_end.value);
        let mut e = Estimate::new(value, Model::GnielinskiTransition, None);
        // The turbulent end carries the Pr and Re* warnings already.
        e.absorb(&turbulent_end.warnings);
        push_unique(
            &mut e.warnings,
            format!(
                "Re = {} is in the transition of heat transfer ({lo}–{hi}): the Nusselt number \
                 is interpolated between laminar and turbulent flow (Gnielinski 2013)",
                crate::units::format_significant(re, 0.01)
            ),
        );
        Ok(e)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::correlations::FrictionModel;
    use crate::correlations::Thresholds;

    #[test]
    fn bad_inputs_are_errors_not_panics() {
        assert!(gnielinski(500.0, 1.0, 0.03).is_err());
        assert!(gnielinski(1e4, f64::NAN, 0.03).is_err());
        assert!(gnielinski(1e4, 1e-6, 0.5).is_err());
        assert!(gnielinski_entrance_factor(0.0).is_err());
        assert!(gnielinski_entrance_factor(f64::NAN).is_err());
        assert_eq!(
            gnielinski_entrance_factor(f64::INFINITY).unwrap().value,
            1.0
        );
        let duct = Duct::new(15.0, 0.0, Thresholds::ROUND, FrictionModel::ColebrookWhite).unwrap();
        assert!(duct.nusselt(5000.0, 1.0, |_| f64::NAN, None).is_err());
        assert!(duct.nusselt(-1.0, 1.0, |_| 4.0, None).is_err());
        assert!(duct.nusselt(5000.0, 1.0, |_| 4.0, Some(-2.0)).is_err());
    }
}
