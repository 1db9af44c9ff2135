//! Developing heat transfer along a passage: the thermal entrance (Graetz–Nusselt) problem of
//! any cross-section, marched along the passage on the flow problem's grid.
//!
//! Owns: the march ([`thermal_entrance`]) and its result ([`ThermalEntrance`]): local and mean
//! Nusselt numbers for the T and H1 conditions at the stations, and the thermal entrance
//! lengths.
//!
//! # The problem
//! Fully developed laminar velocity w = u/ū (per passage: each passage has its own mean
//! velocity, hydraulic diameter D and axial coordinate), uniform inlet temperature, constant
//! properties, axial conduction neglected:
//!
//! ```text
//!   w·∂θ/∂x* = D²·∇²θ,   x* = x/(D·Re·Pr).
//! ```
//!
//! - **T** (uniform wall temperature): θ = (T − T_w)/(T_in − T_w), θ = 1 at the inlet, 0 on
//!   the walls. With the bulk θ_b = ∫wθ dA/∫w dA, the energy balance gives
//!   Nu_x,T = −¼·d(ln θ_b)/dx* and Nu_m,T = −ln θ_b/(4x*) (log-mean temperature difference).
//! - **H1** (axially uniform heat input, peripherally uniform wall temperature):
//!   Θ = (T − T_in)·k/(q̄·D), Θ = 0 at the inlet; the wall value Θ_w(x*) is uniform around the
//!   passage and fixed by the heat input, which makes the bulk rise as Θ_b = 4x* exactly.
//!   Nu_x,H1 = 1/(Θ_w − Θ_b); Nu_m,H1 = (1/x*)·∫₀^x* Nu_x,H1 dx* (Shah & London 1978, ch. 3,
//!   from memory, define both means this way).
//!
//! # The march
//! Implicit in x*: a three-stage, L-stable, stiffly accurate SDIRK of order 3 (`Sdirk`;
//! the L-stability damps the jump of the inlet profile at the wall). Every stage of a step of
//! length Δ is the shifted problem
//!
//! ```text
//!   (w/(γ·Δ·D²))·Y − ∇²Y = (w/(γ·Δ·D²))·θⁿ + (1/γ)·Σ_(j<i) a_ij·F_j,
//! ```
//!
//! one solve on [`System`] (the shift per unknown, the same cut-cell operator as the flow
//! problem). The H1 wall value is one more unknown per passage (a bordered system), found by
//! superposition: Θ = Θ_p + Θ_w·Φ, with Θ_p the stage's solution for walls at 0 and Φ the
//! solution of the homogeneous stage for walls at 1, solved as Φ = 1 − χ with a right-hand
//! side free of wall terms (two solves per stage); the constraint Θ_b = 4·x* of each passage
//! then gives its Θ_w. The steps start at [`MarchParams::first`] and grow geometrically,
//! landing on every station: the base sequence at most [`MarchParams::ratio`] apart, each of
//! its steps split into 2^[`MarchParams::halvings`] (so that the march of one halving less has
//! exactly every other point, for the step-error estimate of `study::entrance`), and no step
//! longer than the slowest mode allows (see the cap in [`thermal_entrance`]).
//!
//! # The Nusselt numbers
//! The local Nu_x,T is evaluated at each station from the field, not by differencing θ_b
//! along the march (whose step error would need short steps all the way to the fully
//! developed region): summed over a passage's unknowns, the semi-discrete equation
//! h²·w·dθ/dx* = −D²·(A·θ) gives d/dx*(Σ w·θ) = −D²/h²·Σ(A·θ), and Σ(A·θ) telescopes to the
//! discrete wall flux Σ_cut θ_i/θ_cut. So Nu_x,T = D²·Σ_cut θ_i/θ_cut / (4h²·Σ w·θ), which at
//! large x* is exactly the Rayleigh quotient of the Nu_T eigen-problem A·f = λ·h²·diag(w)·f
//! (`heat`): the march tends to the fully developed value with no step error. The bulk weighs
//! every node by h² (second order: wθ vanishes linearly at the wall). Nu_x,H1 = 1/(Θ_w − 4x*),
//! the bulk by the cut-cell quadrature of the flow integral (as Nu_H1 of `heat`).
//!
//! The means integrate the local values: ∫Nu_x dx* with Nu_x = α + β·x*^(−1/3) between march
//! points (exact both for the Lévêque behaviour Nu_x ∝ x*^(−1/3) of the inlet region and for
//! the constant fully developed value; a linear Nu_x·x*^(1/3) was 0.2 % off there), and
//! Nu_x ∝ x*^(−1/3) from the inlet to the first point. For T this is −ln θ_b/4 exactly in the
//! continuous problem; integrating the field-evaluated local values avoids the accumulated step
//! error of θ_b itself.
//!
//! Entrance lengths (Shah & London 1978, from memory): the smallest x* from which the local
//! Nusselt number stays within 5 % of its fully developed value.
//!
//! Invariant: knows the problem layer and the system, nothing of files, units or fluids.

