//! The stages in order: geometry → grid → operator → solver → post-processing.
//!
//! Owns: [`solve_unit`], which reads like the algorithm, and (in `config`) the validated
//! configuration of a `solve` run and its outcome. Does not parse arguments or print.

use crate::error::Result;
use crate::geometry::{Domain, Walls};
use crate::grid::{classify, Classified, Grid};
use crate::operator::{assemble, unit_rhs, Numbering};
use crate::post::{self, Figures, ShearSample};
use crate::solver::{pcg, CgInfo, CgParams, Identity, Jacobi, LinearOperator, Preconditioner};
use std::time::Instant;

/// Which preconditioner the conjugate gradient uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Method {
    /// Plain CG.
    Plain,
    /// Jacobi-preconditioned CG.
    #[default]
    Jacobi,
}

impl Method {
    pub fn name(self) -> &'static str {
        match self {
            Method::Plain => "conjugate gradient",
            Method::Jacobi => "Jacobi-preconditioned conjugate gradient",
        }
    }
}

/// How to solve the unit problem.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UnitOptions {
    pub method: Method,
    pub cg: CgParams,
    /// Apply the deferred wall correction ([`post::wall_correction`]) on exact walls.
    pub wall_correction: bool,
}

impl Default for UnitOptions {
    fn default() -> Self {
        UnitOptions {
            method: Method::default(),
            cg: CgParams::default(),
            wall_correction: true,
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
    pub info: CgInfo,
    pub seconds: Timings,
}

/// Wall-clock seconds per stage.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Timings {
    pub grid: f64,
    pub assembly: f64,
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
    let (method, params) = (options.method, &options.cg);
    let t0 = Instant::now();
    let classified = classify(domain, grid)?;
    let t1 = Instant::now();
    let numbering = Numbering::new(&classified);
    let a = assemble(&classified, &numbering);
    let b = unit_rhs(&classified, &numbering);
    let t2 = Instant::now();
    let mut u = vec![0.0; numbering.len()];
    let pre: Box<dyn Preconditioner> = match method {
        Method::Plain => Box::new(Identity),
        Method::Jacobi => Box::new(Jacobi::new(&a as &dyn LinearOperator)),
    };
    let mut info = pcg(&a, pre.as_ref(), &b, &mut u, params, method.name())?;
    // Deferred correction of the wall truncation error (post::wall_correction): the matrix is
    // kept, the right-hand side gains the curvature term of each cut link, and the solve
    // restarts from the first solution.
    // Only for exact walls: a mask's staircase has a re-entrant corner at every step, where the
    // smooth local fit behind the correction does not hold.
    if options.wall_correction && exact_wall {
        let corr = post::wall_correction(&classified, &numbering, &u);
        let b2: Vec<f64> = b.iter().zip(&corr).map(|(x, y)| x + y).collect();
        let more = pcg(&a, pre.as_ref(), &b2, &mut u, params, method.name())?;
        info = CgInfo {
            iterations: info.iterations + more.iterations,
            relative_residual: more.relative_residual,
        };
    }
    let t3 = Instant::now();
    let walls = domain.walls(0.5 * grid.h);
    let shear = post::wall_shear(&classified, &numbering, &u, &walls, exact_wall);
    let figures = post::figures(&classified, &numbering, &u, &walls, &shear);
    let t4 = Instant::now();
    Ok(UnitSolution {
        classified,
        numbering,
        u,
        walls,
        shear,
        figures,
        info,
        seconds: Timings {
            grid: (t1 - t0).as_secs_f64(),
            assembly: (t2 - t1).as_secs_f64(),
            solve: (t3 - t2).as_secs_f64(),
            post: (t4 - t3).as_secs_f64(),
        },
    })
}
