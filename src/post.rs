//! Figures of merit from the solution of the unit problem −∇²ũ = 1, ũ = 0 on the walls.
//!
//! Owns: the flow integral, the velocity ratio, hydraulic diameter and Poiseuille number, the
//! local wall shear along every wall and the force balance. All results are plain structs in
//! the units of the unit problem; [`crate::operating`] scales them to an operating point
//! (u = (G/μ)·ũ, τ = G·τ̃ with G = −dp/dz).
//!
//! Invariant: writes no files and formats no text.

use crate::geometry::corners::{Corner, SMOOTH_TOLERANCE};
use crate::geometry::{Point, WallSample, Walls};
use crate::grid::{Classified, Dir};
use crate::operator::{Numbering, NO_UNKNOWN};
use crate::problem::Problem;
use crate::singular::{self, Enrichment, Singular};
use nalgebra::{DMatrix, DVector};

/// What the walls of a domain are to the local fits near them ([`wall_shear`], and whether the
/// pipeline applies [`add_wall_correction`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WallKind {
    /// Smooth curves through the cut points: a shape's true curves, or a mask's traced contour
    /// (smooth to within its sub-pixel vertices). The wall points serve as data of the shear fit
    /// and the wall correction applies.
    Exact,
    /// The pixel faces of a mask (`--mask-mode pixels`): a re-entrant corner at every step,
    /// where the smooth local fit behind both does not hold; neither is used.
    Staircase,
}

/// Smallest exponent π/α − 1 of a convex corner whose zero wall shear is reported (α ≤ about
/// 164°): (10⁻³)^0.1 = 0.5 (canalis's choice, see `figures`).
pub const ZERO_SHEAR_EXPONENT: f64 = 0.1;

/// Dimensionless results of the unit problem.
#[derive(Debug, Clone, PartialEq)]
pub struct Figures {
    /// Exact fluid area A, m².
    pub area: f64,
    /// Exact wetted perimeter P, m.
    pub perimeter: f64,
    /// D_h = 4A/P, m.
    pub hydraulic_diameter: f64,
    /// I = ∫ũ dA, m⁴ (flow rate Q = (G/μ)·I).
    pub flow_integral: f64,
    /// max ũ, m².
    pub max_velocity: f64,
    /// Fanning f·Re = D_h²·A/(2·I).
    pub fanning_f_re: f64,
    /// u_max / ū.
    pub max_to_mean_velocity: f64,
    /// Perimeter mean of τ̃ (from the samples), m.
    pub wall_shear_mean: f64,
    /// Largest wall shear over its mean; NaN where a re-entrant corner makes it unbounded
    /// (`singular_corners` not empty).
    pub wall_shear_max_to_mean: f64,
    /// Smallest wall shear over its mean; exactly 0 where a convex sharp corner
    /// (`wall_shear_min_corner`) makes it vanish.
    pub wall_shear_min_to_mean: f64,
    /// |∮τ̃ ds − A| / A: the discrete force balance (exact: ∮τ ds = G·A), with the share of
    /// each singular corner's neighbourhood from its singular term ([`figures`]).
    pub force_balance_rel_error: f64,
    /// The re-entrant corners, where the wall shear is unbounded.
    pub singular_corners: Vec<SingularCorner>,
    /// Largest wall shear over its mean farther than `corner_radius` from every singular
    /// corner (the plain largest one when there is none).
    pub wall_shear_max_away_to_mean: f64,
    /// Radius around each singular corner left out of `wall_shear_max_away_to_mean`, m:
    /// [`CORNER_RADIUS_SHARE`] of D_h.
    pub corner_radius: f64,
    /// The convex sharp corner where the smallest wall shear (0) sits, if any.
    pub wall_shear_min_corner: Option<Corner>,
    /// Order of convergence the corners allow the flow figures (f·Re, u_max/ū, the wall-shear
    /// extremes away from corners) on this grid's scheme: 2 without re-entrant corners, else
    /// min(2, 2π/α) over the untreated ones (the error of a
    /// second-order scheme near a corner of angle α pollutes the whole solution at
    /// O(h^(2π/α)); Fix, Gulati & Wakoff 1973). None when the corners are unknown (a mask).
    pub corner_order: Option<f64>,
    /// The same for the heat-transfer figures (Nu_H1, Nu_T), whose problems have the same
    /// corner exponents and are enriched at the same corners (`heat::heat_transfer`).
    pub heat_corner_order: Option<f64>,
}

/// A re-entrant corner as reported: where it is, its angle, the exponent of its wall shear
/// and the coefficient C of τ ≈ C·τ_mean·(r/D_h)^(π/α − 1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SingularCorner {
    pub position: Point,
    /// Interior angle α of the fluid, radians.
    pub angle: f64,
    /// π/α − 1 (negative: the wall shear grows without bound towards the corner).
    pub exponent: f64,
    /// C of τ ≈ C·τ_mean·(r/D_h)^(π/α − 1) along either wall.
    pub coefficient: f64,
    /// a of ũ ≈ a·r^(π/α)·sin(πθ/α) (unit problem, m^(2 − π/α)).
    pub a: f64,
    /// Both walls straight. (The coefficient is exact up to the grid's error where both walls
    /// are lines or arcs, [`crate::singular::wedge_pole`]; on an ellipse's wall indicative.)
    pub straight: bool,
    /// The solve treated the corner by singular-function enrichment
    /// ([`crate::singular::Enrichment`]): the figures converge at second order despite it.
    pub treated: bool,
}