use crate::error::{Error, Result};
use crate::geometry::Walls;
use crate::grid::Classified;
use crate::post::{self, PassageFigures, ShearSample};
use crate::problem::{Field, Problem};
use crate::solver::CgParams;
use crate::system::{Method, System};
use std::time::Instant;

/// A singly diagonally implicit Runge–Kutta method: three stages, order 3, L-stable and
/// stiffly accurate (the last stage is the step's value), every stage with the same diagonal
/// coefficient γ, so one operator per step (Alexander, SIAM J. Numer. Anal. 14 (1977) 1006,
/// from memory; γ the root of γ³ − 3γ² + 1.5γ − 1/6 = 0 in (1/6, 1/2)).
struct Sdirk {
    gamma: f64,
    a: [[f64; 3]; 3],
}

const SDIRK_GAMMA: f64 = 0.435_866_521_508_459;

const SDIRK: Sdirk = {
    let g = SDIRK_GAMMA;
    let b1 = -(6.0 * g * g - 16.0 * g + 1.0) / 4.0;
    let b2 = (6.0 * g * g - 20.0 * g + 5.0) / 4.0;
    Sdirk {
        gamma: g,
        a: [[g, 0.0, 0.0], [(1.0 - g) / 2.0, g, 0.0], [b1, b2, g]],
    }
};

/// The stations every entrance result holds: 1, 2 and 5 × 10^k from 1e-5 to 1.
pub fn standard_stations() -> Vec<f64> {
    let mut v = Vec::new();
    for e in -5..=0 {
        for m in [1.0, 2.0, 5.0] {
            let x = m * 10f64.powi(e);
            if x <= 1.0 + 1e-12 {
                v.push(x);
            }
        }
    }
    v
}

/// Control of the march.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MarchParams {
    /// The first march point, x* (the inlet step), at most: on fine grids it is moved towards
    /// the inlet to a quarter of the x* from which the thermal layer is resolved.
    pub first: f64,
    /// Largest ratio of successive points of the base sequence (steps grow geometrically
    /// between stations).
    pub ratio: f64,
    /// Each step of the base sequence after the inlet step is split into 2^halvings steps of
    /// equal ratio, so that a march and the one of one halving less have exactly the same
    /// points every other point: their difference is the step error alone, in a known ratio.
    pub halvings: u32,
    /// Relative residual of each solve.
    pub tolerance: f64,
}

impl Default for MarchParams {
    fn default() -> Self {
        MarchParams {
            first: 1e-7,
            ratio: 2.25,
            halvings: 1,
            tolerance: 1e-7,
        }
    }
}

impl MarchParams {
    /// March steps over a decade of x* away from the inlet and the fully developed region.
    pub fn steps_per_decade(&self) -> usize {
        march_points(1.0, self.ratio, self.halvings, 10.0).len() - 1
    }
}

/// The thermal entrance of one passage, at the stations of [`ThermalEntrance::x_star`].
#[derive(Debug, Clone, PartialEq)]
pub struct PassageEntrance {
    /// The passage's thin-layer limit near the inlet.
    pub leveque: Leveque,
    pub nusselt_t_local: Vec<f64>,
    pub nusselt_t_mean: Vec<f64>,
    pub nusselt_h1_local: Vec<f64>,
    pub nusselt_h1_mean: Vec<f64>,
    /// The fully developed values the entrance lengths refer to.
    pub nusselt_t_fully_developed: f64,
    pub nusselt_h1_fully_developed: f64,
    /// x* from which the local value stays within 5 % of the fully developed one (None if
    /// not within the march).
    pub length_star_t: Option<f64>,
    pub length_star_h1: Option<f64>,
    /// Every march point with its local values (x*, Nu_x,T, Nu_x,H1), for plots and for
    /// interpolation at a passage's own outlet.
    pub curve: Vec<[f64; 3]>,
}

