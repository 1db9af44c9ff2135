//! Independent reference for the hydrodynamic entrance of the round tube: steady laminar
//! incompressible flow from a uniform inlet velocity, parabolised (boundary-layer form: no
//! axial diffusion, pressure uniform over each cross-section), constant properties,
//! axisymmetric, no swirl.
//!
//! This file uses nothing from canalis (std only) so that it can serve as an independent check
//! of the 2-D march. It is included by tests with
//! `#[path = "reference/pipe_developing.rs"] mod pipe_developing;`. Its own checks live in
//! `tests/pipe_developing_check.rs`.
//!
//! # Problem
//!
//! X = x/(D·Re) (Re = ū·D/ν), U = u/ū, r in units of D (0 ≤ r ≤ ½), P = p/(ρū²),
//! V = (radial velocity)·Re/ū:
//!
//! ```text
//!     U ∂U/∂X + V ∂U/∂r = G(X) + (1/r) ∂/∂r (r ∂U/∂r),     G = −dP/dX,
//!     ∂U/∂X + (1/r) ∂(rV)/∂r = 0,        V(0) = V(½) = 0,
//!     U(½) = 0,  ∂U/∂r(0) = 0,  U = 1 at X = 0,  ∫₀^½ U r dr = 1/8 at every X.
//! ```
//!
//! Fully developed: U = 2(1 − 4r²), G = 32 (f·Re = 16).
//! Outputs: Δ(X) = P(0) − P(X); apparent Fanning friction f_app·Re = Δ/(2X); incremental
//! pressure drop K(X) = 2Δ − 64X and K(∞); centreline velocity U_c(X); L+ = the X at which
//! U_c first reaches 0.99·2.
//!
//! # Scheme
//!
//! * Radial grid r_j = ½(1 − (1 − j/N)^p), j = 0…N, p = [`Resolution::stretch`] (3): a
//!   smooth mapping, spacing ½p/N at the axis and ½/N^p at the wall (2.4e-9 for N = 800).
//! * Viscous term: vertex-centred finite volumes, faces at the mid-points between nodes,
//!   two-point face fluxes r_f(U_{j+1} − U_j)/(r_{j+1} − r_j) divided by the cell area
//!   (r₊² − r₋²)/2; on the axis 4(U₁ − U₀)/r₁². This is exact for the parabola, so the
//!   discrete fully developed state has G = 32 up to the O(N⁻²) error of the mass quadrature
//!   (G = 32.000116 for N = 800). Convection V ∂U/∂r: central differences.
//! * Continuity: Φ = rV is integrated from the axis with the trapezoidal rule,
//!   Φ_j = Φ_{j−1} − ½(r_j − r_{j−1})(r_{j−1}W_{j−1} + r_j W_j), W = ∂U/∂X of the step;
//!   Φ₀ = 0. The wall condition Φ_N = 0 is the discrete mass constraint (the trapezoidal
//!   ∫U r dr keeps its inlet value 1/8 exactly) and determines G.
//! * March in X: the inlet profile (U = 1 except U_N = 0, scaled to the discrete mass 1/8),
//!   steps of constant size X₁ = [`Resolution::x_first`] (10⁻¹⁵) while εX < X₁, then
//!   geometric stations X_{n+1} = (1 + ε)X_n, ε = [`Resolution::growth`] (0.01), up to
//!   X = [`Resolution::x_end`] (1). The first 1 + [`Resolution::euler_steps`] (2) steps are
//!   backward Euler, then variable-step BDF2 (L-stable; ∂U/∂X ≈ [(1+2ω)/(1+ω) Uⁿ⁺¹ −
//!   (1+ω) Uⁿ + ω²/(1+ω) Uⁿ⁻¹]/ΔX, ω = ΔXₙ₊₁/ΔXₙ). The impulsive start (one implicit step
//!   over the wall jump makes a layer several times thicker than the true one) acts like a
//!   shift of the virtual origin by ~100·X₁; its effect decays like X₁/X (below).
//! * Each step is solved by Newton's method on all unknowns (U_j, Φ_j, G) with the exact
//!   Jacobian: with z_j = (U_j, Φ_j) the system is 2×2 block-tridiagonal, bordered by the
//!   column of G and the row Φ_N = 0; it is solved by block elimination for two right-hand
//!   sides (superposition in δG). Predictor: linear extrapolation from the last two
//!   stations (the previous station during the Euler start). Updates with |δU| > 0.25 are
//!   damped (only in the first steps). Converged to |δU| < 1e-13, |δG| < 1e-12|G|: about 3
//!   iterations per step on average, at most 15 (first step).
//! * Pressure drop without the inlet singularity (G ~ 3.44 X^{−1/2}): on the axis V = 0 and
//!   the momentum equation reads U_c U_c′ = G + L₀ (L₀ the axial Laplacian, zero while the
//!   core is inviscid), so Δ(X) = (U_c(X)² − U_c(0)²)/2 − ∫₀^X L₀ dX, the integral by the
//!   trapezoidal rule over the stations (L₀ is smooth and vanishes near the inlet). The
//!   direct trapezoidal integral of the steps' G from X = 10⁻³ is kept as a cross-check
//!   ([`Solution::delta_from_g`]).
//! * K(∞) = 2(Δ − G_fd X) at X = 1 with the discrete fully developed G_fd of the last step
//!   (removes the O(N⁻²)·X drift of 2Δ − 64X; [`Solution::k_end`] gives the uncorrected
//!   value, 1.24759 vs 1.24736). L+: first crossing of U_c = 1.98, located by bisection on
//!   the interpolant.
//! * Between stations: cubic Lagrange interpolation in ln X of ln Δ and U_c. Beyond X_end the
//!   flow is taken as fully developed (Δ grows by 32 per unit X, U_c = 2).
//!
//! Formal order: 2 in 1/N and 2 in ε.
//!
//! # Convergence (measured by `tests/pipe_developing_check.rs`, release build)
//!
//! Standard resolution N = 800, ε = 0.01 (3109 stations, ≈ 0.5 s); refined N = 1600,
//! ε = √1.01 − 1 (≈ 2 s); twice refined N = 3200, ε = 1.01^¼ − 1 (≈ 7 s). Relative changes
//! (standard → refined / refined → twice refined):
//!
//! ```text
//!     f_app·Re  X = 1e-6: 2.5e-6 / 9.0e-7     X = 1e-5: 4.0e-6 / 1.1e-6
//!               X = 1e-4: 7.4e-6 / 1.9e-6     X = 1e-3: 4.6e-6 / 1.1e-6
//!               X = 1e-2: 1.1e-6 / 2.7e-7     X = 1e-1: 1.2e-5 / 3.1e-6
//!     K(∞):     6.4e-5 / 1.6e-5   (1.247363, 1.247284, 1.247264)
//!     L+:       1.8e-4 / 4.6e-5   (0.055325, 0.055335, 0.055338)
//! ```
//!
//! i.e. second-order convergence (ratio ≈ 4); the standard resolution is within ~2.5e-4 of
//! the converged values (Richardson: K(∞) = 1.24726, L+ = 0.055339), far inside the 0.2 %
//! target. Start-up: moving X₁ from 10⁻¹⁵ to 10⁻¹⁴ changes f_app·Re by 3.7e-6 at X = 1e-5,
//! 3.7e-5 at 1e-6, 3.7e-4 at 1e-7 (∝ X₁/X), so with X₁ = 10⁻¹⁵ the start-up error is
//! ≲ 4e-6 for X ≥ 1e-6 and ≲ 4e-5 at X = 1e-7 (use X ≥ 1e-7). The discrete mass is kept to
//! 1e-14; the directly integrated ∫G agrees with Δ(1) = 32.6238 to 9e-5 (2.2e-5, 5.5e-6 at the
//! finer levels); the profile at X = 1 is 2(1 − 4r²) to 7e-6.
//!
//! Values (standard resolution): K(∞) = 1.2474, L+ = 0.05533, f_app·Re·√X = 3.4399 at
//! X = 1e-7 (→ 3.4416 = 2 × 1.7208, the Blasius value, as X → 0), f_app·Re = 1083.21,
//! 341.000, 109.017, 38.409, 19.116 at X = 1e-5, 1e-4, 1e-3, 1e-2, 1e-1.
//!
//! # Public API
//!
//! [`developing`]`(&[X]) -> Vec<`[`Point`]`>` (fields x, delta_p, f_app_re, k, u_centre),
//! [`k_infinity`], [`length_plus`] (all at [`Resolution::STANDARD`], computed once and
//! cached, [`standard`]); [`Solution::solve`]`(`[`Resolution`]`)` for other resolutions
//! ([`Resolution::refined`] halves the radial spacing and the logarithmic step), with
//! [`Solution::at`], [`Solution::k_infinity`], [`Solution::length_plus`] and the raw station
//! data; [`Solution::solve_observed`] runs the same march and hands every converged step
//! ([`Step`]: X, ΔX, the scheme, U of the new and the previous station) to an observer (the
//! energy march of `pipe_combined.rs` for simultaneously developing flow).
//!
//! Sources of the model (cited from memory; no code or tables copied): the boundary-layer
//! (parabolised) form of the entrance problem as solved numerically by R. W. Hornbeck (1964,
//! Appl. Sci. Res.) and as reviewed by R. K. Shah & A. L. London (1978, *Laminar Flow Forced
//! Convection in Ducts*).