/// Radius around a singular corner, as a share of D_h, beyond which the largest wall shear
/// is taken (`wall_shear_max_away_to_mean`): a physical length, the same on every grid, so
/// that the figure converges. (Canalis's choice: 5 % of D_h; the wall shear at that distance
/// along a 270° corner's wall is about 0.05^(−1/3) ≈ 2.7 times C·τ_mean.)
pub const CORNER_RADIUS_SHARE: f64 = 0.05;

/// Radius around a singular corner, in grid spacings, within which the force balance takes
/// the wall-shear integral from the singular term (2·a·ρ^λ, both walls) instead of the samples:
/// the local fits of the samples assume a smooth field over 3.5 h and are poor within a few
/// of them from the corner.
pub const CORNER_BALANCE_CELLS: f64 = 6.0;

/// Local wall shear of the unit problem at one wall sample, τ̃ = ∂ũ/∂n into the fluid.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShearSample {
    pub wall: usize,
    pub s: f64,
    pub point: Point,
    pub ds: f64,
    pub tau: f64,
}

/// Flow integral I = ∫ũ dA by a cut-cell quadrature.
///
/// Along every grid line ũ is taken piecewise linear between the nodes and down to ũ = 0 at the
/// exact wall point of each cut link, and integrated exactly; rows and columns are then summed
/// (midpoint rule across the lines) and the two directions averaged. This gives node i the
/// weight h²·(a_E + a_W + a_N + a_S)/4 with a = 1 on a regular link and a = θ on a cut one, so
/// the fluid slivers between the last nodes and the wall are counted and the error does not jump
/// with the cut pattern. In the interior the rule is the 2-D midpoint rule, whose leading error is
/// (h²/24)·∫∇²ũ dA (Euler–Maclaurin); the PDE says ∇²ũ = −1, so that term is known exactly,
/// −h²·A/24, and is added back. What remains converges at second order and smoothly (measured
/// in tests/verification.rs).
///
/// Walls parallel to a family of grid lines get one more term ([`flow_weights`]): the lines of
/// that family never cross such a wall, and the midpoint rule across them counts the last
/// line's strip out to half a cell, whatever the distance θ·h to the wall. For ũ ≈ τ·d near
/// the wall (d the distance to it) the strip's rule misses τ·h²·(θ − ½)²/2 per unit length,
/// half of it in the average of the two directions; with τ·h ≈ ũ_i/θ at the node that is
/// h²·ũ_i·(θ − ½)²/(4θ) per cut link, added as (θ − ½)²/θ to the node's a. On an oblique or
/// curved wall the lines cross it, the rule follows ũ down to the wall point, and what is left
/// is part of the smooth h² error. Without the term, a straight wall aligned with the grid
/// (θ the same all along it) left an error whose constant changed with where the wall fell
/// between the nodes: f·Re of a 2 × 1 mm rectangle at 600 cells was 2e-7 off with its walls
/// half a cell from the nodes and 1.1e-5 with walls 0.02 of a cell from them, and the Nusselt
/// numbers, whose w = ũ/ū carries the mean, 7e-7 and 2.3e-5; with it 2.0e-7 to 2.3e-7 and
/// 7.2e-7 to 7.9e-7 over twenty placements (tenth session).
pub fn flow_integral(c: &Classified, num: &Numbering, u: &[f64], area: f64) -> f64 {
    let h2 = c.grid.h * c.grid.h;
    let sum: f64 = flow_weights(c, num).iter().zip(u).map(|(w, u)| w * u).sum();
    sum + h2 * area / 24.0
}

/// Cut links whose wall normal lies within this cosine of the link (about 0.08°) are on walls
/// parallel to the other family of grid lines ([`flow_integral`]'s aligned-wall term).
const ALIGNED_COS: f32 = 1.0 - 1e-6;

/// The weights of [`flow_integral`] without its h²A/24 term: [`quadrature_weights`] with the
/// aligned-wall term, for fields that vanish linearly at the walls (ũ and the smooth part w of
/// an enriched solution).
pub fn flow_weights(c: &Classified, num: &Numbering) -> Vec<f64> {
    cut_cell_weights(c, num, true)
}

/// Weights of the cut-cell quadrature of [`flow_integral`] without its h²A/24 term (that term
/// belongs to −∇²ũ = 1 only): node i gets h²·(a_E + a_W + a_N + a_S)/4.
pub fn quadrature_weights(c: &Classified, num: &Numbering) -> Vec<f64> {
    cut_cell_weights(c, num, false)
}

/// h²·(a_E + a_W + a_N + a_S)/4 per unknown, a = θ on a cut link, with the aligned-wall term
/// (θ − ½)²/θ of [`flow_integral`] where `aligned`.
fn cut_cell_weights(c: &Classified, num: &Numbering, aligned: bool) -> Vec<f64> {
    let h2 = c.grid.h * c.grid.h;
    num.nodes()
        .map(|k| {
            let mut a = 4.0;
            for cut in c.cuts_of(k) {
                a -= 1.0 - cut.theta;
                if aligned && cut.cos >= ALIGNED_COS {
                    a += (cut.theta - 0.5).powi(2) / cut.theta;
                }
            }
            0.25 * h2 * a
        })
        .collect()
}

