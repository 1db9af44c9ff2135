//! Iterative solution of sparse linear systems.
//!
//! Owns: the preconditioned conjugate gradient (Hestenes & Stiefel 1952; Saad, *Iterative
//! Methods for Sparse Linear Systems*, 2nd ed., algorithm 9.1) over any [`LinearOperator`] and
//! [`Preconditioner`], and the Jacobi preconditioner; BiCGStab for the nonsymmetric systems of
//! a march with cross-flow convection ([`bicgstab`]); the smallest eigenpair of a definite
//! pencil A·f = λ·W·f by LOBPCG ([`smallest_eigenpair`]) over the same two traits.
//!
//! Invariant: knows nothing of geometry, grids or physics, only vectors and the two traits.

use crate::error::{Error, Result, Stall};
use sprs::CsMat;

/// y = A·x for a square operator.
pub trait LinearOperator {
    fn dim(&self) -> usize;
    fn apply(&self, x: &[f64], y: &mut [f64]);
    /// Diagonal of A, for Jacobi-type preconditioners.
    fn diagonal(&self) -> Vec<f64>;
    /// ‖ |A|·|x| ‖₂, the scale at which b − A·x is rounded (for the round-off floor of the
    /// residual).
    fn abs_product_norm(&self, x: &[f64]) -> f64;
    /// y = A·x and returns x·y, which CG needs next: an operator may fuse the two and save a
    /// pass over both vectors. The sum must not depend on the number of threads.
    fn apply_dot(&self, x: &[f64], y: &mut [f64]) -> f64 {
        self.apply(x, y);
        dot(x, y)
    }
    /// r = b − A·x and returns r·r (fixed-order sum), which an operator may do in one pass.
    fn residual(&self, b: &[f64], x: &[f64], r: &mut [f64]) -> f64 {
        self.apply(x, r);
        for (ri, bi) in r.iter_mut().zip(b) {
            *ri = bi - *ri;
        }
        dot(r, r)
    }
}

/// z = M⁻¹·r for a symmetric positive definite M ≈ A.
pub trait Preconditioner {
    fn apply(&self, r: &[f64], z: &mut [f64]);
    /// z = M⁻¹·r and r·z; a preconditioner that can form the product while it writes z saves
    /// CG a pass over both vectors.
    fn apply_dot(&self, r: &[f64], z: &mut [f64]) -> f64 {
        self.apply(r, z);
        dot(r, z)
    }
}

impl<P: Preconditioner + ?Sized> Preconditioner for &P {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        (**self).apply(r, z)
    }
    fn apply_dot(&self, r: &[f64], z: &mut [f64]) -> f64 {
        (**self).apply_dot(r, z)
    }
}

impl LinearOperator for CsMat<f64> {
    fn dim(&self) -> usize {
        self.rows()
    }

    fn apply(&self, x: &[f64], y: &mut [f64]) {
        let indptr = self.indptr();
        let indptr = indptr.raw_storage();
        let (idx, val) = (self.indices(), self.data());
        for (r, yr) in y.iter_mut().enumerate() {
            let mut s = 0.0;
            for p in indptr[r]..indptr[r + 1] {
                s += val[p] * x[idx[p]];
            }
            *yr = s;
        }
    }

    fn abs_product_norm(&self, x: &[f64]) -> f64 {
        self.outer_iterator()
            .map(|row| {
                let s: f64 = row.iter().map(|(c, v)| (v * x[c]).abs()).sum();
                s * s
            })
            .sum::<f64>()
            .sqrt()
    }

    fn diagonal(&self) -> Vec<f64> {
        (0..self.rows())
            .map(|r| self.get(r, r).copied().unwrap_or(0.0))
            .collect()
    }
}

/// Watches a solve: called after every iteration with the recursively updated relative
/// residual (cheap; the true residual is checked at the end).
pub trait Monitor: Sync {
    fn iteration(&self, iteration: usize, relative_residual: f64);
    /// A new stage of a run begins (loading, the resolution check, the solve, the entrance
    /// march, …), for a progress display; by default nothing.
    fn stage(&self, _name: &str) {}
}

/// A monitor that does nothing.
pub struct Silent;

impl Monitor for Silent {
    fn iteration(&self, _: usize, _: f64) {}
}

/// The identity: plain CG.
pub struct Identity;

impl Preconditioner for Identity {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        z.copy_from_slice(r);
    }
}

/// Jacobi (diagonal) preconditioning, M = diag(A). It matters next to walls with tiny cut
/// fractions, where the diagonal 1/θ is large.
pub struct Jacobi {
    inv_diag: Vec<f64>,
}

impl Jacobi {
    pub fn new(op: &dyn LinearOperator) -> Jacobi {
        Jacobi {
            inv_diag: op.diagonal().into_iter().map(|d| 1.0 / d).collect(),
        }
    }
}

impl Preconditioner for Jacobi {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        for ((z, r), d) in z.iter_mut().zip(r).zip(&self.inv_diag) {
            *z = r * d;
        }
    }
}

/// Stopping control of [`pcg`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CgParams {
    /// Target for the true relative residual ‖b − A·x‖₂ / ‖b‖₂.
    pub tolerance: f64,
    pub max_iterations: usize,
}

impl Default for CgParams {
    fn default() -> Self {
        CgParams {
            tolerance: 1e-10,
            max_iterations: 20_000,
        }
    }
}

/// What a solve did.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CgInfo {
    pub iterations: usize,
    /// True relative residual, recomputed from b − A·x at the end.
    pub relative_residual: f64,
    /// The tolerance was below what double precision can verify for this system; the solve
    /// stopped at the round-off floor instead (the residual above is then larger than asked).
    pub round_off_limited: bool,
}

impl CgInfo {
    /// The solve of b = 0: x = 0 at once.
    const ZERO: CgInfo = CgInfo {
        iterations: 0,
        relative_residual: 0.0,
        round_off_limited: false,
    };
}

/// The error of a solve of `method` that stopped for `stall` after `iterations` at
/// `relative_residual`, asked for `tolerance` (the solve's name is added by the caller).
fn not_converged(
    method: &str,
    stall: Stall,
    iterations: usize,
    relative_residual: f64,
    tolerance: f64,
) -> Error {
    Error::NotConverged {
        solve: None,
        method: method.to_string(),
        stall,
        iterations,
        relative_residual,
        tolerance,
    }
}

