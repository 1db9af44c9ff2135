//! The operating point: the unit solution scaled to a fluid and a drive.
//!
//! Owns: what drives the flow ([`Drive`]: a pressure gradient, a flow rate, or a pressure drop
//! over the length), the fluid ([`FluidSpec`]: given properties or a named property model), the
//! passage length and wall roughness, and the scaling u = (G/μ)·ũ, Q = (G/μ)·I, τ = G·τ̃ with the
//! Reynolds number, film coefficients and length results ([`operating_point`]); beyond the
//! laminar range, the regime and the correlations' figures of the whole section and of each
//! passage ([`regime`](mod@regime), issue 18); the checks of an operating point before any solve
//! ([`OperatingSpec::validate`]: positive properties, a known fluid in its temperature range, a
//! positive drive and length, a roughness ≥ 0); its warnings (laminar limit, regime, entrance
//! lengths, passages leaving the laminar range).
//!
//! Invariant: computes from the figures of a finished unit solution only; solves nothing,
//! loads no geometry, formats no report. In laminar flow every figure is the laminar solution's,
//! computed as before issue 18 (the same arithmetic, bit for bit); the correlations enter only
//! where some passage is transitional or turbulent.

pub mod regime;

use crate::correlations::{Regime, Thresholds, LAMINAR_WARNING_RE};
use crate::error::{Error, Result};
use crate::fluids::{self, FluidProperties};
use crate::geometry::Walls;
use crate::heat::HeatFigures;
use crate::hydrodynamic::HydrodynamicEntrance;
use crate::post::{Figures, PassageFigures};

/// What drives the flow.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Drive {
    /// G = −dp/dz in Pa/m (positive: pressure falls along the flow).
    PressureGradient(f64),
    /// Volumetric flow rate, m³/s.
    FlowRate(f64),
    /// Pressure drop Δp over the passage length ([`OperatingSpec::length`], required), Pa: the
    /// flow rate is found (fully developed flow, G = Δp/L).
    PressureDrop(f64),
}

/// The fluid of an operating point.
#[derive(Debug, Clone, PartialEq)]
pub enum FluidSpec {
    /// Constant properties given by the user.
    Given {
        viscosity: f64,
        density: f64,
        /// Thermal conductivity, W/(m·K), for film coefficients.
        conductivity: Option<f64>,
        /// Isobaric specific heat, J/(kg·K), for the Prandtl number.
        specific_heat: Option<f64>,
    },
    /// A property model by name, at a temperature (kelvin).
    Named {
        name: String,
        temperature_k: Option<f64>,
    },
}

/// An operating point: a drive and a fluid.
#[derive(Debug, Clone, PartialEq)]
pub struct OperatingSpec {
    pub drive: Drive,
    pub fluid: FluidSpec,
    /// Passage length, m: pressure drop over it and entrance-length checks.
    pub length: Option<f64>,
    /// Absolute wall roughness ε, m (0: hydraulically smooth). Used beyond the laminar range
    /// only, as ε/D_h ([`crate::correlations`]).
    pub roughness: f64,
}

impl Drive {
    /// Checks the drive: a finite, positive pressure gradient or flow rate. The error names the
    /// option (`--dpdx`, `--flow`).
    pub fn check(&self) -> Result<()> {
        match *self {
            Drive::PressureGradient(g) if !(g.is_finite() && g > 0.0) => Err(Error::param(
                "--dpdx",
                "must be a positive number (Pa/m, pressure falling along the flow)",
            )),
            Drive::FlowRate(q) if !(q.is_finite() && q > 0.0) => {
                Err(Error::param("--flow", "must be a positive flow rate"))
            }
            Drive::PressureDrop(dp) if !(dp.is_finite() && dp > 0.0) => Err(Error::param(
                "--pressure-drop",
                "must be a positive pressure difference (Pa, pressure falling along the flow)",
            )),
            _ => Ok(()),
        }
    }
}

