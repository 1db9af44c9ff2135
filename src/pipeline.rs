//! The stages in order: geometry → grid → operator → solver → post-processing.
//!
//! Owns: [`solve_unit`], which reads like the algorithm, and (in `config`) the validated
//! configuration of a `solve` run and its outcome. Does not parse arguments or print.

use crate::error::{Error, Result};
use crate::fluids::{self, FluidProperties};
use crate::geometry::builtin::parse_builtin;
use crate::geometry::mask::{Mask, MaskMode, MaskOptions};
use crate::geometry::shapefile::load_shape_file;
use crate::geometry::svg::load_svg;
use crate::geometry::trace::Traced;
use crate::geometry::{Domain, Walls};
use crate::grid::{classify, Classified, Grid};
use crate::multigrid::Multigrid;
use crate::operator::{assemble, unit_rhs, GridOperator, Numbering};
use crate::post::{self, Figures, ShearSample};
use crate::problem::Problem;
use crate::solver::{
    pcg_in, smallest_eigenpair, CgInfo, CgParams, CgWorkspace, EigenInfo, EigenParams, Identity,
    InnerCg, Jacobi, LinearOperator, Monitor, Preconditioner, Silent, SolveFn,
};
use crate::study::{self, Sample, Uncertainty};
use std::path::PathBuf;
use std::time::Instant;

/// Which preconditioner the conjugate gradient uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Method {
    /// Plain CG.
    Plain,
    /// Jacobi-preconditioned CG.
    Jacobi,
    /// CG preconditioned by a geometric multigrid V-cycle with Galerkin coarse levels.
    #[default]
    Multigrid,
}

impl Method {
    pub fn name(self) -> &'static str {
        match self {
            Method::Plain => "conjugate gradient",
            Method::Jacobi => "Jacobi-preconditioned conjugate gradient",
            Method::Multigrid => "multigrid-preconditioned conjugate gradient",
        }
    }
}

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

/// How to solve the unit problem.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UnitOptions {
    pub method: Method,
    pub cg: CgParams,
    /// Apply the deferred wall correction ([`post::add_wall_correction`]) on exact walls.
    pub wall_correction: bool,
    /// Also solve the two heat-transfer problems (Nu_H1, Nu_T).
    pub heat: bool,
}

impl Default for UnitOptions {
    fn default() -> Self {
        UnitOptions {
            method: Method::default(),
            cg: CgParams::default(),
            wall_correction: true,
            heat: true,
        }
    }
}

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

/// Solves −∇²ũ = 1 in the fluid of `domain`, ũ = 0 on its walls, on `grid`, and evaluates the
/// figures of merit. `exact_wall` says the domain's walls are the true curves (not a mask's
/// traced contour), so the wall points themselves may serve as data in the shear fit.
pub fn solve_unit(
    domain: &dyn Domain,
    grid: Grid,
    exact_wall: bool,
    options: &UnitOptions,
) -> Result<UnitSolution> {
    solve_unit_monitored(domain, grid, exact_wall, options, &Silent)
}

/// [`solve_unit`] reporting the solver's iterations to `monitor` (progress display).
pub fn solve_unit_monitored(
    domain: &dyn Domain,
    grid: Grid,
    exact_wall: bool,
    options: &UnitOptions,
    monitor: &dyn Monitor,
) -> Result<UnitSolution> {
    // On a worker of rayon's pool: a parallel loop started from a worker needs no hand-over
    // between threads, and a solve starts dozens per CG iteration (a V-cycle at a million
    // unknowns on one thread: 37 ms from a worker, 46–50 ms from a caller's own thread).
    if rayon::current_thread_index().is_some() {
        solve_unit_on_worker(domain, grid, exact_wall, options, monitor)
    } else {
        rayon::scope(|_| solve_unit_on_worker(domain, grid, exact_wall, options, monitor))
    }
}

