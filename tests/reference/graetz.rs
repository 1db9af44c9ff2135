//! Independent reference for the thermal entrance (Graetz–Nusselt problem) of the
//! round tube: hydrodynamically fully developed laminar flow, thermally developing,
//! no axial conduction, no viscous dissipation, constant properties.
//!
//! This file uses nothing from canalis (std only) so that it can serve as an
//! independent check of the 2-D march. It is included by tests with
//! `#[path = "reference/graetz.rs"] mod graetz;`. Its own checks live in
//! `tests/graetz_reference_check.rs`.
//!
//! # Problem
//!
//! Radius R = 1, hydraulic diameter D_h = 2, velocity w(r) = u/ū = 2(1 − r²),
//! axial coordinate x* = x/(D_h·Re·Pr). With these scalings the energy equation is
//!
//! ```text
//!     w(r) ∂θ/∂x* = D_h² (1/r) ∂/∂r (r ∂θ/∂r) = 4 (1/r) ∂/∂r (r ∂θ/∂r),     θ(0, r) = 1.
//! ```
//!
//! Bulk (mixing-cup) value θ_b = ∫wθ r dr / ∫w r dr = 4∫ r(1 − r²) θ dr (∫w r dr = 1/2).
//!
//! * **T** (uniform wall temperature): θ(x*, 1) = 0, θ = (T − T_w)/(T_in − T_w).
//!   Nu_x,T = −¼ d(ln θ_b)/dx*, Nu_m,T = −ln θ_b/(4x*) (both follow from the energy
//!   balance: θ_b' = 8 ∂θ/∂r|₁).
//! * **H** (= H1 for the circle: axially uniform wall flux, peripherally uniform wall
//!   temperature): Θ = (T − T_in)k/(q D_h), Θ(0, r) = 0, ∂Θ/∂r|₁ = R/D_h = 1/2
//!   (i.e. D_h ∂Θ/∂r = 1 with r measured in units of R = D_h/2). The energy balance
//!   (integrate the equation with r dr) gives Θ_b' · ½ = 4 · 1 · ½, i.e. dΘ_b/dx* = 4.
//!   Nu_x,H = 1/(Θ_w − Θ_b), Nu_m,H = (1/x*)∫₀^x* Nu_x,H dx*.
//!
//! # Method 1 (used by [`circle`]): eigenfunction series
//!
//! Separation θ = Σ C_n R_n(r) exp(−2λ_n² x*) leads to the Sturm–Liouville problem
//!
//! ```text
//!     (r R')' + λ² r (1 − r²) R = 0,   R(0) = 1, R'(0) = 0,
//!     T: R(1) = 0  (n = 0, 1, 2, …),      H: R'(1) = 0  (n = 1, 2, …; n = 0 is R ≡ 1).
//! ```
//!
//! (This is the classical scaling: λ_0,T = 2.7043644, Brown 1960, tabulated in
//! Shah & London 1978; Nu_T = λ_0²/2. For H, λ_1,H² = 25.6796 is the first
//! eigenvalue of Siegel, Sparrow & Hallman 1958, λ_1,H = 5.0675; the transient decays as
//! exp(−2λ² x*) = exp(−λ² (x/R)/(Re_D Pr)).)
//!
//! R(r; λ) and S = ∂R/∂λ are integrated by shooting: a power series about the regular
//! singular point r = 0 (R = Σ a_k r^{2k}, a_{k+1} = −λ²(a_k − a_{k−1})/(4(k+1)²)) up to
//! r = min(1, 3/λ), then Taylor-series steps of adaptive order (the ODE has polynomial
//! coefficients, so the local Taylor coefficients follow from a short recurrence; terms are
//! summed until they fall below 1e-18 of the largest) with step h = min(r/4, 2/λ). Newton's
//! method on R(1; λ) (T) or R'(1; λ) (H) with derivative S(1), S'(1); each converged
//! eigenfunction is checked to have exactly n zeros in (0, 1) (Sturm oscillation theorem),
//! so no eigenvalue is skipped. The eigenvalues are accurate to about 1e-14 relative.
//!
//! Norms: differentiating the ODE with respect to λ gives
//! [r(S R' − R S')]₀¹ = 2λ ∫ r(1 − r²) R² dr = 2λ N. Hence, with ∫ r(1−r²)R dr = −R'(1)/λ²,
//!
//! ```text
//!  T:  θ_b = Σ A_n e^{−2λ_n² x*},   A_n = 8 R_n'(1) / (λ_n³ S_n(1))     (Σ A_n = 1),
//!      Nu_x,T = Σ (λ_n²/2) A_n e^{−2λ_n² x*} / θ_b .
//!      (Shah & London's G_n = A_n λ_n²/8.)
//!  H:  Θ = 4x* + ψ(r) − ψ_b + Σ C_n R_n e^{−2λ_n² x*},  ψ = r²/2 − r⁴/8, ψ_b = 7/48,
//!      Θ_w − Θ_b = 11/48 − Σ B_n e^{−2λ_n² x*},   B_n = −R_n(1) / (λ_n S_n'(1)) > 0
//!      (Σ B_n = 11/48; the eigenfunctions have zero bulk value, so Θ_b = 4x* exactly;
//!      C_n = −R_n(1)/(2λ_n² N_n) from ∫ r(1−r²)ψ R_n dr = R_n(1)/(2λ_n²)).
//! ```
//!
//! The first [`NUMERIC_MODES`] modes of each problem are computed numerically
//! (λ up to ≈ 1600, enough on their own for x* ≥ 1e-5 where the first omitted
//! term is below e^{−50}). Higher modes (needed for x* < 1e-5 and for the H mean
//! integral) come from asymptotic forms fitted (least squares) to the upper half of the
//! numerical modes:
//!
//! ```text
//!  T:  λ_n = Λ + Λ^{−4/3}(s₀ + s₁Λ^{−4/3}),  Λ = 4n + 8/3   (s₀ ≈ 0.1591526 fits Newman 1969,
//!                                                           0.159152, from memory)
//!      G_n = C λ^{−1/3}(1 + l₁λ^{−4/3} + l₂λ^{−2} + l₃λ^{−8/3})
//!  H:  λ_n = Λ + Λ^{−2/3}(e₀ + e₁Λ^{−2/3} + e₂Λ^{−4/3} + e₃Λ^{−2}),  Λ = 4n + 4/3
//!      B_n = D λ^{−5/3}(1 + m₁λ^{−2/3} + m₂λ^{−4/3} + m₃λ^{−5/3} + m₄λ^{−2})
//! ```
//!
//! (leading terms 4n + 8/3, 4n + 4/3 as in Sellars, Tribus & Klein 1956). The constants C and
//! D are not fitted: they follow exactly from the Lévêque limit (below), because for small x*
//! the sums become integrals over λ (dn = dλ/4):
//! C = a_T · 2^{4/3}/Γ(1/3) = 1.0127873, D = (4/3)(9/2)^{1/3}/Γ(2/3)² = 1.2005030.
//! Extrapolating a fit over n ∈ [100, 200] to n ∈ (200, 400] reproduces the numerical G_n, B_n
//! to 2e-10 and 4e-10 relative, the eigenvalues to 4e-11 and 2e-10 absolute (T, H). Note the
//! slower H corrections: λ_n − Λ ≈ −0.72030 Λ^{−2/3}, B_n λ^{5/3}/D − 1 ≈ 0.6532 λ^{−2/3}.
//!
//! Nu_m,H needs ∫₀^x* Nu_x,H: substituting s = x*^{1/3} turns the integrand 3s² Nu(s³)
//! into a smooth function (Nu ~ a x^{−1/3} + b + …); it is integrated with 12-point
//! Gauss–Legendre panels in s (geometric panels, ratio ≤ 1.5, length ≤ 0.05), and ∫₀^{x_L}
//! for x_L = 1e-9 from the Lévêque form a x^{−1/3} + b + c x^{1/3} with b, c matched to the
//! series at x_L and 8x_L (neglected remainder ~ x_L^{5/3}, < 1e-11 relative for x* ≥ 1e-6).
//!
//! Lévêque limit (near-wall linear velocity w ≈ 4y, y = 1 − r, equation yθ_x = θ_yy):
//! T: θ = ∫₀^η e^{−t³}dt/Γ(4/3), η = y/(9x)^{1/3} → Nu_x,T → a_T x^{−1/3},
//! a_T = 2/(Γ(4/3) 9^{1/3}) = 1.0767321; H: Θ_w = (9x)^{1/3}/(2Γ(2/3)) →
//! Nu_x,H → a_H x^{−1/3}, a_H = 2Γ(2/3)/9^{1/3} = 1.3019840.
//!
//! The eigenfunctions also have the classical closed form R = e^{−λr²/2} M(1/2 − λ/4, 1, λr²)
//! (Kummer's confluent hypergeometric function); the check test finds the first five T and H
//! eigenvalues from it and agrees with the shooting to 1e-15.
//!
//! Accuracy of [`circle`] (measured in the check test): eigenvalues ~1e-15 relative; the
//! coefficient sums Σ A_n = 1, Σ B_n = 11/48 hold to 1e-12; replacing modes 201–400 by the
//! tail changes nothing by more than 2e-10 (x* ≥ 1e-6); the quadrature reproduces the exact
//! T mean to 3e-11. Overall: relative error ≲ 1e-9 for all four numbers at 1e-6 ≤ x* ≤ 2
//! (≲ 1e-11 for x* ≥ 0.1), far inside the 1e-4 target. The independent march (method 2)
//! agrees to ≤ 6e-8, which is the march's own error. Cost: 0.3–0.5 s (release, one core),
//! almost all of it in computing 2 × 400 eigenpairs.
//!
//! Second Lévêque terms (fitted from the series at x* = 1e-9 … 5e-7, for information):
//!
//! ```text
//!     Nu_x,T = a_T x^{−1/3} − 1.200 + 6.6 x^{1/3} + …
//!     Nu_x,H = a_H x^{−1/3} − 1.060 + 6.6 x^{1/3} + …
//!     Nu_m,T = 1.5 a_T x^{−1/3} − 1.200 + 4.9 x^{1/3} + …
//! ```
//!
//! The often quoted 1.077 x^{−1/3} − 0.7 and 1.302 x^{−1/3} − 1 (Shah & London 1978, from
//! memory) are fits over a range of x* and agree with the series to 0.4 % and 0.003 % at
//! x* = 1e-6.
//!
//! # Method 2 (cross-check, [`circle_march`]): finite-volume method of lines
//!
//! Vertex-centred finite volumes on r_i = F(i/N), F(ξ) = (1 + c)ξ − cξ³, c = 0.49
//! (odd, smooth, wall spacing 0.02/N), exact masses ∫w r dr per control volume,
//! two-point face fluxes 4 r_f Δθ/Δr; march in x* with the L-stable two-stage SDIRK
//! (Alexander 1977, γ = 1 − 1/√2), one step from 0 to 1e-14, then steps uniform in
//! σ = ln x* + x*/0.1 (geometric, Δ ln x* ≈ Δ, near the inlet; bounded by 0.1Δ further down).
//! Local Nu_T from the discrete wall flux, Nu_m,T = −ln θ_b/(4x*), Nu_x,H = 1/(Θ_N − Θ_b).
//! Both errors behave like N^{−2} and Δ², so the results of (N, Δ), (2N, Δ), (N, Δ/2) are
//! Richardson-extrapolated ([`circle_march_extrapolated`]); (400, 0.02) takes ≈ 0.35 s. Nu_m,H
//! uses the trapezoidal rule in σ from x* = 1e-9 plus the matched Lévêque integral below (as
//! in method 1, with b, c matched to the march).
//!
//! Sources (cited from memory; no code or tables copied): L. Graetz (1883, 1885) and
//! W. Nusselt (1910) — the problem; M. A. Lévêque (1928) — the near-inlet similarity solution;
//! G. M. Brown (1960, AIChE J.) — T eigenvalues and coefficients; J. R. Sellars, M. Tribus &
//! J. S. Klein (1956, Trans. ASME) — large-n asymptotics; R. Siegel, E. M. Sparrow &
//! T. M. Hallman (1958, Appl. Sci. Res.) — the H problem; J. Newman (1969, J. Heat Transfer) —
//! refined asymptotics; R. K. Shah & A. L. London (1978), Laminar Flow Forced Convection in
//! Ducts — tables; R. Alexander (1977, SIAM J. Numer. Anal.) — diagonally implicit RK.
#![allow(dead_code)]

