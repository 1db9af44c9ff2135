//! Developing velocity along a passage: the hydrodynamic entrance region of any cross-section,
//! marched from a uniform inlet velocity on the flow problem's grid.
//!
//! Owns: the march ([`hydrodynamic_entrance`]) and its result ([`HydrodynamicEntrance`]): the
//! apparent friction, the incremental pressure drop K(x) and its limit K(∞), and the
//! hydrodynamic entrance length, per passage.
//!
//! # The model
//! Steady laminar incompressible flow with constant properties, parabolised: no axial
//! diffusion, and the pressure split into a section mean P(x) that drives the axial flow and a
//! cross-plane part that is not needed (Patankar & Spalding 1972; Briley 1974, from memory).
//! With X = x/(D·Re) (D the passage's hydraulic diameter, Re = ū·D/ν), U = u/ū, P = p/(ρū²)
//! and the cross-flow written as v = (ū·D/Re)·∇φ,
//!
//! ```text
//!   U·∂U/∂X + D²·∇φ·∇U = G(X) + D²·∇²U,    G = −dP/dX,
//!   D²·∇²φ = −∂U/∂X,   ∂φ/∂n = 0 on the walls,         (continuity, no flow through a wall)
//!   U = 0 on the walls,   U = 1 at the inlet,   ∫U dA = A at every station.
//! ```
//!
//! The axial momentum equation carries its full nonlinear inertia and the convection by the
//! cross-flow; the cross-flow is the irrotational one that continuity requires (the
//! displacement of the core by the growing wall layers), with no secondary vorticity. In a
//! round tube that is the exact cross-flow of the parabolised equations (it is radial and
//! fixed by continuity); in other sections the secondary circulation the cross-plane momentum
//! equations would add is neglected. Reported as [`MODEL`].
//!
//! # The discretisation
//! Rows scaled by h² like every problem of [`crate::problem`], the cut-cell Laplacian L for
//! −h²∇² with U = 0 on the walls. The cross-flow term in skew form,
//! h²·∇φ·∇U ≈ ½·Σ_j (φ_j − φ_i)·(U_j − U_i) over the node's regular links (second order;
//! no term across a wall, through which the cross-flow carries nothing), and φ on the same
//! grid with flux-free walls (the links across a wall dropped: first order at walls off the
//! grid lines). The discrete continuity, L_N·φ = h²·(∂U/∂X)/D², is solvable because the
//! mass constraint is a plain node sum, Σ_i U_i = Σ_i w_i with w = ũ·A/∫ũ the fully developed
//! profile of `flow`: the march tends to that discrete profile exactly, and G to
//! D²·A/∫ũ = 2·f·Re of the fully developed solve.
//!
//! The march: one backward-Euler step from the inlet, then variable-step BDF2 (second order,
//! L-stable; step ratios kept inside its zero-stability bound by [`Stepper`]),
//!
//! ```text
//!   (a₀·U*/(Δ·D²))·Uⁿ⁺¹ + L·Uⁿ⁺¹ + C(φ*)·Uⁿ⁺¹ = (U*/(Δ·D²))·((1 + ω)·Uⁿ − ω²/(1 + ω)·Uⁿ⁻¹)·h²
//!                                             + (G/D²)·h²,
//! ```
//!
//! ω = Δ/Δ_prev, a₀ = (1 + 2ω)/(1 + ω). The coupling is solved by [`PASSES`] Picard passes
//! per step: the first takes U* extrapolated linearly from the last two points and φ* of the
//! last point, the second both from the first pass's solution (φ from the step's own BDF2
//! derivative). The cross-flow must be implicit: extrapolating φ instead of iterating made
//! the march oscillate (G changing sign every few steps on the round tube), and lagging it
//! by one point put K(∞) 5 % high; two passes agree with three and four to 0.2 % in K(∞).
//! Each pass is nonsymmetric (C), solved by BiCGStab preconditioned by the multigrid of its
//! symmetric part ([`System::solve_perturbed`]). G is one more unknown per passage (a
//! bordered system), found by superposition: U = U_a + G·U_b with U_b the response to G = 1,
//! G from the mass constraint (two solves, then one for φ: three per pass).
//!
//! Steps grow by at most [`HydroParams::ratio`] (1.25) and are capped by the slowest mode
//! ([`STEP_CAP_FACTOR`]). Measured on the round tube at 300 cells: K(∞) = 1.189, 1.224 with
//! ratios 1.5 and 1.25 (about second order in the step: 1.235 extrapolated), so the step
//! error of the default march is about 1 % in K(∞) and up to 2 % in f_app·Re near x+ = 1e-3.
//!
//! # The inlet (the Blasius head)
//! Near the inlet the wall layer is thinner than the grid resolves. There the section behaves
//! as a flat plate under a uniform core: the displacement thickness δ* = 1.7208·D·√X
//! (Blasius 1908; Schlichting, *Boundary-Layer Theory*, from memory) accelerates the core to
//! U_c ≈ 1 + 4δ*/D, and Bernoulli gives P(0) − P = ½(U_c² − 1) ≈ 6.883·√X, that is
//! f_app·Re ≈ 3.44/√X (the small-x+ limit of Shah & London 1978, from memory). The march
//! starts from the uniform inlet anyway, but its pressure is taken from this limit up to the
//! first march point at which δ* spans [`RESOLVED_CELLS`] cells, and from the march's G
//! (trapezoidal rule) beyond it: the unresolved start leaves only a shift of the virtual
//! origin in the field, while the friction it integrates would be lost in the pressure.
//!
//! # What is reported
//! f_app·Re = (P(0) − P)/(2X) (Fanning, Δp/(½ρū²) = 4·f_app·x/D), K(X) = 2·(P(0) − P) −
//! 4·f·Re·X, K(∞) its limit, and the entrance length L+ where the largest velocity of the
//! section first comes within 1 % of its fully developed value (Shah & London 1978, from
//! memory, define it this way).
//!
//! Invariant: knows the problem layer and the system, nothing of files, units or fluids.

