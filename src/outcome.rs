//! What a run produced: the unit solution and the outcome of a whole `solve`.
//!
//! Owns: [`UnitSolution`] (the fields and figures of the unit problem on one grid, with the
//! solver's counts and the stage timings) and [`Outcome`] (a unit solution with its label,
//! operating point, warnings and numerical uncertainty). [`crate::pipeline`] produces them;
//! [`crate::report`] and [`crate::output`] consume them.
//!
//! Invariant: plain data; computes, solves, formats and writes nothing.

use crate::entrance::ThermalEntrance;
use crate::geometry::Walls;
use crate::grid::Classified;
use crate::heat::HeatFigures;
use crate::hydrodynamic::HydrodynamicEntrance;
use crate::operating::OperatingResult;
use crate::operator::Numbering;
use crate::post::{self, Figures, ShearSample};
use crate::rating::Rating;
use crate::solver::CgInfo;
use crate::study::Uncertainty;

/// Everything the unit problem produced.
#[derive(Debug, Clone)]
pub struct UnitSolution {
    pub classified: Classified,
    pub numbering: Numbering,
    /// ũ at every unknown, m².
    pub u: Vec<f64>,
    pub walls: Walls,
    pub shear: Vec<ShearSample>,
    pub figures: Figures,
    /// Per passage (one entry when the fluid is connected), top-left first.
    pub passages: Vec<post::PassageFigures>,
    /// Fully developed heat transfer, when asked for.
    pub heat: Option<HeatFigures>,
    pub info: CgInfo,
    /// Each CG solve on its own: the first solve, then the one with the wall correction.
    pub passes: Vec<CgInfo>,
    /// Name of the solver method used.
    pub method_name: &'static str,
    pub seconds: Timings,
}

/// Wall-clock seconds per stage.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Timings {
    pub grid: f64,
    pub assembly: f64,
    /// Preconditioner setup (the multigrid hierarchy).
    pub setup: f64,
    /// The two heat-transfer problems (Nu_H1, Nu_T).
    pub heat: f64,
    pub solve: f64,
    pub post: f64,
}

/// Everything a `solve` run produced.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// A label for the cross-section.
    pub name: String,
    pub unit: UnitSolution,
    pub operating: Option<OperatingResult>,
    pub warnings: Vec<String>,
    /// Wall-clock seconds of the whole run (every grid of an uncertainty estimate included).
    pub seconds: f64,
    /// The numerical uncertainty of the figures, unless switched off.
    pub uncertainty: Option<Uncertainty>,
    /// The grid was fixed by the input (a mask's pixel grid), not chosen from `cells`.
    pub fixed_grid: bool,
    /// Developing flow along the passage (`--entrance`).
    pub entrance: Option<EntranceOutcome>,
    /// The thermal rating over the length (`--inlet-temperature` …).
    pub rating: Option<Rating>,
}

/// The entrance results of a run, with the grid they were marched on.
#[derive(Debug, Clone)]
pub struct EntranceOutcome {
    pub thermal: ThermalEntrance,
    /// The developing velocity from a uniform inlet (None where the march was not run).
    pub hydrodynamic: Option<HydrodynamicEntrance>,
    /// The entrance values' numerical uncertainty (None without an error estimate, and for a
    /// mask's fixed grid).
    pub uncertainty: Option<EntranceUncertainty>,
    /// Cells across and down of the march's grid, and its unknowns.
    pub cells: (usize, usize),
    pub unknowns: usize,
}

/// The relative numerical uncertainty of the entrance values (`study::entrance`): per passage,
/// for Nu_x,T, Nu_m,T, Nu_x,H1, Nu_m,H1 in that order, one value per station; the sum of a
/// grid part and a step part.
#[derive(Debug, Clone)]
pub struct EntranceUncertainty {
    /// Cells across and down of the coarser grid of the grid part.
    pub coarse_cells: (usize, usize),
    /// Steps per decade of x* of the fine march and of the march of the step part (the base
    /// sequence's segments from 1 to 10, before the slowest-mode cap).
    pub steps_per_decade: (usize, usize),
    /// The total, U_grid + U_step.
    pub passages: Vec<[Vec<f64>; 4]>,
    pub parts: crate::study::entrance::Parts,
    /// `--accuracy`: the target (applied from x* = `study::entrance::ACCURACY_FROM` on) and
    /// whether every value there met it.
    pub target: Option<(f64, bool)>,
}
