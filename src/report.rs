//! Output formats: the JSON report object and the human-readable summary.
//!
//! Owns: the report keys of ../shared/INTERFACE.md and the layout of the text summary. Both are
//! consumers of the same [`Outcome`]; nothing here computes physics.

use crate::correlations::Regime;
use crate::entrance::PassageEntrance;
use crate::hydrodynamic::{Combined, HydrodynamicEntrance, PassageDeveloping};
use crate::operating::OperatingResult;
use crate::outcome::{EntranceOutcome, EntranceUncertainty, Outcome};
use crate::rating::{PassageRating, Rating};
use crate::study::entrance::ACCURACY_FROM;
use crate::study::{Kind, Uncertainty};
use crate::units::format_significant;
use serde_json::{json, Map, Value};

/// The cautions every human-readable summary ends with.
pub const CAUTION: &str = "Fully developed laminar flow of a Newtonian fluid with constant \
properties (the entrance regions only where shown: the laminar pressure drop over a length, \
--entrance, a thermal rating; property changes with temperature are not modelled), nor, in \
the laminar solution, transition to turbulence and roughness (an operating point beyond the laminar range uses the \
correlations named above). Not a substitute for local codes and licensed engineering practice: pressure containment and \
coolant temperatures must be checked by a qualified engineer.";

/// The caution printed with a thermal entrance table.
pub const ENTRANCE_CAUTION: &str = "The thermal entrance table assumes a fully developed \
velocity profile from the inlet (a hydrodynamically developed inlet, or a fluid whose velocity \
develops much faster than its temperature, Pr ≫ 1), constant properties and no axial \
conduction (Re·Pr well above 100). With a uniform inlet velocity at low Pr the heat transfer \
near the inlet is higher than shown (see the combined entry with --prandtl).";

/// The caution printed with a hydrodynamic entrance table.
pub const HYDRODYNAMIC_CAUTION: &str = "The hydrodynamic entrance assumes a uniform velocity at \
a smooth, well-rounded inlet and a parabolised flow (no axial diffusion: Re well above 50); a \
sharp-edged or disturbed inlet adds losses of its own (give them with --minor-loss), and \
the cross-flow is the irrotational one continuity requires (see `model`).";

/// The caution added when an operating point leaves the laminar range.
pub const CAUTION_CORRELATIONS: &str = "Beyond the laminar range the pressure drop, wall shear \
and film coefficients come from empirical correlations for round tubes carried over to this \
cross-section by its laminar-equivalent diameter (Jones 1976): Colebrook–White is usually quoted \
to about ±15 % and Gnielinski to about ±20 % against measurements, and transitional flow is \
intermittent, so values between the thresholds are interpolations with no stated accuracy; \
defer to local codes and measured data where they exist.";

/// Relative accuracy assumed for printing a figure that comes from a correlation: 3 significant
/// digits (the correlations are good to 15–20 %).
const CORRELATION_PRINT_ACCURACY: f64 = 0.1;

/// Relative accuracy assumed for printing where the run has no estimate of its own: 4
/// significant digits for most values.
const DEFAULT_PRINT_ACCURACY: f64 = 1e-3;

/// The report object (`--json`), all values in SI units.
pub fn json_report(o: &Outcome) -> Value {
    let f = &o.unit.figures;
    let g = &o.unit.classified.grid;
    let mut m = Map::new();
    m.insert("shape".into(), json!(o.name));
    m.insert("area_m2".into(), json!(f.area));
    m.insert("perimeter_m".into(), json!(f.perimeter));
    m.insert("hydraulic_diameter_m".into(), json!(f.hydraulic_diameter));
    m.insert("fanning_f_re".into(), json!(f.fanning_f_re));
    m.insert("darcy_f_re".into(), json!(4.0 * f.fanning_f_re));
    m.insert("max_to_mean_velocity".into(), json!(f.max_to_mean_velocity));
    m.insert(
        "wall_shear_max_to_mean".into(),
        finite(f.wall_shear_max_to_mean),
    );
    m.insert(
        "wall_shear_min_to_mean".into(),
        finite(f.wall_shear_min_to_mean),
    );
    m.insert(
        "force_balance_rel_error".into(),
        finite(f.force_balance_rel_error),
    );
    corners_json(o, &mut m);
    let passages: Vec<Value> = o
        .unit
        .passages
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let mut e = Map::new();
            e.insert("area_m2".into(), json!(p.area));
            e.insert("perimeter_m".into(), json!(p.perimeter));
            e.insert("hydraulic_diameter_m".into(), json!(p.hydraulic_diameter));
            e.insert("fanning_f_re".into(), finite(p.fanning_f_re));
            e.insert("flow_share".into(), finite(p.flow_share));
            e.insert("centroid_m".into(), json!(p.centroid));
            if let Some(pr) = o.operating.as_ref().and_then(|op| op.passages.get(i)) {
                passage_operating_json(pr, &mut e);
            }
            Value::Object(e)
        })
        .collect();
    m.insert("passages".into(), Value::Array(passages));
    if let Some(h) = &o.unit.heat {
        m.insert("nusselt_h1".into(), finite(h.nusselt_h1));
        m.insert("nusselt_t".into(), finite(h.nusselt_t));
    }
    m.insert(
        "grid".into(),
        json!({
            "cells_x": g.cells().0,
            "cells_y": g.cells().1,
            "unknowns": o.unit.numbering.len(),
            "spacing_m": g.h,
        }),
    );
    m.insert(
        "solver".into(),
        json!({
            "method": o.unit.method_name,
            "iterations": o.unit.info.iterations,
            "relative_residual": o.unit.info.relative_residual,
            "seconds": o.seconds,
        }),
    );
    if let Some(op) = &o.operating {
        m.insert("flow_rate_m3_s".into(), json!(op.flow_rate_m3_s));
        m.insert(
            "pressure_gradient_pa_m".into(),
            json!(op.pressure_gradient_pa_m),
        );
        m.insert("mean_velocity_m_s".into(), json!(op.mean_velocity_m_s));
        m.insert("max_velocity_m_s".into(), optional(op.max_velocity_m_s));
        m.insert("reynolds".into(), json!(op.reynolds));
        m.insert("wall_shear_mean_pa".into(), finite(op.wall_shear_mean_pa));
        m.insert("wall_shear_max_pa".into(), optional(op.wall_shear_max_pa));
        m.insert("wall_shear_min_pa".into(), optional(op.wall_shear_min_pa));
        regime_json(op, &mut m);
        if let Some(v) = op.prandtl {
            m.insert("prandtl".into(), json!(v));
        }
        if let Some(v) = op.heat_transfer_coefficient_h1_w_m2k {
            m.insert("heat_transfer_coefficient_h1_w_m2k".into(), finite(v));
        }
        if let Some(v) = op.heat_transfer_coefficient_t_w_m2k {
            m.insert("heat_transfer_coefficient_t_w_m2k".into(), finite(v));
        }
        if let Some(l) = &op.length {
            m.insert("length_m".into(), json!(l.length_m));
            m.insert("pressure_drop_pa".into(), json!(l.pressure_drop_pa));
            m.insert(
                "pressure_drop_fully_developed_pa".into(),
                json!(l.pressure_drop_fully_developed_pa),
            );
            if let Some(v) = l.minor_loss_pa {
                m.insert("minor_loss_pa".into(), finite(v));
            }
            if let Some(model) = l.pressure_drop_model {
                m.insert("pressure_drop_model".into(), json!(model));
            }
            m.insert(
                "entrance_length_hydrodynamic_m".into(),
                json!(l.entrance_length_hydrodynamic_m),
            );
            if let Some(lt) = l.entrance_length_thermal_m {
                m.insert("entrance_length_thermal_m".into(), json!(lt));
            }
            m.insert(
                "hydraulic_resistance_pa_s_m3".into(),
                finite(l.hydraulic_resistance_pa_s_m3),
            );
        }
        m.insert(
            "fluid".into(),
            json!({
                "name": op.fluid.name,
                "viscosity_pa_s": op.fluid.viscosity_pa_s,
                "density_kg_m3": op.fluid.density_kg_m3,
                "temperature_k": op.fluid.temperature_k,
                "conductivity_w_mk": op.fluid.conductivity_w_mk,
                "specific_heat_j_kgk": op.fluid.specific_heat_j_kgk,
                "source": op.fluid.source,
            }),
        );
    }
    if let Some(u) = &o.uncertainty {
        m.insert("uncertainty".into(), uncertainty_json(u));
    }
    if let Some(e) = &o.entrance {
        m.insert("entrance".into(), entrance_json(e));
    }
    if let Some(r) = &o.rating {
        m.insert("rating".into(), rating_json(r));
    }
    m.insert("warnings".into(), json!(o.warnings));
    Value::Object(m)
}