/// ‖b‖ for a Krylov solve of dimension `n`, or None when b = 0, with x set to the exact answer
/// 0 (no iteration needed).
fn rhs_norm(n: usize, b: &[f64], x: &mut [f64]) -> Option<f64> {
    assert_eq!(b.len(), n);
    assert_eq!(x.len(), n);
    let norm = dot(b, b).sqrt();
    if norm == 0.0 {
        x.iter_mut().for_each(|v| *v = 0.0);
        return None;
    }
    Some(norm)
}

/// Block length of the parallel vector operations. Reductions sum each block in order and then
/// the block sums in order, so the result does not depend on the number of threads: the same
/// numbers on every run and with `RAYON_NUM_THREADS=1`.
pub const BLOCK: usize = 1 << 14;

/// a·b with the fixed-order blocked reduction.
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    use rayon::prelude::*;
    let partial: Vec<f64> = a
        .par_chunks(BLOCK)
        .zip(b.par_chunks(BLOCK))
        .map(|(x, y)| dot4(x, y))
        .collect();
    partial.iter().sum()
}

/// r −= α·q; returns r·r (fixed-order blocked reduction).
fn update_r(r: &mut [f64], q: &[f64], alpha: f64) -> f64 {
    use rayon::prelude::*;
    let partial: Vec<f64> = r
        .par_chunks_mut(BLOCK)
        .zip(q.par_chunks(BLOCK))
        .map(|(r, q)| {
            for (r, q) in r.iter_mut().zip(q) {
                *r -= alpha * q;
            }
            // The block is still in cache: a second, vectorised loop for r·r.
            dot4(r, r)
        })
        .collect();
    partial.iter().sum()
}

/// x += α·p.
fn update_x(x: &mut [f64], p: &[f64], alpha: f64) {
    use rayon::prelude::*;
    x.par_chunks_mut(BLOCK)
        .zip(p.par_chunks(BLOCK))
        .for_each(|(x, p)| {
            for (x, p) in x.iter_mut().zip(p) {
                *x += alpha * p;
            }
        });
}

/// x += α·p, then p = z + β·p, in one pass.
fn update_xp(x: &mut [f64], p: &mut [f64], z: &[f64], alpha: f64, beta: f64) {
    use rayon::prelude::*;
    x.par_chunks_mut(BLOCK)
        .zip(p.par_chunks_mut(BLOCK))
        .zip(z.par_chunks(BLOCK))
        .for_each(|((x, p), z)| {
            for ((x, p), z) in x.iter_mut().zip(p.iter_mut()).zip(z) {
                *x += alpha * *p;
                *p = z + beta * *p;
            }
        });
}

fn true_residual(op: &dyn LinearOperator, b: &[f64], x: &[f64], r: &mut [f64]) -> f64 {
    op.residual(b, x, r).sqrt()
}

/// Solves A·x = b by preconditioned conjugate gradients, starting from the given `x`.
///
/// Stops on the true relative residual: when the recursively updated residual says the
/// tolerance is met, b − A·x is recomputed, and the iteration continues from the true residual
/// if that is still too large (the two drift apart in floating point). Not converging within
/// `max_iterations` is an error carrying how far it got, why it stopped ([`Stall`]) and
/// `method`, the name of the method; which solve of a run it was is the caller's to add
/// ([`Error::in_solve`]).
pub fn pcg(
    op: &dyn LinearOperator,
    pre: &dyn Preconditioner,
    b: &[f64],
    x: &mut [f64],
    params: &CgParams,
    method: &str,
) -> Result<CgInfo> {
    pcg_in(
        &mut CgWorkspace::default(),
        op,
        pre,
        b,
        x,
        params,
        method,
        &Silent,
    )
}

/// The three work vectors of CG (r, p, q), kept between solves of the same size: a solve at
/// a million unknowns otherwise faults in and zeroes 30 MB of fresh pages each time. There is
/// no vector for z = M⁻¹·r: q = A·p is dead once r is updated, so z is written into q, and
/// q = A·p overwrites z only after p = z + β·p has consumed it (the first z goes straight
/// into p). One grid vector fewer to fault in (10 MB at a million unknowns, about 7 ms on
/// the benchmark machine, whose fresh pages cost 0.7 ms per MB).
#[derive(Debug, Default)]
pub struct CgWorkspace {
    r: Vec<f64>,
    p: Vec<f64>,
    q: Vec<f64>,
}

/// [`pcg`] with its work vectors in `work` (resized as needed), reporting every iteration to
/// `monitor`.
#[allow(clippy::too_many_arguments)]
pub fn pcg_in(
    work: &mut CgWorkspace,
    op: &dyn LinearOperator,
    pre: &dyn Preconditioner,
    b: &[f64],
    x: &mut [f64],
    params: &CgParams,
    method: &str,
    monitor: &dyn Monitor,
) -> Result<CgInfo> {
    let n = op.dim();
    let Some(b_norm) = rhs_norm(n, b, x) else {
        return Ok(CgInfo::ZERO);
    };
    let target = params.tolerance * b_norm;
    // Every entry is written before it is read (r by the residual, p by the preconditioner,
    // q by the operator or the preconditioner), so old contents do not matter.
    for v in [&mut work.r, &mut work.p, &mut work.q] {
        v.resize(n, 0.0);
    }
    let CgWorkspace { r, p, q } = work;
    let (r, p, q) = (&mut r[..], &mut p[..], &mut q[..]);
    let mut r_norm = true_residual(op, b, x, r);
    let mut it = 0;
    let mut restarts = 0;
    loop {
        if r_norm <= target {
            break;
        }
        // p = z = M⁻¹·r.
        let mut rz = pre.apply_dot(r, p);
        loop {
            if it >= params.max_iterations {
                let rel = true_residual(op, b, x, r) / b_norm;
                return Err(not_converged(
                    method,
                    Stall::IterationLimit,
                    it,
                    rel,
                    params.tolerance,
                ));
            }
            let pq = op.apply_dot(p, q);
            if pq <= 0.0 || !pq.is_finite() {
                let rel = true_residual(op, b, x, r) / b_norm;
                return Err(not_converged(
                    method,
                    Stall::Breakdown,
                    it,
                    rel,
                    params.tolerance,
                ));
            }
            let alpha = rz / pq;
            // x += α·p is deferred to the pass that updates p (one pass over p fewer); x is
            // current again before anything else reads it.
            let rn = update_r(r, q, alpha).sqrt();
            it += 1;
            monitor.iteration(it, rn / b_norm);
            if rn <= target {
                update_x(x, p, alpha);
                break;
            }
            // z = M⁻¹·r into q, which is dead until the next A·p (see `CgWorkspace`).
            let rz_new = pre.apply_dot(r, q);
            let beta = rz_new / rz;
            rz = rz_new;
            update_xp(x, p, q, alpha, beta);
        }
        r_norm = true_residual(op, b, x, r);
        if r_norm > target {
            // The recursive residual met the target but the true one did not. Below the
            // round-off floor of double precision no iteration can help: accept there, say so.
            // Floor: evaluating b − A·x rounds each row at about ε·(|A|·|x|)_i, so
            // ‖b − A·x‖ cannot be trusted below ~ε·‖ |A|·|x| ‖₂ (Higham, *Accuracy and
            // Stability of Numerical Algorithms*, 2002, ch. 7, from memory; the factor 8 is a
            // safety margin for the five-term rows).
            let floor = 8.0 * f64::EPSILON * op.abs_product_norm(x);
            if r_norm <= floor.max(target) {
                return Ok(CgInfo {
                    iterations: it,
                    relative_residual: r_norm / b_norm,
                    round_off_limited: true,
                });
            }
            restarts += 1;
            if restarts > 5 {
                return Err(not_converged(
                    method,
                    Stall::Stagnation,
                    it,
                    r_norm / b_norm,
                    params.tolerance,
                ));
            }
        }
    }
    Ok(CgInfo {
        iterations: it,
        relative_residual: r_norm / b_norm,
        round_off_limited: false,
    })
}

