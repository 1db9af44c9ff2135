//! The problem layer: what is solved on the fluid nodes of a classified grid, and the one
//! place where a row of the cut-cell discretisation is written.
//!
//! Owns: the numbering of the unknowns ([`Numbering`]), the description of the equation
//!
//! ```text
//!   c·u − ∇·(k∇u) = f   in the fluid,
//!   u = g               on a Dirichlet wall,
//!   k·∂u/∂n = q         on a Neumann wall (n out of the fluid: q > 0 flows into it),
//!   u = b·∂u/∂n_in      on a Robin wall (n_in into the fluid; Navier slip of length b),
//! ```
//!
//! with a per-node shift c ≥ 0 ([`Field`]), per-face coefficients k > 0 ([`Coefficients`]) and
//! a condition per wall ([`WallConditions`], keyed by the [`WallId`] of each cut link), and
//! [`Problem::stencil`], the row of one unknown. The CSR and matrix-free operators, the
//! Galerkin hierarchy (through the fine operator), the right-hand sides and the deferred wall
//! correction all take their numbers from here.
//!
//! # The scheme
//! Rows are scaled by h². At a fluid node i each of its four links contributes:
//! - a **regular link** to a fluid node j: k_f·(u_i − u_j), k_f the coefficient of the face
//!   between them;
//! - a link cut by a **Dirichlet** wall at θ·h (0 < θ ≤ 1): the ghost value extrapolated
//!   linearly through u = g at the wall (Gibou, Fedkiw, Cheng & Kang, J. Comput. Phys. 176
//!   (2002) 205–227) gives k_f·u_i/θ on the diagonal and k_f·g/θ on the right-hand side.
//!   Second order in the maximum norm;
//! - a link cut by a **Robin** wall: the same linear ghost, its slope along the link taken as
//!   du/ds = cos φ·∂u/∂n (φ the angle between link and wall normal, the tangential slope
//!   neglected: exact where the wall value is uniform along the wall, as on a slip circle, and
//!   on walls along grid lines). Then u_w = b·∂u/∂n_in puts the ghost of a Dirichlet wall at
//!   θ_eff = θ + b/(h·cos φ): k_f·u_i/θ_eff on the diagonal. b = 0 is the no-slip wall; b → ∞
//!   the wall without flux;
//! - a link cut by a **Neumann** wall: the ghost u_i + h·(q/k)·cos φ, so nothing on the
//!   diagonal and h·q·cos φ on the right-hand side.
//!
//! The shift enters as c·h² on the diagonal and the source as f·h² on the right. Off-diagonals
//! are −k_f, so the matrix is symmetric; it is positive definite when every passage has a
//! Dirichlet or Robin wall or a positive shift (flux walls alone leave the constant in the
//! null space). Measured (tests/problem.rs, 50 to 1600 cells across a unit disc): the shifted
//! disc converges at second order in the maximum norm (order 1.98 at c·R² = 1, 1.88 between
//! 800 and 1600 cells at c·R² = 10⁴, whose wall layer is R/100 thick); a layered k at second
//! order; the slip disc (Robin) at first order (0.9–1.5), its flow rate within 2e-5 of
//! (1 + 4b/R) times the no-slip one at 400 cells; a flux-free flat halfway between node rows
//! reproduces the full disc to round-off (mirror symmetry), one elsewhere at first order (the
//! linear ghost misses the curvature across the wall, ½·u″·(1 − 2θ)·h²). An attempt to end
//! the node's cell at a flux wall (finite-volume extents along each axis, face widths averaged
//! between the two ends for symmetry) was consistent on straight walls only and stalled at 2 %
//! on the slip disc; it is not used.
//!
//! Invariant: knows the grid and its cuts, nothing of iterations, storage formats or files.

use crate::geometry::WallId;
use crate::grid::{Classified, Cut, Dir};

/// Marker for a node that carries no unknown.
pub const NO_UNKNOWN: u32 = u32::MAX;

/// Unknowns of the discrete problem: one per fluid node, numbered row by row.
#[derive(Debug, Clone)]
pub struct Numbering {
    /// Unknown of each grid node, or [`NO_UNKNOWN`].
    pub unknown_of: Vec<u32>,
    /// Grid node of each unknown (as u32: grids are capped below 2³² nodes, and the numbering
    /// is then 4 bytes an unknown lighter; [`Numbering::nodes`] gives them as indices).
    pub node_of: Vec<u32>,
}

impl Numbering {
    pub fn new(c: &Classified) -> Numbering {
        let mut unknown_of = vec![NO_UNKNOWN; c.grid.len()];
        let mut node_of = Vec::with_capacity(c.fluid_count());
        for (k, &f) in c.fluid.iter().enumerate() {
            if f {
                unknown_of[k] = node_of.len() as u32;
                node_of.push(k as u32);
            }
        }
        Numbering {
            unknown_of,
            node_of,
        }
    }

    pub fn len(&self) -> usize {
        self.node_of.len()
    }