/// The sharp-corner keys (../shared/INTERFACE.md, "Sharp corners"): `singular_corners`
/// always (empty without re-entrant corners), each with `position_m`, `interior_angle_deg`,
/// `exponent`, `coefficient` and, as an extension, `walls_straight`; with singular corners the
/// extensions `wall_shear_max_to_mean_away_from_corners` and `singular_corner_radius_m` (the
/// radius left out around each), and at a laminar operating point
/// `wall_shear_max_away_from_corners_pa`; with a convex sharp corner (wall shear 0 there) the
/// extension `wall_shear_min_at_corner` (`position_m`, `interior_angle_deg`).
fn corners_json(o: &Outcome, m: &mut Map<String, Value>) {
    let f = &o.unit.figures;
    let deg = |a: f64| a.to_degrees();
    let list: Vec<Value> = f
        .singular_corners
        .iter()
        .map(|k| {
            json!({
                "position_m": k.position,
                "interior_angle_deg": deg(k.angle),
                "exponent": k.exponent,
                "coefficient": finite(k.coefficient),
                "walls_straight": k.straight,
                "treated": k.treated,
            })
        })
        .collect();
    if !list.is_empty() {
        m.insert(
            "wall_shear_max_to_mean_away_from_corners".into(),
            finite(f.wall_shear_max_away_to_mean),
        );
        m.insert("singular_corner_radius_m".into(), json!(f.corner_radius));
        if let Some(op) = &o.operating {
            if op.max_velocity_m_s.is_some() {
                m.insert(
                    "wall_shear_max_away_from_corners_pa".into(),
                    finite(op.wall_shear_mean_pa * f.wall_shear_max_away_to_mean),
                );
            }
        }
    }
    m.insert("singular_corners".into(), Value::Array(list));
    if let Some(k) = &f.wall_shear_min_corner {
        m.insert(
            "wall_shear_min_at_corner".into(),
            json!({
                "position_m": k.position,
                "interior_angle_deg": deg(k.angle),
            }),
        );
    }
}

/// The keys of one passage's thermal entrance (../shared/INTERFACE.md, "Developing flow").
fn thermal_passage_json(
    x_star: &[f64],
    p: &PassageEntrance,
    uncertainty: Option<(&EntranceUncertainty, usize)>,
) -> Map<String, Value> {
    let arr = |v: &[f64]| Value::Array(v.iter().map(|&x| finite(x)).collect());
    let opt = |v: Option<f64>| v.map_or(Value::Null, finite);
    let mut t = Map::new();
    t.insert("x_star".into(), arr(x_star));
    t.insert("nusselt_t_local".into(), arr(&p.nusselt_t_local));
    t.insert("nusselt_t_mean".into(), arr(&p.nusselt_t_mean));
    t.insert("nusselt_h1_local".into(), arr(&p.nusselt_h1_local));
    t.insert("nusselt_h1_mean".into(), arr(&p.nusselt_h1_mean));
    t.insert("length_star_t".into(), opt(p.length_star_t));
    t.insert("length_star_h1".into(), opt(p.length_star_h1));
    t.insert(
        "nusselt_t_fully_developed".into(),
        finite(p.nusselt_t_fully_developed),
    );
    t.insert(
        "nusselt_h1_fully_developed".into(),
        finite(p.nusselt_h1_fully_developed),
    );
    if let Some((u, k)) = uncertainty {
        let four = |v: &[Vec<f64>; 4]| {
            json!({
                "nusselt_t_local": arr(&v[0]),
                "nusselt_t_mean": arr(&v[1]),
                "nusselt_h1_local": arr(&v[2]),
                "nusselt_h1_mean": arr(&v[3]),
            })
        };
        if let (Some(total), Some(grid), Some(step)) =
            (u.passages.get(k), u.parts.grid.get(k), u.parts.step.get(k))
        {
            let mut m = match four(total) {
                Value::Object(m) => m,
                _ => Map::new(),
            };
            m.insert("method".into(), json!(ENTRANCE_UNCERTAINTY_METHOD));
            m.insert("grid_part".into(), four(grid));
            m.insert("step_part".into(), four(step));
            m.insert(
                "coarse_grid".into(),
                json!({ "cells_x": u.coarse_cells.0, "cells_y": u.coarse_cells.1 }),
            );
            m.insert(
                "steps_per_decade".into(),
                json!({ "fine": u.steps_per_decade.0, "step_part": u.steps_per_decade.1 }),
            );
            if let Some((target, reached)) = u.target {
                m.insert("target".into(), finite(target));
                m.insert("target_from_x_star".into(), finite(ACCURACY_FROM));
                m.insert("target_reached".into(), json!(reached));
            }
            t.insert("uncertainty".into(), Value::Object(m));
        }
    }
    t
}

