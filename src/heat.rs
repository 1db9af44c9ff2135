//! Fully developed laminar heat transfer on the flow problem's operator: Nu_H1 and Nu_T.
//!
//! Owns: [`HeatFigures`], the H1 solve −∇²ψ = ũ/ū and its bulk quadrature ([`nusselt_h1`]), the
//! Nu_T eigen-solve (LOBPCG through [`smallest_eigenpair`]) and the view of a whole-grid
//! operator on vectors of unknowns (`OnUnknowns`) that the eigen-solver needs.
//!
//! Invariant: builds no operator and no preconditioner of its own (it is handed the flow
//! problem's, [`crate::pipeline::solve_unit`] calls it), knows no fluid and writes nothing.

use crate::error::{Result, Solve};
use crate::grid::Classified;
use crate::operator::Numbering;
use crate::post::{quadrature_weights, Figures};
use crate::solver::{
    smallest_eigenpair, CgParams, EigenInfo, EigenParams, InnerCg, LinearOperator, Preconditioner,
    SolveFn,
};

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

/// The flow problem's operator and preconditioner as [`crate::pipeline::solve_unit`] built
/// them, and whether they act on whole-grid vectors (the multigrid path) rather than on
/// unknowns.
pub(crate) type FlowOperators<'a> = (&'a dyn LinearOperator, &'a dyn Preconditioner, bool);

/// The two heat-transfer problems on the flow problem's operator, with w = ũ/ū:
/// - H1: −∇²ψ = w, ψ = 0 on the walls (ψ = −φ of ∇²φ = w); φ_b the w-weighted mean of ψ by the
///   same cut-cell quadrature as the flow integral; Nu_H1 = D_h²/(4·ψ_b) (Shah & London 1978,
///   ch. 2, from memory; circle 48/11).
/// - T: the smallest λ of −∇²f = λ·w·f, f = 0 on the walls (the Graetz problem for uniform wall
///   temperature); Nu_T = λ·D_h²/4 (circle 3.6568). Discretised row by row like the flow
///   problem: A·f = λ·h²·diag(w)·f, solved by LOBPCG preconditioned by the flow problem's
///   multigrid V-cycle ([`smallest_eigenpair`]; on the checking paths by an inner CG of the
///   chosen method to a relative residual of 1e-2).
pub(crate) fn heat_transfer(
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
    let info = solve(&rhs, &mut psi, &h1).map_err(|e| e.in_solve(Solve::HeatH1))?;
    let dh = f.hydraulic_diameter;
    let nusselt_h1 = nusselt_h1(c, num, &w, &psi, dh);
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
        &format!("LOBPCG on the {method} path"),
    )
    .map_err(|e| e.in_solve(Solve::HeatT))?;
    Ok(HeatFigures {
        psi,
        psi_bulk,
        nusselt_h1,
        nusselt_t: eigen.eigenvalue * dh * dh / 4.0,
        eigen,
        h1_iterations: info.iterations,
    })
}

/// Nu_H1 = D_h²/(4·ψ_b) with ψ_b = ∫w·ψ dA / ∫w dA by the cut-cell quadrature
/// ([`quadrature_weights`]), ψ the solution of −∇²ψ = w (w = ũ/ū), ψ = 0 on the walls.
pub fn nusselt_h1(c: &Classified, num: &Numbering, w: &[f64], psi: &[f64], dh: f64) -> f64 {
    let q = quadrature_weights(c, num);
    let (mut top, mut bottom) = (0.0, 0.0);
    for i in 0..q.len() {
        top += q[i] * w[i] * psi[i];
        bottom += q[i] * w[i];
    }
    dh * dh / (4.0 * (top / bottom))
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