use std::sync::OnceLock;

/// Numerical resolution of the march.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Resolution {
    /// Number of radial intervals N.
    pub n_radial: usize,
    /// Exponent p of the wall clustering r = ½(1 − (1 − s)^p).
    pub stretch: f64,
    /// Step growth ε: X_{n+1} = X_n + max(εX_n, X₁) (geometric once εX_n > X₁).
    pub growth: f64,
    /// First station X₁, also the size of the steps while εX < X₁.
    pub x_first: f64,
    /// Last station.
    pub x_end: f64,
    /// Backward-Euler steps after the first one before BDF2 takes over.
    pub euler_steps: usize,
}

impl Resolution {
    /// The resolution used by [`developing`], [`k_infinity`] and [`length_plus`].
    pub const STANDARD: Resolution = Resolution {
        n_radial: 800,
        stretch: 3.0,
        growth: 0.01,
        x_first: 1e-15,
        x_end: 1.0,
        euler_steps: 2,
    };

    /// Twice the radial points and half the logarithmic step (same X₁, so the uniform
    /// start-up steps extend twice as far).
    pub fn refined(self) -> Resolution {
        Resolution {
            n_radial: 2 * self.n_radial,
            growth: (1.0 + self.growth).sqrt() - 1.0,
            ..self
        }
    }
}