impl PassageEntrance {
    /// The stations' local and mean values and the entrance lengths from every march point's
    /// local values (x*, Nu_x,T, Nu_x,H1), the head near the inlet already in `curve`; `fd`
    /// the fully developed (Nu_T, Nu_H1) the entrance lengths refer to.
    pub(crate) fn from_curve(
        curve: Vec<[f64; 3]>,
        stations: &[f64],
        fd: (f64, f64),
        leveque: Leveque,
    ) -> PassageEntrance {
        let at = |x: f64| -> [f64; 3] {
            *curve
                .iter()
                .find(|q| (q[0] - x).abs() <= 1e-9 * x)
                .unwrap_or(&[x, f64::NAN, f64::NAN])
        };
        let means: Vec<(f64, f64)> = stations
            .iter()
            .map(|&x| means_at(&curve, x).unwrap_or((f64::NAN, f64::NAN)))
            .collect();
        PassageEntrance {
            leveque,
            nusselt_t_local: stations.iter().map(|&x| at(x)[1]).collect(),
            nusselt_t_mean: means.iter().map(|m| m.0).collect(),
            nusselt_h1_local: stations.iter().map(|&x| at(x)[2]).collect(),
            nusselt_h1_mean: means.iter().map(|m| m.1).collect(),
            nusselt_t_fully_developed: fd.0,
            nusselt_h1_fully_developed: fd.1,
            length_star_t: entrance_length(&curve, 1, fd.0),
            length_star_h1: entrance_length(&curve, 2, fd.1),
            curve,
        }
    }

    /// Mean Nusselt numbers (T, H1) over 0..x*, interpolated between march points (the same
    /// integration as the stations'); None beyond the march.
    pub fn means_at(&self, x: f64) -> Option<(f64, f64)> {
        means_at(&self.curve, x)
    }
}

/// The thermal entrance of every passage.
#[derive(Debug, Clone, PartialEq)]
pub struct ThermalEntrance {
    pub x_star: Vec<f64>,
    /// In the order of the passages' figures.
    pub passages: Vec<PassageEntrance>,
    /// March steps, solves and their CG iterations, wall-clock seconds.
    pub steps: usize,
    pub solves: usize,
    pub iterations: usize,
    pub seconds: f64,
    /// Of which the set-up of the steps' operators and hierarchies.
    pub setup_seconds: f64,
}

/// The march points: from `first` to the last station, every station included, successive
/// points of the base sequence at most `ratio` apart (equal ratios between anchors 1, 2,
/// 5 × 10^k), each of its steps then split into 2^`halvings` steps of equal ratio.
fn march_points(first: f64, ratio: f64, halvings: u32, last: f64) -> Vec<f64> {
    let mut anchors = Vec::new();
    let mut e = first.log10().floor() as i32 - 1;
    loop {
        for m in [1.0, 2.0, 5.0] {
            let x = m * 10f64.powi(e);
            if x >= first * (1.0 - 1e-12) && x <= last * (1.0 + 1e-12) {
                anchors.push(x);
            }
        }
        if 10f64.powi(e) > last {
            break;
        }
        e += 1;
    }
    if anchors.first().is_none_or(|&a| a > first * (1.0 + 1e-12)) {
        anchors.insert(0, first);
    }
    let mut points = vec![anchors[0]];
    for pair in anchors.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let n = ((b / a).ln() / ratio.ln()).ceil().max(1.0) as usize * (1usize << halvings);
        let r = (b / a).powf(1.0 / n as f64);
        for k in 1..n {
            points.push(a * r.powi(k as i32));
        }
        points.push(b);
    }
    points
}

/// ∫ from a to b of Nu(x) dx with Nu = α + β·x^(−1/3) through (a, na) and (b, nb): exact for the
/// Lévêque behaviour near the inlet (α = 0) and for the constant fully developed value (β = 0).
fn segment_integral(a: f64, b: f64, na: f64, nb: f64) -> f64 {
    if b - a <= 1e-9 * b {
        // A sliver (a station a round-off past a march point): the trapezoid, without the
        // 0/0 of equal cube roots.
        return 0.5 * (na + nb) * (b - a);
    }
    let (ta, tb) = (a.cbrt().recip(), b.cbrt().recip());
    let beta = (na - nb) / (ta - tb);
    let alpha = na - beta * ta;
    alpha * (b - a) + beta * 1.5 * (b.powf(2.0 / 3.0) - a.powf(2.0 / 3.0))
}

