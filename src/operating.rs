//! The operating point: the unit solution scaled to a fluid and a drive.
//!
//! Owns: what drives the flow ([`Drive`]: a pressure gradient or a flow rate), the fluid
//! ([`FluidSpec`]: given properties or a named property model), the passage length, and the
//! scaling u = (G/μ)·ũ, Q = (G/μ)·I, τ = G·τ̃ with the Reynolds number, film coefficients and
//! length results ([`operating_point`]); the checks of an operating point before any solve
//! ([`OperatingSpec::validate`]: positive properties, a known fluid in its temperature range, a
//! positive drive and length); its warnings (laminar limit, entrance lengths).
//!
//! Invariant: computes from the figures of a finished unit solution only; solves nothing,
//! loads no geometry, formats no report.

use crate::error::{Error, Result};
use crate::fluids::{self, FluidProperties};
use crate::heat::HeatFigures;
use crate::post::Figures;

/// What drives the flow.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Drive {
    /// G = −dp/dz in Pa/m (positive: pressure falls along the flow).
    PressureGradient(f64),
    /// Volumetric flow rate, m³/s.
    FlowRate(f64),
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
    /// drive ([`Drive::check`]) and a positive length, in that order. Cheap: no geometry, no
    /// grid.
    pub fn validate(&self) -> Result<()> {
        self.fluid.properties()?;
        self.drive.check()?;
        match self.length {
            Some(l) if !(l.is_finite() && l > 0.0) => {
                Err(Error::param("--length", "must be a positive length"))
            }
            _ => Ok(()),
        }
    }
}

/// Dimensional results at an operating point.
#[derive(Debug, Clone, PartialEq)]
pub struct OperatingResult {
    pub fluid: FluidProperties,
    pub flow_rate_m3_s: f64,
    pub pressure_gradient_pa_m: f64,
    pub mean_velocity_m_s: f64,
    pub max_velocity_m_s: f64,
    pub reynolds: f64,
    pub wall_shear_mean_pa: f64,
    pub wall_shear_max_pa: f64,
    pub wall_shear_min_pa: f64,
    /// Pr = μ·c_p/k, when both are known.
    pub prandtl: Option<f64>,
    /// h = Nu·k/D_h for the H1 and T boundary conditions, W/(m²·K), when k is known.
    pub heat_transfer_coefficient_h1_w_m2k: Option<f64>,
    pub heat_transfer_coefficient_t_w_m2k: Option<f64>,
    /// With a length: the pressure drop over it and the entrance lengths.
    pub length: Option<LengthResult>,
}

/// Results that need the passage length.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LengthResult {
    pub length_m: f64,
    pub pressure_drop_pa: f64,
    /// L_h ≈ 0.05·Re·D_h (common practice for round tubes, no source).
    pub entrance_length_hydrodynamic_m: f64,
    /// L_t ≈ 0.05·Re·Pr·D_h (common practice for round tubes, no source), when Pr is known.
    pub entrance_length_thermal_m: Option<f64>,
}

/// Laminar limit used for the warning (the usual transition near Re ≈ 2300 in round pipes,
/// common practice, no source; warned from 2000 to leave a margin).
pub const LAMINAR_WARNING_RE: f64 = 2000.0;

/// Scales the unit solution to an operating point: u = (G/μ)·ũ, Q = (G/μ)·I, τ = G·τ̃. The
/// spec is checked first ([`OperatingSpec::validate`]), so a library caller that skipped the
/// pipeline still gets an error, not a nonsense result.
pub fn operating_point(
    f: &Figures,
    heat: Option<&HeatFigures>,
    spec: &OperatingSpec,
    warnings: &mut Vec<String>,
) -> Result<OperatingResult> {
    spec.validate()?;
    let (fluid, w) = spec.fluid.properties()?;
    warnings.extend(w);
    let mu = fluid.viscosity_pa_s;
    let (g, q) = match spec.drive {
        Drive::PressureGradient(g) => (g, g * f.flow_integral / mu),
        Drive::FlowRate(q) => (q * mu / f.flow_integral, q),
    };
    let mean = q / f.area;
    let re = fluid.density_kg_m3 * mean * f.hydraulic_diameter / mu;
    if re > LAMINAR_WARNING_RE {
        warnings.push(format!(
            "Reynolds number {re:.0} is above {LAMINAR_WARNING_RE:.0}: the flow may not be \
             laminar (transition is usual near Re ≈ 2300 in round pipes, earlier in ducts with \
             sharp corners or disturbed inlets); these fully developed laminar results then \
             understate the pressure drop and wall shear"
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
            if l < lh {
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
            Some(LengthResult {
                length_m: l,
                pressure_drop_pa: g * l,
                entrance_length_hydrodynamic_m: lh,
                entrance_length_thermal_m: lt,
            })
        }
    };
    Ok(OperatingResult {
        prandtl,
        heat_transfer_coefficient_h1_w_m2k: film(heat.map(|h| h.nusselt_h1)),
        heat_transfer_coefficient_t_w_m2k: film(heat.map(|h| h.nusselt_t)),
        length,
        flow_rate_m3_s: q,
        pressure_gradient_pa_m: g,
        mean_velocity_m_s: mean,
        max_velocity_m_s: g / mu * f.max_velocity,
        reynolds: re,
        wall_shear_mean_pa: g * f.wall_shear_mean,
        wall_shear_max_pa: g * f.wall_shear_mean * f.wall_shear_max_to_mean,
        wall_shear_min_pa: g * f.wall_shear_mean * f.wall_shear_min_to_mean,
        fluid,
    })
}
