//! Iterative solution of symmetric positive definite systems.
//!
//! Owns: the preconditioned conjugate gradient (Hestenes & Stiefel 1952; Saad, *Iterative
//! Methods for Sparse Linear Systems*, 2nd ed., algorithm 9.1) over any [`LinearOperator`] and
//! [`Preconditioner`], and the Jacobi preconditioner.
//!
//! Invariant: knows nothing of geometry, grids or physics, only vectors and the two traits.

use crate::error::{Error, Result};
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
}

/// z = M⁻¹·r for a symmetric positive definite M ≈ A.
pub trait Preconditioner {
    fn apply(&self, r: &[f64], z: &mut [f64]);
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
pub trait Monitor {
    fn iteration(&self, iteration: usize, relative_residual: f64);
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
        .map(|(x, y)| x.iter().zip(y).map(|(p, q)| p * q).sum::<f64>())
        .collect();
    partial.iter().sum()
}

/// x += α·p and r −= α·q in one pass; returns r·r (fixed-order blocked reduction).
fn update_xr(x: &mut [f64], r: &mut [f64], p: &[f64], q: &[f64], alpha: f64) -> f64 {
    use rayon::prelude::*;
    let partial: Vec<f64> = x
        .par_chunks_mut(BLOCK)
        .zip(r.par_chunks_mut(BLOCK))
        .zip(p.par_chunks(BLOCK).zip(q.par_chunks(BLOCK)))
        .map(|((x, r), (p, q))| {
            let mut s = 0.0;
            for i in 0..x.len() {
                x[i] += alpha * p[i];
                r[i] -= alpha * q[i];
                s += r[i] * r[i];
            }
            s
        })
        .collect();
    partial.iter().sum()
}

/// p = z + β·p.
fn update_p(p: &mut [f64], z: &[f64], beta: f64) {
    use rayon::prelude::*;
    p.par_chunks_mut(BLOCK)
        .zip(z.par_chunks(BLOCK))
        .for_each(|(p, z)| {
            for i in 0..p.len() {
                p[i] = z[i] + beta * p[i];
            }
        });
}

fn true_residual(op: &dyn LinearOperator, b: &[f64], x: &[f64], r: &mut [f64]) -> f64 {
    op.apply(x, r);
    for (ri, bi) in r.iter_mut().zip(b) {
        *ri = bi - *ri;
    }
    dot(r, r).sqrt()
}

/// Solves A·x = b by preconditioned conjugate gradients, starting from the given `x`.
///
/// Stops on the true relative residual: when the recursively updated residual says the
/// tolerance is met, b − A·x is recomputed, and the iteration continues from the true residual
/// if that is still too large (the two drift apart in floating point). Not converging within
/// `max_iterations` is an error carrying how far it got.
pub fn pcg(
    op: &dyn LinearOperator,
    pre: &dyn Preconditioner,
    b: &[f64],
    x: &mut [f64],
    params: &CgParams,
    method: &str,
) -> Result<CgInfo> {
    pcg_monitored(op, pre, b, x, params, method, &Silent)
}

/// [`pcg`] reporting every iteration to `monitor`.
pub fn pcg_monitored(
    op: &dyn LinearOperator,
    pre: &dyn Preconditioner,
    b: &[f64],
    x: &mut [f64],
    params: &CgParams,
    method: &str,
    monitor: &dyn Monitor,
) -> Result<CgInfo> {
    let n = op.dim();
    assert_eq!(b.len(), n);
    assert_eq!(x.len(), n);
    let b_norm = dot(b, b).sqrt();
    if b_norm == 0.0 {
        x.iter_mut().for_each(|v| *v = 0.0);
        return Ok(CgInfo {
            iterations: 0,
            relative_residual: 0.0,
            round_off_limited: false,
        });
    }
    let target = params.tolerance * b_norm;
    let mut r = vec![0.0; n];
    let mut z = vec![0.0; n];
    let mut p = vec![0.0; n];
    let mut q = vec![0.0; n];
    let mut r_norm = true_residual(op, b, x, &mut r);
    let mut it = 0;
    let mut restarts = 0;
    loop {
        if r_norm <= target {
            break;
        }
        pre.apply(&r, &mut z);
        p.copy_from_slice(&z);
        let mut rz = dot(&r, &z);
        loop {
            if it >= params.max_iterations {
                let rel = true_residual(op, b, x, &mut r) / b_norm;
                return Err(Error::NotConverged {
                    method: method.to_string(),
                    iterations: it,
                    relative_residual: rel,
                    tolerance: params.tolerance,
                });
            }
            op.apply(&p, &mut q);
            let pq = dot(&p, &q);
            if pq <= 0.0 || !pq.is_finite() {
                let rel = true_residual(op, b, x, &mut r) / b_norm;
                return Err(Error::NotConverged {
                    method: format!("{method} (breakdown: the operator is not positive definite)"),
                    iterations: it,
                    relative_residual: rel,
                    tolerance: params.tolerance,
                });
            }
            let alpha = rz / pq;
            let rn = update_xr(x, &mut r, &p, &q, alpha).sqrt();
            it += 1;
            monitor.iteration(it, rn / b_norm);
            if rn <= target {
                break;
            }
            pre.apply(&r, &mut z);
            let rz_new = dot(&r, &z);
            let beta = rz_new / rz;
            rz = rz_new;
            update_p(&mut p, &z, beta);
        }
        r_norm = true_residual(op, b, x, &mut r);
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
                return Err(Error::NotConverged {
                    method: format!("{method} (the residual stagnates)"),
                    iterations: it,
                    relative_residual: r_norm / b_norm,
                    tolerance: params.tolerance,
                });
            }
        }
    }
    Ok(CgInfo {
        iterations: it,
        relative_residual: r_norm / b_norm,
        round_off_limited: false,
    })
}