impl FluidSpec {
    /// The fluid's properties and the property model's warnings, after checking what was given:
    /// finite, positive properties; a known fluid name; a temperature inside its model's range
    /// (water: see [`fluids::water`]). Errors name the option at fault.
    pub fn properties(&self) -> Result<(FluidProperties, Vec<String>)> {
        match self {
            FluidSpec::Given {
                viscosity,
                density,
                conductivity,
                specific_heat,
            } => {
                for (v, name, unit) in [
                    (conductivity, "--conductivity", "W/(m·K)"),
                    (specific_heat, "--specific-heat", "J/(kg·K)"),
                ] {
                    if let Some(v) = v {
                        if !(v.is_finite() && *v > 0.0) {
                            return Err(Error::param(
                                name,
                                format!("must be a positive number ({unit})"),
                            ));
                        }
                    }
                }
                if !(viscosity.is_finite() && *viscosity > 0.0) {
                    return Err(Error::param(
                        "--viscosity",
                        "must be a positive number (Pa·s)",
                    ));
                }
                if !(density.is_finite() && *density > 0.0) {
                    return Err(Error::param(
                        "--density",
                        "must be a positive number (kg/m³)",
                    ));
                }
                let props = FluidProperties {
                    name: "user-defined fluid".into(),
                    viscosity_pa_s: *viscosity,
                    density_kg_m3: *density,
                    temperature_k: None,
                    conductivity_w_mk: *conductivity,
                    specific_heat_j_kgk: *specific_heat,
                    source: "given on the command line".into(),
                };
                Ok((props, Vec::new()))
            }
            FluidSpec::Named {
                name,
                temperature_k,
            } => fluids::by_name(name, *temperature_k).map_err(|e| match e {
                // A known fluid fails only on its temperature (missing or out of range).
                Error::Fluid(message) => {
                    let known = fluids::KNOWN_FLUIDS
                        .iter()
                        .any(|k| k.eq_ignore_ascii_case(name.trim()));
                    Error::param(if known { "--temperature" } else { "--fluid" }, message)
                }
                e => e,
            }),
        }
    }
}

impl OperatingSpec {
    /// Checks the operating point before any solve: the fluid ([`FluidSpec::properties`]), the
    /// drive ([`Drive::check`]), a positive length (required by a pressure drop) and a finite
    /// roughness ≥ 0, in that order. Cheap: no geometry, no grid. (Whether ε is small against
    /// D_h needs the cross-section: [`operating_point`] checks it.)
    pub fn validate(&self) -> Result<()> {
        self.fluid.properties()?;
        self.drive.check()?;
        match self.length {
            Some(l) if !(l.is_finite() && l > 0.0) => {
                return Err(Error::param("--length", "must be a positive length"))
            }
            None if matches!(self.drive, Drive::PressureDrop(_)) => {
                return Err(Error::param(
                    "--pressure-drop",
                    "a pressure drop needs the length it acts over: add --length L",
                ))
            }
            _ => {}
        }
        if !(self.roughness.is_finite() && self.roughness >= 0.0) {
            return Err(Error::param(
                "--roughness",
                "must be a length ≥ 0 (0 is a hydraulically smooth wall)",
            ));
        }
        Ok(())
    }
}