/// Work vectors of [`bicgstab`], kept between solves of the same size.
#[derive(Debug, Default)]
pub struct BicgWorkspace {
    r: Vec<f64>,
    r0: Vec<f64>,
    p: Vec<f64>,
    v: Vec<f64>,
    z: Vec<f64>,
    t: Vec<f64>,
}

/// Solves A·x = b for a nonsymmetric A by right-preconditioned BiCGStab (van der Vorst, SIAM
/// J. Sci. Stat. Comput. 13 (1992) 631; Saad, *Iterative Methods for Sparse Linear Systems*,
/// 2nd ed., algorithm 7.7 with right preconditioning, from memory), starting from the given
/// `x`. M is any fixed preconditioner (here the multigrid V-cycle of A's symmetric part). Each
/// iteration applies A and M twice. Stops on the true relative residual ‖b − A·x‖/‖b‖ like
/// [`pcg_in`]; a breakdown (ρ or ω vanishing) restarts from the true residual, and more than
/// five restarts, or the iteration limit, is an error naming `method`. `iterations` counts
/// preconditioner applications over two (one V-cycle per iteration, as in CG).
#[allow(clippy::too_many_arguments)]
pub fn bicgstab(
    work: &mut BicgWorkspace,
    op: &dyn LinearOperator,
    pre: &dyn Preconditioner,
    b: &[f64],
    x: &mut [f64],
    params: &CgParams,
    method: &str,
) -> Result<CgInfo> {
    let n = op.dim();
    let Some(b_norm) = rhs_norm(n, b, x) else {
        return Ok(CgInfo::ZERO);
    };
    let target = params.tolerance * b_norm;
    for v in [
        &mut work.r,
        &mut work.r0,
        &mut work.p,
        &mut work.v,
        &mut work.z,
        &mut work.t,
    ] {
        v.resize(n, 0.0);
    }
    let BicgWorkspace { r, r0, p, v, z, t } = work;
    let fail =
        |stall: Stall, it: usize, rel: f64| not_converged(method, stall, it, rel, params.tolerance);
    let mut r_norm = true_residual(op, b, x, r);
    let mut it = 0;
    let mut restarts = 0;
    'outer: loop {
        if r_norm <= target {
            break;
        }
        r0.copy_from_slice(r);
        p.iter_mut().for_each(|e| *e = 0.0);
        v.iter_mut().for_each(|e| *e = 0.0);
        let (mut rho, mut alpha, mut omega) = (1.0, 1.0, 1.0);
        loop {
            if it >= params.max_iterations {
                let rel = true_residual(op, b, x, r) / b_norm;
                return Err(fail(Stall::IterationLimit, it, rel));
            }
            let rho_new = dot(r0, r);
            if rho_new == 0.0 || !rho_new.is_finite() {
                break;
            }
            let beta = (rho_new / rho) * (alpha / omega);
            rho = rho_new;
            for ((p, r), v) in p.iter_mut().zip(r.iter()).zip(v.iter()) {
                *p = r + beta * (*p - omega * v);
            }
            // z = M⁻¹·p, v = A·z.
            pre.apply(p, z);
            op.apply(z, v);
            let r0v = dot(r0, v);
            if r0v == 0.0 || !r0v.is_finite() {
                break;
            }
            alpha = rho / r0v;
            update_x(x, z, alpha);
            // s = r − α·v (into r).
            let s_norm = update_r(r, v, alpha).sqrt();
            it += 1;
            if s_norm <= target {
                break;
            }
            // z = M⁻¹·s, t = A·z.
            pre.apply(r, z);
            op.apply(z, t);
            let tt = dot(t, t);
            if tt == 0.0 || !tt.is_finite() {
                break;
            }
            omega = dot(t, r) / tt;
            if omega == 0.0 || !omega.is_finite() {
                break;
            }
            update_x(x, z, omega);
            let rn = update_r(r, t, omega).sqrt();
            if rn <= target {
                break;
            }
            if !rn.is_finite() {
                return Err(fail(Stall::Breakdown, it, f64::NAN));
            }
        }
        r_norm = true_residual(op, b, x, r);
        if r_norm <= target {
            break 'outer;
        }
        let floor = 8.0 * f64::EPSILON * op.abs_product_norm(x);
        if r_norm <= floor {
            return Ok(CgInfo {
                iterations: it,
                relative_residual: r_norm / b_norm,
                round_off_limited: true,
            });
        }
        restarts += 1;
        if restarts > 5 {
            return Err(fail(Stall::Stagnation, it, r_norm / b_norm));
        }
    }
    Ok(CgInfo {
        iterations: it,
        relative_residual: r_norm / b_norm,
        round_off_limited: false,
    })
}