use crate::entrance::{Flow, Leveque, PassageEntrance, ThermalEntrance, REFRESH};
use crate::error::{Error, Result, Solve};
use crate::grid::{Classified, Dir};
use crate::post;
use crate::problem::{Field, Numbering, Problem, WallCondition, WallConditions};
use crate::solver::{CgParams, LinearOperator};
use crate::system::{Method, System};
use std::time::Instant;

/// Which model the hydrodynamic entrance values come from (for the report).
pub const MODEL: &str = "parabolised laminar march: axial momentum with full inertia, \
     irrotational cross-flow from continuity (no secondary vorticity), uniform inlet velocity, \
     constant properties";

/// Cells the displacement thickness spans at the first march point whose pressure is the
/// march's own (see the module documentation).
pub const RESOLVED_CELLS: f64 = 2.0;

/// Blasius' displacement thickness δ*·√(U/(ν·x)) (Schlichting, from memory).
const BLASIUS_DISPLACEMENT: f64 = 1.720_787_657_520_503;

/// The flux-free problem of φ is singular (φ up to a constant); this shift, times 1/D², makes
/// it definite and changes ∇φ by about this fraction of the slowest mode.
const NEUMANN_SHIFT: f64 = 1e-7;

/// The march stops once G and the largest velocity changed by less than this (relative) over
/// a step beyond X = [`SETTLED_FROM`].
const SETTLED: f64 = 1e-9;
const SETTLED_FROM: f64 = 0.05;
/// The same for the combined march's local Nusselt numbers (as the thermal entrance's).
const SETTLED_THERMAL: f64 = 1e-7;

/// Passes per step (see the module documentation).
const PASSES: usize = 2;

/// A step is at most 1/(this × 4·Nu_T) long: the developing flow's slowest surviving mode (the
/// mass constraint removes the first) decays about six times faster than the thermal one
/// (round tube: Graetz rates 89 against 14.6).
const STEP_CAP_FACTOR: f64 = 6.0;

/// Control of the march.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HydroParams {
    /// The first march point, X (the inlet step).
    pub first: f64,
    /// Largest ratio of successive march points.
    pub ratio: f64,
    /// Relative residual of each solve.
    pub tolerance: f64,
}

impl Default for HydroParams {
    fn default() -> Self {
        HydroParams {
            first: 1e-6,
            ratio: 1.25,
            // Measured on the round tube at 300 cells: 1e-6 against 1e-9 changes K(∞), L+ and
            // f_app·Re by at most 5e-6 relative, at 0.6 times the iterations.
            tolerance: 1e-6,
        }
    }
}

/// The hydrodynamic entrance of one passage at the stations of
/// [`HydrodynamicEntrance::x_plus`].
#[derive(Debug, Clone, PartialEq)]
pub struct PassageDeveloping {
    /// Fanning apparent friction times Re, mean over 0..X.
    pub apparent_f_re: Vec<f64>,
    /// K(X).
    pub incremental_pressure_drop: Vec<f64>,
    /// K(∞): K at the last march point once the flow has settled.
    pub k_infinity: f64,
    /// X at which the largest velocity first comes within 1 % of its fully developed value.
    pub length_plus: Option<f64>,
    /// The fully developed f·Re the march tends to.
    pub fanning_f_re: f64,
    /// X below which the pressure is the Blasius limit's.
    pub resolved_from: f64,
    /// u_max/ū of the fully developed flow (the discrete profile's), which the curve's last
    /// column is a fraction of.
    pub max_to_mean_fully_developed: f64,
    /// Every march point: (X, f_app·Re, K, u_max/u_max,fd).
    pub curve: Vec<[f64; 4]>,
}

impl PassageDeveloping {
    /// (f_app·Re, K) at X, interpolated between march points (in the pressure drop, linearly
    /// in √X below the first point); None beyond the march.
    pub fn at(&self, x: f64) -> Option<(f64, f64)> {
        let drop = pressure_drop_at(&self.curve, x, self.resolved_from)?;
        Some((drop / (2.0 * x), 2.0 * drop - 4.0 * self.fanning_f_re * x))
    }
}

/// P(0) − P at X from the curve (drop = 2X·f_app·Re at each point).
fn pressure_drop_at(curve: &[[f64; 4]], x: f64, resolved_from: f64) -> Option<f64> {
    let last = curve.last()?;
    if x <= 0.0 || x > last[0] * (1.0 + 1e-12) {
        return None;
    }
    if x < resolved_from {
        return Some(head_drop(x));
    }
    let drop = |p: &[f64; 4]| 2.0 * p[0] * p[1];
    let k = curve.partition_point(|p| p[0] < x);
    if k == 0 {
        return Some(drop(&curve[0]) * (x / curve[0][0]).sqrt());
    }
    let (p, q) = (&curve[k - 1], &curve[k]);
    let t = (x - p[0]) / (q[0] - p[0]);
    Some(drop(p) + t * (drop(q) - drop(p)))
}

