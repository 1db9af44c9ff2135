//! The discrete operators of a [`Problem`]: the CSR matrix (the reference path) and the
//! matrix-free grid operator (the multigrid path).
//!
//! Owns: the storage of the operator whose rows [`Problem::stencil`] defines (the cut-cell
//! scheme and its references are documented there), in two forms: sprs CSR over the unknowns,
//! and [`GridOperator`] over the whole grid. Every entry of either comes from
//! [`Problem::stencil`]; nothing here writes the scheme itself.
//! The grid operator has its own product A·x (the solver's [`LinearOperator`]) and the row
//! helpers `span_neighbours`, `zero_outside` and [`off_sum`] that the multigrid kernels
//! reuse.
//!
//! Invariant: knows nothing of files, of the iteration or of physical units beyond h. From
//! `solver` it takes only the `LinearOperator` trait and `dot4`.

use crate::grid::Dir;
use crate::problem::Problem;
pub use crate::problem::{Numbering, NO_UNKNOWN};
use crate::solver::{dot4, LinearOperator};
use sprs::CsMat;

/// Assembles the problem's matrix (rows of [`Problem::stencil`], scaled by h²) in CSR form,
/// rows sorted, diagonal included: unknowns are numbered row-major, so the columns of a row
/// come out sorted as South, West, self, East, North and no triplet sort is needed.
pub fn assemble(problem: &Problem, num: &Numbering) -> CsMat<f64> {
    let c = problem.classified;
    let n = num.len();
    let mut indptr = Vec::with_capacity(n + 1);
    let mut indices = Vec::with_capacity(5 * n);
    let mut data = Vec::with_capacity(5 * n);
    indptr.push(0);
    for (row, k) in num.nodes().enumerate() {
        let st = problem.stencil(k, row);
        // Dir::ALL order is east, west, north, south; columns go south, west, (self), east,
        // north.
        let column = |d: Dir| {
            let a = st.off[d as usize];
            (a != 0.0).then(|| {
                // A regular link always ends at a fluid node (see grid::classify).
                let col = num.unknown_of[c.grid.inner_neighbour(k, d)];
                debug_assert_ne!(col, NO_UNKNOWN);
                (col as usize, -a)
            })
        };
        for (col, v) in [column(Dir::South), column(Dir::West)]
            .into_iter()
            .flatten()
        {
            indices.push(col);
            data.push(v);
        }
        indices.push(row);
        data.push(st.diag);
        for (col, v) in [column(Dir::East), column(Dir::North)]
            .into_iter()
            .flatten()
        {
            indices.push(col);
            data.push(v);
        }
        indptr.push(indices.len());
    }
    CsMat::new((n, n), indptr, indices, data)
}

/// The same operator on the whole grid, matrix-free: the diagonal of every node (0 at solid
/// nodes) and, per node, a bit per direction for a nonzero off-diagonal. Vectors on it have
/// one entry per grid node, zero at solid nodes. Nine bytes a node instead of the CSR's sixty;
/// the path the multigrid solver takes.
///
/// The fast kernels do not read the link bits: they take every off-diagonal as −1 and sum all
/// four neighbours. A vector is zero at every solid node, so that is the exact row of every
/// node whose off-diagonals are −1 on its regular links, except
/// - a node whose cut link ends on a fluid node (a wall thinner than a cell, with fluid on
///   both sides), and
/// - a node whose off-diagonals are not all 1 (a coefficient k ≠ 1, or the face widths next to
///   a Robin or Neumann wall; see [`Problem::stencil`]).
///
/// Those irregular nodes are listed per row with their four off-diagonals
/// ([`GridOperator::irregular_in_row`]) and recomputed after each row; for the plain
/// Laplacian they are the few thin-wall nodes.
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
    /// Bit `Dir as u8` set: nonzero off-diagonal in that direction.
    pub links: Vec<u8>,
    /// Irregular nodes (see above), in index order, and their off-diagonals (as positive
    /// numbers, [`Dir::ALL`] order: the row is d·x_k − Σ a_d·x_(neighbour d)).
    irregular: Vec<u32>,
    irregular_off: Vec<[f64; 4]>,
    /// `irregular[irregular_rows[j]..irregular_rows[j + 1]]` lie in grid row j.
    irregular_rows: Vec<u32>,
    /// Per row, the columns `lo..hi` from the first to one past the last fluid node (`1..1`
    /// when the row has none).
    spans: Vec<(u32, u32)>,
    /// The diagonal each node would have with no cut links ([`Problem::regular_diag`]): None
    /// when it is 4 everywhere (the plain Laplacian).
    regular_diag: Option<Vec<f64>>,
    /// The diagonal of a node with four regular unit links, when every such node has the same
    /// one (4 for the plain Laplacian); None when it varies (a shift that varies per node).
    interior_diag: Option<f64>,
    /// The mean of c·h² over the fluid nodes (0 without a shift): how far the shift dominates
    /// the Laplacian, which the multigrid uses to stop coarsening (`Multigrid::new`).
    pub mean_shift: f64,
}

