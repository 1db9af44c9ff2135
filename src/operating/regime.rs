//! The operating point beyond the laminar range (issue 18): the regime of the section and of
//! each passage, and the figures the correlations give where the laminar solution no longer
//! holds.
//!
//! Owns: the choice of regime thresholds from the unit solution ([`sharp_corners`]), the
//! passages as ducts in parallel ([`Channel`], [`channels`]), the common pressure gradient of
//! passages in different regimes ([`split_flow`]), the per-passage results and the `models`
//! descriptions, and [`beyond_laminar`], the operating point when some passage is transitional
//! or turbulent.
//!
//! Every correlation is [`crate::correlations`]'s (Colebrook–White at Jones's laminar-equivalent
//! diameter with ε/D_h for friction, Gnielinski with his transitional interpolation and entrance
//! factor for Nusselt numbers); this module only applies them to canalis's laminar figures
//! (f·Re, Nu_H1, Nu_T of the section or passage) and the fluid.
//!
//! What stays laminar outside laminar flow: the unit-problem figures (f·Re, Nu, u_max/ū, the
//! wall-shear ratios), the fields and pictures. The maximum velocity and the wall-shear extremes
//! are not estimated there (`None`): the laminar profile scaled to a turbulent gradient would be
//! wrong by a large factor, and no correlation here gives them.
//!
//! Invariant: computes from finished figures only; solves no field, formats no report.

use super::{Drive, LengthResult, OperatingResult, OperatingSpec, PassageResult};
use crate::correlations::{
    darcy_re2, pressure_gradient, turbulent_entrance_length_hydrodynamic,
    turbulent_entrance_length_thermal, Duct, Estimate, FrictionModel, Model, Regime, Thresholds,
    LAMINAR_WARNING_RE, MAX_RELATIVE_ROUGHNESS, NUSSELT_TRANSITION_LOW_RE,
};
use crate::error::{Error, Result};
use crate::fluids::FluidProperties;
use crate::geometry::{WallSample, Walls};
use crate::heat::HeatFigures;
use crate::post::{Figures, PassageFigures};
use crate::units::format_significant;

/// How the `models` object names canalis's own laminar solution.
pub const LAMINAR_MODEL: &str = "laminar (canalis cut-cell solution)";

/// A cross-section whose smallest local wall shear is below this fraction of its perimeter mean
/// is taken to have sharp corners ([`sharp_corners`]).
///
/// Why the wall shear: what makes a duct with corners leave laminar flow earlier is the slow
/// fluid in its corners, and the wall shear there is what shows it. In a convex corner of
/// interior angle α the wall shear falls as r^(π/α − 1) towards the vertex (r the distance):
/// linearly at 90°, as √r at 120°, so the wall sample nearest a vertex (a quarter of a cell
/// away) is a few per cent of the mean at the default grid, and about 0.13 for the shallow
/// corners (about 130°) of shapes/d_section.toml. Smooth sections stay well above 0.2: a
/// circle 1, shapes/mould_slot.toml and the traced shapes/scanned_insert.png 0.7, an ellipse
/// of axes 2:1 about 0.6 (the laminar distributions computed by canalis; the threshold is
/// canalis's choice, no source). A mask's pixel staircase has a re-entrant step at every pixel
/// and counts as sharp, which is the conservative side.
pub const SHARP_CORNER_SHEAR_RATIO: f64 = 0.2;

/// Smallest turn of the wall normal between two neighbouring wall samples that counts as a
/// corner ([`sharp_corners`]): 30°. A smooth wall turns by its curvature times the sample
/// spacing (half a cell): 0.3° per sample on a circle 600 cells across, 3° at 60 cells.
pub const CORNER_TURN_DEG: f64 = 30.0;