/// Mean values over 0..x of the local values of `curve` (x, Nu_T, Nu_H1), see the module
/// documentation; None beyond the curve.
fn means_at(curve: &[[f64; 3]], x: f64) -> Option<(f64, f64)> {
    let first = curve.first()?;
    if x <= 0.0 || x > curve.last()?[0] * (1.0 + 1e-12) {
        return None;
    }
    let mut total = [0.0; 2];
    // The inlet to the first point: Nu ∝ x^(−1/3).
    let head = x.min(first[0]);
    for (i, t) in total.iter_mut().enumerate() {
        *t = 1.5 * first[i + 1] * first[0].cbrt() * head.powf(2.0 / 3.0);
    }
    for pair in curve.windows(2) {
        let (p, q) = (&pair[0], &pair[1]);
        if p[0] >= x {
            break;
        }
        if q[0] <= p[0] {
            // A repeated point adds nothing (and would divide by zero below).
            continue;
        }
        let b = q[0].min(x);
        for (i, t) in total.iter_mut().enumerate() {
            // The value at b on the same two-term curve through p and q.
            let (ta, tq, tb) = (p[0].cbrt().recip(), q[0].cbrt().recip(), b.cbrt().recip());
            let nb = if ta == tq {
                q[i + 1]
            } else {
                p[i + 1] + (p[i + 1] - q[i + 1]) / (ta - tq) * (tb - ta)
            };
            *t += segment_integral(p[0], b, p[i + 1], nb);
        }
    }
    Some((total[0] / x, total[1] / x))
}

/// The first x* of `curve` (column `i`) from which every later local value lies within 5 % of
/// `fd`, interpolated linearly in ln x* between march points.
fn entrance_length(curve: &[[f64; 3]], i: usize, fd: f64) -> Option<f64> {
    let within = |p: &[f64; 3]| (p[i] - fd).abs() <= 0.05 * fd;
    let last_out = curve.iter().rposition(|p| !within(p));
    match last_out {
        None => curve.first().map(|p| p[0]),
        Some(k) if k + 1 >= curve.len() => None,
        Some(k) => {
            let (p, q) = (&curve[k], &curve[k + 1]);
            // The crossing of |Nu − fd| = 0.05·fd between p (outside) and q (inside).
            let target = if p[i] > fd { 1.05 * fd } else { 0.95 * fd };
            let t = ((target - p[i]) / (q[i] - p[i])).clamp(0.0, 1.0);
            Some((p[0].ln() + t * (q[0].ln() - p[0].ln())).exp())
        }
    }
}

/// The fully developed flow a march starts from: the classified grid, ũ per unknown (in
/// [`crate::problem::Numbering`] order), the passages' figures, and the wall samples with
/// their wall shear τ̃ (same order).
#[derive(Clone, Copy)]
pub struct Flow<'a> {
    pub classified: &'a Classified,
    pub u: &'a [f64],
    pub passages: &'a [PassageFigures],
    pub walls: &'a Walls,
    pub shear: &'a [ShearSample],
}

/// Γ(4/3) and Γ(2/3) (Abramowitz & Stegun 1964, table 6.1, from memory).
const GAMMA_4_3: f64 = 0.892_979_511_569_249_2;
const GAMMA_2_3: f64 = 1.354_117_939_426_400_4;

/// The march stops once every local Nusselt number changed by less than this (relative) over
/// a step beyond x* = [`SETTLED_FROM`]: the fully developed values then hold to round-off at
/// every later station.
const SETTLED: f64 = 1e-7;
const SETTLED_FROM: f64 = 0.05;

/// The most a solve's tolerance is relaxed, as a multiple of [`MarchParams::tolerance`].
const RELAXED: f64 = 10.0;

/// Largest factor by which the shift of a step may differ from the one the multigrid
/// hierarchy was built for before it is rebuilt (see [`System::update_shift`]); the
/// developing-flow march (`hydrodynamic`) uses the same.
pub(crate) const REFRESH: f64 = 3.0;

/// Cells across the thinnest thermal layer from which the march's local values are taken;
/// closer to the inlet the Lévêque asymptote stands for them (see [`Leveque`]).
const RESOLVED_CELLS: f64 = 4.0;

/// The first march point lies at most this factor below the x* from which the thermal layer
/// is resolved (see [`thermal_entrance`]).
const START_UP: f64 = 4.0;

