//! Thermal rating of a passage of given length at an operating point: outlet temperature, heat
//! rate, mean film coefficient and the hottest wall temperature.
//!
//! Owns: [`RatingSpec`] (inlet temperature and how the wall is heated or cooled), [`rate`] and
//! its result [`Rating`].
//!
//! # The model
//! Each passage p carries its share of the flow, ṁ_p = ρ·Q_p, with its own hydraulic diameter
//! D_p, Reynolds number Re_p = ρ·ū_p·D_p/μ and x*_p = L/(D_p·Re_p·Pr) at the outlet.
//! - **Uniform wall temperature T_w** (the T condition): the energy balance of the passage
//!   with the mean Nusselt number over the length gives the outlet bulk temperature
//!   T_out = T_w + (T_in − T_w)·exp(−4·Nu_m·x*) (log-mean temperature difference; exact for
//!   the T condition by the definition of Nu_m,T) and the heat rate ṁ·c_p·(T_out − T_in).
//! - **A heat load Q over the length, or a heat flux q″ on the wetted wall** (the H1
//!   condition): the same flux q″ = Q/(P·L) on every wetted wall; the passage's heat rate is
//!   q″·P_p·L, its outlet bulk temperature T_in + q″·P_p·L/(ṁ_p·c_p), and its wall at the outlet
//!   is hotter than the bulk by q″·D_p/(k·Nu_x,H1(x*_p)) (the local value at the outlet: the
//!   hottest wall of the passage, the bulk rising linearly and the local Nusselt number falling
//!   along it).
//!
//! Laminar flow takes the Nusselt numbers of the thermal entrance march (`entrance`: fully
//! developed velocity); transitional and turbulent flow those of Gnielinski (1976; 2013 across
//! the transition, from the laminar value at Re = 2300) at the laminar-equivalent diameter,
//! with his length factor (`correlations`). Properties are taken at the mean bulk temperature
//! (T_in + T_out)/2, found by iteration, when the fluid model knows them as functions of
//! temperature; given constant properties are used as they are. The flow rate is the operating
//! point's (as given, or found from a pressure gradient or drop with the properties at its own
//! `--temperature`).
//!
//! Invariant: knows the fluid models and the correlations, solves nothing, formats nothing.

use crate::correlations::{Duct, FrictionModel, Regime, Thresholds};
use crate::entrance::ThermalEntrance;
use crate::error::{Error, Result};
use crate::fluids::FluidProperties;
use crate::operating::FluidSpec;
use crate::post::PassageFigures;

/// How the passage's wall is held.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Heating {
    /// A uniform wall temperature, K (`--wall-temperature`).
    WallTemperature(f64),
    /// A total heat input over the length into the fluid, W (`--heat-load`; negative cools).
    HeatLoad(f64),
    /// A heat flux into the fluid on the wetted wall, W/m² (`--heat-flux`).
    HeatFlux(f64),
}

/// What a rating needs beyond the operating point and the length.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RatingSpec {
    /// Inlet bulk temperature, K (`--inlet-temperature`).
    pub inlet_temperature_k: f64,
    pub heating: Heating,
}

impl RatingSpec {
    /// Checks the values that need no geometry.
    pub fn validate(&self) -> Result<()> {
        let t = self.inlet_temperature_k;
        if !(t.is_finite() && t > 0.0) {
            return Err(Error::param(
                "--inlet-temperature",
                "must be a temperature above absolute zero",
            ));
        }
        match self.heating {
            Heating::WallTemperature(tw) if !(tw.is_finite() && tw > 0.0) => Err(Error::param(
                "--wall-temperature",
                "must be a temperature above absolute zero",
            )),
            Heating::HeatLoad(q) if !q.is_finite() => {
                Err(Error::param("--heat-load", "must be a finite number (W)"))
            }
            Heating::HeatFlux(q) if !q.is_finite() => Err(Error::param(
                "--heat-flux",
                "must be a finite number (W/m²)",
            )),
            _ => Ok(()),
        }
    }
}