/// One output point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Point {
    /// X = x/(D·Re).
    pub x: f64,
    /// Δ = (p(0) − p(x))/(ρū²).
    pub delta_p: f64,
    /// Apparent Fanning friction factor times Re, Δ/(2X).
    pub f_app_re: f64,
    /// Incremental pressure drop K(X) = 2Δ − 64X.
    pub k: f64,
    /// Centre-line velocity u_c/ū.
    pub u_centre: f64,
}

/// The marched solution at its stations.
#[derive(Clone, Debug)]
pub struct Solution {
    pub resolution: Resolution,
    /// Stations X_n, n = 0 is the inlet X = 0.
    pub x: Vec<f64>,
    /// Δ(X_n) from the axis relation (see the module documentation).
    pub delta: Vec<f64>,
    /// Δ from X = 10⁻³ by the trapezoidal integral of G (cross-check; NaN before).
    pub delta_from_g: Vec<f64>,
    /// Centre-line velocity.
    pub u_centre: Vec<f64>,
    /// Pressure gradient G = −dP/dX of each step.
    pub gradient: Vec<f64>,
    /// Largest number of Newton iterations in a step, and the total.
    pub newton_max: usize,
    pub newton_total: usize,
    /// max |∫U r dr − 1/8| (trapezoidal) over the march.
    pub mass_error: f64,
    /// Velocity profile at the last station, with its radii.
    pub r: Vec<f64>,
    pub u_last: Vec<f64>,
}

type M2 = [f64; 4]; // [a00, a01, a10, a11]

fn inv2(m: &M2) -> M2 {
    let det = m[0] * m[3] - m[1] * m[2];
    assert!(det != 0.0 && det.is_finite(), "singular 2x2 block");
    [m[3] / det, -m[1] / det, -m[2] / det, m[0] / det]
}

