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
//! - a **regular link** to a fluid node j: K·(u_i − u_j), with K = k_face·w the face
//!   coefficient times the face width w (below);
//! - a link cut by a **Dirichlet** wall at θ·h (0 < θ ≤ 1): the ghost value extrapolated
//!   linearly through u = g at the wall (Gibou, Fedkiw, Cheng & Kang, J. Comput. Phys. 176
//!   (2002) 205–227) gives K·u_i/θ on the diagonal and K·g/θ on the right-hand side;
//! - a link cut by a **Robin** wall: with u linear between the node and the wall and its slope
//!   along the link du/ds = cos φ·∂u/∂n (φ the angle between link and wall normal; the
//!   tangential slope neglected, exact where the wall value is uniform along the wall, as on a
//!   slip circle, and on walls along grid lines), u_w = b·∂u/∂n_in gives the ghost of a
//!   Dirichlet wall moved out to θ_eff = θ + b/(h·cos φ): K·u_i/θ_eff on the diagonal. b = 0
//!   is the Dirichlet wall u = 0; b → ∞ the Neumann wall of zero flux;
//! - a link cut by a **Neumann** wall: nothing on the diagonal (no flux through the link) and
//!   w·h·q·cos φ on the right-hand side (the wall flux projected on the link).
//!
//! A Dirichlet link keeps the finite-difference cell (half a cell on that side of the node),
//! which is second order in the maximum norm (Gibou et al. 2002). A Robin or Neumann wall is a
//! flux condition, for which the cell must end at the wall: along an axis whose link is cut by
//! such a wall at θ the node's cell reaches θ·h on that side instead of h/2 (finite-volume
//! reading of the same row). Its extent along each axis, ext = a₊ + a₋ with a = ½ for a
//! regular or Dirichlet link and a = θ for a Robin or Neumann one, gives the node's weight
//! m = ext_x·ext_y for the shift and the source (c·h²·m on the diagonal, f·h²·m on the right),
//! and the face widths: a link along x has w = ½·(ext_y(i) + ext_y(j)), the mean of its two
//! ends (symmetric by construction), and a cut link w = ext_y(i); the same along y. With
//! Dirichlet walls only, every ext is 1, every w is 1 and m = 1: the plain cut-cell
//! Laplacian. The matrix is symmetric, and positive definite when every passage has a
//! Dirichlet or Robin wall or a positive shift (zero-flux walls alone leave the constant in
//! the null space).
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

impl WallCondition {
    /// Whether the node's cell ends at this wall (a flux condition) rather than half a cell
    /// out (see the module documentation).
    fn ends_cell(self) -> bool {
        !matches!(self, WallCondition::Dirichlet(_))
    }
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
/// is cut), `wall_rhs` the walls' share of the right-hand side and `mass` the node's weight m
/// (the shift and the source enter as c·h²·m and f·h²·m).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Stencil {
    pub diag: f64,
    pub off: [f64; 4],
    pub wall_rhs: f64,
    pub mass: f64,
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

    /// The plain cut-cell Laplacian: unit coefficients, Dirichlet walls (any values), no shift
    /// (the fast kernels of the matrix-free operator then hold for every regular row).
    pub fn is_plain_laplacian(&self) -> bool {
        self.coefficients == Coefficients::Unit
            && self.shift.uniform() == Some(0.0)
            && !self.has_flux_walls()
    }

