//! Flow regime, and the friction and heat-transfer correlations that give an answer at every
//! flow rate, laminar, transitional or turbulent (issue 18).
//!
//! Owns: the regime thresholds and [`LAMINAR_WARNING_RE`]; the Darcy friction factor by
//! Colebrook–White and by Churchill ([`friction`]); Gnielinski's Nusselt number, its
//! transitional interpolation, its entrance correction and the turbulent entrance lengths
//! ([`heat`]); hydraulic resistance, pressure gradient and mean wall shear from a friction factor
//! ([`resistance`](mod@resistance)); and, in [`Duct`], the rule that carries all of them over to
//! a non-circular cross-section through canalis's own laminar solution (Jones's
//! laminar-equivalent diameter).
//! Every value comes as an [`Estimate`]: the number, the [`Model`] that gave it (with its source,
//! stated accuracy and validity range) and the warnings for inputs outside that range.
//!
//! Does not: solve anything on a grid, know geometry, fluids or the report. It takes
//! dimensionless numbers (Re, Pr, ε/D_h, L/D_h) and the laminar results (f·Re, a laminar Nusselt
//! number) as plain numbers. Bad input (NaN, infinite, negative where a size is meant) is an
//! [`Error::InvalidParameter`]; input outside a model's validity range is computed and warned
//! about; nothing panics.
//!
//! # Conventions
//!
//! - Re = ρ·ū·D_h/μ on the hydraulic diameter D_h = 4A/P. The regime thresholds apply to it.
//! - Darcy friction factor f_D = 4·f (Fanning): Δp/L = f_D·ρ·ū²/(2·D_h), τ̄_w = f_D·ρ·ū²/8.
//!   canalis's laminar solution gives the Fanning Poiseuille number f·Re (16 for a circle), so
//!   the laminar Darcy factor is f_D = 4·(f·Re)/Re.
//! - Nusselt numbers are on D_h: h = Nu·k/D_h.
//!
//! # Non-circular ducts: the laminar-equivalent diameter (Jones 1976)
//!
//! Jones (O. C. Jones Jr., An improvement in the calculation of turbulent friction in
//! rectangular ducts, J. Fluids Eng. 98 (1976) 173–180; pages from memory) observed that
//! turbulent friction in smooth rectangular ducts follows the circular-tube law when the Reynolds
//! number is formed not on D_h but on the laminar-equivalent diameter
//!
//! ```text
//! D_le = (64 / (f_D·Re)_laminar) · D_h = (16 / (f·Re)_laminar) · D_h,
//! ```
//!
//! the diameter of the circle that has the duct's laminar friction at the same velocity. canalis
//! knows (f·Re)_laminar of any cross-section from its own solution, so a duct's turbulent friction
//! factor is the circular-tube correlation evaluated at
//!
//! ```text
//! Re* = Re · D_le/D_h = Re · 16/(f·Re)_laminar,
//! ```
//!
//! and the result is the Darcy factor on D_h (Δp/L = f_D·ρ·ū²/(2·D_h)). Jones's ducts were
//! smooth; for rough walls the convention is canalis's (common practice, no source): relative
//! roughness ε/D_h, not ε/D_le. Why: the fully rough limit of Colebrook's equation does not
//! depend on Re at all; it is a wall-layer law whose only length is the one the wall shear is
//! averaged over, A/P = D_h/4 (the force balance τ̄_w·P = A·Δp/L), so the hydraulic diameter is
//! the scale that makes a rough duct's wall stress match a rough tube's; the laminar-equivalent
//! diameter only corrects the viscous (smooth) part. The same Re* is used for the Nusselt number (Gnielinski's
//! equation evaluated at Re*, with the friction factor at Re*): the analogy behind Gnielinski's
//! equation ties Nu to the friction factor, so the correction that makes friction match carries
//! over; Nu stays on D_h. For a circle Re* = Re to the accuracy of the computed f·Re.
//!
//! # Regimes and thresholds
//!
//! [`regime`] classifies Re with [`Thresholds`]: laminar below the lower threshold,
//! transitional from the lower up to and including the upper, turbulent above. Round tubes:
//! 2300 and 4000 ([`Thresholds::ROUND`], common practice, no source). Ducts with sharp corners:
//! 2000 and 4000 ([`Thresholds::SHARP_CORNERS`]), see there. The laminar warning threshold
//! [`LAMINAR_WARNING_RE`] (2000) is the one constant the binary and the library share.
//!
//! In the transitional range the friction factor is interpolated linearly in Re between the
//! laminar value at the lower threshold and the turbulent correlation at the upper one (canalis's
//! choice, no source; see [`Duct::darcy_friction`]); the Nusselt number follows Gnielinski's
//! interpolation between Re = 2300 and 10⁴ (see [`Duct::nusselt`]). Both are continuous, so an
//! operating point found from a pressure drop is unique ([`Duct::reynolds_at`]).