/// An inner conjugate-gradient solve used as a preconditioner: z ≈ A⁻¹·r by [`pcg`] from
/// z = 0 with the given control. It lets [`smallest_eigenpair`] run on the checking paths
/// (plain or Jacobi CG), whose own preconditioners are far too weak to drive an eigen-solver
/// alone. A CG solve depends on r nonlinearly, so this is not a fixed linear operator; LOBPCG
/// only needs good search directions and tolerates that (Knyazev 2001, inner iterations as a
/// preconditioner). A solve that stops short of its tolerance returns its last iterate, which
/// is still a useful direction.
pub struct InnerCg<'a> {
    op: &'a dyn LinearOperator,
    pre: &'a dyn Preconditioner,
    params: CgParams,
}

impl<'a> InnerCg<'a> {
    pub fn new(op: &'a dyn LinearOperator, pre: &'a dyn Preconditioner, params: CgParams) -> Self {
        InnerCg { op, pre, params }
    }
}

impl Preconditioner for InnerCg<'_> {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        z.iter_mut().for_each(|v| *v = 0.0);
        // Not converging is no error here: z holds the last iterate (see the type's doc).
        let _ = pcg(self.op, self.pre, r, z, &self.params, "inner solve");
    }
}

/// Control of [`smallest_eigenpair`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EigenParams {
    /// Stop when the relative eigen-residual of the leading Ritz pair (x, λ),
    /// ρ = ‖A·x − λ·W·x‖_{M⁻¹} / ‖x‖_A, is at or below this (see [`smallest_eigenpair`]).
    pub tolerance: f64,
    /// Rayleigh–Ritz steps at most.
    pub max_iterations: usize,
    /// Vectors iterated together, 1 to [`MAX_EIGEN_BLOCK`]. Each one costs a preconditioner
    /// application per step; a second one makes the rate depend on the gap to λ₃ instead of
    /// λ₂, which pays off only when the two lowest modes are very close. Measured on the
    /// shipped shapes at 600 cells (multigrid): one vector needs 4–8 steps, two need as many
    /// steps or more (the eccentric annulus: 8 against 8–10), so a second vector only doubles
    /// the cost; the default is one.
    pub block: usize,
}

impl Default for EigenParams {
    fn default() -> Self {
        // The eigenvalue's relative error is about ρ²·λ₂/(λ₂ − λ₁) (see
        // [`smallest_eigenpair`]), so ρ ≤ 1e-5 leaves it good to about 1e-10 for a fair gap.
        // Measured on the shipped shapes at 600 cells against solves to ρ = 1e-9: at most
        // 8e-11 (the eccentric annulus, the closest modes); ρ ≤ 3e-5 would allow 9e-10.
        EigenParams {
            tolerance: 1e-5,
            max_iterations: 500,
            block: 1,
        }
    }
}

/// What an eigen-solve did.
#[derive(Debug, Clone, PartialEq)]
pub struct EigenInfo {
    /// The smallest eigenvalue: the Rayleigh quotient xᵀA·x / xᵀW·x of the returned vector.
    pub eigenvalue: f64,
    /// Rayleigh–Ritz steps taken.
    pub iterations: usize,
    /// Preconditioner applications (one per block vector and step, and those of the final
    /// residual check).
    pub preconditioner_applications: usize,
    /// Relative eigen-residual ρ of the returned pair.
    pub relative_residual: f64,
    /// ρ of the leading pair before each step and at the end (`iterations + 1` values).
    pub residuals: Vec<f64>,
}

/// Largest block [`smallest_eigenpair`] accepts.
pub const MAX_EIGEN_BLOCK: usize = 4;

/// Gram-matrix eigenvalues below this fraction of the largest (the basis scaled to unit
/// A-norm) mark directions too close to dependent to resolve in double precision (their
/// coefficients would carry errors of ε/σ); they are dropped from the Rayleigh–Ritz basis.
const GRAM_DROP: f64 = 1e-10;

