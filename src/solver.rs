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

/// Smallest eigenpair of the symmetric definite pencil A·f = λ·W·f, W = diag(`weights`) > 0, by
/// block inverse iteration with a Rayleigh–Ritz step on two vectors (subspace iteration; Saad,
/// *Numerical Methods for Large Eigenvalue Problems*, 2011, ch. 5): G = A⁻¹·W·F, then the 2 × 2
/// pencil (GᵀW F, GᵀW G) gives the Ritz values and the next W-orthonormal F. The smallest Ritz
/// value converges at the ratio λ₁/λ₃, so a nearly degenerate pair (two passages, or one
/// nearly cut in two) does not stall it as it stalls plain inverse iteration. The residual of
/// the Ritz vector x = G·y costs no operator application: A·x = W·F·y, so
/// r = W·(F·y − λ·x); the iteration stops when ‖F·y − λ·x‖_W ≤ tolerance·‖λ·x‖_W (the
/// eigenvalue's error is then of the order of the square of that), or when λ stops changing
/// by more than the square of it. `solve(b, x, control)` solves A·x = b starting from x;
/// `f` holds the starting vector and returns the eigenvector.
pub fn smallest_eigenpair(
    weights: &[f64],
    f: &mut [f64],
    solve: &mut SolveFn<'_>,
    params: &EigenParams,
    method: &str,
) -> Result<EigenInfo> {
    use nalgebra::{Matrix2, SymmetricEigen};
    let n = f.len();
    let wdot = |a: &[f64], b: &[f64]| -> f64 {
        a.iter()
            .zip(b)
            .zip(weights)
            .map(|((x, y), w)| w * x * y)
            .sum::<f64>()
    };
    if wdot(f, f) == 0.0 {
        return Err(Error::NotConverged {
            method: format!("{method} (zero starting vector)"),
            iterations: 0,
            relative_residual: 1.0,
            tolerance: params.tolerance,
        });
    }
    // Second starting vector: the first modulated by a seeded pseudo-random sign pattern (a
    // fixed LCG, so runs repeat exactly).
    let mut seed: u64 = 0x2545_f491_4f6c_dd1d;
    let mut f2: Vec<f64> = f
        .iter()
        .map(|v| {
            seed = seed
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            v * (((seed >> 33) as f64 / (1u64 << 31) as f64) - 0.5)
        })
        .collect();
    let mut f1 = f.to_vec();
    let cg = CgParams {
        tolerance: params.inner_tolerance,
        max_iterations: CgParams::default().max_iterations,
    };
    let mut b = vec![0.0; n];
    let mut g1 = vec![0.0; n];
    let mut g2 = vec![0.0; n];
    let mut lambda = f64::NAN;
    let mut inner = 0;
    let mut residual = f64::INFINITY;
    for it in 1..=params.max_iterations {
        for (gv, fv) in [(&mut g1, &f1), (&mut g2, &f2)] {
            for i in 0..n {
                b[i] = weights[i] * fv[i];
            }
            let info = solve(&b, gv, &cg)?;
            inner += info.iterations;
        }
        // Rayleigh–Ritz on span{g1, g2}: Ka = GᵀW F (= GᵀA G), Kb = GᵀW G.
        let ka12 = 0.5 * (wdot(&g1, &f2) + wdot(&g2, &f1));
        let ka = Matrix2::new(wdot(&g1, &f1), ka12, ka12, wdot(&g2, &f2));
        let kb12 = wdot(&g1, &g2);
        let kb = Matrix2::new(wdot(&g1, &g1), kb12, kb12, wdot(&g2, &g2));
        let Some(chol) = kb.cholesky() else {
            return Err(Error::NotConverged {
                method: format!("{method} (the iteration vectors became dependent)"),
                iterations: it,
                relative_residual: residual,
                tolerance: params.tolerance,
            });
        };
        let l = chol.l();
        let Some(linv) = l.try_inverse() else {
            return Err(Error::NotConverged {
                method: format!("{method} (the iteration vectors became dependent)"),
                iterations: it,
                relative_residual: residual,
                tolerance: params.tolerance,
            });
        };
        let c = linv * ka * linv.transpose();
        let c = 0.5 * (c + c.transpose());
        let eig = SymmetricEigen::new(c);
        let (i_min, i_max) = if eig.eigenvalues[0] <= eig.eigenvalues[1] {
            (0, 1)
        } else {
            (1, 0)
        };
        let y1 = linv.transpose() * eig.eigenvectors.column(i_min);
        let y2 = linv.transpose() * eig.eigenvectors.column(i_max);
        let new = eig.eigenvalues[i_min];
        // Residual of the Ritz vector x = G·y1 (W-normalised by construction: yᵀKb y = 1).
        let mut num = 0.0;
        for i in 0..n {
            let x = g1[i] * y1[0] + g2[i] * y1[1];
            let fy = f1[i] * y1[0] + f2[i] * y1[1];
            num += weights[i] * (fy - new * x).powi(2);
        }
        residual = num.sqrt() / new.abs();
        let change = ((new - lambda) / new).abs();
        lambda = new;
        // Next block: the two Ritz vectors.
        for i in 0..n {
            let (a1, a2) = (g1[i], g2[i]);
            f1[i] = a1 * y1[0] + a2 * y1[1];
            f2[i] = a1 * y2[0] + a2 * y2[1];
        }
        // Warm starts for the next solves: A⁻¹W f ≈ f/λ.
        for i in 0..n {
            g1[i] = f1[i] / lambda;
            g2[i] = f2[i] / eig.eigenvalues[i_max];
        }
        if residual <= params.tolerance || change <= params.tolerance * params.tolerance {
            f.copy_from_slice(&f1);
            return Ok(EigenInfo {
                eigenvalue: lambda,
                iterations: it,
                inner_iterations: inner,
                change: residual,
            });
        }
    }
    Err(Error::NotConverged {
        method: format!("{method} (block inverse iteration)"),
        iterations: params.max_iterations,
        relative_residual: residual,
        tolerance: params.tolerance,
    })
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