    /// Some wall carries a Robin or Neumann condition.
    pub fn has_flux_walls(&self) -> bool {
        self.walls.default.ends_cell() || self.walls.walls.iter().any(|&(_, c)| c.ends_cell())
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

    /// The node's cell extent along x and along y, in cells (see the module documentation):
    /// 1 unless a Robin or Neumann wall cuts one of its links.
    fn extents(&self, n: usize) -> [f64; 2] {
        let mut ext = [1.0, 1.0];
        for cut in self.classified.cuts_of(n) {
            if self.walls.of(cut.wall).ends_cell() {
                let axis = usize::from(matches!(cut.dir, Dir::North | Dir::South));
                ext[axis] += cut.theta - 0.5;
            }
        }
        ext
    }

    /// Face width of node n's link in direction d (the other axis' extent, averaged over the
    /// two ends of a regular link).
    fn width(&self, n: usize, d: Dir, regular: bool) -> f64 {
        let other = usize::from(matches!(d, Dir::East | Dir::West));
        let own = self.extents(n)[other];
        if regular {
            let m = self.classified.grid.inner_neighbour(n, d);
            0.5 * (own + self.extents(m)[other])
        } else {
            own
        }
    }

    /// The row of grid node n, a fluid node, whose unknown is q (see the module
    /// documentation). The diagonal is summed over the links in [`Dir::ALL`] order, the shift
    /// last.
    pub fn stencil(&self, n: usize, q: usize) -> Stencil {
        let c = self.classified;
        let h = c.grid.h;
        let flux_walls = self.has_flux_walls();
        let mut diag = 0.0;
        let mut off = [0.0; 4];
        let mut wall_rhs = 0.0;
        for (slot, d) in Dir::ALL.into_iter().enumerate() {
            let cut = c.cuts_of(n).iter().find(|cut| cut.dir == d);
            let k = self.face(n, d);
            let w = if flux_walls {
                self.width(n, d, cut.is_none())
            } else {
                1.0
            };
            let kw = if w == 1.0 { k } else { k * w };
            match cut {
                None => {
                    diag += kw;
                    off[slot] = kw;
                }
                Some(cut) => match self.walls.of(cut.wall) {
                    WallCondition::Dirichlet(g) => {
                        diag += kw / cut.theta;
                        if g != 0.0 {
                            wall_rhs += kw * g / cut.theta;
                        }
                    }
                    WallCondition::Robin(b) => {
                        let cos = (cut.cos as f64).max(MIN_COS);
                        diag += kw / (cut.theta + b / (h * cos));
                    }
                    WallCondition::Neumann(flux) => {
                        let cos = (cut.cos as f64).max(MIN_COS);
                        wall_rhs += w * h * flux * cos;
                    }
                },
            }
        }
        let mass = if flux_walls {
            let [ex, ey] = self.extents(n);
            ex * ey
        } else {
            1.0
        };
        let shift = self.shift.at(q);
        if shift != 0.0 {
            diag += shift * h * h * mass;
        }
        Stencil {
            diag,
            off,
            wall_rhs,
            mass,
        }
    }

    /// The diagonal node n's row would have with none of its links cut (each cut link counted
    /// as a regular one of the same face): what the multigrid's prolongation compares the
    /// actual diagonal with. 4 for the plain Laplacian.
    pub fn regular_diag(&self, n: usize, q: usize) -> f64 {
        let c = self.classified;
        let h = c.grid.h;
        let flux_walls = self.has_flux_walls();
        let mut d = 0.0;
        for dir in Dir::ALL {
            let regular = c.cuts_of(n).iter().all(|cut| cut.dir != dir);
            let w = if flux_walls {
                self.width(n, dir, regular)
            } else {
                1.0
            };
            d += self.face(n, dir) * w;
        }
        let shift = self.shift.at(q);
        if shift != 0.0 {
            let mass = if flux_walls {
                let [ex, ey] = self.extents(n);
                ex * ey
            } else {
                1.0
            };
            d += shift * h * h * mass;
        }
        d
    }

    /// The right-hand side h²·m·f + (wall terms) in unknown order, for the source `source`.
    pub fn rhs(&self, num: &Numbering, source: &Field) -> Vec<f64> {
        use rayon::prelude::*;
        let h2 = self.classified.grid.h * self.classified.grid.h;
        if !self.has_flux_walls() && self.walls.all_no_slip() {
            // Every m = 1 and no wall terms: h²·f.
            return match source {
                Field::Zero => vec![0.0; num.len()],
                Field::Uniform(f) => vec![h2 * f; num.len()],
                Field::Unknowns(f) => f.par_iter().map(|v| h2 * v).collect(),
            };
        }
        (0..num.len())
            .into_par_iter()
            .map(|q| {
                let st = self.stencil(num.node(q), q);
                h2 * (st.mass * source.at(q)) + st.wall_rhs
            })
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
        let w = if self.has_flux_walls() {
            self.width(cut.node, cut.dir, false)
        } else {
            1.0
        };
        let term = 0.5 * b * (1.0 - cut.theta) * h2;
        Some(if k * w == 1.0 { term } else { k * w * term })
    }
}