/// Nusselt numbers of the round tube at one station.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GraetzPoint {
    /// x* = x/(D_h Re Pr).
    pub x_star: f64,
    /// Local Nusselt number, uniform wall temperature (T).
    pub nu_t_local: f64,
    /// Mean Nusselt number over [0, x*], T (log-mean definition −ln θ_b/(4x*)).
    pub nu_t_mean: f64,
    /// Local Nusselt number, uniform wall heat flux (H, = H1 for the circle).
    pub nu_h_local: f64,
    /// Mean Nusselt number over [0, x*], H (arithmetic mean of the local one).
    pub nu_h_mean: f64,
}

/// Values at the requested stations (ascending, 1e-6 ≤ x* ≤ 2; larger x* also work, and
/// x* down to 1e-8 is still accurate but slower). Relative error ≲ 1e-9 (module docs).
pub fn circle(stations: &[f64]) -> Vec<GraetzPoint> {
    Series::new(NUMERIC_MODES).points(stations)
}

/// Numerically computed modes per boundary condition in [`circle`].
pub const NUMERIC_MODES: usize = 400;

// Γ(1/3), Γ(2/3) (standard constants, 19 digits).
const GAMMA_1_3: f64 = 2.678_938_534_707_747_6;
const GAMMA_2_3: f64 = 1.354_117_939_426_400_4;