/// How the entrance values' uncertainty was found.
const ENTRANCE_UNCERTAINTY_METHOD: &str = "relative, per station: a grid part (a march with \
    the same steps on a grid of cells / 1.5 at another offset, or the previous grid of an \
    --accuracy refinement; order 2 assumed, safety factor 3) plus a step part (a march on the \
    same grid with every step twice as long; order 3 assumed, safety factor 3); means at least \
    the weighted average of the local values' uncertainty upstream";

/// The `entrance` object: `thermal` with the contract's keys for the first passage (the only
/// one of a connected cross-section), each passage's own under `thermal.passages` when there
/// are several, and as extensions the model, the march's grid and its cost.
fn entrance_json(e: &EntranceOutcome) -> Value {
    let th = &e.thermal;
    let unc = |k: usize| e.uncertainty.as_ref().map(|u| (u, k));
    let mut t = match th.passages.first() {
        Some(p) => thermal_passage_json(&th.x_star, p, unc(0)),
        None => Map::new(),
    };
    if th.passages.len() > 1 {
        t.insert(
            "passages".into(),
            Value::Array(
                th.passages
                    .iter()
                    .enumerate()
                    .map(|(k, p)| Value::Object(thermal_passage_json(&th.x_star, p, unc(k))))
                    .collect(),
            ),
        );
    }
    t.insert("model".into(), json!(ENTRANCE_MODEL));
    t.insert(
        "grid".into(),
        json!({
            "cells_x": e.cells.0,
            "cells_y": e.cells.1,
            "unknowns": e.unknowns,
        }),
    );
    t.insert(
        "march".into(),
        json!({
            "steps": th.steps,
            "solves": th.solves,
            "iterations": th.iterations,
            "seconds": th.seconds,
        }),
    );
    let mut out = Map::new();
    out.insert("thermal".into(), Value::Object(t));
    if let Some(h) = &e.hydrodynamic {
        out.insert("hydrodynamic".into(), hydrodynamic_json(h));
        if let Some(c) = &h.combined {
            out.insert("combined".into(), combined_json(c));
        }
    }
    Value::Object(out)
}

/// Which model gave the combined-entry figures.
const COMBINED_MODEL: &str = "simultaneously developing velocity and temperature from a \
    uniform inlet: the developing-flow march with the energy equation (no axial conduction, \
    constant properties); flat-plate limit (Pohlhausen) below the resolved thermal layer";

/// The `entrance.combined` object: `prandtl`, then the thermal entrance's keys (the first
/// passage's; each passage's under `passages` when there are several) and `model`.
fn combined_json(c: &Combined) -> Value {
    let th = &c.thermal;
    let mut m = match th.passages.first() {
        Some(p) => thermal_passage_json(&th.x_star, p, None),
        None => Map::new(),
    };
    m.insert("prandtl".into(), finite(c.prandtl));
    if th.passages.len() > 1 {
        m.insert(
            "passages".into(),
            Value::Array(
                th.passages
                    .iter()
                    .map(|p| Value::Object(thermal_passage_json(&th.x_star, p, None)))
                    .collect(),
            ),
        );
    }
    m.insert("model".into(), json!(COMBINED_MODEL));
    Value::Object(m)
}

/// The keys of one passage's hydrodynamic entrance (../shared/INTERFACE.md, "Developing
/// flow"), with `fanning_f_re` (the fully developed value it tends to) and `blasius_limit_below`
/// (X below which the pressure is the thin-layer limit's) as extensions.
fn hydrodynamic_passage_json(x: &[f64], p: &PassageDeveloping) -> Map<String, Value> {
    let arr = |v: &[f64]| Value::Array(v.iter().map(|&a| finite(a)).collect());
    let mut m = Map::new();
    m.insert("x_plus".into(), arr(x));
    m.insert("apparent_f_re".into(), arr(&p.apparent_f_re));
    m.insert(
        "incremental_pressure_drop".into(),
        arr(&p.incremental_pressure_drop),
    );
    m.insert("k_infinity".into(), finite(p.k_infinity));
    m.insert(
        "length_plus".into(),
        p.length_plus.map_or(Value::Null, finite),
    );
    m.insert("fanning_f_re".into(), finite(p.fanning_f_re));
    m.insert("blasius_limit_below".into(), finite(p.resolved_from));
    m
}

/// The `entrance.hydrodynamic` object: the first passage's keys, each passage's under
/// `passages` when there are several, the model and the march's cost.
fn hydrodynamic_json(h: &HydrodynamicEntrance) -> Value {
    let mut m = match h.passages.first() {
        Some(p) => hydrodynamic_passage_json(&h.x_plus, p),
        None => Map::new(),
    };
    if h.passages.len() > 1 {
        m.insert(
            "passages".into(),
            Value::Array(
                h.passages
                    .iter()
                    .map(|p| Value::Object(hydrodynamic_passage_json(&h.x_plus, p)))
                    .collect(),
            ),
        );
    }
    m.insert("model".into(), json!(crate::hydrodynamic::MODEL));
    m.insert(
        "march".into(),
        json!({
            "steps": h.steps,
            "solves": h.solves,
            "iterations": h.iterations,
            "seconds": h.seconds,
            "settled": h.settled,
        }),
    );
    Value::Object(m)
}