/// Passage label of every grid node (connected groups of fluid nodes joined by regular links,
/// numbered in the order found; `u32::MAX` for solid nodes) and the number of passages.
pub fn passage_labels(c: &Classified) -> (Vec<u32>, usize) {
    let g = &c.grid;
    let mut label = vec![u32::MAX; g.len()];
    let mut stack = Vec::new();
    let mut count = 0u32;
    for start in 0..g.len() {
        if !c.fluid[start] || label[start] != u32::MAX {
            continue;
        }
        label[start] = count;
        stack.push(start);
        while let Some(k) = stack.pop() {
            for d in Dir::ALL {
                if c.theta(k, d).is_some() {
                    continue;
                }
                if let Some(m) = g.neighbour(k, d) {
                    if label[m] == u32::MAX {
                        label[m] = count;
                        stack.push(m);
                    }
                }
            }
        }
        count += 1;
    }
    (label, count as usize)
}

/// The passage label ([`passage_labels`]) of each wall sample: that of the nearest fluid node
/// on its fluid side within three cells (None if there is none).
pub fn sample_labels(c: &Classified, label: &[u32], samples: &[WallSample]) -> Vec<Option<u32>> {
    let g = &c.grid;
    samples
        .iter()
        .map(|smp| {
            let p = smp.point;
            let ci = ((p[0] - g.origin[0]) / g.h).round() as isize;
            let cj = ((p[1] - g.origin[1]) / g.h).round() as isize;
            let mut best: Option<(u32, f64)> = None;
            for dj in -3..=3isize {
                for di in -3..=3isize {
                    let (i, j) = (ci + di, cj + dj);
                    if i < 0 || j < 0 || i >= g.nx as isize || j >= g.ny as isize {
                        continue;
                    }
                    let k = g.index(i as usize, j as usize);
                    if label[k] == u32::MAX {
                        continue;
                    }
                    let x = g.node(i as usize, j as usize);
                    let d = [x[0] - p[0], x[1] - p[1]];
                    if d[0] * smp.normal[0] + d[1] * smp.normal[1] >= 0.0 {
                        continue;
                    }
                    let d2 = d[0] * d[0] + d[1] * d[1];
                    if best.is_none_or(|(_, b)| d2 < b) {
                        best = Some((label[k], d2));
                    }
                }
            }
            best.map(|(l, _)| l)
        })
        .collect()
}

/// Figures of one passage of a cross-section made of disconnected fluid regions, all under the
/// same pressure gradient.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PassageFigures {
    /// Area by Green's theorem over the passage's walls (exact on true curves), m².
    pub area: f64,
    pub perimeter: f64,
    pub hydraulic_diameter: f64,
    /// ∫ũ dA over the passage (the cut-cell quadrature of [`flow_integral`]), m⁴.
    pub flow_integral: f64,
    pub fanning_f_re: f64,
    /// Share of the total flow.
    pub flow_share: f64,
    /// Centroid of the passage's fluid nodes (quadrature weights), m.
    pub centroid: Point,
    /// The passage's label in [`passage_labels`].
    pub label: u32,
}

/// Per-passage figures, ordered by centroid, top-left first (descending y, then ascending x).
/// A wall sample belongs to the passage of the nearest fluid node on its fluid side.
pub fn passages(c: &Classified, num: &Numbering, u: &[f64], walls: &Walls) -> Vec<PassageFigures> {
    let (label, count) = passage_labels(c);
    let g = &c.grid;
    let h2 = g.h * g.h;
    let q = quadrature_weights(c, num);
    let qf = flow_weights(c, num);
    let mut area = vec![0.0; count];
    let mut perimeter = vec![0.0; count];
    for (smp, l) in walls
        .samples
        .iter()
        .zip(sample_labels(c, &label, &walls.samples))
    {
        if let Some(l) = l {
            area[l as usize] += smp.area;
            perimeter[l as usize] += smp.ds;
        }
    }
    let mut flow = vec![0.0; count];
    let mut weight = vec![0.0; count];
    let mut cx = vec![0.0; count];
    let mut cy = vec![0.0; count];
    for (qi, k) in num.nodes().enumerate() {
        let l = label[k] as usize;
        let (i, j) = g.ij(k);
        let x = g.node(i, j);
        flow[l] += qf[qi] * u[qi];
        weight[l] += q[qi];
        cx[l] += q[qi] * x[0];
        cy[l] += q[qi] * x[1];
    }
    for l in 0..count {
        flow[l] += h2 * area[l] / 24.0;
    }
    let total: f64 = flow.iter().sum();
    let mut out: Vec<PassageFigures> = (0..count)
        .map(|l| {
            let dh = 4.0 * area[l] / perimeter[l];
            PassageFigures {
                area: area[l],
                perimeter: perimeter[l],
                hydraulic_diameter: dh,
                flow_integral: flow[l],
                fanning_f_re: dh * dh * area[l] / (2.0 * flow[l]),
                flow_share: flow[l] / total,
                centroid: [cx[l] / weight[l], cy[l] / weight[l]],
                label: l as u32,
            }
        })
        .collect();
    let tol = 1e-9 * (g.nx.max(g.ny) as f64 * g.h);
    order_top_left_first(&mut out, tol);
    out
}

