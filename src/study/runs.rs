//! The runs of a numerical-uncertainty estimate: which grids (or images) are solved around the
//! user's run, and how their values reach the mathematics of [`crate::study`].
//!
//! Owns: the cheap estimate (one coarser grid, `with_cheap_estimate`), the `--accuracy`
//! refinement study (`run_study`) and the image-resolution study of a mask
//! (`run_image_study`), with the warnings of a study that stopped short of its target.
//!
//! The one two-way edge of the module map: [`crate::pipeline::run`] hands the estimate here,
//! and each grid is solved by calling back `pipeline::run_once` (or, for a coarsened
//! image, [`crate::pipeline::solve_unit_monitored`]).
//!
//! Invariant: no Richardson, GCI or order arithmetic here (that is [`crate::study`]'s); no
//! report formatting.

use super::{self as study, Sample, Uncertainty};
use crate::error::{Error, Result};
use crate::geometry::mask::{Mask, MaskMode, MaskOptions};
use crate::grid::Grid;
use crate::input::{load_mask, mask_domain};
use crate::outcome::{Outcome, UnitSolution};
use crate::pipeline::{
    run_once, solve_unit_monitored, ErrorEstimate, SolveConfig, BYTES_PER_NODE, DEFAULT_CELLS,
    MIN_FLUID_NODES,
};
use crate::solver::Monitor;

/// Coarsest grid of an `--accuracy` study unless `--cells` says otherwise.
pub const STUDY_FIRST_CELLS: usize = 64;
/// Finest grid an `--accuracy` study may use (cells across; the bench harness goes this far).
pub const STUDY_MAX_CELLS: usize = 4096;