/// The rating of one passage.
#[derive(Debug, Clone, PartialEq)]
pub struct PassageRating {
    pub reynolds: f64,
    pub regime: Regime,
    pub x_star: f64,
    pub x_plus: f64,
    pub nusselt_mean: f64,
    pub heat_transfer_coefficient_mean_w_m2k: f64,
    pub outlet_temperature_k: f64,
    pub heat_rate_w: f64,
    /// The H1 condition's wall temperature at the outlet.
    pub wall_temperature_outlet_k: Option<f64>,
}

/// The rating of the whole cross-section (the passages in parallel).
#[derive(Debug, Clone, PartialEq)]
pub struct Rating {
    pub inlet_temperature_k: f64,
    /// Mixed-mean outlet temperature of all passages.
    pub outlet_temperature_k: f64,
    pub heat_rate_w: f64,
    /// Hottest (heating) or coldest (cooling) wall at the outlet, H1 condition only.
    pub wall_temperature_outlet_k: Option<f64>,
    /// The properties at the mean bulk temperature.
    pub fluid: FluidProperties,
    pub prandtl: f64,
    pub passages: Vec<PassageRating>,
    /// Which model gave the Nusselt numbers.
    pub thermal_model: String,
    /// Iterations of the mean bulk temperature.
    pub iterations: usize,
}

/// Water above this at the outlet or the wall boils at atmospheric pressure.
const BOILING_K: f64 = 373.15;

/// Rates the passage(s) `passages` over `length` at the operating point's flow
/// rate `flow_rate` (m³/s: as given, or found from a pressure gradient or drop at the operating
/// point's own temperature) and fluid, with the thermal entrance of every passage (`entrance`).
#[allow(clippy::too_many_arguments)]
pub fn rate(
    spec: &RatingSpec,
    fluid: &FluidSpec,
    flow_rate: f64,
    length: f64,
    passages: &[PassageFigures],
    entrance: &ThermalEntrance,
    warnings: &mut Vec<String>,
) -> Result<Rating> {
    spec.validate()?;
    if entrance.passages.len() != passages.len() {
        return Err(Error::Numerical(
            "the entrance results do not match the passages".into(),
        ));
    }
    let t_in = spec.inlet_temperature_k;
    // Properties at a temperature: a named fluid at that temperature, given ones as given.
    let properties = |t: f64| -> Result<FluidProperties> {
        let (p, _) = match fluid {
            FluidSpec::Named { name, .. } => crate::fluids::by_name(name, Some(t))?,
            FluidSpec::Given { .. } => fluid.properties()?,
        };
        Ok(p)
    };
    let depends_on_temperature = matches!(fluid, FluidSpec::Named { .. });
    let total_perimeter: f64 = passages.iter().map(|p| p.perimeter).sum();
    let mut t_mean = t_in;
    let mut iterations = 0;
    loop {
        iterations += 1;
        let props = properties(t_mean).map_err(|e| {
            let option = match spec.heating {
                Heating::WallTemperature(_) => "--wall-temperature",
                Heating::HeatLoad(_) => "--heat-load",
                Heating::HeatFlux(_) => "--heat-flux",
            };
            Error::param(
                option,
                format!(
                    "the rating's mean bulk temperature reaches {:.1} °C, where the fluid \
                     model does not hold ({e}); a single-phase rating cannot be given",
                    t_mean - 273.15
                ),
            )
        })?;
        let result = rate_at(
            spec,
            &props,
            flow_rate,
            length,
            passages,
            total_perimeter,
            entrance,
        )?;
        let t_next = 0.5 * (t_in + result.outlet_temperature_k);
        if !depends_on_temperature || (t_next - t_mean).abs() < 1e-6 || iterations >= 50 {
            if depends_on_temperature && (t_next - t_mean).abs() >= 1e-6 {
                warnings.push(format!(
                    "the mean bulk temperature of the rating did not settle in {iterations} \
                     iterations ({:.3} °C against {:.3} °C)",
                    t_next - 273.15,
                    t_mean - 273.15
                ));
            }
            let rating = Rating {
                iterations,
                ..result
            };
            check_temperatures(&rating, fluid, warnings);
            return Ok(rating);
        }
        t_mean = t_next;
    }
}