/// Lévêque coefficient of the T problem: Nu_x,T ~ A_T_LEVEQUE · x*^{−1/3} as x* → 0.
pub fn leveque_t() -> f64 {
    2.0 / ((GAMMA_1_3 / 3.0) * 9f64.cbrt())
}
/// Lévêque coefficient of the H problem: Nu_x,H ~ leveque_h() · x*^{−1/3} as x* → 0.
pub fn leveque_h() -> f64 {
    2.0 * GAMMA_2_3 / 9f64.cbrt()
}
/// Leading constant of G_n = A_n λ_n²/8 ~ C λ_n^{−1/3} (T), from the Lévêque limit.
pub fn tail_constant_t() -> f64 {
    leveque_t() * 2f64.powf(4.0 / 3.0) / GAMMA_1_3
}
/// Leading constant of B_n ~ D λ_n^{−5/3} (H), from the Lévêque limit.
pub fn tail_constant_h() -> f64 {
    (4.0 / 3.0) * 4.5f64.cbrt() / (GAMMA_2_3 * GAMMA_2_3)
}

// ---------------------------------------------------------------------------------------
// Shooting
// ---------------------------------------------------------------------------------------

/// R, R', S = ∂R/∂λ, S' at r = 1 for (rR')' + λ² r(1−r²) R = 0, R(0) = 1, R'(0) = 0.
#[derive(Clone, Copy, Debug)]
pub struct Shot {
    pub r: f64,
    pub dr: f64,
    pub s: f64,
    pub ds: f64,
    /// Sign changes of R on (0, 1] (node values).
    pub zeros: usize,
    /// Zeros of R in the open interval (0, 1), for R(1) ≈ 0 (the sign just inside the
    /// wall is that of −R'(1)).
    pub zeros_open: usize,
}