pub mod friction;
pub mod heat;
pub mod resistance;

pub use friction::{
    churchill, colebrook, colebrook_solve, konakov, laminar_equivalent_ratio, ColebrookInfo,
    ColebrookParams, FrictionModel,
};
pub use heat::{
    gnielinski, gnielinski_entrance_factor, turbulent_entrance_length_hydrodynamic,
    turbulent_entrance_length_thermal, NUSSELT_TRANSITION_HIGH_RE, NUSSELT_TRANSITION_LOW_RE,
};
pub use resistance::{
    darcy_re2, laminar_resistance_per_length, pressure_gradient, resistance, resistance_per_length,
    wall_shear_mean,
};

use crate::error::{Error, Result};
use crate::units::format_significant;
use std::fmt;

/// Reynolds number above which a laminar result is flagged as possibly not laminar, in every
/// cross-section: the binary's warning and the library's [`Thresholds::SHARP_CORNERS`] lower
/// bound. Transition is usual near Re ≈ 2300 in round tubes (common practice, no source); it is
/// warned from 2000 to leave a margin for disturbed inlets and sharp corners.
pub const LAMINAR_WARNING_RE: f64 = 2000.0;

/// Fanning Poiseuille number f·Re of the circle (Hagen–Poiseuille, exact): the reference of the
/// laminar-equivalent diameter, D_le/D_h = 16/(f·Re).
pub const CIRCLE_FANNING_F_RE: f64 = 16.0;

// ---------------------------------------------------------------------------------------------
// Regime
// ---------------------------------------------------------------------------------------------

/// The flow regime of an operating point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Regime {
    /// Below the lower threshold: canalis's laminar solution holds.
    Laminar,
    /// Between the thresholds (inclusive): intermittent flow, interpolated values.
    Transitional,
    /// Above the upper threshold: the turbulent correlations.
    Turbulent,
}

impl Regime {
    /// The name used in the report (`"laminar"`, `"transitional"`, `"turbulent"`).
    pub fn as_str(self) -> &'static str {
        match self {
            Regime::Laminar => "laminar",
            Regime::Transitional => "transitional",
            Regime::Turbulent => "turbulent",
        }
    }
}

impl fmt::Display for Regime {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The Reynolds numbers (on D_h) that bound the transitional range: laminar below `lower`,
/// turbulent above `upper`. Built by [`Thresholds::new`] or one of the constants, so that
/// 0 < lower < upper always holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Thresholds {
    lower: f64,
    upper: f64,
}

impl Thresholds {
    /// Round tubes (and smooth, rounded cross-sections: ellipses, annuli, rounded rectangles):
    /// laminar below 2300, turbulent above 4000 (common practice, no source).
    pub const ROUND: Thresholds = Thresholds {
        lower: 2300.0,
        upper: 4000.0,
    };

    /// Ducts with sharp corners (rectangles, triangles, polygons, fins): laminar below 2000
    /// ([`LAMINAR_WARNING_RE`]), turbulent above 4000.
    ///
    /// Why lower: in a sharp corner the fluid is slow and the core fast, and reports of
    /// transition in rectangular and triangular ducts put its start at or somewhat below the
    /// round-tube 2300 (from memory, no figure confirmed here), with corner and core not
    /// changing regime together. canalis has no better number, so it is conservative: a laminar
    /// result is not claimed beyond the Reynolds number at which it already warns in every duct.
    /// The transitional friction factor, interpolated from this lower threshold, is then higher
    /// than a round tube's at the same Re (conservative for the pressure drop), and the Nusselt
    /// number stays laminar up to 2300 (conservative for heat transfer). The upper threshold
    /// stays 4000: moving it up would lower the interpolated friction factor between 4000 and
    /// the new bound below the turbulent correlation, which is not conservative, and there is
    /// no data here to place it.
    pub const SHARP_CORNERS: Thresholds = Thresholds {
        lower: LAMINAR_WARNING_RE,
        upper: 4000.0,
    };