/// The `rating` object (../shared/INTERFACE.md: `x_star`, `x_plus`, `nusselt_mean`,
/// `heat_transfer_coefficient_mean_w_m2k`, `inlet_temperature_c`, `outlet_temperature_c`,
/// `heat_rate_w`, `wall_temperature_outlet_c`, `thermal_model`), the passage's values for a
/// connected cross-section; with several passages the mixed outlet, the total heat rate and the
/// hottest wall, and each passage's own values under `passages`. Extensions: `reynolds`,
/// `regime`, `prandtl`, `mean_bulk_temperature_c`, `fluid_properties_at_c`, `iterations`.
fn rating_json(r: &Rating) -> Value {
    let c = |k: f64| k - 273.15;
    let opt_c = |k: Option<f64>| k.map_or(Value::Null, |k| finite(c(k)));
    let passage = |p: &PassageRating| {
        json!({
            "x_star": finite(p.x_star),
            "x_plus": finite(p.x_plus),
            "reynolds": finite(p.reynolds),
            "regime": p.regime.as_str(),
            "nusselt_mean": finite(p.nusselt_mean),
            "heat_transfer_coefficient_mean_w_m2k": finite(p.heat_transfer_coefficient_mean_w_m2k),
            "outlet_temperature_c": finite(c(p.outlet_temperature_k)),
            "heat_rate_w": finite(p.heat_rate_w),
            "wall_temperature_outlet_c": opt_c(p.wall_temperature_outlet_k),
        })
    };
    let mut m = match r.passages.as_slice() {
        [one] => match passage(one) {
            Value::Object(m) => m,
            _ => Map::new(),
        },
        _ => Map::new(),
    };
    m.insert(
        "inlet_temperature_c".into(),
        finite(c(r.inlet_temperature_k)),
    );
    m.insert(
        "outlet_temperature_c".into(),
        finite(c(r.outlet_temperature_k)),
    );
    m.insert("heat_rate_w".into(), finite(r.heat_rate_w));
    m.insert(
        "wall_temperature_outlet_c".into(),
        opt_c(r.wall_temperature_outlet_k),
    );
    m.insert("thermal_model".into(), json!(r.thermal_model));
    m.insert("prandtl".into(), finite(r.prandtl));
    m.insert(
        "mean_bulk_temperature_c".into(),
        finite(c(0.5 * (r.inlet_temperature_k + r.outlet_temperature_k))),
    );
    m.insert("iterations".into(), json!(r.iterations));
    if r.passages.len() > 1 {
        m.insert(
            "passages".into(),
            Value::Array(r.passages.iter().map(passage).collect()),
        );
    }
    Value::Object(m)
}

/// Which model gave the entrance figures.
const ENTRANCE_MODEL: &str = "thermal entrance (Graetz–Nusselt) of this cross-section: fully \
    developed laminar velocity, uniform inlet temperature, constant properties, no axial \
    conduction; marched on the cut-cell grid, Lévêque limit from the wall shear near the inlet";

/// The `uncertainty` object: keyed by quantity, each with the keys of ../shared/INTERFACE.md
/// (`fine`, `extrapolated`, `observed_order`, `relative_uncertainty`, `grids`) and, as
/// extensions, `estimate` ("study", "cheap", "not available"), `method`, `convergence`,
/// `order_used`, `safety_factor`, `absolute_uncertainty`, `grid_placement`, for a study `target`
/// and `target_reached`, and for a mask `image_blocks` (the coarsening factor of each image).
fn uncertainty_json(u: &Uncertainty) -> Value {
    let method = u.method();
    let mut m = Map::new();
    for q in &u.quantities {
        let mut e = Map::new();
        e.insert("fine".into(), finite(q.fine));
        let est = q.estimate;
        let opt = |v: Option<f64>| v.map_or(Value::Null, finite);
        e.insert("extrapolated".into(), opt(est.map(|x| x.extrapolated)));
        e.insert(
            "observed_order".into(),
            opt(est.and_then(|x| x.observed_order)),
        );
        e.insert(
            "relative_uncertainty".into(),
            opt(est.map(|x| x.relative_uncertainty)),
        );
        e.insert("grids".into(), json!(u.grids));
        e.insert("estimate".into(), json!(u.marker()));
        e.insert("method".into(), json!(method));
        e.insert(
            "convergence".into(),
            est.map_or(Value::Null, |x| json!(x.behaviour.key())),
        );
        e.insert("order_used".into(), opt(est.and_then(|x| x.order_used)));
        e.insert("safety_factor".into(), opt(est.map(|x| x.safety_factor)));
        e.insert(
            "absolute_uncertainty".into(),
            opt(est.map(|x| x.absolute())),
        );
        e.insert("grid_placement".into(), json!(u.placement));
        if !u.images.is_empty() {
            e.insert("image_blocks".into(), json!(u.images));
        }
        if let Kind::Study { target, reached } = u.kind {
            e.insert("target".into(), json!(target));
            e.insert("targeted".into(), json!(q.targeted));
            e.insert("target_reached".into(), json!(reached));
        }
        m.insert(q.key.into(), Value::Object(e));
    }
    Value::Object(m)
}

/// `value` with the significant digits its uncertainty supports
/// ([`format_significant`]), followed by ± its uncertainty for report key `key` when one was
/// estimated, e.g. "16.0000 ± 0.000050 (3.1e-6 relative)"; 4 digits when none was.
fn with_error(o: &Outcome, key: &str, value: f64) -> String {
    let est = o
        .uncertainty
        .as_ref()
        .and_then(|u| u.get(key))
        .and_then(|q| q.estimate);
    match est {
        Some(e) if value.is_finite() && e.relative_uncertainty.is_finite() => {
            let abs = e.relative_uncertainty * value.abs();
            format!(
                "{} ± {} ({:.1e} relative)",
                format_significant(value, e.relative_uncertainty),
                sig(abs, 2),
                e.relative_uncertainty
            )
        }
        _ => format_significant(value, DEFAULT_PRINT_ACCURACY),
    }
}

