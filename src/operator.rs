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
use sprs::{CsMat, TriMat};

/// Marker for a node that carries no unknown.
pub const NO_UNKNOWN: u32 = u32::MAX;

/// Unknowns of the discrete problem: one per fluid node, numbered row by row.
#[derive(Debug, Clone)]
pub struct Numbering {
    /// Unknown of each grid node, or [`NO_UNKNOWN`].
    pub unknown_of: Vec<u32>,
    /// Grid node of each unknown.
    pub node_of: Vec<usize>,
}

impl Numbering {
    pub fn new(c: &Classified) -> Numbering {
        let mut unknown_of = vec![NO_UNKNOWN; c.grid.len()];
        let mut node_of = Vec::with_capacity(c.fluid_count());
        for (k, &f) in c.fluid.iter().enumerate() {
            if f {
                unknown_of[k] = node_of.len() as u32;
                node_of.push(k);
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
}

/// Assembles h²·(−∇²_h) in CSR form (rows sorted, diagonal included).
pub fn assemble(c: &Classified, num: &Numbering) -> CsMat<f64> {
    let n = num.len();
    let mut tri = TriMat::with_capacity((n, n), 5 * n);
    for (row, &k) in num.node_of.iter().enumerate() {
        let mut diag = 0.0;
        for d in Dir::ALL {
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
                    tri.add_triplet(row, col as usize, -1.0);
                }
            }
        }
        tri.add_triplet(row, row, diag);
    }
    tri.to_csr()
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
        let s = Shape {
            name: None,
            regions: vec![Primitive::Circle {
                center: [0.01, 0.02],
                radius: 1.0,
            }],
            holes: vec![Primitive::Circle {
                center: [0.2, 0.0],
                radius: 0.3,
            }],
        };
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
}