/// Smallest eigenpair of the symmetric definite pencil A·f = λ·W·f, A symmetric positive
/// definite, W = diag(`weights`) ≥ 0 (zero or tiny weights allowed), by the locally optimal
/// block preconditioned conjugate gradient method, LOBPCG (Knyazev, SIAM J. Sci. Comput. 23
/// (2001) 517–541), preconditioned by `pre` (M⁻¹ ≈ A⁻¹, symmetric positive definite: the
/// multigrid V-cycle on the default path).
///
/// Each step works on a block X of `params.block` vectors, the current approximations of the
/// lowest modes, with Λ their Rayleigh quotients:
///
/// ```text
///   R = A·X − W·X·Λ                 residuals (A·X applied afresh, never updated)
///   T = M⁻¹·R                       preconditioned residuals: one preconditioner call each
///   S = [X, T, P]                   P: the previous step's correction (none at first)
///   Rayleigh–Ritz on span S         X_new = S·Y,  P_new = [0, T, P]·Y
/// ```
///
/// so the step minimises the Rayleigh quotient over a three-term recurrence space, as CG does
/// the energy of a linear system; with M⁻¹ = A⁻¹ the space holds x − λ·A⁻¹·W·x, so a step is
/// never worse than one of inverse iteration from the same x. The Rayleigh–Ritz step is taken
/// on the reciprocal pencil W·f = μ·A·f, μ = 1/λ, whose projected matrix SᵀA·S is positive
/// definite even where W is singular (a vector living on zero weights has μ = 0 and is never
/// chosen). The basis is scaled to unit A-norm and SᵀA·S = V·Σ·Vᵀ is diagonalised; directions
/// with Σ below `GRAM_DROP` (1e-10) times max Σ are dropped and the rest A-orthonormalised by
/// C = V·Σ^{-1/2} (SVQB, Stathopoulos & Wu, SIAM J. Sci. Comput. 23 (2002) 2165–2182), so a
/// basis that becomes nearly dependent near convergence loses a useless direction instead of
/// breaking a Cholesky factorisation (the failure Hetmaniuk & Lehoucq,
/// J. Comput. Phys. 218 (2006) 324–332, and Duersch, Shao, Yang & Gu, SIAM J. Sci. Comput. 40
/// (2018) C655–C676, discuss). The largest eigenvalues of the small symmetric matrix
/// Cᵀ·(SᵀW·S)·C (nalgebra's symmetric eigen-solver) give the new block. A·P follows from A·T
/// and the update coefficients, so a step costs one preconditioner call and two operator
/// applications per block vector, and the Gram matrices are summed in one pass.
///
/// Stopping: x the leading vector, λ its Rayleigh quotient (from the explicit A·x, so
/// round-off in the update cannot bias it), r = A·x − λ·W·x. The relative residual
/// ρ = ‖r‖_{M⁻¹} / ‖x‖_A (‖r‖²_{M⁻¹} = rᵀ·T comes for free) measures r in the norm of A⁻¹
/// (approximately: M is spectrally close to A), in which ‖λ·W·x‖_{A⁻¹} = ‖x‖_A for an
/// eigenvector. By Temple's inequality for A⁻¹·W, self-adjoint in the A inner product, the
/// relative error of λ is then at most about ρ²·λ₂/(λ₂ − λ): quadratic in the residual
/// (Parlett, *The Symmetric Eigenvalue Problem*, 1998, ch. 10, from memory). Reaching
/// `max_iterations` is an error carrying ρ, named by `method` as [`pcg`]'s are.
///
/// `x` holds the starting vector and returns the eigenvector (unit A-norm); `guesses` may give
/// the other starting vectors of the block; missing ones are `x` modulated by seeded
/// pseudo-random patterns (a fixed generator, so runs repeat exactly). If the block loses rank
/// (dependent guesses) it continues with fewer vectors. Every reduction sums in a fixed order,
/// so the result does not depend on the number of threads.
pub fn smallest_eigenpair(
    op: &dyn LinearOperator,
    pre: &dyn Preconditioner,
    weights: &[f64],
    x: &mut [f64],
    guesses: &[&[f64]],
    params: &EigenParams,
    method: &str,
) -> Result<EigenInfo> {
    let n = x.len();
    assert_eq!(op.dim(), n, "operator and vector sizes differ");
    assert_eq!(weights.len(), n, "weights and vector sizes differ");
    assert!(
        (1..=MAX_EIGEN_BLOCK).contains(&params.block),
        "eigen block of {} vectors",
        params.block
    );
    let fail = |stall: Stall, it: usize, residual: f64| {
        not_converged(method, stall, it, residual, params.tolerance)
    };
    let start = rayleigh_parts(x, x, weights).1;
    if !(start > 0.0 && start.is_finite()) {
        // The starting vector has no weight, or is not finite.
        return Err(fail(Stall::LostWeight, 0, f64::INFINITY));
    }
    let mut nb = params.block;
    // basis = [X | T | P] and images = [A·X | A·T | A·P], nb vectors each; np of P in use.
    let mut basis: Vec<Vec<f64>> = Vec::with_capacity(3 * nb);
    basis.push(x.to_vec());
    for g in guesses.iter().take(nb - 1) {
        assert_eq!(g.len(), n, "guess and vector sizes differ");
        basis.push(g.to_vec());
    }
    let mut seed: u64 = 0x2545_f491_4f6c_dd1d;
    while basis.len() < nb {
        basis.push(
            x.iter()
                .map(|v| {
                    seed = seed
                        .wrapping_mul(6_364_136_223_846_793_005)
                        .wrapping_add(1_442_695_040_888_963_407);
                    v * (((seed >> 33) as f64 / (1u64 << 31) as f64) - 0.5)
                })
                .collect(),
        );
    }
    basis.resize(3 * nb, vec![0.0; n]);
    let mut images = vec![vec![0.0; n]; 3 * nb];
    let mut r = vec![0.0; n];
    for k in 0..nb {
        op.apply(&basis[k], &mut images[k]);
    }
    // Rayleigh–Ritz on the starting block alone gives its Ritz vectors (unit A-norm).
    {
        let y = ritz_step(&basis, &images, weights, nb, nb)
            .ok_or_else(|| fail(Stall::LostWeight, 0, f64::INFINITY))?;
        let plan: Vec<Vec<(usize, f64)>> = (0..y.ncols())
            .map(|c| (0..nb).map(|j| (j, y[(j, c)])).collect())
            .collect();
        let targets: Vec<usize> = (0..y.ncols()).collect();
        recombine(&mut basis, &plan, &targets);
        if y.ncols() < nb {
            shrink(&mut basis, nb, y.ncols());
            shrink(&mut images, nb, y.ncols());
            nb = y.ncols();
        }
        for k in 0..nb {
            op.apply(&basis[k], &mut images[k]);
        }
    }
    let mut np = 0;
    let mut residuals = Vec::new();
    let mut applications = 0;
    let mut it = 0;
    loop {
        // Rayleigh quotients, residuals and preconditioned residuals of the block.
        let mut lead = (f64::NAN, f64::INFINITY, 1.0);
        for k in 0..nb {
            let (xax, xwx) = rayleigh_parts(&basis[k], &images[k], weights);
            if !(xax > 0.0 && xwx > 0.0 && xax.is_finite() && xwx.is_finite()) {
                // A block vector lost its weight.
                return Err(fail(
                    Stall::LostWeight,
                    it,
                    residuals.last().copied().unwrap_or(f64::INFINITY),
                ));
            }
            let lambda = xax / xwx;
            residual_into(&images[k], &basis[k], weights, lambda, &mut r);
            pre.apply(&r, &mut basis[nb + k]);
            applications += 1;
            if k == 0 {
                let rho = (dot(&r, &basis[nb]).max(0.0) / xax).sqrt();
                lead = (lambda, rho, xax);
            }
        }
        let (lambda, rho, xax) = lead;
        residuals.push(rho);
        if rho <= params.tolerance {
            let scale = 1.0 / xax.sqrt();
            for (out, v) in x.iter_mut().zip(&basis[0]) {
                *out = v * scale;
            }
            return Ok(EigenInfo {
                eigenvalue: lambda,
                iterations: it,
                preconditioner_applications: applications,
                relative_residual: rho,
                residuals,
            });
        }
        if !rho.is_finite() {
            return Err(fail(Stall::Breakdown, it, rho));
        }
        if it >= params.max_iterations {
            return Err(fail(Stall::IterationLimit, it, rho));
        }
        it += 1;
        for k in nb..2 * nb {
            let (t, at) = (&basis[k], &mut images[k]);
            op.apply(t, at);
        }
        // Rayleigh–Ritz on S = [X, T, P].
        let m = 2 * nb + np;
        let y = ritz_step(&basis, &images, weights, m, nb)
            .ok_or_else(|| fail(Stall::LostWeight, it, rho))?;
        let nb_new = y.ncols();
        // P_new = T·Y_T + P·Y_P and X_new = X·Y_X + P_new in one pass (old values in), then
        // A·P_new = A·T·Y_T + A·P·Y_P.
        let (mut plan, mut targets) = (Vec::new(), Vec::new());
        for c in 0..nb_new {
            let correction: Vec<(usize, f64)> = (nb..m).map(|j| (j, y[(j, c)])).collect();
            let mut whole = correction.clone();
            whole.extend((0..nb).map(|j| (j, y[(j, c)])));
            plan.push(correction);
            targets.push(2 * nb + c);
            plan.push(whole);
            targets.push(c);
        }
        recombine(&mut basis, &plan, &targets);
        let aplan: Vec<Vec<(usize, f64)>> = plan.iter().step_by(2).cloned().collect();
        let atargets: Vec<usize> = (0..nb_new).map(|c| 2 * nb + c).collect();
        recombine(&mut images, &aplan, &atargets);
        if nb_new < nb {
            shrink(&mut basis, nb, nb_new);
            shrink(&mut images, nb, nb_new);
            nb = nb_new;
        }
        np = nb;
        for k in 0..nb {
            let (x, ax) = (&basis[k], &mut images[k]);
            op.apply(x, ax);
        }
    }
}