fn solve_unit_on_worker(
    domain: &dyn Domain,
    grid: Grid,
    exact_wall: bool,
    options: &UnitOptions,
    monitor: &dyn Monitor,
) -> Result<UnitSolution> {
    let (method, params) = (options.method, &options.cg);
    let t0 = Instant::now();
    let classified = classify(domain, grid)?;
    let t1 = Instant::now();
    let numbering = Numbering::new(&classified);
    let mut b = unit_rhs(&classified, &numbering);
    // Assembly and setup per method; `solve(b, x)` then solves A·x = b in unknown order,
    // starting from x.
    let csr;
    let multigrid;
    let pre: Box<dyn Preconditioner + '_>;
    let op: &dyn LinearOperator;
    let on_grid = method == Method::Multigrid;
    let t2;
    match method {
        Method::Plain | Method::Jacobi => {
            csr = assemble(&Problem::laplace(&classified), &numbering);
            t2 = Instant::now();
            op = &csr;
            pre = if method == Method::Plain {
                Box::new(Identity)
            } else {
                Box::new(Jacobi::new(op))
            };
        }
        Method::Multigrid => {
            let grid_op = GridOperator::new(&Problem::laplace(&classified), &numbering);
            t2 = Instant::now();
            multigrid = Multigrid::new(grid_op)?;
            op = multigrid.operator();
            pre = Box::new(&multigrid);
        }
    }
    let t_setup = Instant::now();
    // The multigrid path works on whole-grid vectors (zero at solid nodes).
    let (mut gb, mut gx) = if on_grid {
        (
            vec![0.0; classified.grid.len()],
            vec![0.0; classified.grid.len()],
        )
    } else {
        (Vec::new(), Vec::new())
    };
    // One set of CG work vectors for every solve of this unit problem.
    let mut work = CgWorkspace::default();
    let mut solve = |rhs: &[f64], x: &mut [f64], params: &CgParams| -> Result<CgInfo> {
        if on_grid {
            for (q, k) in numbering.nodes().enumerate() {
                gb[k] = rhs[q];
                gx[k] = x[q];
            }
            let info = pcg_in(
                &mut work,
                op,
                pre.as_ref(),
                &gb,
                &mut gx,
                params,
                method.name(),
                monitor,
            )?;
            for (q, k) in numbering.nodes().enumerate() {
                x[q] = gx[k];
            }
            Ok(info)
        } else {
            pcg_in(
                &mut work,
                op,
                pre.as_ref(),
                rhs,
                x,
                params,
                method.name(),
                monitor,
            )
        }
    };
    let mut u = vec![0.0; numbering.len()];
    let correct = options.wall_correction && exact_wall;
    // When the correction follows, the first solve only feeds the local fits of the wall
    // correction, whose second derivatives it needs to a few digits: the error left by
    // multigrid-preconditioned CG is smooth, so a relative residual of 1e-6 changes the
    // correction by about a millionth of itself, far below what matters (measured: f·Re of the
    // exact cases unchanged to 1e-12 at 400 cells). The final solve goes to the full tolerance.
    let first = if correct {
        CgParams {
            tolerance: params.tolerance.max(FIRST_PASS_TOLERANCE),
            ..*params
        }
    } else {
        *params
    };
    let mut info = solve(&b, &mut u, &first)?;
    let mut passes = vec![info];
    // Deferred correction of the wall truncation error (post::add_wall_correction): the matrix is
    // kept, the right-hand side gains the curvature term of each cut link, and the solve
    // restarts from the first solution.
    // Only for exact walls: a mask's staircase has a re-entrant corner at every step, where the
    // smooth local fit behind the correction does not hold.
    if correct {
        // b + correction, formed in b's own vector (one vector fewer to fault in).
        post::add_wall_correction(&Problem::laplace(&classified), &numbering, &u, &mut b);
        let more = solve(&b, &mut u, params)?;
        passes.push(more);
        info = CgInfo {
            iterations: info.iterations + more.iterations,
            relative_residual: more.relative_residual,
            round_off_limited: info.round_off_limited || more.round_off_limited,
        };
    }
    let t3 = Instant::now();
    let walls = domain.walls(0.5 * grid.h);
    let shear = post::wall_shear(&classified, &numbering, &u, &walls, exact_wall);
    let figures = post::figures(&classified, &numbering, &u, &walls, &shear);
    let passages = post::passages(&classified, &numbering, &u, &walls);
    let t4 = Instant::now();
    let heat = if options.heat {
        Some(heat_transfer(
            &classified,
            &numbering,
            &u,
            &figures,
            &mut solve,
            (op, pre.as_ref(), on_grid),
            method.name(),
        )?)
    } else {
        None
    };
    let t5 = Instant::now();
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
            assembly: (t2 - t1).as_secs_f64(),
            setup: (t_setup - t2).as_secs_f64(),
            solve: (t3 - t_setup).as_secs_f64(),
            post: (t4 - t3).as_secs_f64(),
            heat: (t5 - t4).as_secs_f64(),
        },
    })
}