/// The relative uncertainty the dimensional figures of a laminar operating point are printed
/// with: that of f·Re when estimated (Q and G scale with it), but no more than 4 digits (the
/// fluid's properties are not better known), [`DEFAULT_PRINT_ACCURACY`] when none was estimated.
fn print_accuracy(o: &Outcome) -> f64 {
    o.uncertainty
        .as_ref()
        .and_then(|u| u.get("fanning_f_re"))
        .and_then(|q| q.estimate)
        .map(|e| e.relative_uncertainty)
        .filter(|r| r.is_finite() && *r > 0.0)
        .map_or(DEFAULT_PRINT_ACCURACY, |r| r.max(DEFAULT_PRINT_ACCURACY))
}

/// The flow-regime keys of an operating point (../shared/INTERFACE.md, "Flow regime"):
/// `regime`, `darcy_friction_factor`, `models` (report key → model), and as extensions
/// `regime_thresholds` (`lower`, `upper`, `sharp_corners`), `roughness_m` and
/// `hydraulic_resistance_per_length_pa_s_m4`.
fn regime_json(op: &OperatingResult, m: &mut Map<String, Value>) {
    m.insert("regime".into(), json!(op.regime.as_str()));
    m.insert(
        "regime_thresholds".into(),
        json!({
            "lower": op.thresholds.lower(),
            "upper": op.thresholds.upper(),
            "sharp_corners": op.sharp_corners,
        }),
    );
    m.insert(
        "darcy_friction_factor".into(),
        finite(op.darcy_friction_factor),
    );
    m.insert("roughness_m".into(), json!(op.roughness_m));
    m.insert(
        "hydraulic_resistance_per_length_pa_s_m4".into(),
        finite(op.hydraulic_resistance_per_length_pa_s_m4),
    );
    let models: Map<String, Value> = op
        .models
        .iter()
        .map(|(k, v)| (k.clone(), json!(v)))
        .collect();
    m.insert("models".into(), Value::Object(models));
}

/// A passage's keys at an operating point: `flow_rate_m3_s`, `mean_velocity_m_s` (contract),
/// `reynolds`, `regime`, `darcy_friction_factor`, `wall_shear_mean_pa`, the entrance lengths
/// with a length, and `warnings`.
fn passage_operating_json(p: &crate::operating::PassageResult, e: &mut Map<String, Value>) {
    e.insert("flow_rate_m3_s".into(), json!(p.flow_rate_m3_s));
    e.insert("mean_velocity_m_s".into(), json!(p.mean_velocity_m_s));
    e.insert("reynolds".into(), finite(p.reynolds));
    e.insert("regime".into(), json!(p.regime.as_str()));
    e.insert(
        "darcy_friction_factor".into(),
        finite(p.darcy_friction_factor),
    );
    e.insert("wall_shear_mean_pa".into(), finite(p.wall_shear_mean_pa));
    if let Some(lh) = p.entrance_length_hydrodynamic_m {
        e.insert("entrance_length_hydrodynamic_m".into(), finite(lh));
    }
    if let Some(lt) = p.entrance_length_thermal_m {
        e.insert("entrance_length_thermal_m".into(), finite(lt));
    }
    e.insert("warnings".into(), json!(p.warnings));
}

/// A quantity that is not estimated (`None`) or could not be evaluated is null.
fn optional(v: Option<f64>) -> Value {
    v.map_or(Value::Null, finite)
}

/// JSON has no NaN: a quantity that could not be evaluated is null.
fn finite(v: f64) -> Value {
    if v.is_finite() {
        json!(v)
    } else {
        Value::Null
    }
}

/// A number with `n` significant digits, in plain notation where that stays readable.
fn sig(v: f64, n: usize) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let mag = v.abs().log10().floor() as i32;
    if (-3..6).contains(&mag) {
        let decimals = (n as i32 - 1 - mag).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.prec$e}", prec = n - 1)
    }
}

/// A length with a unit that suits its size, with the digits relative accuracy `rel` supports.
fn length(v: f64, rel: f64) -> String {
    let a = v.abs();
    if a >= 1.0 {
        format!("{} m", format_significant(v, rel))
    } else if a >= 1e-3 {
        format!("{} mm", format_significant(v * 1e3, rel))
    } else {
        format!("{} µm", format_significant(v * 1e6, rel))
    }
}

/// A point in the unit [`length`] picks for `size` (e.g. the hydraulic diameter), 4 digits.
fn position(p: [f64; 2], size: f64) -> String {
    let (factor, unit) = if size >= 1.0 {
        (1.0, "m")
    } else if size >= 1e-3 {
        (1e3, "mm")
    } else {
        (1e6, "µm")
    };
    let c = |v: f64| {
        if (v * factor).abs() < 1e-9 * size * factor {
            "0".to_string()
        } else {
            sig(v * factor, 4)
        }
    };
    format!("({}, {}) {unit}", c(p[0]), c(p[1]))
}

fn area(v: f64, rel: f64) -> String {
    if v >= 1.0 {
        format!("{} m²", format_significant(v, rel))
    } else if v >= 1e-6 {
        format!("{} mm²", format_significant(v * 1e6, rel))
    } else {
        format!("{} µm²", format_significant(v * 1e12, rel))
    }
}

