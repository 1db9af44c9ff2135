//! Independent reference for simultaneously developing laminar flow in the round tube: uniform
//! inlet velocity AND uniform inlet temperature, the energy equation marched together with the
//! developing (parabolised) velocity of `pipe_developing.rs`, for the T condition (uniform wall
//! temperature) and the H condition (axially uniform wall heat flux; in the round tube
//! H1 = H2 by symmetry), at a given Prandtl number. No axial conduction, constant properties,
//! no viscous dissipation.
//!
//! Like `pipe_developing.rs` this file uses nothing from canalis (std only). It needs that
//! module as a sibling: include both with
//!
//! ```text
//! #[path = "reference/pipe_developing.rs"] mod pipe_developing;
//! #[path = "reference/pipe_combined.rs"] mod pipe_combined;
//! ```
//!
//! Its own checks live in `tests/pipe_developing_check.rs`.
//!
//! # Problem
//!
//! X = x/(D·Re), x* = x/(D·Re·Pr) = X/Pr, r in units of D (0 ≤ r ≤ ½), U = u/ū and
//! V = (radial velocity)·Re/ū from the momentum march. The energy equation in conservation
//! form (using continuity ∂(rU)/∂X + ∂(rV)/∂r = 0):
//!
//! ```text
//!     ∂(rUθ)/∂X + ∂(rVθ)/∂r = (1/Pr) ∂/∂r (r ∂θ/∂r),     ∂θ/∂r(0) = 0.
//! ```
//!
//! * **T**: θ = (T − T_w)/(T_in − T_w), θ = 1 at X = 0, θ(½) = 0. Bulk
//!   θ_b = 8∫₀^½ Uθ r dr (∫U r dr = 1/8). Nu_x,T = −(∂θ/∂r)_w/θ_b (h = q_w/(T_w − T_b),
//!   Nu = hD/k with r in units of D). Integrating the equation over the section gives
//!   dθ_b/dx* = 4(∂θ/∂r)_w, so Nu_x,T = −¼ d ln θ_b/dx* and Nu_m,T = −ln θ_b/(4x*).
//! * **H**: Θ = (T − T_in)k/(qD), Θ = 0 at X = 0, ∂Θ/∂r(½) = 1. The same integration gives
//!   dΘ_b/dx* = 4, i.e. Θ_b = 4x* exactly. Nu_x,H = 1/(Θ_w − Θ_b),
//!   Nu_m,H = (1/x*)∫₀^x* Nu_x,H dx*.
//!
//! Limits: far downstream the Graetz values 3.6568 (T) and 48/11 (H); at the inlet the layers
//! are thin and the core velocity is ū, so Nu_x·√X tends to the flat-plate similarity value
//! (Blasius velocity, Pohlhausen temperature; [`plate_limit`]).
//!
//! # Scheme
//!
//! The momentum march of `pipe_developing.rs` is run unchanged
//! ([`Solution::solve_observed`]); after each of its converged steps the energy equation is
//! advanced over the same step, on the same radial nodes r_j and with the same time
//! discretisation (backward Euler for the first steps, then variable-step BDF2 with the same
//! switch), for both boundary conditions. Given U of the step the equation is linear in θ:
//! one tridiagonal solve per condition and step.
//!
//! * Vertex-centred finite volumes: faces at the mid-points f_{j+½} = (r_j + r_{j+1})/2, exact
//!   annulus areas A_j = (f_{j+½}² − f_{j−½}²)/2 (axis cell: f_½²/2; wall half-cell:
//!   (¼ − f_{N−½}²)/2), diffusive face fluxes f_{j+½}(θ_{j+1} − θ_j)/(r_{j+1} − r_j) (the
//!   same operator as the viscous term of the momentum march), convective face fluxes
//!   F_{j+½}·(θ_j + θ_{j+1})/2 (central).
//! * Face mass fluxes F_{j+½} = (rV) at f_{j+½} follow from the discrete continuity of the
//!   annuli, F_{j+½} = F_{j−½} − A_j Ŵ_j (F_{−½} = 0), with Ŵ the BDF2 (or Euler) derivative of
//!   the velocity Û of the levels involved. Û is U rescaled by (1/8)/Σ A_j U_j: the momentum
//!   march holds the trapezoidal flow rate at exactly 1/8, the annulus sum differs from it by
//!   O(N⁻²) (≈ 1e-6); with the rescaled Û, ΣA_jŴ_j = 0 and F vanishes at the wall to round-off.
//!   Storage A_j·D(Ûθ)_j with the same BDF2 operator D. The scheme is therefore exactly
//!   conservative: the sum of all rows is D(ΣAÛθ) = (wall flux)/Pr, so Θ_b = 8ΣAÛΘ = 4x* up
//!   to round-off (BDF2 and Euler integrate a constant rate exactly; measured 1.4e-7, below),
//!   and a uniform θ is kept uniform by the convective terms.
//! * Wall: T: θ_N = 0, and the wall gradient (∂θ/∂r)_w is taken from the balance of the wall
//!   half-cell (the wall flux that the conservative scheme actually lets in); H: the wall
//!   half-cell receives the flux ½·1 (r_w·∂Θ/∂r).
//! * Inlet: θ = 1 (T; θ_N = 0 at once), Θ = 0 (H), started with the tiny uniform steps of the
//!   momentum march. [`THERMAL_RESOLUTION`] uses X₁ = 1e-16 (the momentum standard has 1e-15):
//!   the start-up error of the local Nu is ∝ X₁/X (and grows with N: with X₁ = 1e-15 it was
//!   2e-4 at X = 1e-8 for N = 800, 1.6e-3 for N = 1600).
//! * Steps: the 1 % steps of the momentum march are sub-divided (Û interpolated linearly in
//!   X; the flow rate stays 1/8) where they exceed Δx* = [`STEP_FACTOR`]·ε = 5e-4, i.e. for
//!   x* ≳ 0.05: far downstream θ_b decays like e^{−14.6x*} and BDF2 misrepresents that decay
//!   by ≈ (14.6h)²/3 relative per unit of 14.6x* (with the 1 % steps alone −ln θ_b/(4x*) was
//!   0.3 % off at x* = 1).
//! * After the last momentum station (X = 1) the velocity is frozen (it is the parabola to
//!   7e-6 there) and the energy march continues alone (V = 0) with steps
//!   min(εX, 2ΔX_prev, Pr·5e-4) up to X = Pr·x*_end.
//! * Means: Nu_m = (1/x*)∫₀^x* Nu_x dx* for both conditions ([`integrate`]: trapezoidal rule
//!   over the stations from X = [`X_MATCH`] = 1e-7, below it the inlet law a/√X + b matched
//!   at 1e-7 and 4e-7). For T this equals −ln θ_b/(4x*) in the exact problem; the discrete
//!   −ln θ_b/(4x*) ([`ThermalSolution::nu_t_mean_balance`], 1 − θ_b = 8ΣAÛ(1 − θ) summed
//!   directly) is kept as a cross-check: the two agree to ≤ 2.3e-5 for x* ≥ 1e-4 (≤ 3.6e-5
//!   for x* ≥ 1e-6). The integrated local values are the more accurate of the two: at
//!   Pr = 1e4, x* = 0.05 … 1 they differ from the exact Graetz mean by −3e-6 … −7e-6, the
//!   balance by +1.3e-5 … +1.5e-5 (BDF2 error of the decay of θ_b), and near the inlet θ_b
//!   carries a start-up error decaying only like X^{−½}.
//! * Between stations: cubic Lagrange interpolation in ln x* of ln Nu.
//!
//! Formal order 2 in 1/N and in ε.
//!
//! # Accuracy and values (measured by `tests/pipe_developing_check.rs`, release build)
//!
//! Standard → refined (N = 1600, ε = √1.01 − 1), largest relative change of the four Nusselt
//! numbers at x* = 1e-4, 1e-3, 1e-2, 1e-1: 1.8e-5 (Pr = 0.7), 1.1e-5 (Pr = 1e4). At x* = 1:
//! Nu_T = 3.656784, Nu_H = 4.36363 (3.65679 and 48/11). Θ_b = 4x* to ≤ 1.4e-7 (round-off of
//! the wall-cell fluxes: conductances ≈ 5e8 with the 1e-9 wall spacing against Θ ≈ 4). No
//! over/undershoot of θ (0 ≤ θ ≤ 1 + 1e-13). Near the inlet (Pr = 0.7) Nu_x·√X approaches the
//! flat-plate values 0.292680 (T), 0.405894 (H): +2.2e-3, +1.9e-3 at X = 1e-7, growing like
//! ≈ 7√X (the core acceleration and curvature). Cost ≈ 0.6 s per Prandtl number (standard).
//!
//! ```text
//!   Pr = 0.7       x*    Nu_x,T   Nu_m,T   Nu_x,H   Nu_m,H
//!                1e-4   36.896   71.924   50.805   99.367
//!                1e-3   12.823   23.951   17.463   32.877
//!                1e-2    5.2257   8.7193   6.9081  11.770
//!                1e-1    3.6619   4.3587   4.3884   5.5028
//!                   1    3.6568   3.7271   4.3636   4.4781
//! ```
//!
//! At Pr = 1e4 the values are within 0.25 % of the Graetz values (fully developed velocity)
//! from x* = 1e-4 on (local H within 5e-5), except the H mean (1.5 % at 1e-4, 0.07 % at
//! 1e-2), which keeps the ∫ΔNu ≈ 6e-5 gained while the velocity developed (x* < 6e-6) as
//! ≈ 6e-5/x*; the local T dips 0.13 % below Graetz at 1e-4 (the layer is "ahead").
//!
//! # Public API
//!
//! [`combined`]`(pr, &[x*]) -> Vec<`[`ThermalPoint`]`>` ([`THERMAL_RESOLUTION`], x*_end = 1,
//! cached per Pr; [`standard_thermal`]), [`ThermalSolution::solve`]`(resolution, &[Pr],
//! x*_end)` for several Prandtl numbers in one momentum march and other resolutions, with
//! [`ThermalSolution::at`] and the station data; [`plate_limit`] for the inlet limit.
//!
//! Sources of the model (cited from memory; no code or tables copied): the parabolised
//! simultaneously developing problem as reviewed by R. K. Shah & A. L. London (1978, *Laminar
//! Flow Forced Convection in Ducts*); the flat-plate similarity solutions of H. Blasius (1908)
//! and E. Pohlhausen (1921), with wall temperature ∝ x^n (n = ½ for the uniform flux).
#![allow(dead_code)]

