//! A whole `solve` run in order: load the cross-section, lay the grid, solve the unit problem
//! (flow, wall correction, post-processing, heat transfer), scale it to the operating point.
//!
//! Owns: [`solve_unit`], which reads like the algorithm on one grid; the validated
//! configuration of a run ([`SolveConfig`]); [`run`], which turns a configuration into an
//! [`Outcome`] (one grid by `run_once`, the grids of an uncertainty estimate through
//! [`crate::study::runs`]).
//!
//! Invariant: parses no arguments, prints nothing, formats no report; the stages it calls own
//! their mathematics ([`crate::heat`], [`crate::operating`], [`crate::study`]).

use crate::entrance::{standard_stations, thermal_entrance, Flow, MarchParams};
use crate::error::{Error, Result, Solve};
use crate::geometry::mask::{MaskMode, MaskOptions};
use crate::geometry::{Domain, MIN_EXTENT_M};
use crate::grid::{classify, Grid};
use crate::heat::heat_transfer;
use crate::hydrodynamic::{hydrodynamic_entrance, CombinedSpec, HydroParams};
use crate::input::Input;
use crate::operating::{operating_point, OperatingSpec};
use crate::outcome::{EntranceOutcome, EntranceUncertainty, Outcome, Timings, UnitSolution};
use crate::post::{self, WallKind};
use crate::problem::{Field, Problem};
use crate::rating::LAMINAR_THERMAL_MODEL;
use crate::rating::{rate, RatingSpec};
use crate::singular;
use crate::solver::{CgInfo, CgParams, Monitor, Silent};
use crate::study::{self, runs};
pub use crate::system::Method;
use crate::system::System;
use std::time::Instant;

/// Relative residual of the first solve when the wall correction follows it.
///
/// The first solution only feeds the local fits of the correction, which enters the right-hand
/// side in a layer one cell wide along the walls; an error ε (relative) in that solution moves
/// the corrected one by about ε·h. Measured on the exact cases of tests/verification.rs at 100
/// to 400 cells: 1e-4 instead of 1e-6 changes f·Re by at most 2e-10 (relative) and the force
/// balance not at all, and saves two CG iterations. 1e-3 instead of 1e-4 saves one more
/// (measured at 128 to 2048 cells on a circle, an eccentric annulus and a finned tube) and
/// changes f·Re by at most 5e-10 at 480 cells and 3e-8 at 100 cells (circle,
/// rectangle, ellipse, triangle, annulus, shapes/finned_tube.toml, shapes/mould_slot.toml),
/// two to three orders below the discretisation error at those grids. The worst case seen is a
/// gap a few cells wide (annulus 20/19.5 mm at 300 cells, four cells across the gap): f·Re of
/// the multigrid and Jacobi paths, whose first solutions differ, agree to 5e-7 (7e-8 with 1e-4),
/// against a reported uncertainty of 2 % there.
const FIRST_PASS_TOLERANCE: f64 = 1e-3;

/// Most passes of the enriched flow solve (`singular::Enrichment`), and the relative change
/// of the coefficients at which they stop. The first coefficients come from the first solve,
/// stopped at 1e-3: a second pass matters (on an L at 729 cells, f·Re moved by 1.5e-5, a
/// quarter of its error), a third rarely. Measured cost on the L at 600 cells: 20–27 CG
/// iterations in all instead of 12.
const ENRICHMENT_PASSES: usize = 3;
/// Relative change of the corner coefficients at which the enrichment's fixed point stops.
const ENRICHMENT_SETTLED: f64 = 1e-6;

/// How to solve the unit problem.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UnitOptions {
    pub method: Method,
    pub cg: CgParams,
    /// Apply the deferred wall correction ([`post::add_wall_correction`]) on exact walls.
    pub wall_correction: bool,
    /// Treat the re-entrant corners of an exact geometry by singular-function enrichment
    /// (`singular::Enrichment`); off, they converge at the reduced order h^(2π/α).
    pub corner_treatment: bool,
    /// Also solve the two heat-transfer problems (Nu_H1, Nu_T).
    pub heat: bool,
}

impl Default for UnitOptions {
    fn default() -> Self {
        UnitOptions {
            method: Method::default(),
            cg: CgParams::default(),
            wall_correction: true,
            corner_treatment: true,
            heat: true,
        }
    }
}

/// Solves −∇²ũ = 1 in the fluid of `domain`, ũ = 0 on its walls, on `grid`, and evaluates the
/// figures of merit. `wall_kind` says what the domain's walls are to the local fits: exact
/// curves (a shape's, or a mask's traced contour), whose wall points serve as data of the shear
/// fit and which get the wall correction, or a mask's pixel staircase.
pub fn solve_unit(
    domain: &dyn Domain,
    grid: Grid,
    wall_kind: WallKind,
    options: &UnitOptions,
) -> Result<UnitSolution> {
    solve_unit_monitored(domain, grid, wall_kind, options, &Silent)
}

/// [`solve_unit`] reporting the solver's iterations to `monitor` (progress display).
pub fn solve_unit_monitored(
    domain: &dyn Domain,
    grid: Grid,
    wall_kind: WallKind,
    options: &UnitOptions,
    monitor: &dyn Monitor,
) -> Result<UnitSolution> {
    // On a worker of rayon's pool: a parallel loop started from a worker needs no hand-over
    // between threads, and a solve starts dozens per CG iteration (a V-cycle at a million
    // unknowns on one thread: 37 ms from a worker, 46–50 ms from a caller's own thread).
    if rayon::current_thread_index().is_some() {
        solve_unit_on_worker(domain, grid, wall_kind, options, monitor)
    } else {
        rayon::scope(|_| solve_unit_on_worker(domain, grid, wall_kind, options, monitor))
    }
}