    /// Thresholds of one's own; both finite with 0 < lower < upper.
    pub fn new(lower: f64, upper: f64) -> Result<Self> {
        positive(lower, "lower Reynolds threshold")?;
        positive(upper, "upper Reynolds threshold")?;
        if lower >= upper {
            return Err(Error::param(
                "Reynolds thresholds",
                format!("the lower threshold {lower} must be below the upper one {upper}"),
            ));
        }
        Ok(Thresholds { lower, upper })
    }

    /// The round-tube or the sharp-corner thresholds.
    pub fn for_duct(sharp_corners: bool) -> Self {
        if sharp_corners {
            Self::SHARP_CORNERS
        } else {
            Self::ROUND
        }
    }

    /// Laminar below this Reynolds number.
    pub fn lower(&self) -> f64 {
        self.lower
    }

    /// Turbulent above this Reynolds number.
    pub fn upper(&self) -> f64 {
        self.upper
    }
}

/// The regime of Reynolds number `re` (on D_h): laminar for re < lower, transitional for
/// lower ≤ re ≤ upper, turbulent for re > upper. Re = 0 (no flow) is laminar; a negative, NaN
/// or infinite Re is an error.
pub fn regime(re: f64, thresholds: Thresholds) -> Result<Regime> {
    non_negative(re, "Reynolds number")?;
    Ok(if re < thresholds.lower {
        Regime::Laminar
    } else if re <= thresholds.upper {
        Regime::Transitional
    } else {
        Regime::Turbulent
    })
}

// ---------------------------------------------------------------------------------------------
// Models and estimates
// ---------------------------------------------------------------------------------------------

/// One inclusive range of an input quantity over which a model was established.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bound {
    /// The quantity's symbol as the warnings print it: "Re", "Pr", "ε/D", "L/D_h".
    pub quantity: &'static str,
    pub min: f64,
    pub max: f64,
}

impl Bound {
    const fn new(quantity: &'static str, min: f64, max: f64) -> Self {
        Bound { quantity, min, max }
    }

    /// Whether `value` lies in the range.
    pub fn contains(&self, value: f64) -> bool {
        self.min <= value && value <= self.max
    }
}

impl fmt::Display for Bound {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // Bounds are round numbers: print them as written ("4000", "0.05", "5e6").
        let show = |v: f64| {
            if v == f64::INFINITY {
                "∞".to_string()
            } else if v.abs() >= 1e5 {
                format!("{v:e}")
            } else {
                format!("{v}")
            }
        };
        write!(
            f,
            "{} ≤ {} ≤ {}",
            show(self.min),
            self.quantity,
            show(self.max)
        )
    }
}

/// The accuracy a model's source states (or, where marked, the usual statement of it).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Accuracy {
    /// Relative accuracy as a fraction (0.15 for ±15 %), when one is stated.
    pub relative: Option<f64>,
    /// One sentence: what the figure means and where it comes from.
    pub statement: &'static str,
}

/// The models and correlations behind an [`Estimate`]. `key` is stable (for JSON), `name`
/// human-readable with its year, `source` the full reference.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Model {
    /// canalis's own fully developed laminar solution of the cross-section.
    Laminar,
    /// Colebrook–White equation, solved iteratively.
    ColebrookWhite,
    /// Churchill's single equation for all regimes.
    Churchill,
    /// The smooth-tube friction factor (1.8·log10 Re − 1.5)⁻² inside Gnielinski's equation.
    Konakov,
    /// Linear interpolation in Re between the laminar and the turbulent friction factor.
    TransitionalFriction,
    /// Gnielinski's turbulent Nusselt number.
    Gnielinski,
    /// Gnielinski's interpolation between laminar and turbulent Nusselt numbers.
    GnielinskiTransition,
    /// Gnielinski's entrance factor 1 + (D_h/L)^(2/3) of the mean Nusselt number.
    GnielinskiEntrance,
    /// Turbulent hydrodynamic entrance length L_h/D_h = 1.359·Re^(1/4).
    EntranceLengthHydrodynamic,
    /// Turbulent thermal entrance length L_t/D_h ≈ 10.
    EntranceLengthThermal,
}

