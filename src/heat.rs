//! Fully developed laminar heat transfer on the flow problem's operator: Nu_H1 and Nu_T.
//!
//! Owns: [`HeatFigures`], the H1 solve −∇²ψ = ũ/ū and its bulk quadrature ([`nusselt_h1`]) and
//! the Nu_T eigen-solve (LOBPCG through [`System::smallest_eigenpair`]).
//!
//! Invariant: builds no operator and no preconditioner of its own (it is handed the flow
//! problem's [`System`]; [`crate::pipeline::solve_unit`] calls it), knows no fluid and writes
//! nothing.

use crate::error::{Result, Solve};
use crate::grid::Classified;
use crate::operator::Numbering;
use crate::post::{quadrature_weights, Figures};
use crate::problem::Field;
use crate::singular::Enrichment;
use crate::solver::{CgParams, EigenInfo, EigenParams};
use crate::system::System;

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

/// The two heat-transfer problems on the flow problem's system (its operator and
/// preconditioner), with w = ũ/ū:
/// - H1: −∇²ψ = w, ψ = 0 on the walls (ψ = −φ of ∇²φ = w); φ_b the w-weighted mean of ψ by the
///   same cut-cell quadrature as the flow integral; Nu_H1 = D_h²/(4·ψ_b) (Shah & London 1978,
///   ch. 2, from memory; circle 48/11).
/// - T: the smallest λ of −∇²f = λ·w·f, f = 0 on the walls (the Graetz problem for uniform wall
///   temperature); Nu_T = λ·D_h²/4 (circle 3.6568). Discretised row by row like the flow
///   problem: A·f = λ·h²·diag(w)·f, solved by LOBPCG preconditioned by the flow problem's
///   multigrid V-cycle ([`System::smallest_eigenpair`]; on the checking paths by an inner CG of
///   the chosen method to a relative residual of 1e-2).
///
/// With the flow's re-entrant corners treated (`corners`: the flow's [`Enrichment`], whose
/// corners are used, not its coefficients), the H1 problem is enriched the same way
/// ([`solve_enriched`]), and Nu_T is corrected by one enriched inverse-iteration step from
/// the eigenvector f_h: λ = ⟨f_h, W·f_h⟩ / ⟨f_h, W·f̃⟩ with −∇²f̃ = w·f_h, the Rayleigh
/// quotient of the inverse operator, whose error is the square of f_h's (h^(8/3) at a 270°
/// corner) plus the enriched solve's O(h²).
pub(crate) fn heat_transfer(
    system: &mut System,
    u: &[f64],
    f: &Figures,
    corners: Option<&Enrichment>,
) -> Result<HeatFigures> {
    let mean = f.flow_integral / f.area;
    let w: Vec<f64> = u.iter().map(|v| (v / mean).max(0.0)).collect();
    let rhs = system.rhs(&Field::Unknowns(w.clone()));
    // From zero, CG's iterate satisfies ψ_kᵀ·b = ψ_kᵀ·A·ψ_k (Galerkin), so bᵀψ, and with it
    // the bulk value (the same quadrature as b away from the walls), is off by ‖ψ − ψ_k‖²_A:
    // quadratic in the residual. Measured on the shipped shapes at 600 cells: Nu_H1 from a
    // relative residual of 1e-8 (8 iterations) and of 1e-6 agree with a 1e-13 solve to 5e-14.
    let mut psi = vec![0.0; u.len()];
    let h1 = CgParams {
        tolerance: H1_TOLERANCE,
        ..CgParams::default()
    };
    let info = system
        .solve(&rhs, &mut psi, &h1)
        .map_err(|e| e.in_solve(Solve::HeatH1))?;
    let dh = f.hydraulic_diameter;
    let c = system.problem().classified;
    // The plain ψ stays the start of the eigen-solve; the enriched one gives Nu_H1.
    let psi_plain = psi.clone();
    if let Some(e) = corners {
        solve_enriched(system, e, &w, &mut psi, &h1).map_err(|e| e.in_solve(Solve::HeatH1))?;
    }
    let nusselt_h1 = nusselt_h1(c, system.numbering(), &w, &psi, dh, f.area);
    let psi_bulk = dh * dh / (4.0 * nusselt_h1);
    // Start from ψ = A⁻¹·W·1, one inverse-iteration step of the pencil from the constant
    // (measured: its relative eigen-residual is 0.13–0.27 on the shipped shapes).
    let mut mode = psi_plain;
    let name = format!("LOBPCG on the {} path", system.method().name());
    let eigen = system
        .smallest_eigenpair(&rhs, &mut mode, &EigenParams::default(), &name)
        .map_err(|e| e.in_solve(Solve::HeatT))?;
    let mut eigenvalue = eigen.eigenvalue;
    if let Some(e) = corners {
        let num = system.numbering();
        let q = quadrature_weights(c, num);
        let source: Vec<f64> = w.iter().zip(&mode).map(|(w, f)| w * f).collect();
        let mut next = mode.clone();
        for v in next.iter_mut() {
            *v /= eigenvalue;
        }
        solve_enriched(system, e, &source, &mut next, &h1).map_err(|e| e.in_solve(Solve::HeatT))?;
        let (mut top, mut bottom) = (0.0, 0.0);
        for i in 0..q.len() {
            top += q[i] * w[i] * mode[i] * mode[i];
            bottom += q[i] * w[i] * mode[i] * next[i];
        }
        if top > 0.0 && bottom > 0.0 {
            eigenvalue = top / bottom;
        }
    }
    Ok(HeatFigures {
        psi,
        psi_bulk,
        nusselt_h1,
        nusselt_t: eigenvalue * dh * dh / 4.0,
        eigen,
        h1_iterations: info.iterations,
    })
}