    pub fn is_empty(&self) -> bool {
        self.node_of.is_empty()
    }

    /// The grid node of each unknown, in unknown order.
    pub fn nodes(&self) -> impl ExactSizeIterator<Item = usize> + '_ {
        self.node_of.iter().map(|&k| k as usize)
    }

    /// The grid node of unknown q.
    pub fn node(&self, q: usize) -> usize {
        self.node_of[q] as usize
    }
}

/// A value per unknown: zero, one value everywhere, or one per unknown (in [`Numbering`]
/// order).
#[derive(Debug, Clone, PartialEq, Default)]
pub enum Field {
    #[default]
    Zero,
    Uniform(f64),
    Unknowns(Vec<f64>),
}

impl Field {
    /// The value at unknown q.
    #[inline]
    pub fn at(&self, q: usize) -> f64 {
        match self {
            Field::Zero => 0.0,
            Field::Uniform(v) => *v,
            Field::Unknowns(v) => v[q],
        }
    }

    /// The same value at every unknown, if so.
    pub fn uniform(&self) -> Option<f64> {
        match self {
            Field::Zero => Some(0.0),
            Field::Uniform(v) => Some(*v),
            Field::Unknowns(_) => None,
        }
    }
}

/// The coefficient k of −∇·(k∇u), per face of the grid.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum Coefficients {
    /// k = 1 on every face.
    #[default]
    Unit,
    /// `east[n]`: k on the face between grid node n and its east neighbour n + 1;
    /// `north[n]`: between n and its north neighbour n + nx. One entry per grid node; only
    /// faces of fluid nodes are read.
    Faces { east: Vec<f64>, north: Vec<f64> },
}

/// The condition on one wall.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum WallCondition {
    /// u = value.
    Dirichlet(f64),
    /// k·∂u/∂n = flux, n the normal out of the fluid (a positive flux flows into the fluid).
    Neumann(f64),
    /// u = b·∂u/∂n_in, n_in the normal into the fluid, b ≥ 0 (the Navier slip length).
    Robin(f64),
}

/// The condition of every wall: one for all, with exceptions by [`WallId`].
#[derive(Debug, Clone, PartialEq)]
pub struct WallConditions {
    pub default: WallCondition,
    /// (wall, condition) pairs overriding the default.
    pub walls: Vec<(WallId, WallCondition)>,
}

impl Default for WallConditions {
    /// u = 0 on every wall (no slip).
    fn default() -> Self {
        WallConditions {
            default: WallCondition::Dirichlet(0.0),
            walls: Vec::new(),
        }
    }
}

impl WallConditions {
    /// One condition on every wall.
    pub fn all(condition: WallCondition) -> Self {
        WallConditions {
            default: condition,
            walls: Vec::new(),
        }
    }

    /// This one with `condition` on `wall`.
    pub fn with(mut self, wall: WallId, condition: WallCondition) -> Self {
        self.walls.retain(|&(w, _)| w != wall);
        self.walls.push((wall, condition));
        self
    }

    /// The condition on `wall`.
    #[inline]
    pub fn of(&self, wall: WallId) -> WallCondition {
        self.walls
            .iter()
            .find(|&&(w, _)| w == wall)
            .map_or(self.default, |&(_, c)| c)
    }

    /// Every wall is a homogeneous Dirichlet wall (u = 0).
    pub fn all_no_slip(&self) -> bool {
        let zero = |c: WallCondition| c == WallCondition::Dirichlet(0.0);
        zero(self.default) && self.walls.iter().all(|&(_, c)| zero(c))
    }
}

/// Smallest |cos φ| a Robin or Neumann wall uses: a link that grazes the wall (cos φ → 0)
/// sees it as flux-free, which the clamp approaches without dividing by zero.
const MIN_COS: f64 = 1e-6;

/// The row of one unknown, scaled by h²: `diag·u_i − Σ_d off[d]·u_(neighbour d) = rhs`, with
/// the neighbours in [`Dir::ALL`] order (east, west, north, south; `off[d]` = 0 where the link
/// is cut) and `wall_rhs` the walls' share of the right-hand side.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Stencil {
    pub diag: f64,
    pub off: [f64; 4],
    pub wall_rhs: f64,
}

/// The equation on a classified grid (see the module documentation).
#[derive(Debug, Clone)]
pub struct Problem<'a> {
    pub classified: &'a Classified,
    /// c, per unknown.
    pub shift: Field,
    pub coefficients: Coefficients,
    pub walls: WallConditions,
}