pub fn shoot(lam: f64) -> Shot {
    let l2 = lam * lam;
    // Power series about r = 0 up to r_a (λ r_a ≤ 3: terms ≤ e³-ish, no cancellation).
    let ra = (3.0 / lam).min(1.0);
    let r2 = ra * ra;
    let (mut a_prev, mut a, mut da_prev, mut da) = (0.0f64, 1.0f64, 0.0f64, 0.0f64);
    let (mut rr, mut rp, mut ss, mut sp) = (1.0f64, 0.0f64, 0.0f64, 0.0f64);
    let mut pw = 1.0f64;
    let (mut big, mut bigs) = (1.0f64, 1e-300f64);
    let mut k = 0usize;
    loop {
        let d = 4.0 * ((k + 1) as f64).powi(2);
        let an = -l2 * (a - a_prev) / d;
        let dan = -(2.0 * lam * (a - a_prev) + l2 * (da - da_prev)) / d;
        a_prev = a;
        a = an;
        da_prev = da;
        da = dan;
        pw *= r2;
        let m = (2 * (k + 1)) as f64;
        let (t, ts) = (a * pw, da * pw);
        rr += t;
        rp += m * t / ra;
        ss += ts;
        sp += m * ts / ra;
        big = big.max(t.abs());
        bigs = bigs.max(ts.abs());
        k += 1;
        if k > 3 && m * t.abs() < 1e-18 * big && m * ts.abs() < 1e-18 * bigs {
            break;
        }
        assert!(k < 500, "power series did not converge");
    }
    let mut zeros = usize::from(rr < 0.0);
    let (mut last_zeros, mut last_r) = (0usize, 1.0f64);
    // Taylor steps. With t = r − r0: r R'' + R' + λ² q(t) R = 0, q = r − r³ (cubic in t).
    // Scaled coefficients β_j = b_j h^j:
    // β_{j+2} = −h[(j+1)² β_{j+1} + λ² h Σ_i Q_i β_{j−i}] / (r0 (j+1)(j+2)),  Q_i = q_i h^i;
    // γ_j (for S) gets the extra source 2λ h Σ Q_i β_{j−i}.
    let mut r0 = ra;
    let mut bb = [0.0f64; 160];
    let mut gg = [0.0f64; 160];
    while r0 < 1.0 - 1e-15 {
        let h = (0.25 * r0).min(2.0 / lam).min(1.0 - r0);
        let q = [
            r0 - r0 * r0 * r0,
            (1.0 - 3.0 * r0 * r0) * h,
            -3.0 * r0 * h * h,
            -h * h * h,
        ];
        bb[0] = rr;
        bb[1] = rp * h;
        gg[0] = ss;
        gg[1] = sp * h;
        let (mut mb, mut mg) = (bb[0].abs().max(bb[1].abs()), gg[0].abs().max(gg[1].abs()));
        let mut j = 0usize;
        loop {
            let (mut cb, mut cg) = (0.0, 0.0);
            for i in 0..4.min(j + 1) {
                cb += q[i] * bb[j - i];
                cg += q[i] * gg[j - i];
            }
            let jf = (j + 1) as f64;
            let den = r0 * jf * (jf + 1.0);
            bb[j + 2] = -h * (jf * jf * bb[j + 1] + h * l2 * cb) / den;
            gg[j + 2] = -h * (jf * jf * gg[j + 1] + h * (l2 * cg + 2.0 * lam * cb)) / den;
            mb = mb.max(bb[j + 2].abs());
            mg = mg.max(gg[j + 2].abs());
            j += 1;
            if j >= 4
                && bb[j + 1].abs() + bb[j].abs() < 1e-18 * mb
                && gg[j + 1].abs() + gg[j].abs() < 1e-18 * mg
            {
                break;
            }
            assert!(j + 2 < 159, "Taylor series did not converge");
        }
        let n = j + 2;
        let (mut r_, mut rp_, mut s_, mut sp_) = (0.0, 0.0, 0.0, 0.0);
        for i in (0..n).rev() {
            r_ += bb[i];
            s_ += gg[i];
            rp_ += i as f64 * bb[i];
            sp_ += i as f64 * gg[i];
        }
        last_zeros = zeros;
        last_r = rr;
        if (r_ < 0.0) != (rr < 0.0) {
            zeros += 1;
        }
        rr = r_;
        rp = rp_ / h;
        ss = s_;
        sp = sp_ / h;
        r0 += h;
    }
    let zeros_open = if ra >= 1.0 {
        // Whole interval by the power series: R(0) = 1 > 0, sign inside the wall is −R'(1).
        usize::from(-rp < 0.0)
    } else {
        last_zeros + usize::from((last_r < 0.0) != (-rp < 0.0))
    };
    Shot {
        r: rr,
        dr: rp,
        s: ss,
        ds: sp,
        zeros,
        zeros_open,
    }
}

/// Boundary condition at the wall.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Bc {
    /// R(1) = 0 (T problem), modes n = 0, 1, …
    Dirichlet,
    /// R'(1) = 0 (H problem), modes n = 1, 2, … (n = 0 is the constant).
    Neumann,
}

/// One mode: eigenvalue and series coefficient (A_n for T, B_n for H; see module docs).
#[derive(Clone, Copy, Debug)]
pub struct Mode {
    pub n: usize,
    pub lambda: f64,
    pub coef: f64,
}

fn newton(mut l: f64, bc: Bc, n: usize) -> Option<(f64, Shot)> {
    let mut prev = f64::INFINITY;
    for _ in 0..40 {
        let s = shoot(l);
        let (f, fp) = match bc {
            Bc::Dirichlet => (s.r, s.s),
            Bc::Neumann => (s.dr, s.ds),
        };
        let d = f / fp;
        if d.abs() < 1e-15 * l || (d.abs() >= 0.5 * prev && d.abs() < 1e-11 * l) {
            let z = match bc {
                Bc::Dirichlet => s.zeros_open,
                Bc::Neumann => s.zeros,
            };
            return if z == n { Some((l, s)) } else { None };
        }
        if !d.is_finite() || d.abs() > 1.5 {
            // Keep Newton inside the neighbourhood of the wanted root (spacing ≈ 4).
            l -= 1.5 * d.signum();
        } else {
            l -= d;
        }
        prev = d.abs();
    }
    None
}

fn root_fn(l: f64, bc: Bc) -> f64 {
    let s = shoot(l);
    match bc {
        Bc::Dirichlet => s.r,
        Bc::Neumann => s.dr,
    }
}

/// Fallback: bracket the n-th root by scanning upwards from `from` and bisect, then polish.
fn bracket(from: f64, bc: Bc, n: usize) -> (f64, Shot) {
    let step = 0.25;
    let mut a = from;
    let mut fa = root_fn(a, bc);
    for _ in 0..10_000 {
        let b = a + step;
        let fb = root_fn(b, bc);
        if (fa < 0.0) != (fb < 0.0) {
            let (mut lo, mut hi, mut flo) = (a, b, fa);
            for _ in 0..60 {
                let mid = 0.5 * (lo + hi);
                let fm = root_fn(mid, bc);
                if (fm < 0.0) == (flo < 0.0) {
                    lo = mid;
                    flo = fm;
                } else {
                    hi = mid;
                }
            }
            let l = 0.5 * (lo + hi);
            if let Some(r) = newton(l, bc, n) {
                return r;
            }
            // A root with a different zero count: continue beyond it.
        }
        a = b;
        fa = fb;
    }
    panic!("eigenvalue {n} not found");
}