use super::pipe_developing::{Resolution, Solution, Step};
use std::collections::HashMap;
use std::sync::{Mutex, OnceLock};

/// The energy steps are at most Δx* = STEP_FACTOR·ε (5e-4 at the standard ε = 0.01): the
/// 1 % steps of the momentum march are sub-divided where they are longer (x* ≳ 0.05), and the
/// continuation beyond the momentum march uses this bound too (module documentation).
pub const STEP_FACTOR: f64 = 0.05;

/// Nusselt numbers of simultaneously developing flow at one station.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ThermalPoint {
    /// x* = x/(D·Re·Pr).
    pub x_star: f64,
    /// Local Nusselt number, uniform wall temperature (T).
    pub nu_t_local: f64,
    /// Mean Nusselt number over [0, x*], T: −ln θ_b/(4x*) = (1/x*)∫₀^x* Nu_x,T dx*.
    pub nu_t_mean: f64,
    /// Local Nusselt number, uniform wall heat flux (H1 = H2 = H for the circle).
    pub nu_h_local: f64,
    /// Mean Nusselt number over [0, x*], H: arithmetic mean of the local one.
    pub nu_h_mean: f64,
}

/// The energy march at one Prandtl number, at its stations (index 0 is the inlet).
#[derive(Clone, Debug)]
pub struct ThermalSolution {
    pub resolution: Resolution,
    pub pr: f64,
    /// Stations x* = X/Pr.
    pub x_star: Vec<f64>,
    /// T: 1 − θ_b.
    pub one_minus_theta_b: Vec<f64>,
    /// T: local Nusselt number (from the wall half-cell balance).
    pub nu_t_local: Vec<f64>,
    /// T: ∫₀^x* Nu_x,T dx* by [`integrate`] (= −ln θ_b/4 in the exact problem).
    pub nu_t_integral: Vec<f64>,
    /// H: wall and bulk temperatures Θ_w, Θ_b.
    pub h_wall: Vec<f64>,
    pub h_bulk: Vec<f64>,
    /// H: local Nusselt number and ∫₀^x* Nu_x,H dx*.
    pub nu_h_local: Vec<f64>,
    pub nu_h_integral: Vec<f64>,
    /// x* of the last momentum station (the velocity is frozen beyond).
    pub x_star_velocity_end: f64,
    /// Smallest and largest θ (T) over the march after the first 10 steps (physically 0 … 1).
    pub theta_min: f64,
    pub theta_max: f64,
    /// max |Θ_b/(4x*) − 1| over the march (the discrete energy balance).
    pub h_balance_error: f64,
    /// Radii, and θ (T), Θ (H) and Û at the last station.
    pub r: Vec<f64>,
    pub theta_t_last: Vec<f64>,
    pub theta_h_last: Vec<f64>,
    pub u_last: Vec<f64>,
}

