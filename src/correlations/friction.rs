//! Darcy friction factors: Colebrook–White (solved), Churchill (explicit, all regimes), the
//! smooth-tube Konakov form, and a duct's friction factor in every regime
//! ([`Duct::darcy_friction`]) with the operating point from a pressure gradient
//! ([`Duct::reynolds_at`]).
//!
//! All factors are Darcy's, f_D = 4·f_Fanning, of a round tube at Reynolds number Re and
//! relative roughness ε/D; [`Duct`] maps a cross-section onto them (module docs of
//! [`crate::correlations`]).

use super::{
    interpolate, non_negative, positive, push_unique, Duct, Estimate, Model, Regime,
    CIRCLE_FANNING_F_RE,
};
use crate::error::{Error, Result};
use crate::units::format_significant;

/// The turbulent friction correlation of a [`Duct`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FrictionModel {
    /// Colebrook–White, solved to round-off ([`colebrook`]). The default: it is the equation the
    /// Moody chart draws.
    #[default]
    ColebrookWhite,
    /// Churchill 1977 ([`churchill`]), explicit.
    Churchill,
}

impl FrictionModel {
    fn evaluate(self, re: f64, relative_roughness: f64) -> Result<Estimate> {
        match self {
            FrictionModel::ColebrookWhite => colebrook(re, relative_roughness),
            FrictionModel::Churchill => churchill(re, relative_roughness),
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Colebrook–White
// ---------------------------------------------------------------------------------------------

/// Controls of the Colebrook–White solve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ColebrookParams {
    /// Stop when a Newton step changes x = 1/√f_D by less than this fraction of x.
    pub tolerance: f64,
    /// Give up (with [`Error::NotConverged`]) after this many iterations.
    pub max_iterations: usize,
}

impl Default for ColebrookParams {
    fn default() -> Self {
        ColebrookParams {
            tolerance: 1e-14,
            max_iterations: 100,
        }
    }
}

/// What the Colebrook–White solve did.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ColebrookInfo {
    /// Newton (or bisection) steps taken.
    pub iterations: usize,
    /// |g(x)|/x at the returned x, g the residual of the equation below.
    pub relative_residual: f64,
}

/// Darcy friction factor f_D from the Colebrook–White equation,
///
/// ```text
/// 1/√f = −2·log10( (ε/D)/3.7 + 2.51/(Re·√f) ),
/// ```
///
/// solved for x = 1/√f as the root of g(x) = x + 2·log10(a + b·x), a = (ε/D)/3.7, b = 2.51/Re.
/// g is increasing and concave in x > 0 with g(0⁺) < 0 (a < 1) and g(∞) = ∞, so the root is
/// unique. The solve brackets it (lower end where a + b·x ≤ a + 0.1, upper end doubled until
/// g > 0) and runs Newton's method, falling back to bisection whenever a step leaves the
/// bracket; quadratic convergence, 3–6 steps from the start x = 8 at ordinary Re.
///
/// Solved for any finite Re > 0 and 0 ≤ ε/D < 1 (beyond that an error: the equation keeps a
/// root up to ε/D = 3.7, but a roughness as tall as the diameter is none); [`colebrook`] warns
/// outside the equation's range. Non-convergence within `max_iterations` is
/// [`Error::NotConverged`] with the residual.
pub fn colebrook_solve(
    re: f64,
    relative_roughness: f64,
    params: &ColebrookParams,
) -> Result<(f64, ColebrookInfo)> {
    positive(re, "Reynolds number")?;
    non_negative(relative_roughness, "relative roughness ε/D")?;
    if relative_roughness >= 1.0 {
        return Err(Error::param(
            "relative roughness ε/D",
            format!("{relative_roughness} is not a wall roughness (it must be below 1)"),
        ));
    }
    let a = relative_roughness / 3.7;
    let b = 2.51 / re;
    if !b.is_finite() {
        return Err(Error::param(
            "Reynolds number",
            format!("{re} is too small for the Colebrook–White equation"),
        ));
    }
    let g = |x: f64| x + 2.0 * (a + b * x).log10();
    let dg = |x: f64| 1.0 + 2.0 / std::f64::consts::LN_10 * b / (a + b * x);

    // Bracket: at lo, a + b·lo ≤ a + 0.1 < 0.371 (a < 1/3.7), so g(lo) ≤ 0.1 + 2·log10(0.371) < 0.
    let mut lo = (0.1 / b).min(0.1);
    let mut hi = 1.0_f64;
    let mut doublings = 0;
    while g(hi) <= 0.0 {
        lo = hi;
        hi *= 2.0;
        doublings += 1;
        if doublings > 1100 || !hi.is_finite() {
            return Err(Error::Numerical(format!(
                "Colebrook–White: no upper bracket for Re = {re}, ε/D = {relative_roughness}"
            )));
        }
    }

    let mut x = 8.0_f64.clamp(lo, hi);
    let mut iterations = 0;
    while iterations < params.max_iterations {
        iterations += 1;
        let gx = g(x);
        if gx == 0.0 {
            return Ok(finish(x, 0.0, iterations));
        }
        if gx < 0.0 {
            lo = x;
        } else {
            hi = x;
        }
        let newton = x - gx / dg(x);
        let next = if newton > lo && newton < hi {
            newton
        } else {
            0.5 * (lo + hi)
        };
        let step = (next - x).abs();
        x = next;
        if step <= params.tolerance * x || hi - lo <= params.tolerance * x {
            let r = g(x).abs() / x;
            return Ok(finish(x, r, iterations));
        }
    }
    Err(Error::NotConverged {
        solve: None,
        stall: crate::error::Stall::IterationLimit,
        method: "Colebrook–White Newton".to_string(),
        iterations,
        relative_residual: g(x).abs() / x,
        tolerance: params.tolerance,
    })
}

fn finish(x: f64, relative_residual: f64, iterations: usize) -> (f64, ColebrookInfo) {
    (
        1.0 / (x * x),
        ColebrookInfo {
            iterations,
            relative_residual,
        },
    )
}

/// Colebrook–White Darcy friction factor at (Re, ε/D) with the default solve controls, as an
/// [`Estimate`]. Valid for turbulent flow, 4000 ≤ Re ≤ 10⁸, 0 ≤ ε/D ≤ 0.05 (warned outside);
/// about ±15 % against measurements.
pub fn colebrook(re: f64, relative_roughness: f64) -> Result<Estimate> {
    let (f, _) = colebrook_solve(re, relative_roughness, &ColebrookParams::default())?;
    let mut e = Estimate::new(f, Model::ColebrookWhite, Some(re));
    Model::ColebrookWhite.check(&[("Re", re), ("ε/D", relative_roughness)], &mut e.warnings);
    Ok(e)
}

// ---------------------------------------------------------------------------------------------
// Churchill
// ---------------------------------------------------------------------------------------------

/// Darcy friction factor from Churchill's (1977) equation for all regimes,
///
/// ```text
/// f = 8·[ (8/Re)¹² + (A + B)^(−3/2) ]^(1/12),
/// A = [ 2.457·ln( 1/((7/Re)^0.9 + 0.27·ε/D) ) ]¹⁶,   B = (37530/Re)¹⁶.
/// ```
///
/// Laminar limit 64/Re, turbulent limit close to Colebrook–White, a smooth (but not measured)
/// bridge between. A and B overflow a double at ordinary Re (A ~ 10¹⁸, B ~ 10⁷⁰ at Re = 10),
/// so it is evaluated in logarithms (log-sum-exp). An error only when Re is so small that f
/// itself exceeds the largest double.
pub fn churchill(re: f64, relative_roughness: f64) -> Result<Estimate> {
    positive(re, "Reynolds number")?;
    non_negative(relative_roughness, "relative roughness ε/D")?;
    let ln_re = re.ln();
    let ln_laminar = 12.0 * (8.0_f64.ln() - ln_re);
    let inner = (0.9 * (7.0_f64.ln() - ln_re)).exp() + 0.27 * relative_roughness;
    // A is an even power: its sign inside does not matter; ln 0 = −∞ is handled by ln_add_exp.
    let ln_a = 16.0 * (2.457 * inner.ln().abs()).ln();
    let ln_b = 16.0 * (37530.0_f64.ln() - ln_re);
    let ln_sum = ln_add_exp(ln_laminar, -1.5 * ln_add_exp(ln_a, ln_b));
    let f = 8.0 * (ln_sum / 12.0).exp();
    if !f.is_finite() {
        return Err(Error::param(
            "Reynolds number",
            format!("{re} is too small: the friction factor exceeds the largest number"),
        ));
    }
    let mut e = Estimate::new(f, Model::Churchill, Some(re));
    Model::Churchill.check(&[("Re", re), ("ε/D", relative_roughness)], &mut e.warnings);
    Ok(e)
}

/// ln(eˣ + eʸ) without overflow; −∞ arguments are zeros.
fn ln_add_exp(x: f64, y: f64) -> f64 {
    let (big, small) = if x >= y { (x, y) } else { (y, x) };
    if big == f64::NEG_INFINITY {
        return f64::NEG_INFINITY;
    }
    big + (small - big).exp().ln_1p()
}

// ---------------------------------------------------------------------------------------------
// Konakov (smooth tubes, inside Gnielinski's equation)
// ---------------------------------------------------------------------------------------------

/// Smooth-tube Darcy friction factor f = (1.8·log10 Re − 1.5)⁻², the form Gnielinski uses in
/// his Nusselt equation (attributed to Konakov; from memory). Defined for Re > 10^(1.5/1.8) ≈ 6.8
/// (an error below); warned outside 2300 ≤ Re ≤ 5·10⁶.
pub fn konakov(re: f64) -> Result<Estimate> {
    positive(re, "Reynolds number")?;
    let d = 1.8 * re.log10() - 1.5;
    if d <= 0.0 {
        return Err(Error::param(
            "Reynolds number",
            format!("{re} is below where the smooth-tube friction formula is defined"),
        ));
    }
    let mut e = Estimate::new(1.0 / (d * d), Model::Konakov, Some(re));
    Model::Konakov.check(&[("Re", re)], &mut e.warnings);
    Ok(e)
}

// ---------------------------------------------------------------------------------------------
// A duct in every regime
// ---------------------------------------------------------------------------------------------

impl Duct {
    /// The duct's turbulent friction model at the laminar-equivalent Reynolds number
    /// Re* = Re·D_le/D_h with relative roughness ε/D_h (Jones 1976; module docs).
    pub fn turbulent_friction(&self, re: f64) -> Result<Estimate> {
        positive(re, "Reynolds number")?;
        let mut e = self
            .friction_model
            .evaluate(self.reynolds_star(re), self.relative_roughness)?;
        // The correlation's own range is on Re*; the warnings say so.
        for w in &mut e.warnings {
            if let Some(rest) = w.strip_prefix("Re = ") {
                *w = format!("Re* = {rest}");
            }
        }
        Ok(e)
    }