impl Model {
    /// Stable identifier, for machine-readable output.
    pub fn key(self) -> &'static str {
        match self {
            Model::Laminar => "laminar",
            Model::ColebrookWhite => "colebrook_white",
            Model::Churchill => "churchill",
            Model::Konakov => "konakov",
            Model::TransitionalFriction => "transitional_interpolation",
            Model::Gnielinski => "gnielinski",
            Model::GnielinskiTransition => "gnielinski_transition",
            Model::GnielinskiEntrance => "gnielinski_entrance",
            Model::EntranceLengthHydrodynamic => "turbulent_entrance_hydrodynamic",
            Model::EntranceLengthThermal => "turbulent_entrance_thermal",
        }
    }

    /// Short human-readable name with the year.
    pub fn name(self) -> &'static str {
        match self {
            Model::Laminar => "laminar solution (canalis)",
            Model::ColebrookWhite => "Colebrook–White (1939)",
            Model::Churchill => "Churchill (1977)",
            Model::Konakov => "Konakov smooth-tube friction factor",
            Model::TransitionalFriction => "laminar–turbulent interpolation (canalis)",
            Model::Gnielinski => "Gnielinski (1976)",
            Model::GnielinskiTransition => "Gnielinski transitional interpolation (2013)",
            Model::GnielinskiEntrance => "Gnielinski entrance factor",
            Model::EntranceLengthHydrodynamic => "turbulent hydrodynamic entrance length",
            Model::EntranceLengthThermal => "turbulent thermal entrance length",
        }
    }

    /// The published source (or "common practice, no source"; "from memory" where so).
    pub fn source(self) -> &'static str {
        match self {
            Model::Laminar => {
                "canalis's fully developed laminar solution of the cross-section (f·Re, Nu)"
            }
            Model::ColebrookWhite => {
                "C. F. Colebrook, Turbulent flow in pipes, with particular reference to the \
                 transition region between the smooth and rough pipe laws, J. Inst. Civ. Eng. 11 \
                 (1939) 133–156 (pages from memory)"
            }
            Model::Churchill => {
                "S. W. Churchill, Friction-factor equation spans all fluid-flow regimes, Chem. \
                 Eng. 84(24) (1977) 91–92"
            }
            Model::Konakov => {
                "P. K. Konakov's smooth-tube friction factor, in the form Gnielinski uses it \
                 (VDI Heat Atlas, chapter G1; from memory)"
            }
            Model::TransitionalFriction => {
                "canalis's choice, no source: linear in Re between the laminar value at the \
                 lower threshold and the turbulent correlation at the upper one, after the \
                 manner of Gnielinski (2013) for Nu"
            }
            Model::Gnielinski => {
                "V. Gnielinski, New equations for heat and mass transfer in turbulent pipe and \
                 channel flow, Int. Chem. Eng. 16 (1976) 359–368"
            }
            Model::GnielinskiTransition => {
                "V. Gnielinski, On heat transfer in tubes, Int. J. Heat Mass Transfer 63 (2013) \
                 134–140, and VDI Heat Atlas, chapter G1 (anchors 2300 and 10⁴; from memory)"
            }
            Model::GnielinskiEntrance => {
                "V. Gnielinski (1976), as above, and VDI Heat Atlas, chapter G1 (from memory)"
            }
            Model::EntranceLengthHydrodynamic => {
                "W. Zhi-qing, Study on correction coefficients of laminar and turbulent entrance \
                 region effect in round pipe, Appl. Math. Mech. 3 (1982) 433–446 (from memory, \
                 not confirmed)"
            }
            Model::EntranceLengthThermal => "common practice, no source",
        }
    }

    /// The accuracy the source states, or the usual statement of it where marked.
    pub fn accuracy(self) -> Accuracy {
        let (relative, statement) = match self {
            Model::Laminar => (
                None,
                "exact for the cross-section up to the grid's numerical uncertainty (reported \
                 under `uncertainty`)",
            ),
            Model::ColebrookWhite => (
                Some(0.15),
                "about ±15 % against measured friction factors, the accuracy usually stated for \
                 the Moody chart drawn from this equation (from memory)",
            ),
            Model::Churchill => (
                Some(0.15),
                "as Colebrook–White in the turbulent range, which it follows within 2.5 % for \
                 10⁴ ≤ Re ≤ 10⁸ and 3.5 % at Re = 4000 (tests/correlations.rs measures it); no \
                 stated accuracy in the transition",
            ),
            Model::Konakov => (
                None,
                "a smooth-tube fit; within 1.5 % of smooth Colebrook–White for 10⁴ ≤ Re ≤ 5·10⁶ \
                 (tests/correlations.rs measures it)",
            ),
            Model::TransitionalFriction => (
                None,
                "no stated accuracy: transitional flow is intermittent, and measured friction \
                 factors lie anywhere between the laminar and the turbulent value",
            ),
            Model::Gnielinski => (
                Some(0.2),
                "about ±20 %, the scatter of the experimental data Gnielinski fitted (from \
                 memory, not confirmed)",
            ),
            Model::GnielinskiTransition => (
                None,
                "no stated accuracy: an interpolation across intermittent flow",
            ),
            Model::GnielinskiEntrance => (
                None,
                "an approximation for the mean Nusselt number over a tube with a \
                 hydrodynamically developing inlet; no stated accuracy",
            ),
            Model::EntranceLengthHydrodynamic | Model::EntranceLengthThermal => (
                None,
                "an order-of-magnitude estimate: published turbulent entrance lengths differ by \
                 a factor of about two",
            ),
        };
        Accuracy {
            relative,
            statement,
        }
    }

    /// The ranges the model was established over. Empty for the laminar solution and the
    /// friction interpolation, whose range is the regime itself.
    pub fn validity(self) -> &'static [Bound] {
        const COLEBROOK: &[Bound] = &[Bound::new("Re", 4000.0, 1e8), Bound::new("ε/D", 0.0, 0.05)];
        const CHURCHILL: &[Bound] = &[Bound::new("Re", 0.0, 1e8), Bound::new("ε/D", 0.0, 0.05)];
        const KONAKOV: &[Bound] = &[Bound::new("Re", 2300.0, 5e6)];
        const GNIELINSKI: &[Bound] =
            &[Bound::new("Re", 2300.0, 5e6), Bound::new("Pr", 0.5, 2000.0)];
        const TRANSITION: &[Bound] = &[Bound::new("Pr", 0.5, 2000.0)];
        const ENTRANCE: &[Bound] = &[Bound::new("L/D_h", 1.0, f64::INFINITY)];
        const TURBULENT: &[Bound] = &[Bound::new("Re", 4000.0, f64::INFINITY)];
        match self {
            Model::Laminar | Model::TransitionalFriction => &[],
            Model::ColebrookWhite => COLEBROOK,
            Model::Churchill => CHURCHILL,
            Model::Konakov => KONAKOV,
            Model::Gnielinski => GNIELINSKI,
            Model::GnielinskiTransition => TRANSITION,
            Model::GnielinskiEntrance => ENTRANCE,
            Model::EntranceLengthHydrodynamic | Model::EntranceLengthThermal => TURBULENT,
        }
    }

    /// Warnings for the inputs (quantity, value) outside this model's validity ranges.
    fn check(self, inputs: &[(&str, f64)], warnings: &mut Vec<String>) {
        for bound in self.validity() {
            for &(quantity, value) in inputs {
                if quantity == bound.quantity && !bound.contains(value) {
                    push_unique(
                        warnings,
                        format!(
                            "{quantity} = {} is outside the range of {} ({bound}); the value is \
                             extrapolated",
                            format_significant(value, 0.01),
                            self.name()
                        ),
                    );
                }
            }
        }
    }
}