fn solve_unit_on_worker(
    domain: &dyn Domain,
    grid: Grid,
    wall_kind: WallKind,
    options: &UnitOptions,
    monitor: &dyn Monitor,
) -> Result<UnitSolution> {
    let (method, params) = (options.method, &options.cg);
    let t0 = Instant::now();
    monitor.stage("classifying the grid");
    let classified = classify(domain, grid)?;
    let t1 = Instant::now();
    // The flow problem −∇²ũ = 1, ũ = 0 on the walls: numbering, operator and preconditioner.
    monitor.stage("solving the flow");
    let mut system = System::new(Problem::laplace(&classified), method)?;
    let setup = system.timings();
    let t_setup = Instant::now();
    let mut b = system.rhs(&Field::Uniform(1.0));
    let solve = |system: &mut System, rhs: &[f64], x: &mut [f64], params: &CgParams| {
        system.solve_monitored(rhs, x, params, monitor)
    };
    let mut u = vec![0.0; b.len()];
    let correct = options.wall_correction && wall_kind == WallKind::Exact;
    // When the correction follows, the first solve only feeds the local fits of the wall
    // correction, which need its second derivatives to a few digits: it stops at
    // FIRST_PASS_TOLERANCE = 1e-3 (or at the final tolerance, if that is looser; the constant's
    // doc has the measurements). The final solve goes to the full tolerance.
    let first = if correct {
        CgParams {
            tolerance: params.tolerance.max(FIRST_PASS_TOLERANCE),
            ..*params
        }
    } else {
        *params
    };
    // The re-entrant corners treated by singular-function enrichment (singular::Enrichment):
    // known from the exact geometry, between lines or arcs, their cut-off resolved by the grid.
    let corners = domain.corners();
    let walls = domain.walls(0.5 * grid.h);
    let dh = 4.0 * walls.area / walls.perimeter;
    let treatable = match (&corners, options.corner_treatment) {
        (Some(k), true) => singular::Enrichment::treatable(k, grid.h, dh),
        _ => Vec::new(),
    };
    let first = if treatable.is_empty() {
        first
    } else {
        CgParams {
            tolerance: params.tolerance.max(FIRST_PASS_TOLERANCE),
            ..*params
        }
    };
    let mut info = solve(&mut system, &b, &mut u, &first).map_err(|e| e.in_solve(Solve::Flow))?;
    let mut passes = vec![info];
    let mut enrichment = None;
    if !treatable.is_empty() {
        // u = Σ a·χ·S + w: the fixed point of singular::Enrichment, from the first solution's
        // coefficients; each pass solves for w (with the wall correction of w) from the
        // last u.
        let weights = post::quadrature_weights(&classified, system.numbering());
        let mut e = singular::Enrichment::new(treatable);
        e.a = e.extract(&classified, system.numbering(), &u, &weights);
        for _ in 0..ENRICHMENT_PASSES {
            let source: Vec<f64> = e
                .source(&classified, system.numbering())
                .into_iter()
                .map(|v| 1.0 + v)
                .collect();
            let mut rhs = system.problem().rhs_from(system.numbering(), &source);
            let singular_part = e.values(&classified, system.numbering());
            let mut w: Vec<f64> = u.iter().zip(&singular_part).map(|(u, s)| u - s).collect();
            if correct {
                post::add_wall_correction_with_source(
                    system.problem(),
                    system.numbering(),
                    &w,
                    &mut rhs,
                    &|p| e.flow_source_at(p),
                );
            }
            let more = solve(&mut system, &rhs, &mut w, params)
                .map_err(|e| e.in_solve(Solve::CorrectedFlow))?;
            passes.push(more);
            info = CgInfo {
                iterations: info.iterations + more.iterations,
                relative_residual: more.relative_residual,
                round_off_limited: info.round_off_limited || more.round_off_limited,
            };
            for (u, (w, s)) in u.iter_mut().zip(w.iter().zip(&singular_part)) {
                *u = w + s;
            }
            let next = e.extract(&classified, system.numbering(), &u, &weights);
            let scale = e.a.iter().fold(0.0f64, |m, a| m.max(a.abs()));
            let change = next
                .iter()
                .zip(&e.a)
                .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
            if change <= ENRICHMENT_SETTLED * scale {
                break;
            }
            e.a = next;
        }
        enrichment = Some(e);
    }
    // Deferred correction of the wall truncation error (post::add_wall_correction): the matrix is
    // kept, the right-hand side gains the curvature term of each cut link, and the solve
    // restarts from the first solution.
    // Only for exact walls: a mask's staircase has a re-entrant corner at every step, where the
    // smooth local fit behind the correction does not hold.
    if correct && enrichment.is_none() {
        // b + correction, formed in b's own vector (one vector fewer to fault in).
        post::add_wall_correction(system.problem(), system.numbering(), &u, &mut b);
        let more =
            solve(&mut system, &b, &mut u, params).map_err(|e| e.in_solve(Solve::CorrectedFlow))?;
        passes.push(more);
        info = CgInfo {
            iterations: info.iterations + more.iterations,
            relative_residual: more.relative_residual,
            round_off_limited: info.round_off_limited || more.round_off_limited,
        };
    }
    let t3 = Instant::now();
    let numbering = system.numbering();
    let shear = match &enrichment {
        None => post::wall_shear(&classified, numbering, &u, &walls, wall_kind),
        Some(e) => {
            // Near a treated corner the fits see the smooth part w and the singular part's
            // gradient is exact; farther away (beyond 2·r₀ + 4h, where u itself is smooth on
            // the fits' scale) u is fitted as it is, since w's source there, 1 + Σ a·∆(χS),
            // varies across the fits (measured on shapes/finned_tube.toml: the force balance
            // 3.2e-3 and 7.5e-4 at 600 and 1200 cells with w's fits throughout).
            let part = e.values(&classified, numbering);
            let w: Vec<f64> = u.iter().zip(&part).map(|(u, s)| u - s).collect();
            let mut shear =
                post::wall_shear_with_source(&classified, numbering, &w, &walls, wall_kind, &|p| {
                    e.flow_source_at(p)
                });
            let plain = post::wall_shear(&classified, numbering, &u, &walls, wall_kind);
            for ((s, smp), direct) in shear.iter_mut().zip(&walls.samples).zip(&plain) {
                let near = e.corners.iter().any(|k| {
                    let (d, c) = (smp.point, k.corner.position);
                    (d[0] - c[0]).hypot(d[1] - c[1]) < 2.0 * k.r0 + 4.0 * grid.h
                });
                if near {
                    let g = e.gradient(smp.point);
                    s.tau -= g[0] * smp.normal[0] + g[1] * smp.normal[1];
                } else {
                    s.tau = direct.tau;
                }
            }
            shear
        }
    };
    let figures = post::figures(
        &classified,
        numbering,
        &u,
        &walls,
        &shear,
        corners.as_deref(),
        enrichment.as_ref(),
    );
    let passages = post::passages(&classified, numbering, &u, &walls);
    let t4 = Instant::now();
    let heat = if options.heat {
        monitor.stage("solving the heat transfer (Nu_H1, Nu_T)");
        Some(heat_transfer(
            &mut system,
            &u,
            &figures,
            enrichment.as_ref(),
        )?)
    } else {
        None
    };
    let t5 = Instant::now();
    let numbering = system.into_numbering();
    Ok(UnitSolution {
        classified,
        numbering,
        u,
        walls,
        shear,
        figures,
        passages,
        heat,
        info,
        passes,
        method_name: method.name(),
        seconds: Timings {
            grid: (t1 - t0).as_secs_f64(),
            assembly: setup.assembly,
            setup: setup.setup,
            solve: (t3 - t_setup).as_secs_f64(),
            post: (t4 - t3).as_secs_f64(),
            heat: (t5 - t4).as_secs_f64(),
        },
    })
}

// ---------------------------------------------------------------------------------------------
// A whole `solve` run: validated configuration in, outcome out.

/// Default number of cells across the longer side of the bounding box: the finest grid at which
/// the whole default `canalis solve` of every shipped example (flow, heat transfer and the cheap
/// error estimate) stays under half a second with a margin for a loaded machine (fourth
/// session, BENCHMARKS.md: 0.17–0.44 s at 600 cells, 0.24–0.53 s at 720). The flow alone was
/// raised from 400 to 600 cells when the multigrid solver came; heat transfer and error bars
/// then took the default back to 480, and the faster V-cycle of the fourth session to 600.
pub const DEFAULT_CELLS: usize = 600;
/// Cells across each case of `canalis verify` unless told otherwise (the grid at which the
/// accuracy of the exact cases is specified).
pub const VERIFY_CELLS: usize = 400;
/// Default limit on the estimated memory of a solve.
pub const DEFAULT_MEMORY_LIMIT: u64 = 4 << 30;
/// Estimated bytes per grid node (classification, numbering, matrix, solver vectors; measured
/// peak is lower, this errs on the safe side).
pub(crate) const BYTES_PER_NODE: u64 = 260;
/// Fewest fluid nodes a solve accepts: below this no figure would be trustworthy.
pub(crate) const MIN_FLUID_NODES: usize = 50;

/// A validated `solve` configuration.
#[derive(Debug, Clone, PartialEq)]
pub struct SolveConfig {
    pub input: Input,
    /// Cells across the longer side; None = [`DEFAULT_CELLS`] (ignored for masks, whose grid
    /// is the pixel grid).
    pub cells: Option<usize>,
    pub unit: UnitOptions,
    pub operating: Option<OperatingSpec>,
    /// Refuse grids whose estimated memory exceeds this many bytes.
    pub memory_limit: u64,
    /// Shift of the grid, a fraction of a cell per axis in [0, 1)
    /// ([`Grid::covering_with_offset`]); zero by default. Ignored for masks (pixel grid).
    pub offset: [f64; 2],
    /// When set, overrides `offset`: the grid is placed with the centre of the bounding box this
    /// fraction of a cell beyond a node ([`Grid::covering_placed`]; similar grids for a study).
    pub placement: Option<[f64; 2]>,
    /// How the numerical uncertainty of the figures is estimated.
    pub error_estimate: ErrorEstimate,
    /// March the thermal entrance (`--entrance`) on a grid of at most this many cells across.
    pub entrance: Option<EntranceOptions>,
    /// The Prandtl number of the simultaneously developing heat transfer (`--prandtl`); without
    /// it the operating point's fluid's, when known.
    pub prandtl: Option<f64>,
    /// Minor-loss coefficient K of `--minor-loss` (inlet, outlet, bends), added to the
    /// pressure drop over `--length` as K·ρ·ū²/2.
    pub minor_loss: Option<f64>,
    /// Rate the passage thermally over the operating point's length (`--inlet-temperature` with
    /// `--wall-temperature`, `--heat-load` or `--heat-flux`); implies the entrance march.
    pub rating: Option<RatingSpec>,
    /// Notes on the configuration itself (options that do not apply to the input), put first
    /// among the outcome's warnings.
    pub warnings: Vec<String>,
}

/// The thermal entrance of a run (`--entrance`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EntranceOptions {
    /// Cells across the longer side of the march's grid at most (`--entrance-cells`): the
    /// run's own grid when it is no finer, otherwise the flow is solved again on this one.
    pub cells: usize,
}

/// Largest `--prandtl` (the energy march's steps are capped by Pr/(8·Nu_T) in x+; oils are a
/// few thousand, and beyond 10⁵ the combined entry is the thermal entrance of fully developed
/// flow anyway).
pub const MAX_PRANDTL: f64 = 1e5;

/// Default of `--entrance-cells`: measured on the round tube against the exact Graetz series
/// (tests/entrance.rs), 300 cells keep every local and mean Nusselt number within 0.21 % from
/// x* = 1e-4 on, inside the 1 % and 0.3 % asked for, at a quarter of the cost of 600 cells
/// (BENCHMARKS.md).
pub const ENTRANCE_CELLS: usize = 300;