    /// Darcy friction factor on D_h at Reynolds number `re` (on D_h, > 0), by regime:
    ///
    /// - laminar: f_D = 4·(f·Re)/Re, canalis's exact laminar value;
    /// - turbulent: the friction model at Re* ([`Duct::turbulent_friction`]);
    /// - transitional: f = (1 − γ)·f_lam(Re_lo) + γ·f_turb(Re_hi),
    ///   γ = (Re − Re_lo)/(Re_hi − Re_lo), with Re_lo, Re_hi the thresholds. canalis's choice
    ///   (no source), after the manner of Gnielinski's interpolation of Nu: continuous at both
    ///   thresholds, and f_D·Re² increasing in Re, so a pressure drop has exactly one flow rate.
    ///   A warning gives the fully turbulent value at the same Re, which intermittent flow may
    ///   reach.
    ///
    /// Churchill's equation has a transition of its own, but it rises from the laminar line
    /// between Re ≈ 2000 and 2300 (+36 % at 2300 against 64/Re) whatever the thresholds say, so
    /// it is used above the upper threshold only, like Colebrook–White.
    pub fn darcy_friction(&self, re: f64) -> Result<Estimate> {
        positive(re, "Reynolds number")?;
        match self.regime(re)? {
            Regime::Laminar => Ok(Estimate::new(
                4.0 * self.fanning_f_re / re,
                Model::Laminar,
                None,
            )),
            Regime::Turbulent => self.turbulent_friction(re),
            Regime::Transitional => {
                let (lo, hi) = (self.thresholds.lower(), self.thresholds.upper());
                let laminar = 4.0 * self.fanning_f_re / lo;
                let turbulent_end = self.turbulent_friction(hi)?;
                let value = interpolate(re, lo, hi, laminar, turbulent_end.value);
                let mut e = Estimate::new(value, Model::TransitionalFriction, None);
                e.absorb(&turbulent_end.warnings);
                let here = self.turbulent_friction(re)?;
                push_unique(
                    &mut e.warnings,
                    format!(
                        "Re = {} is transitional ({}–{}): the friction factor {} is interpolated \
                         between laminar and turbulent flow; intermittent flow may reach the \
                         turbulent value {} ({})",
                        format_significant(re, 0.01),
                        lo,
                        hi,
                        format_significant(value, 0.01),
                        format_significant(here.value, 0.01),
                        here.model.name()
                    ),
                );
                Ok(e)
            }
        }
    }