/// The resolution of [`standard_thermal`] and [`combined`]: the momentum march's standard
/// resolution with a ten times smaller first step X₁ = 1e-16. The start-up error of the local
/// Nusselt numbers is ∝ X₁/X and larger on finer radial grids (with X₁ = 1e-15: 2e-4 at
/// X = 1e-8 for N = 800, 1.6e-3 for N = 1600); X₁ = 1e-16 costs ≈ 8 % more steps.
pub const THERMAL_RESOLUTION: Resolution = Resolution {
    x_first: 1e-16,
    ..Resolution::STANDARD
};

/// X from which the local Nusselt numbers are integrated by the trapezoidal rule; below, the
/// inlet law a/√X + b is matched to the stations at X_MATCH and 4·X_MATCH (see [`integrate`]).
pub const X_MATCH: f64 = 1e-7;

/// ∫₀^x Nu dx at the stations x[i] (x[0] = 0): trapezoidal rule from the first station
/// x_a ≥ `x_match`, and ∫₀^{x_a} from the inlet law Nu ≈ a x^{−½} + b (flat-plate limit plus
/// its first correction), a and b matched at x_a and the first station ≥ 4x_a. This keeps the
/// start-up error of the local values near the inlet (∝ X₁/X, module documentation) out of
/// the integral; the neglected remainder of the law is O(X) relative, and the part below x_a
/// weighs √(x_a/x) in the integral at x. (The plain trapezoidal rule from the first station
/// carried errors ≈ 2e-4 at X = 1e-7 with X₁ = 1e-15.) Stations below x_a get the matched law
/// itself.
pub fn integrate(x: &[f64], nu: &[f64], x_match: f64) -> Vec<f64> {
    let ia = x.partition_point(|&v| v < x_match).max(1);
    let ib = x.partition_point(|&v| v < 4.0 * x[ia]);
    assert!(ib < x.len(), "no stations beyond 4·x_match");
    let (sa, sb) = (x[ia].sqrt(), x[ib].sqrt());
    // nu = a/s + b at sa, sb.
    let a = (nu[ia] - nu[ib]) / (1.0 / sa - 1.0 / sb);
    let b = nu[ia] - a / sa;
    let mut out = vec![0.0; x.len()];
    for i in 1..=ia {
        out[i] = 2.0 * a * x[i].sqrt() + b * x[i];
    }
    for i in ia + 1..x.len() {
        out[i] = out[i - 1] + 0.5 * (nu[i] + nu[i - 1]) * (x[i] - x[i - 1]);
    }
    out
}