/// The Rayleigh–Ritz step of [`smallest_eigenpair`] on the first `m` vectors of `basis`
/// (A-images in `images`): coefficients Y (m × k, k ≤ `want`) of the Ritz vectors of the
/// largest μ of W·f = μ·A·f, unit A-norm, largest first. None when no direction has weight.
fn ritz_step(
    basis: &[Vec<f64>],
    images: &[Vec<f64>],
    weights: &[f64],
    m: usize,
    want: usize,
) -> Option<nalgebra::DMatrix<f64>> {
    use nalgebra::{DMatrix, SymmetricEigen};
    let s: Vec<&[f64]> = basis[..m].iter().map(|v| v.as_slice()).collect();
    let a: Vec<&[f64]> = images[..m].iter().map(|v| v.as_slice()).collect();
    let (ga, gw) = gram(&s, &a, weights);
    // Unit A-norm scaling; a vector of zero (or denormal) A-norm carries no direction.
    let dmax = (0..m).map(|i| ga[(i, i)]).fold(0.0, f64::max);
    if !(dmax > 0.0 && dmax.is_finite()) {
        return None;
    }
    let idx: Vec<usize> = (0..m)
        .filter(|&i| ga[(i, i)] > 1e-30 * dmax && ga[(i, i)] > f64::MIN_POSITIVE)
        .collect();
    let sc: Vec<f64> = idx.iter().map(|&i| 1.0 / ga[(i, i)].sqrt()).collect();
    let q = idx.len();
    let scaled =
        |g: &DMatrix<f64>| DMatrix::from_fn(q, q, |r, c| sc[r] * sc[c] * g[(idx[r], idx[c])]);
    let (ha, hw) = (scaled(&ga), scaled(&gw));
    // SVQB: A-orthonormal directions C = V·Σ^{-1/2}, nearly dependent ones dropped.
    let eg = SymmetricEigen::new(ha);
    let smax = eg.eigenvalues.iter().cloned().fold(0.0, f64::max);
    let keep: Vec<usize> = (0..q)
        .filter(|&j| eg.eigenvalues[j] > GRAM_DROP * smax)
        .collect();
    let c = DMatrix::from_fn(q, keep.len(), |r, j| {
        eg.eigenvectors[(r, keep[j])] / eg.eigenvalues[keep[j]].sqrt()
    });
    let h = c.transpose() * hw * &c;
    let h = 0.5 * (&h + h.transpose());
    let eh = SymmetricEigen::new(h);
    let mut order: Vec<usize> = (0..keep.len()).collect();
    order.sort_by(|&i, &j| eh.eigenvalues[j].total_cmp(&eh.eigenvalues[i]));
    let mu_max = eh.eigenvalues[*order.first()?];
    if !(mu_max > 0.0 && mu_max.is_finite()) {
        return None;
    }
    // Ritz vectors with weight (μ > 0 to round-off) only.
    let chosen: Vec<usize> = order
        .into_iter()
        .filter(|&j| eh.eigenvalues[j] > 1e-12 * mu_max)
        .take(want)
        .collect();
    let z = DMatrix::from_fn(keep.len(), chosen.len(), |r, k| {
        eh.eigenvectors[(r, chosen[k])]
    });
    let yq = c * z;
    let mut y = DMatrix::zeros(m, chosen.len());
    for (r, &i) in idx.iter().enumerate() {
        for k in 0..chosen.len() {
            y[(i, k)] = sc[r] * yq[(r, k)];
        }
    }
    Some(y)
}

/// Keeps the first `keep` vectors of each of the three groups of `nb` in `v` ([X | T | P]).
fn shrink(v: &mut Vec<Vec<f64>>, nb: usize, keep: usize) {
    let old = std::mem::take(v);
    *v = old
        .into_iter()
        .enumerate()
        .filter(|(i, _)| i % nb < keep)
        .map(|(_, x)| x)
        .collect();
}