/// Whether the section has sharp corners, which decides [`Thresholds::for_duct`] (2000/4000
/// with sharp corners, 2300/4000 without). Two cheap tests, either suffices:
///
/// - the geometry: the wall normal turns by more than [`CORNER_TURN_DEG`] between two
///   neighbouring samples of one wall (a polygon's vertex, a rectangle's corner, a pixel
///   step), or between the ends of two walls that meet (a fin on a tube wall, the flat of a
///   D-section), whatever the grid (a gap narrower than a sample spacing counts too);
/// - the laminar solution: the smallest local wall shear is below
///   [`SHARP_CORNER_SHEAR_RATIO`] of its mean (or was not evaluated).
pub fn sharp_corners(f: &Figures, walls: &Walls) -> bool {
    let cos_turn = CORNER_TURN_DEG.to_radians().cos();
    let samples = &walls.samples;
    let turned = |a: &WallSample, b: &WallSample| {
        a.normal[0] * b.normal[0] + a.normal[1] * b.normal[1] < cos_turn
    };
    let neighbours = |a: &WallSample, b: &WallSample| {
        a.wall == b.wall && (b.s - a.s).abs() <= 1.5 * a.ds.max(b.ds)
    };
    // Within a wall: a vertex between two neighbouring samples.
    if samples
        .windows(2)
        .any(|w| neighbours(&w[0], &w[1]) && turned(&w[0], &w[1]))
    {
        return true;
    }
    // Where walls meet: the ends of the runs of neighbouring samples, one against another that
    // lies within a sample spacing of it.
    let mut ends = Vec::new();
    for (i, a) in samples.iter().enumerate() {
        let starts = i == 0 || !neighbours(&samples[i - 1], a);
        let stops = i + 1 == samples.len() || !neighbours(a, &samples[i + 1]);
        if starts || stops {
            ends.push(a);
        }
    }
    let junction = ends.iter().enumerate().any(|(i, a)| {
        ends[i + 1..].iter().any(|b| {
            let d = (a.point[0] - b.point[0]).hypot(a.point[1] - b.point[1]);
            d <= 1.5 * a.ds.max(b.ds) && turned(a, b)
        })
    });
    junction
        || f.wall_shear_min_to_mean.is_nan()
        || f.wall_shear_min_to_mean < SHARP_CORNER_SHEAR_RATIO
}

/// One passage of the section as a duct: its laminar figures and the correlations' [`Duct`].
#[derive(Debug, Clone)]
pub struct Channel {
    pub area: f64,
    pub perimeter: f64,
    pub hydraulic_diameter: f64,
    /// ∫ũ dA over the passage, m⁴.
    pub flow_integral: f64,
    pub duct: Duct,
    /// "passage 2 of 3" (empty for a section of one passage).
    pub label: String,
}

impl Channel {
    /// The Reynolds number the laminar solution gives at gradient `g`.
    pub fn laminar_reynolds(&self, g: f64, fluid: &FluidProperties) -> f64 {
        let mu = fluid.viscosity_pa_s;
        fluid.density_kg_m3 * (g / mu) * self.flow_integral / self.area * self.hydraulic_diameter
            / mu
    }

    /// The flow rate at gradient `g` in any regime: Re from f_D·Re² = 2·ρ·D_h³·G/μ²
    /// ([`Duct::reynolds_at`]), Q = Re·μ·A/(ρ·D_h).
    pub fn flow_at(&self, g: f64, fluid: &FluidProperties) -> Result<f64> {
        let (mu, rho) = (fluid.viscosity_pa_s, fluid.density_kg_m3);
        let re = self
            .duct
            .reynolds_at(darcy_re2(g, rho, mu, self.hydraulic_diameter)?)?;
        Ok(re * mu * self.area / (rho * self.hydraulic_diameter))
    }

    /// The Reynolds number of flow rate `q`.
    pub fn reynolds(&self, q: f64, fluid: &FluidProperties) -> f64 {
        fluid.density_kg_m3 * (q / self.area) * self.hydraulic_diameter / fluid.viscosity_pa_s
    }