/// Nusselt numbers of fully developed laminar heat transfer.
#[derive(Debug, Clone, PartialEq)]
pub struct HeatFigures {
    /// ψ = −φ of the H1 problem at every unknown (m²), and its bulk value ψ_b.
    pub psi: Vec<f64>,
    pub psi_bulk: f64,
    /// Nu_H1: axially uniform heat flux, peripherally uniform wall temperature.
    pub nusselt_h1: f64,
    /// Nu_T: uniform wall temperature.
    pub nusselt_t: f64,
    /// The LOBPCG solve for Nu_T: steps, preconditioner applications, residuals.
    pub eigen: EigenInfo,
    /// CG iterations of the Nu_H1 solve.
    pub h1_iterations: usize,
}

/// Relative residual of the Nu_H1 solve (see [`heat_transfer`]).
const H1_TOLERANCE: f64 = 1e-8;

/// The flow problem's operator and preconditioner as `solve_unit` built them, and whether they
/// act on whole-grid vectors (the multigrid path) rather than on unknowns.
type FlowOperators<'a> = (&'a dyn LinearOperator, &'a dyn Preconditioner, bool);

/// The two heat-transfer problems on the flow problem's operator, with w = ũ/ū:
/// - H1: −∇²ψ = w, ψ = 0 on the walls (ψ = −φ of ∇²φ = w); φ_b the w-weighted mean of ψ by the
///   same cut-cell quadrature as the flow integral; Nu_H1 = D_h²/(4·ψ_b) (Shah & London 1978,
///   ch. 2, from memory; circle 48/11).
/// - T: the smallest λ of −∇²f = λ·w·f, f = 0 on the walls (the Graetz problem for uniform wall
///   temperature); Nu_T = λ·D_h²/4 (circle 3.6568). Discretised row by row like the flow
///   problem: A·f = λ·h²·diag(w)·f, solved by LOBPCG preconditioned by the flow problem's
///   multigrid V-cycle ([`smallest_eigenpair`]; on the checking paths by an inner CG of the
///   chosen method to a relative residual of 1e-2).
fn heat_transfer(
    c: &Classified,
    num: &Numbering,
    u: &[f64],
    f: &Figures,
    solve: &mut SolveFn<'_>,
    (op, pre, on_grid): FlowOperators<'_>,
    method: &str,
) -> Result<HeatFigures> {
    let h2 = c.grid.h * c.grid.h;
    let mean = f.flow_integral / f.area;
    let w: Vec<f64> = u.iter().map(|v| (v / mean).max(0.0)).collect();
    let rhs: Vec<f64> = w.iter().map(|x| h2 * x).collect();
    // The operator on unknown vectors, and the eigen-solver's preconditioner.
    let on_unknowns;
    let inner;
    let (eop, epre): (&dyn LinearOperator, &dyn Preconditioner) = if on_grid {
        on_unknowns = OnUnknowns::new(op, pre, num, c.grid.len());
        (&on_unknowns, &on_unknowns)
    } else {
        inner = InnerCg::new(
            op,
            pre,
            CgParams {
                tolerance: 1e-2,
                ..CgParams::default()
            },
        );
        (op, &inner)
    };
    // From zero, CG's iterate satisfies ψ_kᵀ·b = ψ_kᵀ·A·ψ_k (Galerkin), so bᵀψ, and with it
    // the bulk value (the same quadrature as b away from the walls), is off by ‖ψ − ψ_k‖²_A:
    // quadratic in the residual. Measured on the shipped shapes at 600 cells: Nu_H1 from a
    // relative residual of 1e-8 (8 iterations) and of 1e-6 agree with a 1e-13 solve to 5e-14.
    let mut psi = vec![0.0; u.len()];
    let h1 = CgParams {
        tolerance: H1_TOLERANCE,
        ..CgParams::default()
    };
    let info = solve(&rhs, &mut psi, &h1)?;
    let dh = f.hydraulic_diameter;
    let nusselt_h1 = post::nusselt_h1(c, num, &w, &psi, dh);
    let psi_bulk = dh * dh / (4.0 * nusselt_h1);
    // Start from ψ = A⁻¹·W·1, one inverse-iteration step of the pencil from the constant
    // (measured: its relative eigen-residual is 0.13–0.27 on the shipped shapes).
    let mut mode = psi.clone();
    let eigen = smallest_eigenpair(
        eop,
        epre,
        &rhs,
        &mut mode,
        &[],
        &EigenParams::default(),
        &format!("{method} for Nu_T"),
    )?;
    Ok(HeatFigures {
        psi,
        psi_bulk,
        nusselt_h1,
        nusselt_t: eigen.eigenvalue * dh * dh / 4.0,
        eigen,
        h1_iterations: info.iterations,
    })
}

