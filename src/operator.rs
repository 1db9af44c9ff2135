//! The discrete operator: numbering of unknowns and the cut-cell Laplacian.
//!
//! Owns: the map between fluid nodes and unknowns, the assembly of the symmetric positive
//! definite matrix of −∇² with homogeneous Dirichlet walls, scaled by h², and the same operator
//! matrix-free on the grid ([`GridOperator`]) with its own product A·x (the solver's
//! [`LinearOperator`], and the row helpers [`span_neighbours`], [`zero_outside`], [`link_sum`],
//! [`LINK_WEIGHTS`] that the multigrid kernels reuse).
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
//! Invariant: knows nothing of files, of the iteration or of physical units beyond h. From
//! `solver` it takes only the `LinearOperator` trait and `dot4`.

use crate::grid::{Classified, Dir};
use crate::solver::{dot4, LinearOperator};
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

impl LinearOperator for GridOperator {
    fn dim(&self) -> usize {
        self.diag.len()
    }

    /// y = A·x, branch-free: solid nodes have d = 0 and no links, so y = 0 there; the solid
    /// ring keeps every neighbour read inside the grid.
    fn apply(&self, x: &[f64], y: &mut [f64]) {
        self.apply_rows(x, y, None);
    }

    /// y = A·x with x·y summed row by row and the row sums added in row order: one pass over
    /// x and y instead of two, the same numbers with any number of threads.
    fn apply_dot(&self, x: &[f64], y: &mut [f64]) -> f64 {
        let rows = self.apply_rows(x, y, None);
        rows.iter().sum()
    }

    fn diagonal(&self) -> Vec<f64> {
        self.diag.clone()
    }

    /// r = b − A·x and r·r in one pass over the rows (row sums added in row order).
    fn residual(&self, b: &[f64], x: &[f64], r: &mut [f64]) -> f64 {
        let rows = self.apply_rows(x, r, Some(b));
        rows.iter().sum()
    }

    fn abs_product_norm(&self, x: &[f64]) -> f64 {
        let nx = self.nx;
        let n = self.diag.len();
        let mut sum = 0.0;
        for k in nx + 1..n - nx - 1 {
            let w = &LINK_WEIGHTS[self.links[k] as usize];
            let v = self.diag[k] * x[k].abs()
                + w[0] * x[k + 1].abs()
                + w[1] * x[k - 1].abs()
                + w[2] * x[k + nx].abs()
                + w[3] * x[k - nx].abs();
            sum += v * v;
        }
        sum.sqrt()
    }
}

impl GridOperator {
    /// y = A·x, rows in parallel (each output row is written by one task); returns x·y of each
    /// row. Branch-free ([`apply_row`]) over each row's fluid span; solid nodes get y = 0. With
    /// `b`: y = b − A·x instead, and y·y of each row.
    fn apply_rows(&self, x: &[f64], y: &mut [f64], b: Option<&[f64]>) -> Vec<f64> {
        use rayon::prelude::*;
        let nx = self.nx;
        let ny = self.ny;
        y.par_chunks_mut(nx)
            .enumerate()
            .map(|(j, out)| {
                let row = j * nx;
                if j == 0 || j + 1 >= ny {
                    // A·x = 0 on the ring rows.
                    return match b {
                        Some(b) => {
                            out.copy_from_slice(&b[row..row + nx]);
                            dot4(out, out)
                        }
                        None => {
                            out.iter_mut().for_each(|v| *v = 0.0);
                            0.0
                        }
                    };
                }
                let (xs, xc, xn) = (
                    &x[row - nx..row],
                    &x[row..row + nx],
                    &x[row + nx..row + 2 * nx],
                );
                let span = self.row_span(j);
                apply_row(&self.diag[row..row + nx], xs, xc, xn, out, span);
                for &k in self.thin_in_row(j) {
                    let (k, i) = (k as usize, k as usize - row);
                    let s = link_sum(self.links[k], x[k + 1], x[k - 1], x[k + nx], x[k - nx]);
                    out[i] = self.diag[k] * x[k] - s;
                }
                match b {
                    Some(b) => {
                        for (o, bi) in out.iter_mut().zip(&b[row..row + nx]) {
                            *o = bi - *o;
                        }
                        dot4(out, out)
                    }
                    None => {
                        let (lo, hi) = span;
                        dot4(&xc[lo..hi], &out[lo..hi])
                    }
                }
            })
            .collect()
    }
}

/// One row of y = A·x from the rows south, centre and north of x: y = d·x − (sum of the four
/// neighbours), and y = 0 where d = 0 (solid). Computed over the row's fluid span `lo..hi`
/// ([`GridOperator::row_span`]), zero around it. Exact for every node but the thin ones of
/// [`GridOperator`], which the caller recomputes. Contiguous and branch-free, so it vectorises.
#[inline]
fn apply_row(
    d: &[f64],
    xs: &[f64],
    xc: &[f64],
    xn: &[f64],
    out: &mut [f64],
    (lo, hi): (usize, usize),
) {
    let m = hi - lo;
    let [e, w, c, n, s] = span_neighbours((xs, xc, xn), (lo, hi));
    let (d, o) = (&d[lo..hi], &mut out[lo..hi]);
    for i in 0..m {
        let v = d[i] * c[i] - ((e[i] + w[i]) + (n[i] + s[i]));
        o[i] = if d[i] != 0.0 { v } else { 0.0 };
    }
    zero_outside(out, (lo, hi));
}