impl GridOperator {
    pub fn new(problem: &Problem, num: &Numbering) -> GridOperator {
        use rayon::prelude::*;
        let c = problem.classified;
        let n = c.grid.len();
        let nx = c.grid.nx;
        let mut diag = vec![0.0; n];
        let mut links = vec![0u8; n];
        let plain = problem.is_plain_laplacian();
        let mut regular_diag = if plain { None } else { Some(vec![0.0; n]) };
        type RowOut = (Vec<u32>, Vec<[f64; 4]>, (u32, u32));
        let per_row: Vec<RowOut> = diag
            .par_chunks_mut(nx)
            .zip(links.par_chunks_mut(nx))
            .zip(match &mut regular_diag {
                Some(r) => r.par_chunks_mut(nx).map(Some).collect::<Vec<_>>(),
                None => (0..c.grid.ny).map(|_| None).collect(),
            })
            .enumerate()
            .map(|(j, ((drow, lrow), mut rrow))| {
                let mut irregular = Vec::new();
                let mut irregular_off = Vec::new();
                let mut span: Option<(usize, usize)> = None;
                for i in 0..drow.len() {
                    let k = j * nx + i;
                    if !c.fluid[k] {
                        continue;
                    }
                    span = Some(span.map_or((i, i + 1), |(lo, _)| (lo, i + 1)));
                    let q = num.unknown_of[k] as usize;
                    let st = problem.stencil(k, q);
                    let mut mask = 0u8;
                    // Irregular: an off-diagonal other than 0 or 1, or a zero one towards a
                    // fluid node (the fast kernels would add that neighbour).
                    let mut odd = false;
                    for d in Dir::ALL {
                        let a = st.off[d as usize];
                        if a != 0.0 {
                            mask |= 1 << d as u8;
                            odd |= a != 1.0;
                        } else {
                            odd |= c.fluid[c.grid.inner_neighbour(k, d)];
                        }
                    }
                    drow[i] = st.diag;
                    lrow[i] = mask;
                    if let Some(r) = rrow.as_deref_mut() {
                        r[i] = problem.regular_diag(k, q);
                    }
                    if odd {
                        irregular.push(k as u32);
                        irregular_off.push(st.off);
                    }
                }
                // Fluid never lies on the solid ring, so 1 ≤ lo ≤ hi ≤ nx − 1.
                let (lo, hi) = span.unwrap_or((1, 1));
                (irregular, irregular_off, (lo as u32, hi as u32))
            })
            .collect();
        let mut irregular_rows = Vec::with_capacity(per_row.len() + 1);
        irregular_rows.push(0);
        let mut irregular = Vec::new();
        let mut irregular_off = Vec::new();
        let mut spans = Vec::with_capacity(per_row.len());
        for (nodes, off, span) in per_row {
            irregular.extend(nodes);
            irregular_off.extend(off);
            irregular_rows.push(irregular.len() as u32);
            spans.push(span);
        }
        let interior_diag = if problem.coefficients == crate::problem::Coefficients::Unit {
            problem.shift.uniform().map(|s| {
                if s == 0.0 {
                    4.0
                } else {
                    4.0 + s * c.grid.h * c.grid.h
                }
            })
        } else {
            None
        };
        let mean_shift = match problem.shift.uniform() {
            Some(v) => v * c.grid.h * c.grid.h,
            None if num.is_empty() => 0.0,
            None => {
                let h2 = c.grid.h * c.grid.h;
                (0..num.len()).map(|q| problem.shift.at(q)).sum::<f64>() * h2 / num.len() as f64
            }
        };
        GridOperator {
            nx,
            ny: c.grid.ny,
            diag,
            links,
            irregular,
            irregular_off,
            irregular_rows,
            spans,
            regular_diag,
            interior_diag,
            mean_shift,
        }
    }