/// The compact human-readable summary. Figures carry the significant digits their uncertainty
/// supports ([`format_significant`]): the unit problem's with their own estimate, a laminar
/// operating point's with that of f·Re (at most 4 digits), the correlations' with 3.
pub fn summary(o: &Outcome) -> String {
    use std::fmt::Write;
    let f = &o.unit.figures;
    let g = &o.unit.classified.grid;
    let mut s = String::new();
    let line = |s: &mut String, k: &str, v: String| {
        let _ = writeln!(s, "  {k:<26}{v}");
    };
    let geo = DEFAULT_PRINT_ACCURACY;
    let _ = writeln!(s, "canalis: {}", o.name);
    line(
        &mut s,
        "grid",
        format!(
            "{} × {} cells, spacing {}, {} unknowns",
            g.cells().0,
            g.cells().1,
            length(g.h, 0.01),
            o.unit.numbering.len()
        ),
    );
    line(
        &mut s,
        "solver",
        format!(
            "{}, {} iterations, residual {:.1e}, {:.2} s",
            o.unit.method_name, o.unit.info.iterations, o.unit.info.relative_residual, o.seconds
        ),
    );
    if let Some(u) = &o.uncertainty {
        let text = match &u.kind {
            Kind::Study { target, reached } if !u.images.is_empty() => format!(
                "image-resolution study on {} images (blocks of {} pixels, grids {} cells \
                 across), target {target:.0e} {}; order 1 assumed for the staircase",
                u.images.len(),
                join(&u.images),
                join(&u.grids),
                if *reached {
                    "reached"
                } else {
                    "NOT reached (image resolution)"
                }
            ),
            Kind::Cheap if !u.images.is_empty() => format!(
                "cheap estimate from coarser images of the mask (blocks of {} pixels, grids {} \
                 cells across), order 1 assumed, safety factor 3; --accuracy TOL for a study",
                join(&u.images),
                join(&u.grids)
            ),
            Kind::Study { target, reached } => format!(
                "grid-convergence study on {} grids ({} cells across), target {target:.0e} {}; \
                 GCI with the observed order (Celik et al. 2008)",
                u.grids.len(),
                u.grids
                    .iter()
                    .map(|c| c.to_string())
                    .collect::<Vec<_>>()
                    .join(", "),
                if *reached { "reached" } else { "NOT reached" }
            ),
            Kind::Cheap => format!(
                "cheap estimate from {} ({} cells), order {} assumed{}, safety \
                 factor 3; --accuracy TOL for a study",
                crate::study::cheap_grids(&u.grids),
                crate::study::coarse_cells(&u.grids),
                if (u.formal_order - u.formal_order.round()).abs() < 1e-9 {
                    format!("{}", u.formal_order.round())
                } else {
                    format!("{:.2}", u.formal_order)
                },
                if u.formal_order < 2.0 - 1e-9 {
                    " (limited by the re-entrant corners)"
                } else {
                    ""
                }
            ),
            Kind::Unavailable(why) => format!("not available: {why}"),
        };
        line(&mut s, "uncertainty (±)", text);
    }
    let _ = writeln!(s, "Cross-section");
    line(&mut s, "area", area(f.area, geo));
    line(&mut s, "wetted perimeter", length(f.perimeter, geo));
    line(
        &mut s,
        "hydraulic diameter",
        length(f.hydraulic_diameter, geo),
    );
    if o.unit.passages.len() > 1 {
        let _ = writeln!(s, "Passages (top-left first, one pressure gradient)");
        for (i, p) in o.unit.passages.iter().enumerate() {
            let at = o
                .operating
                .as_ref()
                .and_then(|op| op.passages.get(i))
                .map(|pr| {
                    format!(
                        "; Re {} ({}), {} L/min",
                        format_significant(pr.reynolds, 0.01),
                        pr.regime,
                        format_significant(pr.flow_rate_m3_s * 6e4, 0.01)
                    )
                })
                .unwrap_or_default();
            line(
                &mut s,
                &format!("passage {}", i + 1),
                format!(
                    "D_h {}, f·Re {}, {} % of the flow{at}",
                    length(p.hydraulic_diameter, geo),
                    format_significant(p.fanning_f_re, print_accuracy(o)),
                    format_significant(100.0 * p.flow_share, print_accuracy(o)),
                ),
            );
        }
    }
    let _ = writeln!(s, "Friction (laminar, fully developed)");
    line(
        &mut s,
        "f·Re, Fanning",
        with_error(o, "fanning_f_re", f.fanning_f_re),
    );
    line(
        &mut s,
        "f·Re, Darcy",
        with_error(o, "fanning_f_re", 4.0 * f.fanning_f_re),
    );
    line(
        &mut s,
        "u_max / u_mean",
        with_error(o, "max_to_mean_velocity", f.max_to_mean_velocity),
    );
    let _ = writeln!(s, "Wall shear (laminar)");
    if f.singular_corners.is_empty() {
        line(
            &mut s,
            "max / mean",
            with_error(o, "wall_shear_max_to_mean", f.wall_shear_max_to_mean),
        );
    } else {
        let n = f.singular_corners.len();
        line(
            &mut s,
            "max / mean",
            format!(
                "unbounded at {n} re-entrant corner{} (listed below)",
                if n == 1 { "" } else { "s" }
            ),
        );
        line(
            &mut s,
            "max / mean, away",
            format!(
                "{} (farther than {} from those corners)",
                with_error(
                    o,
                    "wall_shear_max_to_mean_away_from_corners",
                    f.wall_shear_max_away_to_mean
                ),
                length(f.corner_radius, geo)
            ),
        );
        for k in &f.singular_corners {
            line(
                &mut s,
                "re-entrant corner",
                format!(
                    "at {}, {}°: τ ≈ {}·τ_mean·(r/D_h)^{}",
                    position(k.position, f.hydraulic_diameter),
                    sig(k.angle.to_degrees(), 4),
                    sig(k.coefficient, 3),
                    sig(k.exponent, 3)
                ),
            );
        }
    }
    match &f.wall_shear_min_corner {
        Some(k) => line(
            &mut s,
            "min / mean",
            format!(
                "0 (at the {}° corner at {})",
                sig(k.angle.to_degrees(), 4),
                position(k.position, f.hydraulic_diameter)
            ),
        ),
        None => line(
            &mut s,
            "min / mean",
            with_error(o, "wall_shear_min_to_mean", f.wall_shear_min_to_mean),
        ),
    }
    line(
        &mut s,
        "force balance error",
        format!("{:.1e} (self-check)", f.force_balance_rel_error),
    );
    if let Some(h) = &o.unit.heat {
        let _ = writeln!(s, "Heat transfer (laminar, fully developed)");
        line(
            &mut s,
            "Nu_H1 (uniform flux)",
            with_error(o, "nusselt_h1", h.nusselt_h1),
        );
        line(
            &mut s,
            "Nu_T (uniform wall temp.)",
            with_error(o, "nusselt_t", h.nusselt_t),
        );
    }
    if let Some(e) = &o.entrance {
        entrance_summary(&mut s, e);
    }
    if let Some(r) = &o.rating {
        let _ = writeln!(s, "Thermal rating over the length ({})", r.thermal_model);
        line(
            &mut s,
            "inlet → outlet (bulk)",
            format!(
                "{} °C → {} °C",
                sig(r.inlet_temperature_k - 273.15, 4),
                sig(r.outlet_temperature_k - 273.15, 4)
            ),
        );
        line(&mut s, "heat rate", format!("{} W", sig(r.heat_rate_w, 4)));
        if let Some(tw) = r.wall_temperature_outlet_k {
            line(
                &mut s,
                "wall at the outlet",
                format!("{} °C (the hottest wall)", sig(tw - 273.15, 4)),
            );
        }
        for (k, p) in r.passages.iter().enumerate() {
            let label = if r.passages.len() > 1 {
                format!("passage {}", k + 1)
            } else {
                "mean over the length".to_string()
            };
            line(
                &mut s,
                &label,
                format!(
                    "Nu {} , h {} W/(m²·K), x* {}, Re {} ({})",
                    sig(p.nusselt_mean, 4),
                    sig(p.heat_transfer_coefficient_mean_w_m2k, 4),
                    sig(p.x_star, 3),
                    sig(p.reynolds, 4),
                    p.regime.as_str()
                ),
            );
        }
    }
    if let Some(op) = &o.operating {
        operating_summary(o, op, &mut s);
    }
    if !o.warnings.is_empty() {
        let _ = writeln!(s, "Warnings");
        for w in &o.warnings {
            let _ = writeln!(s, "  - {w}");
        }
    }
    let _ = writeln!(s, "Note: {CAUTION}");
    if o.entrance.is_some() {
        let _ = writeln!(s, "Note: {ENTRANCE_CAUTION}");
    }
    let entrance_drop = o
        .operating
        .as_ref()
        .and_then(|op| op.length.as_ref())
        .is_some_and(|l| l.pressure_drop_model.is_some());
    if entrance_drop
        || o.entrance
            .as_ref()
            .is_some_and(|e| e.hydrodynamic.is_some())
    {
        let _ = writeln!(s, "Note: {HYDRODYNAMIC_CAUTION}");
    }
    if o.operating
        .as_ref()
        .is_some_and(|op| op.regime != Regime::Laminar)
    {
        let _ = writeln!(s, "Note: {CAUTION_CORRELATIONS}");
    }
    s
}