/// One grid's figures for a study: report key, value, targeted, and the formal order the
/// corners allow it ([`study::corner_formal_order`]).
type Values = Vec<(&'static str, f64, bool, f64)>;

/// The figures whose uncertainty is estimated: report key, value, and whether an `--accuracy`
/// study refines until it meets the target (f·Re and the Nusselt numbers).
fn study_quantities(o: &Outcome) -> Values {
    unit_quantities(&o.unit)
}

/// [`study_quantities`] of one unit solution.
///
/// At a re-entrant corner the largest wall shear is unbounded: its uncertainty is that of the
/// largest one away from the corners instead; at a convex sharp corner the smallest is exactly
/// 0 and has none.
fn unit_quantities(unit: &UnitSolution) -> Values {
    let f = &unit.figures;
    let flow = study::corner_formal_order(f.corner_order);
    let heat = study::corner_formal_order(f.heat_corner_order);
    let mut q = vec![
        ("fanning_f_re", f.fanning_f_re, true, flow),
        ("max_to_mean_velocity", f.max_to_mean_velocity, false, flow),
    ];
    if f.singular_corners.is_empty() {
        q.push((
            "wall_shear_max_to_mean",
            f.wall_shear_max_to_mean,
            false,
            flow,
        ));
    } else {
        q.push((
            "wall_shear_max_to_mean_away_from_corners",
            f.wall_shear_max_away_to_mean,
            false,
            flow,
        ));
    }
    if f.wall_shear_min_corner.is_none() {
        q.push((
            "wall_shear_min_to_mean",
            f.wall_shear_min_to_mean,
            false,
            flow,
        ));
    }
    if let Some(h) = &unit.heat {
        q.push(("nusselt_h1", h.nusselt_h1, true, heat));
        q.push(("nusselt_t", h.nusselt_t, true, heat));
    }
    q
}

/// The per-quantity estimates of a sequence of runs, coarse to fine, each at the formal order
/// its corners allow (the finest run's).
fn estimates(runs: &[(f64, Values)]) -> Vec<study::Quantity> {
    estimates_with(runs, study::estimate_of_order)
}

/// The lowest formal order of this outcome's figures: 2, or what its re-entrant corners allow
/// ([`study::corner_formal_order`]).
fn formal_order(o: &Outcome) -> f64 {
    study_quantities(o)
        .iter()
        .map(|q| q.3)
        .fold(study::FORMAL_ORDER, f64::min)
}

/// [`estimates`] with the estimator `estimate(samples, formal order)` (e.g.
/// [`study::image_estimate`], which has its own order).
fn estimates_with(
    runs: &[(f64, Values)],
    estimate: impl Fn(&[Sample], f64) -> Option<study::Estimate>,
) -> Vec<study::Quantity> {
    let Some((_, finest)) = runs.last() else {
        return Vec::new();
    };
    finest
        .iter()
        .enumerate()
        .map(|(i, &(key, fine, targeted, formal))| {
            let samples: Vec<Sample> = runs
                .iter()
                .map(|(h, values)| Sample {
                    h: *h,
                    value: values.get(i).map_or(f64::NAN, |v| v.1),
                })
                .collect();
            study::Quantity {
                key,
                fine,
                estimate: estimate(&samples, formal),
                targeted,
            }
        })
        .collect()
}

/// An uncertainty that could not be estimated, for the quantities of `o`.
fn unavailable(o: &Outcome, why: String) -> Uncertainty {
    Uncertainty {
        kind: study::Kind::Unavailable(why),
        grids: vec![o
            .unit
            .classified
            .grid
            .cells()
            .0
            .max(o.unit.classified.grid.cells().1)],
        placement: "one grid".to_string(),
        quantities: study_quantities(o)
            .into_iter()
            .map(|(key, fine, targeted, _)| study::Quantity {
                key,
                fine,
                estimate: None,
                targeted,
            })
            .collect(),
        images: Vec::new(),
        image_size: [0, 0],
        formal_order: formal_order(o),
    }
}

/// Why a mask's pixel grid gives no estimate.
const FIXED_GRID_NOTE: &str = "the grid is the mask's pixel grid (staircase walls on the pixel \
faces), which cannot be refined or coarsened without changing the geometry itself";

/// The cheap estimate: one coarser grid (cells / [`study::CHEAP_RATIO`], at another offset), the
/// formal order assumed and safety factor 3; with treated re-entrant corners a second one
/// (cells / [`study::CHEAP_SECOND_RATIO`]) and the wider bound of the two for each figure. A
/// coarse solve that fails leaves the fine result as it is, with the estimate marked not
/// available and a warning.
pub(crate) fn with_cheap_estimate(
    config: &SolveConfig,
    mut fine: Outcome,
    monitor: &dyn Monitor,
) -> Outcome {
    if fine.fixed_grid {
        fine.uncertainty = Some(unavailable(&fine, FIXED_GRID_NOTE.to_string()));
        return fine;
    }
    let cells = config.cells.unwrap_or(DEFAULT_CELLS);
    let coarse_cells = study::cheap_cells(cells);
    let mut coarse = config.clone();
    coarse.cells = Some(coarse_cells);
    coarse.offset = [
        (config.offset[0] + study::CHEAP_OFFSET[0]).fract(),
        (config.offset[1] + study::CHEAP_OFFSET[1]).fract(),
    ];
    coarse.placement = config.placement;
    coarse.operating = None;
    coarse.error_estimate = ErrorEstimate::Off;
    let result = if coarse_cells < 8 {
        Err(Error::param(
            "--cells",
            "the grid is too coarse for a coarser one",
        ))
    } else {
        run_once(&coarse, monitor)
    };
    match result {
        Ok(c) => {
            let fine_values = (fine.unit.classified.grid.h, study_quantities(&fine));
            let mut quantities = estimates(&[
                (c.unit.classified.grid.h, study_quantities(&c)),
                fine_values.clone(),
            ]);
            let mut grids = vec![coarse_cells, cells];
            // Treated re-entrant corners: a second coarser grid of another size, and the wider
            // of the two bounds per figure (study::CHEAP_SECOND_RATIO).
            let second_cells = study::cheap_second_cells(cells);
            if fine.unit.figures.singular_corners.iter().any(|k| k.treated) {
                let mut second = coarse.clone();
                second.cells = Some(second_cells);
                if let Ok(c2) = run_once(&second, monitor) {
                    let other = estimates(&[
                        (c2.unit.classified.grid.h, study_quantities(&c2)),
                        fine_values,
                    ]);
                    quantities = study::wider_of(quantities, other);
                    grids = vec![coarse_cells, second_cells, cells];
                }
            }
            fine.uncertainty = Some(Uncertainty {
                kind: study::Kind::Cheap,
                placement: format!(
                    "the coarser grid{} shifted by ({:.3}, {:.3}) of a cell against the fine one",
                    if grids.len() > 2 { "s are" } else { " is" },
                    study::CHEAP_OFFSET[0],
                    study::CHEAP_OFFSET[1]
                ),
                grids,
                quantities,
                images: Vec::new(),
                image_size: [0, 0],
                formal_order: formal_order(&fine),
            });
        }
        Err(e) => {
            let why = format!("the coarser grid of {coarse_cells} cells could not be solved: {e}");
            fine.warnings
                .push(format!("no uncertainty estimate: {why}"));
            fine.uncertainty = Some(unavailable(&fine, why));
        }
    }
    fine
}

/// "fanning_f_re 2.1e-7, nusselt_h1 2.9e-5": the relative uncertainty of each quantity the
/// study aims at, for the warning of a study that missed its target.
fn targeted_summary(u: &Uncertainty) -> String {
    u.quantities
        .iter()
        .filter(|q| q.targeted)
        .map(|q| {
            format!(
                "{} {}",
                q.key,
                q.estimate
                    .map(|e| format!("{:.1e}", e.relative_uncertainty))
                    .unwrap_or_else(|| "not estimated".into())
            )
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// An `--accuracy` study: grids of [`study::study_cells`] cells (ratio 1.5), all at the
/// placement [`study::STUDY_PLACEMENT`] (similar grids), coarse to fine, until the GCI of every
/// targeted quantity (f·Re, and the Nusselt numbers when computed) is below `tol` on the finest
/// three, or the next grid would exceed the memory limit or [`STUDY_MAX_CELLS`] (a warning says
/// which). The outcome is the finest grid's, with the uncertainty of the study. `tol` was
/// checked by [`SolveConfig::validate`].
pub(crate) fn run_study(config: &SolveConfig, tol: f64, monitor: &dyn Monitor) -> Result<Outcome> {
    let first = config.cells.unwrap_or(STUDY_FIRST_CELLS);
    let mut runs: Vec<(f64, Values)> = Vec::new();
    let mut grids = Vec::new();
    let mut finest: Option<Outcome> = None;
    let mut stop: Option<String> = None;
    let mut reached = false;
    for k in 0.. {
        let cells = study::study_cells(first, k);
        if cells > STUDY_MAX_CELLS {
            stop = Some(format!(
                "the next grid ({cells} cells across) is beyond the study's limit of \
                 {STUDY_MAX_CELLS}"
            ));
            break;
        }
        if let (Some(prev), Some(&prev_cells)) = (&finest, grids.last()) {
            let scale = cells as f64 / prev_cells as f64;
            let nodes = prev.unit.classified.grid.len() as f64 * scale * scale;
            let bytes = nodes * BYTES_PER_NODE as f64;
            if bytes > config.memory_limit as f64 {
                stop = Some(format!(
                    "the next grid ({cells} cells across) needs an estimated {:.2} GiB, above \
                     the limit of {:.2} GiB (--max-memory)",
                    bytes / (1u64 << 30) as f64,
                    config.memory_limit as f64 / (1u64 << 30) as f64
                ));
                break;
            }
        }
        let mut c = config.clone();
        c.cells = Some(cells);
        c.placement = Some(study::STUDY_PLACEMENT);
        c.error_estimate = ErrorEstimate::Off;
        let o = match run_once(&c, monitor) {
            Ok(o) => o,
            // A coarse start that the cross-section does not fit (too few fluid nodes, a gap
            // narrower than the grid): start finer, up to the default grid.
            Err(_) if grids.is_empty() && cells < DEFAULT_CELLS && config.cells.is_none() => {
                continue
            }
            Err(e) if runs.len() >= 2 => {
                stop = Some(format!(
                    "the grid of {cells} cells could not be solved: {e}"
                ));
                break;
            }
            Err(e) => return Err(e),
        };
        if o.fixed_grid {
            let mut o = o;
            o.uncertainty = Some(unavailable(&o, FIXED_GRID_NOTE.to_string()));
            o.warnings.push(format!(
                "--accuracy: no grid-convergence study is possible: {FIXED_GRID_NOTE}"
            ));
            return Ok(o);
        }
        runs.push((o.unit.classified.grid.h, study_quantities(&o)));
        grids.push(cells);
        finest = Some(o);
        if runs.len() >= 3 {
            let q = estimates(&runs);
            reached = q
                .iter()
                .filter(|q| q.targeted)
                .all(|q| q.estimate.is_some_and(|e| e.relative_uncertainty <= tol));
            if reached {
                break;
            }
        }
    }
    let Some(mut o) = finest else {
        return Err(Error::param(
            "--accuracy",
            format!(
                "no grid of the study could be solved{}",
                stop.map(|s| format!(": {s}")).unwrap_or_default()
            ),
        ));
    };
    if runs.len() < 2 {
        return Err(Error::param(
            "--accuracy",
            format!(
                "nothing can be estimated from one grid: {}; raise --max-memory or ask for a \
                 coarser start with --cells",
                stop.unwrap_or_default()
            ),
        ));
    }
    let formal = formal_order(&o);
    let quantities = estimates(&runs);
    let uncertainty = Uncertainty {
        kind: study::Kind::Study {
            target: tol,
            reached,
        },
        grids,
        placement: format!(
            "every grid has the box centre ({:.3}, {:.3}) of a cell beyond a node \
             (geometrically similar grids, off the aligned placements)",
            study::STUDY_PLACEMENT[0],
            study::STUDY_PLACEMENT[1]
        ),
        quantities,
        images: Vec::new(),
        image_size: [0, 0],
        formal_order: formal,
    };
    if !reached {
        let worst = targeted_summary(&uncertainty);
        o.warnings.push(format!(
            "--accuracy {tol:.1e} not reached: {}; the study stopped with {} grids (relative \
             uncertainty {worst})",
            stop.unwrap_or_else(|| "no estimate".into()),
            uncertainty.grids.len()
        ));
        if uncertainty.grids.len() < 3 {
            o.warnings.push(format!(
                "only two grids: the formal order {formal:.2} is assumed, with safety factor 3"
            ));
        }
    }
    o.warnings.extend(uncertainty.warnings());
    o.uncertainty = Some(uncertainty);
    Ok(o)
}

// ---------------------------------------------------------------------------------------------
// The image-resolution error of a mask.
//
// A mask fixes the geometry only to within its pixels: the staircase of `--mask-mode pixels`
// (whose grid is the pixel grid) and the tracing of a binary image both misplace the wall by a
// fraction of a pixel, an error no refinement of the grid removes. So for a mask the
// uncertainty comes from a sequence of images instead of grids: the given image and coarser
// ones built from it by box-averaging blocks of k × k pixels ([`Mask::coarsened`], pixel size
// k·p), each solved on a grid in proportion to it (pixels mode: its own pixel grid; traced mode:
// cells/k for the user's --cells), so that the grid and the image errors shrink together as
// one spacing h = k·p. The values then go through the same Richardson/GCI mathematics as a grid
// study ([`study::estimate_of_order`]) with the cautious formal order [`study::IMAGE_ORDER`] = 1
// of a staircase: oscillation (sign flips, common with staircases) gets the wide bound, an
// order outside the band F_s = 3. The study cannot refine beyond the given image.

/// Cells across of the traced-mode grid of an image coarsened by `factor`, for `fine` cells on
/// the given image: in proportion to its pixels.
fn image_cells(fine: usize, factor: usize) -> usize {
    (fine as f64 / factor as f64).round() as usize
}

/// Solves the image of `mask` coarsened by `factor` (flow, and heat transfer when asked for) on
/// the grid of [`image_cells`] (pixels mode: its pixel grid). Returns its spacing h (the coarse
/// pixel size), the cells across of its grid and its figures.
fn solve_image(
    config: &SolveConfig,
    mask: &Mask,
    mode: MaskMode,
    factor: usize,
    fine_cells: usize,
    monitor: &dyn Monitor,
) -> Result<(f64, usize, Values)> {
    let coarse = mask.coarsened(factor)?;
    let h = coarse.pixel();
    let (domain, wall_kind, _) = mask_domain(coarse, mode);
    let grid = match domain.lattice() {
        Some(l) => Grid::from_lattice(l),
        None => {
            let cells = image_cells(fine_cells, factor);
            if cells < 8 {
                return Err(Error::param(
                    "--cells",
                    format!("the image coarsened {factor} times would have only {cells} cells"),
                ));
            }
            let (lo, hi) = domain.bbox();
            match config.placement {
                Some(p) => Grid::covering_placed(lo, hi, cells, p),
                None => Grid::covering_with_offset(lo, hi, cells, config.offset),
            }
        }
    };
    let cells = grid.cells().0.max(grid.cells().1);
    let unit = solve_unit_monitored(domain.as_ref(), grid, wall_kind, &config.unit, monitor)?;
    if unit.numbering.len() < MIN_FLUID_NODES {
        return Err(Error::param(
            "--cells",
            format!(
                "only {} grid nodes fall in the fluid of the image coarsened {factor} times",
                unit.numbering.len()
            ),
        ));
    }
    Ok((h, cells, unit_quantities(&unit)))
}

/// The run of a mask input with its image-resolution uncertainty: the given image at the
/// user's grid (for a study at [`study::STUDY_PLACEMENT`]), and the coarser images of
/// `factors` (coarse to fine, ending with 1, the given image). `target` is the relative
/// accuracy of `--accuracy`, None for the cheap estimate. A coarser image that cannot be solved
/// is left out with a warning; with fewer than two images the estimate is not available.
pub(crate) fn run_image_study(
    config: &SolveConfig,
    path: &std::path::Path,
    options: &MaskOptions,
    factors: &[usize],
    target: Option<f64>,
    monitor: &dyn Monitor,
) -> Result<Outcome> {
    let mut fine_config = config.clone();
    fine_config.error_estimate = ErrorEstimate::Off;
    if target.is_some() {
        fine_config.placement = Some(study::STUDY_PLACEMENT);
    }
    let mut o = run_once(&fine_config, monitor)?;
    let (mask, _) = load_mask(path, options)?;
    let fine_cells = config.cells.unwrap_or(DEFAULT_CELLS);
    let mut runs: Vec<(f64, Values)> = Vec::new();
    let mut grids = Vec::new();
    let mut images = Vec::new();
    for &k in factors.iter().filter(|&&k| k > 1) {
        match solve_image(&fine_config, &mask, options.mode, k, fine_cells, monitor) {
            Ok((h, cells, values)) => {
                runs.push((h, values));
                grids.push(cells);
                images.push(k);
            }
            Err(e) => o.warnings.push(format!(
                "the image coarsened {k} times (blocks of {k} × {k} pixels) could not be solved \
                 and is left out of the uncertainty estimate: {e}"
            )),
        }
    }
    let g = o.unit.classified.grid.cells();
    runs.push((mask.pixel(), study_quantities(&o)));
    grids.push(g.0.max(g.1));
    images.push(1);
    let image_size = [mask.width(), mask.height()];
    if runs.len() < 2 {
        let why = "no coarser image of the mask could be solved".to_string();
        o.warnings.push(format!("no uncertainty estimate: {why}"));
        o.uncertainty = Some(unavailable(&o, why));
        return Ok(o);
    }
    let quantities = estimates_with(&runs, |s, _| study::image_estimate(s));
    let reached = target.is_some_and(|tol| {
        quantities
            .iter()
            .filter(|q| q.targeted)
            .all(|q| q.estimate.is_some_and(|e| e.relative_uncertainty <= tol))
    });
    let kind = match target {
        Some(target) => study::Kind::Study { target, reached },
        None => study::Kind::Cheap,
    };
    let uncertainty = Uncertainty {
        kind,
        grids,
        placement: match (options.mode, target) {
            (MaskMode::Pixels, _) => "each image on its own pixel grid".to_string(),
            (MaskMode::Traced, Some(_)) => format!(
                "every grid has the box centre ({:.3}, {:.3}) of a cell beyond a node",
                study::STUDY_PLACEMENT[0],
                study::STUDY_PLACEMENT[1]
            ),
            (MaskMode::Traced, None) => "every grid at the offset of the user's grid".to_string(),
        },
        quantities,
        images,
        image_size,
        formal_order: study::FORMAL_ORDER,
    };
    if let (Some(tol), false) = (target, reached) {
        let worst = targeted_summary(&uncertainty);
        o.warnings.push(format!(
            "--accuracy {tol:.1e} not reached: the image resolution limits it ({} × {} pixels \
             of {:.3e} m; relative uncertainty {worst}); the study cannot refine beyond the \
             given image: a finer image of the cross-section is needed",
            image_size[0],
            image_size[1],
            mask.pixel()
        ));
    }
    o.warnings.extend(uncertainty.warnings());
    o.uncertainty = Some(uncertainty);
    Ok(o)
}