/// Orders passages top-left first: rows of centroids (descending y; centroids within `tol` of
/// the first of a row share it), each row by ascending x. A comparison "y equal within tol" is
/// not transitive, so sorting by it is not a total order (Rust's sort may panic on such a
/// comparator, as it did on a mask with thousands of passages); the rows are formed first and
/// every comparison is a `total_cmp`, NaN included.
fn order_top_left_first(out: &mut [PassageFigures], tol: f64) {
    out.sort_by(|a, b| b.centroid[1].total_cmp(&a.centroid[1]));
    let mut start = 0;
    while start < out.len() {
        let y0 = out[start].centroid[1];
        let mut end = start + 1;
        while end < out.len() && (y0 - out[end].centroid[1]).abs() <= tol {
            end += 1;
        }
        out[start..end].sort_by(|a, b| a.centroid[0].total_cmp(&b.centroid[0]));
        start = end;
    }
}

/// Largest velocity: the largest node value, refined by the stationary point of the quadratic
/// through its 3×3 neighbourhood when that neighbourhood is all fluid (a second-order estimate
/// of an interior maximum, instead of the node value's O(h²)·|∇²u| bias... of either sign).
pub fn max_velocity(c: &Classified, num: &Numbering, u: &[f64]) -> f64 {
    let Some((imax, &umax)) = u.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1)) else {
        return 0.0;
    };
    let k = num.node(imax);
    let g = &c.grid;
    let (i, j) = g.ij(k);
    if i == 0 || j == 0 || i + 1 >= g.nx || j + 1 >= g.ny || !c.cuts_of(k).is_empty() {
        return umax;
    }
    let at = |di: isize, dj: isize| -> Option<f64> {
        let kk = g.index((i as isize + di) as usize, (j as isize + dj) as usize);
        let q = num.unknown_of[kk];
        (q != NO_UNKNOWN).then(|| u[q as usize])
    };
    let (Some(e), Some(w), Some(n), Some(s), Some(ne), Some(nw), Some(se), Some(sw)) = (
        at(1, 0),
        at(-1, 0),
        at(0, 1),
        at(0, -1),
        at(1, 1),
        at(-1, 1),
        at(1, -1),
        at(-1, -1),
    ) else {
        return umax;
    };
    // Derivatives in units of h.
    let gx = 0.5 * (e - w);
    let gy = 0.5 * (n - s);
    let hxx = e - 2.0 * umax + w;
    let hyy = n - 2.0 * umax + s;
    let hxy = 0.25 * (ne - nw - se + sw);
    let det = hxx * hyy - hxy * hxy;
    if !(hxx < 0.0 && det > 0.0) {
        return umax;
    }
    let dx = -(hyy * gx - hxy * gy) / det;
    let dy = -(-hxy * gx + hxx * gy) / det;
    if dx.abs() > 1.0 || dy.abs() > 1.0 {
        return umax;
    }
    umax + 0.5 * (gx * dx + gy * dy)
}

/// Radius (in h) of the neighbourhood used by the wall-shear fit.
const FIT_RADIUS: f64 = 3.5;

/// One datum of the wall-shear fit: position relative to the wall point in units of h, value,
/// weight, and whether it is a wall point.
type FitRow = ([f64; 2], f64, f64, bool);

/// Local wall shear τ̃ = ∂ũ/∂n (inward) at every wall sample.
///
/// Method: at each wall point p (exact position and normal from the true curve) ũ is fitted
/// in the neighbourhood |x − p| ≤ 3.5·h by a function that satisfies the PDE exactly:
///
/// ```text
///   ũ ≈ −|x − p|²/4 + Σ_k c_k·H_k(x − p),
/// ```
///
/// the first term a particular solution of −∇²ũ = 1, the H_k the harmonic polynomials of
/// degree ≤ 3 (1, X, Y, X² − Y², 2XY, X³ − 3XY², 3X²Y − Y³). The data are the fluid node values
/// reachable from p without crossing a wall, and the wall points of the cut links (and p itself
/// when the walls are [`WallKind::Exact`]), by least squares with Gaussian weights exp(−d²/(3.5h)²). The
/// fitted gradient at p, projected on the inward normal, is τ̃.
///
/// The wall points do not say ũ = 0 but ũ = d with one extra free constant d. The reason: the
/// linear ghost extrapolation of the cut-cell scheme leaves the discrete solution offset from
/// the exact one by an O(h²) amount that is nearly constant along a wall (in 1-D with θ = ½ the
/// discrete solution is exactly the true parabola plus h²/8, with the true gradient). Forcing
/// the fit through ũ = 0 at the wall turns that offset into an O(h) gradient error; a common
/// free offset keeps the information that ũ is constant along the wall without it. Measured on
/// the ellipse b/a = ½ (tests/verification.rs): at 100, 200, 400 cells the largest local error
/// falls from 3.3e-3, 1.7e-3, 8.6e-4 (fit through zero, radius 2.6h) to 8.1e-4, 3.9e-4,
/// 2.3e-4, and the force balance from ~6e-4 to 1.4e-5 at 400 cells.
pub fn wall_shear(
    c: &Classified,
    num: &Numbering,
    u: &[f64],
    walls: &Walls,
    kind: WallKind,
) -> Vec<ShearSample> {
    wall_shear_with_source(c, num, u, walls, kind, &|_| 1.0)
}

