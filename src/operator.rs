//! The discrete operator: numbering of unknowns and the cut-cell Laplacian.
//!
//! Owns: the map between fluid nodes and unknowns, and the assembly of the symmetric positive
//! definite matrix of −∇² with homogeneous Dirichlet walls, scaled by h².
//!
//! Scheme (Gibou, Fedkiw, Cheng & Kang, J. Comput. Phys. 176 (2002) 205–227): the 5-point
//! Laplacian at fluid node i; where the neighbour j across a link lies beyond a wall at θ·h
//! (0 < θ ≤ 1), a ghost value is extrapolated linearly through u = 0 at the wall,
//! u_ghost = −u_i·(1 − θ)/θ, so that link contributes u_i/(θ·h²) to the row and nothing to the
//! off-diagonal. Row i of h²·(−∇²_h) is therefore
//!
//! ```text
//!   Σ_regular (u_i − u_j)  +  Σ_cut u_i/θ  =  h²·f_i
//! ```
//!
//! Off-diagonals stay −1 and only the diagonal changes, so the matrix is symmetric positive
//! definite; the solution is second order in the maximum norm. A mask with the wall on the
//! pixel faces is the same formula with θ = ½.
//!
//! Invariant: knows nothing of files, of the iteration or of physical units beyond h.

use crate::grid::{Classified, Dir};
use sprs::CsMat;

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

/// Assembles h²·(−∇²_h) in CSR form (rows sorted, diagonal included), row by row: unknowns
/// are numbered row-major, so the columns of a row come out sorted as South, West, self, East,
/// North and no triplet sort is needed.
pub fn assemble(c: &Classified, num: &Numbering) -> CsMat<f64> {
    let n = num.len();
    let mut indptr = Vec::with_capacity(n + 1);
    let mut indices = Vec::with_capacity(5 * n);
    let mut data = Vec::with_capacity(5 * n);
    indptr.push(0);
    for (row, k) in num.nodes().enumerate() {
        let mut diag = 0.0;
        let mut off = [None; 4];
        for (slot, d) in [Dir::South, Dir::West, Dir::East, Dir::North]
            .into_iter()
            .enumerate()
        {
            match c.theta(k, d) {
                Some(theta) => diag += 1.0 / theta,
                None => {
                    diag += 1.0;
                    // A regular link always ends at a fluid node (see grid::classify).
                    let m = c
                        .grid
                        .neighbour(k, d)
                        .expect("regular link inside the grid");
                    let col = num.unknown_of[m];
                    debug_assert_ne!(col, NO_UNKNOWN);
                    off[slot] = Some(col as usize);
                }
            }
        }
        for col in off[..2].iter().flatten() {
            indices.push(*col);
            data.push(-1.0);
        }
        indices.push(row);
        data.push(diag);
        for col in off[2..].iter().flatten() {
            indices.push(*col);
            data.push(-1.0);
        }
        indptr.push(indices.len());
    }
    CsMat::new((n, n), indptr, indices, data)
}

/// The same operator on the whole grid, matrix-free: the diagonal of every node (0 at solid
/// nodes) and, per node, a bit per direction for a regular link (off-diagonal −1). Vectors on
/// it have one entry per grid node, zero at solid nodes. Nine bytes a node instead of the
/// CSR's sixty; the path the multigrid solver takes.
///
/// The fast kernels do not read the link bits: a vector is zero at every solid node, so the
/// plain sum of the four neighbours equals the sum over the regular links, except at a node
/// whose cut link ends on a fluid node (a wall thinner than a cell, with fluid on both sides).
/// Those few nodes are listed per row ([`GridOperator::thin_in_row`]) and recomputed from the
/// link bits after each row.
///
/// Each row also records its fluid span ([`GridOperator::row_span`]), the columns from its
/// first to its last fluid node: outside it every vector on the grid is zero and every kernel's
/// output is zero, so the kernels compute the span only and write zeros around it. On a circle
/// that skips the 21 % of the bounding square outside the disc.
#[derive(Debug, Clone)]
pub struct GridOperator {
    pub nx: usize,
    pub ny: usize,
    pub diag: Vec<f64>,
    /// Bit `Dir as u8` set: regular link in that direction.
    pub links: Vec<u8>,
    /// Fluid nodes with a cut link to a fluid node, in index order.
    thin: Vec<u32>,
    /// `thin[thin_rows[j]..thin_rows[j + 1]]` lie in grid row j.
    thin_rows: Vec<u32>,
    /// Per row, the columns `lo..hi` from the first to one past the last fluid node (`1..1`
    /// when the row has none).
    spans: Vec<(u32, u32)>,
}