/// Dimensional results at an operating point.
#[derive(Debug, Clone, PartialEq)]
pub struct OperatingResult {
    pub fluid: FluidProperties,
    pub flow_rate_m3_s: f64,
    pub pressure_gradient_pa_m: f64,
    pub mean_velocity_m_s: f64,
    /// The laminar u_max = (G/μ)·max ũ; `None` outside laminar flow, where the laminar profile
    /// does not hold (and no correlation for it is used).
    pub max_velocity_m_s: Option<f64>,
    pub reynolds: f64,
    pub wall_shear_mean_pa: f64,
    /// The laminar extremes G·τ̃_max, G·τ̃_min; `None` outside laminar flow (the turbulent
    /// distribution around the perimeter is not the laminar one scaled).
    pub wall_shear_max_pa: Option<f64>,
    pub wall_shear_min_pa: Option<f64>,
    /// Pr = μ·c_p/k, when both are known.
    pub prandtl: Option<f64>,
    /// h = Nu·k/D_h for the H1 and T boundary conditions, W/(m²·K), when k is known (and,
    /// outside laminar flow, Pr).
    pub heat_transfer_coefficient_h1_w_m2k: Option<f64>,
    pub heat_transfer_coefficient_t_w_m2k: Option<f64>,
    /// With a length: the pressure drop over it and the entrance lengths.
    pub length: Option<LengthResult>,
    /// The flow regime: of the section, or with several passages the furthest from laminar of
    /// theirs.
    pub regime: Regime,
    /// The Reynolds numbers that bound the transitional range here.
    pub thresholds: Thresholds,
    /// Whether the thresholds are those of ducts with sharp corners ([`regime::sharp_corners`]).
    pub sharp_corners: bool,
    /// The Darcy friction factor of the pressure drop, on D_h: Δp/L = f_D·ρ·ū²/(2·D_h).
    pub darcy_friction_factor: f64,
    /// Absolute wall roughness ε, m.
    pub roughness_m: f64,
    /// G/Q, Pa·s/m⁴ (laminar: 2·μ·(f·Re)/(D_h²·A), independent of Q).
    pub hydraulic_resistance_per_length_pa_s_m4: f64,
    /// Which model gave each dimensional figure: (report key, description), in report order.
    pub models: Vec<(String, String)>,
    /// The correlations used (none in laminar flow), for their stated accuracy.
    pub correlations: Vec<crate::correlations::Model>,
    /// Each passage (one entry per `UnitSolution::passages`, same order).
    pub passages: Vec<PassageResult>,
    /// The hook of the thermal rating (issue 18, item 4; does not exist yet): the mean film
    /// coefficients above are the ones a rating must use, laminar or from the correlations.
    pub heat_model: Option<String>,
}

/// One passage at the operating point (passages in parallel under one pressure gradient).
#[derive(Debug, Clone, PartialEq)]
pub struct PassageResult {
    pub flow_rate_m3_s: f64,
    pub mean_velocity_m_s: f64,
    /// On the passage's own D_h.
    pub reynolds: f64,
    pub regime: Regime,
    /// On the passage's own D_h.
    pub darcy_friction_factor: f64,
    /// Perimeter mean, G·A_p/P_p (the passage's force balance, any regime).
    pub wall_shear_mean_pa: f64,
    /// With a length: the passage's entrance lengths (thermal when Pr is known).
    pub entrance_length_hydrodynamic_m: Option<f64>,
    pub entrance_length_thermal_m: Option<f64>,
    pub warnings: Vec<String>,
}

/// Results that need the passage length.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LengthResult {
    pub length_m: f64,
    /// Over the length: the entrance region included where the developing-flow march gives it
    /// ([`LengthResult::with_entrance`]), the minor losses added ([`LengthResult::with_minor_loss`]).
    pub pressure_drop_pa: f64,
    /// G·L: fully developed friction over the whole length.
    pub pressure_drop_fully_developed_pa: f64,
    /// K·ρ·ū²/2 of `--minor-loss K`.
    pub minor_loss_pa: Option<f64>,
    /// Which model gave `pressure_drop_pa` when not G·L.
    pub pressure_drop_model: Option<&'static str>,
    /// Laminar: L_h ≈ 0.05·Re·D_h (common practice for round tubes, no source); turbulent:
    /// [`crate::correlations::turbulent_entrance_length_hydrodynamic`].
    pub entrance_length_hydrodynamic_m: f64,
    /// Laminar: L_t ≈ 0.05·Re·Pr·D_h (common practice for round tubes, no source); turbulent:
    /// about 10·D_h; when Pr is known.
    pub entrance_length_thermal_m: Option<f64>,
    /// Δp/Q over the length, Pa·s/m³.
    pub hydraulic_resistance_pa_s_m3: f64,
}

impl LengthResult {
    /// The results over a length `l` (m) at the gradient `g` (Pa/m) and flow rate `q` (m³/s),
    /// with the entrance lengths `lh` and `lt` (m): Δp = G·L, Δp/Q.
    pub fn new(l: f64, g: f64, q: f64, lh: f64, lt: Option<f64>) -> LengthResult {
        LengthResult {
            length_m: l,
            pressure_drop_pa: g * l,
            pressure_drop_fully_developed_pa: g * l,
            minor_loss_pa: None,
            pressure_drop_model: None,
            entrance_length_hydrodynamic_m: lh,
            entrance_length_thermal_m: lt,
            hydraulic_resistance_pa_s_m3: g * l / q,
        }
    }