/// The first `count` modes of the problem, computed numerically (shooting + Newton).
pub fn numeric_modes(bc: Bc, count: usize) -> Vec<Mode> {
    let first = match bc {
        Bc::Dirichlet => 0,
        Bc::Neumann => 1,
    };
    let phase = match bc {
        Bc::Dirichlet => 8.0 / 3.0,
        Bc::Neumann => 4.0 / 3.0,
    };
    let mut out: Vec<Mode> = Vec::with_capacity(count);
    for k in 0..count {
        let n = first + k;
        let guess = if k >= 2 {
            2.0 * out[k - 1].lambda - out[k - 2].lambda
        } else {
            4.0 * n as f64 + phase
        };
        let (l, s) = match newton(guess, bc, n) {
            Some(r) => r,
            None => bracket(if k == 0 { 0.5 } else { out[k - 1].lambda + 0.5 }, bc, n),
        };
        if k > 0 {
            assert!(l > out[k - 1].lambda + 1.0, "eigenvalues out of order");
        }
        let coef = match bc {
            Bc::Dirichlet => 8.0 * s.dr / (l.powi(3) * s.s),
            Bc::Neumann => -s.r / (l * s.ds),
        };
        out.push(Mode { n, lambda: l, coef });
    }
    out
}

// ---------------------------------------------------------------------------------------
// Asymptotic tail
// ---------------------------------------------------------------------------------------

/// Least squares by modified Gram–Schmidt QR. `x[i]` is row i.
pub fn lsq(x: &[Vec<f64>], y: &[f64]) -> Vec<f64> {
    let (n, m) = (x.len(), x[0].len());
    let mut q: Vec<Vec<f64>> = (0..m).map(|j| (0..n).map(|i| x[i][j]).collect()).collect();
    let mut r = vec![vec![0.0; m]; m];
    for j in 0..m {
        for k in 0..j {
            let d: f64 = (0..n).map(|i| q[k][i] * q[j][i]).sum();
            r[k][j] = d;
            let (qk, qj) = (q[k].clone(), &mut q[j]);
            for (a, b) in qj.iter_mut().zip(&qk) {
                *a -= d * b;
            }
        }
        let nn = q[j].iter().map(|v| v * v).sum::<f64>().sqrt();
        r[j][j] = nn;
        for v in q[j].iter_mut() {
            *v /= nn;
        }
    }
    let b: Vec<f64> = (0..m)
        .map(|j| (0..n).map(|i| q[j][i] * y[i]).sum())
        .collect();
    let mut c = vec![0.0; m];
    for j in (0..m).rev() {
        let s: f64 = ((j + 1)..m).map(|k| r[j][k] * c[k]).sum();
        c[j] = (b[j] - s) / r[j][j];
    }
    c
}

/// Asymptotic forms of the eigenvalues and coefficients, fitted to numerical modes.
#[derive(Clone, Debug)]
pub struct Tail {
    pub bc: Bc,
    /// Λ_n = 4n + phase.
    pub phase: f64,
    /// λ_n − Λ = Λ^{−lam_lead} Σ lam_c[k] Λ^{−lam_pow[k]}.
    pub lam_lead: f64,
    pub lam_pow: Vec<f64>,
    pub lam_c: Vec<f64>,
    /// coef = coef_const · λ^{−coef_lead} · (1 + Σ coef_c[k] λ^{−coef_pow[k]}) (T: for G_n).
    pub coef_const: f64,
    pub coef_lead: f64,
    pub coef_pow: Vec<f64>,
    pub coef_c: Vec<f64>,
}

impl Tail {
    /// Fit to the modes with index in [lo, hi].
    pub fn fit(bc: Bc, modes: &[Mode], lo: usize, hi: usize) -> Tail {
        let (phase, lam_lead, lam_pow, coef_const, coef_lead, coef_pow) = match bc {
            Bc::Dirichlet => (
                8.0 / 3.0,
                4.0 / 3.0,
                vec![0.0, 4.0 / 3.0],
                tail_constant_t(),
                1.0 / 3.0,
                vec![4.0 / 3.0, 2.0, 8.0 / 3.0],
            ),
            Bc::Neumann => (
                4.0 / 3.0,
                2.0 / 3.0,
                vec![0.0, 2.0 / 3.0, 4.0 / 3.0, 2.0],
                tail_constant_h(),
                5.0 / 3.0,
                vec![2.0 / 3.0, 4.0 / 3.0, 5.0 / 3.0, 2.0],
            ),
        };
        let sel: Vec<&Mode> = modes.iter().filter(|m| m.n >= lo && m.n <= hi).collect();
        let big_l = |m: &Mode| 4.0 * m.n as f64 + phase;
        let x: Vec<Vec<f64>> = sel
            .iter()
            .map(|m| lam_pow.iter().map(|p| big_l(m).powf(-p)).collect())
            .collect();
        let y: Vec<f64> = sel
            .iter()
            .map(|m| (m.lambda - big_l(m)) * big_l(m).powf(lam_lead))
            .collect();
        let lam_c = lsq(&x, &y);
        let g = |m: &Mode| match bc {
            Bc::Dirichlet => m.coef * m.lambda * m.lambda / 8.0,
            Bc::Neumann => m.coef,
        };
        let x: Vec<Vec<f64>> = sel
            .iter()
            .map(|m| coef_pow.iter().map(|p| m.lambda.powf(-p)).collect())
            .collect();
        let y: Vec<f64> = sel
            .iter()
            .map(|m| g(m) * m.lambda.powf(coef_lead) / coef_const - 1.0)
            .collect();
        let coef_c = lsq(&x, &y);
        Tail {
            bc,
            phase,
            lam_lead,
            lam_pow,
            lam_c,
            coef_const,
            coef_lead,
            coef_pow,
            coef_c,
        }
    }

    pub fn lambda(&self, n: usize) -> f64 {
        let l = 4.0 * n as f64 + self.phase;
        let s: f64 = self
            .lam_pow
            .iter()
            .zip(&self.lam_c)
            .map(|(p, c)| c * l.powf(-p))
            .sum();
        l + l.powf(-self.lam_lead) * s
    }

    /// The series coefficient (A_n for T, B_n for H) at eigenvalue λ.
    pub fn coef(&self, lam: f64) -> f64 {
        let s: f64 = self
            .coef_pow
            .iter()
            .zip(&self.coef_c)
            .map(|(p, c)| c * lam.powf(-p))
            .sum();
        let g = self.coef_const * lam.powf(-self.coef_lead) * (1.0 + s);
        match self.bc {
            Bc::Dirichlet => 8.0 * g / (lam * lam),
            Bc::Neumann => g,
        }
    }