impl GridOperator {
    pub fn new(c: &Classified) -> GridOperator {
        use rayon::prelude::*;
        let n = c.grid.len();
        let nx = c.grid.nx;
        let mut diag = vec![0.0; n];
        let mut links = vec![0u8; n];
        let per_row: Vec<(Vec<u32>, (u32, u32))> = diag
            .par_chunks_mut(nx)
            .zip(links.par_chunks_mut(nx))
            .enumerate()
            .map(|(j, (drow, lrow))| {
                let mut thin = Vec::new();
                let mut span: Option<(usize, usize)> = None;
                for i in 0..drow.len() {
                    let k = j * nx + i;
                    if !c.fluid[k] {
                        continue;
                    }
                    span = Some(span.map_or((i, i + 1), |(lo, _)| (lo, i + 1)));
                    let mut d = 0.0;
                    let mut mask = 0u8;
                    let mut is_thin = false;
                    for dir in Dir::ALL {
                        match c.theta(k, dir) {
                            Some(theta) => {
                                d += 1.0 / theta;
                                is_thin |= c.fluid[c.grid.inner_neighbour(k, dir)];
                            }
                            None => {
                                d += 1.0;
                                mask |= 1 << dir as u8;
                            }
                        }
                    }
                    drow[i] = d;
                    lrow[i] = mask;
                    if is_thin {
                        thin.push(k as u32);
                    }
                }
                // Fluid never lies on the solid ring, so 1 ≤ lo ≤ hi ≤ nx − 1.
                let (lo, hi) = span.unwrap_or((1, 1));
                (thin, (lo as u32, hi as u32))
            })
            .collect();
        let mut thin_rows = Vec::with_capacity(per_row.len() + 1);
        thin_rows.push(0);
        let mut thin = Vec::new();
        let mut spans = Vec::with_capacity(per_row.len());
        for (row, span) in per_row {
            thin.extend(row);
            thin_rows.push(thin.len() as u32);
            spans.push(span);
        }
        GridOperator {
            nx,
            ny: c.grid.ny,
            diag,
            links,
            thin,
            thin_rows,
            spans,
        }
    }

    /// The columns `lo..hi` of grid row j that hold fluid: every node outside is solid (see
    /// [`GridOperator`]); `lo == hi` for a row without fluid.
    #[inline]
    pub fn row_span(&self, j: usize) -> (usize, usize) {
        let (lo, hi) = self.spans[j];
        (lo as usize, hi as usize)
    }

    /// The nodes of grid row j whose cut links end on fluid (see [`GridOperator`]).
    #[inline]
    pub fn thin_in_row(&self, j: usize) -> &[u32] {
        &self.thin[self.thin_rows[j] as usize..self.thin_rows[j + 1] as usize]
    }
}

/// Right-hand side h²·f for the unit problem f = 1.
pub fn unit_rhs(c: &Classified, num: &Numbering) -> Vec<f64> {
    vec![c.grid.h * c.grid.h; num.len()]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{Primitive, Shape};
    use crate::grid::{classify, Grid};

    #[test]
    fn matrix_is_symmetric_with_cut_diagonals() {
        let s = Shape::new(
            vec![Primitive::Circle {
                center: [0.01, 0.02],
                radius: 1.0,
            }],
            vec![Primitive::Circle {
                center: [0.2, 0.0],
                radius: 0.3,
            }],
        );
        let (lo, hi) = s.bbox();
        let c = classify(&s, Grid::covering(lo, hi, 24)).unwrap();
        let num = Numbering::new(&c);
        let a = assemble(&c, &num);
        let at = a.transpose_view().to_csr();
        for (v, (i, j)) in a.iter() {
            let w = at.get(i, j).copied().unwrap_or(f64::NAN);
            assert_eq!(*v, w);
        }
        // Diagonal dominance: every row sum is >= 0, positive next to a wall.
        for (i, row) in a.outer_iterator().enumerate() {
            let sum: f64 = row.iter().map(|(_, v)| *v).sum();
            assert!(sum >= -1e-12, "row {i} sum {sum}");
        }
    }

    /// Each row's span runs exactly from its first to its last fluid node, and a row without
    /// fluid (between two passages stacked one above the other) has an empty span.
    #[test]
    fn row_spans_bound_the_fluid_and_are_empty_between_passages() {
        let disc = |y: f64| Primitive::Circle {
            center: [0.0, y],
            radius: 1.0,
        };
        let s = Shape::new(vec![disc(-1.5), disc(1.5)], vec![]);
        let (lo, hi) = s.bbox();
        let c = classify(&s, Grid::covering(lo, hi, 40)).unwrap();
        let op = GridOperator::new(&c);
        let nx = c.grid.nx;
        let mut empty_inner_rows = 0;
        for j in 0..c.grid.ny {
            let fluid: Vec<usize> = (0..nx).filter(|&i| c.fluid[j * nx + i]).collect();
            let (a, b) = op.row_span(j);
            match (fluid.first(), fluid.last()) {
                (Some(&f), Some(&l)) => assert_eq!((a, b), (f, l + 1), "row {j}"),
                _ => {
                    assert_eq!(a, b, "row {j}");
                    assert!(a >= 1 && b < nx);
                    if j > 0 && j + 1 < c.grid.ny {
                        empty_inner_rows += 1;
                    }
                }
            }
        }
        assert!(
            empty_inner_rows > 0,
            "the two discs should leave solid rows between them"
        );
    }
}