    /// The gradient and friction factor of flow rate `q` in any regime:
    /// G = f_D·ρ·ū²/(2·D_h) with f_D from [`Duct::darcy_friction`].
    pub fn gradient_at(&self, q: f64, fluid: &FluidProperties) -> Result<(f64, Estimate)> {
        let friction = self.duct.darcy_friction(self.reynolds(q, fluid))?;
        let g = pressure_gradient(
            friction.value,
            fluid.density_kg_m3,
            q / self.area,
            self.hydraulic_diameter,
        )?;
        Ok((g, friction))
    }
}

/// The passages as ducts: one per passage when there are several (each with its own laminar
/// f·Re, D_h and area), else the whole section from `f`. ε/D_h ≥ 0.5 in any of them is an
/// error naming `--roughness`. A passage whose laminar figures could not be evaluated makes the
/// whole section one duct (the split is then the laminar one).
pub fn channels(
    f: &Figures,
    passages: &[PassageFigures],
    roughness: f64,
    thresholds: Thresholds,
) -> Result<Vec<Channel>> {
    let duct = |fanning_f_re: f64, d_h: f64| -> Result<Duct> {
        let relative = roughness / d_h;
        if relative.is_nan() || relative >= MAX_RELATIVE_ROUGHNESS {
            return Err(Error::param(
                "--roughness",
                format!(
                    "ε = {roughness} m is {} of the hydraulic diameter {d_h} m: not a wall \
                     roughness (ε/D_h must be below {MAX_RELATIVE_ROUGHNESS}; the correlations \
                     hold up to 0.05)",
                    format_significant(relative, 0.01)
                ),
            ));
        }
        Duct::new(
            fanning_f_re,
            relative,
            thresholds,
            FrictionModel::ColebrookWhite,
        )
    };
    let usable = passages.len() > 1
        && passages.iter().all(|p| {
            [
                p.fanning_f_re,
                p.flow_integral,
                p.area,
                p.hydraulic_diameter,
            ]
            .iter()
            .all(|v| v.is_finite() && *v > 0.0)
        });
    if usable {
        let n = passages.len();
        return passages
            .iter()
            .enumerate()
            .map(|(i, p)| {
                Ok(Channel {
                    area: p.area,
                    perimeter: p.perimeter,
                    hydraulic_diameter: p.hydraulic_diameter,
                    flow_integral: p.flow_integral,
                    duct: duct(p.fanning_f_re, p.hydraulic_diameter)?,
                    label: format!("passage {} of {n}", i + 1),
                })
            })
            .collect();
    }
    Ok(vec![Channel {
        area: f.area,
        perimeter: f.perimeter,
        hydraulic_diameter: f.hydraulic_diameter,
        flow_integral: f.flow_integral,
        duct: duct(f.fanning_f_re, f.hydraulic_diameter)?,
        label: String::new(),
    }])
}

/// The common gradient G of passages in parallel that carry the flow rate `q` together:
/// Σ Q_p(G) = q with each Q_p from its own regime ([`Channel::flow_at`]). Each Q_p increases
/// with G, so the root is unique; bisection on ln G from the laminar gradient `g_laminar`
/// (turbulent friction is above the laminar one, so the root lies above it) to a relative
/// 1e-13.
pub fn split_flow(
    channels: &[Channel],
    q: f64,
    g_laminar: f64,
    fluid: &FluidProperties,
) -> Result<f64> {
    let total = |g: f64| -> Result<f64> {
        channels
            .iter()
            .map(|c| c.flow_at(g, fluid))
            .sum::<Result<f64>>()
    };
    let (mut lo, mut hi) = (g_laminar, g_laminar);
    let mut steps = 0;
    while total(lo)? > q || total(hi)? < q {
        if total(lo)? > q {
            lo *= 0.5;
        } else {
            hi *= 2.0;
        }
        steps += 1;
        if steps > 2000 || !(lo > 0.0 && hi.is_finite()) {
            return Err(Error::Numerical(format!(
                "no pressure gradient carries {q:e} m³/s through the passages"
            )));
        }
    }
    // total(g) < q exactly when total(g) − q < 0 (the sign of a difference is exact).
    crate::correlations::friction::geometric_bisection(lo, hi, |g| Ok(total(g)? - q))
}