/// The Blasius head's P(0) − P (see the module documentation).
pub fn head_drop(x: f64) -> f64 {
    4.0 * BLASIUS_DISPLACEMENT * x.sqrt()
}

/// The hydrodynamic entrance of every passage.
#[derive(Debug, Clone, PartialEq)]
pub struct HydrodynamicEntrance {
    pub x_plus: Vec<f64>,
    /// In the order of the passages' figures.
    pub passages: Vec<PassageDeveloping>,
    /// March steps, solves and their iterations (V-cycles), wall-clock seconds.
    pub steps: usize,
    pub solves: usize,
    pub iterations: usize,
    pub seconds: f64,
    /// Whether every passage settled to its fully developed flow within the march.
    pub settled: bool,
    /// The simultaneously developing heat transfer, when asked for.
    pub combined: Option<Combined>,
}

/// What the energy equation of a combined march needs besides the flow.
#[derive(Debug, Clone, PartialEq)]
pub struct CombinedSpec {
    pub prandtl: f64,
    /// Per passage: x* below which the thermal-entrance march's layer is unresolved (its
    /// Lévêque limit's `resolved_from`); the combined march takes the larger of this and its
    /// own velocity layer's, scaled to the thermal layer.
    pub resolved_from: Vec<f64>,
    /// Per passage: fully developed (Nu_T, Nu_H1), for the entrance lengths.
    pub fully_developed: Vec<(f64, f64)>,
}

/// The simultaneously developing heat transfer (uniform inlet velocity and temperature) at
/// one Prandtl number, in the thermal entrance's form (the head below the resolved layer is
/// the flat plate's, not Lévêque's: its `leveque.m` is NaN).
#[derive(Debug, Clone, PartialEq)]
pub struct Combined {
    pub prandtl: f64,
    pub thermal: ThermalEntrance,
}

/// The cross-flow convection C(φ) on vectors of unknowns: (C·U)_i = Σ_j c_ij·(U_i − U_j) over
/// the regular links of unknown i, central (c_ij = −½·(φ_j − φ_i)) or upwind ([`Convection::set`]).
struct Convection {
    /// The unknown across each regular link, or `u32::MAX`.
    nbr: Vec<[u32; 4]>,
    coef: Vec<[f64; 4]>,
}

impl Convection {
    fn new(c: &Classified, num: &Numbering) -> Convection {
        let nbr = num
            .nodes()
            .map(|k| {
                let mut out = [u32::MAX; 4];
                for (slot, d) in Dir::ALL.into_iter().enumerate() {
                    if c.theta(k, d).is_none() {
                        let j = c.grid.inner_neighbour(k, d);
                        out[slot] = num.unknown_of[j];
                    }
                }
                out
            })
            .collect::<Vec<_>>();
        let n = nbr.len();
        Convection {
            nbr,
            coef: vec![[0.0; 4]; n],
        }
    }

    /// The coefficients of the potential φ: with F = φ_j − φ_i the flux from i towards j, the
    /// hybrid scheme (Spalding 1972; Patankar, *Numerical Heat Transfer and Fluid Flow*, 1980,
    /// §5.2, from memory) takes the central difference while |F| ≤ 2 (the link's cell Péclet
    /// number; the row stays an M-matrix) and the upwind one beyond, where it also drops the
    /// link's diffusion. As a change of the Laplacian's neighbour coefficient 1:
    /// c = max(0, 1 − |F|/2) + max(−F, 0) − 1, and the row gains Σ_j c·(U_i − U_j).
    fn set(&mut self, phi: &[f64]) {
        for (q, (nb, co)) in self.nbr.iter().zip(self.coef.iter_mut()).enumerate() {
            for s in 0..4 {
                co[s] = if nb[s] == u32::MAX {
                    0.0
                } else {
                    let f = phi[nb[s] as usize] - phi[q];
                    (1.0 - 0.5 * f.abs()).max(0.0) + (-f).max(0.0) - 1.0
                };
            }
        }
    }
}

impl LinearOperator for Convection {
    fn dim(&self) -> usize {
        self.nbr.len()
    }

    fn apply(&self, x: &[f64], y: &mut [f64]) {
        for (q, (nb, co)) in self.nbr.iter().zip(&self.coef).enumerate() {
            let mut s = 0.0;
            for k in 0..4 {
                if nb[k] != u32::MAX {
                    s += co[k] * (x[q] - x[nb[k] as usize]);
                }
            }
            y[q] = s;
        }
    }

    fn diagonal(&self) -> Vec<f64> {
        self.coef.iter().map(|c| c.iter().sum::<f64>()).collect()
    }

    fn abs_product_norm(&self, x: &[f64]) -> f64 {
        let mut s = 0.0;
        for (q, (nb, co)) in self.nbr.iter().zip(&self.coef).enumerate() {
            let mut r = 0.0;
            for k in 0..4 {
                if nb[k] != u32::MAX {
                    r += co[k].abs() * (x[nb[k] as usize].abs() + x[q].abs());
                }
            }
            s += r * r;
        }
        s.sqrt()
    }
}