/// The operating point's part of the summary, each figure with the model that gave it.
fn operating_summary(o: &Outcome, op: &OperatingResult, s: &mut String) {
    use std::fmt::Write;
    let line = |s: &mut String, k: &str, v: String| {
        let _ = writeln!(s, "  {k:<26}{v}");
    };
    let laminar = op.regime == Regime::Laminar;
    // Laminar figures carry f·Re's uncertainty; the correlations' three digits.
    let rel = if laminar {
        print_accuracy(o)
    } else {
        CORRELATION_PRINT_ACCURACY
    };
    let n = |v: f64| format_significant(v, rel);
    let fl = &op.fluid;
    let t = fl
        .temperature_k
        .map(|t| format!(" at {} °C", format_significant(t - 273.15, 1e-3)))
        .unwrap_or_default();
    let _ = writeln!(s, "Operating point: {}{t}", fl.name);
    line(
        s,
        "viscosity, density",
        format!(
            "{} mPa·s, {} kg/m³",
            format_significant(fl.viscosity_pa_s * 1e3, 1e-4),
            format_significant(fl.density_kg_m3, 1e-5)
        ),
    );
    line(
        s,
        "regime",
        format!(
            "{} at Re {} (laminar below {}, turbulent above {}; {})",
            op.regime,
            format_significant(op.reynolds, 0.01),
            op.thresholds.lower(),
            op.thresholds.upper(),
            if op.sharp_corners {
                "thresholds of ducts with sharp corners"
            } else {
                "round-duct thresholds"
            }
        ),
    );
    line(
        s,
        "flow rate",
        format!(
            "{} L/min ({} m³/s)",
            n(op.flow_rate_m3_s * 6e4),
            n(op.flow_rate_m3_s)
        ),
    );
    line(
        s,
        "pressure gradient",
        format!(
            "{} Pa/m ({} bar per metre)",
            n(op.pressure_gradient_pa_m),
            n(op.pressure_gradient_pa_m * 1e-5)
        ),
    );
    line(s, "Darcy friction factor", n(op.darcy_friction_factor));
    line(
        s,
        "mean velocity",
        format!("{} m/s", n(op.mean_velocity_m_s)),
    );
    line(
        s,
        "max velocity",
        op.max_velocity_m_s.map_or_else(
            || "not estimated outside laminar flow".to_string(),
            |v| format!("{} m/s", n(v)),
        ),
    );
    if let Some(pr) = op.prandtl {
        line(s, "Prandtl number", format_significant(pr, 1e-3));
    }
    if let (Some(h1), Some(ht)) = (
        op.heat_transfer_coefficient_h1_w_m2k,
        op.heat_transfer_coefficient_t_w_m2k,
    ) {
        line(
            s,
            "film coefficient H1 / T",
            format!("{} / {} W/(m²·K)", n(h1), n(ht)),
        );
    }
    line(
        s,
        "hydraulic resistance",
        format!(
            "{} Pa·s/m⁴ per length",
            n(op.hydraulic_resistance_per_length_pa_s_m4)
        ),
    );
    if let Some(l) = &op.length {
        line(
            s,
            "pressure drop",
            format!(
                "{} Pa over {} ({} Pa·s/m³)",
                n(l.pressure_drop_pa),
                length(l.length_m, 1e-3),
                n(l.hydraulic_resistance_pa_s_m3)
            ),
        );
        if l.pressure_drop_model.is_some() || l.minor_loss_pa.is_some() {
            let minor = l
                .minor_loss_pa
                .map(|v| format!(", minor losses {} Pa", n(v)))
                .unwrap_or_default();
            let entrance = if l.pressure_drop_model.is_some() {
                "entrance region included; "
            } else {
                ""
            };
            line(
                s,
                "",
                format!(
                    "({entrance}fully developed friction alone {} Pa{minor})",
                    n(l.pressure_drop_fully_developed_pa)
                ),
            );
        }
        let lt = l
            .entrance_length_thermal_m
            .map(|v| format!(", thermal ≈ {}", length(v, 0.1)))
            .unwrap_or_default();
        line(
            s,
            "entrance lengths",
            format!(
                "hydrodynamic ≈ {}{lt}",
                length(l.entrance_length_hydrodynamic_m, 0.1)
            ),
        );
    }
    let shear = match (op.wall_shear_max_pa, op.wall_shear_min_pa) {
        (Some(max), Some(min)) => {
            format!("{} / {} / {} Pa", n(op.wall_shear_mean_pa), n(max), n(min))
        }
        _ => format!(
            "{} Pa / not estimated / not estimated",
            n(op.wall_shear_mean_pa)
        ),
    };
    line(s, "wall shear mean/max/min", shear);
    let _ = writeln!(s, "Models (which gave each figure; report keys)");
    for (key, model) in &op.models {
        let _ = writeln!(s, "  - {key}: {model}");
    }
}