impl fmt::Display for Model {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A value with the model that gave it and the warnings that go with it.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimate {
    /// The value (dimensionless: a friction factor, a Nusselt number, a length ratio).
    pub value: f64,
    /// The model or correlation that gave it; its accuracy and validity are the model's.
    pub model: Model,
    /// The Reynolds number a circular-tube correlation was evaluated at: Re* = Re·D_le/D_h for
    /// a [`Duct`], Re itself for the free functions; `None` for the laminar solution and for
    /// interpolations.
    pub reynolds_evaluated: Option<f64>,
    /// Inputs outside the model's range and other cautions, as sentences.
    pub warnings: Vec<String>,
}

impl Estimate {
    fn new(value: f64, model: Model, reynolds_evaluated: Option<f64>) -> Self {
        Estimate {
            value,
            model,
            reynolds_evaluated,
            warnings: Vec::new(),
        }
    }

    /// The accuracy the model's source states.
    pub fn accuracy(&self) -> Accuracy {
        self.model.accuracy()
    }

    /// The model's validity ranges.
    pub fn validity(&self) -> &'static [Bound] {
        self.model.validity()
    }

    /// One line for the report's `models`: the model's name and, for a correlation evaluated at
    /// a Reynolds number, that number.
    pub fn describe(&self) -> String {
        match self.reynolds_evaluated {
            Some(re) => format!(
                "{} at Re* = {} (laminar-equivalent diameter, Jones 1976)",
                self.model.name(),
                format_significant(re, 0.01)
            ),
            None => self.model.name().to_string(),
        }
    }