    pub fn mode(&self, n: usize) -> Mode {
        let lambda = self.lambda(n);
        Mode {
            n,
            lambda,
            coef: self.coef(lambda),
        }
    }

    /// Σ_{n > last} coef_n, by the Euler–Maclaurin midpoint rule on the asymptotic form
    /// (dn = dλ/4, λ ≈ Λ); used only by checks.
    pub fn remainder(&self, last: usize) -> f64 {
        let l0 = 4.0 * (last as f64 + 0.5) + self.phase;
        let lead = match self.bc {
            Bc::Dirichlet => self.coef_lead + 2.0,
            Bc::Neumann => self.coef_lead,
        };
        let k = match self.bc {
            Bc::Dirichlet => 8.0 * self.coef_const,
            Bc::Neumann => self.coef_const,
        };
        let mut s = l0.powf(1.0 - lead) / (lead - 1.0);
        for (p, c) in self.coef_pow.iter().zip(&self.coef_c) {
            s += c * l0.powf(1.0 - lead - p) / (lead + p - 1.0);
        }
        k * s / 4.0
    }
}

// ---------------------------------------------------------------------------------------
// Series evaluation
// ---------------------------------------------------------------------------------------

/// Exponent beyond which terms are dropped (e^{−60} ≈ 1e-26).
const CUT: f64 = 60.0;
/// Below this x*, ∫ Nu_x,H uses the Lévêque form.
const X_LEVEQUE: f64 = 1e-9;

/// The two eigenfunction series (numerical modes + fitted tail).
pub struct Series {
    pub t_numeric: Vec<Mode>,
    pub h_numeric: Vec<Mode>,
    pub t_tail: Tail,
    pub h_tail: Tail,
    t_all: Vec<Mode>,
    h_all: Vec<Mode>,
}

impl Series {
    /// Computes `numeric` modes of each problem and fits the tails to the upper half.
    pub fn new(numeric: usize) -> Series {
        let t_numeric = numeric_modes(Bc::Dirichlet, numeric);
        let h_numeric = numeric_modes(Bc::Neumann, numeric);
        let t_tail = Tail::fit(Bc::Dirichlet, &t_numeric, numeric / 2, numeric);
        let h_tail = Tail::fit(Bc::Neumann, &h_numeric, numeric / 2 + 1, numeric);
        let mut s = Series {
            t_all: t_numeric.clone(),
            h_all: h_numeric.clone(),
            t_numeric,
            h_numeric,
            t_tail,
            h_tail,
        };
        s.extend_to(X_LEVEQUE);
        s
    }

    /// Makes sure the mode lists reach 2λ²x ≥ CUT for x ≥ x_min.
    pub fn extend_to(&mut self, x_min: f64) {
        let lmax = (CUT / (2.0 * x_min)).sqrt();
        while self.t_all.last().unwrap().lambda < lmax {
            let n = self.t_all.last().unwrap().n + 1;
            self.t_all.push(self.t_tail.mode(n));
        }
        while self.h_all.last().unwrap().lambda < lmax {
            let n = self.h_all.last().unwrap().n + 1;
            self.h_all.push(self.h_tail.mode(n));
        }
    }

    fn count(modes: &[Mode], x: f64) -> usize {
        let lmax = (CUT / (2.0 * x)).sqrt();
        let k = modes.partition_point(|m| m.lambda <= lmax);
        assert!(
            k < modes.len(),
            "x* = {x:e} below the range of the series; call extend_to"
        );
        k
    }

    /// θ_b and −¼ dθ_b/dx* (T problem).
    pub fn t_sums(&self, x: f64) -> (f64, f64) {
        let k = Self::count(&self.t_all, x);
        let (mut tb, mut fl) = (0.0, 0.0);
        for m in self.t_all[..k].iter().rev() {
            let l2 = m.lambda * m.lambda;
            let e = m.coef * (-2.0 * l2 * x).exp();
            tb += e;
            fl += 0.5 * l2 * e;
        }
        (tb, fl)
    }

    pub fn theta_bulk(&self, x: f64) -> f64 {
        self.t_sums(x).0
    }

    pub fn nu_t_local(&self, x: f64) -> f64 {
        let (tb, fl) = self.t_sums(x);
        fl / tb
    }

    pub fn nu_t_mean(&self, x: f64) -> f64 {
        -self.theta_bulk(x).ln() / (4.0 * x)
    }

    /// Θ_w − Θ_b of the H problem.
    pub fn h_wall_minus_bulk(&self, x: f64) -> f64 {
        let k = Self::count(&self.h_all, x);
        let mut s = 0.0;
        for m in self.h_all[..k].iter().rev() {
            s += m.coef * (-2.0 * m.lambda * m.lambda * x).exp();
        }
        11.0 / 48.0 - s
    }

    pub fn nu_h_local(&self, x: f64) -> f64 {
        1.0 / self.h_wall_minus_bulk(x)
    }

    /// ∫₀^x Nu(x') dx' for each x of `xs` (ascending) — Gauss–Legendre in s = x^{1/3}.
    pub fn integrate_nu(&self, nu: impl Fn(f64) -> f64, lev: f64, xs: &[f64]) -> Vec<f64> {
        let (gx, gw) = gauss_legendre(12);
        let sl = X_LEVEQUE.cbrt();
        let mut acc = leveque_start(lev, X_LEVEQUE, nu(X_LEVEQUE), nu(8.0 * X_LEVEQUE));
        let mut s0 = sl;
        let mut out = Vec::with_capacity(xs.len());
        for &x in xs {
            let s1 = x.cbrt();
            assert!(s1 >= s0, "stations must be ascending and ≥ {X_LEVEQUE:e}");
            while s0 < s1 {
                let e = (1.5 * s0).min(s0 + 0.05).min(s1);
                let (c, h) = (0.5 * (e + s0), 0.5 * (e - s0));
                let mut p = 0.0;
                for (t, w) in gx.iter().zip(&gw) {
                    let s = c + h * t;
                    p += w * 3.0 * s * s * nu(s * s * s);
                }
                acc += h * p;
                s0 = e;
            }
            out.push(acc);
        }
        out
    }