/// [`wall_shear`] of a field that solves −∇²v = f(x) with a smooth source f (`source`): the
/// particular term of each fit is −f(p)·|x − p|²/4 with f at the fit's centre p, which leaves
/// an error of O(|∇f|·h²) in the gradient (the smooth part w of an enriched solution,
/// `singular::Enrichment`, whose source 1 + Σ a·∆(χS) varies over the cut-off's width).
pub fn wall_shear_with_source(
    c: &Classified,
    num: &Numbering,
    u: &[f64],
    walls: &Walls,
    kind: WallKind,
    source: &(dyn Fn(Point) -> f64 + Sync),
) -> Vec<ShearSample> {
    let exact_wall = kind == WallKind::Exact;
    use rayon::prelude::*;
    // Samples in parallel, one fit workspace per task; collected in sample order.
    walls
        .samples
        .par_iter()
        .map_init(
            || LocalFit::new(c, num, u),
            |fit, smp| {
                let tau = fit
                    .at_with_source(smp.point, smp.normal, exact_wall, source(smp.point))
                    .map(|d| -(d.gradient[0] * smp.normal[0] + d.gradient[1] * smp.normal[1]))
                    .unwrap_or(f64::NAN);
                ShearSample {
                    wall: smp.wall,
                    s: smp.s,
                    point: smp.point,
                    ds: smp.ds,
                    tau,
                }
            },
        )
        .collect()
}

/// Gradient and Hessian of the local fit at its centre point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LocalDerivatives {
    pub gradient: [f64; 2],
    /// [ũ_xx, ũ_xy, ũ_yy]; ũ_xx + ũ_yy = −1 by construction.
    pub hessian: [f64; 3],
}

/// The PDE-constrained local least-squares fit described at [`wall_shear`], with its scratch
/// space (reused from point to point: no allocation per point once warm).
pub struct LocalFit<'a> {
    c: &'a Classified,
    num: &'a Numbering,
    u: &'a [f64],
    set: Vec<usize>,
    stack: Vec<usize>,
    rows: Vec<FitRow>,
}

impl<'a> LocalFit<'a> {
    pub fn new(c: &'a Classified, num: &'a Numbering, u: &'a [f64]) -> Self {
        LocalFit {
            c,
            num,
            u,
            set: Vec::new(),
            stack: Vec::new(),
            rows: Vec::new(),
        }
    }

    /// Fits around the wall point `p` whose outward normal is (roughly) `n_out`; `p_is_wall`
    /// adds p itself as a wall datum. None where too few data are reachable.
    pub fn at(&mut self, p: Point, n_out: Point, p_is_wall: bool) -> Option<LocalDerivatives> {
        self.at_with_source(p, n_out, p_is_wall, 1.0)
    }

    /// [`LocalFit::at`] for −∇²u = `source` near p (the particular term −source·|x − p|²/4).
    pub fn at_with_source(
        &mut self,
        p: Point,
        n_out: Point,
        p_is_wall: bool,
        source: f64,
    ) -> Option<LocalDerivatives> {
        let c = self.c;
        let g = &c.grid;
        let h = g.h;
        let r = FIT_RADIUS;
        let rel = |k: usize| {
            let (i, j) = g.ij(k);
            let q = g.node(i, j);
            [(q[0] - p[0]) / h, (q[1] - p[1]) / h]
        };
        // The seed: the nearest fluid node on the fluid side of p.
        let ci = ((p[0] - g.origin[0]) / h).round() as isize;
        let cj = ((p[1] - g.origin[1]) / h).round() as isize;
        let span = r.ceil() as isize;
        let mut seed: Option<(usize, f64)> = None;
        for dj in -span..=span {
            for di in -span..=span {
                let (i, j) = (ci + di, cj + dj);
                if i < 0 || j < 0 || i >= g.nx as isize || j >= g.ny as isize {
                    continue;
                }
                let k = g.index(i as usize, j as usize);
                if !c.fluid[k] {
                    continue;
                }
                let x = rel(k);
                let d2 = x[0] * x[0] + x[1] * x[1];
                let side = x[0] * n_out[0] + x[1] * n_out[1];
                if side < 0.0 && seed.is_none_or(|(_, best)| d2 < best) {
                    seed = Some((k, d2));
                }
            }
        }
        let (seed, _) = seed?;
        // Nodes connected to the seed through regular links within the radius: the fit never
        // reaches across a wall (a thin fin, the far side of a narrow gap).
        self.set.clear();
        self.stack.clear();
        self.stack.push(seed);
        self.set.push(seed);
        while let Some(k) = self.stack.pop() {
            for d in Dir::ALL {
                if c.theta(k, d).is_some() {
                    continue;
                }
                let Some(m) = g.neighbour(k, d) else { continue };
                let x = rel(m);
                if x[0] * x[0] + x[1] * x[1] > r * r || self.set.contains(&m) {
                    continue;
                }
                self.set.push(m);
                self.stack.push(m);
            }
        }
        self.rows.clear();
        let weight = |x: [f64; 2]| (-(x[0] * x[0] + x[1] * x[1]) / (r * r)).exp();
        // Only data on the fluid side of the tangent line at p (up to half a cell beyond it): next
        // to a re-entrant corner the far face of the corner would otherwise pull the smooth
        // model towards the corner's singular field.
        let half = 0.5;
        let side = |x: [f64; 2]| x[0] * n_out[0] + x[1] * n_out[1];
        for &k in &self.set {
            let x = rel(k);
            let q = self.num.unknown_of[k];
            if side(x) > half {
                continue;
            }
            self.rows.push((x, self.u[q as usize], weight(x), false));
            for cut in c.cuts_of(k) {
                let wpt = c.wall_point(cut);
                let xw = [(wpt[0] - p[0]) / h, (wpt[1] - p[1]) / h];
                if xw[0] * xw[0] + xw[1] * xw[1] <= r * r && side(xw) <= half {
                    self.rows.push((xw, 0.0, weight(xw), true));
                }
            }
        }
        if p_is_wall {
            self.rows.push(([0.0, 0.0], 0.0, 1.0, true));
        }
        fit_local(&self.rows, h, source)
    }
}