    /// The pressure drop with the entrance region, from the developing-flow march: per passage
    /// Δp = ½ρū²·4·f_app·L/D_h = 2ρū²·(f_app·Re)·x+, x+ = L/(D_h·Re) (beyond the march's last
    /// station the fully developed rate, f·Re + K(∞)/(4x+)); with several passages the
    /// flow-weighted mean at the fully developed flow split (`warnings` says so). `passages`:
    /// each passage's (flow rate, mean velocity, Re, D_h) in the march's order.
    pub fn with_entrance(
        &mut self,
        hydro: &HydrodynamicEntrance,
        passages: &[(f64, f64, f64, f64)],
        density: f64,
        warnings: &mut Vec<String>,
    ) {
        let l = self.length_m;
        let total_q: f64 = passages.iter().map(|p| p.0).sum();
        let mut dp = 0.0;
        for (&(q, u, re, d), p) in passages.iter().zip(&hydro.passages) {
            let x = l / (d * re);
            let f_app_re = match p.at(x) {
                Some((f, _)) => f,
                None => p.fanning_f_re + p.k_infinity / (4.0 * x),
            };
            dp += q / total_q * 2.0 * density * u * u * f_app_re * x;
        }
        if passages.len() > 1 {
            warnings.push(
                "the pressure drop with the entrance region averages the passages' own at the \
                 fully developed flow split (the entrance regions shift the split a little)"
                    .into(),
            );
        }
        let q = self.pressure_drop_fully_developed_pa / self.hydraulic_resistance_pa_s_m3;
        self.pressure_drop_pa = dp + self.minor_loss_pa.unwrap_or(0.0);
        self.hydraulic_resistance_pa_s_m3 = self.pressure_drop_pa / q;
        self.pressure_drop_model = Some(
            "laminar apparent friction of the developing-flow march (uniform inlet velocity, \
             entrance region included)",
        );
    }

    /// Adds the minor losses K·ρ·ū²/2 (inlet, outlet, bends the user knows; common practice,
    /// no source) at the mean velocity ū.
    pub fn with_minor_loss(&mut self, k: f64, density: f64, mean_velocity: f64) {
        let q = self.pressure_drop_pa / self.hydraulic_resistance_pa_s_m3;
        let minor = 0.5 * k * density * mean_velocity * mean_velocity;
        self.pressure_drop_pa += minor - self.minor_loss_pa.unwrap_or(0.0);
        self.minor_loss_pa = Some(minor);
        self.hydraulic_resistance_pa_s_m3 = self.pressure_drop_pa / q;
    }
}