    pub fn points(&self, stations: &[f64]) -> Vec<GraetzPoint> {
        for w in stations.windows(2) {
            assert!(w[1] >= w[0], "stations must be ascending");
        }
        let ih = self.integrate_nu(|x| self.nu_h_local(x), leveque_h(), stations);
        stations
            .iter()
            .zip(ih)
            .map(|(&x, i)| GraetzPoint {
                x_star: x,
                nu_t_local: self.nu_t_local(x),
                nu_t_mean: self.nu_t_mean(x),
                nu_h_local: self.nu_h_local(x),
                nu_h_mean: i / x,
            })
            .collect()
    }
}

/// ∫₀^{x1} Nu dx for Nu = a x^{−1/3} + b + c x^{1/3}, with a the Lévêque coefficient and
/// b, c matched to Nu(x1) = nu1 and Nu(8x1) = nu2. The neglected next term (∝ x^{1/3} relative
/// to c) contributes O(x1^{5/3}).
pub fn leveque_start(a: f64, x1: f64, nu1: f64, nu2: f64) -> f64 {
    let s1 = x1.cbrt();
    let y1 = nu1 * s1 - a;
    let y2 = nu2 * 2.0 * s1 - a;
    let c = (y2 - 2.0 * y1) / (2.0 * s1 * s1);
    let b = (y1 - c * s1 * s1) / s1;
    1.5 * a * x1.powf(2.0 / 3.0) + b * x1 + 0.75 * c * x1.powf(4.0 / 3.0)
}

/// Gauss–Legendre nodes and weights on [−1, 1] (Newton on P_n).
pub fn gauss_legendre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut x = vec![0.0; n];
    let mut w = vec![0.0; n];
    for i in 0..n.div_ceil(2) {
        let mut z = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 0.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, z);
            for k in 2..=n {
                let p2 = ((2 * k - 1) as f64 * z * p1 - (k - 1) as f64 * p0) / k as f64;
                p0 = p1;
                p1 = p2;
            }
            dp = n as f64 * (z * p1 - p0) / (z * z - 1.0);
            let dz = p1 / dp;
            z -= dz;
            if dz.abs() < 1e-16 {
                break;
            }
        }
        x[i] = -z;
        x[n - 1 - i] = z;
        w[i] = 2.0 / ((1.0 - z * z) * dp * dp);
        w[n - 1 - i] = w[i];
    }
    (x, w)
}

// ---------------------------------------------------------------------------------------
// Method 2: finite-volume method of lines (cross-check)
// ---------------------------------------------------------------------------------------

/// Solves (diag(m) + a·K) y = rhs for the tridiagonal K with K_ii = g[i−1] + g[i]
/// (g[i] couples i and i+1; `g_last` is the coupling of the last unknown to the Dirichlet
/// wall, 0 for Neumann).
fn thomas(m: &[f64], g: &[f64], g_last: f64, a: f64, rhs: &[f64], y: &mut [f64], cp: &mut [f64]) {
    let n = m.len();
    let diag = |i: usize| {
        let left = if i > 0 { g[i - 1] } else { 0.0 };
        let right = if i + 1 < n { g[i] } else { g_last };
        m[i] + a * (left + right)
    };
    // Off-diagonals are −a g[i].
    let mut b = diag(0);
    cp[0] = if n > 1 { -a * g[0] / b } else { 0.0 };
    y[0] = rhs[0] / b;
    for i in 1..n {
        let lo = -a * g[i - 1];
        b = diag(i) - lo * cp[i - 1];
        cp[i] = if i + 1 < n { -a * g[i] / b } else { 0.0 };
        y[i] = (rhs[i] - lo * y[i - 1]) / b;
    }
    for i in (0..n - 1).rev() {
        y[i] -= cp[i] * y[i + 1];
    }
}

/// Step-size scale of the march: steps are ≈ Δ·x for x ≪ X_C and ≈ Δ·X_C beyond.
const X_C: f64 = 0.1;