/// Weighted least squares for the harmonic-plus-particular model with a free wall offset
/// (particular solution of −∇²u = `source`).
fn fit_local(rows: &[FitRow], h: f64, source: f64) -> Option<LocalDerivatives> {
    // Try the cubic model first, fall back to fewer terms where the data are too few.
    for terms in [7usize, 5, 3] {
        if rows.len() < terms + 2 {
            continue;
        }
        let m = rows.len();
        let nt = terms + 1;
        let mut a = DMatrix::<f64>::zeros(m, nt);
        let mut b = DVector::<f64>::zeros(m);
        for (row, &(x, v, w, is_wall)) in rows.iter().enumerate() {
            let sw = w.sqrt();
            let (xx, yy) = (x[0], x[1]);
            let basis = [
                1.0,
                xx,
                yy,
                xx * xx - yy * yy,
                2.0 * xx * yy,
                xx * xx * xx - 3.0 * xx * yy * yy,
                3.0 * xx * xx * yy - yy * yy * yy,
            ];
            for (t, bt) in basis.iter().enumerate().take(terms) {
                a[(row, t)] = sw * bt;
            }
            if is_wall {
                a[(row, terms)] = sw;
            }
            // Particular solution of −∇²ũ = 1 in units of h: −h²(X² + Y²)/4.
            let particular = -source * h * h * (xx * xx + yy * yy) / 4.0;
            b[row] = sw * (v - particular);
        }
        let Some(coef) = least_squares(a, &b) else {
            continue;
        };
        let (c3, c4) = if terms >= 5 {
            (coef[3], coef[4])
        } else {
            (0.0, 0.0)
        };
        let h2 = h * h;
        return Some(LocalDerivatives {
            gradient: [coef[1] / h, coef[2] / h],
            hessian: [
                2.0 * c3 / h2 - 0.5 * source,
                2.0 * c4 / h2,
                -2.0 * c3 / h2 - 0.5 * source,
            ],
        });
    }
    None
}

/// min ‖A·c − b‖₂, or None when A is numerically rank deficient (smallest singular value at
/// most 1e-10 of the largest).
///
/// Fast path: the normal equations of the column-equilibrated matrix Ã = A·D (D scales each
/// column to unit length), Cholesky-factored. Their condition number is κ(Ã)², so they are used
/// only while every squared pivot of the factor stays above 1e-8 (then κ(Ã) is at most about
/// 1e4 and the solution is accurate to about κ²·ε ≈ 1e-8 relative, far below the fit error);
/// otherwise, and for the rank test proper, the singular value decomposition (Golub & Van Loan,
/// *Matrix Computations*, 4th ed., 2013, §5.3, from memory). The fits here are small (a few tens
/// of rows, at most eight columns) and nearly always well conditioned, so the fast path takes
/// a few microseconds where the SVD took tens.
fn least_squares(a: DMatrix<f64>, b: &DVector<f64>) -> Option<DVector<f64>> {
    let nt = a.ncols();
    let norms: Vec<f64> = (0..nt).map(|t| a.column(t).norm()).collect();
    if norms.iter().all(|&v| v > 0.0) {
        let mut at = a.clone();
        for (t, &nrm) in norms.iter().enumerate() {
            at.column_mut(t).scale_mut(1.0 / nrm);
        }
        let g = at.transpose() * &at;
        if let Some(ch) = nalgebra::Cholesky::new(g) {
            let l = ch.l_dirty();
            let min_pivot = (0..nt)
                .map(|t| l[(t, t)] * l[(t, t)])
                .fold(f64::INFINITY, f64::min);
            if min_pivot > 1e-8 {
                let mut c = ch.solve(&(at.transpose() * b));
                for (t, &nrm) in norms.iter().enumerate() {
                    c[t] /= nrm;
                }
                return Some(c);
            }
        }
    }
    let svd = a.svd(true, true);
    let smax = svd.singular_values.max();
    let smin = svd.singular_values.min();
    if smin <= 1e-10 * smax {
        return None;
    }
    svd.solve(b, 1e-14).ok()
}

/// Deferred correction of the cut-cell right-hand side.
///
/// The linear ghost of the cut-cell scheme misses the curvature of ũ along the link: with the
/// wall at s = 0, the node at s = θh and ũ = a·s + ½·b·s², the true ghost at s = −(1 − θ)h
/// exceeds the linear one by ½·b·(1 − θ)·h², b = dᵀ(∇∇ũ)d the second derivative along the link
/// direction d at the wall. That is the O(1) truncation error of the scheme at cut nodes and the
/// source of its O(h²) error, whose constant jumps with the cut pattern. Adding ½·b·(1 − θ)·h² to
/// the h²-scaled right-hand side of each cut link, with b from the local fit of a first solution,
/// removes it; the matrix (and so its symmetry and positive definiteness) is untouched, only the
/// right-hand side changes. The correction vanishes with the fit error of b, so the corrected
/// solution converges faster and more regularly (measured in tests/verification.rs).
///
/// Adds the correction to `rhs` (unknown order) in place: each unknown's terms are summed in
/// cut order and the sum then added to its entry, so no second right-hand side is allocated.
pub fn add_wall_correction(problem: &Problem, num: &Numbering, u: &[f64], rhs: &mut [f64]) {
    add_wall_correction_with_source(problem, num, u, rhs, &|_| 1.0)
}