/// The rating with the properties `props` (one pass of [`rate`]'s iteration).
#[allow(clippy::too_many_arguments)]
fn rate_at(
    spec: &RatingSpec,
    props: &FluidProperties,
    q_total: f64,
    length: f64,
    passages: &[PassageFigures],
    total_perimeter: f64,
    entrance: &ThermalEntrance,
) -> Result<Rating> {
    let (mu, rho) = (props.viscosity_pa_s, props.density_kg_m3);
    let (k, cp) =
        match (props.conductivity_w_mk, props.specific_heat_j_kgk) {
            (Some(k), Some(cp)) => (k, cp),
            _ => return Err(Error::param(
                "--inlet-temperature",
                "a thermal rating needs the fluid's conductivity and specific heat: use a named \
                 fluid (--fluid water) or give --conductivity and --specific-heat",
            )),
        };
    let pr = mu * cp / k;
    // The total flow: a flow rate as given, a pressure gradient through the laminar solution
    // (Q = G·∫ũ dA/μ; in turbulent flow the operating point's own regime handling applies).
    let t_in = spec.inlet_temperature_k;
    let flux = match spec.heating {
        Heating::WallTemperature(_) => None,
        Heating::HeatLoad(q) => Some(q / (total_perimeter * length)),
        Heating::HeatFlux(q) => Some(q),
    };
    let mut out = Vec::with_capacity(passages.len());
    let mut models = Vec::new();
    for (p, e) in passages.iter().zip(&entrance.passages) {
        let q = q_total * p.flow_share;
        let d = p.hydraulic_diameter;
        let mean = q / p.area;
        let re = rho * mean * d / mu;
        let x_plus = length / (d * re);
        let x_star = x_plus / pr;
        let duct = Duct::new(
            p.fanning_f_re,
            0.0,
            Thresholds::for_duct(true),
            FrictionModel::ColebrookWhite,
        )?;
        let regime = duct.regime(re)?;
        // Laminar mean Nusselt number at a Reynolds number (through x*), from the march;
        // beyond its last station the fully developed value continues it.
        let laminar_mean = |re: f64, h1: bool| -> f64 {
            let x = length / (d * re * pr);
            let last = e.curve.last().map_or(0.0, |c| c[0]);
            let fd = if h1 {
                e.nusselt_h1_fully_developed
            } else {
                e.nusselt_t_fully_developed
            };
            if x <= last {
                e.means_at(x)
                    .map_or(f64::NAN, |m| if h1 { m.1 } else { m.0 })
            } else {
                let (mt, mh) = e.means_at(last).unwrap_or((fd, fd));
                let m = if h1 { mh } else { mt };
                (m * last + fd * (x - last)) / x
            }
        };
        let h1 = flux.is_some();
        let estimate = duct.nusselt(re, pr, |r| laminar_mean(r, h1), Some(length / d))?;
        models.push(estimate.model);
        let nu_m = estimate.value;
        let h_m = nu_m * k / d;
        let m_dot = rho * q;
        let (t_out, heat, wall_out) = match (spec.heating, flux) {
            (Heating::WallTemperature(tw), _) => {
                let t_out = tw + (t_in - tw) * (-4.0 * nu_m * x_star).exp();
                (t_out, m_dot * cp * (t_out - t_in), None)
            }
            (_, Some(qf)) => {
                let heat = qf * p.perimeter * length;
                let t_out = t_in + heat / (m_dot * cp);
                // The local film coefficient at the outlet: the march's local value in laminar
                // flow, the mean one (a fair bound) otherwise.
                let nu_local = if regime == Regime::Laminar {
                    local_h1(e, x_star)
                } else {
                    nu_m
                };
                (t_out, heat, Some(t_out + qf * d / (k * nu_local)))
            }
            (_, None) => unreachable!("a heat load or flux sets the flux"),
        };
        out.push(PassageRating {
            reynolds: re,
            regime,
            x_star,
            x_plus,
            nusselt_mean: nu_m,
            heat_transfer_coefficient_mean_w_m2k: h_m,
            outlet_temperature_k: t_out,
            heat_rate_w: heat,
            wall_temperature_outlet_k: wall_out,
        });
    }
    let m_total: f64 = passages.iter().map(|p| p.flow_share).sum();
    let outlet = out
        .iter()
        .zip(passages)
        .map(|(r, p)| r.outlet_temperature_k * p.flow_share)
        .sum::<f64>()
        / m_total;
    let heat = out.iter().map(|r| r.heat_rate_w).sum();
    let wall =
        out.iter()
            .filter_map(|r| r.wall_temperature_outlet_k)
            .fold(None, |acc: Option<f64>, t| {
                Some(acc.map_or(t, |a| if heat >= 0.0 { a.max(t) } else { a.min(t) }))
            });
    models.dedup();
    let thermal_model = models
        .iter()
        .map(|m| match m {
            crate::correlations::Model::Laminar => LAMINAR_THERMAL_MODEL.to_string(),
            m => m.name().to_string(),
        })
        .collect::<Vec<_>>()
        .join("; ");
    Ok(Rating {
        inlet_temperature_k: t_in,
        outlet_temperature_k: outlet,
        heat_rate_w: heat,
        wall_temperature_outlet_k: wall,
        fluid: props.clone(),
        prandtl: pr,
        passages: out,
        thermal_model,
        iterations: 0,
    })
}

