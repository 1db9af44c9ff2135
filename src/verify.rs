//! The built-in verification: exact cross-sections solved and compared with their exact
//! solutions (`canalis verify`).
//!
//! Owns: the list of checks and their tolerances. The exact solutions live in
//! [`crate::exact`]; this module only runs the pipeline on them and compares.

use crate::error::Result;
use crate::exact;
use crate::grid::Grid;
use crate::pipeline::{solve_unit, UnitOptions};
use crate::post::WallKind;

/// One comparison of a computed value with its reference.
#[derive(Debug, Clone, PartialEq)]
pub struct Check {
    pub case: String,
    pub quantity: &'static str,
    pub value: f64,
    pub reference: f64,
    /// |value − reference| / |reference| (or the absolute value for a self-check whose
    /// reference is 0).
    pub error: f64,
    pub tolerance: f64,
    pub source: &'static str,
}

impl Check {
    pub fn passed(&self) -> bool {
        self.error <= self.tolerance
    }
}

fn rel(value: f64, reference: f64) -> f64 {
    if reference == 0.0 {
        value.abs()
    } else {
        ((value - reference) / reference).abs()
    }
}

/// Solves every exact case at `cells` across and returns the checks: f·Re within 0.05 %,
/// u_max/ū within 0.05 %, the force balance within 0.1 %, and on the ellipse the extreme wall
/// shear within 0.1 % and every local wall shear within 1 %.
pub fn run(cells: usize) -> Result<Vec<Check>> {
    let mut out = Vec::new();
    for case in exact::cases() {
        let (lo, hi) = case.shape.bbox();
        let sol = solve_unit(
            &case.shape,
            Grid::covering(lo, hi, cells),
            WallKind::Exact,
            &UnitOptions::default(),
        )?;
        let f = &sol.figures;
        let mut push = |quantity, value, reference, tolerance, source| {
            out.push(Check {
                case: case.title.clone(),
                quantity,
                value,
                reference,
                error: rel(value, reference),
                tolerance,
                source,
            })
        };
        push(
            "f·Re (Fanning)",
            f.fanning_f_re,
            case.fanning_f_re,
            5e-4,
            case.source,
        );
        push(
            "u_max / u_mean",
            f.max_to_mean_velocity,
            case.max_to_mean_velocity,
            5e-4,
            case.source,
        );
        push(
            "force balance error",
            f.force_balance_rel_error,
            0.0,
            1e-3,
            "exact: mean wall shear · P = G · A",
        );
        if case.key == "ellipse" {
            let [a, b] = match case.shape.regions[0] {
                crate::geometry::Primitive::Ellipse { semi_axes, .. } => semi_axes,
                _ => [1.0, 1.0],
            };
            let (mx, mn) = exact::ellipse_wall_shear_extremes_over_mean(b / a);
            push(
                "wall shear max / mean",
                f.wall_shear_max_to_mean,
                mx,
                1e-3,
                "exact ellipse solution",
            );
            push(
                "wall shear min / mean",
                f.wall_shear_min_to_mean,
                mn,
                1e-3,
                "exact ellipse solution",
            );
            let worst = sol
                .shear
                .iter()
                .filter_map(|s| case.wall_shear(s.point).map(|e| rel(s.tau, e)))
                .fold(0.0, f64::max);
            push(
                "largest local wall shear error",
                worst,
                0.0,
                1e-2,
                "exact ellipse solution",
            );
        }
    }
    Ok(out)
}