/// Solve a tridiagonal system (lower[0] and upper[n] unused) in place into `x`.
fn thomas(lower: &[f64], diag: &[f64], upper: &[f64], rhs: &[f64], x: &mut [f64], c: &mut [f64]) {
    let n = diag.len();
    let mut den = diag[0];
    assert!(den != 0.0 && den.is_finite(), "zero pivot");
    c[0] = upper[0] / den;
    x[0] = rhs[0] / den;
    for j in 1..n {
        den = diag[j] - lower[j] * c[j - 1];
        assert!(den != 0.0 && den.is_finite(), "zero pivot");
        c[j] = if j + 1 < n { upper[j] / den } else { 0.0 };
        x[j] = (rhs[j] - lower[j] * x[j - 1]) / den;
    }
    for j in (0..n - 1).rev() {
        x[j] -= c[j] * x[j + 1];
    }
}

/// The energy march for one Prandtl number, both boundary conditions.
struct Marcher {
    pr: f64,
    euler_steps: usize,
    /// Largest energy step in X: Pr·[`STEP_FACTOR`]·ε.
    dx_max: f64,
    area: Vec<f64>,
    /// f_{j+½}/(r_{j+1} − r_j), j = 0 … N−1.
    kf: Vec<f64>,
    r: Vec<f64>,
    // Levels n and n−1.
    uh_n: Vec<f64>,
    uh_nm1: Vec<f64>,
    t_n: Vec<f64>,
    t_nm1: Vec<f64>,
    h_n: Vec<f64>,
    h_nm1: Vec<f64>,
    x: f64,
    dx_prev: f64,
    step: usize,
    // Work.
    uh: Vec<f64>,
    flux: Vec<f64>,
    lower: Vec<f64>,
    diag: Vec<f64>,
    upper: Vec<f64>,
    rhs: Vec<f64>,
    scratch: Vec<f64>,
    t: Vec<f64>,
    h: Vec<f64>,
    out: ThermalSolution,
}