/// The laminar model's name in `thermal_model`.
pub const LAMINAR_THERMAL_MODEL: &str =
    "laminar thermal entrance of this cross-section (fully developed velocity)";

/// The local Nu_x,H1 at x* from the march (the fully developed value beyond it).
fn local_h1(e: &crate::entrance::PassageEntrance, x: f64) -> f64 {
    let c = &e.curve;
    match c.iter().position(|p| p[0] >= x) {
        None => e.nusselt_h1_fully_developed,
        Some(0) => c[0][2] * (c[0][0] / x).cbrt(),
        Some(i) => {
            let (a, b) = (&c[i - 1], &c[i]);
            let t = (x.ln() - a[0].ln()) / (b[0].ln() - a[0].ln());
            a[2] + t * (b[2] - a[2])
        }
    }
}

/// Warnings where the rating's temperatures leave what the models hold for.
fn check_temperatures(r: &Rating, fluid: &FluidSpec, warnings: &mut Vec<String>) {
    let water =
        matches!(fluid, FluidSpec::Named { name, .. } if name.eq_ignore_ascii_case("water"));
    let hottest = r
        .wall_temperature_outlet_k
        .unwrap_or(f64::NEG_INFINITY)
        .max(r.outlet_temperature_k);
    if water && hottest >= BOILING_K {
        warnings.push(format!(
            "the rating reaches {:.1} °C (outlet or wall): water boils at 100 °C at atmospheric \
             pressure; the passage must be pressurised, or the coolant will boil and these \
             single-phase results do not hold (check against local codes and licensed \
             engineering practice)",
            hottest - 273.15
        ));
    }
    for p in &r.passages {
        if p.regime == Regime::Laminar && p.reynolds * r.prandtl < 100.0 {
            warnings.push(format!(
                "Re·Pr = {:.0} is below 100: axial conduction, which the thermal entrance \
                 model neglects, raises the heat transfer near the inlet",
                p.reynolds * r.prandtl
            ));
            break;
        }
    }
}