fn mul2(a: &M2, b: &M2) -> M2 {
    [
        a[0] * b[0] + a[1] * b[2],
        a[0] * b[1] + a[1] * b[3],
        a[2] * b[0] + a[3] * b[2],
        a[2] * b[1] + a[3] * b[3],
    ]
}

fn mv2(a: &M2, v: [f64; 2]) -> [f64; 2] {
    [a[0] * v[0] + a[1] * v[1], a[2] * v[0] + a[3] * v[1]]
}

/// One converged step of the march, as handed to the observer of
/// [`Solution::solve_observed`] (used by the energy march of `pipe_combined.rs`).
pub struct Step<'a> {
    /// Step number, 0 for the first step (from the inlet X = 0).
    pub index: usize,
    /// The new station X_{n+1} and the step ΔX = X_{n+1} − X_n.
    pub x: f64,
    pub dx: f64,
    /// Whether this step is BDF2 (otherwise backward Euler).
    pub bdf2: bool,
    /// The radial nodes.
    pub r: &'a [f64],
    /// U at X_{n+1} (converged) and at X_n (for the first step the inlet profile).
    pub u: &'a [f64],
    pub u_n: &'a [f64],
}

impl Solution {
    /// March the entrance problem at resolution `res`.
    pub fn solve(res: Resolution) -> Solution {
        Self::solve_observed(res, |_| {})
    }