/// One run of the finite-volume march with `cells` radial intervals and steps
/// Δ ln x* ≤ `dlnx`. Stations must lie in [1e-6, ∞) and ascend.
pub fn circle_march(stations: &[f64], cells: usize, dlnx: f64) -> Vec<GraetzPoint> {
    let n = cells;
    let c = 0.49;
    let f = |xi: f64| (1.0 + c) * xi - c * xi * xi * xi;
    let r: Vec<f64> = (0..=n).map(|i| f(i as f64 / n as f64)).collect();
    let rf: Vec<f64> = (0..n).map(|i| f((i as f64 + 0.5) / n as f64)).collect();
    let g: Vec<f64> = (0..n).map(|i| 4.0 * rf[i] / (r[i + 1] - r[i])).collect();
    let prim = |x: f64| x * x - 0.5 * x * x * x * x;
    let m: Vec<f64> = (0..=n)
        .map(|i| {
            let lo = if i == 0 { 0.0 } else { rf[i - 1] };
            let hi = if i == n { 1.0 } else { rf[i] };
            prim(hi) - prim(lo)
        })
        .collect();
    // T: unknowns 0..n−1 (θ_n = 0); H: unknowns 0..n with the source 4·r·∂Θ/∂r = 2 at r = 1.
    let mt = &m[..n];
    let mh = &m[..];
    let mut th = vec![1.0; n];
    let mut hh = vec![0.0; n + 1];
    let gam = 1.0 - std::f64::consts::FRAC_1_SQRT_2;
    let (mut y1t, mut y2t, mut rt, mut cpt) =
        (vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let (mut y1h, mut y2h, mut rh, mut cph) = (
        vec![0.0; n + 1],
        vec![0.0; n + 1],
        vec![0.0; n + 1],
        vec![0.0; n + 1],
    );
    let src = 2.0;

    // March points: 1e-14 (one step from 0), X_LEVEQUE, then the stations.
    let x_first = 1e-14;
    let mut targets = vec![x_first, X_LEVEQUE, 8.0 * X_LEVEQUE];
    for &s in stations {
        assert!(
            s >= 1e-6 && s > *targets.last().unwrap(),
            "stations must ascend from 1e-6"
        );
        targets.push(s);
    }
    // Steps are uniform in σ = ln x + x/X_C (geometric for x ≪ X_C, bounded by Δ·X_C).
    let sigma = |x: f64| x.ln() + x / X_C;
    let dxdsigma = |x: f64| x * X_C / (x + X_C);
    let inv_sigma = |s: f64, guess: f64| {
        let mut x = guess;
        for _ in 0..50 {
            let d = (sigma(x) - s) * dxdsigma(x);
            x -= d;
            if d.abs() < 1e-15 * x {
                break;
            }
        }
        x
    };
    let mut x = 0.0f64;
    let mut out = Vec::with_capacity(stations.len());
    let h_diff = |hh: &[f64]| -> f64 {
        let bulk = 2.0 * hh.iter().zip(mh).map(|(a, b)| a * b).sum::<f64>();
        hh[n] - bulk
    };
    // ∫₀^{X_LEVEQUE} Nu_x,H dx from the Lévêque form a x^{−1/3} + b + c x^{1/3}, b and c matched
    // to the march at X_LEVEQUE and 8·X_LEVEQUE (added below); then the trapezoidal rule in σ.
    let mut integral = 0.0;
    let mut nu_first = 0.0;
    let mut prev_f = 0.0; // Nu_x,H · dx/dσ at the previous point
    for (ti, &xt) in targets.iter().enumerate() {
        let (steps, s0, ds) = if x == 0.0 {
            (1, 0.0, 0.0)
        } else {
            let (s0, s1) = (sigma(x), sigma(xt));
            let k = ((s1 - s0) / dlnx).ceil().max(1.0) as usize;
            (k, s0, (s1 - s0) / k as f64)
        };
        for k in 0..steps {
            let xn = if x == 0.0 || k + 1 == steps {
                xt
            } else {
                inv_sigma(s0 + (k + 1) as f64 * ds, x)
            };
            let h = xn - x;
            let a = gam * h;
            // T
            for i in 0..n {
                rt[i] = mt[i] * th[i];
            }
            thomas(mt, &g, g[n - 1], a, &rt, &mut y1t, &mut cpt);
            for i in 0..n {
                rt[i] = mt[i] * (th[i] + (1.0 - gam) / gam * (y1t[i] - th[i]));
            }
            thomas(mt, &g, g[n - 1], a, &rt, &mut y2t, &mut cpt);
            th.copy_from_slice(&y2t);
            // H
            for i in 0..=n {
                rh[i] = mh[i] * hh[i];
            }
            rh[n] += a * src;
            thomas(mh, &g, 0.0, a, &rh, &mut y1h, &mut cph);
            for i in 0..=n {
                rh[i] = mh[i] * (hh[i] + (1.0 - gam) / gam * (y1h[i] - hh[i]));
            }
            rh[n] += a * src;
            thomas(mh, &g, 0.0, a, &rh, &mut y2h, &mut cph);
            hh.copy_from_slice(&y2h);
            if ti >= 2 {
                let fx = dxdsigma(xn) / h_diff(&hh);
                integral += 0.5 * (prev_f + fx) * ds;
                prev_f = fx;
            }
            x = xn;
        }
        if ti == 1 {
            nu_first = 1.0 / h_diff(&hh);
            prev_f = dxdsigma(x) * nu_first;
        }
        if ti == 2 {
            integral += leveque_start(leveque_h(), X_LEVEQUE, nu_first, 1.0 / h_diff(&hh));
        }
        if ti >= 3 {
            let tb = 2.0 * th.iter().zip(mt).map(|(a, b)| a * b).sum::<f64>();
            out.push(GraetzPoint {
                x_star: x,
                nu_t_local: g[n - 1] * th[n - 1] / (2.0 * tb),
                nu_t_mean: -tb.ln() / (4.0 * x),
                nu_h_local: 1.0 / h_diff(&hh),
                nu_h_mean: integral / x,
            });
        }
    }
    out
}

fn combine(
    base: &[GraetzPoint],
    fine_r: &[GraetzPoint],
    fine_x: &[GraetzPoint],
) -> Vec<GraetzPoint> {
    let ex = |a: f64, b: f64, c: f64| a + (4.0 / 3.0) * (b - a) + (4.0 / 3.0) * (c - a);
    base.iter()
        .zip(fine_r)
        .zip(fine_x)
        .map(|((a, b), c)| GraetzPoint {
            x_star: a.x_star,
            nu_t_local: ex(a.nu_t_local, b.nu_t_local, c.nu_t_local),
            nu_t_mean: ex(a.nu_t_mean, b.nu_t_mean, c.nu_t_mean),
            nu_h_local: ex(a.nu_h_local, b.nu_h_local, c.nu_h_local),
            nu_h_mean: ex(a.nu_h_mean, b.nu_h_mean, c.nu_h_mean),
        })
        .collect()
}

/// Richardson extrapolation of [`circle_march`] in both N (N, 2N) and Δ ln x (Δ, Δ/2).
pub fn circle_march_extrapolated(stations: &[f64], cells: usize, dlnx: f64) -> Vec<GraetzPoint> {
    let a = circle_march(stations, cells, dlnx);
    let b = circle_march(stations, 2 * cells, dlnx);
    let c = circle_march(stations, cells, 0.5 * dlnx);
    combine(&a, &b, &c)
}