/// [`add_wall_correction`] of a field that solves −∇²v = f(x) (`source`; see
/// [`wall_shear_with_source`]).
pub fn add_wall_correction_with_source(
    problem: &Problem,
    num: &Numbering,
    u: &[f64],
    rhs: &mut [f64],
    source: &(dyn Fn(Point) -> f64 + Sync),
) {
    use rayon::prelude::*;
    let c = problem.classified;
    // The fits in parallel (one workspace per task), then the sums in cut order, so the result
    // does not depend on the number of threads.
    let terms: Vec<Option<(usize, f64)>> = c
        .cuts
        .par_iter()
        .map_init(
            || LocalFit::new(c, num, u),
            |fit, cut| {
                let w = c.wall_point(cut);
                let d = cut.dir.vector();
                let der = fit.at_with_source(w, d, false, source(w))?;
                let [hxx, hxy, hyy] = der.hessian;
                let b = d[0] * d[0] * hxx + 2.0 * d[0] * d[1] * hxy + d[1] * d[1] * hyy;
                let q = num.unknown_of[cut.node] as usize;
                Some((q, problem.ghost_curvature_term(cut, b)?))
            },
        )
        .collect();
    // Cuts are ordered by node, so the terms of one unknown are consecutive.
    let mut run: Option<(usize, f64)> = None;
    for (q, v) in terms.into_iter().flatten() {
        run = match run {
            Some((p, sum)) if p == q => Some((p, sum + v)),
            Some((p, sum)) => {
                rhs[p] += sum;
                Some((q, v))
            }
            None => Some((q, v)),
        };
    }
    if let Some((p, sum)) = run {
        rhs[p] += sum;
    }
}