/// a·b with four interleaved partial sums (vectorisable, fixed order).
#[inline]
pub(crate) fn dot4(a: &[f64], b: &[f64]) -> f64 {
    let mut s = [0.0; 4];
    let (ac, bc) = (a.chunks_exact(4), b.chunks_exact(4));
    let tail: f64 = ac
        .remainder()
        .iter()
        .zip(bc.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (x, y) in ac.zip(bc) {
        for l in 0..4 {
            s[l] += x[l] * y[l];
        }
    }
    (s[0] + s[1]) + (s[2] + s[3]) + tail
}

/// Σ w·a·b with four interleaved partial sums (vectorisable, fixed order).
fn wdot4(a: &[f64], b: &[f64], w: &[f64]) -> f64 {
    let mut s = [0.0; 4];
    let (ac, bc, wc) = (a.chunks_exact(4), b.chunks_exact(4), w.chunks_exact(4));
    let tail: f64 = ac
        .remainder()
        .iter()
        .zip(bc.remainder())
        .zip(wc.remainder())
        .map(|((x, y), w)| w * x * y)
        .sum();
    for ((x, y), w) in ac.zip(bc).zip(wc) {
        for l in 0..4 {
            s[l] += w[l] * x[l] * y[l];
        }
    }
    (s[0] + s[1]) + (s[2] + s[3]) + tail
}

/// Gram matrices Sᵀ·(A·S) and Sᵀ·W·S of the vectors `s` with images `a`, in one pass over
/// the entries (blocks of [`BLOCK`] in parallel, block sums added in order). Only the upper
/// triangle of Sᵀ·(A·S) is formed and mirrored: the symmetric A makes the two halves equal.
fn gram(s: &[&[f64]], a: &[&[f64]], w: &[f64]) -> (nalgebra::DMatrix<f64>, nalgebra::DMatrix<f64>) {
    use rayon::prelude::*;
    let (m, n) = (s.len(), w.len());
    let partial: Vec<Vec<f64>> = (0..n.div_ceil(BLOCK))
        .into_par_iter()
        .map(|b| {
            let (lo, hi) = (b * BLOCK, ((b + 1) * BLOCK).min(n));
            let w = &w[lo..hi];
            let mut g = vec![0.0; 2 * m * m];
            for i in 0..m {
                let si = &s[i][lo..hi];
                for j in i..m {
                    g[i * m + j] = dot4(si, &a[j][lo..hi]);
                    g[m * m + i * m + j] = wdot4(si, &s[j][lo..hi], w);
                }
            }
            g
        })
        .collect();
    let mut ga = nalgebra::DMatrix::zeros(m, m);
    let mut gw = nalgebra::DMatrix::zeros(m, m);
    for g in &partial {
        for i in 0..m {
            for j in i..m {
                ga[(i, j)] += g[i * m + j];
                gw[(i, j)] += g[m * m + i * m + j];
            }
        }
    }
    for i in 0..m {
        for j in 0..i {
            ga[(i, j)] = ga[(j, i)];
            gw[(i, j)] = gw[(j, i)];
        }
    }
    (ga, gw)
}

/// (xᵀ·ax, xᵀW·x), fixed-order blocked reduction.
fn rayleigh_parts(x: &[f64], ax: &[f64], w: &[f64]) -> (f64, f64) {
    use rayon::prelude::*;
    let partial: Vec<(f64, f64)> = x
        .par_chunks(BLOCK)
        .zip(ax.par_chunks(BLOCK).zip(w.par_chunks(BLOCK)))
        .map(|(x, (ax, w))| (dot4(x, ax), wdot4(x, x, w)))
        .collect();
    partial
        .iter()
        .fold((0.0, 0.0), |(p, q), &(a, b)| (p + a, q + b))
}

/// r = ax − λ·W·x.
fn residual_into(ax: &[f64], x: &[f64], w: &[f64], lambda: f64, r: &mut [f64]) {
    use rayon::prelude::*;
    r.par_chunks_mut(BLOCK)
        .zip(ax.par_chunks(BLOCK))
        .zip(x.par_chunks(BLOCK).zip(w.par_chunks(BLOCK)))
        .for_each(|((r, ax), (x, w))| {
            for i in 0..r.len() {
                r[i] = ax[i] - lambda * w[i] * x[i];
            }
        });
}

/// Linear recombination in place: output c is Σ_(j, a) ∈ plan[c] a·v_j and replaces
/// v_{targets[c]}. All outputs of a block of [`BLOCK`] entries are formed in a buffer before
/// any is written, so outputs may overwrite inputs. Blocks in parallel; no reduction.
fn recombine(v: &mut [Vec<f64>], plan: &[Vec<(usize, f64)>], targets: &[usize]) {
    use rayon::prelude::*;
    let n = v[0].len();
    let blocks = n.div_ceil(BLOCK);
    let mut pieces: Vec<Vec<&mut [f64]>> =
        (0..blocks).map(|_| Vec::with_capacity(v.len())).collect();
    for vec in v.iter_mut() {
        for (b, piece) in vec.chunks_mut(BLOCK).enumerate() {
            pieces[b].push(piece);
        }
    }
    let k = plan.len();
    pieces.into_par_iter().for_each_init(
        || vec![0.0; k * BLOCK],
        |buf, mut ps| {
            let len = ps[0].len();
            for (c, terms) in plan.iter().enumerate() {
                let out = &mut buf[c * BLOCK..c * BLOCK + len];
                out.iter_mut().for_each(|o| *o = 0.0);
                for &(j, a) in terms {
                    if a != 0.0 {
                        for (o, x) in out.iter_mut().zip(ps[j].iter()) {
                            *o += a * x;
                        }
                    }
                }
            }
            for (c, &t) in targets.iter().enumerate() {
                ps[t].copy_from_slice(&buf[c * BLOCK..c * BLOCK + len]);
            }
        },
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use sprs::TriMat;

    fn laplace_1d(n: usize) -> CsMat<f64> {
        let mut t = TriMat::new((n, n));
        for i in 0..n {
            t.add_triplet(i, i, 2.0);
            if i > 0 {
                t.add_triplet(i, i - 1, -1.0);
            }
            if i + 1 < n {
                t.add_triplet(i, i + 1, -1.0);
            }
        }
        t.to_csr()
    }

    #[test]
    fn solves_1d_poisson_exactly() {
        // −u'' = 1 on (0,1), u(0) = u(1) = 0: u = x(1−x)/2, which the 3-point scheme reproduces
        // exactly at the nodes (common practice, no source).
        let n = 99;
        let h = 1.0 / (n + 1) as f64;
        let a = laplace_1d(n);
        let b = vec![h * h; n];
        let mut x = vec![0.0; n];
        let info = pcg(&a, &Jacobi::new(&a), &b, &mut x, &CgParams::default(), "cg").unwrap();
        assert!(info.relative_residual <= 1e-10);
        for (i, v) in x.iter().enumerate() {
            let xi = (i + 1) as f64 * h;
            assert!((v - xi * (1.0 - xi) / 2.0).abs() < 1e-10);
        }
    }

    #[test]
    fn smallest_eigenvalue_of_the_1d_laplacian() {
        // −u'' = λu on (0,1): the 3-point scheme's smallest eigenvalue is
        // (4/h²)·sin²(πh/2) (common practice, no source); here A = h²·(−Δ_h), W = h²·I.
        let n = 63;
        let h = 1.0 / (n + 1) as f64;
        let a = laplace_1d(n);
        let w = vec![h * h; n];
        let exact = 4.0 / (h * h) * (std::f64::consts::PI * h / 2.0).sin().powi(2);
        for block in [1, 2] {
            let mut f: Vec<f64> = (0..n)
                .map(|i| (i + 1) as f64 * h * (1.0 - (i + 1) as f64 * h))
                .collect();
            let params = EigenParams {
                block,
                ..Default::default()
            };
            let info =
                smallest_eigenpair(&a, &Jacobi::new(&a), &w, &mut f, &[], &params, "test").unwrap();
            assert!(
                (info.eigenvalue - exact).abs() / exact < 1e-9,
                "block {block}: {} {}",
                info.eigenvalue,
                exact
            );
            assert_eq!(info.residuals.len(), info.iterations + 1);
        }
    }

    /// The 5-point Laplacian (unscaled) of an nx × ny grid with Dirichlet walls, row-major.
    fn laplace_2d(nx: usize, ny: usize) -> CsMat<f64> {
        let mut t = TriMat::new((nx * ny, nx * ny));
        for j in 0..ny {
            for i in 0..nx {
                let k = j * nx + i;
                t.add_triplet(k, k, 4.0);
                if i > 0 {
                    t.add_triplet(k, k - 1, -1.0);
                }
                if i + 1 < nx {
                    t.add_triplet(k, k + 1, -1.0);
                }
                if j > 0 {
                    t.add_triplet(k, k - nx, -1.0);
                }
                if j + 1 < ny {
                    t.add_triplet(k, k + nx, -1.0);
                }
            }
        }
        t.to_csr()
    }

    /// Smallest eigenpair of A·f = λ·W·f by dense linear algebra: the symmetric-definite
    /// reduction with the Cholesky factor of A, L⁻¹·W·L⁻ᵀ·z = μ·z, μ = 1/λ, f = L⁻ᵀ·z (Golub &
    /// Van Loan, *Matrix Computations*, 4th ed., 2013, §8.7, from memory), solved by nalgebra's
    /// `SymmetricEigen` (the reference library). W may be singular: A is the definite one.
    fn dense_smallest(a: &CsMat<f64>, w: &[f64]) -> (f64, Vec<f64>) {
        use nalgebra::{DMatrix, SymmetricEigen};
        let n = w.len();
        let mut d = DMatrix::<f64>::zeros(n, n);
        for (v, (i, j)) in a.iter() {
            d[(i, j)] = *v;
        }
        let l = d.cholesky().expect("A is SPD").l();
        let linv = l.clone().try_inverse().expect("invertible");
        let c = &linv
            * DMatrix::from_diagonal(&nalgebra::DVector::from_vec(w.to_vec()))
            * linv.transpose();
        let e = SymmetricEigen::new(0.5 * (&c + c.transpose()));
        let top = (0..n)
            .max_by(|&x, &y| e.eigenvalues[x].total_cmp(&e.eigenvalues[y]))
            .unwrap();
        let f = linv.transpose() * e.eigenvectors.column(top);
        (1.0 / e.eigenvalues[top], f.iter().copied().collect())
    }

    #[test]
    fn matches_a_dense_reference_with_zero_weights() {
        // A 2-D Laplacian on a 13 × 9 grid with weights that vanish at every seventh node and
        // along the first row, vary by a factor of ten elsewhere (like ũ/ū near walls), and
        // a second mode close to the first (the long side is 13/9 of the short one).
        let (nx, ny) = (13, 9);
        let n = nx * ny;
        let a = laplace_2d(nx, ny);
        let w: Vec<f64> = (0..n)
            .map(|k| {
                let (i, j) = ((k % nx) as f64 + 1.0, (k / nx) as f64 + 1.0);
                if k % 7 == 3 || k < nx {
                    0.0
                } else {
                    0.1 + (i * (nx as f64 + 1.0 - i) * j * (ny as f64 + 1.0 - j)) / 400.0
                }
            })
            .collect();
        let (lambda, mode) = dense_smallest(&a, &w);
        let jacobi = Jacobi::new(&a);
        let inner = InnerCg::new(
            &a,
            &Identity,
            CgParams {
                tolerance: 1e-2,
                ..Default::default()
            },
        );
        let pres: [(&str, &dyn Preconditioner); 2] = [("jacobi", &jacobi), ("inner cg", &inner)];
        for (name, pre) in pres {
            for block in [1, 2] {
                let mut f = vec![1.0; n];
                let params = EigenParams {
                    block,
                    tolerance: 1e-7,
                    ..Default::default()
                };
                let info = smallest_eigenpair(&a, pre, &w, &mut f, &[], &params, "test").unwrap();
                let err = (info.eigenvalue - lambda).abs() / lambda;
                assert!(
                    err < 1e-11,
                    "{name}, block {block}: {} vs {lambda}",
                    info.eigenvalue
                );
                // Same mode: |cos| of the A-angle between the vectors is 1.
                let mut af = vec![0.0; n];
                a.apply(&f, &mut af);
                let mut am = vec![0.0; n];
                a.apply(&mode, &mut am);
                let cos = dot(&mode, &af) / (dot(&f, &af) * dot(&mode, &am)).sqrt();
                assert!(
                    (cos.abs() - 1.0).abs() < 1e-10,
                    "{name}, block {block}: {cos}"
                );
                assert!(info.relative_residual <= 1e-7);
            }
        }
    }

    #[test]
    fn eigen_solve_reports_how_far_it_got() {
        let n = 63;
        let a = laplace_1d(n);
        let w = vec![1.0; n];
        let mut f = vec![1.0; n];
        let params = EigenParams {
            max_iterations: 1,
            ..Default::default()
        };
        let e = smallest_eigenpair(&a, &Identity, &w, &mut f, &[], &params, "test").unwrap_err();
        assert!(
            matches!(
                e,
                Error::NotConverged {
                    iterations: 1,
                    stall: Stall::IterationLimit,
                    ..
                }
            ),
            "{e}"
        );
        assert!(e.to_string().contains("relative residual"));
        // A start without weight is refused, not iterated.
        let mut f = vec![0.0; n];
        let e = smallest_eigenpair(&a, &Identity, &w, &mut f, &[], &params, "test").unwrap_err();
        assert!(
            matches!(
                e,
                Error::NotConverged {
                    iterations: 0,
                    stall: Stall::LostWeight,
                    ..
                }
            ),
            "{e}"
        );
        assert!(e.to_string().contains("no weight"), "{e}");
    }

    #[test]
    fn reports_non_convergence() {
        let a = laplace_1d(200);
        let b = vec![1.0; 200];
        let mut x = vec![0.0; 200];
        let p = CgParams {
            tolerance: 1e-12,
            max_iterations: 5,
        };
        let e = pcg(&a, &Identity, &b, &mut x, &p, "cg").unwrap_err();
        assert!(matches!(
            e,
            Error::NotConverged {
                iterations: 5,
                stall: Stall::IterationLimit,
                ..
            }
        ));
        assert!(e.to_string().contains("did not converge"));
    }
}