/// How a run estimates the numerical uncertainty of its figures ([`crate::study`]).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum ErrorEstimate {
    /// None (`Outcome::uncertainty` stays empty).
    Off,
    /// One coarser grid (cells / 1.75, a third of the cost), formal order assumed, safety
    /// factor 3.
    #[default]
    Cheap,
    /// A refinement study until the relative uncertainty (GCI) of f·Re and, when computed, of
    /// the Nusselt numbers is below this fraction (`--accuracy`).
    Accuracy(f64),
}

impl SolveConfig {
    /// A configuration with the defaults for everything but the input; check it with
    /// [`SolveConfig::validate`] after changing fields ([`run`] does).
    pub fn new(input: Input) -> SolveConfig {
        SolveConfig {
            input,
            cells: None,
            unit: UnitOptions::default(),
            operating: None,
            memory_limit: DEFAULT_MEMORY_LIMIT,
            offset: [0.0, 0.0],
            placement: None,
            error_estimate: ErrorEstimate::default(),
            entrance: None,
            prandtl: None,
            minor_loss: None,
            rating: None,
            warnings: Vec::new(),
        }
    }

    /// Checks every value that needs no geometry, so that a bad input is refused at once,
    /// whatever the grid size: the operating point ([`OperatingSpec::validate`]: fluid,
    /// temperature range, positive properties, drive and length), `--cells` (at least 8, unless
    /// a mask's pixel grid ignores it), a mask's pixel size and a drawing's scale, the solver's
    /// iteration cap and tolerance, the grid offset and placement, and the target of
    /// `--accuracy`. Errors name the option at fault.
    pub fn validate(&self) -> Result<()> {
        if let Some(op) = &self.operating {
            op.validate()?;
            check_operating_ranges(op)?;
        }
        let pixel_grid = matches!(&self.input, Input::Mask { options, .. }
            if options.mode == MaskMode::Pixels);
        if let (Some(cells), false) = (self.cells, pixel_grid) {
            check_cells(cells)?;
        }
        match &self.input {
            Input::Mask { options, .. } if !(options.pixel.is_finite() && options.pixel > 0.0) => {
                return Err(Error::param("--pixel", "must be a positive length"));
            }
            Input::Mask { options, .. }
                if !(MIN_EXTENT_M..=MAX_PIXEL_M).contains(&options.pixel) =>
            {
                return Err(Error::param(
                    "--pixel",
                    format!(
                        "{:e} m per pixel is out of range; use {MIN_EXTENT_M:e} m to \
                         {MAX_PIXEL_M} m",
                        options.pixel
                    ),
                ));
            }
            Input::Svg { scale: Some(s), .. } if !(s.is_finite() && *s > 0.0) => {
                return Err(Error::param("--scale", "must be a positive length"));
            }
            _ => {}
        }
        let cg = &self.unit.cg;
        if cg.max_iterations == 0 {
            return Err(Error::param("--max-iterations", "must be at least 1"));
        }
        if !(cg.tolerance.is_finite() && cg.tolerance > 0.0 && cg.tolerance < 1.0) {
            return Err(Error::param(
                "tolerance",
                format!(
                    "{} is not a relative residual between 0 and 1",
                    cg.tolerance
                ),
            ));
        }
        let fraction = |v: &[f64; 2]| v.iter().all(|x| x.is_finite());
        if !fraction(&self.offset) {
            return Err(Error::param(
                "offset",
                "the grid offset must be a finite fraction of a cell",
            ));
        }
        if self.placement.is_some_and(|p| !fraction(&p)) {
            return Err(Error::param(
                "placement",
                "the grid placement must be a finite fraction of a cell",
            ));
        }
        if let Some(r) = &self.rating {
            r.validate()?;
            if self.operating.as_ref().is_none_or(|o| o.length.is_none()) {
                return Err(Error::param(
                    "--inlet-temperature",
                    "a thermal rating needs an operating point and the passage's length: give \
                     --flow (or --dpdx), a fluid and --length",
                ));
            }
        }
        if let Some(e) = self.entrance {
            if e.cells < MIN_CELLS {
                return Err(Error::param(
                    "--entrance-cells",
                    format!("{} cells are too few; give at least {MIN_CELLS}", e.cells),
                ));
            }
        }
        if let Some(k) = self.minor_loss {
            if !(k.is_finite() && k >= 0.0) {
                return Err(Error::param(
                    "--minor-loss",
                    format!("{k} is not a loss coefficient; give K ≥ 0, e.g. 1.5"),
                ));
            }
            if self.operating.as_ref().and_then(|o| o.length).is_none() {
                return Err(Error::param(
                    "--minor-loss",
                    "minor losses add to the pressure drop over a length: add an operating \
                     point with --length",
                ));
            }
        }
        if let Some(pr) = self.prandtl {
            if !(pr.is_finite() && pr > 0.0 && pr <= MAX_PRANDTL) {
                return Err(Error::param(
                    "--prandtl",
                    format!(
                        "{pr} is not a Prandtl number canalis marches; give a value above 0 and \
                         at most {MAX_PRANDTL:e}, e.g. 0.7 for air or 7 for water"
                    ),
                ));
            }
        }
        if let ErrorEstimate::Accuracy(tol) = self.error_estimate {
            if !(tol.is_finite() && tol > 0.0 && tol < 1.0) {
                return Err(Error::param(
                    "--accuracy",
                    format!(
                        "{tol} is not a relative accuracy; give a fraction between 0 and 1, \
                         e.g. 1e-4"
                    ),
                ));
            }
        }
        Ok(())
    }
}

/// Largest mask pixel accepted, metres.
pub const MAX_PIXEL_M: f64 = 1.0;

/// The plausible range of each operating value, SI units: outside it no liquid or gas in a
/// duct is described, and the dimensional results would overflow or underflow (a viscosity of
/// 1e308 Pa·s printed velocities of zero; a gradient of 1e308 Pa/m, infinite ones).
const OPERATING_RANGES: [(&str, f64, f64, &str); 7] = [
    ("--viscosity", 1e-7, 1e8, "Pa·s"),
    ("--density", 1e-3, 1e5, "kg/m³"),
    ("--conductivity", 1e-4, 1e4, "W/(m·K)"),
    ("--specific-heat", 1.0, 1e6, "J/(kg·K)"),
    ("--dpdx", 1e-9, 1e12, "Pa/m"),
    ("--flow", 1e-18, 1e6, "m³/s"),
    ("--length", 1e-7, 1e6, "m"),
];

/// Refuses operating values outside [`OPERATING_RANGES`], naming the option.
fn check_operating_ranges(op: &OperatingSpec) -> Result<()> {
    use crate::operating::{Drive, FluidSpec};
    let mut given: Vec<(&str, f64)> = Vec::new();
    if let FluidSpec::Given {
        viscosity,
        density,
        conductivity,
        specific_heat,
    } = &op.fluid
    {
        given.extend([("--viscosity", *viscosity), ("--density", *density)]);
        given.extend(conductivity.map(|k| ("--conductivity", k)));
        given.extend(specific_heat.map(|c| ("--specific-heat", c)));
    }
    if let Drive::PressureGradient(g) = op.drive {
        given.push(("--dpdx", g));
    }
    if let Drive::FlowRate(q) = op.drive {
        given.push(("--flow", q));
    }
    given.extend(op.length.map(|l| ("--length", l)));
    for (name, value) in given {
        if let Some(&(_, lo, hi, unit)) = OPERATING_RANGES.iter().find(|r| r.0 == name) {
            if !(lo..=hi).contains(&value) {
                return Err(Error::param(
                    name,
                    format!("{value:e} {unit} is out of range; use {lo:e} to {hi:e} {unit}"),
                ));
            }
        }
    }
    Ok(())
}

/// Fewest cells across a grid may have.
const MIN_CELLS: usize = 8;

/// `--cells` is at least [`MIN_CELLS`].
fn check_cells(cells: usize) -> Result<()> {
    if cells < MIN_CELLS {
        return Err(Error::param(
            "--cells",
            format!(
                "{cells} is too small; use at least {MIN_CELLS} (the default is {DEFAULT_CELLS})"
            ),
        ));
    }
    Ok(())
}

/// Runs a whole `solve`: check the configuration ([`SolveConfig::validate`]), load the
/// cross-section, lay the grid, solve, post-process, and evaluate the operating point.
pub fn run(config: &SolveConfig) -> Result<Outcome> {
    run_monitored(config, &Silent)
}