    /// March the entrance problem at resolution `res`, calling `observer` after every
    /// converged step (the march itself is the same as [`Self::solve`]).
    pub fn solve_observed(res: Resolution, mut observer: impl FnMut(&Step)) -> Solution {
        let n = res.n_radial;
        assert!(n >= 8 && res.growth > 0.0 && res.x_first > 0.0 && res.x_end > res.x_first);
        let r: Vec<f64> = (0..=n)
            .map(|j| {
                if j == n {
                    0.5
                } else {
                    0.5 * (1.0 - (1.0 - j as f64 / n as f64).powf(res.stretch))
                }
            })
            .collect();
        // Finite-volume Laplacian coefficients: L_j = lp_j (U_{j+1} − U_j) − lm_j (U_j − U_{j−1}).
        let mut lp = vec![0.0; n + 1];
        let mut lm = vec![0.0; n + 1];
        lp[0] = 4.0 / (r[1] * r[1]);
        for j in 1..n {
            let fp = 0.5 * (r[j] + r[j + 1]);
            let fm = 0.5 * (r[j - 1] + r[j]);
            let area = 0.5 * (fp * fp - fm * fm);
            lp[j] = fp / ((r[j + 1] - r[j]) * area);
            lm[j] = fm / ((r[j] - r[j - 1]) * area);
        }
        // Trapezoidal weights of ∫ U r dr, and the half-interval weights of the Φ recursion.
        let mut w = vec![0.0; n + 1];
        for j in 1..=n {
            let h = 0.5 * (r[j] - r[j - 1]);
            w[j - 1] += h * r[j - 1];
            w[j] += h * r[j];
        }
        let mass = |u: &[f64]| -> f64 { u.iter().zip(&w).map(|(a, b)| a * b).sum() };

        // Inlet: uniform, scaled so that the discrete mass is exactly 1/8.
        let mut u_in = vec![1.0; n + 1];
        u_in[n] = 0.0;
        let scale = 0.125 / mass(&u_in);
        for v in u_in.iter_mut() {
            *v *= scale;
        }
        let uc0 = u_in[0];

        let mut xs = vec![0.0];
        let mut delta = vec![0.0];
        let mut delta_g = vec![f64::NAN];
        let mut ucs = vec![uc0];
        let mut gs = vec![0.0];
        let x_check = 1e-3;
        let mut lap_integral = 0.0;
        let mut lap_prev = 0.0;

        let mut u_nm1 = u_in.clone(); // U^{n−1}
        let mut u_n = u_in.clone(); // U^n
        let mut g_nm1 = 0.0;
        let mut g_n = 0.0;
        let mut dx_prev = 0.0;
        let mut x_n = 0.0;
        let mut step = 0usize;
        let mut newton_max = 0;
        let mut newton_total = 0;
        let mut mass_error: f64 = 0.0;

        // Work arrays.
        let mut u = vec![0.0; n + 1];
        let mut phi = vec![0.0; n + 1];
        let mut hist = vec![0.0; n + 1];
        let mut wx = vec![0.0; n + 1];
        let mut a_blk = vec![[0.0; 4]; n + 1];
        let mut b_blk = vec![[0.0; 4]; n + 1];
        let mut c_blk = vec![0.0; n + 1]; // only the (0,0) entry is nonzero
        let mut rhs1 = vec![[0.0; 2]; n + 1];
        let mut rhs2 = vec![[0.0; 2]; n + 1];
        let mut binv = vec![[0.0; 4]; n + 1];
        let mut z1 = vec![[0.0; 2]; n + 1];
        let mut z2 = vec![[0.0; 2]; n + 1];

        loop {
            // Uniform steps of X₁ until they are ε·X, geometric steps after.
            let x_new = x_n + (res.growth * x_n).max(res.x_first);
            let x_new = if x_new > res.x_end * (1.0 - 1e-12) {
                res.x_end
            } else {
                x_new
            };
            let dx = x_new - x_n;
            // Time-derivative coefficients: W = c0·U + hist.
            let bdf2 = step > res.euler_steps;
            let c0;
            if bdf2 {
                let om = dx / dx_prev;
                let alpha = (1.0 + 2.0 * om) / (1.0 + om);
                let beta = -(1.0 + om);
                let gamma = om * om / (1.0 + om);
                c0 = alpha / dx;
                for j in 0..=n {
                    hist[j] = (beta * u_n[j] + gamma * u_nm1[j]) / dx;
                }
            } else {
                c0 = 1.0 / dx;
                for j in 0..=n {
                    hist[j] = -u_n[j] / dx;
                }
            }
            // Predictor.
            let mut g;
            if step > res.euler_steps {
                let q = dx / dx_prev;
                for j in 0..=n {
                    u[j] = u_n[j] + q * (u_n[j] - u_nm1[j]);
                }
                g = g_n + q * (g_n - g_nm1);
            } else {
                // Near the impulsive start extrapolation is a poor guess.
                u.copy_from_slice(&u_n);
                g = g_n;
            }
            u[n] = 0.0;

            let mut its = 0;
            loop {
                its += 1;
                assert!(its <= 40, "Newton did not converge at X = {x_new:e}");
                for j in 0..=n {
                    wx[j] = c0 * u[j] + hist[j];
                }
                // Φ of the current iterate (the continuity residuals are then zero, and
                // the recursion keeps Φ consistent with U exactly).
                phi[0] = 0.0;
                for j in 1..=n {
                    phi[j] = phi[j - 1]
                        - 0.5 * (r[j] - r[j - 1]) * (r[j - 1] * wx[j - 1] + r[j] * wx[j]);
                }
                // Block rows.
                // Row 0: (R_0, Φ_0 = 0).
                {
                    let res0 = u[0] * wx[0] - g - lp[0] * (u[1] - u[0]);
                    a_blk[0] = [0.0; 4];
                    b_blk[0] = [wx[0] + c0 * u[0] + lp[0], 0.0, 0.0, 1.0];
                    c_blk[0] = -lp[0];
                    rhs1[0] = [-res0, -phi[0]];
                    rhs2[0] = [1.0, 0.0];
                }
                for j in 1..n {
                    let d = r[j + 1] - r[j - 1];
                    let v = phi[j] / r[j];
                    let du = (u[j + 1] - u[j - 1]) / d;
                    let lap = lp[j] * (u[j + 1] - u[j]) - lm[j] * (u[j] - u[j - 1]);
                    let resm = u[j] * wx[j] + v * du - g - lap;
                    let h = 0.5 * (r[j] - r[j - 1]);
                    a_blk[j] = [-v / d - lm[j], 0.0, h * r[j - 1] * c0, -1.0];
                    b_blk[j] = [
                        wx[j] + c0 * u[j] + lp[j] + lm[j],
                        du / r[j],
                        h * r[j] * c0,
                        1.0,
                    ];
                    c_blk[j] = v / d - lp[j];
                    // Continuity residual is zero by construction of Φ.
                    rhs1[j] = [-resm, 0.0];
                    rhs2[j] = [1.0, 0.0];
                }
                {
                    let h = 0.5 * (r[n] - r[n - 1]);
                    a_blk[n] = [0.0, 0.0, h * r[n - 1] * c0, -1.0];
                    b_blk[n] = [1.0, 0.0, h * r[n] * c0, 1.0];
                    c_blk[n] = 0.0;
                    rhs1[n] = [-u[n], 0.0];
                    rhs2[n] = [0.0, 0.0];
                }
                // Block elimination, two right-hand sides.
                binv[0] = inv2(&b_blk[0]);
                for j in 1..=n {
                    let m = mul2(&a_blk[j], &binv[j - 1]);
                    let mut bp = b_blk[j];
                    bp[0] -= m[0] * c_blk[j - 1];
                    bp[2] -= m[2] * c_blk[j - 1];
                    binv[j] = inv2(&bp);
                    let y1 = mv2(&m, rhs1[j - 1]);
                    let y2 = mv2(&m, rhs2[j - 1]);
                    rhs1[j] = [rhs1[j][0] - y1[0], rhs1[j][1] - y1[1]];
                    rhs2[j] = [rhs2[j][0] - y2[0], rhs2[j][1] - y2[1]];
                }
                z1[n] = mv2(&binv[n], rhs1[n]);
                z2[n] = mv2(&binv[n], rhs2[n]);
                for j in (0..n).rev() {
                    let t1 = [rhs1[j][0] - c_blk[j] * z1[j + 1][0], rhs1[j][1]];
                    let t2 = [rhs2[j][0] - c_blk[j] * z2[j + 1][0], rhs2[j][1]];
                    z1[j] = mv2(&binv[j], t1);
                    z2[j] = mv2(&binv[j], t2);
                }
                // Φ_N + δΦ_N = 0 fixes δG.
                let dg = -(phi[n] + z1[n][1]) / z2[n][1];
                let mut du_max: f64 = 0.0;
                for j in 0..=n {
                    du_max = du_max.max((z1[j][0] + dg * z2[j][0]).abs());
                }
                // Damping of large updates (only ever active in the first steps).
                let damp = if du_max > 0.25 { 0.25 / du_max } else { 1.0 };
                for j in 0..=n {
                    u[j] += damp * (z1[j][0] + dg * z2[j][0]);
                }
                let dg = damp * dg;
                g += dg;
                if du_max < 1e-13 && dg.abs() < 1e-12 * g.abs().max(1.0) {
                    break;
                }
            }
            newton_max = newton_max.max(its);
            newton_total += its;
            mass_error = mass_error.max((mass(&u) - 0.125).abs());

            // Diagnostics.
            let lap0 = lp[0] * (u[1] - u[0]);
            lap_integral += 0.5 * (lap0 + lap_prev) * dx;
            lap_prev = lap0;
            let uc = u[0];
            let d_now = 0.5 * (uc * uc - uc0 * uc0) - lap_integral;
            let dg_now = match delta_g.last() {
                Some(&prev) if prev.is_finite() => prev + 0.5 * (g + g_n) * dx,
                _ if x_new >= x_check => d_now,
                _ => f64::NAN,
            };
            xs.push(x_new);
            delta.push(d_now);
            delta_g.push(dg_now);
            ucs.push(uc);
            gs.push(g);
            observer(&Step {
                index: step,
                x: x_new,
                dx,
                bdf2,
                r: &r,
                u: &u,
                u_n: &u_n,
            });

            // Shift levels.
            std::mem::swap(&mut u_nm1, &mut u_n);
            u_n.copy_from_slice(&u);
            g_nm1 = g_n;
            g_n = g;
            dx_prev = dx;
            x_n = x_new;
            step += 1;
            if x_new >= res.x_end {
                break;
            }
        }
        Solution {
            resolution: res,
            x: xs,
            delta,
            delta_from_g: delta_g,
            u_centre: ucs,
            gradient: gs,
            newton_max,
            newton_total,
            mass_error,
            r,
            u_last: u_n,
        }
    }