/// A whole-grid operator and preconditioner (the multigrid path's, zero at solid nodes) seen
/// on vectors of unknowns: scatter to the grid, apply, gather back. The eigen-solver's vector
/// work then runs on the unknowns only, a third to a half of the grid nodes.
struct OnUnknowns<'a> {
    op: &'a dyn LinearOperator,
    pre: &'a dyn Preconditioner,
    num: &'a Numbering,
    /// Grid vectors in and out; entries at solid nodes stay zero.
    scratch: std::cell::RefCell<(Vec<f64>, Vec<f64>)>,
}

impl<'a> OnUnknowns<'a> {
    fn new(
        op: &'a dyn LinearOperator,
        pre: &'a dyn Preconditioner,
        num: &'a Numbering,
        grid_len: usize,
    ) -> Self {
        OnUnknowns {
            op,
            pre,
            num,
            scratch: std::cell::RefCell::new((vec![0.0; grid_len], vec![0.0; grid_len])),
        }
    }

    fn through(&self, x: &[f64], y: &mut [f64], f: impl Fn(&[f64], &mut [f64])) {
        let mut s = self.scratch.borrow_mut();
        let (gx, gy) = &mut *s;
        for (q, k) in self.num.nodes().enumerate() {
            gx[k] = x[q];
        }
        f(gx, gy);
        for (q, k) in self.num.nodes().enumerate() {
            y[q] = gy[k];
        }
    }
}

impl LinearOperator for OnUnknowns<'_> {
    fn dim(&self) -> usize {
        self.num.len()
    }

    fn apply(&self, x: &[f64], y: &mut [f64]) {
        self.through(x, y, |gx, gy| self.op.apply(gx, gy));
    }

    fn diagonal(&self) -> Vec<f64> {
        let d = self.op.diagonal();
        self.num.nodes().map(|k| d[k]).collect()
    }

    fn abs_product_norm(&self, x: &[f64]) -> f64 {
        let mut s = self.scratch.borrow_mut();
        let gx = &mut s.0;
        for (q, k) in self.num.nodes().enumerate() {
            gx[k] = x[q];
        }
        self.op.abs_product_norm(gx)
    }
}