impl Marcher {
    fn new(pr: f64, res: Resolution, r: &[f64], u_inlet: &[f64]) -> Marcher {
        assert!(pr > 0.0 && pr.is_finite());
        let n = r.len() - 1;
        let f: Vec<f64> = (0..n).map(|j| 0.5 * (r[j] + r[j + 1])).collect();
        let mut area = vec![0.0; n + 1];
        area[0] = 0.5 * f[0] * f[0];
        for j in 1..n {
            area[j] = 0.5 * (f[j] * f[j] - f[j - 1] * f[j - 1]);
        }
        area[n] = 0.5 * (r[n] * r[n] - f[n - 1] * f[n - 1]);
        let kf: Vec<f64> = (0..n).map(|j| f[j] / (r[j + 1] - r[j])).collect();
        let mut m = Marcher {
            pr,
            euler_steps: res.euler_steps,
            dx_max: pr * STEP_FACTOR * res.growth,
            area,
            kf,
            r: r.to_vec(),
            uh_n: vec![0.0; n + 1],
            uh_nm1: vec![0.0; n + 1],
            t_n: vec![1.0; n + 1],
            t_nm1: vec![1.0; n + 1],
            h_n: vec![0.0; n + 1],
            h_nm1: vec![0.0; n + 1],
            x: 0.0,
            dx_prev: 0.0,
            step: 0,
            uh: vec![0.0; n + 1],
            flux: vec![0.0; n + 1],
            lower: vec![0.0; n + 1],
            diag: vec![0.0; n + 1],
            upper: vec![0.0; n + 1],
            rhs: vec![0.0; n + 1],
            scratch: vec![0.0; n + 1],
            t: vec![0.0; n + 1],
            h: vec![0.0; n + 1],
            out: ThermalSolution {
                resolution: res,
                pr,
                x_star: vec![0.0],
                one_minus_theta_b: vec![0.0],
                nu_t_local: vec![f64::INFINITY],
                nu_t_integral: Vec::new(),
                h_wall: vec![0.0],
                h_bulk: vec![0.0],
                nu_h_local: vec![f64::INFINITY],
                nu_h_integral: Vec::new(),
                x_star_velocity_end: f64::NAN,
                theta_min: 0.0,
                theta_max: 1.0,
                h_balance_error: 0.0,
                r: r.to_vec(),
                theta_t_last: Vec::new(),
                theta_h_last: Vec::new(),
                u_last: Vec::new(),
            },
        };
        m.scale(u_inlet);
        m.uh_n.copy_from_slice(&m.uh);
        m.uh_nm1.copy_from_slice(&m.uh);
        // T: the wall takes its temperature at once (U_N = 0, so θ_b = 1 is unaffected).
        m.t_n[n] = 0.0;
        m.t_nm1[n] = 0.0;
        m
    }

    /// Û = U·(1/8)/ΣA U into `self.uh`.
    fn scale(&mut self, u: &[f64]) {
        let q: f64 = u.iter().zip(&self.area).map(|(a, b)| a * b).sum();
        let s = 0.125 / q;
        for (d, v) in self.uh.iter_mut().zip(u) {
            *d = s * v;
        }
    }