/// [`run`] reporting the solver's iterations to `monitor`.
///
/// The whole run goes onto a worker of rayon's pool, as each unit solve does
/// ([`solve_unit_monitored`]): the entrance marches start thousands of small solves (28 000
/// unknowns on the mould slot's entrance grid), and from the caller's own thread every
/// parallel loop in them was a hand-over to the pool and back. Measured on one thread
/// (`RAYON_NUM_THREADS=1`), `--entrance` on shapes/mould_slot.toml: half the cycles were the
/// kernel's scheduler (perf).
pub fn run_monitored(config: &SolveConfig, monitor: &dyn Monitor) -> Result<Outcome> {
    if rayon::current_thread_index().is_some() {
        run_on_worker(config, monitor)
    } else {
        rayon::scope(|_| run_on_worker(config, monitor))
    }
}

fn run_on_worker(config: &SolveConfig, monitor: &dyn Monitor) -> Result<Outcome> {
    let start = Instant::now();
    config.validate()?;
    // A mask is decoded within the run's memory limit too (`MaskOptions::memory_limit`).
    let limited;
    let config = match &config.input {
        Input::Mask { path, options } if options.memory_limit != config.memory_limit => {
            limited = SolveConfig {
                input: Input::Mask {
                    path: path.clone(),
                    options: MaskOptions {
                        memory_limit: config.memory_limit,
                        ..*options
                    },
                },
                ..config.clone()
            };
            &limited
        }
        _ => config,
    };
    // The resolution check (issue 19) on the run's own grid, before any solve: a grid that
    // cannot resolve a passage or a wall is refined (default grid) or refused.
    let refined;
    monitor.stage("checking the grid's resolution");
    let config = match check_resolution(config)? {
        None => config,
        Some((cells, note)) => {
            let mut c = config.clone();
            c.cells = Some(cells);
            c.warnings.push(note);
            refined = c;
            &refined
        }
    };
    let mut outcome = match (&config.input, config.error_estimate) {
        (_, ErrorEstimate::Off) => run_once(config, monitor)?,
        (Input::Mask { path, options }, ErrorEstimate::Cheap) => runs::run_image_study(
            config,
            path,
            options,
            &study::IMAGE_CHEAP_FACTORS,
            None,
            monitor,
        )?,
        (Input::Mask { path, options }, ErrorEstimate::Accuracy(tol)) => runs::run_image_study(
            config,
            path,
            options,
            &study::IMAGE_STUDY_FACTORS,
            Some(tol),
            monitor,
        )?,

        (_, ErrorEstimate::Cheap) => {
            let fine = run_once(config, monitor)?;
            runs::with_cheap_estimate(config, fine, monitor)
        }
        (_, ErrorEstimate::Accuracy(tol)) => runs::run_study(config, tol, monitor)?,
    };
    let entrance = match (config.entrance, &config.rating) {
        (Some(options), _) => Some(options),
        (None, Some(_)) => Some(EntranceOptions {
            cells: ENTRANCE_CELLS,
        }),
        (None, None) => None,
    };
    if let Some(options) = entrance {
        monitor.stage("marching the thermal entrance");
        let mut warnings = Vec::new();
        outcome.entrance = Some(run_entrance(
            config,
            &outcome,
            options,
            &mut warnings,
            monitor,
        )?);
        outcome.warnings.extend(warnings);
    }
    finish_pressure_drop(config, &mut outcome, monitor)?;
    if let (Some(spec), Some(op), Some(point), Some(e)) = (
        &config.rating,
        &config.operating,
        &outcome.operating,
        &outcome.entrance,
    ) {
        let length = op.length.expect("validated: a rating has a length");
        let mut warnings = Vec::new();
        // With a fluid whose Pr is known the velocity develops with the temperature: the
        // combined entry's values (at the operating point's Pr), else the thermal entrance's.
        let combined = e.hydrodynamic.as_ref().and_then(|h| h.combined.as_ref());
        let mut rating = rate(
            spec,
            &op.fluid,
            point.flow_rate_m3_s,
            length,
            &outcome.unit.passages,
            combined.map_or(&e.thermal, |c| &c.thermal),
            &mut warnings,
        )?;
        if let Some(c) = combined {
            rating.thermal_model = rating.thermal_model.replace(
                LAMINAR_THERMAL_MODEL,
                &format!(
                    "laminar simultaneously developing flow of this cross-section (uniform \
                     inlet velocity and temperature, marched at Pr = {}, the operating \
                     point's; the properties of the rating are at the mean bulk temperature)",
                    crate::units::format_significant(c.prandtl, 1e-3)
                ),
            );
        }
        outcome.warnings.extend(warnings);
        outcome.rating = Some(rating);
    }
    outcome.seconds = start.elapsed().as_secs_f64();
    outcome
        .warnings
        .splice(0..0, config.warnings.iter().cloned());
    Ok(outcome)
}

/// The fully developed flow of a unit solution, as the entrance march takes it.
fn flow_of(unit: &UnitSolution) -> Flow<'_> {
    Flow {
        classified: &unit.classified,
        u: &unit.u,
        passages: &unit.passages,
        walls: &unit.walls,
        shear: &unit.shear,
    }
}

/// Finest entrance grid `--accuracy` refines to (cells across; a march there takes about
/// 15 times one at the default 300 cells).
pub const ENTRANCE_MAX_CELLS: usize = 1200;
/// Most halvings of the base step sequence `--accuracy` refines to (32 steps per decade).
pub const ENTRANCE_MAX_HALVINGS: u32 = 3;
/// Ratio of the coarser grid of the entrance estimate's grid part to the fine one: 1.5 rather
/// than the 1.75 of the fully developed figures, so that the thermal layer is resolved on
/// both grids from x* = 1e-5 on at the default 300 cells of a round tube (below four cells
/// across, the thin-layer limit stands in on the coarser grid, and the pair then measures
/// that limit's error rather than the grid's; measured: 3.2e-2 at x* = 1e-5 with 171 cells,
/// carried into the means up to x* = 1e-3). A coarse march costs about 0.45 of the fine one.
const ENTRANCE_COARSE: f64 = 1.5;
/// Refinement ratio of the entrance grid per round of `--accuracy`.
const ENTRANCE_REFINE: f64 = 1.5;

/// The march's control for a run with `halvings` of the base step sequence: the default, and
/// for `--accuracy TOL` solves tight enough that their error stays well below the target
/// (TOL·1e-4 at most). Measured on the round tube at 300 cells and 8 steps per decade:
/// tolerances of 1e-7 (the default) and 1e-8 give the same Nusselt numbers within 2e-5.
fn march_params(estimate: ErrorEstimate, halvings: u32) -> MarchParams {
    let default = MarchParams::default();
    let tolerance = match estimate {
        ErrorEstimate::Accuracy(tol) => (tol * 1e-4).min(default.tolerance),
        _ => default.tolerance,
    };
    MarchParams {
        halvings,
        tolerance,
        ..default
    }
}

/// The configuration that solves the flow of an entrance march on `cells` cells at `offset`.
fn entrance_flow_config(config: &SolveConfig, cells: usize, offset: [f64; 2]) -> SolveConfig {
    SolveConfig {
        cells: Some(cells),
        operating: None,
        error_estimate: ErrorEstimate::Off,
        entrance: None,
        rating: None,
        offset,
        ..config.clone()
    }
}

/// The flow of an entrance march on `cells` cells at `offset`; None when that grid does not
/// pass the resolution check.
fn entrance_flow(
    config: &SolveConfig,
    cells: usize,
    offset: [f64; 2],
    monitor: &dyn Monitor,
) -> Result<Option<Outcome>> {
    let flow = entrance_flow_config(config, cells, offset);
    if !matches!(check_resolution(&flow), Ok(None)) {
        return Ok(None);
    }
    run_once(&flow, monitor).map(Some)
}

/// The thermal entrance marched on `unit`'s flow, at the standard stations, with the fully
/// developed values of a connected section for the entrance lengths.
fn march(
    config: &SolveConfig,
    unit: &UnitSolution,
    params: &MarchParams,
) -> Result<crate::entrance::ThermalEntrance> {
    let fully_developed: Option<Vec<(f64, f64)>> = match (unit.heat.as_ref(), unit.passages.len()) {
        (Some(h), 1) => Some(vec![(h.nusselt_t, h.nusselt_h1)]),
        _ => None,
    };
    thermal_entrance(
        &flow_of(unit),
        fully_developed.as_deref(),
        &standard_stations(),
        config.unit.method,
        params,
    )
}

/// The fine march of an entrance estimate with what it was marched on.
struct FineMarch {
    thermal: crate::entrance::ThermalEntrance,
    cells: (usize, usize),
    unknowns: usize,
}