    /// The columns `lo..hi` of grid row j that hold fluid: every node outside is solid (see
    /// [`GridOperator`]); `lo == hi` for a row without fluid.
    #[inline]
    pub fn row_span(&self, j: usize) -> (usize, usize) {
        let (lo, hi) = self.spans[j];
        (lo as usize, hi as usize)
    }

    /// The irregular nodes of grid row j (see [`GridOperator`]) with their off-diagonals.
    #[inline]
    pub fn irregular_in_row(&self, j: usize) -> impl Iterator<Item = (usize, &[f64; 4])> + '_ {
        let r = self.irregular_rows[j] as usize..self.irregular_rows[j + 1] as usize;
        self.irregular[r.clone()]
            .iter()
            .map(|&k| k as usize)
            .zip(&self.irregular_off[r])
    }

    /// The off-diagonals of node k ([`Dir::ALL`] order, as positive numbers).
    pub fn off_diagonals(&self, k: usize) -> [f64; 4] {
        let found = if self.irregular.is_empty() {
            Err(0)
        } else {
            self.irregular.binary_search(&(k as u32))
        };
        match found {
            Ok(at) => self.irregular_off[at],
            Err(_) => {
                let l = self.links[k];
                [0, 1, 2, 3].map(|d| ((l >> d) & 1) as f64)
            }
        }
    }

    /// Whether node k's row is an interior row: four regular links with off-diagonals 1 and
    /// the interior diagonal ([`GridOperator::interior_diag`]).
    pub fn is_interior(&self, k: usize) -> bool {
        self.links[k] == 15
            && Some(self.diag[k]) == self.interior_diag
            && (self.irregular.is_empty() || self.irregular.binary_search(&(k as u32)).is_err())
    }

    /// The diagonal node k would have with no cut links (4 for the plain Laplacian).
    #[inline]
    pub fn regular_diag(&self, k: usize) -> f64 {
        self.regular_diag.as_ref().map_or(4.0, |r| r[k])
    }

    /// The diagonal shared by every interior row, if it is shared (see [`GridOperator`]).
    pub fn interior_diag(&self) -> Option<f64> {
        self.interior_diag
    }
}

/// Σ_d a_d·v_d over the four neighbour values (east, west, north, south) of an irregular node:
/// the off-diagonal part of its row ([`GridOperator::irregular_in_row`]).
#[inline(always)]
pub fn off_sum(a: &[f64; 4], e: f64, w: f64, n: f64, s: f64) -> f64 {
    a[0] * e + a[1] * w + a[2] * n + a[3] * s
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
            let odd;
            let w = if self.irregular.is_empty() {
                &LINK_WEIGHTS[self.links[k] as usize]
            } else {
                odd = self.off_diagonals(k);
                &odd
            };
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
                for (k, a) in self.irregular_in_row(j) {
                    let s = off_sum(a, x[k + 1], x[k - 1], x[k + nx], x[k - nx]);
                    out[k - row] = self.diag[k] * x[k] - s;
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

    /// The matrix-free operator of the unit flow problem on `c`.
    pub(crate) fn laplace_operator(c: &Classified) -> super::GridOperator {
        let p = crate::problem::Problem::laplace(c);
        super::GridOperator::new(&p, &crate::problem::Numbering::new(c))
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
        let a = assemble(&Problem::laplace(&c), &num);
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
        let op = GridOperator::new(&Problem::laplace(&c), &Numbering::new(&c));
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
        let a = fixtures::laplace_operator(&c);
        let thin: usize = (0..a.ny).map(|j| a.irregular_in_row(j).count()).sum();
        assert!(thin > 10, "the slit should make thin nodes, got {thin}");
        let num = Numbering::new(&c);
        let csr = assemble(&Problem::laplace(&c), &num);
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