/// All figures of merit from the unit solution. `corners`: the sharp corners of the walls
/// when the geometry is exact (None for a mask).
///
/// At a re-entrant corner the samples of the wall shear follow r^(λ−1) down to the grid's
/// resolution and then fail, so (1) the largest wall shear is NaN (unbounded) and the largest
/// one farther than [`CORNER_RADIUS_SHARE`]·D_h from the singular corners is given instead;
/// (2) the force balance replaces the samples within ρ = min([`CORNER_BALANCE_CELLS`]·h, r₀/2)
/// of the corner by the integral of the singular term over both walls, 2·a·ρ^λ
/// (∫₀^ρ a·λ·r^(λ−1) dr per wall), with a from [`singular::coefficient`]. At a convex sharp
/// corner the wall shear tends to 0 like r^(λ−1), λ > 1: the smallest is 0 there.
pub fn figures(
    c: &Classified,
    num: &Numbering,
    u: &[f64],
    walls: &Walls,
    shear: &[ShearSample],
    corners: Option<&[Corner]>,
    enrichment: Option<&Enrichment>,
) -> Figures {
    let treated: Vec<Point> = enrichment
        .map(|e| e.corners.iter().map(|s| s.corner.position).collect())
        .unwrap_or_default();
    let area = walls.area;
    let perimeter = walls.perimeter;
    let dh = 4.0 * area / perimeter;
    let flow = match enrichment {
        Some(e) => e.flow_integral(c, num, u, area),
        _ => flow_integral(c, num, u, area),
    };
    let umax = max_velocity(c, num, u);
    let h = c.grid.h;
    let tau_mean_exact = area / perimeter;
    let weights = quadrature_weights(c, num);
    let mut singular_corners = Vec::new();
    let mut balance: Vec<(Point, f64, f64)> = Vec::new(); // (position, ρ, 2aρ^λ)
    for k in corners
        .unwrap_or(&[])
        .iter()
        .filter(|k| k.is_reentrant() && !treated.contains(&k.position))
    {
        let s = Singular::new(*k, dh);
        let a = if s.r1 > 2.0 * h {
            singular::coefficient(&s, c, num, u, &weights)
        } else {
            f64::NAN
        };
        let l = s.lambda;
        let rho = (CORNER_BALANCE_CELLS * h).min(0.5 * s.r0);
        balance.push((k.position, rho, 2.0 * a * rho.powf(l)));
        singular_corners.push(SingularCorner {
            position: k.position,
            angle: k.angle,
            exponent: l - 1.0,
            coefficient: a * l * dh.powf(l - 1.0) / tau_mean_exact,
            a,
            straight: k.straight,
            treated: false,
        });
    }
    // The treated corners: their coefficient is the enrichment's, and their singular part's
    // wall shear is integrated exactly (Singular::wall_flux) instead of sampled.
    let mut exact_flux = 0.0;
    if let Some(e) = enrichment {
        for (s, &a) in e.corners.iter().zip(&e.a) {
            let l = s.lambda;
            exact_flux += a * s.wall_flux();
            // Higher harmonics are part of the treatment, not corners of their own.
            if s.harmonic != 1 {
                continue;
            }
            singular_corners.push(SingularCorner {
                position: s.corner.position,
                angle: s.corner.angle,
                exponent: l - 1.0,
                coefficient: a * l * dh.powf(l - 1.0) / tau_mean_exact,
                a,
                straight: s.corner.straight,
                treated: true,
            });
        }
        singular_corners.sort_by(|a, b| {
            a.position[0]
                .total_cmp(&b.position[0])
                .then(a.position[1].total_cmp(&b.position[1]))
        });
    }
    let dist = |p: Point, q: Point| (p[0] - q[0]).hypot(p[1] - q[1]);
    let valid: Vec<&ShearSample> = shear.iter().filter(|s| s.tau.is_finite()).collect();
    // The mean is the samples' own (the ratios and the wall_shear.csv refer to it); the
    // force balance takes each singular corner's neighbourhood from its singular term.
    let mut total = 0.0;
    let mut balanced = 0.0;
    let mut len = 0.0;
    for (s, smp) in shear.iter().zip(&walls.samples) {
        if !s.tau.is_finite() {
            continue;
        }
        len += s.ds;
        total += s.tau * s.ds;
        if balance.iter().all(|&(p, rho, _)| dist(s.point, p) >= rho) {
            // Less the treated corners' singular part, which exact_flux holds.
            let singular = enrichment.map_or(0.0, |e| {
                let g = e.gradient(smp.point);
                -(g[0] * smp.normal[0] + g[1] * smp.normal[1])
            });
            balanced += (s.tau - singular) * s.ds;
        }
    }
    balanced += exact_flux;
    balanced += balance
        .iter()
        .map(|b| b.2)
        .filter(|v| v.is_finite())
        .sum::<f64>();
    let mean = if len > 0.0 { total / len } else { f64::NAN };
    let balanced_mean = if len > 0.0 { balanced / len } else { f64::NAN };
    let tmax = valid
        .iter()
        .map(|s| s.tau)
        .fold(f64::NEG_INFINITY, f64::max);
    let corner_radius = CORNER_RADIUS_SHARE * dh;
    let tmax_away = valid
        .iter()
        .filter(|s| {
            singular_corners
                .iter()
                .all(|k| dist(s.point, k.position) >= corner_radius)
        })
        .map(|s| s.tau)
        .fold(f64::NEG_INFINITY, f64::max);
    let tmin = valid.iter().map(|s| s.tau).fold(f64::INFINITY, f64::min);
    // A convex corner makes the wall shear vanish like r^(π/α − 1); one so near straight
    // that the exponent is below ZERO_SHEAR_EXPONENT (α above about 164°, a drawing's
    // flattened curve) keeps half its value even 10⁻³·D_h from the vertex, so its zero is
    // not reported.
    let min_corner = corners
        .unwrap_or(&[])
        .iter()
        .find(|k| {
            k.angle < std::f64::consts::PI - SMOOTH_TOLERANCE
                && std::f64::consts::PI / k.angle - 1.0 >= ZERO_SHEAR_EXPONENT
        })
        .copied();
    let corner_order = corners.map(|ks| {
        ks.iter()
            .filter(|k| k.is_reentrant() && !treated.contains(&k.position))
            .map(|k| 2.0 * k.lambda())
            .fold(2.0, f64::min)
    });
    // The heat-transfer problems are enriched at the same corners as the flow
    // (heat::heat_transfer): the same order.
    let heat_corner_order = corner_order;
    let total_exact_len = balanced_mean * perimeter;
    Figures {
        area,
        perimeter,
        hydraulic_diameter: dh,
        flow_integral: flow,
        max_velocity: umax,
        fanning_f_re: dh * dh * area / (2.0 * flow),
        max_to_mean_velocity: umax * area / flow,
        wall_shear_mean: mean,
        wall_shear_max_to_mean: if singular_corners.is_empty() {
            tmax / mean
        } else {
            f64::NAN
        },
        wall_shear_min_to_mean: if min_corner.is_some() {
            0.0
        } else {
            tmin / mean
        },
        force_balance_rel_error: (total_exact_len - area).abs() / area,
        singular_corners,
        wall_shear_max_away_to_mean: tmax_away / mean,
        corner_radius,
        wall_shear_min_corner: min_corner,
        corner_order,
        heat_corner_order,
    }
}

#[cfg(test)]
mod ordering_tests {
    use super::*;

    /// Issue 19: centroids whose heights differ by less than the tolerance in a chain (a − b
    /// and b − c within it, a − c not) and NaN ones made the old comparator no total order;
    /// the ordering must neither panic nor lose a passage.
    #[test]
    fn passages_are_ordered_whatever_the_ties_and_nans() {
        let tol = 1.0;
        let mut out: Vec<PassageFigures> = (0..3000u32)
            .map(|k| PassageFigures {
                area: 1.0,
                perimeter: 1.0,
                hydraulic_diameter: 1.0,
                flow_integral: 1.0,
                fanning_f_re: 1.0,
                flow_share: 1.0,
                centroid: if k % 97 == 0 {
                    [f64::NAN, f64::NAN]
                } else {
                    [((k * 7919) % 101) as f64, 0.6 * tol * (k % 13) as f64]
                },
                label: k,
            })
            .collect();
        order_top_left_first(&mut out, tol);
        let mut labels: Vec<u32> = out.iter().map(|p| p.label).collect();
        labels.sort_unstable();
        assert_eq!(labels, (0..3000).collect::<Vec<_>>());
        // Rows top first: heights never rise by more than the tolerance.
        for w in out.windows(2) {
            let (a, b) = (w[0].centroid[1], w[1].centroid[1]);
            if a.is_finite() && b.is_finite() {
                assert!(b <= a + tol, "{a} then {b}");
            }
        }
    }
}