/// Pohlhausen's flat-plate local Nusselt numbers (Pr ≥ 0.6; uniform wall temperature 0.332,
/// uniform heat flux 0.453, times Re_x^(1/2)·Pr^(1/3); Kays & Crawford, from memory), in a
/// duct's terms Nu_x = a·Pr^(−1/6)/√x*: the combined entry's head below its resolved layer.
const PLATE_T: f64 = 0.332;
const PLATE_H: f64 = 0.453;
/// Head points before the first march point (ratio 1.25: the first one 1.25^−60 ≈ 1.5e-6 of
/// the way in).
const HEAD_POINTS: usize = 60;
const HEAD_RATIO: f64 = 1.25;

/// The energy equation marched with the developing velocity (simultaneously developing flow):
///
/// ```text
///   U·∂θ/∂x* + Pr·D²·∇φ·∇θ = D²·∇²θ,   x* = X/Pr,
/// ```
///
/// for T (θ = 1 at the inlet, 0 on the walls) and H1 (Ψ = Θ − 4x*, walls at the unknown Ψ_w
/// fixed by Σ U·Ψ = 0 over the passage, by superposition as in [`crate::entrance`]), on the
/// velocity march's points with the same BDF2 coefficients, U and φ of the new point (the
/// equation is linear in θ once the velocity is known). Local values as in
/// [`crate::entrance`]: Nu_x,T from the discrete wall flux over the bulk, Nu_x,H1 = 1/Ψ_w.
struct Energy<'a> {
    pr: f64,
    system: System<'a>,
    conv: Convection,
    built_for: f64,
    theta: Vec<f64>,
    theta_old: Vec<f64>,
    psi: Vec<f64>,
    psi_old: Vec<f64>,
    /// The wall response Φ (walls at 1) of the last step, and its right-hand side.
    wall_response: Vec<f64>,
    wall_rhs: Vec<f64>,
    /// Ψ_w per passage.
    wall: Vec<f64>,
    /// Cut-cell quadrature weights (the H1 bulk) and the cut links' 1/θ per unknown.
    qw: Vec<f64>,
    cut_weight: Vec<f64>,
    /// (x*, Nu_x,T, Nu_x,H1) at every march point, per passage.
    curves: Vec<Vec<[f64; 3]>>,
}

impl<'a> Energy<'a> {
    fn new(c: &'a Classified, num: &Numbering, np: usize, pr: f64, method: Method) -> Result<Self> {
        let n = num.len();
        let wall_rhs = Problem {
            walls: WallConditions::all(WallCondition::Dirichlet(1.0)),
            ..Problem::laplace(c)
        }
        .rhs(num, &Field::Zero);
        Ok(Energy {
            pr,
            system: System::new(Problem::laplace(c), method)?,
            conv: Convection::new(c, num),
            built_for: f64::NAN,
            theta: vec![1.0; n],
            theta_old: vec![1.0; n],
            psi: vec![0.0; n],
            psi_old: vec![0.0; n],
            wall_response: vec![0.0; n],
            wall_rhs,
            wall: vec![0.0; np],
            qw: post::quadrature_weights(c, num),
            cut_weight: num
                .nodes()
                .map(|k| c.cuts_of(k).iter().map(|cut| 1.0 / cut.theta).sum())
                .collect(),
            curves: vec![Vec::new(); np],
        })
    }

    /// One step to X (x* = X/Pr) of length Δ in X with BDF2's (ω, a₀) (backward Euler on
    /// the first), the velocity U and potential φ of the new point. Returns (solves,
    /// iterations).
    #[allow(clippy::too_many_arguments)]
    fn step(
        &mut self,
        x: f64,
        delta: f64,
        first: bool,
        omega: f64,
        a0: f64,
        u: &[f64],
        phi: &[f64],
        pass: &[usize],
        d2: &[f64],
        h2: f64,
        cg: &CgParams,
    ) -> Result<(usize, usize)> {
        let n = u.len();
        let np = self.wall.len();
        let ds = delta / self.pr;
        let scaled: Vec<f64> = phi.iter().map(|v| v * self.pr).collect();
        self.conv.set(&scaled);
        let shift: Vec<f64> = (0..n)
            .map(|q| a0 * u[q].max(0.0) / (ds * d2[pass[q]]))
            .collect();
        let scale_now = 1.0 / ds;
        let refresh =
            !(self.built_for / scale_now < REFRESH && scale_now / self.built_for < REFRESH);
        if refresh {
            self.built_for = scale_now;
        }
        self.system.update_shift(Field::Unknowns(shift), refresh)?;
        let hist = |now: &[f64], old: &[f64], q: usize| {
            if first {
                now[q]
            } else {
                (1.0 + omega) * now[q] - omega * omega / (1.0 + omega) * old[q]
            }
        };
        let mut its = 0;
        // T.
        let rhs: Vec<f64> = (0..n)
            .map(|q| {
                h2 * u[q].max(0.0) * hist(&self.theta, &self.theta_old, q) / (ds * d2[pass[q]])
            })
            .collect();
        let mut t_new = self.theta.clone();
        its += self
            .system
            .solve_perturbed(&self.conv, &rhs, &mut t_new, cg)
            .map_err(|e| e.in_solve(Solve::DevelopingFlow))?
            .iterations;
        // H1: the wall response, then the particular solution with walls at 0.
        its += self
            .system
            .solve_perturbed(&self.conv, &self.wall_rhs, &mut self.wall_response, cg)
            .map_err(|e| e.in_solve(Solve::DevelopingFlow))?
            .iterations;
        let rhs: Vec<f64> = (0..n)
            .map(|q| {
                h2 * u[q].max(0.0) * (hist(&self.psi, &self.psi_old, q) / ds - 4.0) / d2[pass[q]]
            })
            .collect();
        let mut p_new: Vec<f64> = (0..n)
            .map(|q| self.psi[q] - self.wall[pass[q]] * self.wall_response[q])
            .collect();
        its += self
            .system
            .solve_perturbed(&self.conv, &rhs, &mut p_new, cg)
            .map_err(|e| e.in_solve(Solve::DevelopingFlow))?
            .iterations;
        let mut part = vec![0.0; np];
        let mut resp = vec![0.0; np];
        let mut flux = vec![0.0; np];
        let mut bulk = vec![0.0; np];
        for q in 0..n {
            let p = pass[q];
            let wq = self.qw[q] * u[q];
            part[p] += wq * p_new[q];
            resp[p] += wq * self.wall_response[q];
            flux[p] += t_new[q] * self.cut_weight[q];
            bulk[p] += u[q] * t_new[q];
        }
        for p in 0..np {
            self.wall[p] = -part[p] / resp[p];
        }
        for q in 0..n {
            p_new[q] += self.wall[pass[q]] * self.wall_response[q];
        }
        self.theta_old = std::mem::replace(&mut self.theta, t_new);
        self.psi_old = std::mem::replace(&mut self.psi, p_new);
        let xs = x / self.pr;
        for p in 0..np {
            let nu_t = d2[p] * flux[p] / (4.0 * h2 * bulk[p]);
            self.curves[p].push([xs, nu_t, 1.0 / self.wall[p]]);
        }
        Ok((3, its))
    }
}