/// The entrance values' numerical uncertainty ([`crate::study::entrance`]): the step part from
/// a march on the same grid with every step twice as long (one halving less), the grid part
/// from a march with the same steps on a grid of cells / [`ENTRANCE_COARSE`] at another
/// offset (as the cheap estimate of the fully developed figures, shifted by
/// [`study::CHEAP_OFFSET`]); U = U_grid + U_step per station and quantity.
///
/// With `--accuracy TOL` the part that dominates at the stations from x* =
/// [`crate::study::entrance::ACCURACY_FROM`] on is refined until U meets TOL there: the steps
/// by halving them (the old fine march becomes the step part's partner), the grid by
/// [`ENTRANCE_REFINE`] (the old fine march becomes the grid part's partner, same offset), up
/// to [`ENTRANCE_MAX_HALVINGS`], [`ENTRANCE_MAX_CELLS`] and the memory limit; a warning says
/// when the target was not met and when stations closer to the inlet are above it. Returns
/// the (possibly refined) fine march with its uncertainty; no uncertainty when a coarser grid
/// does not pass the resolution check.
///
/// Measured on the round tube against the exact Graetz series, from x* = 1e-4 on (largest
/// error, largest uncertainty): default 300 cells, 8 steps per decade: 2.1e-3, 9.6e-3;
/// `--accuracy 5e-3`: 486 cells, 8 steps: 1.4e-3, 3.8e-3 (32 s on two threads);
/// `--accuracy 1e-3`: 1094 cells, 16 steps: 5.4e-4, 8.7e-4 (about 10 minutes).
fn entrance_estimate(
    config: &SolveConfig,
    first_unit: &UnitSolution,
    first: crate::entrance::ThermalEntrance,
    params: MarchParams,
    warnings: &mut Vec<String>,
    monitor: &dyn Monitor,
) -> Result<(FineMarch, Option<EntranceUncertainty>)> {
    use crate::study::entrance::{parts, ACCURACY_FROM};
    let target = match config.error_estimate {
        ErrorEstimate::Accuracy(tol) => Some(tol),
        _ => None,
    };
    let mut params = params;
    let mut refined: Option<Outcome> = None;
    let mut fine = first;
    let mut steps: Option<crate::entrance::ThermalEntrance> = None;
    // The grid part's march, its spacing and cells.
    let mut coarse: Option<(crate::entrance::ThermalEntrance, f64, (usize, usize))> = None;
    loop {
        let unit = refined.as_ref().map_or(first_unit, |o| &o.unit);
        let grid = &unit.classified.grid;
        let (cx, cy) = grid.cells();
        let fine_march = |thermal| FineMarch {
            thermal,
            cells: (cx, cy),
            unknowns: unit.numbering.len(),
        };
        if steps.is_none() {
            monitor.stage("estimating the thermal entrance's step error");
            let p = MarchParams {
                halvings: params.halvings.saturating_sub(1),
                ..params
            };
            steps = Some(march(config, unit, &p)?);
        }
        if coarse.is_none() {
            let cells = (cx.max(cy) as f64 / ENTRANCE_COARSE).round() as usize;
            let offset = [
                (config.offset[0] + study::CHEAP_OFFSET[0]).fract(),
                (config.offset[1] + study::CHEAP_OFFSET[1]).fract(),
            ];
            // A coarser grid that cannot resolve the section gives no estimate.
            let Some(o) = entrance_flow(config, cells, offset, monitor)? else {
                return Ok((fine_march(fine), None));
            };
            monitor.stage("estimating the thermal entrance's grid error");
            let c = march(config, &o.unit, &params)?;
            coarse = Some((c, o.unit.classified.grid.h, o.unit.classified.grid.cells()));
        }
        let (Some(step_march), Some((coarse_march, coarse_h, coarse_cells))) = (&steps, &coarse)
        else {
            unreachable!("both marches were just made");
        };
        if coarse_march.passages.len() != fine.passages.len() {
            return Err(Error::Numerical(format!(
                "the coarser grid of the entrance estimate ({} cells) has {} passages, the \
                 fine one {}: refine --entrance-cells",
                coarse_cells.0.max(coarse_cells.1),
                coarse_march.passages.len(),
                fine.passages.len()
            )));
        }
        let split = parts(&fine, step_march, coarse_march, coarse_h / grid.h);
        let worst = split.worst_from(&fine.x_star, ACCURACY_FROM);
        let spd = |halvings| MarchParams { halvings, ..params }.steps_per_decade();
        let uncertainty = |reached: bool| EntranceUncertainty {
            coarse_cells: *coarse_cells,
            steps_per_decade: (
                params.steps_per_decade(),
                spd(params.halvings.saturating_sub(1)),
            ),
            passages: split.total(),
            parts: split.clone(),
            target: target.map(|t| (t, reached)),
        };
        let Some(tol) = target else {
            let u = uncertainty(false);
            return Ok((fine_march(fine), Some(u)));
        };
        let reached = worst.total <= tol;
        // Which part to refine: the larger, or the other when the larger cannot be.
        let next_cells = (cx.max(cy) as f64 * ENTRANCE_REFINE).round() as usize;
        let next_bytes = grid.len() as f64 * ENTRANCE_REFINE.powi(2) * BYTES_PER_NODE as f64;
        let can_grid = next_cells <= ENTRANCE_MAX_CELLS && next_bytes <= config.memory_limit as f64;
        let can_step = params.halvings < ENTRANCE_MAX_HALVINGS;
        let refine_step = match (can_step, can_grid) {
            _ if reached => None,
            (true, true) => Some(worst.step >= worst.grid),
            (true, false) => Some(true),
            (false, true) => Some(false),
            (false, false) => None,
        };
        match refine_step {
            Some(true) => {
                monitor.stage("refining the thermal entrance's steps");
                params = march_params(config.error_estimate, params.halvings + 1);
                let finer = march(config, unit, &params)?;
                steps = Some(std::mem::replace(&mut fine, finer));
                coarse = None;
            }
            Some(false) => {
                monitor.stage("refining the thermal entrance's grid");
                let Some(o) = entrance_flow(config, next_cells, config.offset, monitor)? else {
                    warnings.push(entrance_target_note(tol, &worst, (cx, cy), &params, false));
                    return Ok((fine_march(fine), Some(uncertainty(false))));
                };
                let finer = march(config, &o.unit, &params)?;
                coarse = Some((std::mem::replace(&mut fine, finer), grid.h, (cx, cy)));
                steps = None;
                refined = Some(o);
            }
            None => {
                if !reached {
                    warnings.push(entrance_target_note(tol, &worst, (cx, cy), &params, true));
                }
                let u = uncertainty(reached);
                // The stations closer to the inlet than the target applies to.
                let total = &u.passages;
                let upstream = total
                    .iter()
                    .flat_map(|q| q.iter())
                    .flat_map(|v| fine.x_star.iter().zip(v))
                    .filter(|(x, _)| **x < ACCURACY_FROM * (1.0 - 1e-9))
                    .fold(0.0f64, |a, (_, &b)| {
                        a.max(if b.is_nan() { f64::INFINITY } else { b })
                    });
                if upstream > tol {
                    warnings.push(format!(
                        "entrance values closer to the inlet than x* = {ACCURACY_FROM:e} are not \
                         held to --accuracy {tol:e}: the thermal layer there is only a few grid \
                         cells thick; their relative uncertainty is up to {upstream:.1e}"
                    ));
                }
                return Ok((fine_march(fine), Some(u)));
            }
        }
    }
}

/// The warning of an entrance estimate that stopped short of `--accuracy`.
fn entrance_target_note(
    tol: f64,
    worst: &crate::study::entrance::Worst,
    cells: (usize, usize),
    params: &MarchParams,
    at_limit: bool,
) -> String {
    format!(
        "the thermal entrance did not reach --accuracy {tol:e}: its largest relative \
         uncertainty from x* = {:e} on is {:.1e} (grid part {:.1e}, step part {:.1e}) on {} × {} \
         cells with {} steps per decade{}",
        crate::study::entrance::ACCURACY_FROM,
        worst.total,
        worst.grid,
        worst.step,
        cells.0,
        cells.1,
        params.steps_per_decade(),
        if at_limit {
            format!(
                ", as far as the entrance march is refined ({ENTRANCE_MAX_CELLS} cells, {} \
                 steps per decade, or --max-memory)",
                march_params(ErrorEstimate::Off, ENTRANCE_MAX_HALVINGS).steps_per_decade()
            )
        } else {
            " (a finer grid did not pass the resolution check)".to_string()
        }
    )
}