    /// Index i such that the cubic through stations i−1 … i+2 (clipped to 1…last) is used.
    fn stencil(&self, x: f64) -> [usize; 4] {
        let last = self.x.len() - 1;
        // First station ≥ x among 1..=last.
        let k = self.x[1..].partition_point(|&s| s < x) + 1;
        let k = k.clamp(1, last);
        let lo = (k as isize - 2).clamp(1, last as isize - 3) as usize;
        [lo, lo + 1, lo + 2, lo + 3]
    }

    fn interp(&self, x: f64, f: impl Fn(usize) -> f64) -> f64 {
        let idx = self.stencil(x);
        let t = x.ln();
        let ts: Vec<f64> = idx.iter().map(|&i| self.x[i].ln()).collect();
        let mut s = 0.0;
        for a in 0..4 {
            let mut l = 1.0;
            for b in 0..4 {
                if a != b {
                    l *= (t - ts[b]) / (ts[a] - ts[b]);
                }
            }
            s += l * f(idx[a]);
        }
        s
    }

    /// Values at an arbitrary X ≥ X₁ (for X > X_end the flow is fully developed).
    pub fn at(&self, x: f64) -> Point {
        assert!(
            x >= self.x[1],
            "X = {x:e} is below the first station {:e}",
            self.x[1]
        );
        let x_end = *self.x.last().unwrap();
        let (delta_p, u_centre) = if x > x_end {
            (*self.delta.last().unwrap() + 32.0 * (x - x_end), 2.0)
        } else {
            (
                self.interp(x, |i| self.delta[i].ln()).exp(),
                self.interp(x, |i| self.u_centre[i]),
            )
        };
        Point {
            x,
            delta_p,
            f_app_re: delta_p / (2.0 * x),
            k: 2.0 * delta_p - 64.0 * x,
            u_centre,
        }
    }