    /// Appends warnings of a part this estimate was built from.
    fn absorb(&mut self, warnings: &[String]) {
        for w in warnings {
            push_unique(&mut self.warnings, w.clone());
        }
    }
}

// ---------------------------------------------------------------------------------------------
// The duct
// ---------------------------------------------------------------------------------------------

/// What the correlations need to know about a cross-section: its laminar Poiseuille number
/// (from canalis's solution), its relative roughness, its regime thresholds and the turbulent
/// friction model. The methods that use it live with their subject: [`Duct::darcy_friction`]
/// and [`Duct::reynolds_at`] in [`friction`], [`Duct::nusselt`] in [`heat`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Duct {
    fanning_f_re: f64,
    relative_roughness: f64,
    thresholds: Thresholds,
    friction_model: FrictionModel,
}

/// Relative roughness from which [`Duct::new`] refuses: a roughness as tall as the passage is
/// wide is not a roughness but a different cross-section.
pub const MAX_RELATIVE_ROUGHNESS: f64 = 0.5;

impl Duct {
    /// A duct with laminar Fanning f·Re `fanning_f_re` (positive, finite), relative roughness
    /// ε/D_h (finite, 0 ≤ ε/D_h < 0.5; above 0.05 the correlations warn), thresholds and
    /// friction model.
    pub fn new(
        fanning_f_re: f64,
        relative_roughness: f64,
        thresholds: Thresholds,
        friction_model: FrictionModel,
    ) -> Result<Self> {
        positive(fanning_f_re, "laminar f·Re")?;
        non_negative(relative_roughness, "relative roughness ε/D_h")?;
        if relative_roughness >= MAX_RELATIVE_ROUGHNESS {
            return Err(Error::param(
                "relative roughness ε/D_h",
                format!(
                    "{relative_roughness} is not a wall roughness (it must be below \
                     {MAX_RELATIVE_ROUGHNESS}; the correlations hold up to 0.05)"
                ),
            ));
        }
        Ok(Duct {
            fanning_f_re,
            relative_roughness,
            thresholds,
            friction_model,
        })
    }

    /// A round tube: f·Re = 16, round-tube thresholds, Colebrook–White.
    pub fn circle(relative_roughness: f64) -> Result<Self> {
        Self::new(
            CIRCLE_FANNING_F_RE,
            relative_roughness,
            Thresholds::ROUND,
            FrictionModel::ColebrookWhite,
        )
    }

    /// The laminar Fanning f·Re.
    pub fn fanning_f_re(&self) -> f64 {
        self.fanning_f_re
    }

    /// The relative roughness ε/D_h.
    pub fn relative_roughness(&self) -> f64 {
        self.relative_roughness
    }

    /// The regime thresholds.
    pub fn thresholds(&self) -> Thresholds {
        self.thresholds
    }

    /// The turbulent friction model.
    pub fn friction_model(&self) -> FrictionModel {
        self.friction_model
    }

    /// D_le/D_h = 64/(f_D·Re)_laminar = 16/(f·Re)_laminar (Jones 1976).
    pub fn equivalent_diameter_ratio(&self) -> f64 {
        CIRCLE_FANNING_F_RE / self.fanning_f_re
    }