impl Preconditioner for OnUnknowns<'_> {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        self.through(r, z, |gr, gz| self.pre.apply(gr, gz));
    }
}

// ---------------------------------------------------------------------------------------------
// A whole `solve` run: validated configuration in, outcome out.

/// Where the cross-section comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum Input {
    /// A TOML shape file.
    ShapeFile(PathBuf),
    /// A built-in parametric shape, `name:key=value,...`.
    Builtin(String),
    /// A mask image.
    Mask { path: PathBuf, options: MaskOptions },
    /// An SVG drawing; `scale` is metres per user unit (overrides the document's size).
    Svg { path: PathBuf, scale: Option<f64> },
}

/// Reads a mask image and builds the domain its options ask for: [`mask_domain`] after
/// [`Mask::load`] and [`Mask::drop_specks`]. Returns the domain, whether its walls may serve as
/// exact walls (see [`solve_unit`]) and the warnings.
pub fn load_mask_domain(
    path: &std::path::Path,
    options: &MaskOptions,
) -> Result<(Box<dyn Domain>, bool, Vec<String>)> {
    let (mut mask, mut warnings) = Mask::load(path, options)?;
    let origin = path.display().to_string();
    let min_pixels = options.min_feature.pixels(mask.pixel());
    warnings.extend(mask.drop_specks(min_pixels, &origin)?);
    let (domain, exact_wall, w) = mask_domain(mask, options.mode);
    warnings.extend(w);
    Ok((domain, exact_wall, warnings))
}

/// The domain of a mask in the given mode, whether its walls count as exact, and a note on
/// what the walls are.
///
/// Traced walls are exact walls to the solver: the wall correction and the wall-shear fit with
/// the wall points as data (both assume a smooth wall through the cut points, which a traced
/// polyline is to within its sub-pixel vertices) measured better on traced circles and
/// ellipses than without them (tests/mask.rs). The staircase of `pixels` mode is not: it has a
/// re-entrant corner at every step.
pub fn mask_domain(mask: Mask, mode: MaskMode) -> (Box<dyn Domain>, bool, Vec<String>) {
    match mode {
        MaskMode::Pixels => (
            Box::new(mask),
            false,
            vec![
                "mask input: the walls are the pixel faces (a staircase); the perimeter is a \
                 sub-pixel contour estimate and the local wall shear is approximate"
                    .to_string(),
            ],
        ),
        MaskMode::Traced => {
            let traced = Traced::from_mask(&mask);
            let st = traced.stats();
            let mut notes = Vec::new();
            if st.vertices > 0 && 2 * st.binary_vertices > st.vertices {
                notes.push(format!(
                    "mask input: the image is binary along {:.0} % of the traced walls (no grey \
                     levels there), so those walls were smoothed; features only a few pixels \
                     across are not resolved (--mask-mode pixels gives the staircase)",
                    100.0 * st.binary_vertices as f64 / st.vertices as f64
                ));
            }
            (Box::new(traced), TRACED_EXACT_WALL, notes)
        }
    }
}

/// Whether traced mask walls are treated as exact walls (measured; see [`mask_domain`]).
const TRACED_EXACT_WALL: bool = true;

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
const BYTES_PER_NODE: u64 = 260;
/// Fewest fluid nodes a solve accepts: below this no figure would be trustworthy.
const MIN_FLUID_NODES: usize = 50;

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
}

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
}

/// Laminar limit used for the warning (the usual transition near Re ≈ 2300 in round pipes,
/// common practice, no source; warned from 2000 to leave a margin).
pub const LAMINAR_WARNING_RE: f64 = 2000.0;