    /// K(∞) = lim (2Δ − 2G_fd X) with the discrete fully developed gradient G_fd (the
    /// gradient of the last step, 32 + O(N⁻²)): 2(Δ − G X) at the last station. This removes
    /// the O(N⁻²)·X drift that 2Δ − 64X has at the last station (see [`Self::k_end`]).
    pub fn k_infinity(&self) -> f64 {
        let x = *self.x.last().unwrap();
        2.0 * (self.delta.last().unwrap() - self.final_gradient() * x)
    }

    /// K = 2Δ − 64X at the last station (uncorrected; differs from [`Self::k_infinity`] by
    /// 2(G_fd − 32)X_end).
    pub fn k_end(&self) -> f64 {
        let x = *self.x.last().unwrap();
        2.0 * self.delta.last().unwrap() - 64.0 * x
    }

    /// L+: the X where U_c first reaches 1.98 (interpolated; bisection on the cubic).
    pub fn length_plus(&self) -> f64 {
        let target = 0.99 * 2.0;
        let k = self
            .u_centre
            .iter()
            .position(|&u| u >= target)
            .expect("centre-line velocity never reaches 0.99·2");
        let (mut lo, mut hi) = (self.x[k - 1].ln(), self.x[k].ln());
        for _ in 0..100 {
            let mid = 0.5 * (lo + hi);
            if self.interp(mid.exp(), |i| self.u_centre[i]) < target {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        (0.5 * (lo + hi)).exp()
    }

    /// The pressure gradient of the last step (→ 32).
    pub fn final_gradient(&self) -> f64 {
        *self.gradient.last().unwrap()
    }
}

/// The solution at [`Resolution::STANDARD`], computed once.
pub fn standard() -> &'static Solution {
    static S: OnceLock<Solution> = OnceLock::new();
    S.get_or_init(|| Solution::solve(Resolution::STANDARD))
}

/// Δ, f_app·Re, K and U_c at the given X (standard resolution). Each X must be ≥ X₁ = 1e-15;
/// the values are accurate to ~1e-5 for X ≥ 1e-6 and ~1e-4 at X = 1e-7 (start-up error).
pub fn developing(x: &[f64]) -> Vec<Point> {
    let s = standard();
    x.iter().map(|&x| s.at(x)).collect()
}

/// K(∞) (standard resolution).
pub fn k_infinity() -> f64 {
    standard().k_infinity()
}

/// L+ = X at which u_c/ū = 1.98 (standard resolution).
pub fn length_plus() -> f64 {
    standard().length_plus()
}