/// The order of regimes away from laminar flow.
fn rank(r: Regime) -> u8 {
    match r {
        Regime::Laminar => 0,
        Regime::Transitional => 1,
        Regime::Turbulent => 2,
    }
}

/// A passage that leaves the laminar range (Re above [`LAMINAR_WARNING_RE`]), named.
fn passage_warning(c: &Channel, re: f64, regime: Regime) -> String {
    format!(
        "{} (D_h {} mm) runs at Reynolds number {} (on its own D_h), above {LAMINAR_WARNING_RE:.0}: \
         {}",
        c.label,
        format_significant(c.hydraulic_diameter * 1e3, 1e-3),
        format_significant(re, 0.01),
        match regime {
            Regime::Laminar => "still laminar by the thresholds used, but near transition".into(),
            r => format!(
                "{r} flow; its flow, friction and film coefficients come from the correlations"
            ),
        }
    )
}

/// The passages of a laminar operating point: Q_p = (G/μ)·I_p (the arithmetic of the report
/// before issue 18), Re on each passage's D_h, τ̄_p = G·A_p/P_p, laminar entrance lengths. A
/// passage above [`LAMINAR_WARNING_RE`] is warned about by name.
pub fn laminar_passages(
    passages: &[PassageFigures],
    channels: &[Channel],
    g: f64,
    fluid: &FluidProperties,
    length: Option<f64>,
    warnings: &mut Vec<String>,
) -> Vec<PassageResult> {
    let (mu, rho) = (fluid.viscosity_pa_s, fluid.density_kg_m3);
    let k = g / mu;
    let pr = fluid.prandtl();
    passages
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let q = k * p.flow_integral;
            let mean = q / p.area;
            let re = rho * mean * p.hydraulic_diameter / mu;
            let lh = length.map(|_| 0.05 * re * p.hydraulic_diameter);
            let mut own = Vec::new();
            if passages.len() > 1 && re > LAMINAR_WARNING_RE {
                if let Some(c) = channels.get(i) {
                    let w = passage_warning(c, re, Regime::Laminar);
                    warnings.push(w.clone());
                    own.push(w);
                }
            }
            PassageResult {
                flow_rate_m3_s: q,
                mean_velocity_m_s: mean,
                reynolds: re,
                regime: Regime::Laminar,
                darcy_friction_factor: 4.0 * p.fanning_f_re / re,
                wall_shear_mean_pa: g * p.area / p.perimeter,
                entrance_length_hydrodynamic_m: lh,
                entrance_length_thermal_m: lh.zip(pr).map(|(lh, pr)| lh * pr),
                warnings: own,
            }
        })
        .collect()
}

/// The figure the drive leaves to be found: the gradient for a flow rate, the flow rate for a
/// gradient or a pressure drop.
fn derived_key(drive: &Drive) -> &'static str {
    match drive {
        Drive::FlowRate(_) => "pressure_gradient_pa_m",
        Drive::PressureGradient(_) | Drive::PressureDrop(_) => "flow_rate_m3_s",
    }
}