/// The thin-layer (Lévêque) limit of a passage near the inlet: with s = ∂w/∂n the wall shear
/// rate of w = u/ū, the layer at each wall point is that of a linear velocity profile, so
/// (Lévêque 1928; for ducts Shah & London 1978, from memory)
///
/// ```text
///   Nu_x,T ≈ M/Γ(4/3),  Nu_x,H1 ≈ Γ(2/3)·M,  M = (D/P)·∮ (s/(9·D²·x*))^(1/3) dσ
/// ```
///
/// (circle: s = 8/D, Nu_x,T ≈ 1.077·x*^(−1/3), Nu_x,H ≈ 1.302·x*^(−1/3)). H1 takes the
/// power-law wall temperature of the uniform-flux layer at every wall point, which its
/// peripherally uniform wall temperature makes exact in the limit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Leveque {
    /// M·x*^(1/3).
    pub m: f64,
    /// x* below which the layer is thinner than `RESOLVED_CELLS` cells (with the passage's
    /// mean (s^(1/3))³ for s).
    pub resolved_from: f64,
}

impl Leveque {
    pub fn nusselt_t(&self, x: f64) -> f64 {
        self.m / GAMMA_4_3 / x.cbrt()
    }
    pub fn nusselt_h1(&self, x: f64) -> f64 {
        GAMMA_2_3 * self.m / x.cbrt()
    }
}

/// The Lévêque limit of every passage (in the passages' order) from the wall shear.
/// Σ f(q) over the unknowns q of each passage (`pass[q]` the passage of unknown q, `np`
/// passages), in unknown order.
pub(crate) fn sum_by(pass: &[usize], np: usize, f: impl Fn(usize) -> f64) -> Vec<f64> {
    let mut s = vec![0.0; np];
    for (q, &p) in pass.iter().enumerate() {
        s[p] += f(q);
    }
    s
}

fn leveque(flow: &Flow, labels: &[u32], order: &[usize]) -> Vec<Leveque> {
    let np = flow.passages.len();
    let mut sum = vec![0.0; np];
    let mut len = vec![0.0; np];
    let sample_labels = post::sample_labels(flow.classified, labels, &flow.walls.samples);
    for (smp, l) in flow.shear.iter().zip(sample_labels) {
        let Some(l) = l else { continue };
        if smp.tau.is_finite() && smp.tau > 0.0 {
            let p = order[l as usize];
            let mean = flow.passages[p].flow_integral / flow.passages[p].area;
            sum[p] += smp.ds * (smp.tau / mean).cbrt();
            len[p] += smp.ds;
        }
    }
    let h = flow.classified.grid.h;
    (0..np)
        .map(|p| {
            let f = &flow.passages[p];
            let d = f.hydraulic_diameter;
            let m = d / f.perimeter * sum[p] / (9.0 * d * d).cbrt();
            let s_mean = (sum[p] / len[p]).powi(3);
            Leveque {
                m,
                resolved_from: s_mean * (RESOLVED_CELLS * h).powi(3) / (9.0 * d * d),
            }
        })
        .collect()
}