    /// Advance from self.x to x_new = self.x + dx with the velocity `u` at x_new.
    fn advance(&mut self, x_new: f64, dx: f64, bdf2: bool, u: &[f64]) {
        let n = self.r.len() - 1;
        let pr = self.pr;
        self.scale(u);
        let (c0, b1, b2) = if bdf2 {
            let om = dx / self.dx_prev;
            (
                (1.0 + 2.0 * om) / ((1.0 + om) * dx),
                -(1.0 + om) / dx,
                om * om / ((1.0 + om) * dx),
            )
        } else {
            (1.0 / dx, -1.0 / dx, 0.0)
        };
        // Face mass fluxes F_{j+½} from the discrete continuity of the annuli.
        let mut acc = 0.0;
        for j in 0..n {
            let w = c0 * self.uh[j] + b1 * self.uh_n[j] + b2 * self.uh_nm1[j];
            acc -= self.area[j] * w;
            self.flux[j] = acc;
        }
        self.flux[n] = 0.0; // impermeable wall (the recursion gives 0 to round-off)
        let inv_pr = 1.0 / pr;
        for j in 0..=n {
            let (fm, km) = if j > 0 {
                (self.flux[j - 1], self.kf[j - 1] * inv_pr)
            } else {
                (0.0, 0.0)
            };
            let (fp, kp) = if j < n {
                (self.flux[j], self.kf[j] * inv_pr)
            } else {
                (0.0, 0.0)
            };
            self.lower[j] = -0.5 * fm - km;
            self.upper[j] = 0.5 * fp - kp;
            self.diag[j] = self.area[j] * c0 * self.uh[j] + 0.5 * (fp - fm) + kp + km;
        }
        // H: wall flux ½·1 into the wall half-cell.
        for j in 0..=n {
            self.rhs[j] = -self.area[j]
                * (b1 * self.uh_n[j] * self.h_n[j] + b2 * self.uh_nm1[j] * self.h_nm1[j]);
        }
        self.rhs[n] += 0.5 * inv_pr;
        thomas(
            &self.lower,
            &self.diag,
            &self.upper,
            &self.rhs,
            &mut self.h,
            &mut self.scratch,
        );
        // T: θ_N = 0.
        for j in 0..=n {
            self.rhs[j] = -self.area[j]
                * (b1 * self.uh_n[j] * self.t_n[j] + b2 * self.uh_nm1[j] * self.t_nm1[j]);
        }
        let (wall_lower, wall_diag) = (self.lower[n], self.diag[n]);
        let wall_hist = self.rhs[n];
        self.lower[n] = 0.0;
        self.diag[n] = 1.0;
        self.rhs[n] = 0.0;
        thomas(
            &self.lower,
            &self.diag,
            &self.upper,
            &self.rhs,
            &mut self.t,
            &mut self.scratch,
        );
        // Wall gradient from the wall half-cell balance:
        // A_N D(Ûθ)_N − F_{N−½}θ_{N−½} − (1/Pr)[½ g_w − k(θ_N − θ_{N−1})] = 0.
        let residual = wall_lower * self.t[n - 1] + wall_diag * self.t[n] - wall_hist;
        let g_w = 2.0 * pr * residual;

        // Outputs.
        let x_star = x_new / pr;
        let mut om_b = 0.0; // 1 − θ_b
        let mut hb = 0.0;
        for j in 0..=n {
            om_b += self.area[j] * self.uh[j] * (1.0 - self.t[j]);
            hb += self.area[j] * self.uh[j] * self.h[j];
        }
        om_b *= 8.0;
        hb *= 8.0;
        let nu_t = -g_w / (1.0 - om_b);
        let nu_h = 1.0 / (self.h[n] - hb);
        let o = &mut self.out;
        o.x_star.push(x_star);
        o.one_minus_theta_b.push(om_b);
        o.nu_t_local.push(nu_t);
        o.h_wall.push(self.h[n]);
        o.h_bulk.push(hb);
        o.nu_h_local.push(nu_h);
        o.h_balance_error = o.h_balance_error.max((hb / (4.0 * x_star) - 1.0).abs());
        if self.step >= 10 {
            for &v in &self.t {
                o.theta_min = o.theta_min.min(v);
                o.theta_max = o.theta_max.max(v);
            }
        }

        // Shift levels.
        std::mem::swap(&mut self.uh_nm1, &mut self.uh_n);
        self.uh_n.copy_from_slice(&self.uh);
        std::mem::swap(&mut self.t_nm1, &mut self.t_n);
        self.t_n.copy_from_slice(&self.t);
        std::mem::swap(&mut self.h_nm1, &mut self.h_n);
        self.h_n.copy_from_slice(&self.h);
        self.x = x_new;
        self.dx_prev = dx;
        self.step += 1;
    }

    fn on_step(&mut self, s: &Step) {
        assert!((s.x - self.x - s.dx).abs() <= 1e-12 * s.x);
        assert_eq!(s.bdf2, s.index > self.euler_steps);
        let m = (s.dx / self.dx_max).ceil() as usize;
        if m <= 1 || !s.bdf2 {
            self.advance(s.x, s.dx, s.bdf2, s.u);
            return;
        }
        // Sub-steps with Û interpolated linearly in X (both ends carry the flow rate 1/8).
        let x0 = self.x;
        let u0 = self.uh_n.clone();
        self.scale(s.u);
        let u1 = self.uh.clone();
        let mut ui = vec![0.0; u0.len()];
        for k in 1..=m {
            let t = k as f64 / m as f64;
            for j in 0..ui.len() {
                ui[j] = u0[j] + t * (u1[j] - u0[j]);
            }
            let x_new = if k == m { s.x } else { x0 + t * s.dx };
            self.advance(x_new, x_new - self.x, true, &ui);
        }
    }