/// The developing flow of a run's cross-section from a uniform inlet ([`crate::hydrodynamic`])
/// on the thermal entrance's grid, with the energy equation when the Prandtl number is known
/// (`--prandtl`, or the operating point's fluid): the thermal march's thin-layer limits and
/// fully developed values go with it.
fn march_developing(
    config: &SolveConfig,
    outcome: &Outcome,
    unit: &UnitSolution,
    thermal: &crate::entrance::ThermalEntrance,
    monitor: &dyn Monitor,
) -> Result<crate::hydrodynamic::HydrodynamicEntrance> {
    monitor.stage("marching the developing velocity");
    // The slowest thermal mode's rate 4·Nu_T bounds the developing flow's steps.
    let decay = 4.0
        * unit
            .heat
            .as_ref()
            .map_or(HYDRO_DEFAULT_NU_T, |h| h.nusselt_t);
    let prandtl = config
        .prandtl
        .or_else(|| outcome.operating.as_ref().and_then(|o| o.prandtl));
    let combined = prandtl.map(|pr| CombinedSpec {
        prandtl: pr,
        resolved_from: thermal
            .passages
            .iter()
            .map(|p| p.leveque.resolved_from)
            .collect(),
        fully_developed: thermal
            .passages
            .iter()
            .map(|p| (p.nusselt_t_fully_developed, p.nusselt_h1_fully_developed))
            .collect(),
    });
    hydrodynamic_entrance(
        &flow_of(unit),
        &standard_stations(),
        decay,
        config.unit.method,
        &HydroParams::default(),
        combined.as_ref(),
    )
}

/// The thermal entrance of a run's cross-section ([`crate::entrance`]): on the run's own unit
/// solution when its grid has at most `options.cells` cells across (or is a mask's pixel grid),
/// otherwise on the flow solved again on a grid of that many cells; with its uncertainty
/// ([`entrance_estimate`]) unless the run has none, refined under `--accuracy`.
fn run_entrance(
    config: &SolveConfig,
    outcome: &Outcome,
    options: EntranceOptions,
    warnings: &mut Vec<String>,
    monitor: &dyn Monitor,
) -> Result<EntranceOutcome> {
    let (cx, cy) = outcome.unit.classified.grid.cells();
    let coarser;
    let unit = if outcome.fixed_grid || cx.max(cy) <= options.cells {
        &outcome.unit
    } else {
        // The entrance grid must pass the resolution check too; where it does not, the march
        // takes the run's own grid, which did.
        match entrance_flow(config, options.cells, config.offset, monitor)? {
            Some(o) => {
                coarser = o;
                &coarser.unit
            }
            None => &outcome.unit,
        }
    };
    monitor.stage("marching the thermal entrance");
    let params = march_params(config.error_estimate, MarchParams::default().halvings);
    let thermal = march(config, unit, &params)?;
    let hydrodynamic = march_developing(config, outcome, unit, &thermal, monitor)?;
    if outcome.fixed_grid || config.error_estimate == ErrorEstimate::Off {
        return Ok(EntranceOutcome {
            thermal,
            hydrodynamic: Some(hydrodynamic),
            uncertainty: None,
            cells: unit.classified.grid.cells(),
            unknowns: unit.numbering.len(),
        });
    }
    let (fine, uncertainty) = entrance_estimate(config, unit, thermal, params, warnings, monitor)?;
    Ok(EntranceOutcome {
        thermal: fine.thermal,
        hydrodynamic: Some(hydrodynamic),
        uncertainty,
        cells: fine.cells,
        unknowns: fine.unknowns,
    })
}

/// The unit solution an entrance march runs on: the run's own, or the flow solved again on a
/// grid of `cells` across when the run's is finer (and that grid passes the resolution
/// check; otherwise the run's own), kept in `holder`.
fn entrance_unit<'a>(
    config: &SolveConfig,
    outcome: &'a Outcome,
    cells: usize,
    monitor: &dyn Monitor,
    holder: &'a mut Option<Outcome>,
) -> Result<&'a UnitSolution> {
    let (cx, cy) = outcome.unit.classified.grid.cells();
    if outcome.fixed_grid || cx.max(cy) <= cells {
        return Ok(&outcome.unit);
    }
    let flow = SolveConfig {
        cells: Some(cells),
        operating: None,
        error_estimate: ErrorEstimate::Off,
        entrance: None,
        rating: None,
        ..config.clone()
    };
    // The entrance grid must pass the resolution check too; where it does not, the march
    // takes the run's own grid, which did.
    match check_resolution(&flow) {
        Ok(None) => {
            *holder = Some(run_once(&flow, monitor)?);
            Ok(&holder.as_ref().expect("just set").unit)
        }
        _ => Ok(&outcome.unit),
    }
}

/// The pressure drop over `--length` at a laminar operating point with the entrance region
/// (the developing-flow march: the `--entrance` run's, or one marched here to the outlet),
/// and the minor losses of `--minor-loss` in any regime. With `--pressure-drop` the flow
/// rate stays the fully developed one's (said in a warning).
fn finish_pressure_drop(
    config: &SolveConfig,
    outcome: &mut Outcome,
    monitor: &dyn Monitor,
) -> Result<()> {
    let (Some(op), Some(point)) = (&config.operating, &outcome.operating) else {
        return Ok(());
    };
    let Some(mut length) = point.length else {
        return Ok(());
    };
    let mut warnings = Vec::new();
    let density = point.fluid.density_kg_m3;
    if point.regime == crate::correlations::Regime::Laminar {
        if matches!(op.drive, crate::operating::Drive::PressureDrop(_)) {
            warnings.push(
                "with --pressure-drop the flow rate is that of fully developed friction over \
                 the whole length: the entrance region, whose friction is higher, is not \
                 included"
                    .into(),
            );
        } else {
            let passages: Vec<(f64, f64, f64, f64)> = point
                .passages
                .iter()
                .zip(&outcome.unit.passages)
                .map(|(r, f)| {
                    (
                        r.flow_rate_m3_s,
                        r.mean_velocity_m_s,
                        r.reynolds,
                        f.hydraulic_diameter,
                    )
                })
                .collect();
            let standalone;
            let hydro = match outcome
                .entrance
                .as_ref()
                .and_then(|e| e.hydrodynamic.as_ref())
            {
                Some(h) => h,
                None => {
                    // March to the furthest outlet x+ (at most to the last standard station,
                    // beyond which the fully developed rate holds).
                    let x_end = passages
                        .iter()
                        .map(|p| length.length_m / (p.3 * p.2))
                        .fold(0.0f64, f64::max);
                    let mut stations: Vec<f64> = standard_stations()
                        .into_iter()
                        .filter(|&x| x < x_end)
                        .collect();
                    stations.push(x_end.min(1.0));
                    stations.dedup();
                    let mut holder = None;
                    let unit =
                        entrance_unit(config, outcome, ENTRANCE_CELLS, monitor, &mut holder)?;
                    monitor.stage("marching the developing velocity");
                    let decay = 4.0
                        * unit
                            .heat
                            .as_ref()
                            .map_or(HYDRO_DEFAULT_NU_T, |h| h.nusselt_t);
                    standalone = hydrodynamic_entrance(
                        &flow_of(unit),
                        &stations,
                        decay,
                        config.unit.method,
                        &HydroParams::default(),
                        None,
                    )?;
                    &standalone
                }
            };
            length.with_entrance(hydro, &passages, density, &mut warnings);
            if let Some(re) = passages.iter().map(|p| p.2).reduce(f64::min) {
                if re < MIN_PARABOLISED_RE {
                    warnings.push(format!(
                        "Re = {re:.3} is below about {MIN_PARABOLISED_RE}: the parabolised \
                         entrance model neglects axial diffusion, which matters near the inlet \
                         at such low Re, so the entrance part of the pressure drop is less \
                         certain (Shah & London 1978, from memory)"
                    ));
                }
            }
        }
    }
    if let Some(k) = config.minor_loss {
        length.with_minor_loss(k, density, point.mean_velocity_m_s);
    }
    if let Some(p) = outcome.operating.as_mut() {
        p.length = Some(length);
    }
    outcome.warnings.extend(warnings);
    Ok(())
}

/// Below this Reynolds number axial diffusion near the inlet matters and the parabolised
/// entrance march loses accuracy (Shah & London 1978, from memory: their entrance solutions
/// for Re above about 50 neglect it).
pub const MIN_PARABOLISED_RE: f64 = 50.0;

/// Nu_T standing for the step bound of the developing-flow march when heat transfer was not
/// solved (the round tube's 3.66, common practice, no source: the bound only sets the step).
const HYDRO_DEFAULT_NU_T: f64 = 3.66;

/// Largest number of cells across the resolution check refines a default grid to.
pub const MAX_REFINED_CELLS: usize = 8192;

/// The grid a configuration asks for over a domain (the pixel grid of a mask in pixels mode).
fn grid_of(config: &SolveConfig, domain: &dyn Domain, cells: usize) -> Grid {
    let (lo, hi) = domain.bbox();
    match domain.lattice() {
        Some(l) => Grid::from_lattice(l),
        None => match config.placement {
            Some(p) => Grid::covering_placed(lo, hi, cells, p),
            None => Grid::covering_with_offset(lo, hi, cells, config.offset),
        },
    }
}