/// Marches the thermal entrance of every passage of `flow` from the inlet to the last of
/// `stations` (ascending) for the T and H1 conditions. `fully_developed` gives each passage's
/// (Nu_T, Nu_H1) for the entrance lengths; without it the march's values at its last point
/// stand for them.
pub fn thermal_entrance(
    flow: &Flow,
    fully_developed: Option<&[(f64, f64)]>,
    stations: &[f64],
    method: Method,
    params: &MarchParams,
) -> Result<ThermalEntrance> {
    let (c, u, passages) = (flow.classified, flow.u, flow.passages);
    let start = Instant::now();
    let last = *stations
        .last()
        .ok_or_else(|| Error::param("--entrance", "no stations to march to"))?;
    let h2 = c.grid.h * c.grid.h;
    // Passage of each unknown, in the passages' order.
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
    let lev = leveque(flow, &labels, &order);
    let mut system = System::new(Problem::laplace(c), method)?;
    let num = system.numbering().clone();
    let n = num.len();
    let pass: Vec<usize> = num.nodes().map(|k| order[labels[k] as usize]).collect();
    let mean_u: Vec<f64> = passages.iter().map(|p| p.flow_integral / p.area).collect();
    let d2: Vec<f64> = passages
        .iter()
        .map(|p| p.hydraulic_diameter * p.hydraulic_diameter)
        .collect();
    let w: Vec<f64> = (0..n).map(|q| (u[q] / mean_u[pass[q]]).max(0.0)).collect();
    // H1 bulk weights: the cut-cell quadrature times w.
    let qw: Vec<f64> = post::quadrature_weights(c, &num)
        .iter()
        .zip(&w)
        .map(|(a, b)| a * b)
        .collect();
    // Σ over each passage's unknowns of f(q) (generic, so the closure is inlined).
    // Cut links per unknown (the discrete wall flux of the T field).
    let cut_weight: Vec<f64> = num
        .nodes()
        .map(|k| c.cuts_of(k).iter().map(|cut| 1.0 / cut.theta).sum())
        .collect();

    // The first point no later than a quarter of the thinnest resolved layer's x*: the single
    // inlet step from the jump leaves the first few points' local values far off (measured on
    // the round tube at 1094 cells, where the layer is resolved from 4e-8 < 1e-7: the T mean
    // 1.8e-2 off at x* = 1e-5 through them), so they must lie where the Lévêque limit stands
    // in. Unchanged at the default grid of a round tube (resolved from 2.1e-6).
    let first = lev
        .iter()
        .map(|l| l.resolved_from / START_UP)
        .fold(params.first, f64::min);
    let points = march_points(first, params.ratio, params.halvings, last);
    let cg = CgParams {
        tolerance: params.tolerance,
        ..CgParams::default()
    };
    // State: the T field θ and the H1 field Θ at the last point, Φ = 1 − χ of the last step.
    let mut theta = vec![1.0; n];
    let mut psi = vec![0.0; n];
    let mut phi = vec![0.0; n];
    let mut chi = vec![1.0; n];
    let mut curves: Vec<Vec<[f64; 3]>> = vec![Vec::with_capacity(points.len()); np];
    let (mut solves, mut iterations) = (0usize, 0usize);
    let mut setup_seconds = 0.0;
    let mut steps = 0usize;
    let mut x_prev = 0.0;
    // Stage values and their rates F = −K·Y + g (from the stage equations, see `SDIRK`).
    let mut stages_t: Vec<Vec<f64>> = vec![vec![0.0; n]; 3];
    let mut stages_h: Vec<Vec<f64>> = vec![vec![0.0; n]; 3];
    let mut rate_t: Vec<Vec<f64>> = vec![vec![0.0; n]; 3];
    let mut rate_h: Vec<Vec<f64>> = vec![vec![0.0; n]; 3];
    let mut wall = vec![0.0; np];
    // The H1 equation's source g = −4w/D², the T equation's none, and the stage source.
    let g_h: Vec<f64> = (0..n).map(|q| -4.0 * w[q] / d2[pass[q]]).collect();
    let zeros = vec![0.0; n];
    let mut f = Vec::with_capacity(n);
    // The shift scale 1/(γ·Δ) the hierarchy was last built for.
    let mut built_for = f64::NAN;
    let mut next_planned = 0;
    let mut largest_nu_t = 0.0f64;
    while next_planned < points.len() {
        // The next planned point, or a point short of it: a step of the base sequence is at
        // most 2/(4·Nu_x,T) long, halved with every halving like the other steps (1/(4·Nu_x,T)
        // by default), so that the slowest mode, which decays as exp(−4·Nu_T·x*), is resolved.
        // Longer steps of the L-stable method damp that mode far more than the exact solution
        // does (its stability function has a zero near z = 4), and the faster modes then spoil
        // the shape (measured on a 2:1 rectangle with steps of ratio 1.5: Nu_x,T 4e-4 off at
        // x* = 1; with the cap, 1e-8). Halving the cap with the steps keeps the march of one
        // halving less at twice the steps there too, which the step-error estimate assumes
        // (`study::entrance`; with one cap for all, the 2:1 rectangle's step error at x* = 0.2
        // went unseen).
        let planned = points[next_planned];
        // Infinite before the first step.
        let cap = 0.5f64.powi(params.halvings as i32) / (2.0 * largest_nu_t);
        let x = if planned - x_prev > cap * 1.000_001 {
            x_prev + cap
        } else {
            next_planned += 1;
            planned
        };
        let delta = x - x_prev;
        // c = w/(γ·Δ·D²) at every stage: one operator per step; the hierarchy is rebuilt when
        // the shift has changed by more than REFRESH since it was built.
        let scale = 1.0 / (SDIRK.gamma * delta);
        let shift: Vec<f64> = (0..n).map(|q| w[q] * scale / d2[pass[q]]).collect();
        let refresh = !(built_for / scale < REFRESH && scale / built_for < REFRESH);
        if refresh {
            built_for = scale;
        }
        system.update_shift(Field::Unknowns(shift.clone()), refresh)?;
        // Each solve's relative residual: the base tolerance where the shift is weak (the
        // Laplacian's conditioning, κ ≈ (D/h)², turns a residual into an error up to κ times
        // larger), relaxed up to RELAXED times that (1e-6 by default) as the shift c·D² = 1/(γΔ) grows and bounds the
        // condition number by about 10 + c·D² over c·D² (measured on the circle at 200 cells:
        // 1e-5 throughout put Nu_x,H1 1 % off at x* ≥ 0.1; this schedule keeps it at 1e-4).
        let cg = CgParams {
            tolerance: (params.tolerance * (1.0 + scale / 10.0)).min(RELAXED * params.tolerance),
            ..cg
        };
        setup_seconds += system.timings().assembly + system.timings().setup;
        // Φ (walls at 1, no source) as Φ = 1 − χ with c·χ − ∇²χ = c, χ = 0 on the walls: the
        // same discrete solution (the row of a node applied to the constant 1 with walls at 1
        // gives c exactly), but a right-hand side without wall terms. Those grow like 1/h²
        // against the h²·c of the interior, so a relative residual of Φ's own problem let
        // smooth errors through on fine grids (Nu_x,H1 up to 7 % off at x* = 0.02 on the round
        // tube at 675 cells with relaxed solves; 2e-4 with χ).
        let rhs = system.problem().rhs_from(&num, &shift);
        iterations += system.solve(&rhs, &mut chi, &cg)?.iterations;
        solves += 1;
        for (p, x) in phi.iter_mut().zip(&chi) {
            *p = 1.0 - x;
        }
        let phi_b = sum_by(&pass, np, |q| qw[q] * phi[q]);
        for i in 0..3 {
            // Source of stage i: c·yⁿ + (1/γ)·Σ_(j<i) a_ij·F_j + g, F_j = −K·Y_j + g the rate of
            // stage j (M·y′ = −K·y + g); into `out`, element by element in that order.
            let source = |y: &[f64], rates: &[Vec<f64>], g: &[f64], out: &mut Vec<f64>| {
                out.clear();
                out.extend(shift.iter().zip(y).zip(g).map(|((c, y), g)| c * y + g));
                for (j, fj) in rates.iter().enumerate().take(i) {
                    let a = SDIRK.a[i][j] / SDIRK.gamma;
                    for (o, f) in out.iter_mut().zip(fj) {
                        *o += a * f;
                    }
                }
            };
            // F_i = −K·Y_i + g = c·Y_i − f + g (the stage equation c·Y + K·Y = f).
            let rate = |f: &[f64], y: &[f64], g: &[f64], out: &mut Vec<f64>| {
                out.clear();
                out.extend(
                    shift
                        .iter()
                        .zip(y)
                        .zip(f)
                        .zip(g)
                        .map(|(((c, y), f), g)| c * y - f + g),
                );
            };
            // T: no source.
            source(&theta, &rate_t, &zeros, &mut f);
            let rhs = system.problem().rhs_from(&num, &f);
            let mut y = if i == 0 {
                theta.clone()
            } else {
                stages_t[i - 1].clone()
            };
            iterations += system.solve(&rhs, &mut y, &cg)?.iterations;
            rate(&f, &y, &zeros, &mut rate_t[i]);
            stages_t[i] = y;
            // H1 in Ψ = Θ − 4x*: (w/D²)·∂Ψ/∂x* = ∇²Ψ − 4w/D², the bulk Ψ_b = 0. The particular
            // solution (walls at 0), then the wall value Ψ_w from the bulk.
            source(&psi, &rate_h, &g_h, &mut f);
            let rhs = system.problem().rhs_from(&num, &f);
            let mut y = if i == 0 {
                psi.clone()
            } else {
                stages_h[i - 1].clone()
            };
            // Start from the last Ψ less its wall part.
            for q in 0..n {
                y[q] -= wall[pass[q]] * phi[q];
            }
            iterations += system.solve(&rhs, &mut y, &cg)?.iterations;
            solves += 2;
            let part_b = sum_by(&pass, np, |q| qw[q] * y[q]);
            for p in 0..np {
                wall[p] = -part_b[p] / phi_b[p];
            }
            for q in 0..n {
                y[q] += wall[pass[q]] * phi[q];
            }
            // The rate with the wall value: the relation holds for the full stage value too (Φ
            // solves the homogeneous stage equation with its wall terms).
            rate(&f, &y, &g_h, &mut rate_h[i]);
            stages_h[i] = y;
        }
        // Stiffly accurate: the step's value is the last stage.
        theta.clone_from(&stages_t[2]);
        psi.clone_from(&stages_h[2]);
        // Local Nusselt numbers.
        let flux = sum_by(&pass, np, |q| theta[q] * cut_weight[q]);
        let bulk = sum_by(&pass, np, |q| w[q] * theta[q]);
        let mut settled = x > SETTLED_FROM;
        largest_nu_t = 0.0f64;
        for (p, curve) in curves.iter_mut().enumerate() {
            let nu_t = d2[p] * flux[p] / (4.0 * h2 * bulk[p]);
            let nu_h1 = 1.0 / wall[p];
            if let Some(last) = curve.last() {
                settled &= (nu_t - last[1]).abs() <= SETTLED * nu_t
                    && (nu_h1 - last[2]).abs() <= SETTLED * nu_h1;
            }
            largest_nu_t = largest_nu_t.max(nu_t);
            curve.push([x, nu_t, nu_h1]);
        }
        x_prev = x;
        steps += 1;
        if settled {
            // Fully developed: the remaining planned points carry the last values.
            for &x in &points[next_planned..] {
                for curve in curves.iter_mut() {
                    let last = *curve.last().expect("a point was pushed");
                    curve.push([x, last[1], last[2]]);
                }
            }
            break;
        }
    }
    let passages_out = curves
        .into_iter()
        .enumerate()
        .map(|(p, curve)| {
            let (fd_t, fd_h1) = match fully_developed {
                Some(v) => v[p],
                None => {
                    let l = curve.last().copied().unwrap_or([0.0, f64::NAN, f64::NAN]);
                    (l[1], l[2])
                }
            };
            let l = lev[p];
            // Below the resolved layer the Lévêque limit stands for the local values.
            let curve: Vec<[f64; 3]> = curve
                .into_iter()
                .map(|q| {
                    if q[0] < l.resolved_from {
                        [q[0], l.nusselt_t(q[0]), l.nusselt_h1(q[0])]
                    } else {
                        q
                    }
                })
                .collect();
            PassageEntrance::from_curve(curve, stations, (fd_t, fd_h1), l)
        })
        .collect();
    Ok(ThermalEntrance {
        x_star: stations.to_vec(),
        passages: passages_out,
        steps,
        solves,
        iterations,
        seconds: start.elapsed().as_secs_f64(),
        setup_seconds,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn march_points_hit_every_station_with_bounded_ratios() {
        let st = standard_stations();
        assert_eq!(st.len(), 16);
        let pts = march_points(1e-7, 1.25, 0, 1.0);
        for s in &st {
            assert!(pts.iter().any(|p| (p - s).abs() <= 1e-12 * s), "{s}");
        }
        assert!((pts[0] - 1e-7).abs() < 1e-20);
        for pair in pts.windows(2) {
            let r = pair[1] / pair[0];
            assert!(r > 1.0 && r <= 1.25 * (1.0 + 1e-12), "{pair:?}");
        }
    }

    #[test]
    fn means_integrate_the_leveque_law_exactly() {
        // Nu = 2·x^(−1/3) everywhere: the mean over 0..x is 3·x^(−1/3) (exact).
        let pts = march_points(1e-6, 1.3, 0, 1.0);
        let curve: Vec<[f64; 3]> = pts
            .iter()
            .map(|&x| [x, 2.0 / x.cbrt(), 4.0 / x.cbrt()])
            .collect();
        for x in [1e-6, 3.3e-5, 0.01, 1.0] {
            let (t, h) = means_at(&curve, x).unwrap();
            assert!((t - 3.0 / x.cbrt()).abs() < 1e-12 * t, "{x}: {t}");
            assert!((h - 6.0 / x.cbrt()).abs() < 1e-12 * h);
        }
        assert!(means_at(&curve, 2.0).is_none());
    }

    #[test]
    fn entrance_length_is_where_the_local_value_settles() {
        // Nu = 3·(1 + 0.1/x): within 5 % from x = 2 on (exact crossing of 1 + 0.1/x = 1.05).
        let pts = march_points(1e-3, 1.05, 0, 10.0);
        let curve: Vec<[f64; 3]> = pts
            .iter()
            .map(|&x| [x, 3.0 * (1.0 + 0.1 / x), 1.0])
            .collect();
        let l = entrance_length(&curve, 1, 3.0).unwrap();
        assert!((l - 2.0).abs() < 0.01, "{l}");
        assert_eq!(entrance_length(&curve, 2, 1.0), Some(1e-3));
    }
}
