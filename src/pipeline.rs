//! The stages in order: geometry → grid → operator → solver → post-processing.
//!
//! Owns: [`solve_unit`], which reads like the algorithm, and (in `config`) the validated
//! configuration of a `solve` run and its outcome. Does not parse arguments or print.

use crate::error::{Error, Result};
use crate::fluids::{self, FluidProperties};
use crate::geometry::builtin::parse_builtin;
use crate::geometry::mask::{Mask, MaskOptions};
use crate::geometry::shapefile::load_shape_file;
use crate::geometry::svg::load_svg;
use crate::geometry::{Domain, Walls};
use crate::grid::{classify, Classified, Grid};
use crate::multigrid::Multigrid;
use crate::operator::{assemble, unit_rhs, GridOperator, Numbering};
use crate::post::{self, Figures, ShearSample};
use crate::solver::{
    pcg_monitored, smallest_eigenpair, CgInfo, CgParams, EigenInfo, EigenParams, Identity, Jacobi,
    LinearOperator, Monitor, Preconditioner, Silent, SolveFn,
};
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
const FIRST_PASS_TOLERANCE: f64 = 1e-6;

/// How to solve the unit problem.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UnitOptions {
    pub method: Method,
    pub cg: CgParams,
    /// Apply the deferred wall correction ([`post::wall_correction`]) on exact walls.
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
    let (method, params) = (options.method, &options.cg);
    let t0 = Instant::now();
    let classified = classify(domain, grid)?;
    let t1 = Instant::now();
    let numbering = Numbering::new(&classified);
    let b = unit_rhs(&classified, &numbering);
    // Assembly and setup per method; `solve(b, x)` then solves A·x = b in unknown order,
    // starting from x.
    let csr;
    let grid_op;
    let pre: Box<dyn Preconditioner + '_>;
    let op: &dyn LinearOperator;
    let on_grid = method == Method::Multigrid;
    let t2;
    match method {
        Method::Plain | Method::Jacobi => {
            csr = assemble(&classified, &numbering);
            t2 = Instant::now();
            op = &csr;
            pre = if method == Method::Plain {
                Box::new(Identity)
            } else {
                Box::new(Jacobi::new(op))
            };
        }
        Method::Multigrid => {
            grid_op = GridOperator::new(&classified);
            t2 = Instant::now();
            op = &grid_op;
            pre = Box::new(Multigrid::new(&grid_op));
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
    let mut solve = |rhs: &[f64], x: &mut [f64], params: &CgParams| -> Result<CgInfo> {
        if on_grid {
            for (q, &k) in numbering.node_of.iter().enumerate() {
                gb[k] = rhs[q];
                gx[k] = x[q];
            }
            let info = pcg_monitored(
                op,
                pre.as_ref(),
                &gb,
                &mut gx,
                params,
                method.name(),
                monitor,
            )?;
            for (q, &k) in numbering.node_of.iter().enumerate() {
                x[q] = gx[k];
            }
            Ok(info)
        } else {
            pcg_monitored(op, pre.as_ref(), rhs, x, params, method.name(), monitor)
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
    // Deferred correction of the wall truncation error (post::wall_correction): the matrix is
    // kept, the right-hand side gains the curvature term of each cut link, and the solve
    // restarts from the first solution.
    // Only for exact walls: a mask's staircase has a re-entrant corner at every step, where the
    // smooth local fit behind the correction does not hold.
    if correct {
        let corr = post::wall_correction(&classified, &numbering, &u);
        let b2: Vec<f64> = b.iter().zip(&corr).map(|(x, y)| x + y).collect();
        let more = solve(&b2, &mut u, params)?;
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
    /// Inverse iterations and their CG iterations for Nu_T.
    pub eigen: EigenInfo,
    /// CG iterations of the Nu_H1 solve.
    pub h1_iterations: usize,
}

/// The two heat-transfer problems on the flow problem's operator, with w = ũ/ū:
/// - H1: −∇²ψ = w, ψ = 0 on the walls (ψ = −φ of ∇²φ = w); φ_b the w-weighted mean of ψ by the
///   same cut-cell quadrature as the flow integral; Nu_H1 = D_h²/(4·ψ_b) (Shah & London 1978,
///   ch. 2, from memory; circle 48/11).
/// - T: the smallest λ of −∇²f = λ·w·f, f = 0 on the walls (the Graetz problem for uniform wall
///   temperature); Nu_T = λ·D_h²/4 (circle 3.6568). Discretised row by row like the flow
///   problem: A·f = λ·h²·diag(w)·f.
fn heat_transfer(
    c: &Classified,
    num: &Numbering,
    u: &[f64],
    f: &Figures,
    solve: &mut SolveFn<'_>,
    method: &str,
) -> Result<HeatFigures> {
    let h2 = c.grid.h * c.grid.h;
    let mean = f.flow_integral / f.area;
    let w: Vec<f64> = u.iter().map(|v| (v / mean).max(0.0)).collect();
    let rhs: Vec<f64> = w.iter().map(|x| h2 * x).collect();
    // ψ ≈ ũ·(something) is a fair start; zero is safe.
    let mut psi = vec![0.0; u.len()];
    let info = solve(&rhs, &mut psi, &CgParams::default())?;
    let dh = f.hydraulic_diameter;
    let nusselt_h1 = post::nusselt_h1(c, num, &w, &psi, dh);
    let psi_bulk = dh * dh / (4.0 * nusselt_h1);
    // Start from ψ, one inverse-iteration step further towards the Graetz mode than ũ.
    let mut mode = psi.clone();
    let eigen = smallest_eigenpair(
        &rhs,
        &mut mode,
        solve,
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
/// every shipped example solves in well under half a second with the multigrid solver
/// (measured 0.10–0.32 s at 600 cells against 0.20–0.56 s at 800; BENCHMARKS.md).
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
}

impl SolveConfig {
    pub fn new(input: Input) -> SolveConfig {
        SolveConfig {
            input,
            cells: None,
            unit: UnitOptions::default(),
            operating: None,
            memory_limit: DEFAULT_MEMORY_LIMIT,
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
    pub seconds: f64,
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
            let (mask, w) = Mask::load(path, options)?;
            warnings.extend(w);
            warnings.push(
                "mask input: the walls are the pixel faces (a staircase); the perimeter is a \
                 sub-pixel contour estimate and the local wall shear is approximate"
                    .to_string(),
            );
            (path.display().to_string(), Box::new(mask), false)
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
            Grid::covering(lo, hi, cells)
        }
    };
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