/// `models` of a laminar operating point: every figure is the laminar solution's.
pub fn laminar_models(spec: &OperatingSpec, heat: bool, length: bool) -> Vec<(String, String)> {
    let mut m = vec![
        ("darcy_friction_factor", LAMINAR_MODEL.to_string()),
        (derived_key(&spec.drive), LAMINAR_MODEL.to_string()),
        ("wall_shear_mean_pa", LAMINAR_MODEL.to_string()),
        ("wall_shear_max_pa", LAMINAR_MODEL.to_string()),
        ("max_velocity_m_s", LAMINAR_MODEL.to_string()),
    ];
    if heat {
        // Hook of the thermal entrance (src/entrance.rs, work in progress): with --length, the
        // laminar mean Nusselt number over the length belongs here once it is wired.
        m.push((
            "heat_transfer_coefficient_h1_w_m2k",
            format!("{LAMINAR_MODEL}, fully developed"),
        ));
        m.push((
            "heat_transfer_coefficient_t_w_m2k",
            format!("{LAMINAR_MODEL}, fully developed"),
        ));
    }
    if length {
        m.push((
            "entrance_lengths",
            "0.05·Re·D_h and 0.05·Re·Pr·D_h (laminar rule for round tubes, common practice, no \
             source)"
                .to_string(),
        ));
    }
    m.into_iter().map(|(k, v)| (k.to_string(), v)).collect()
}

/// Adds each of `from` to `to` unless there already, prefixed with `prefix` (a passage label).
fn absorb(to: &mut Vec<String>, from: &[String], prefix: &str) {
    for w in from {
        let w = if prefix.is_empty() {
            w.clone()
        } else {
            format!("{prefix}: {w}")
        };
        if !to.contains(&w) {
            to.push(w);
        }
    }
}

/// One description per passage ("passage 1 of 3: …; passage 2 of 3: …"), or the one of a
/// single duct.
fn per_passage(channels: &[Channel], describe: impl Fn(usize) -> String) -> String {
    if channels.len() == 1 {
        return describe(0);
    }
    channels
        .iter()
        .enumerate()
        .map(|(i, c)| format!("{}: {}", c.label, describe(i)))
        .collect::<Vec<_>>()
        .join("; ")
}

fn push_model(models: &mut Vec<Model>, m: Model) {
    if m != Model::Laminar && !models.contains(&m) {
        models.push(m);
    }
}