/// A linear solve A·x = b from the starting guess in x, to the given control: what the
/// eigen-solver calls in its inner loop.
pub type SolveFn<'a> = dyn FnMut(&[f64], &mut [f64], &CgParams) -> Result<CgInfo> + 'a;

/// Control of [`smallest_eigenpair`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EigenParams {
    /// Stop when the relative eigen-residual ‖A·x − λ·W·x‖_{W⁻¹} / ‖λ·W·x‖_{W⁻¹} is below this.
    pub tolerance: f64,
    pub max_iterations: usize,
    /// Relative residual of each inner linear solve.
    pub inner_tolerance: f64,
}

impl Default for EigenParams {
    fn default() -> Self {
        // The Ritz value's error is of the order of the square of the residual, so a residual
        // of 1e-6 leaves the eigenvalue good to about 1e-12; inner solves to 1e-9 keep the
        // residual measurable at that level.
        EigenParams {
            tolerance: 1e-6,
            max_iterations: 300,
            inner_tolerance: 1e-9,
        }
    }
}

/// What an eigen-solve did.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EigenInfo {
    pub eigenvalue: f64,
    /// Outer (inverse) iterations.
    pub iterations: usize,
    /// CG iterations of all inner solves.
    pub inner_iterations: usize,
    /// Relative eigen-residual at the end.
    pub change: f64,
}

/// Vectors in the block of [`smallest_eigenpair`].
pub const EIGEN_BLOCK: usize = 2;