/// The neighbour slices of a row's span `lo..hi` (1 ≤ lo ≤ hi ≤ nx − 1), as (east, west,
/// centre, north, south), all of length hi − lo, from the rows south, centre and north.
#[inline(always)]
pub(crate) fn span_neighbours<'x>(
    (xs, xc, xn): (&'x [f64], &'x [f64], &'x [f64]),
    (lo, hi): (usize, usize),
) -> [&'x [f64]; 5] {
    [
        &xc[lo + 1..hi + 1],
        &xc[lo - 1..hi - 1],
        &xc[lo..hi],
        &xn[lo..hi],
        &xs[lo..hi],
    ]
}

/// Zeros a row outside the columns `lo..hi`.
#[inline]
pub(crate) fn zero_outside(out: &mut [f64], (lo, hi): (usize, usize)) {
    out[..lo].iter_mut().for_each(|v| *v = 0.0);
    out[hi..].iter_mut().for_each(|v| *v = 0.0);
}

/// Σ over the regular links of the neighbour values (east, west, north, south), the link
/// weights being the bits of the link mask taken as numbers.
#[inline(always)]
pub(crate) fn link_sum(links: u8, e: f64, w: f64, n: f64, s: f64) -> f64 {
    let bits = links as u32;
    (bits & 1) as f64 * e
        + ((bits >> 1) & 1) as f64 * w
        + ((bits >> 2) & 1) as f64 * n
        + ((bits >> 3) & 1) as f64 * s
}

/// 0/1 weights of the four regular links for each link mask (bits East, West, North, South).
pub(crate) const LINK_WEIGHTS: [[f64; 4]; 16] = {
    let mut t = [[0.0; 4]; 16];
    let mut m = 0;
    while m < 16 {
        let mut d = 0;
        while d < 4 {
            t[m][d] = ((m >> d) & 1) as f64;
            d += 1;
        }
        m += 1;
    }
    t
};

/// Right-hand side h²·f for the unit problem f = 1.
pub fn unit_rhs(c: &Classified, num: &Numbering) -> Vec<f64> {
    vec![c.grid.h * c.grid.h; num.len()]
}

/// Test cases shared by the unit tests of `operator` and `multigrid` (one place, so a change
/// of the geometry API touches one helper).
#[cfg(test)]
pub(crate) mod fixtures {
    use crate::geometry::{Primitive, Shape};
    use crate::grid::{classify, Classified, Grid};

    /// The unit disc with a straight slit (`center`, `size`, `angle`) cut out, classified on a
    /// grid of `cells` across.
    pub(crate) fn slit_disc(
        center: [f64; 2],
        size: [f64; 2],
        angle: f64,
        cells: usize,
    ) -> Classified {
        let s = Shape::new(
            vec![Primitive::Circle {
                center: [0.0, 0.0],
                radius: 1.0,
            }],
            vec![Primitive::Rect {
                center,
                size,
                corner_radius: 0.0,
                angle,
            }],
        );
        let (lo, hi) = s.bbox();
        classify(&s, Grid::covering(lo, hi, cells)).unwrap()
    }

    /// A rough, deterministic value in (−1, 1) for node k (`seed` picks the vector).
    pub(crate) fn rough(k: usize, seed: f64) -> f64 {
        ((k as f64 * 0.618 + seed).sin() * 1e3).fract()
    }
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

    /// A slit thinner than a cell leaves fluid on both sides of cut links (the thin nodes of
    /// [`GridOperator`]): the fast kernels must still give the assembled matrix's product
    /// ([`assemble`], the reference), and zero at solid nodes.
    #[test]
    fn thin_walls_match_the_assembled_matrix() {
        use super::fixtures::{rough as field, slit_disc};
        let c = slit_disc([0.3, 0.01], [1.2, 0.009], 0.2, 80);
        let a = GridOperator::new(&c);
        let thin: usize = (0..a.ny).map(|j| a.thin_in_row(j).len()).sum();
        assert!(thin > 10, "the slit should make thin nodes, got {thin}");
        let num = Numbering::new(&c);
        let csr = assemble(&c, &num);
        // A rough vector, zero at solid nodes.
        let mut x = vec![0.0; a.diag.len()];
        for k in num.nodes() {
            x[k] = field(k, 0.3);
        }
        let mut y = vec![0.0; x.len()];
        a.apply(&x, &mut y);
        let xu: Vec<f64> = num.nodes().map(|k| x[k]).collect();
        let mut yu = vec![0.0; xu.len()];
        LinearOperator::apply(&csr, &xu, &mut yu);
        for (q, k) in num.nodes().enumerate() {
            assert!(
                (y[k] - yu[q]).abs() <= 1e-12 * yu[q].abs().max(1.0),
                "node {k}"
            );
        }
        for (yk, d) in y.iter().zip(&a.diag) {
            if *d == 0.0 {
                assert_eq!(*yk, 0.0);
            }
        }
    }
}