/// The operating point when some passage is transitional or turbulent at the laminar gradient.
///
/// 1. The gradient G and each passage's flow rate: a flow rate through one duct gives Re, f_D
///    ([`Duct::darcy_friction`]) and G = f_D·ρ·ū²/(2·D_h); through several passages, G is the
///    common gradient that carries it ([`split_flow`]); a gradient (or Δp/L) gives each
///    passage's Re from f_D·Re² ([`Duct::reynolds_at`]).
/// 2. Each passage's regime, friction factor, mean wall shear τ̄_p = G·A_p/P_p (force balance,
///    any regime) and Nusselt numbers ([`Duct::nusselt`], with its laminar Nu_H1 or Nu_T below
///    Re = 2300 and Gnielinski's entrance factor over the length); the section's film
///    coefficient with several passages is the perimeter-weighted mean Σh_p·P_p/ΣP_p (the heat
///    rate per unit length and wall-to-bulk temperature difference, equal in every passage).
/// 3. The section: Q = ΣQ_p, Re on its D_h, the regime furthest from laminar among the
///    passages, f_D = 2·G·D_h/(ρ·ū²) (the passage's own for one passage), τ̄ = G·A/P.
/// 4. With a length: Δp = G·L, R = Δp/Q, entrance lengths by regime (turbulent: Zhi-qing's
///    L_h and about 10·D_h for L_t; transitional: the laminar rule, the upper bound).
pub fn beyond_laminar(
    f: &Figures,
    heat: Option<&HeatFigures>,
    channels: &[Channel],
    spec: &OperatingSpec,
    fluid: FluidProperties,
    sharp: bool,
    warnings: &mut Vec<String>,
) -> Result<OperatingResult> {
    let (mu, rho) = (fluid.viscosity_pa_s, fluid.density_kg_m3);
    let thresholds = channels[0].duct.thresholds();
    let g_laminar_of = |q: f64| q * mu / f.flow_integral;
    let flows_at =
        |g: f64| -> Result<Vec<f64>> { channels.iter().map(|c| c.flow_at(g, &fluid)).collect() };
    let (g, flows, q) = match spec.drive {
        Drive::FlowRate(q) if channels.len() == 1 => {
            (channels[0].gradient_at(q, &fluid)?.0, vec![q], q)
        }
        Drive::FlowRate(q) => {
            let g = split_flow(channels, q, g_laminar_of(q), &fluid)?;
            (g, flows_at(g)?, q)
        }
        Drive::PressureGradient(g) => {
            let flows = flows_at(g)?;
            let q = flows.iter().sum();
            (g, flows, q)
        }
        Drive::PressureDrop(dp) => {
            let g = dp / spec.length.unwrap_or(f64::NAN);
            let flows = flows_at(g)?;
            let q = flows.iter().sum();
            (g, flows, q)
        }
    };
    let mean = q / f.area;
    let re = rho * mean * f.hydraulic_diameter / mu;
    let pr = fluid.prandtl();
    let mut used = Vec::new();

    // Each passage.
    let mut frictions = Vec::new();
    let mut regimes = Vec::new();
    let mut res = Vec::new();
    for (c, &qp) in channels.iter().zip(&flows) {
        let rep = c.reynolds(qp, &fluid);
        let friction = c.duct.darcy_friction(rep)?;
        push_model(&mut used, friction.model);
        absorb(warnings, &friction.warnings, &c.label);
        regimes.push(c.duct.regime(rep)?);
        frictions.push(friction);
        res.push(rep);
    }
    let regime = regimes
        .iter()
        .copied()
        .max_by_key(|r| rank(*r))
        .unwrap_or(Regime::Laminar);
    let darcy = if channels.len() == 1 {
        frictions[0].value
    } else {
        2.0 * g * f.hydraulic_diameter / (rho * mean * mean)
    };

    // Heat transfer: Gnielinski (with his interpolation and entrance factor) per passage.
    let length_ratio = |c: &Channel| spec.length.map(|l| l / c.hydraulic_diameter);
    let mut heat_model = None;
    let mut films: [Option<f64>; 2] = [None, None];
    let mut film_models: [String; 2] = [String::new(), String::new()];
    if let (Some(h), Some(k)) = (heat, fluid.conductivity_w_mk) {
        match pr {
            None => warnings.push(
                "the film coefficients outside laminar flow need the Prandtl number: give \
                 --specific-heat with --conductivity (or a named fluid); they are left out"
                    .to_string(),
            ),
            Some(pr) => {
                for (slot, nu_lam) in [h.nusselt_h1, h.nusselt_t].into_iter().enumerate() {
                    let mut sum = 0.0;
                    let mut estimates = Vec::new();
                    for (c, &rep) in channels.iter().zip(&res) {
                        // Hook of the thermal entrance (src/entrance.rs): the laminar mean
                        // Nusselt number over the length belongs in this closure once wired;
                        // until then the fully developed one.
                        let nu = c.duct.nusselt(rep, pr, |_| nu_lam, length_ratio(c))?;
                        push_model(&mut used, nu.model);
                        if nu.model != Model::Laminar && spec.length.is_some() {
                            push_model(&mut used, Model::GnielinskiEntrance);
                        }
                        absorb(warnings, &nu.warnings, &c.label);
                        sum += nu.value * k / c.hydraulic_diameter * c.perimeter;
                        estimates.push(nu);
                    }
                    let perimeter: f64 = channels.iter().map(|c| c.perimeter).sum();
                    films[slot] = Some(sum / perimeter);
                    film_models[slot] = per_passage(channels, |i| {
                        let e = &estimates[i];
                        let mut d = if e.model == Model::Laminar {
                            format!("{LAMINAR_MODEL}, fully developed")
                        } else {
                            e.describe()
                        };
                        if e.model != Model::Laminar {
                            if let Some(l) = spec.length {
                                d += &format!(
                                    ", times Gnielinski's entrance factor 1 + (D_h/L)^(2/3) \
                                     over L = {l} m"
                                );
                            }
                        }
                        d
                    });
                }
                heat_model = Some(film_models[0].clone());
            }
        }
    }

    // Entrance lengths of a duct at Re: turbulent by the correlations, otherwise the laminar
    // rule (an upper bound in transitional flow).
    let entrance = |rep: f64, regime: Regime, d_h: f64| -> Result<(f64, Option<f64>)> {
        Ok(if regime == Regime::Turbulent {
            let lh = turbulent_entrance_length_hydrodynamic(rep)?.value * d_h;
            let lt = turbulent_entrance_length_thermal(rep)?.value * d_h;
            (lh, pr.map(|_| lt))
        } else {
            let lh = 0.05 * rep * d_h;
            (lh, pr.map(|pr| lh * pr))
        })
    };
    let length = match spec.length {
        None => None,
        Some(l) => {
            let (lh, lt) = entrance(re, regime, f.hydraulic_diameter)?;
            if regime == Regime::Turbulent {
                push_model(&mut used, Model::EntranceLengthHydrodynamic);
                push_model(&mut used, Model::EntranceLengthThermal);
            }
            if l < lh {
                warnings.push(format!(
                    "the passage ({} m) is shorter than the hydrodynamic entrance length ≈ {} m: \
                     the fully developed friction understates the pressure drop",
                    format_significant(l, 1e-3),
                    format_significant(lh, 0.1)
                ));
            }
            Some(LengthResult::new(l, g, q, lh, lt))
        }
    };

    // The passages' entries and warnings.
    let mut passages = Vec::new();
    for (i, c) in channels.iter().enumerate() {
        let (rep, regime_p) = (res[i], regimes[i]);
        let mut own = Vec::new();
        if channels.len() > 1 {
            absorb(&mut own, &frictions[i].warnings, "");
            if rep > LAMINAR_WARNING_RE {
                let w = passage_warning(c, rep, regime_p);
                warnings.push(w.clone());
                own.push(w);
            }
        }
        let (lh, lt) = match spec.length {
            Some(_) => {
                let (lh, lt) = entrance(rep, regime_p, c.hydraulic_diameter)?;
                (Some(lh), lt)
            }
            None => (None, None),
        };
        passages.push(PassageResult {
            flow_rate_m3_s: flows[i],
            mean_velocity_m_s: flows[i] / c.area,
            reynolds: rep,
            regime: regime_p,
            darcy_friction_factor: frictions[i].value,
            wall_shear_mean_pa: g * c.area / c.perimeter,
            entrance_length_hydrodynamic_m: lh,
            entrance_length_thermal_m: lt,
            warnings: own,
        });
    }

    // The headline warning: what comes from where, and how good it is.
    let accuracy: Vec<String> = used
        .iter()
        .filter_map(|m| {
            m.accuracy()
                .relative
                .map(|r| format!("{} about ±{:.0} %", m.name(), 100.0 * r))
        })
        .collect();
    let which = if channels.len() > 1 {
        let away: Vec<&str> = channels
            .iter()
            .zip(&regimes)
            .filter(|(_, r)| **r != Regime::Laminar)
            .map(|(c, _)| c.label.as_str())
            .collect();
        format!(
            "{} of the passages in parallel {} not laminar ({}; the section's Reynolds number \
             {} on its own D_h is not a passage's)",
            away.len(),
            if away.len() == 1 { "is" } else { "are" },
            away.join(", "),
            format_significant(re, 0.01)
        )
    } else {
        format!(
            "Reynolds number {} is {regime} here",
            format_significant(re, 0.01)
        )
    };
    warnings.insert(
        0,
        format!(
            "{which} (laminar below {}, turbulent above {}: the {} thresholds): the {}, the mean \
             wall shear and the film coefficients come from correlations (see `models`{}), not \
             from the laminar solution; f·Re, the Nusselt numbers, u_max/ū, the wall-shear \
             ratios, the pictures and the field files stay those of the laminar solution, and \
             the maximum velocity and the wall-shear extremes are not estimated",
            thresholds.lower(),
            thresholds.upper(),
            if sharp { "sharp-corner" } else { "round-duct" },
            if matches!(spec.drive, Drive::FlowRate(_)) {
                "pressure gradient"
            } else {
                "flow rate"
            },
            if accuracy.is_empty() {
                String::new()
            } else {
                format!("; {}", accuracy.join(", "))
            }
        ),
    );

    // Which model gave each figure.
    let friction_text = per_passage(channels, |i| {
        let e = &frictions[i];
        match e.model {
            Model::Laminar => LAMINAR_MODEL.to_string(),
            _ => e.describe(),
        }
    });
    let not_estimated = "not estimated outside laminar flow (null): the laminar distribution \
                         does not hold and no correlation gives it"
        .to_string();
    let mut models = vec![
        (
            "regime".to_string(),
            format!(
                "Re on D_h against {}/{} ({}; canalis's test: smallest wall shear below {} of \
                 its mean)",
                thresholds.lower(),
                thresholds.upper(),
                if sharp {
                    "sharp corners"
                } else {
                    "no sharp corners"
                },
                SHARP_CORNER_SHEAR_RATIO
            ),
        ),
        ("darcy_friction_factor".to_string(), friction_text.clone()),
        (
            derived_key(&spec.drive).to_string(),
            if channels.len() > 1 {
                format!(
                    "passages in parallel under one gradient, each by its regime: {friction_text}"
                )
            } else {
                format!("Darcy–Weisbach G = f_D·ρ·ū²/(2·D_h) with {friction_text}")
            },
        ),
        (
            "wall_shear_mean_pa".to_string(),
            "force balance τ̄ = G·A/P with the gradient above".to_string(),
        ),
        ("wall_shear_max_pa".to_string(), not_estimated.clone()),
        ("max_velocity_m_s".to_string(), not_estimated),
    ];
    if films[0].is_some() {
        models.push((
            "heat_transfer_coefficient_h1_w_m2k".to_string(),
            film_models[0].clone(),
        ));
        models.push((
            "heat_transfer_coefficient_t_w_m2k".to_string(),
            film_models[1].clone(),
        ));
    }
    if length.is_some() {
        models.push((
            "entrance_lengths".to_string(),
            if regime == Regime::Turbulent {
                format!(
                    "turbulent: L_h/D_h = 1.359·Re^(1/4) ({}), L_t ≈ 10·D_h ({})",
                    Model::EntranceLengthHydrodynamic.source(),
                    Model::EntranceLengthThermal.source()
                )
            } else {
                "transitional: the laminar rule 0.05·Re·D_h (·Pr), an upper bound (common \
                 practice, no source)"
                    .to_string()
            },
        ));
    }
    if re < NUSSELT_TRANSITION_LOW_RE && films[0].is_some() && channels.len() == 1 {
        warnings.push(format!(
            "the heat transfer stays laminar up to Re = {NUSSELT_TRANSITION_LOW_RE} \
             (Gnielinski's anchor), whatever the friction's thresholds"
        ));
    }

    Ok(OperatingResult {
        prandtl: pr,
        heat_transfer_coefficient_h1_w_m2k: films[0],
        heat_transfer_coefficient_t_w_m2k: films[1],
        length,
        flow_rate_m3_s: q,
        pressure_gradient_pa_m: g,
        mean_velocity_m_s: mean,
        max_velocity_m_s: None,
        reynolds: re,
        wall_shear_mean_pa: g * f.area / f.perimeter,
        wall_shear_max_pa: None,
        wall_shear_min_pa: None,
        regime,
        thresholds,
        sharp_corners: sharp,
        darcy_friction_factor: darcy,
        roughness_m: spec.roughness,
        hydraulic_resistance_per_length_pa_s_m4: g / q,
        models,
        correlations: used,
        passages,
        heat_model,
        fluid,
    })
}