/// Marches the developing flow of every passage of `flow` from a uniform inlet velocity to
/// the last of `stations` (ascending X), or until it has settled. `decay` is the largest
/// rate 4·Nu_T of the passages' slowest thermal modes (a march step is at most 1/decay
/// long; the developing flow's slowest mode decays at a similar rate).
#[allow(clippy::too_many_arguments)]
pub fn hydrodynamic_entrance(
    flow: &Flow,
    stations: &[f64],
    decay: f64,
    method: Method,
    params: &HydroParams,
    combined: Option<&CombinedSpec>,
) -> Result<HydrodynamicEntrance> {
    let (c, u, passages) = (flow.classified, flow.u, flow.passages);
    let start = Instant::now();
    if stations.is_empty() {
        return Err(Error::param("--entrance", "no stations to march to"));
    }
    let (labels, count) = post::passage_labels(c);
    let np = passages.len();
    if count != np {
        return Err(Error::Numerical(format!(
            "the flow solution has {np} passages, the grid {count}"
        )));
    }
    let mut order = vec![0usize; np];
    for (i, p) in passages.iter().enumerate() {
        order[p.label as usize] = i;
    }
    let mut system = System::new(Problem::laplace(c), method)?;
    let num = system.numbering().clone();
    let n = num.len();
    let pass: Vec<usize> = num.nodes().map(|k| order[labels[k] as usize]).collect();
    let d2: Vec<f64> = passages
        .iter()
        .map(|p| p.hydraulic_diameter * p.hydraulic_diameter)
        .collect();
    // The fully developed profile w = ũ·A/∫ũ and the mass of each passage.
    let scale: Vec<f64> = passages.iter().map(|p| p.area / p.flow_integral).collect();
    let w: Vec<f64> = (0..n).map(|q| u[q] * scale[pass[q]]).collect();
    let sum_by = |f: &dyn Fn(usize) -> f64| crate::entrance::sum_by(&pass, np, f);
    let mass = sum_by(&|q| w[q]);
    let nodes = sum_by(&|_| 1.0);
    let g_fd: Vec<f64> = (0..np).map(|p| d2[p] * scale[p]).collect();
    let mut umax_fd = vec![0.0f64; np];
    for q in 0..n {
        umax_fd[pass[q]] = umax_fd[pass[q]].max(w[q]);
    }
    let h = c.grid.h;
    let resolved_from: Vec<f64> = (0..np)
        .map(|p| (RESOLVED_CELLS * h / (BLASIUS_DISPLACEMENT * d2[p].sqrt())).powi(2))
        .collect();

    // The flux-free problem of φ.
    let mut neumann = System::new(
        Problem {
            shift: Field::Unknowns((0..n).map(|q| NEUMANN_SHIFT / d2[pass[q]]).collect()),
            walls: WallConditions::all(WallCondition::Neumann(0.0)),
            ..Problem::laplace(c)
        },
        method,
    )?;
    let mut conv = Convection::new(c, &num);
    let cg = CgParams {
        tolerance: params.tolerance,
        ..CgParams::default()
    };
    // φ only convects: ten times the momentum's tolerance (measured on the round tube: 1e-5
    // against 1e-9 changes K(∞) by 1e-5 relative).
    let cg_phi = CgParams {
        tolerance: 10.0 * params.tolerance,
        ..CgParams::default()
    };
    let h2 = h * h;

    let cap_velocity = 1.0 / (STEP_CAP_FACTOR * decay.max(1e-12));
    let last_plus = *stations.last().expect("checked above");
    // With the energy equation, the march goes on in X = Pr·x* to the last x* station, its
    // steps capped by the slowest thermal mode (λ·Δx* ≤ ½) once the velocity's range is done.
    let mut energy = match combined {
        Some(spec) => Some(Energy::new(c, &num, np, spec.prandtl, method)?),
        None => None,
    };
    let pr = combined.map_or(1.0, |s| s.prandtl);
    let cap_thermal = pr / (2.0 * decay.max(1e-12));
    let mut all_stations: Vec<f64> = stations.to_vec();
    if combined.is_some() {
        all_stations.extend(stations.iter().map(|s| s * pr));
        all_stations.sort_by(f64::total_cmp);
        all_stations.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * *b);
    }
    // While the velocity develops its steps are capped by its own slowest mode (and the
    // energy's), after that by the energy's alone.
    let cap = |velocity_active: bool| {
        if combined.is_none() {
            cap_velocity
        } else if velocity_active {
            cap_velocity.min(cap_thermal)
        } else {
            cap_thermal
        }
    };
    let mut stepper = Stepper::new(&all_stations, params.first, params.ratio);
    let mut velocity_active = true;
    let zeros = vec![0.0; n];
    let mut energy_settled = false;
    // State: U at the last two points, φ at the last two, their X.
    let inlet: Vec<f64> = (0..n).map(|q| mass[pass[q]] / nodes[pass[q]]).collect();
    let mut u_now = inlet.clone();
    let mut u_old = inlet;
    let mut phi_now = vec![0.0; n];
    let (mut x_now, mut x_old) = (0.0f64, 0.0f64);
    // U_a and U_b start each solve from their values at the last point (or the last pass):
    // both change smoothly along X. (Starting U_a from U, as first written, cost a fifth more
    // iterations: on shapes/mould_slot.toml with Pr 4.3, 4712 against 3766 iterations, and
    // 208 against 164 steps, as the settle test then met the solves' own noise later.)
    let mut ua = vec![0.0; n];
    let mut ub = vec![0.0; n];
    let mut g_now = vec![0.0; np];
    // The march's own ∫G dX, and the offset that joins it to the Blasius head.
    let mut march_drop = vec![0.0; np];
    let mut offset: Vec<Option<f64>> = vec![None; np];
    let mut curves: Vec<Vec<[f64; 4]>> = vec![Vec::new(); np];
    let (mut steps, mut solves, mut iterations) = (0usize, 0usize, 0usize);
    let mut built_for = f64::NAN;
    let mut settled_all = false;
    let mut shift = vec![0.0; n];
    let mut f = vec![0.0; n];
    let mut u_star = vec![0.0; n];
    while let Some(x) = stepper.next(cap(velocity_active)) {
        let delta = x - x_now;
        let first = steps == 0;
        let (omega, a0) = if first {
            (0.0, 1.0)
        } else {
            let om = delta / (x_now - x_old);
            (om, (1.0 + 2.0 * om) / (1.0 + om))
        };
        if velocity_active {
            // Each pass: the coefficient U* and the potential φ* of the step, then the step.
            // The first pass takes U* extrapolated from the last two points and φ* from the last
            // one; a second pass takes both from the first pass's solution (see the module
            // documentation).
            let mut u_new: Vec<f64> = vec![0.0; n];
            let mut g_new: Vec<f64> = vec![0.0; np];
            let mut phi_new = phi_now.clone();
            for pass_i in 0..PASSES {
                if pass_i == 0 {
                    let extrapolate = steps >= 2;
                    for q in 0..n {
                        u_star[q] = if extrapolate {
                            (u_now[q] + omega * (u_now[q] - u_old[q])).max(0.5 * u_now[q])
                        } else {
                            u_now[q]
                        };
                    }
                    conv.set(&phi_now);
                } else {
                    for q in 0..n {
                        u_star[q] = u_new[q].max(0.5 * u_now[q]);
                    }
                    conv.set(&phi_new);
                }
                for q in 0..n {
                    shift[q] = a0 * u_star[q] / (delta * d2[pass[q]]);
                }
                let scale_now = 1.0 / delta;
                let refresh = pass_i == 0
                    && !(built_for / scale_now < REFRESH && scale_now / built_for < REFRESH);
                if refresh {
                    built_for = scale_now;
                }
                system.update_shift(Field::Unknowns(shift.clone()), refresh)?;
                // History part of the right-hand side.
                for q in 0..n {
                    let hist = if first {
                        u_now[q]
                    } else {
                        (1.0 + omega) * u_now[q] - omega * omega / (1.0 + omega) * u_old[q]
                    };
                    f[q] = u_star[q] * hist / (delta * d2[pass[q]]);
                }
                let rhs: Vec<f64> = f.iter().map(|v| v * h2).collect();
                let its = system
                    .solve_perturbed(&conv, &rhs, &mut ua, &cg)
                    .map_err(|e| e.in_solve(Solve::DevelopingFlow))?
                    .iterations;
                iterations += its;
                let rhs_b: Vec<f64> = (0..n).map(|q| h2 / d2[pass[q]]).collect();
                iterations += system
                    .solve_perturbed(&conv, &rhs_b, &mut ub, &cg)
                    .map_err(|e| e.in_solve(Solve::DevelopingFlow))?
                    .iterations;
                solves += 2;
                let sa = sum_by(&|q| ua[q]);
                let sb = sum_by(&|q| ub[q]);
                g_new = (0..np).map(|p| (mass[p] - sa[p]) / sb[p]).collect();
                for q in 0..n {
                    u_new[q] = ua[q] + g_new[pass[q]] * ub[q];
                }
                // ∂U/∂X at the new point (the step's own difference formula), then φ.
                for q in 0..n {
                    let dudx = if first {
                        (u_new[q] - u_now[q]) / delta
                    } else {
                        (a0 * u_new[q] - (1.0 + omega) * u_now[q]
                            + omega * omega / (1.0 + omega) * u_old[q])
                            / delta
                    };
                    f[q] = dudx / d2[pass[q]];
                }
                // Solvable: Σ over each passage of ∂U/∂X vanishes with the mass constraint;
                // remove the round-off.
                let mean = sum_by(&|q| f[q]);
                let rhs: Vec<f64> = (0..n)
                    .map(|q| h2 * (f[q] - mean[pass[q]] / nodes[pass[q]]))
                    .collect();
                let its = neumann
                    .solve(&rhs, &mut phi_new, &cg_phi)
                    .map_err(|e| e.in_solve(Solve::CrossFlow))?
                    .iterations;
                iterations += its;
                solves += 1;
            }
            // Pressure: trapezoidal ∫G dX (the first step's G is the implicit one).
            let mut settled = x > SETTLED_FROM;
            if x > last_plus * (1.0 + 1e-12) {
                // Beyond the hydrodynamic stations (the energy equation's range): settled enough.
                settled = true;
            }
            for p in 0..np {
                march_drop[p] += if first {
                    g_new[p] * delta
                } else {
                    0.5 * (g_now[p] + g_new[p]) * delta
                };
                if offset[p].is_none() && x >= resolved_from[p] {
                    offset[p] = Some(head_drop(x) - march_drop[p]);
                }
                let drop = match offset[p] {
                    Some(o) => march_drop[p] + o,
                    None => head_drop(x),
                };
                let mut umax = 0.0f64;
                for q in 0..n {
                    if pass[q] == p {
                        umax = umax.max(u_new[q]);
                    }
                }
                let ratio = umax / umax_fd[p];
                if let Some(l) = curves[p].last() {
                    settled &= (g_new[p] - g_now[p]).abs() <= SETTLED * g_new[p]
                        && (ratio - l[3]).abs() <= SETTLED;
                }
                let fre = drop / (2.0 * x);
                curves[p].push([x, fre, 2.0 * drop - 2.0 * g_fd[p] * x, ratio]);
            }
            g_now = g_new;
            u_old = std::mem::replace(&mut u_now, u_new);
            phi_now = phi_new;
            if settled {
                settled_all = true;
                velocity_active = false;
                // Fully developed: the pressure falls at the fully developed rate from here on.
                for &x in stepper
                    .remaining()
                    .iter()
                    .filter(|&&x| x <= last_plus * (1.0 + 1e-12))
                {
                    for (p, curve) in curves.iter_mut().enumerate() {
                        let l = *curve.last().expect("a point was pushed");
                        let drop = 2.0 * l[0] * l[1] + g_now[p] * (x - l[0]);
                        curve.push([x, drop / (2.0 * x), 2.0 * drop - 2.0 * g_fd[p] * x, l[3]]);
                    }
                }
            }
        }
        if let Some(en) = energy.as_mut() {
            let phi = if velocity_active { &phi_now } else { &zeros };
            let (sv, it) = en.step(
                x,
                delta,
                steps == 0,
                omega,
                a0,
                &u_now,
                phi,
                &pass,
                &d2,
                h2,
                &cg,
            )?;
            solves += sv;
            iterations += it;
            // Settled once every local value changed by less than SETTLED_THERMAL over a
            // step beyond x* = SETTLED_FROM with the velocity developed.
            let xs = x / pr;
            energy_settled = !velocity_active
                && xs > SETTLED_FROM
                && en.curves.iter().all(|c| {
                    let k = c.len();
                    k >= 2
                        && (c[k - 1][1] - c[k - 2][1]).abs() <= SETTLED_THERMAL * c[k - 1][1]
                        && (c[k - 1][2] - c[k - 2][2]).abs() <= SETTLED_THERMAL * c[k - 1][2]
                });
        }
        x_old = x_now;
        x_now = x;
        steps += 1;
        let done_velocity = !velocity_active || x >= last_plus * (1.0 - 1e-12);
        let done_energy = energy.is_none() || energy_settled;
        if done_velocity && done_energy {
            if let Some(en) = energy.as_mut() {
                for &x in stepper.remaining() {
                    for curve in en.curves.iter_mut() {
                        let l = *curve.last().expect("a point was pushed");
                        curve.push([x / pr, l[1], l[2]]);
                    }
                }
            }
            break;
        }
    }
    let passages_out = curves
        .into_iter()
        .enumerate()
        .map(|(p, curve)| {
            let fre_fd = 0.5 * g_fd[p];
            let out = PassageDeveloping {
                apparent_f_re: Vec::new(),
                incremental_pressure_drop: Vec::new(),
                k_infinity: curve.last().map_or(f64::NAN, |l| l[2]),
                length_plus: entrance_length(&curve),
                fanning_f_re: fre_fd,
                resolved_from: resolved_from[p],
                max_to_mean_fully_developed: umax_fd[p],
                curve,
            };
            let at: Vec<(f64, f64)> = stations
                .iter()
                .map(|&x| out.at(x).unwrap_or((f64::NAN, f64::NAN)))
                .collect();
            PassageDeveloping {
                apparent_f_re: at.iter().map(|a| a.0).collect(),
                incremental_pressure_drop: at.iter().map(|a| a.1).collect(),
                ..out
            }
        })
        .collect();
    let combined_out = match (energy, combined) {
        (Some(en), Some(spec)) => {
            let passages_c = en
                .curves
                .into_iter()
                .enumerate()
                .map(|(p, curve)| {
                    let from = spec
                        .resolved_from
                        .get(p)
                        .copied()
                        .unwrap_or(0.0)
                        .max(resolved_from[p] * spec.prandtl.powf(-1.0 / 3.0));
                    let k = spec.prandtl.powf(-1.0 / 6.0);
                    // The flat-plate head Nu ∝ x*^(−1/2) from far closer to the inlet than the
                    // first march point, so that the means (which integrate the local values
                    // piecewise as α + β·x*^(−1/3), see `entrance`) integrate its steeper
                    // law too (the head from 0 to the first point would otherwise be taken as
                    // Lévêque's x*^(−1/3), 25 % short).
                    let first = curve.first().map_or(1e-7, |q| q[0]);
                    let lead: Vec<[f64; 3]> = (1..=HEAD_POINTS)
                        .rev()
                        .map(|i| {
                            let x = first * HEAD_RATIO.powi(-(i as i32));
                            let r = x.sqrt();
                            [x, PLATE_T * k / r, PLATE_H * k / r]
                        })
                        .collect();
                    let curve: Vec<[f64; 3]> = lead
                        .into_iter()
                        .chain(curve)
                        .map(|q| {
                            if q[0] < from {
                                let r = q[0].sqrt();
                                [q[0], PLATE_T * k / r, PLATE_H * k / r]
                            } else {
                                q
                            }
                        })
                        .collect();
                    let fd = spec.fully_developed.get(p).copied().unwrap_or_else(|| {
                        let l = curve.last().copied().unwrap_or([0.0, f64::NAN, f64::NAN]);
                        (l[1], l[2])
                    });
                    PassageEntrance::from_curve(
                        curve,
                        stations,
                        fd,
                        Leveque {
                            m: f64::NAN,
                            resolved_from: from,
                        },
                    )
                })
                .collect();
            Some(Combined {
                prandtl: spec.prandtl,
                thermal: ThermalEntrance {
                    x_star: stations.to_vec(),
                    passages: passages_c,
                    steps,
                    solves,
                    iterations,
                    seconds: start.elapsed().as_secs_f64(),
                    setup_seconds: 0.0,
                },
            })
        }
        _ => None,
    };
    Ok(HydrodynamicEntrance {
        combined: combined_out,
        x_plus: stations.to_vec(),
        passages: passages_out,
        steps,
        solves,
        iterations,
        seconds: start.elapsed().as_secs_f64(),
        settled: settled_all,
    })
}