/// Numbers joined with ", ".
fn join(v: &[usize]) -> String {
    v.iter()
        .map(|c| c.to_string())
        .collect::<Vec<_>>()
        .join(", ")
}

/// The summary's table of the thermal entrance: a few stations of the 1–2–5 series; then the
/// hydrodynamic entrance's.
fn entrance_summary(s: &mut String, e: &EntranceOutcome) {
    thermal_summary(s, e);
    if let Some(h) = &e.hydrodynamic {
        hydrodynamic_summary(s, h);
    }
}

/// The summary's table of the hydrodynamic entrance.
fn hydrodynamic_summary(s: &mut String, h: &HydrodynamicEntrance) {
    use std::fmt::Write;
    let several = h.passages.len() > 1;
    for (k, p) in h.passages.iter().enumerate() {
        let which = if several {
            format!(", passage {}", k + 1)
        } else {
            String::new()
        };
        let _ = writeln!(
            s,
            "Hydrodynamic entrance (laminar, uniform inlet velocity, parabolised{which})"
        );
        let _ = writeln!(s, "  {:>8}  {:>11}  {:>9}", "x+", "f_app·Re", "K(x)");
        for (i, &x) in h.x_plus.iter().enumerate() {
            let m = x / 10f64.powf(x.log10().floor());
            if !((m - 1.0).abs() < 1e-9 || i + 1 == h.x_plus.len()) {
                continue;
            }
            let _ = writeln!(
                s,
                "  {:>8}  {:>11}  {:>9}",
                format!("{x:.0e}"),
                sig(p.apparent_f_re[i], 4),
                sig(p.incremental_pressure_drop[i], 3)
            );
        }
        let len = p
            .length_plus
            .map_or("beyond x+ = 1".to_string(), |x| sig(x, 3));
        let _ = writeln!(
            s,
            "  K(∞) = {}; entrance length x+ = {} (u_max within 1 % of fully developed)",
            sig(p.k_infinity, 3),
            len
        );
    }
}

/// The summary's table of the thermal entrance.
fn thermal_summary(s: &mut String, e: &EntranceOutcome) {
    use std::fmt::Write;
    let th = &e.thermal;
    let several = th.passages.len() > 1;
    for (k, p) in th.passages.iter().enumerate() {
        let which = if several {
            format!(", passage {}", k + 1)
        } else {
            String::new()
        };
        let _ = writeln!(
            s,
            "Thermal entrance (laminar, fully developed velocity{which}; {} × {} cells)",
            e.cells.0, e.cells.1
        );
        let _ = writeln!(
            s,
            "  {:>8}  {:>9}  {:>9}  {:>9}  {:>9}",
            "x*", "Nu_x,T", "Nu_m,T", "Nu_x,H1", "Nu_m,H1"
        );
        for (i, &x) in th.x_star.iter().enumerate() {
            // Every other decade's 1 and the last station keep the table short.
            let m = x / 10f64.powf(x.log10().floor());
            if !((m - 1.0).abs() < 1e-9 || i + 1 == th.x_star.len()) {
                continue;
            }
            let _ = writeln!(
                s,
                "  {:>8}  {:>9}  {:>9}  {:>9}  {:>9}",
                format!("{x:.0e}"),
                sig(p.nusselt_t_local[i], 4),
                sig(p.nusselt_t_mean[i], 4),
                sig(p.nusselt_h1_local[i], 4),
                sig(p.nusselt_h1_mean[i], 4)
            );
        }
        if let Some(u) = e.uncertainty.as_ref().and_then(|u| u.passages.get(k)) {
            // The largest relative uncertainty of the four quantities from x* = 1e-4 on (where
            // `--accuracy` applies).
            let from = th
                .x_star
                .iter()
                .position(|&x| x >= ACCURACY_FROM * (1.0 - 1e-9));
            let worst = from.map_or(f64::NAN, |i0| {
                u.iter()
                    .flat_map(|v| v[i0..].iter())
                    .fold(0.0f64, |a, &b| a.max(b))
            });
            let _ = writeln!(
                s,
                "  numerical uncertainty: at most {} (relative, x* ≥ {ACCURACY_FROM:e}; grid and \
                 steps)",
                sig(worst, 2)
            );
        }
        let len = |v: Option<f64>| v.map_or("beyond x* = 1".to_string(), |x| sig(x, 3));
        let _ = writeln!(
            s,
            "  entrance length x* (T, H1): {}, {} (local Nu within 5 % of fully developed)",
            len(p.length_star_t),
            len(p.length_star_h1)
        );
    }
}