/// Most passes of an enriched heat-transfer solve, and the relative change of the corner
/// coefficients at which it stops (as the flow's, `pipeline`).
const ENRICHED_PASSES: usize = 1;
const ENRICHED_SETTLED: f64 = 1e-7;

/// Solves −∇²x = `source` (per unknown), x = 0 on the walls, enriched at the corners of
/// `corners` (their singular functions with coefficients of this problem's own, found by
/// extraction as for the flow, `crate::singular::Enrichment`). `x` holds a plain solution (or
/// a fair start) and returns the whole solution, singular part included, at the unknowns.
fn solve_enriched(
    system: &mut System,
    corners: &Enrichment,
    source: &[f64],
    x: &mut [f64],
    params: &CgParams,
) -> Result<()> {
    let c = system.problem().classified;
    let weights = quadrature_weights(c, system.numbering());
    let mut e = corners.zeroed();
    e.a = e.extract_with_source(c, system.numbering(), x, source, &weights);
    for _ in 0..ENRICHED_PASSES {
        let extra = e.source(c, system.numbering());
        let total: Vec<f64> = source.iter().zip(&extra).map(|(s, g)| s + g).collect();
        let rhs = system.problem().rhs_from(system.numbering(), &total);
        let part = e.values(c, system.numbering());
        let mut smooth: Vec<f64> = x.iter().zip(&part).map(|(x, s)| x - s).collect();
        system.solve(&rhs, &mut smooth, params)?;
        for (x, (w, s)) in x.iter_mut().zip(smooth.iter().zip(&part)) {
            *x = w + s;
        }
        let next = e.extract_with_source(c, system.numbering(), x, source, &weights);
        let scale = e.a.iter().fold(0.0f64, |m, a| m.max(a.abs()));
        let change = next
            .iter()
            .zip(&e.a)
            .fold(0.0f64, |m, (p, q)| m.max((p - q).abs()));
        if change <= ENRICHED_SETTLED * scale {
            break;
        }
        e.a = next;
    }
    Ok(())
}

/// Nu_H1 = D_h²/(4·ψ_b) with ψ_b = ∫w·ψ dA / ∫w dA, ψ the solution of −∇²ψ = w (w = ũ/ū),
/// ψ = 0 on the walls. ∫w dA is the passage's `area` A exactly (w is ũ over its own mean, and
/// that mean is the flow integral with its h²/24 term, [`crate::post::flow_integral`]); the
/// node rule on w alone lacks that term and put an error of h²/(24·ū) into Nu_H1 (circle,
/// 600 cells: −6.6e-6, now −2.9e-6). ∫w·ψ dA by the cut-cell rule ([`quadrature_weights`])
/// needs no such term: ∫∆(w·ψ) dA = 0, as w·ψ and its gradient vanish on the walls.
pub fn nusselt_h1(
    c: &Classified,
    num: &Numbering,
    w: &[f64],
    psi: &[f64],
    dh: f64,
    area: f64,
) -> f64 {
    let q = quadrature_weights(c, num);
    let top: f64 = q.iter().zip(w).zip(psi).map(|((q, w), p)| q * w * p).sum();
    dh * dh * area / (4.0 * top)
}