/// Runs a whole `solve`: load the cross-section, lay the grid, solve, post-process, and
/// evaluate the operating point.
pub fn run(config: &SolveConfig) -> Result<Outcome> {
    run_monitored(config, &Silent)
}

/// [`run`] reporting the solver's iterations to `monitor`.
pub fn run_monitored(config: &SolveConfig, monitor: &dyn Monitor) -> Result<Outcome> {
    let start = Instant::now();
    let mut outcome = match (&config.input, config.error_estimate) {
        (_, ErrorEstimate::Off) => run_once(config, monitor)?,
        (Input::Mask { path, options }, ErrorEstimate::Cheap) => run_image_study(
            config,
            path,
            options,
            &study::IMAGE_CHEAP_FACTORS,
            None,
            monitor,
        )?,
        (Input::Mask { path, options }, ErrorEstimate::Accuracy(tol)) => run_image_study(
            config,
            path,
            options,
            &study::IMAGE_STUDY_FACTORS,
            Some(tol),
            monitor,
        )?,

        (_, ErrorEstimate::Cheap) => {
            let fine = run_once(config, monitor)?;
            with_cheap_estimate(config, fine, monitor)
        }
        (_, ErrorEstimate::Accuracy(tol)) => run_study(config, tol, monitor)?,
    };
    outcome.seconds = start.elapsed().as_secs_f64();
    Ok(outcome)
}

/// One grid: load the cross-section, lay the grid, solve, post-process, and evaluate the
/// operating point.
fn run_once(config: &SolveConfig, monitor: &dyn Monitor) -> Result<Outcome> {
    let start = Instant::now();
    let mut warnings = Vec::new();
    let (name, domain, exact_wall): (String, Box<dyn Domain>, bool) = match &config.input {
        Input::ShapeFile(path) => {
            let shape = load_shape_file(path)?;
            let name = shape
                .name
                .clone()
                .unwrap_or_else(|| path.display().to_string());
            (name, Box::new(shape), true)
        }
        Input::Svg { path, scale } => {
            let (shape, w) = load_svg(path, *scale)?;
            warnings.extend(w);
            let name = shape
                .name
                .clone()
                .unwrap_or_else(|| path.display().to_string());
            (name, Box::new(shape), true)
        }
        Input::Builtin(spec) => {
            let shape = parse_builtin(spec)?;
            let name = shape.name.clone().unwrap_or_else(|| spec.clone());
            (name, Box::new(shape), true)
        }
        Input::Mask { path, options } => {
            let (domain, exact_wall, w) = load_mask_domain(path, options)?;
            warnings.extend(w);
            (path.display().to_string(), domain, exact_wall)
        }
    };
    let origin = match &config.input {
        Input::ShapeFile(p) | Input::Mask { path: p, .. } | Input::Svg { path: p, .. } => {
            p.display().to_string()
        }
        Input::Builtin(spec) => spec.clone(),
    };
    // A cross-section whose holes cover all its regions has no wetted wall and no area.
    let (lo, hi) = domain.bbox();
    let extent = (hi[0] - lo[0]).max(hi[1] - lo[1]);
    if domain.lattice().is_none() && domain.walls(extent / 64.0).area <= 1e-12 * extent * extent {
        return Err(Error::geometry(format!(
            "{origin}: no fluid is left: the holes cover every region"
        )));
    }
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
            let cells = config.cells.unwrap_or(DEFAULT_CELLS);
            if cells < 8 {
                return Err(Error::param(
                    "--cells",
                    format!(
                        "{cells} is too small; use at least 8 (the default is {DEFAULT_CELLS})"
                    ),
                ));
            }
            if !(config.offset[0].is_finite() && config.offset[1].is_finite()) {
                return Err(Error::param(
                    "offset",
                    "the grid offset must be a finite fraction of a cell",
                ));
            }
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
    let unit = solve_unit_monitored(domain.as_ref(), grid, exact_wall, &config.unit, monitor)?;
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
    })
}