    /// Continue with the frozen velocity up to X = x_end.
    fn finish(mut self, x_end: f64, growth: f64) -> ThermalSolution {
        self.out.x_star_velocity_end = self.x / self.pr;
        let frozen = self.uh_n.clone();
        while self.x < x_end {
            let dx = (growth * self.x).min(2.0 * self.dx_prev).min(self.dx_max);
            let mut x_new = self.x + dx;
            if x_new > x_end * (1.0 - 1e-12) {
                x_new = x_end;
            }
            self.advance(x_new, x_new - self.x, true, &frozen);
        }
        let x_a = X_MATCH / self.pr;
        self.out.nu_t_integral = integrate(&self.out.x_star, &self.out.nu_t_local, x_a);
        self.out.nu_h_integral = integrate(&self.out.x_star, &self.out.nu_h_local, x_a);
        self.out.theta_t_last = self.t_n.clone();
        self.out.theta_h_last = self.h_n.clone();
        self.out.u_last = self.uh_n.clone();
        self.out
    }
}

impl ThermalSolution {
    /// March the momentum equation once at `res` and the energy equation for each Prandtl
    /// number in `prs`, up to x* = x_star_end (at least to the last momentum station).
    pub fn solve(
        res: Resolution,
        prs: &[f64],
        x_star_end: f64,
    ) -> (Solution, Vec<ThermalSolution>) {
        let mut marchers: Vec<Marcher> = Vec::new();
        let hydro = Solution::solve_observed(res, |s: &Step| {
            if marchers.is_empty() {
                marchers = prs
                    .iter()
                    .map(|&pr| Marcher::new(pr, res, s.r, s.u_n))
                    .collect();
            }
            for m in marchers.iter_mut() {
                m.on_step(s);
            }
        });
        let out = marchers
            .into_iter()
            .map(|m| {
                let x_end = m.pr * x_star_end;
                m.finish(x_end, res.growth)
            })
            .collect();
        (hydro, out)
    }

    /// Stencil of the cubic through four stations around x (clipped to 1 … last).
    fn interp(&self, x: f64, f: impl Fn(usize) -> f64) -> f64 {
        let last = self.x_star.len() - 1;
        let k = self.x_star[1..].partition_point(|&s| s < x) + 1;
        let k = k.clamp(1, last);
        let lo = (k as isize - 2).clamp(1, last as isize - 3) as usize;
        let t = x.ln();
        let mut s = 0.0;
        for a in lo..lo + 4 {
            let mut l = 1.0;
            for b in lo..lo + 4 {
                if a != b {
                    l *= (t - self.x_star[b].ln()) / (self.x_star[a].ln() - self.x_star[b].ln());
                }
            }
            s += l * f(a);
        }
        s
    }

    /// Mean Nu_T at station i from the discrete energy balance, −ln θ_b/(4x*) (cross-check
    /// of the integrated local values used by [`Self::at`]; see the module documentation).
    pub fn nu_t_mean_balance(&self, i: usize) -> f64 {
        -(-self.one_minus_theta_b[i]).ln_1p() / (4.0 * self.x_star[i])
    }

    /// The four Nusselt numbers at x* (first station ≤ x* ≤ last station).
    pub fn at(&self, x: f64) -> ThermalPoint {
        let last = *self.x_star.last().unwrap();
        assert!(
            x >= self.x_star[1] && x <= last * (1.0 + 1e-12),
            "x* = {x:e} outside [{:e}, {last:e}]",
            self.x_star[1]
        );
        let x = x.min(last);
        ThermalPoint {
            x_star: x,
            nu_t_local: self.interp(x, |i| self.nu_t_local[i].ln()).exp(),
            nu_t_mean: self
                .interp(x, |i| (self.nu_t_integral[i] / self.x_star[i]).ln())
                .exp(),
            nu_h_local: self.interp(x, |i| self.nu_h_local[i].ln()).exp(),
            nu_h_mean: self
                .interp(x, |i| (self.nu_h_integral[i] / self.x_star[i]).ln())
                .exp(),
        }
    }
}

/// The solution at [`THERMAL_RESOLUTION`] for this Prandtl number with x*_end = 1, computed
/// once per Pr (each new Pr repeats the momentum march, ≈ 0.6 s in release).
pub fn standard_thermal(pr: f64) -> &'static ThermalSolution {
    static CACHE: OnceLock<Mutex<HashMap<u64, &'static OnceLock<ThermalSolution>>>> =
        OnceLock::new();
    let cell: &'static OnceLock<ThermalSolution> = CACHE
        .get_or_init(|| Mutex::new(HashMap::new()))
        .lock()
        .unwrap()
        .entry(pr.to_bits())
        .or_insert_with(|| Box::leak(Box::new(OnceLock::new())));
    cell.get_or_init(|| {
        ThermalSolution::solve(THERMAL_RESOLUTION, &[pr], 1.0)
            .1
            .pop()
            .unwrap()
    })
}