    /// The Reynolds number (on D_h) at which f_D(Re)·Re² equals `darcy_re2`, that is the
    /// operating point of a given pressure gradient G: f_D·Re² = 2·ρ·D_h³·G/μ²
    /// ([`super::darcy_re2`]). In the laminar range the answer is exact,
    /// Re = darcy_re2/(4·f·Re); beyond it, bisection on ln Re of the continuous, increasing
    /// f_D(Re)·Re² of [`Duct::darcy_friction`] to a relative 1e-13 (at most 200 steps).
    pub fn reynolds_at(&self, darcy_re2: f64) -> Result<f64> {
        positive(darcy_re2, "f_D·Re² (pressure gradient)")?;
        let laminar = darcy_re2 / (4.0 * self.fanning_f_re);
        let lower = self.thresholds.lower();
        if laminar < lower {
            return Ok(laminar);
        }
        let excess =
            |re: f64| -> Result<f64> { Ok(self.darcy_friction(re)?.value * re * re - darcy_re2) };
        // f_D·Re² at the lower threshold is the laminar 4·(f·Re)·lower ≤ darcy_re2.
        let mut lo = lower;
        let mut hi = laminar.max(self.thresholds.upper()) * 2.0;
        let mut doublings = 0;
        while excess(hi)? < 0.0 {
            lo = hi;
            hi *= 2.0;
            doublings += 1;
            if doublings > 1000 || !hi.is_finite() {
                return Err(Error::Numerical(format!(
                    "no Reynolds number gives f_D·Re² = {darcy_re2:e}"
                )));
            }
        }
        geometric_bisection(lo, hi, excess)
    }
}

/// The root of an increasing `f` between `lo` (f < 0) and `hi` (f ≥ 0), by bisection at the
/// geometric mean (bisection on the logarithm, without overflow) to a relative 1e-13, at most
/// 200 steps; the midpoint of the last bracket.
pub(crate) fn geometric_bisection(
    mut lo: f64,
    mut hi: f64,
    f: impl Fn(f64) -> Result<f64>,
) -> Result<f64> {
    for _ in 0..200 {
        let mid = lo.sqrt() * hi.sqrt();
        if f(mid)? < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= 1e-13 * hi {
            break;
        }
    }
    Ok(0.5 * (lo + hi))
}

/// Laminar-equivalent diameter ratio D_le/D_h = 64/(4·f·Re) of a cross-section with Fanning
/// Poiseuille number `fanning_f_re` (Jones 1976); 1 for a circle.
pub fn laminar_equivalent_ratio(fanning_f_re: f64) -> Result<f64> {
    positive(fanning_f_re, "laminar f·Re")?;
    Ok(CIRCLE_FANNING_F_RE / fanning_f_re)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn colebrook_converges_fast_and_everywhere() {
        let p = ColebrookParams::default();
        for re in [1e-3, 1.0, 2000.0, 1e4, 1e6, 1e12, 1e300, f64::MAX] {
            for r in [0.0, 1e-6, 0.01, 0.05, 0.4] {
                let (f, info) = colebrook_solve(re, r, &p).unwrap();
                assert!(f.is_finite() && f > 0.0, "Re {re} r {r}: {f}");
                assert!(info.iterations <= 60, "Re {re} r {r}: {info:?}");
                assert!(info.relative_residual < 1e-12, "Re {re} r {r}: {info:?}");
            }
        }
        assert!(colebrook_solve(f64::NAN, 0.0, &p).is_err());
        assert!(colebrook_solve(1e4, -0.1, &p).is_err());
        assert!(colebrook_solve(1e4, 1.0, &p).is_err());
        assert!(colebrook_solve(1e-320, 0.0, &p).is_err());
        let capped = ColebrookParams {
            tolerance: 0.0,
            max_iterations: 3,
        };
        assert!(matches!(
            colebrook_solve(1e5, 0.0, &capped),
            Err(Error::NotConverged { iterations: 3, .. })
        ));
    }

    #[test]
    fn churchill_never_overflows() {
        for re in [1e-300, 1e-3, 1.0, 10.0, 2300.0, 1e5, 1e300, f64::MAX] {
            let f = churchill(re, 0.01).unwrap().value;
            assert!(f.is_finite() && f > 0.0, "Re {re}: {f}");
        }
        assert!(churchill(1e-320, 0.0).is_err());
    }

    #[test]
    fn reynolds_at_inverts_the_friction_law() {
        let duct = Duct::circle(1e-3).unwrap();
        for re in [100.0, 2299.0, 2300.0, 3000.0, 4000.0, 4001.0, 1e5, 1e8] {
            let target = duct.darcy_friction(re).unwrap().value * re * re;
            let back = duct.reynolds_at(target).unwrap();
            assert!((back / re - 1.0).abs() < 1e-11, "{re} → {back}");
        }
    }
}