/// Scales the unit solution to an operating point. In laminar flow (every passage below the
/// lower threshold at the laminar gradient): u = (G/μ)·ũ, Q = (G/μ)·I, τ = G·τ̃. Otherwise the
/// pressure gradient (or flow rate), mean wall shear and film coefficients come from the
/// correlations, passage by passage ([`regime::beyond_laminar`]). The spec is checked first
/// ([`OperatingSpec::validate`]), so a library caller that skipped the pipeline still gets an
/// error, not a nonsense result. `passages` and `walls` are the unit solution's (no passage or
/// one: the whole section is one passage); the walls decide the regime thresholds
/// ([`regime::sharp_corners`]).
pub fn operating_point(
    f: &Figures,
    heat: Option<&HeatFigures>,
    passages: &[PassageFigures],
    walls: &Walls,
    spec: &OperatingSpec,
    warnings: &mut Vec<String>,
) -> Result<OperatingResult> {
    spec.validate()?;
    let (fluid, w) = spec.fluid.properties()?;
    warnings.extend(w);
    let mu = fluid.viscosity_pa_s;
    let sharp = regime::sharp_corners(f, walls);
    let thresholds = Thresholds::for_duct(sharp);
    let channels = regime::channels(f, passages, spec.roughness, thresholds)?;
    let g_laminar = match spec.drive {
        Drive::PressureGradient(g) => g,
        Drive::FlowRate(q) => q * mu / f.flow_integral,
        // validate: a pressure drop comes with a length.
        Drive::PressureDrop(dp) => dp / spec.length.unwrap_or(f64::NAN),
    };
    let laminar = channels
        .iter()
        .all(|c| c.laminar_reynolds(g_laminar, &fluid) < thresholds.lower());
    if !laminar {
        return regime::beyond_laminar(f, heat, &channels, spec, fluid, sharp, warnings);
    }
    let (g, q) = match spec.drive {
        Drive::PressureGradient(g) => (g, g * f.flow_integral / mu),
        Drive::FlowRate(q) => (q * mu / f.flow_integral, q),
        Drive::PressureDrop(_) => (g_laminar, g_laminar * f.flow_integral / mu),
    };
    let mean = q / f.area;
    let re = fluid.density_kg_m3 * mean * f.hydraulic_diameter / mu;
    if re > LAMINAR_WARNING_RE {
        warnings.push(format!(
            "Reynolds number {re:.0} is above {LAMINAR_WARNING_RE:.0}: laminar up to {:.0} here \
             (the {} thresholds), but transition is usual near Re ≈ 2300 in round pipes, \
             earlier in ducts with sharp corners or disturbed inlets; if the flow is not \
             laminar, these laminar results understate the pressure drop, wall shear and heat \
             transfer",
            thresholds.lower(),
            if sharp { "sharp-corner" } else { "round-duct" }
        ));
    }
    let prandtl = fluid.prandtl();
    let film = |nu: Option<f64>| {
        fluid
            .conductivity_w_mk
            .zip(nu)
            .map(|(k, nu)| nu * k / f.hydraulic_diameter)
    };
    let length = match spec.length {
        None => None,
        Some(l) => {
            let lh = 0.05 * re * f.hydraulic_diameter;
            let lt = prandtl.map(|pr| lh * pr);
            // The pressure drop includes the entrance region (`LengthResult::with_entrance`),
            // except where the flow rate is found from a given pressure drop.
            if l < lh && matches!(spec.drive, Drive::PressureDrop(_)) {
                warnings.push(format!(
                    "the passage ({l:.4} m) is shorter than the hydrodynamic entrance length \
                     ≈ 0.05·Re·D_h = {lh:.4} m (common practice for round tubes, no source): the \
                     fully developed friction understates the pressure drop"
                ));
            }
            match lt {
                Some(lt) if l < lt => warnings.push(format!(
                    "the passage ({l:.4} m) is shorter than the thermal entrance length \
                     ≈ 0.05·Re·Pr·D_h = {lt:.4} m (common practice for round tubes, no source): \
                     the fully developed Nusselt numbers understate the heat transfer"
                )),
                None => warnings.push(
                    "the thermal entrance length needs the Prandtl number: give --conductivity \
                     and --specific-heat (or a named fluid)"
                        .to_string(),
                ),
                _ => {}
            }
            Some(LengthResult::new(l, g, q, lh, lt))
        }
    };
    let passages = regime::laminar_passages(passages, &channels, g, &fluid, spec.length, warnings);
    let h1 = film(heat.map(|h| h.nusselt_h1));
    let ht = film(heat.map(|h| h.nusselt_t));
    let models = regime::laminar_models(spec, h1.is_some(), length.is_some());
    Ok(OperatingResult {
        prandtl,
        heat_transfer_coefficient_h1_w_m2k: h1,
        heat_transfer_coefficient_t_w_m2k: ht,
        length,
        flow_rate_m3_s: q,
        pressure_gradient_pa_m: g,
        mean_velocity_m_s: mean,
        max_velocity_m_s: Some(g / mu * f.max_velocity),
        reynolds: re,
        wall_shear_mean_pa: g * f.wall_shear_mean,
        wall_shear_max_pa: Some(g * f.wall_shear_mean * f.wall_shear_max_to_mean),
        wall_shear_min_pa: Some(g * f.wall_shear_mean * f.wall_shear_min_to_mean),
        regime: Regime::Laminar,
        thresholds,
        sharp_corners: sharp,
        darcy_friction_factor: 4.0 * f.fanning_f_re / re,
        roughness_m: spec.roughness,
        hydraulic_resistance_per_length_pa_s_m4: g / q,
        models,
        correlations: Vec::new(),
        passages,
        heat_model: h1.map(|_| regime::LAMINAR_MODEL.to_string()),
        fluid,
    })
}