/// The resolution check of a run, before any solve ([`crate::resolution`]): every passage of
/// the grid that is not a sliver is at least [`crate::resolution::MIN_NODES_ACROSS`] nodes
/// across, and every wall between two fluid nodes at least [`MIN_WALL_CELLS`] cells thick.
/// When the default grid fails, the cells needed are estimated, and the grid is refined to them
/// if its memory stays within the limit (returns the cells and a warning saying why); when the
/// grid was given (`--cells`, a mask's pixel grid) or the refined one does not fit, the error
/// names the feature, its size or position, and the cells it needs.
fn check_resolution(config: &SolveConfig) -> Result<Option<(usize, String)>> {
    use crate::resolution::{measure, MIN_NODES_ACROSS, MIN_WALL_CELLS};
    let loaded = config.input.load()?;
    let domain = loaded.domain.as_ref();
    let given = config.cells;
    let mut cells = given.unwrap_or(DEFAULT_CELLS);
    check_cells(cells)?;
    let mut note: Option<String> = None;
    let mut first_feature: Option<(usize, String)> = None;
    for round in 0..6 {
        let grid = grid_of(config, domain, cells);
        if grid.len() as u64 * BYTES_PER_NODE > config.memory_limit {
            // run_once refuses it with the memory message.
            return Ok(None);
        }
        let classified = classify(domain, grid)?;
        let (label, count) = post::passage_labels(&classified);
        let res = measure(&classified, &label, count);
        // Needed refinement: passages to MIN_NODES_ACROSS + 1 nodes, walls to MIN_WALL_CELLS.
        let mut factor: f64 = 1.0;
        let mut feature = String::new();
        if let Some(p) = res.unresolved().min_by_key(|p| p.across) {
            factor = (MIN_NODES_ACROSS + 1) as f64 / p.across.max(1) as f64;
            feature = format!(
                "a passage near ({:.4e}, {:.4e}) m is {} grid node{} across (spacing {:.3e} m; \
                 at least {MIN_NODES_ACROSS} are needed)",
                p.position[0],
                p.position[1],
                p.across,
                if p.across == 1 { "" } else { "s" },
                res.h
            );
        }
        if let Some(w) = res.thinnest_wall {
            {
                let f = 1.25 * MIN_WALL_CELLS * res.h / w.thickness.max(1e-300);
                if f > factor {
                    factor = f;
                    feature = format!(
                        "a wall near ({:.4e}, {:.4e}) m is {:.3e} m thick, thinner than half the \
                         grid spacing {:.3e} m",
                        w.position[0], w.position[1], w.thickness, res.h
                    );
                }
            }
        }
        if factor <= 1.0 {
            if let (Some(_), Some((at, feature))) = (given, first_feature) {
                return Err(Error::param(
                    "--cells",
                    format!(
                        "{}: {feature}; the grid of {at} cells cannot resolve it: it needs \
                         about --cells {cells}",
                        config.input.origin()
                    ),
                ));
            }
            return Ok(note.map(|n| (cells, n)));
        }
        let needed = (cells as f64 * factor).ceil();
        let origin = config.input.origin();
        if domain.lattice().is_some() {
            return Err(Error::param(
                "SHAPE",
                format!(
                    "{origin}: {feature}: the image's pixel grid cannot resolve it; use an image \
                     about {factor:.0} times finer, or --mask-mode traced with more --cells"
                ),
            ));
        }
        let needed_bytes = grid.len() as f64 * factor * factor * BYTES_PER_NODE as f64;
        let fits = needed <= MAX_REFINED_CELLS as f64 && needed_bytes <= config.memory_limit as f64;
        if !fits || (given.is_some() && round == 5) {
            let how = if fits {
                String::new()
            } else {
                format!(
                    " (an estimated {:.3e} GiB, {})",
                    needed_bytes / (1u64 << 30) as f64,
                    if needed > MAX_REFINED_CELLS as f64 {
                        format!("beyond the {MAX_REFINED_CELLS} cells canalis refines to")
                    } else {
                        format!(
                            "above the --max-memory limit of {:.3} GiB",
                            config.memory_limit as f64 / (1u64 << 30) as f64
                        )
                    }
                )
            };
            let (at, feature) = first_feature.unwrap_or((cells, feature));
            return Err(Error::param(
                "--cells",
                format!(
                    "{origin}: {feature}; the grid of {at} cells cannot resolve it: it needs \
                     about --cells {needed:.0}{how}"
                ),
            ));
        }
        if first_feature.is_none() {
            first_feature = Some((cells, feature));
        }
        cells = needed as usize;
        if let (None, Some((_, first))) = (given, &first_feature) {
            note = Some(format!(
                "the default grid of {DEFAULT_CELLS} cells could not resolve the \
                 cross-section ({first}); refined to {cells} cells"
            ));
        }
    }
    Err(Error::param(
        "--cells",
        format!(
            "{}: the grid could not be refined enough to resolve the cross-section",
            config.input.origin()
        ),
    ))
}

/// The sliver passages ([`crate::resolution::PassageResolution::is_sliver`]), by label; with
/// `drop`, removed from the per-passage figures. Either way a warning gives their number and
/// flow share. Their flow stays in the totals; their own figures (a sliver cut off by a
/// tangent hole reported f·Re 12 000) mean nothing.
fn slivers(unit: &mut UnitSolution, drop: bool, warnings: &mut Vec<String>) -> Vec<u32> {
    let (label, count) = post::passage_labels(&unit.classified);
    if count < 2 {
        return Vec::new();
    }
    let res = crate::resolution::measure(&unit.classified, &label, count);
    let slivers = res.slivers();
    if slivers.is_empty() || slivers.len() == unit.passages.len() {
        return Vec::new();
    }
    let share: f64 = unit
        .passages
        .iter()
        .filter(|p| slivers.contains(&p.label))
        .map(|p| p.flow_share)
        .sum();
    if drop {
        unit.passages.retain(|p| !slivers.contains(&p.label));
    }
    warnings.push(format!(
        "{} sliver passage{} (fewer than {} grid nodes across and {} % of the fluid nodes; \
         together {:.2e} of the flow) {}: a gap or a passage this small is not resolved by \
         the grid (spacing {:.3e} m); their flow stays in the totals",
        slivers.len(),
        if slivers.len() == 1 { "" } else { "s" },
        crate::resolution::MIN_NODES_ACROSS,
        crate::resolution::SLIVER_SHARE * 100.0,
        share,
        if drop {
            "left out of `passages`"
        } else {
            "kept in `passages` (--min-feature drops specks), their own figures unreliable"
        },
        res.h
    ));
    slivers
}

/// Tolerance of the force-balance self-check (issue 20): a run whose discrete ∮τ ds misses
/// G·A by more gets a warning. Measured at the default 600 cells: 1e-5 or less on the exact
/// cases, 1.1e-5 on an L-shape, 1.2e-5 on a T, 5e-4 on a rectangle with one fin 0.1 mm thick,
/// 1.5e-3 on shapes/finned_tube.toml (9.7e-3 at 300 cells, which is warned about), with the
/// treated corners' singular part integrated exactly and an untreated corner's share from its
/// singular term (`post::figures`).
pub const FORCE_BALANCE_TOLERANCE: f64 = 2e-3;

/// Largest force-balance error of a result printed as a success.
pub const MAX_FORCE_BALANCE_ERROR: f64 = 0.25;