/// The march points of a variable-step BDF2 march, one at a time: from `first`, each step at
/// most `ratio` times the last and at most the cap of the moment, landing on every station;
/// a step that would overshoot a station, or leave less than a step before it, is shortened,
/// the remainder split into two equal steps. Successive step ratios so stay within
/// [½, `ratio`], inside BDF2's zero-stability bound 1 + √2 (Grigorieff 1983, from memory).
struct Stepper<'s> {
    stations: &'s [f64],
    next: usize,
    x: f64,
    delta: f64,
    ratio: f64,
    started: bool,
}

impl<'s> Stepper<'s> {
    fn new(stations: &'s [f64], first: f64, ratio: f64) -> Self {
        Stepper {
            stations,
            next: stations.partition_point(|&s| s <= first * (1.0 + 1e-12)),
            x: first,
            delta: first,
            ratio,
            started: false,
        }
    }

    /// The next march point with steps at most `cap`; None after the last station.
    fn next(&mut self, cap: f64) -> Option<f64> {
        if !self.started {
            self.started = true;
            return Some(self.x);
        }
        // Stations within round-off of the point reached count as reached.
        while self
            .stations
            .get(self.next)
            .is_some_and(|&t| t <= self.x * (1.0 + 1e-12))
        {
            self.next += 1;
        }
        let target = *self.stations.get(self.next)?;
        let d = (self.delta * self.ratio).min(cap);
        let remaining = target - self.x;
        if remaining <= d * (1.0 + 1e-9) {
            self.next += 1;
            self.delta = remaining;
            self.x = target;
        } else {
            self.delta = if remaining < 2.0 * d {
                0.5 * remaining
            } else {
                d
            };
            self.x += self.delta;
        }
        Some(self.x)
    }

    /// The stations not reached yet.
    fn remaining(&self) -> &'s [f64] {
        &self.stations[self.next..]
    }
}

/// The first X from which u_max/u_max,fd stays within 1 % of 1, interpolated linearly in ln X.
fn entrance_length(curve: &[[f64; 4]]) -> Option<f64> {
    let within = |p: &[f64; 4]| (p[3] - 1.0).abs() <= 0.01;
    match curve.iter().rposition(|p| !within(p)) {
        None => curve.first().map(|p| p[0]),
        Some(k) if k + 1 >= curve.len() => None,
        Some(k) => {
            let (p, q) = (&curve[k], &curve[k + 1]);
            let target = if p[3] > 1.0 { 1.01 } else { 0.99 };
            let t = ((target - p[3]) / (q[3] - p[3])).clamp(0.0, 1.0);
            Some((p[0].ln() + t * (q[0].ln() - p[0].ln())).exp())
        }
    }
}