/// Smallest eigenpair of the symmetric definite pencil A·f = λ·W·f, W = diag(`weights`) > 0, by
/// block inverse iteration with a Rayleigh–Ritz step (subspace iteration on [`EIGEN_BLOCK`]
/// vectors; Saad, *Numerical Methods for Large Eigenvalue Problems*, 2011, ch. 5):
/// G = A⁻¹·W·F, then the small pencil (GᵀW F, GᵀW G) gives the Ritz values and the next
/// W-orthonormal block F. The smallest Ritz value converges at the ratio λ₁/λ₃ (block of two;
/// measured: a block of three or four costs more inner iterations on the shipped shapes), so clustered
/// low modes (two passages, a passage nearly cut in two, an eccentric annulus) do not stall it
/// as they stall plain inverse iteration. The residual of the Ritz vector x = G·y costs no
/// operator application: A·x = W·F·y, so r = W·(F·y − λ·x); the iteration stops when
/// ‖F·y − λ·x‖_W ≤ tolerance·‖λ·x‖_W (the eigenvalue's error is then of the order of the
/// square of that), or when λ changes by less than the square of the tolerance while the
/// residual is within ten times the tolerance. The inner solves are inexact: their relative
/// tolerance is 1e-2 times the square of the current residual (the Ritz value inherits the inner
/// error to first order, so it must shrink like the eigenvalue's own error; inexact inverse
/// iteration, Golub & Ye 2000, from memory), between `inner_tolerance` and 1e-3.
/// `solve(b, x, control)` solves A·x = b starting from x; `f` holds the starting vector and
/// returns the eigenvector.
pub fn smallest_eigenpair(
    weights: &[f64],
    f: &mut [f64],
    solve: &mut SolveFn<'_>,
    params: &EigenParams,
    method: &str,
) -> Result<EigenInfo> {
    use nalgebra::{DMatrix, SymmetricEigen};
    let n = f.len();
    let nb = EIGEN_BLOCK;
    let wdot = |a: &[f64], b: &[f64]| -> f64 {
        a.iter()
            .zip(b)
            .zip(weights)
            .map(|((x, y), w)| w * x * y)
            .sum::<f64>()
    };
    let fail = |why: &str, it: usize, residual: f64| Error::NotConverged {
        method: format!("{method} ({why})"),
        iterations: it,
        relative_residual: residual,
        tolerance: params.tolerance,
    };
    if wdot(f, f) == 0.0 {
        return Err(fail("zero starting vector", 0, 1.0));
    }
    // The other starting vectors: the first modulated by seeded pseudo-random patterns (a
    // fixed LCG, so runs repeat exactly).
    let mut seed: u64 = 0x2545_f491_4f6c_dd1d;
    let mut fs: Vec<Vec<f64>> = vec![f.to_vec()];
    for _ in 1..nb {
        fs.push(
            f.iter()
                .map(|v| {
                    seed = seed
                        .wrapping_mul(6_364_136_223_846_793_005)
                        .wrapping_add(1_442_695_040_888_963_407);
                    v * (((seed >> 33) as f64 / (1u64 << 31) as f64) - 0.5)
                })
                .collect(),
        );
    }
    let mut gs: Vec<Vec<f64>> = vec![vec![0.0; n]; nb];
    let mut b = vec![0.0; n];
    let mut lambda = f64::NAN;
    let mut inner = 0;
    let mut residual = f64::INFINITY;
    for it in 1..=params.max_iterations {
        // The leading vector carries the eigenvalue and gets the tight schedule; the others
        // only span the search space and are solved to 1e-2 times the residual.
        let tight = CgParams {
            tolerance: (1e-2 * residual * residual).clamp(params.inner_tolerance, 1e-3),
            max_iterations: CgParams::default().max_iterations,
        };
        let loose = CgParams {
            tolerance: (1e-2 * residual).clamp(params.inner_tolerance, 1e-3),
            ..tight
        };
        for (col, (gv, fv)) in gs.iter_mut().zip(&fs).enumerate() {
            let cg = if col == 0 { &tight } else { &loose };
            for i in 0..n {
                b[i] = weights[i] * fv[i];
            }
            let info = solve(&b, gv, cg)?;
            inner += info.iterations;
        }
        // Rayleigh–Ritz on span G: Ka = GᵀW F (= GᵀA G), Kb = GᵀW G.
        let mut ka = DMatrix::<f64>::zeros(nb, nb);
        let mut kb = DMatrix::<f64>::zeros(nb, nb);
        for r in 0..nb {
            for c in 0..nb {
                ka[(r, c)] = 0.5 * (wdot(&gs[r], &fs[c]) + wdot(&gs[c], &fs[r]));
                kb[(r, c)] = wdot(&gs[r], &gs[c]);
            }
        }
        let chol = kb
            .cholesky()
            .ok_or_else(|| fail("the iteration vectors became dependent", it, residual))?;
        let linv = chol
            .l()
            .try_inverse()
            .ok_or_else(|| fail("the iteration vectors became dependent", it, residual))?;
        let c = &linv * ka * linv.transpose();
        let c = 0.5 * (&c + c.transpose());
        let eig = SymmetricEigen::new(c);
        let mut order: Vec<usize> = (0..nb).collect();
        order.sort_by(|&x, &y| eig.eigenvalues[x].total_cmp(&eig.eigenvalues[y]));
        let ys: Vec<nalgebra::DVector<f64>> = order
            .iter()
            .map(|&k| linv.transpose() * eig.eigenvectors.column(k))
            .collect();
        let new = eig.eigenvalues[order[0]];
        // Residual of the Ritz vector x = G·y₁ (W-normalised by construction: yᵀKb y = 1).
        let mut num = 0.0;
        for i in 0..n {
            let mut x = 0.0;
            let mut fy = 0.0;
            for k in 0..nb {
                x += gs[k][i] * ys[0][k];
                fy += fs[k][i] * ys[0][k];
            }
            num += weights[i] * (fy - new * x).powi(2);
        }
        residual = num.sqrt() / new.abs();
        let change = ((new - lambda) / new).abs();
        lambda = new;
        // Next block: the Ritz vectors; warm starts A⁻¹W f ≈ f/μ for the next solves.
        let mut next: Vec<Vec<f64>> = vec![vec![0.0; n]; nb];
        for (col, y) in ys.iter().enumerate() {
            let out = &mut next[col];
            for (k, g) in gs.iter().enumerate() {
                let yk = y[k];
                for i in 0..n {
                    out[i] += yk * g[i];
                }
            }
        }
        for (col, &k) in order.iter().enumerate() {
            let mu = eig.eigenvalues[k];
            for i in 0..n {
                gs[col][i] = next[col][i] / mu;
            }
        }
        fs = next;
        // The change test only confirms a residual already near the target (with inexact
        // inner solves λ can pause before it has converged).
        let settled =
            change <= params.tolerance * params.tolerance && residual <= 10.0 * params.tolerance;
        if residual <= params.tolerance || settled {
            f.copy_from_slice(&fs[0]);
            return Ok(EigenInfo {
                eigenvalue: lambda,
                iterations: it,
                inner_iterations: inner,
                change: residual,
            });
        }
    }
    Err(fail(
        "block inverse iteration",
        params.max_iterations,
        residual,
    ))
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
        let mut f: Vec<f64> = (0..n)
            .map(|i| (i + 1) as f64 * h * (1.0 - (i + 1) as f64 * h))
            .collect();
        let mut solve = |b: &[f64], x: &mut [f64], p: &CgParams| pcg(&a, &Identity, b, x, p, "cg");
        let info =
            smallest_eigenpair(&w, &mut f, &mut solve, &EigenParams::default(), "test").unwrap();
        let exact = 4.0 / (h * h) * (std::f64::consts::PI * h / 2.0).sin().powi(2);
        assert!(
            (info.eigenvalue - exact).abs() / exact < 1e-9,
            "{} {}",
            info.eigenvalue,
            exact
        );
    }

    #[test]
    fn eigen_solve_reports_how_far_it_got() {
        let n = 63;
        let a = laplace_1d(n);
        let w = vec![1.0; n];
        let mut f = vec![1.0; n];
        let mut solve = |b: &[f64], x: &mut [f64], p: &CgParams| pcg(&a, &Identity, b, x, p, "cg");
        let params = EigenParams {
            max_iterations: 1,
            ..Default::default()
        };
        let e = smallest_eigenpair(&w, &mut f, &mut solve, &params, "test").unwrap_err();
        assert!(
            matches!(e, Error::NotConverged { iterations: 1, .. }),
            "{e}"
        );
        assert!(e.to_string().contains("relative residual"));
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
        assert!(matches!(e, Error::NotConverged { iterations: 5, .. }));
        assert!(e.to_string().contains("did not converge"));
    }
}