/// Nu_x,T, Nu_m,T, Nu_x,H, Nu_m,H of simultaneously developing flow at Prandtl number `pr`
/// and the given x* ([`THERMAL_RESOLUTION`]; stations from x* = 1e-16/Pr to 1; accurate to
/// ~1e-4 or better for X = Pr·x* ≥ 1e-7, and for the means from the matched inlet law below).
pub fn combined(pr: f64, x_star: &[f64]) -> Vec<ThermalPoint> {
    let s = standard_thermal(pr);
    x_star.iter().map(|&x| s.at(x)).collect()
}

/// The inlet (flat-plate) limit: Nu_x·√X → c as X = x/(D·Re) → 0, with c = Nu_x,plate/√Re_x
/// of the Blasius boundary layer with wall temperature excess ∝ x^n (n = 0: T; n = ½: uniform
/// flux, H). Returns (c_T, c_H). (Nu_D = Nu_x,plate·D/x and Re_x = Re²X.)
///
/// Similarity: f''' + ½ f f'' = 0, f(0) = f'(0) = 0, f'(∞) = 1;
/// g'' + (Pr/2) f g' − n Pr f' g = 0, g(0) = 1, g(∞) = 0; c = −g'(0). Solved by RK4 up to
/// η_end = 2 + 20 Pr^{−1/3} + 24 Pr^{−1/2} (beyond both layers), step min(1e-3,
/// 0.5/(Pr η_end)) (stable: (Pr/2) f ≤ (Pr/2) η): f by the scaling (Töpfer) transformation of
/// the solution with f''(0) = 1, g as the combination of two initial-value solutions that
/// does not grow at the far end (the other solutions tend to a constant, n = 0, or
/// ∝ η − 1.72, n = ½).
pub fn plate_limit(pr: f64) -> (f64, f64) {
    // f with F''(0) = 1: f(η) = a F(aη), a = F'(∞)^{−½}.
    let rhs = |y: &[f64; 7], pr: f64, n: f64| -> [f64; 7] {
        // y = [f, f', f'', g1, g1', g2, g2']
        let [f, fp, fpp, g1, g1p, g2, g2p] = *y;
        [
            fp,
            fpp,
            -0.5 * f * fpp,
            g1p,
            -0.5 * pr * f * g1p + n * pr * fp * g1,
            g2p,
            -0.5 * pr * f * g2p + n * pr * fp * g2,
        ]
    };
    let rk4 = |y0: [f64; 7], eta_end: f64, h: f64, pr: f64, n: f64| -> [f64; 7] {
        let steps = (eta_end / h).ceil() as usize;
        let h = eta_end / steps as f64;
        let mut y = y0;
        let add = |a: &[f64; 7], b: &[f64; 7], s: f64| -> [f64; 7] {
            let mut c = *a;
            for i in 0..7 {
                c[i] += s * b[i];
            }
            c
        };
        for _ in 0..steps {
            let k1 = rhs(&y, pr, n);
            let k2 = rhs(&add(&y, &k1, 0.5 * h), pr, n);
            let k3 = rhs(&add(&y, &k2, 0.5 * h), pr, n);
            let k4 = rhs(&add(&y, &k3, h), pr, n);
            for i in 0..7 {
                y[i] += h / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]);
            }
        }
        y
    };
    // F''(0) = 1: F'(∞) from a long integration (the layer ends near η ≈ 10).
    let big = rk4([0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0], 20.0, 1e-3, 0.0, 0.0);
    let a = big[1].powf(-0.5);
    let fpp0 = a * a * a; // f''(0) of the Blasius solution (0.33206)
    let eta_end = 2.0 + 20.0 * pr.cbrt().recip() + 24.0 / pr.sqrt();
    let h = (0.5 / (pr * eta_end)).min(1e-3);
    let c = |n: f64| {
        let y = rk4([0.0, 0.0, fpp0, 1.0, 0.0, 0.0, 1.0], eta_end, h, pr, n);
        // g = g1 + s g2 with g(η_end) = 0; c = −g'(0) = −s.
        let s = -y[3] / y[5];
        -s
    };
    (c(0.0), c(0.5))
}