    /// The laminar-equivalent Reynolds number Re* = Re·D_le/D_h.
    pub fn reynolds_star(&self, re: f64) -> f64 {
        re * self.equivalent_diameter_ratio()
    }

    /// The regime at Reynolds number `re` (on D_h), with this duct's thresholds.
    pub fn regime(&self, re: f64) -> Result<Regime> {
        regime(re, self.thresholds)
    }
}

// ---------------------------------------------------------------------------------------------
// Shared helpers
// ---------------------------------------------------------------------------------------------

/// `value` if it is finite and > 0, else an error naming `what`.
fn positive(value: f64, what: &str) -> Result<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(Error::param(
            what,
            format!("must be a positive finite number, got {value}"),
        ))
    }
}

/// `value` if it is finite and ≥ 0, else an error naming `what`.
fn non_negative(value: f64, what: &str) -> Result<f64> {
    if value.is_finite() && value >= 0.0 {
        Ok(value)
    } else {
        Err(Error::param(
            what,
            format!("must be a finite number ≥ 0, got {value}"),
        ))
    }
}

fn push_unique(warnings: &mut Vec<String>, warning: String) {
    if !warnings.contains(&warning) {
        warnings.push(warning);
    }
}

/// Linear interpolation between (x0, y0) and (x1, y1) at x, written so that x = x0 gives y0
/// and x = x1 gives y1 exactly (continuity at both switch points to the last bit).
fn interpolate(x: f64, x0: f64, x1: f64, y0: f64, y1: f64) -> f64 {
    let gamma = ((x - x0) / (x1 - x0)).clamp(0.0, 1.0);
    if gamma == 1.0 {
        y1
    } else {
        (1.0 - gamma) * y0 + gamma * y1
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn regime_boundaries() {
        let t = Thresholds::ROUND;
        assert_eq!(regime(0.0, t).unwrap(), Regime::Laminar);
        assert_eq!(regime(2299.999, t).unwrap(), Regime::Laminar);
        assert_eq!(regime(2300.0, t).unwrap(), Regime::Transitional);
        assert_eq!(regime(4000.0, t).unwrap(), Regime::Transitional);
        assert_eq!(regime(4000.001, t).unwrap(), Regime::Turbulent);
        assert_eq!(
            regime(2100.0, Thresholds::SHARP_CORNERS).unwrap(),
            Regime::Transitional
        );
        for bad in [f64::NAN, -1.0, f64::INFINITY] {
            assert!(regime(bad, t).is_err());
        }
        assert!(Thresholds::new(4000.0, 2300.0).is_err());
        assert!(Thresholds::new(f64::NAN, 2300.0).is_err());
        assert_eq!(Regime::Transitional.to_string(), "transitional");
    }

    #[test]
    fn interpolation_hits_its_ends_exactly() {
        let (x0, x1, y0, y1) = (2300.0, 1e4, 4.36, 30.1);
        assert_eq!(interpolate(x0, x0, x1, y0, y1), y0);
        assert_eq!(interpolate(x1, x0, x1, y0, y1), y1);
    }

    #[test]
    fn bounds_print_and_warn() {
        let mut w = Vec::new();
        Model::Gnielinski.check(&[("Re", 1e7), ("Pr", 0.7)], &mut w);
        assert_eq!(w.len(), 1);
        assert!(
            w[0].contains("Re = 1.00e7") && w[0].contains("Gnielinski"),
            "{w:?}"
        );
        assert_eq!(
            Bound::new("L/D_h", 1.0, f64::INFINITY).to_string(),
            "1 ≤ L/D_h ≤ ∞"
        );
    }

    #[test]
    fn duct_validation() {
        assert!(Duct::new(
            f64::NAN,
            0.0,
            Thresholds::ROUND,
            FrictionModel::ColebrookWhite
        )
        .is_err());
        assert!(Duct::new(
            16.0,
            -1e-3,
            Thresholds::ROUND,
            FrictionModel::ColebrookWhite
        )
        .is_err());
        assert!(Duct::new(16.0, 0.6, Thresholds::ROUND, FrictionModel::ColebrookWhite).is_err());
        let d = Duct::circle(0.0).unwrap();
        assert_eq!(d.equivalent_diameter_ratio(), 1.0);
    }
}