/// Refuses a result that breaks a physical bound, which no grid error explains: flow not
/// positive or a figure not finite; u_max/ū < 1; f·Re below 64πA/P² (Saint-Venant's
/// Q ≤ A²/(8π), true of every section; with 5 % for the discretisation); the force balance
/// off by more than [`MAX_FORCE_BALANCE_ERROR`]; the same per passage but the slivers. There
/// is no upper bound on f·Re in general: 24 (Pólya) holds for convex sections only, and a
/// dense array of pins in a duct exceeds 40.
fn check_physical_bounds(unit: &UnitSolution, slivers: &[u32]) -> Result<()> {
    let f = &unit.figures;
    let fail = |what: String| {
        Err(Error::Numerical(format!(
            "the result breaks a physical bound ({what}); the grid of spacing {:.3e} m does not \
             resolve the cross-section: raise --cells, or check the geometry for features \
             far smaller than the rest",
            unit.classified.grid.h
        )))
    };
    let fre_low = |area: f64, perimeter: f64| {
        0.95 * 64.0 * std::f64::consts::PI * area / (perimeter * perimeter)
    };
    for (name, v) in [
        ("area", f.area),
        ("perimeter", f.perimeter),
        ("flow", f.flow_integral),
        ("largest velocity", f.max_velocity),
        ("f·Re", f.fanning_f_re),
    ] {
        if !(v.is_finite() && v > 0.0) {
            return fail(format!("{name} = {v:e}, not a positive number"));
        }
    }
    if f.max_to_mean_velocity.is_nan() || f.max_to_mean_velocity < 1.0 {
        return fail(format!(
            "u_max/u_mean = {:.4} is below 1",
            f.max_to_mean_velocity
        ));
    }
    if f.fanning_f_re < fre_low(f.area, f.perimeter) {
        return fail(format!(
            "f·Re = {:.4} below {:.4}, the least any section of this area and perimeter has",
            f.fanning_f_re,
            fre_low(f.area, f.perimeter)
        ));
    }
    if f.force_balance_rel_error.is_finite() && f.force_balance_rel_error > MAX_FORCE_BALANCE_ERROR
    {
        return fail(format!(
            "the force balance is off by {:.1} %",
            100.0 * f.force_balance_rel_error
        ));
    }
    for (k, p) in unit.passages.iter().enumerate() {
        if slivers.contains(&p.label) {
            continue;
        }
        let ok = p.fanning_f_re.is_finite()
            && p.flow_integral > 0.0
            && p.fanning_f_re >= fre_low(p.area, p.perimeter);
        if !ok {
            return fail(format!(
                "passage {} has f·Re = {:.4e}, below {:.4}, the least a section of its area \
                 and perimeter has",
                k + 1,
                p.fanning_f_re,
                fre_low(p.area, p.perimeter)
            ));
        }
    }
    Ok(())
}

/// One grid: load the cross-section, lay the grid, solve, post-process, and evaluate the
/// operating point.
pub(crate) fn run_once(config: &SolveConfig, monitor: &dyn Monitor) -> Result<Outcome> {
    let start = Instant::now();
    monitor.stage("loading the cross-section");
    let loaded = config.input.load()?;
    let (name, domain, wall_kind) = (loaded.name, loaded.domain, loaded.wall_kind);
    let mut warnings = loaded.warnings;
    let (lo, hi) = domain.bbox();
    let grid = match domain.lattice() {
        Some(l) => {
            if config.cells.is_some() {
                warnings.push(
                    "--cells is ignored for a mask: the grid is the image's pixel grid".into(),
                );
            }
            Grid::from_lattice(l)
        }
        None => {
            // Checked again here: the grids of an uncertainty estimate get their own cells.
            let cells = config.cells.unwrap_or(DEFAULT_CELLS);
            check_cells(cells)?;
            match config.placement {
                Some(p) => Grid::covering_placed(lo, hi, cells, p),
                None => Grid::covering_with_offset(lo, hi, cells, config.offset),
            }
        }
    };
    let fixed_grid = domain.lattice().is_some();
    let bytes = grid.len() as u64 * BYTES_PER_NODE;
    if bytes > config.memory_limit {
        return Err(Error::param(
            "--cells",
            format!(
                "a {} × {} grid needs an estimated {:.1} GiB, above the limit of {:.1} GiB; \
                 use fewer cells or raise the limit with --max-memory",
                grid.nx,
                grid.ny,
                bytes as f64 / (1u64 << 30) as f64,
                config.memory_limit as f64 / (1u64 << 30) as f64
            ),
        ));
    }
    let mut unit = solve_unit_monitored(domain.as_ref(), grid, wall_kind, &config.unit, monitor)?;
    let fluid_nodes = unit.numbering.len();
    if fluid_nodes < MIN_FLUID_NODES {
        return Err(Error::param(
            "--cells",
            format!(
                "only {fluid_nodes} grid nodes fall in the fluid, too few to resolve the \
                 cross-section; raise --cells"
            ),
        ));
    }
    // A mask's specks are the user's to keep or drop (--min-feature): kept, with a warning.
    let is_mask = matches!(config.input, Input::Mask { .. });
    let slivers = slivers(&mut unit, !is_mask, &mut warnings);
    check_physical_bounds(&unit, &slivers)?;
    let passages = unit.passages.len();
    if passages > 1 && unit.heat.is_some() {
        warnings.push(format!(
            "the cross-section has {passages} separate passages: nusselt_t is the smallest \
             uniform-wall-temperature mode, which lives in one passage only, and nusselt_h1 mixes \
             the passages' bulk temperatures; treat both as indicative and rate each passage \
             on its own"
        ));
    }
    if unit.info.round_off_limited {
        warnings.push(format!(
            "the solver stopped at the round-off floor of double precision: relative residual \
             {:.1e} instead of {:.0e} (a grid this fine cannot be verified further)",
            unit.info.relative_residual, config.unit.cg.tolerance
        ));
    }
    if unit.figures.force_balance_rel_error > FORCE_BALANCE_TOLERANCE {
        warnings.push(format!(
            "the force-balance self-check misses by {:.2} % (mean wall shear · P against \
             G · A), more than its tolerance of {} %: the wall shear (and the figures) are less \
             accurate than the grid promises here; raise --cells",
            100.0 * unit.figures.force_balance_rel_error,
            100.0 * FORCE_BALANCE_TOLERANCE
        ));
    }
    let unresolved = unit.shear.iter().filter(|s| !s.tau.is_finite()).count();
    if unresolved > 0 {
        warnings.push(format!(
            "{unresolved} of {} wall samples have no fluid node near them (a passage or gap \
             narrower than the grid spacing {:.3e} m); raise --cells",
            unit.shear.len(),
            grid.h
        ));
    }
    let operating = match &config.operating {
        None => None,
        Some(spec) => Some(operating_point(
            &unit.figures,
            unit.heat.as_ref(),
            &unit.passages,
            &unit.walls,
            spec,
            &mut warnings,
        )?),
    };
    Ok(Outcome {
        name,
        unit,
        operating,
        warnings,
        seconds: start.elapsed().as_secs_f64(),
        uncertainty: None,
        fixed_grid,
        entrance: None,
        rating: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::builtin::parse_builtin;
    use crate::operating::{Drive, FluidSpec};

    fn flow_only(input: Input) -> SolveConfig {
        let mut c = SolveConfig::new(input);
        c.cells = Some(64);
        c.unit.heat = false;
        c.error_estimate = ErrorEstimate::Off;
        c
    }

    #[test]
    fn an_in_memory_shape_solves_as_its_spec_does() {
        // The same cross-section by two routes: the same grid, the same numbers, bit for bit.
        let spec = "annulus:do=20mm,di=10mm,offset=2mm";
        let shape = parse_builtin(spec).expect("a built-in shape");
        let a = run(&flow_only(Input::Shape(shape))).expect("solve");
        let b = run(&flow_only(Input::Builtin(spec.to_string()))).expect("solve");
        assert_eq!(a.unit.figures, b.unit.figures);
        assert_eq!(a.unit.u, b.unit.u);
    }

    #[test]
    fn an_invalid_in_memory_shape_is_a_geometry_error() {
        let flat = crate::geometry::Shape::new(
            vec![crate::geometry::Primitive::Polygon {
                points: vec![[0.0, 0.0], [1.0, 0.0], [2.0, 0.0]],
            }],
            vec![],
        );
        let e = run(&flow_only(Input::Shape(flat))).expect_err("zero area");
        assert!(matches!(e, Error::Geometry(_)), "{e}");
    }

    #[test]
    fn bad_values_are_refused_before_the_input_is_read() {
        // The shape file does not exist: an error naming the option, not the file, shows the
        // configuration was checked first.
        let mut c = flow_only(Input::ShapeFile("no/such/shape.toml".into()));
        c.operating = Some(OperatingSpec {
            drive: Drive::PressureGradient(-100.0),
            fluid: FluidSpec::Given {
                viscosity: 1e-3,
                density: 1000.0,
                conductivity: None,
                specific_heat: None,
            },
            length: None,
            roughness: 0.0,
        });
        match run(&c) {
            Err(Error::InvalidParameter { parameter, .. }) => assert_eq!(parameter, "--dpdx"),
            other => panic!("{other:?}"),
        }
        let mut c = flow_only(Input::ShapeFile("no/such/shape.toml".into()));
        c.cells = Some(3);
        match run(&c) {
            Err(Error::InvalidParameter { parameter, .. }) => assert_eq!(parameter, "--cells"),
            other => panic!("{other:?}"),
        }
        let mut c = flow_only(Input::ShapeFile("no/such/shape.toml".into()));
        c.error_estimate = ErrorEstimate::Accuracy(0.0);
        match run(&c) {
            Err(Error::InvalidParameter { parameter, .. }) => assert_eq!(parameter, "--accuracy"),
            other => panic!("{other:?}"),
        }
    }
}