impl<'a> Problem<'a> {
    /// −∇²u = f with u = 0 on every wall: the flow problem of fully developed laminar flow
    /// (and the operator of the heat-transfer problems).
    pub fn laplace(classified: &'a Classified) -> Problem<'a> {
        Problem {
            classified,
            shift: Field::Zero,
            coefficients: Coefficients::Unit,
            walls: WallConditions::default(),
        }
    }

    /// The plain cut-cell Laplacian: unit coefficients and no shift (its regular diagonal is
    /// 4 at every node; the walls only change diagonals).
    pub fn is_plain_laplacian(&self) -> bool {
        self.coefficients == Coefficients::Unit && self.shift.uniform() == Some(0.0)
    }

    /// k on the face of node n in direction d.
    #[inline]
    fn face(&self, n: usize, d: Dir) -> f64 {
        match &self.coefficients {
            Coefficients::Unit => 1.0,
            Coefficients::Faces { east, north } => {
                let nx = self.classified.grid.nx;
                match d {
                    Dir::East => east[n],
                    Dir::West => east[n - 1],
                    Dir::North => north[n],
                    Dir::South => north[n - nx],
                }
            }
        }
    }

    /// The row of grid node n, a fluid node, whose unknown is q (see the module
    /// documentation). The diagonal is summed over the links in [`Dir::ALL`] order, the shift
    /// last.
    pub fn stencil(&self, n: usize, q: usize) -> Stencil {
        let c = self.classified;
        let h = c.grid.h;
        let mut diag = 0.0;
        let mut off = [0.0; 4];
        let mut wall_rhs = 0.0;
        let cuts = c.cuts_of(n);
        for (slot, d) in Dir::ALL.into_iter().enumerate() {
            let k = self.face(n, d);
            match cuts.iter().find(|cut| cut.dir == d) {
                None => {
                    diag += k;
                    off[slot] = k;
                }
                Some(cut) => match self.walls.of(cut.wall) {
                    WallCondition::Dirichlet(g) => {
                        diag += k / cut.theta;
                        if g != 0.0 {
                            wall_rhs += k * g / cut.theta;
                        }
                    }
                    WallCondition::Robin(b) => {
                        let cos = (cut.cos as f64).max(MIN_COS);
                        diag += k / (cut.theta + b / (h * cos));
                    }
                    WallCondition::Neumann(flux) => {
                        let cos = (cut.cos as f64).max(MIN_COS);
                        wall_rhs += h * flux * cos;
                    }
                },
            }
        }
        let shift = self.shift.at(q);
        if shift != 0.0 {
            diag += shift * h * h;
        }
        Stencil {
            diag,
            off,
            wall_rhs,
        }
    }

    /// The diagonal node n's row would have with none of its links cut (each cut link counted
    /// as a regular one of the same face): what the multigrid's prolongation compares the
    /// actual diagonal with. 4 for the plain Laplacian.
    pub fn regular_diag(&self, n: usize, q: usize) -> f64 {
        let h = self.classified.grid.h;
        let mut d = 0.0;
        for dir in Dir::ALL {
            d += self.face(n, dir);
        }
        let shift = self.shift.at(q);
        if shift != 0.0 {
            d += shift * h * h;
        }
        d
    }

    /// The right-hand side h²·f + (wall terms) in unknown order, for the source `source`.
    pub fn rhs(&self, num: &Numbering, source: &Field) -> Vec<f64> {
        use rayon::prelude::*;
        let h2 = self.classified.grid.h * self.classified.grid.h;
        if self.walls.all_no_slip() {
            // No wall terms: h²·f.
            return match source {
                Field::Zero => vec![0.0; num.len()],
                Field::Uniform(f) => vec![h2 * f; num.len()],
                Field::Unknowns(f) => f.par_iter().map(|v| h2 * v).collect(),
            };
        }
        (0..num.len())
            .into_par_iter()
            .map(|q| h2 * source.at(q) + self.stencil(num.node(q), q).wall_rhs)
            .collect()
    }

    /// [`Problem::rhs`] for a source given per unknown as a slice (no `Field` to build).
    pub fn rhs_from(&self, num: &Numbering, source: &[f64]) -> Vec<f64> {
        use rayon::prelude::*;
        let h2 = self.classified.grid.h * self.classified.grid.h;
        if self.walls.all_no_slip() {
            return source.par_iter().map(|v| h2 * v).collect();
        }
        (0..num.len())
            .into_par_iter()
            .map(|q| h2 * source[q] + self.stencil(num.node(q), q).wall_rhs)
            .collect()
    }

    /// The deferred correction of a Dirichlet link's ghost for the curvature b = ∂²u/∂s² along
    /// it at the wall (see `post::add_wall_correction`): the quadratic ghost exceeds the
    /// linear one by ½·b·(1 − θ)·h², which the row's link coefficient K carries to the
    /// right-hand side. None for a Robin or Neumann link (its ghost is not that of a value).
    pub fn ghost_curvature_term(&self, cut: &Cut, b: f64) -> Option<f64> {
        let WallCondition::Dirichlet(_) = self.walls.of(cut.wall) else {
            return None;
        };
        let h2 = self.classified.grid.h * self.classified.grid.h;
        let k = self.face(cut.node, cut.dir);
        let term = 0.5 * b * (1.0 - cut.theta) * h2;
        Some(if k == 1.0 { term } else { k * term })
    }
}