/// Scales the unit solution to an operating point: u = (G/μ)·ũ, Q = (G/μ)·I, τ = G·τ̃.
pub fn operating_point(
    f: &Figures,
    heat: Option<&HeatFigures>,
    spec: &OperatingSpec,
    warnings: &mut Vec<String>,
) -> Result<OperatingResult> {
    let fluid = match &spec.fluid {
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
            FluidProperties {
                name: "user-defined fluid".into(),
                viscosity_pa_s: *viscosity,
                density_kg_m3: *density,
                temperature_k: None,
                conductivity_w_mk: *conductivity,
                specific_heat_j_kgk: *specific_heat,
                source: "given on the command line".into(),
            }
        }
        FluidSpec::Named {
            name,
            temperature_k,
        } => {
            let (props, w) = fluids::by_name(name, *temperature_k)?;
            warnings.extend(w);
            props
        }
    };
    let mu = fluid.viscosity_pa_s;
    let (g, q) = match spec.drive {
        Drive::PressureGradient(g) => {
            if !(g.is_finite() && g > 0.0) {
                return Err(Error::param(
                    "--dpdx",
                    "must be a positive number (Pa/m, pressure falling along the flow)",
                ));
            }
            (g, g * f.flow_integral / mu)
        }
        Drive::FlowRate(q) => {
            if !(q.is_finite() && q > 0.0) {
                return Err(Error::param("--flow", "must be a positive flow rate"));
            }
            (q * mu / f.flow_integral, q)
        }
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
            if !(l.is_finite() && l > 0.0) {
                return Err(Error::param("--length", "must be a positive length"));
            }
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

// ---------------------------------------------------------------------------------------------
// Numerical uncertainty: the grids around the run (crate::study holds the mathematics).

/// Coarsest grid of an `--accuracy` study unless `--cells` says otherwise.
pub const STUDY_FIRST_CELLS: usize = 64;
/// Finest grid an `--accuracy` study may use (cells across; the bench harness goes this far).
pub const STUDY_MAX_CELLS: usize = 4096;

/// One grid's figures for a study: report key, value, targeted.
type Values = Vec<(&'static str, f64, bool)>;

/// The figures whose uncertainty is estimated: report key, value, and whether an `--accuracy`
/// study refines until it meets the target (f·Re and the Nusselt numbers).
fn study_quantities(o: &Outcome) -> Values {
    unit_quantities(&o.unit)
}

/// [`study_quantities`] of one unit solution.
fn unit_quantities(unit: &UnitSolution) -> Values {
    let f = &unit.figures;
    let mut q = vec![
        ("fanning_f_re", f.fanning_f_re, true),
        ("max_to_mean_velocity", f.max_to_mean_velocity, false),
        ("wall_shear_max_to_mean", f.wall_shear_max_to_mean, false),
        ("wall_shear_min_to_mean", f.wall_shear_min_to_mean, false),
    ];
    if let Some(h) = &unit.heat {
        q.push(("nusselt_h1", h.nusselt_h1, true));
        q.push(("nusselt_t", h.nusselt_t, true));
    }
    q
}

/// The per-quantity estimates of a sequence of runs, coarse to fine.
fn estimates(runs: &[(f64, Values)]) -> Vec<study::Quantity> {
    estimates_with(runs, study::estimate)
}

/// [`estimates`] with the estimator `estimate` (e.g. [`study::image_estimate`]).
fn estimates_with(
    runs: &[(f64, Values)],
    estimate: fn(&[Sample]) -> Option<study::Estimate>,
) -> Vec<study::Quantity> {
    let Some((_, finest)) = runs.last() else {
        return Vec::new();
    };
    finest
        .iter()
        .enumerate()
        .map(|(i, &(key, fine, targeted))| {
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
                estimate: estimate(&samples),
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
            .map(|(key, fine, targeted)| study::Quantity {
                key,
                fine,
                estimate: None,
                targeted,
            })
            .collect(),
        images: Vec::new(),
        image_size: [0, 0],
    }
}

/// Why a mask's pixel grid gives no estimate.
const FIXED_GRID_NOTE: &str = "the grid is the mask's pixel grid (staircase walls on the pixel \
faces), which cannot be refined or coarsened without changing the geometry itself";

/// The cheap estimate: one coarser grid (cells / [`study::CHEAP_RATIO`], at another offset), the
/// formal order assumed and safety factor 3. A coarse solve that fails leaves the fine result
/// as it is, with the estimate marked not available and a warning.
fn with_cheap_estimate(config: &SolveConfig, mut fine: Outcome, monitor: &dyn Monitor) -> Outcome {
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
            let runs = [
                (c.unit.classified.grid.h, study_quantities(&c)),
                (fine.unit.classified.grid.h, study_quantities(&fine)),
            ];
            fine.uncertainty = Some(Uncertainty {
                kind: study::Kind::Cheap,
                grids: vec![coarse_cells, cells],
                placement: format!(
                    "the coarser grid is shifted by ({:.3}, {:.3}) of a cell against the fine one",
                    study::CHEAP_OFFSET[0],
                    study::CHEAP_OFFSET[1]
                ),
                quantities: estimates(&runs),
                images: Vec::new(),
                image_size: [0, 0],
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

/// An `--accuracy` study: grids of [`study::study_cells`] cells (ratio 1.5), all at the placement
/// [`study::STUDY_PLACEMENT`] (similar grids), coarse to fine, until the GCI of every targeted quantity (f·Re, and
/// the Nusselt numbers when computed) is below `tol` on the finest three, or the next grid would
/// exceed the memory limit or [`STUDY_MAX_CELLS`] (a warning says which). The outcome is the
/// finest grid's, with the uncertainty of the study.
fn run_study(config: &SolveConfig, tol: f64, monitor: &dyn Monitor) -> Result<Outcome> {
    if !(tol.is_finite() && tol > 0.0 && tol < 1.0) {
        return Err(Error::param(
            "--accuracy",
            format!("{tol} is not a relative accuracy; give a fraction between 0 and 1, e.g. 1e-4"),
        ));
    }
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
            o.warnings
                .push("only two grids: the formal order 2 is assumed, with safety factor 3".into());
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

/// Reads a mask as a solve does: [`Mask::load`], then [`Mask::drop_specks`].
fn load_mask(path: &std::path::Path, options: &MaskOptions) -> Result<Mask> {
    let (mut mask, _) = Mask::load(path, options)?;
    let min_pixels = options.min_feature.pixels(mask.pixel());
    mask.drop_specks(min_pixels, &path.display().to_string())?;
    Ok(mask)
}

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
    let (domain, exact_wall, _) = mask_domain(coarse, mode);
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
    let unit = solve_unit_monitored(domain.as_ref(), grid, exact_wall, &config.unit, monitor)?;
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
fn run_image_study(
    config: &SolveConfig,
    path: &std::path::Path,
    options: &MaskOptions,
    factors: &[usize],
    target: Option<f64>,
    monitor: &dyn Monitor,
) -> Result<Outcome> {
    if let Some(tol) = target {
        if !(tol.is_finite() && tol > 0.0 && tol < 1.0) {
            return Err(Error::param(
                "--accuracy",
                format!(
                    "{tol} is not a relative accuracy; give a fraction between 0 and 1, e.g. 1e-4"
                ),
            ));
        }
    }
    let mut fine_config = config.clone();
    fine_config.error_estimate = ErrorEstimate::Off;
    if target.is_some() {
        fine_config.placement = Some(study::STUDY_PLACEMENT);
    }
    let mut o = run_once(&fine_config, monitor)?;
    let mask = load_mask(path, options)?;
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
    let quantities = estimates_with(&runs, study::image_estimate);
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
