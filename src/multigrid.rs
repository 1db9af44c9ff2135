//! Geometric multigrid with Galerkin coarse operators, as a preconditioner for CG.
//!
//! Owns: the level hierarchy built from the fine [`GridOperator`], the transfers, the smoother,
//! the coarsest solve and the V-cycle; it implements the solver's [`Preconditioner`] (and
//! [`LinearOperator`] for the fine operator), so CG sees only the two traits.
//!
//! The parts (Trottenberg, Oosterlee & Schüller, *Multigrid*, 2001, ch. 2 and 7; the Galerkin
//! product as in algebraic multigrid, Ruge & Stüben 1987):
//! - **Coarsening**: vertex-centred, coarse node (I, J) sits on fine node (2I, 2J).
//! - **Prolongation P**: bilinear interpolation from the (up to four) coarse parents of a fine
//!   node, restricted to the fluid, with the rows of wall nodes scaled by 4/d ([`pscale_of`]);
//!   a coarse node exists where at least one fine fluid node interpolates from it.
//!   **Restriction R = Pᵀ.**
//! - **Level operators**: A_c = Pᵀ·A·P (Galerkin), a 9-point stencil on every coarse level.
//!   Nothing of the geometry is re-discretised, so a gap thinner than the coarse spacing, a
//!   fin or a tiny passage stays exactly as the fine operator has it.
//! - **Smoother**: on the fine level one red–black Gauss–Seidel sweep before the coarse
//!   correction and one in the reverse colour order after it, done in two streaming passes
//!   over the grid with the residual, the transfers and r·z (`fine_pre`, `fine_post`); on the
//!   coarse levels a banded lexicographic sweep (bands in parallel, then the separator rows
//!   between them) forward before and backward after. Post-smoothing is the adjoint of
//!   pre-smoothing and the restricted residual uses the smoother's own diagonal, so the V-cycle
//!   is a symmetric positive definite operator, as CG requires (symmetric to round-off; tested).
//! - **Storage**: the fine level is the matrix-free [`GridOperator`] (diagonal and a link
//!   bitmask per node); each coarse level stores every distinct stencil once with a 4-byte index
//!   per node (see [`Level`]), and nearly all of its rows are the interior stencil, which the
//!   sweeps apply from registers.
//! - **Coarsest level**: dense Cholesky (nalgebra) once the level is small ([`Coarsest`]); a
//!   level it cannot factor is an [`Error::Numerical`] from [`Multigrid::new`], not a panic.
//!
//! Invariant: knows the grid's index layout, nothing of geometry or physics.

use crate::error::{Error, Result};
use crate::operator::GridOperator;
use crate::solver::{dot4, LinearOperator, Preconditioner, BLOCK};
use nalgebra::{Cholesky, DMatrix, DVector, Dyn};
use std::sync::Mutex;

/// Offsets of the 9-point stencil, index o = (dj + 1)·3 + (di + 1).
const OFFSETS: [(isize, isize); 9] = [
    (-1, -1),
    (0, -1),
    (1, -1),
    (-1, 0),
    (0, 0),
    (1, 0),
    (-1, 1),
    (0, 1),
    (1, 1),
];
const CENTRE: usize = 4;

/// Coarsest levels at or below this many active nodes are solved directly.
const DIRECT_LIMIT: usize = 400;

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
fn span_neighbours<'x>(
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
fn zero_outside(out: &mut [f64], (lo, hi): (usize, usize)) {
    out[..lo].iter_mut().for_each(|v| *v = 0.0);
    out[hi..].iter_mut().for_each(|v| *v = 0.0);
}

/// Σ over the regular links of the neighbour values (east, west, north, south), the link
/// weights being the bits of the link mask taken as numbers.
#[inline(always)]
fn link_sum(links: u8, e: f64, w: f64, n: f64, s: f64) -> f64 {
    let bits = links as u32;
    (bits & 1) as f64 * e
        + ((bits >> 1) & 1) as f64 * w
        + ((bits >> 2) & 1) as f64 * n
        + ((bits >> 3) & 1) as f64 * s
}

/// One coarse level: a 9-point stencil per node of an nx × ny grid (zero rows where inactive).
///
/// The stencils are stored once each: `ids[k]` indexes `table`. Away from the walls every
/// Galerkin stencil of a level is the same (the product of the same arithmetic on the same
/// numbers, bit for bit), so the table holds one entry for the whole interior plus one per node
/// near a wall, and a sweep reads 4 bytes per node instead of 72: the coarse levels are bound
/// by memory traffic, so this is what they cost.
struct Level {
    nx: usize,
    ny: usize,
    active: Vec<bool>,
    ids: Vec<u32>,
    /// Distinct stencils; entry 0 is the all-zero row of inactive nodes.
    table: Vec<[f64; 9]>,
    /// 1/diagonal of each table entry, 0 for entry 0 (so the smoother needs no branch).
    inv_table: Vec<f64>,
    /// Per row, the columns lo..hi from its first to its last active node ((1, 1) when it has
    /// none), and the columns inside them whose stencil is not the interior one:
    /// `odd_cols[odd_start[j]..odd_start[j + 1]]` (for the sweeps, [`sweep_row`]).
    spans: Vec<(u32, u32)>,
    odd_start: Vec<u32>,
    odd_cols: Vec<u32>,
    /// [`interior_parts`] of the table, found once at setup.
    interior: Option<Interior>,
}

/// The interior stencil of a level as (N/S edge, E/W edge, corner, centre, 1/centre).
type Interior = (f64, f64, f64, f64, f64);

/// The interior stencil's parts when it has the symmetry of a Galerkin product of the 5-point
/// operator (it does; checked rather than assumed) and a nonzero centre, else None (a level
/// without interior nodes).
fn interior_parts(table: &[[f64; 9]], inv_table: &[f64]) -> Option<Interior> {
    let r = table.get(REGULAR_ID as usize)?;
    let symmetric = r[1] == r[7] && r[3] == r[5] && r[0] == r[2] && r[0] == r[6] && r[0] == r[8];
    (symmetric && r[CENTRE] != 0.0)
        .then(|| (r[1], r[3], r[0], r[CENTRE], inv_table[REGULAR_ID as usize]))
}

impl Level {
    fn len(&self) -> usize {
        self.nx * self.ny
    }
    #[inline]
    fn st(&self, k: usize) -> &[f64; 9] {
        &self.table[self.ids[k] as usize]
    }
    /// The interior stencil's parts ([`interior_parts`]), for the fast paths of the sweeps and
    /// the residual.
    #[inline]
    fn regular_parts(&self) -> Option<Interior> {
        self.interior
    }
    fn active_count(&self) -> usize {
        self.active.iter().filter(|&&a| a).count()
    }
}

/// Access to the entries of a level's operator, fine or coarse, for the Galerkin product.
trait StencilRows {
    fn nx(&self) -> usize;
    fn ny(&self) -> usize;
    fn is_active(&self, k: usize) -> bool;
    /// Row k as a 9-point stencil (zeros where there is no entry).
    fn row(&self, k: usize) -> [f64; 9];
    /// Per node: active, and regular (an interior node with the level's standard stencil and
    /// a prolongation row scale of 1; a conservative test: false is always safe).
    fn masks(&self) -> (Vec<bool>, Vec<bool>);
}

/// Row scale of the prolongation at a fine node with diagonal d: min(1, 4/d).
///
/// Next to a wall that cuts a link at θ·h the diagonal is 3 + 1/θ > 4 and the node is tied to
/// the wall value 0; bilinear interpolation from coarse nodes (some of them beyond the wall)
/// overstates the smooth error there, and the coarse correction loses accuracy along curved
/// walls (measured: CG iterations on a disc grew from 11 to 16 between 128 and 2048 cells).
/// Scaling those rows of P by 4/d, the ratio of a regular node's diagonal to this one, is a
/// matrix-dependent prolongation (in the spirit of Alcouffe, Brandt, Dendy & Painter 1981 and de
/// Zeeuw 1990, from memory) reduced to a row scaling, so the coarse operators stay 9-point and
/// R = Pᵀ keeps the V-cycle symmetric. With it the count stays at 10–11 from 128 to 2048 cells.
fn pscale_of(d: f64) -> f64 {
    if d > 4.0 {
        4.0 / d
    } else {
        1.0
    }
}

impl StencilRows for GridOperator {
    fn nx(&self) -> usize {
        self.nx
    }
    fn ny(&self) -> usize {
        self.ny
    }
    fn is_active(&self, k: usize) -> bool {
        self.diag[k] != 0.0
    }
    fn masks(&self) -> (Vec<bool>, Vec<bool>) {
        use rayon::prelude::*;
        let active = self.diag.par_iter().map(|&d| d != 0.0).collect();
        let regular = self
            .diag
            .par_iter()
            .zip(&self.links)
            .map(|(&d, &l)| l == 15 && d == 4.0)
            .collect();
        (active, regular)
    }
    fn row(&self, k: usize) -> [f64; 9] {
        let w = &LINK_WEIGHTS[self.links[k] as usize];
        let mut r = [0.0; 9];
        r[CENTRE] = self.diag[k];
        r[5] = -w[0];
        r[3] = -w[1];
        r[7] = -w[2];
        r[1] = -w[3];
        r
    }
}

impl StencilRows for Level {
    fn nx(&self) -> usize {
        self.nx
    }
    fn ny(&self) -> usize {
        self.ny
    }
    fn is_active(&self, k: usize) -> bool {
        self.active[k]
    }
    fn row(&self, k: usize) -> [f64; 9] {
        *self.st(k)
    }
    fn masks(&self) -> (Vec<bool>, Vec<bool>) {
        let regular = self.ids.iter().map(|&id| id == REGULAR_ID).collect();
        (self.active.clone(), regular)
    }
}

/// Bilinear parents of fine index i along one axis: (coarse index, weight), one or two.
///
/// Every grid carries a solid ring (index 0 and n − 1), so the inner nodes i = 1..n − 2 are
/// mapped as t = i − 1 onto coarse inner nodes T = t/2 (t even, weight 1) or T = (t ± 1)/2
/// (t odd, weight ½ each), coarse index I = T + 1; the coarse grid has n/2 + 2 nodes and its
/// own solid ring.
#[inline]
fn parents(i: usize) -> ([(usize, f64); 2], usize) {
    if i % 2 == 1 {
        ([(i.div_ceil(2), 1.0), (0, 0.0)], 1)
    } else {
        ([(i / 2, 0.5), (i / 2 + 1, 0.5)], 2)
    }
}

/// Coarse size of a fine size (both with their rings).
fn coarse_size(n: usize) -> usize {
    n / 2 + 2
}

/// Table index of the interior stencil of a coarse level (0 is the zero row of inactive nodes).
const REGULAR_ID: u32 = 1;

/// Row C of the Galerkin product Pᵀ·A·P, gathered: Σ_f P[f, C] Σ_g A[f, g] P[g, C'] over the
/// (up to nine) fine nodes f that interpolate from C and their stencil neighbours g, added into
/// the entry of each coarse parent C' of g. Coarse node (I, J) sits on fine node
/// (2I − 1, 2J − 1) (see [`parents`]); C' is always within one coarse cell of C. The sums run in
/// a fixed order, so the row depends only on the fine data around it, bit for bit.
fn galerkin_row(
    fine: &(dyn StencilRows + Sync),
    scale: Option<&[f32]>,
    ci: usize,
    cj: usize,
) -> [f64; 9] {
    let sc = |k: usize| scale.map_or(1.0, |s| s[k] as f64);
    let (fnx, fny) = (fine.nx(), fine.ny());
    let mut row = [0.0f64; 9];
    let (fi0, fj0) = (2 * ci as isize - 1, 2 * cj as isize - 1);
    for dfj in -1..=1isize {
        let fj = fj0 + dfj;
        if fj < 1 || fj as usize >= fny - 1 {
            continue;
        }
        let wj = if dfj == 0 { 1.0 } else { 0.5 };
        for dfi in -1..=1isize {
            let fi = fi0 + dfi;
            if fi < 1 || fi as usize >= fnx - 1 {
                continue;
            }
            let k = fj as usize * fnx + fi as usize;
            if !fine.is_active(k) {
                continue;
            }
            let wi = if dfi == 0 { 1.0 } else { 0.5 };
            let pf = wi * wj * sc(k);
            let entries = fine.row(k);
            for (o, &(di, dj)) in OFFSETS.iter().enumerate() {
                let a = entries[o];
                if a == 0.0 {
                    continue;
                }
                let (gi, gj) = ((fi + di) as usize, (fj + dj) as usize);
                let w = pf * a * sc(gj * fnx + gi);
                let (qi, ni) = parents(gi);
                let (qj, nj) = parents(gj);
                for &(c2j, w2j) in &qj[..nj] {
                    for &(c2i, w2i) in &qi[..ni] {
                        let oo = (c2j + 1 - cj) * 3 + (c2i + 1 - ci);
                        row[oo] += w * w2i * w2j;
                    }
                }
            }
        }
    }
    row
}

/// The Galerkin coarse level Pᵀ·A·P of a fine level; `scale` holds the row scales of P (None:
/// all 1).
///
/// Coarse rows are gathered in parallel ([`galerkin_row`]). A coarse node whose surroundings
/// are regular (nearly all of them, away from the walls) gets the interior stencil, computed
/// once by the same gather at the first such node, so only the rows near walls are computed
/// one by one; the distinct ones are then stored once each (see [`Level`]). The result does not
/// depend on the number of threads.
fn coarsen(fine: &(dyn StencilRows + Sync), scale: Option<&[f32]>) -> Level {
    use rayon::prelude::*;
    let (fnx, fny) = (fine.nx(), fine.ny());
    let (nx, ny) = (coarse_size(fnx), coarse_size(fny));
    // A coarse node is active when a fine active node interpolates from it: one in the 3 × 3
    // block around the fine node (2I − 1, 2J − 1) it sits on. It is regular when every fine node
    // in the 5 × 5 block around that node is regular (then its Galerkin row is the level's
    // interior stencil). Both tests separably: per fine row and coarse column first (`h_act`,
    // `h_reg`), then down the coarse column.
    let (act, reg) = fine.masks();
    let mut h_act = vec![false; fny * nx];
    let mut h_reg = vec![false; fny * nx];
    h_act
        .par_chunks_mut(nx)
        .zip(h_reg.par_chunks_mut(nx))
        .enumerate()
        .for_each(|(fj, (ha, hr))| {
            let (a, r) = (
                &act[fj * fnx..(fj + 1) * fnx],
                &reg[fj * fnx..(fj + 1) * fnx],
            );
            for ci in 1..nx - 1 {
                let fi0 = 2 * ci - 1;
                ha[ci] = (fi0.saturating_sub(1).max(1)..=(fi0 + 1).min(fnx - 2)).any(|fi| a[fi]);
                hr[ci] = fi0 >= 3 && fi0 + 3 < fnx && r[fi0 - 2..=fi0 + 2].iter().all(|&v| v);
            }
        });
    let is_active = |ci: usize, cj: usize| -> bool {
        let fj0 = 2 * cj - 1;
        (fj0.saturating_sub(1).max(1)..=(fj0 + 1).min(fny - 2)).any(|fj| h_act[fj * nx + ci])
    };
    let coarse_is_regular = |ci: usize, cj: usize| -> bool {
        let fj0 = 2 * cj - 1;
        fj0 >= 3 && fj0 + 3 < fny && (fj0 - 2..=fj0 + 2).all(|fj| h_reg[fj * nx + ci])
    };
    let interior = (1..ny - 1)
        .flat_map(|cj| (1..nx - 1).map(move |ci| (ci, cj)))
        .find(|&(ci, cj)| coarse_is_regular(ci, cj))
        .map(|(ci, cj)| galerkin_row(fine, scale, ci, cj));
    // Per coarse row: active flags, ids (REGULAR_ID, 0, or u32::MAX = to be looked up) and the
    // irregular stencils in order.
    type RowOut = (Vec<bool>, Vec<u32>, Vec<(usize, [f64; 9])>);
    let rows: Vec<RowOut> = (0..ny)
        .into_par_iter()
        .map(|cj| {
            let mut active = vec![false; nx];
            let mut ids = vec![0u32; nx];
            let mut odd = Vec::new();
            if cj == 0 || cj + 1 == ny {
                return (active, ids, odd);
            }
            for ci in 1..nx - 1 {
                if !is_active(ci, cj) {
                    continue;
                }
                active[ci] = true;
                if interior.is_some() && coarse_is_regular(ci, cj) {
                    ids[ci] = REGULAR_ID;
                } else {
                    ids[ci] = u32::MAX;
                    odd.push((ci, galerkin_row(fine, scale, ci, cj)));
                }
            }
            (active, ids, odd)
        })
        .collect();
    // Store each distinct stencil once (bitwise equality), in row order.
    let mut table = vec![[0.0f64; 9], interior.unwrap_or([0.0; 9])];
    let mut index = std::collections::HashMap::new();
    if let Some(st) = interior {
        index.insert(st.map(f64::to_bits), REGULAR_ID);
    }
    let mut active = Vec::with_capacity(nx * ny);
    let mut ids = Vec::with_capacity(nx * ny);
    for (a, mut id, odd) in rows {
        for (ci, st) in odd {
            id[ci] = *index.entry(st.map(f64::to_bits)).or_insert_with(|| {
                table.push(st);
                (table.len() - 1) as u32
            });
        }
        active.extend(a);
        ids.extend(id);
    }
    let inv_table: Vec<f64> = table
        .iter()
        .map(|st| {
            if st[CENTRE] != 0.0 {
                1.0 / st[CENTRE]
            } else {
                0.0
            }
        })
        .collect();
    let (spans, odd_start, odd_cols) = row_index(nx, ny, &active, &ids);
    let interior = interior_parts(&table, &inv_table);
    Level {
        nx,
        ny,
        active,
        ids,
        table,
        inv_table,
        spans,
        odd_start,
        odd_cols,
        interior,
    }
}

/// The row spans and the odd columns of a level (see [`Level`]).
type RowIndex = (Vec<(u32, u32)>, Vec<u32>, Vec<u32>);

fn row_index(nx: usize, ny: usize, active: &[bool], ids: &[u32]) -> RowIndex {
    let mut spans = Vec::with_capacity(ny);
    let mut odd_start = Vec::with_capacity(ny + 1);
    let mut odd_cols = Vec::new();
    for j in 0..ny {
        odd_start.push(odd_cols.len() as u32);
        let row = &active[j * nx..(j + 1) * nx];
        let (lo, hi) = match (row.iter().position(|&a| a), row.iter().rposition(|&a| a)) {
            (Some(lo), Some(last)) => (lo, last + 1),
            _ => (1, 1),
        };
        spans.push((lo as u32, hi as u32));
        let row_ids = &ids[j * nx..(j + 1) * nx];
        odd_cols.extend(
            (lo..hi)
                .filter(|&i| row_ids[i] != REGULAR_ID)
                .map(|i| i as u32),
        );
    }
    odd_start.push(odd_cols.len() as u32);
    (spans, odd_start, odd_cols)
}

/// The coarsest level's direct solve: the dense Cholesky factor of its operator and the grid
/// indices of its unknowns (its active nodes, in index order).
struct Coarsest {
    chol: Cholesky<f64, Dyn>,
    idx: Vec<usize>,
}

impl Coarsest {
    /// Assembles the level's operator densely and factors it.
    ///
    /// # Errors
    /// [`Error::Numerical`] when the factorisation breaks down (a pivot that is not positive):
    /// the Galerkin product of a symmetric positive definite operator is positive semidefinite,
    /// and the shift below makes it definite, so this means round-off or a bug has made the
    /// level indefinite, which the V-cycle cannot work with.
    fn new(l: &Level) -> Result<Coarsest> {
        let idx: Vec<usize> = (0..l.len()).filter(|&k| l.active[k]).collect();
        let mut pos = vec![usize::MAX; l.len()];
        for (q, &k) in idx.iter().enumerate() {
            pos[k] = q;
        }
        let n = idx.len();
        let mut m = DMatrix::<f64>::zeros(n, n);
        let mut max_diag: f64 = 0.0;
        for (q, &k) in idx.iter().enumerate() {
            let (i, j) = (k % l.nx, k / l.nx);
            for (o, &(di, dj)) in OFFSETS.iter().enumerate() {
                let v = l.st(k)[o];
                if v == 0.0 {
                    continue;
                }
                let kk = (j as isize + dj) as usize * l.nx + (i as isize + di) as usize;
                m[(q, pos[kk])] += v;
            }
            max_diag = max_diag.max(l.st(k)[CENTRE]);
        }
        // A tiny shift keeps the factorisation defined if bilinear columns restricted to a
        // sliver of fluid became linearly dependent (a null direction of Aᶜ is one P maps to
        // zero, so the shift never reaches the fine grid).
        for q in 0..n {
            m[(q, q)] += 1e-13 * max_diag;
        }
        let chol = Cholesky::new(m).ok_or_else(|| {
            Error::Numerical(format!(
                "the multigrid preconditioner's coarsest level ({n} unknowns on a {} × {} grid) \
                 is not positive definite, so its Cholesky factorisation failed; the Jacobi \
                 method (--method jacobi) does not need it",
                l.nx, l.ny
            ))
        })?;
        Ok(Coarsest { chol, idx })
    }

    /// x = A_c⁻¹·b on the level's grid vectors (x zero at inactive nodes).
    fn solve(&self, b: &[f64], x: &mut [f64]) {
        let (chol, idx) = (&self.chol, &self.idx);
        let rhs = DVector::from_iterator(idx.len(), idx.iter().map(|&k| b[k]));
        let sol = chol.solve(&rhs);
        x.iter_mut().for_each(|v| *v = 0.0);
        for (q, &k) in idx.iter().enumerate() {
            x[k] = sol[q];
        }
    }
}

/// Scratch vectors: the halo rows of the fine level's second pass, the x-restricted rows and
/// each coarse level's solution and right-hand side.
struct Scratch {
    /// The rows of x next to each block boundary of the fine level's second pass.
    halo: Vec<f64>,
    tmp: Vec<f64>,
    x: Vec<Vec<f64>>,
    b: Vec<Vec<f64>>,
}

/// The multigrid V-cycle preconditioner. Built once from the fine operator (setup), applied
/// once per CG iteration.
pub struct Multigrid<'a> {
    fine: &'a GridOperator,
    /// 1/d on the fine level, 0 at solid nodes, in single precision: the smoother is then
    /// Gauss–Seidel for the matrix A′ whose diagonal is d′ = 1/fl(1/d), a relative change below
    /// 6e-8 (it saves 4 bytes a node in each pass). The fine residual that is restricted is
    /// b − A′·x, the smoother's own matrix, which keeps the V-cycle exactly a symmetric
    /// operator (with the exact A there the cycle's asymmetry was measured at 2e-9, the order
    /// of d′ − d; the V-cycle then approximates A′⁻¹, a preconditioner for A as good as A⁻¹'s
    /// approximation). d′ is recomputed from this vector where the residual needs it
    /// ([`diag_of_inv`]) rather than stored: 10 MB fewer to fault in at a million unknowns and
    /// 8 bytes a node fewer read per V-cycle, for one division a node.
    inv_diag: Vec<f32>,
    /// Row scales of P on the fine level ([`pscale_of`], 0 at solid nodes), rounded to single
    /// precision; the Galerkin product uses the same rounded numbers, so R = Pᵀ holds exactly.
    fine_scale: Vec<f32>,
    /// masks[l]: 1 at the active nodes of coarse level l, 0 elsewhere (the row scales of its P),
    /// one byte a node (exact as numbers, an eighth of the memory of f64).
    masks: Vec<Vec<u8>>,
    levels: Vec<Level>,
    /// The dense Cholesky factor of the coarsest level; None when there is only the fine level
    /// and it is solved by smoothing alone.
    coarsest: Option<Coarsest>,
    scratch: Mutex<Scratch>,
}

impl<'a> Multigrid<'a> {
    /// Builds the hierarchy: coarsen until a level has at most [`DIRECT_LIMIT`] active nodes or
    /// cannot shrink, then factor that level.
    ///
    /// # Errors
    /// [`Error::Numerical`] when the coarsest level's Galerkin operator is not numerically
    /// positive definite, so its Cholesky factorisation breaks down.
    pub fn new(fine: &'a GridOperator) -> Result<Multigrid<'a>> {
        use rayon::prelude::*;
        // The fine level's per-node numbers in one pass: row scale of P, 1/d.
        let n = fine.diag.len();
        let (mut fine_scale, mut inv_diag) = (vec![0.0f32; n], vec![0.0f32; n]);
        fine_scale
            .par_chunks_mut(BLOCK)
            .zip(inv_diag.par_chunks_mut(BLOCK))
            .zip(fine.diag.par_chunks(BLOCK))
            .for_each(|((sc, inv), d)| {
                for i in 0..d.len() {
                    if d[i] != 0.0 {
                        sc[i] = pscale_of(d[i]) as f32;
                        inv[i] = (1.0 / d[i]) as f32;
                    }
                }
            });
        let fine_count = fine.diag.par_iter().filter(|&&d| d != 0.0).count();
        let mut levels: Vec<Level> = Vec::new();
        loop {
            let (nx, ny, count) = match levels.last() {
                None => (fine.nx, fine.ny, fine_count),
                Some(l) => (l.nx, l.ny, l.active_count()),
            };
            if count <= DIRECT_LIMIT || coarse_size(nx) >= nx || coarse_size(ny) >= ny {
                break;
            }
            let next = match levels.last() {
                None => coarsen(fine, Some(&fine_scale)),
                Some(l) => coarsen(l, None),
            };
            levels.push(next);
        }
        let coarsest = levels.last().map(Coarsest::new).transpose()?;
        let scratch = Scratch {
            halo: Vec::new(),
            tmp: Vec::with_capacity(fine.diag.len() / 2 + 4 * fine.ny),
            x: levels.iter().map(|l| vec![0.0; l.len()]).collect(),
            b: levels.iter().map(|l| vec![0.0; l.len()]).collect(),
        };
        let mut masks = Vec::new();
        for l in &levels {
            masks.push(l.active.iter().map(|&a| u8::from(a)).collect());
        }
        Ok(Multigrid {
            fine,
            inv_diag,
            fine_scale,
            masks,
            levels,
            coarsest,
            scratch: Mutex::new(scratch),
        })
    }

    /// Number of levels including the fine one.
    pub fn depth(&self) -> usize {
        self.levels.len() + 1
    }

    /// Grid nodes held by the coarse levels (for memory accounting).
    pub fn coarse_nodes(&self) -> usize {
        self.levels.iter().map(|l| l.len()).sum()
    }
}

/// 0/1 weights of the four regular links for each link mask (bits East, West, North, South).
const LINK_WEIGHTS: [[f64; 4]; 16] = {
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

/// The fine level's part of the V-cycle, done in two streaming passes over the grid instead of
/// six (the fine level is about three quarters of the V-cycle's memory traffic):
///
/// 1. [`fine_pre`]: red–black Gauss–Seidel from x = 0 (red nodes, (i + j) even, get b/d; black
///    nodes then (b + Σ red neighbours)/d), the residual b − A·x it leaves, scaled by the rows
///    of P, and its restriction along x.
/// 2. [`fine_post`]: x += P·x_c, then the black half-sweep and the red half-sweep (the reverse
///    colour order, so post-smoothing is the adjoint of pre-smoothing and the V-cycle stays
///    symmetric), and r·z.
///
/// Each half-sweep reads the values of the other colour only, so it is a pure function of the
/// previous stage: a pass carries a few rows of each stage in ring buffers, each task
/// recomputes the rows just outside its block that it needs, and every row is the same
/// contiguous loop over the row's fluid span that updates every node, followed by a stride-2
/// loop that puts the old values of the other colour back ([`half_sweep_row`]: the first loop
/// vectorises, a select per node did not; callgrind: 20 % fewer instructions in the pass).
/// The numbers are those of the in-place red–black sweeps. Pass 1 writes the pre-smoothed x
/// into the output vector z and pass 2 turns it into z in place, with the rows next to each
/// block boundary copied aside first, so the V-cycle keeps no fine-level vector of its own.
///
/// This constant is the rows per task of the two passes (a fixed number, so the work split,
/// and with it nothing of the result, depends on the number of threads).
const FINE_BLOCK: usize = 32;

/// The fine level's arrays, as the passes read them.
struct Fine<'a> {
    a: &'a GridOperator,
    /// 1/d in single precision (see [`Multigrid`]).
    inv: &'a [f32],
    /// Row scales of P.
    scale: &'a [f32],
}

/// A pre-smoothed row j of x (1 ≤ j ≤ ny − 2) from zero, straight from b and 1/d.
#[inline]
fn presmooth_row(f: &Fine, b: &[f64], j: usize, out: &mut [f64]) {
    let (a, inv) = (f.a, f.inv);
    let nx = a.nx;
    let row = j * nx;
    let t = |k: usize| b[k] * inv[k] as f64;
    let (lo, hi) = a.row_span(j);
    let m = hi - lo;
    let (bs, bc, bn) = (
        &b[row - nx + lo..row - nx + hi],
        &b[row..row + nx],
        &b[row + nx + lo..row + nx + hi],
    );
    let (is, ic, inn) = (
        &inv[row - nx + lo..row - nx + hi],
        &inv[row..row + nx],
        &inv[row + nx + lo..row + nx + hi],
    );
    let (be, bw, bm) = (&bc[lo + 1..hi + 1], &bc[lo - 1..hi - 1], &bc[lo..hi]);
    let (ie, iw, im) = (&ic[lo + 1..hi + 1], &ic[lo - 1..hi - 1], &ic[lo..hi]);
    let o = &mut out[lo..hi];
    // Every node as black (a loop that vectorises), then the red ones put right: node lo + i is
    // red when (lo + i + j) is even, so the red ones start at i = `first_red`.
    let (bs, bn, be, bw, bm) = (&bs[..m], &bn[..m], &be[..m], &bw[..m], &bm[..m]);
    let (is, inn, ie, iw, im, o) = (
        &is[..m],
        &inn[..m],
        &ie[..m],
        &iw[..m],
        &im[..m],
        &mut o[..m],
    );
    for i in 0..m {
        let sum = (be[i] * ie[i] as f64 + bw[i] * iw[i] as f64)
            + (bn[i] * inn[i] as f64 + bs[i] * is[i] as f64);
        o[i] = (bm[i] + sum) * im[i] as f64;
    }
    let first_red = usize::from(!(lo + j).is_multiple_of(2));
    for i in (first_red..m).step_by(2) {
        o[i] = bm[i] * im[i] as f64;
    }
    zero_outside(out, (lo, hi));
    for &k in a.thin_in_row(j) {
        let k = k as usize;
        if (k - row + j) % 2 == 1 {
            let s = link_sum(a.links[k], t(k + 1), t(k - 1), t(k + nx), t(k - nx));
            out[k - row] = (b[k] + s) * inv[k] as f64;
        }
    }
}

/// One half-sweep of colour `colour` ((i + j) mod 2) on row j: from the rows south, centre and
/// north of x before the half-sweep, the row after it. Nodes of the colour get
/// (b + Σ neighbours)/d, the others keep their value; thin nodes are recomputed from the link
/// bits.
#[inline]
fn half_sweep_row(
    f: &Fine,
    b: &[f64],
    j: usize,
    colour: usize,
    (xs, xc, xn): (&[f64], &[f64], &[f64]),
    out: &mut [f64],
) {
    let (a, inv) = (f.a, f.inv);
    let nx = a.nx;
    let row = j * nx;
    let (lo, hi) = a.row_span(j);
    let m = hi - lo;
    let [e, w, c, n, s] = span_neighbours((xs, xc, xn), (lo, hi));
    let (bb, ii) = (&b[row + lo..row + hi], &inv[row + lo..row + hi]);
    let o = &mut out[lo..hi];
    // Every node updated (a loop that vectorises), then the other colour put back: node lo + i
    // has the colour when (lo + i + j) % 2 == colour, so the other colour starts at i = `other`.
    let (e, w, n, s) = (&e[..m], &w[..m], &n[..m], &s[..m]);
    let (bb, ii, o) = (&bb[..m], &ii[..m], &mut o[..m]);
    for i in 0..m {
        o[i] = (bb[i] + ((e[i] + w[i]) + (n[i] + s[i]))) * ii[i] as f64;
    }
    let other = usize::from((lo + j) % 2 == colour);
    for i in (other..m).step_by(2) {
        o[i] = c[i];
    }
    zero_outside(out, (lo, hi));
    for &k in a.thin_in_row(j) {
        let (k, i) = (k as usize, k as usize - row);
        if (i + j) % 2 == colour {
            let sum = link_sum(a.links[k], xc[i + 1], xc[i - 1], xn[i], xs[i]);
            out[i] = (b[k] + sum) * inv[k] as f64;
        }
    }
}

/// Row j of the fine residual r = b − A·x, scaled by the row scales of P (`scale`), which is
/// what Pᵀ needs; zero at solid nodes and on the ring.
#[inline]
fn residual_row_fine(
    f: &Fine,
    b: &[f64],
    j: usize,
    (xs, xc, xn): (&[f64], &[f64], &[f64]),
    r: &mut [f64],
) {
    let (a, scale) = (f.a, f.scale);
    let nx = a.nx;
    let row = j * nx;
    let (lo, hi) = a.row_span(j);
    let m = hi - lo;
    let [e, w, c, n, s] = span_neighbours((xs, xc, xn), (lo, hi));
    let (bb, inv, sc) = (
        &b[row + lo..row + hi],
        &f.inv[row + lo..row + hi],
        &scale[row + lo..row + hi],
    );
    let o = &mut r[lo..hi];
    for i in 0..m {
        let ax = diag_of_inv(inv[i]) * c[i] - ((e[i] + w[i]) + (n[i] + s[i]));
        o[i] = (bb[i] - ax) * sc[i] as f64;
    }
    zero_outside(&mut r[..nx], (lo, hi));
    for &k in a.thin_in_row(j) {
        let (k, i) = (k as usize, k as usize - row);
        let sum = link_sum(a.links[k], xc[i + 1], xc[i - 1], xn[i], xs[i]);
        r[i] = (b[k] - (diag_of_inv(f.inv[k]) * xc[i] - sum)) * scale[k] as f64;
    }
}

/// d′ = 1/fl(1/d) from the stored single-precision 1/d, 0 at solid nodes (where 1/d is
/// stored as 0); a select rather than a branch.
#[inline(always)]
fn diag_of_inv(inv: f32) -> f64 {
    let d = 1.0 / inv as f64;
    if inv != 0.0 {
        d
    } else {
        0.0
    }
}

thread_local! {
    /// Row buffers of the fine passes, kept per thread from one pass to the next.
    static BUFFERS: std::cell::RefCell<Vec<Vec<f64>>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// A scratch vector of arbitrary (finite) contents from a per-thread pool, given back when
/// dropped. Each block of a fine pass needs a few rows of scratch; allocating them afresh cost
/// a page-faulted, zeroed allocation per block once rows passed glibc's mmap threshold
/// (measured at 4096 cells: the solve took 8.3 s instead of 6.4 s).
struct Buffer(Vec<f64>);

impl Buffer {
    fn take(len: usize) -> Buffer {
        let mut v = BUFFERS.with(|b| b.borrow_mut().pop()).unwrap_or_default();
        v.resize(len, 0.0);
        Buffer(v)
    }
}

impl Drop for Buffer {
    fn drop(&mut self) {
        let v = std::mem::take(&mut self.0);
        // During thread teardown the pool may be gone; the vector is then simply freed.
        let _ = BUFFERS.try_with(|b| b.borrow_mut().push(v));
    }
}

impl std::ops::Deref for Buffer {
    type Target = [f64];
    fn deref(&self) -> &[f64] {
        &self.0
    }
}

impl std::ops::DerefMut for Buffer {
    fn deref_mut(&mut self) -> &mut [f64] {
        &mut self.0
    }
}

/// Ring buffer of a few consecutive rows of one stage of a fine pass, row m in slot m mod 4
/// (rows outside 1..ny − 2 are the zero rows of the solid ring).
struct Rows {
    nx: usize,
    data: Buffer,
}

impl Rows {
    fn new(nx: usize) -> Rows {
        Rows {
            nx,
            data: Buffer::take(4 * nx),
        }
    }
    fn get(&self, m: usize) -> &[f64] {
        let q = m % 4;
        &self.data[q * self.nx..(q + 1) * self.nx]
    }
    fn slot(&mut self, m: usize) -> &mut [f64] {
        let q = m % 4;
        &mut self.data[q * self.nx..(q + 1) * self.nx]
    }
    /// Rows m − 1, m, m + 1 (m ≥ 1).
    fn around(&self, m: usize) -> (&[f64], &[f64], &[f64]) {
        (self.get(m - 1), self.get(m), self.get(m + 1))
    }
}

/// Pass 1 of the fine level (see [`FINE_BLOCK`]): writes the pre-smoothed x into `x` and, when
/// there is a coarse level, each fine row of the scaled residual restricted along x into
/// `tmp` (`cnx` values per fine row; rows 0..ny).
fn fine_pre(f: &Fine, b: &[f64], x: &mut [f64], restrict: Option<(&mut [f64], usize)>) {
    use rayon::prelude::*;
    let (nx, ny) = (f.a.nx, f.a.ny);
    let inner = |m: usize| m >= 1 && m + 1 < ny;
    // Row m of the pre-smoothed x (zero on the ring rows).
    let presmoothed = |m: usize, out: &mut [f64]| {
        if inner(m) {
            presmooth_row(f, b, m, out);
        } else {
            out.iter_mut().for_each(|v| *v = 0.0);
        }
    };
    let fill = |rows: &mut Rows, m: usize| presmoothed(m, rows.slot(m));
    match restrict {
        None => x
            .par_chunks_mut(FINE_BLOCK * nx)
            .enumerate()
            .for_each(|(blk, xb)| {
                for (q, out) in xb.chunks_mut(nx).enumerate() {
                    presmoothed(blk * FINE_BLOCK + q, out);
                }
            }),
        Some((tmp, cnx)) => {
            let pad = 2 * cnx + 2;
            x.par_chunks_mut(FINE_BLOCK * nx)
                .zip(tmp[..ny * cnx].par_chunks_mut(FINE_BLOCK * cnx))
                .enumerate()
                .for_each_init(
                    || (Rows::new(nx), Buffer::take(nx + pad)),
                    |(rows, r), (blk, (xb, tb))| {
                        // restrict_line reads the zero padding past the row.
                        r[nx..].iter_mut().for_each(|v| *v = 0.0);
                        let j0 = blk * FINE_BLOCK;
                        if j0 > 0 {
                            fill(rows, j0 - 1);
                        }
                        fill(rows, j0);
                        for (q, (out, t)) in xb.chunks_mut(nx).zip(tb.chunks_mut(cnx)).enumerate() {
                            let j = j0 + q;
                            if j + 1 < ny {
                                fill(rows, j + 1);
                            }
                            // Only the fluid span: nothing reads x outside it.
                            let (lo, hi) = f.a.row_span(j);
                            out[lo..hi].copy_from_slice(&rows.get(j)[lo..hi]);
                            if inner(j) {
                                residual_row_fine(f, b, j, rows.around(j), &mut r[..nx]);
                            } else {
                                r[..nx].iter_mut().for_each(|v| *v = 0.0);
                            }
                            restrict_line(r, t);
                        }
                    },
                );
        }
    }
}

/// Pass 2 of the fine level (see [`FINE_BLOCK`]), in place: `z` holds the pre-smoothed x of
/// pass 1 on entry and the post-smoothing of (x + P·x_c) on return (`coarse` = (x_c, coarse
/// nx), or None for no correction); returns r·z (row sums added in row order).
///
/// In place, so the V-cycle needs no grid vector of its own for x (10 MB fewer at a million
/// unknowns). A task writes row j of its block only after it has read the rows of x up to
/// j + 2, so within a block the order is safe; the two rows of x on either side of each block
/// belong to the neighbouring tasks, which overwrite them, so they are copied into `halo`
/// (four rows per block) before the tasks start. Only the fluid span of a row of x is ever
/// read, and every row of z is written in full.
fn fine_post(
    f: &Fine,
    b: &[f64],
    coarse: Option<(&[f64], usize)>,
    z: &mut [f64],
    halo: &mut Vec<f64>,
) -> f64 {
    use rayon::prelude::*;
    let (nx, ny) = (f.a.nx, f.a.ny);
    let inner = |m: usize| m >= 1 && m + 1 < ny;
    let blocks = ny.div_ceil(FINE_BLOCK);
    // Halo rows of block blk, slots 0..4: j0 − 2, j0 − 1, j1, j1 + 1 (j0..j1 its own rows),
    // those that exist; `halo_slot` is the inverse.
    let block_rows = |blk: usize| {
        let j0 = blk * FINE_BLOCK;
        (j0, (j0 + FINE_BLOCK).min(ny))
    };
    let halo_rows = |blk: usize| {
        let (j0, j1) = block_rows(blk);
        [j0.wrapping_sub(2), j0.wrapping_sub(1), j1, j1 + 1]
    };
    let halo_slot =
        |(j0, j1): (usize, usize), m: usize| if m < j0 { m + 2 - j0 } else { 2 + m - j1 };
    halo.resize(blocks * 4 * nx, 0.0);
    {
        let z: &[f64] = z;
        halo.par_chunks_mut(4 * nx)
            .enumerate()
            .for_each(|(blk, hb)| {
                for (t, &m) in halo_rows(blk).iter().enumerate() {
                    if m < ny {
                        let (lo, hi) = f.a.row_span(m);
                        hb[t * nx + lo..t * nx + hi].copy_from_slice(&z[m * nx + lo..m * nx + hi]);
                    }
                }
            });
    }
    let halo: &[f64] = halo;
    // Stage 1: row m of x + P·x_c, from row m of x (`xr`).
    let corrected = |m: usize, xr: &[f64], out: &mut [f64]| {
        if !inner(m) {
            out.iter_mut().for_each(|v| *v = 0.0);
            return;
        }
        let (lo, hi) = f.a.row_span(m);
        match coarse {
            Some((xc, cnx)) => {
                prolong_row(
                    xc,
                    cnx,
                    m,
                    &f.scale[m * nx..(m + 1) * nx],
                    xr,
                    out,
                    (lo, hi),
                );
            }
            None => out[lo..hi].copy_from_slice(&xr[lo..hi]),
        }
        zero_outside(out, (lo, hi));
    };
    let row_sums: Vec<f64> = z
        .par_chunks_mut(FINE_BLOCK * nx)
        .enumerate()
        .flat_map_iter(|(blk, zb)| {
            let mut c = Rows::new(nx);
            let mut w = Rows::new(nx);
            let (j0, j1) = block_rows(blk);
            let own = j1 - j0;
            let hb = &halo[blk * 4 * nx..(blk + 1) * 4 * nx];
            // Row m of x: the block's own rows from z (not yet overwritten when read), the
            // others from the halo.
            let fill = |c: &mut Rows, zb: &[f64], m: usize| {
                if (j0..j1).contains(&m) {
                    corrected(m, &zb[(m - j0) * nx..(m - j0 + 1) * nx], c.slot(m));
                } else {
                    let t = halo_slot((j0, j1), m);
                    corrected(m, &hb[t * nx..(t + 1) * nx], c.slot(m));
                }
            };
            // Stage 2 (black half-sweep) of row m from stage-1 rows m − 1..m + 1.
            let black = |c: &Rows, w: &mut Rows, m: usize| {
                if inner(m) {
                    half_sweep_row(f, b, m, 1, c.around(m), w.slot(m));
                } else {
                    w.slot(m).iter_mut().for_each(|v| *v = 0.0);
                }
            };
            for m in j0.saturating_sub(2)..=(j0 + 1).min(ny - 1) {
                fill(&mut c, zb, m);
            }
            for m in j0.saturating_sub(1)..=j0.min(ny - 1) {
                black(&c, &mut w, m);
            }
            let mut sums = Vec::with_capacity(FINE_BLOCK);
            for q in 0..own {
                let j = j0 + q;
                if j + 2 < ny {
                    fill(&mut c, zb, j + 2);
                }
                if j + 1 < ny {
                    black(&c, &mut w, j + 1);
                }
                let out = &mut zb[q * nx..(q + 1) * nx];
                if inner(j) {
                    half_sweep_row(f, b, j, 0, w.around(j), out);
                    let (lo, hi) = f.a.row_span(j);
                    sums.push(dot4(&b[j * nx + lo..j * nx + hi], &out[lo..hi]));
                } else {
                    out.iter_mut().for_each(|v| *v = 0.0);
                    sums.push(0.0);
                }
            }
            sums
        })
        .collect();
    row_sums.iter().sum()
}

/// A raw pointer to share a coarse level's vector between the tasks of one phase of its banded
/// sweep.
struct SharedMut(*mut f64);
// SAFETY: used only in the banded coarse sweeps, whose tasks of one phase write disjoint rows
// and read no row another task writes (see `smooth_coarse`).
unsafe impl Sync for SharedMut {}
unsafe impl Send for SharedMut {}

/// Rows per band of the coarse-level sweeps (a separator row follows each band).
const BAND_ROWS: usize = 48;

/// Symmetric Gauss–Seidel on a coarse level, in an ordering that runs in parallel: the inner
/// rows are cut into bands of [`BAND_ROWS`] rows with one separator row between neighbouring
/// bands. The forward sweep (pre-smoothing) takes every band lexicographically, then the
/// separator rows; the backward sweep (post-smoothing) the exact reverse. The 9-point stencil
/// couples only neighbouring rows, so two bands never touch each other (only the separators
/// between them) and two separators never touch: the bands run in parallel, then the
/// separators. The sweep is Gauss–Seidel for one fixed ordering of the nodes whatever the number
/// of threads (the bands depend only on the grid), so the numbers do not change with it and
/// the backward sweep is the adjoint of the forward one: the V-cycle stays symmetric.
///
/// The forward sweep starts from x = 0 (the old contents of x are ignored, see [`sweep_row`]);
/// the backward one from the current x. Within a row only the neighbour updated just before
/// (i − 1 forward, i + 1 backward) is on the dependency chain (see [`sweep_row`]; measured: 12 ns
/// per node with the terms in stencil order). A four-colour ordering, fully parallel too, was
/// tried and cost two more CG iterations on a disc (12 instead of 10).
fn smooth_coarse(l: &Level, b: &[f64], x: &mut [f64], forward: bool) {
    use rayon::prelude::*;
    let ny = l.ny;
    let inner_rows = ny - 2; // rows 1..=ny − 2
    let stride = BAND_ROWS + 1;
    let bands = inner_rows.div_ceil(stride);
    let shared = SharedMut(x.as_mut_ptr());
    let band_rows = |band: usize| {
        let first = 1 + band * stride;
        first..(first + BAND_ROWS).min(ny - 1)
    };
    // Separator rows: the row after each band, when it is an inner row.
    let separators: Vec<usize> = (0..bands)
        .map(|band| 1 + band * stride + BAND_ROWS)
        .filter(|&j| j < ny - 1)
        .collect();
    let bands_phase = || {
        (0..bands).into_par_iter().for_each(|band| {
            let shared = &shared;
            let rows = band_rows(band);
            // SAFETY: this task writes only the rows of its band and reads those and the
            // separator rows next to them, which no task writes in this phase; other bands are
            // at least one separator row away. All indices lie inside the grid.
            let first = rows.start;
            let mut parts = Buffer::take(2 * l.nx);
            if forward {
                for j in rows {
                    unsafe { sweep_row(l, b, shared.0, j, (true, j == first, true), &mut parts) };
                }
            } else {
                for j in rows.rev() {
                    unsafe { sweep_row(l, b, shared.0, j, (false, false, false), &mut parts) };
                }
            }
        });
    };
    let separators_phase = || {
        separators.par_iter().for_each(|&j| {
            let shared = &shared;
            // SAFETY: separator rows are BAND_ROWS + 1 rows apart, so this task writes row j
            // and reads rows j ± 1 (band rows), which no task writes in this phase.
            let mut parts = Buffer::take(2 * l.nx);
            unsafe { sweep_row(l, b, shared.0, j, (forward, false, false), &mut parts) };
        });
    };
    if forward {
        bands_phase();
        separators_phase();
    } else {
        separators_phase();
        bands_phase();
    }
}

/// Gauss–Seidel along inner row j of a coarse level; `flags` = (forward, south_zero,
/// north_zero). Left to right from x = 0 (`forward`, the pre-smoothing), or right to left from
/// the current x. `parts` is scratch of at least 2·nx values.
///
/// From zero, every node not yet updated in the sweep counts as 0 whatever x holds there: the
/// east neighbour, the north row (`north_zero`, a later row of the band or the separator after
/// it) and the south row when `south_zero` (the separator before the band). So x need not be
/// cleared before the sweep, and those reads are skipped.
///
/// A level with an interior stencil takes [`sweep_row_split`]; [`sweep_row_impl`], one loop
/// with a test per node, serves the others and defines the numbers the split loops reproduce.
///
/// Along the row, x_k = a_k − c_k·x_prev with a_k = (b_k − the other terms)/d_k and
/// c_k = (the coefficient towards the node updated just before)/d_k: a_k does not wait for
/// x_prev, and x_prev stays in a register, so the dependency chain from one node to the next is
/// one multiply and one subtraction (the same linear map as (b − Σ)/d, rounded differently).
///
/// # Safety
/// `x` points to the level's vector; no other thread may write rows j − 1, j, j + 1 or read
/// row j during the call.
unsafe fn sweep_row(
    l: &Level,
    b: &[f64],
    x: *mut f64,
    j: usize,
    flags: (bool, bool, bool),
    parts: &mut [f64],
) {
    if let Some(reg) = l.regular_parts() {
        let p = parts;
        unsafe {
            match flags {
                (true, true, true) => sweep_row_split::<true, true, true>(l, reg, b, x, j, p),
                (true, false, true) => sweep_row_split::<true, false, true>(l, reg, b, x, j, p),
                (true, true, false) => sweep_row_split::<true, true, false>(l, reg, b, x, j, p),
                (true, false, false) => sweep_row_split::<true, false, false>(l, reg, b, x, j, p),
                (false, _, _) => sweep_row_split::<false, false, false>(l, reg, b, x, j, p),
            }
        }
        return;
    }
    unsafe {
        match flags {
            (true, true, true) => sweep_row_impl::<true, true, true>(l, b, x, j),
            (true, false, true) => sweep_row_impl::<true, false, true>(l, b, x, j),
            (true, true, false) => sweep_row_impl::<true, true, false>(l, b, x, j),
            (true, false, false) => sweep_row_impl::<true, false, false>(l, b, x, j),
            (false, _, _) => sweep_row_impl::<false, false, false>(l, b, x, j),
        }
    }
}

/// [`sweep_row`] on a level with an interior stencil, in three loops over the row's span: the
/// part of every node's update that does not wait for its neighbour along the row, as if every
/// node were regular (contiguous, so it vectorises); the same for the odd nodes from the table;
/// then the chain x_k = a_k − c_k·x_prev alone. The numbers are those of [`sweep_row_impl`]
/// (the same expressions in the same order); outside the span x is 0.
///
/// # Safety
/// As [`sweep_row`]; `parts` holds at least 2·(hi − lo) values.
#[inline(always)]
unsafe fn sweep_row_split<const FWD: bool, const ZS: bool, const ZN: bool>(
    l: &Level,
    (ey, ex, q, _, inv_r): Interior,
    b: &[f64],
    x: *mut f64,
    j: usize,
    parts: &mut [f64],
) {
    let nx = l.nx;
    let row = j * nx;
    let (lo, hi) = l.spans[j];
    let (lo, hi) = (lo as usize, hi as usize);
    let m = hi - lo;
    let c_r = ex * inv_r;
    let (a, rest) = parts.split_at_mut(m);
    let c = &mut rest[..m];
    {
        // SAFETY: rows j − 1, j, j + 1 lie inside the level's vector and no other thread writes
        // them during the call (the caller's contract); nothing writes through x in this block.
        let line = |r: usize| unsafe { std::slice::from_raw_parts(x.add(r * nx), nx) };
        let (xs, xc, xn) = (line(j - 1), line(j), line(j + 1));
        let bb = &b[row + lo..row + hi];
        let (s0, s1, s2) = (&xs[lo - 1..hi - 1], &xs[lo..hi], &xs[lo + 1..hi + 1]);
        let (n0, n1, n2) = (&xn[lo - 1..hi - 1], &xn[lo..hi], &xn[lo + 1..hi + 1]);
        let cw = &xc[lo - 1..hi - 1];
        for i in 0..m {
            let (south, north) = (if ZS { 0.0 } else { s1[i] }, if ZN { 0.0 } else { n1[i] });
            let south_pair = if ZS { 0.0 + 0.0 } else { s0[i] + s2[i] };
            let north_pair = if ZN { 0.0 + 0.0 } else { n0[i] + n2[i] };
            let rows = ey * (south + north) + q * (south_pair + north_pair);
            let other = if FWD { 0.0 } else { ex * cw[i] };
            a[i] = (bb[i] - rows - other) * inv_r;
        }
        c.iter_mut().for_each(|v| *v = c_r);
        let at = |k: usize| xc[k - row];
        let south = |k: usize| if ZS { 0.0 } else { xs[k - row] };
        let north = |k: usize| if ZN { 0.0 } else { xn[k - row] };
        let odd = &l.odd_cols[l.odd_start[j] as usize..l.odd_start[j + 1] as usize];
        for &col in odd {
            let (col, k) = (col as usize, row + col as usize);
            let id = l.ids[k] as usize;
            (a[col - lo], c[col - lo]) = table_part::<FWD>(
                (&l.table[id], l.inv_table[id], b[k]),
                [south(k - 1), south(k), south(k + 1)],
                [north(k - 1), north(k), north(k + 1)],
                if FWD { 0.0 } else { at(k - 1) },
            );
        }
    }
    // SAFETY: row j is this call's to write (the caller's contract), and the slices above are
    // gone.
    let out = unsafe { std::slice::from_raw_parts_mut(x.add(row), nx) };
    zero_outside(out, (lo, hi));
    let o = &mut out[lo..hi];
    // The ring column, or an inactive node before the span, gives 0.
    let mut prev = 0.0;
    if FWD {
        for i in 0..m {
            prev = a[i] - c[i] * prev;
            o[i] = prev;
        }
    } else {
        for i in (0..m).rev() {
            prev = a[i] - c[i] * prev;
            o[i] = prev;
        }
    }
}

/// The part (a, c) of a node's update along a coarse row ([`sweep_row`]) from its table
/// stencil, 1/diagonal and b: `s` and `n` the south and north rows at columns k − 1, k, k + 1,
/// `west` the current x at k − 1 (read backward only).
#[inline(always)]
fn table_part<const FWD: bool>(
    (st, inv, bk): (&[f64; 9], f64, f64),
    s: [f64; 3],
    n: [f64; 3],
    west: f64,
) -> (f64, f64) {
    let rows =
        st[0] * s[0] + st[1] * s[1] + st[2] * s[2] + st[6] * n[0] + st[7] * n[1] + st[8] * n[2];
    if FWD {
        ((bk - rows) * inv, st[3] * inv)
    } else {
        ((bk - rows - st[3] * west) * inv, st[5] * inv)
    }
}

/// [`sweep_row`] for one combination of its flags (FWD: forward from zero; ZS, ZN: the south,
/// north row counts as zero).
#[inline(always)]
unsafe fn sweep_row_impl<const FWD: bool, const ZS: bool, const ZN: bool>(
    l: &Level,
    b: &[f64],
    x: *mut f64,
    j: usize,
) {
    let nx = l.nx;
    // The interior stencil: N/S edges, E/W edges, corners.
    let reg = l.regular_parts();
    let regular = reg.is_some();
    let (ey, ex, q, _, inv_r) = reg.unwrap_or((0.0, 0.0, 0.0, 0.0, 0.0));
    let c_r = ex * inv_r;
    let at = |k: usize| unsafe { *x.add(k) };
    let south = |k: usize| if ZS { 0.0 } else { at(k - nx) };
    let north = |k: usize| if ZN { 0.0 } else { at(k + nx) };
    // The part of the update that does not depend on the node updated just before.
    let part = |k: usize| -> (f64, f64) {
        let id = l.ids[k];
        if regular && id == REGULAR_ID {
            let rows = ey * (south(k) + north(k))
                + q * ((south(k - 1) + south(k + 1)) + (north(k - 1) + north(k + 1)));
            // Forward from zero the east neighbour is 0; backward the west one is current.
            let other = if FWD { 0.0 } else { ex * at(k - 1) };
            ((b[k] - rows - other) * inv_r, c_r)
        } else {
            table_part::<FWD>(
                (&l.table[id as usize], l.inv_table[id as usize], b[k]),
                [south(k - 1), south(k), south(k + 1)],
                [north(k - 1), north(k), north(k + 1)],
                if FWD { 0.0 } else { at(k - 1) },
            )
        }
    };
    let row = j * nx;
    // The ring columns hold 0.
    let mut prev = 0.0;
    if FWD {
        for k in row + 1..row + nx - 1 {
            let (a, c) = part(k);
            prev = a - c * prev;
            unsafe { *x.add(k) = prev };
        }
    } else {
        for k in (row + 1..row + nx - 1).rev() {
            let (a, c) = part(k);
            prev = a - c * prev;
            unsafe { *x.add(k) = prev };
        }
    }
}

/// Row j of r = b − A·x on a coarse level (zero at inactive nodes and on the ring).
#[inline]
fn residual_row_coarse(l: &Level, b: &[f64], x: &[f64], j: usize, r: &mut [f64]) {
    let nx = l.nx;
    r.iter_mut().for_each(|v| *v = 0.0);
    if j == 0 || j + 1 >= l.ny {
        return;
    }
    let row = j * nx;
    let m = nx - 2;
    let ids = &l.ids[row + 1..row + 1 + m];
    // First the interior stencil at every node of the row (a contiguous loop that vectorises),
    // then the nodes with another stencil, from the table. Inactive nodes have the zero stencil
    // and b = 0 (no fluid node restricts to them), so they get r = 0 without a test.
    let regular = l.regular_parts();
    if let Some((ey, ex, q, c, _)) = regular {
        let (xs, xc, xn) = (
            &x[row - nx..row],
            &x[row..row + nx],
            &x[row + nx..row + 2 * nx],
        );
        let bb = &b[row + 1..row + 1 + m];
        let o = &mut r[1..1 + m];
        let (s0, s1, s2) = (&xs[..m], &xs[1..1 + m], &xs[2..2 + m]);
        let (c0, c1, c2) = (&xc[..m], &xc[1..1 + m], &xc[2..2 + m]);
        let (n0, n1, n2) = (&xn[..m], &xn[1..1 + m], &xn[2..2 + m]);
        for i in 0..m {
            o[i] = bb[i]
                - c * c1[i]
                - ey * (s1[i] + n1[i])
                - ex * (c0[i] + c2[i])
                - q * ((s0[i] + s2[i]) + (n0[i] + n2[i]));
        }
    }
    for (i, &id) in ids.iter().enumerate() {
        if regular.is_some() && id == REGULAR_ID {
            continue;
        }
        let k = row + 1 + i;
        let st = &l.table[id as usize];
        r[i + 1] = b[k]
            - st[0] * x[k - nx - 1]
            - st[1] * x[k - nx]
            - st[2] * x[k - nx + 1]
            - st[3] * x[k - 1]
            - st[4] * x[k]
            - st[5] * x[k + 1]
            - st[6] * x[k + nx - 1]
            - st[7] * x[k + nx]
            - st[8] * x[k + nx + 1];
    }
}

/// 1-D restriction along a line: coarse node I takes fine 2I − 1 (weight 1) and fine 2I − 2,
/// 2I (weight ½) (the transpose of [`parents`]). `row` must be zero on its ring and hold at
/// least 2·(out.len() − 2) + 1 entries (pad with zeros), so no index needs a test.
#[inline]
fn restrict_line(row: &[f64], out: &mut [f64]) {
    let len = out.len();
    out[0] = 0.0;
    out[len - 1] = 0.0;
    // Pairs (row[2I − 2], row[2I − 1]) and the next pair's first entry, row[2I].
    let pairs = row.chunks_exact(2);
    let next = row[2..].chunks_exact(2);
    for ((o, p), q) in out[1..len - 1].iter_mut().zip(pairs).zip(next) {
        *o = p[1] + 0.5 * (p[0] + q[0]);
    }
}

/// b_c = Pᵀ·r for a fine residual given row by row (`row(j, out)` writes fine row j of r, zero
/// at solid nodes and on the ring), separably: each fine row is made and restricted along x
/// into `tmp` without storing the fine residual ([`restrict_line`]), then the rows of `tmp` are
/// combined along y ([`restrict_columns`]). Rows in parallel; each output element is one fixed
/// expression, so the numbers do not depend on the number of threads.
fn restrict_rows(
    fnx: usize,
    fny: usize,
    bc: &mut [f64],
    cnx: usize,
    tmp: &mut Vec<f64>,
    row: impl Fn(usize, &mut [f64]) + Sync,
) {
    use rayon::prelude::*;
    prepare_tmp(tmp, fny, bc.len() / cnx, cnx);
    let pad = 2 * cnx + 2;
    tmp[..fny * cnx]
        .par_chunks_mut(cnx)
        .enumerate()
        .for_each_init(
            || vec![0.0; fnx + pad],
            |buf, (j, t)| {
                row(j, &mut buf[..fnx]);
                restrict_line(buf, t);
            },
        );
    restrict_columns(tmp, bc, cnx);
}

/// Sizes the buffer of x-restricted rows for a fine level of `fny` rows and a coarse level of
/// `cny` rows: fine rows 0..fny, then zero rows up to 2·(cny − 2) + 1 (the ring rows are zero).
fn prepare_tmp(tmp: &mut Vec<f64>, fny: usize, cny: usize, cnx: usize) {
    let rows = (2 * cny).max(fny);
    tmp.resize(rows * cnx, 0.0);
    tmp[fny * cnx..].iter_mut().for_each(|v| *v = 0.0);
}

/// The y half of the restriction: coarse row J takes x-restricted fine rows 2J − 1 with weight
/// 1, 2J − 2 and 2J with ½.
#[inline]
fn restrict_columns(tmp: &[f64], bc: &mut [f64], cnx: usize) {
    use rayon::prelude::*;
    let cny = bc.len() / cnx;
    bc.par_chunks_mut(cnx).enumerate().for_each(|(cj, out)| {
        if cj == 0 || cj + 1 == cny {
            out.iter_mut().for_each(|v| *v = 0.0);
            return;
        }
        let line = |j: usize| &tmp[j * cnx..(j + 1) * cnx];
        let (m, lo, hi) = (line(2 * cj - 1), line(2 * cj - 2), line(2 * cj));
        for ci in 0..cnx {
            out[ci] = m[ci] + 0.5 * (lo[ci] + hi[ci]);
        }
    });
}

/// Row j (an inner row) of x + P·x_c at the columns `lo..hi` (1 ≤ lo ≤ hi ≤ nx − 1): `x` and
/// `out` are the row, `scale` the row scales of P on it (0 at inactive nodes); the rest of `out`
/// is left to the caller. The row interpolates along y from its one or two coarse parent rows
/// and along x on the fly: fine column 2I − 1 takes coarse column I, fine 2I the mean of I and
/// I + 1.
#[inline]
#[allow(clippy::too_many_arguments)]
fn prolong_row<S: Copy + Into<f64>>(
    xc: &[f64],
    cnx: usize,
    j: usize,
    scale: &[S],
    x: &[f64],
    out: &mut [f64],
    (lo, hi): (usize, usize),
) {
    if lo >= hi {
        return;
    }
    let (p, n) = parents(j);
    let ra = &xc[p[0].0 * cnx..(p[0].0 + 1) * cnx];
    let rb = &xc[p[n - 1].0 * cnx..(p[n - 1].0 + 1) * cnx];
    // The coarse row interpolated to this fine row, at the coarse columns lo..hi needs:
    // lo / 2 up to (hi − 1) / 2 + 1.
    let (tlo, thi) = (lo / 2, ((hi - 1) / 2 + 2).min(cnx));
    let mut t = Buffer::take(cnx);
    if n == 1 {
        t[tlo..thi].copy_from_slice(&ra[tlo..thi]);
    } else {
        for ((t, a), b) in t[tlo..thi].iter_mut().zip(&ra[tlo..thi]).zip(&rb[tlo..thi]) {
            *t = 0.5 * (a + b);
        }
    }
    let mut q = lo;
    if q % 2 == 0 {
        out[q] = x[q] + scale[q].into() * (0.5 * (t[q / 2] + t[q / 2 + 1]));
        q += 1;
    }
    // q is odd from here: pairs (q, q + 1) = (2c + 1, 2c + 2) take t[c + 1] and the mean of
    // t[c + 1], t[c + 2].
    let pairs = (hi.max(q) - q) / 2;
    let c0 = (q - 1) / 2;
    let (o, xx, sc) = (
        &mut out[q..q + 2 * pairs],
        &x[q..q + 2 * pairs],
        &scale[q..q + 2 * pairs],
    );
    let tt = &t[c0 + 1..c0 + pairs + 2];
    for c in 0..pairs {
        let (a, b) = (tt[c], tt[c + 1]);
        o[2 * c] = xx[2 * c] + sc[2 * c].into() * a;
        o[2 * c + 1] = xx[2 * c + 1] + sc[2 * c + 1].into() * (0.5 * (a + b));
    }
    q += 2 * pairs;
    if q < hi {
        out[q] = x[q] + scale[q].into() * t[q.div_ceil(2)];
    }
}

/// x += P·x_c on the fine nodes that are active (`mask` holds the row scales of P, 0 at
/// inactive nodes); rows in parallel.
fn prolong_add(xc: &[f64], cnx: usize, x: &mut [f64], fnx: usize, fny: usize, mask: &[u8]) {
    use rayon::prelude::*;
    x.par_chunks_mut(fnx)
        .zip(mask.par_chunks(fnx))
        .enumerate()
        .for_each_init(
            || vec![0.0; fnx],
            |buf, (j, (row, m))| {
                if j == 0 || j + 1 >= fny {
                    return;
                }
                prolong_row(xc, cnx, j, m, row, buf, (1, fnx - 1));
                buf[0] = row[0];
                buf[fnx - 1] = row[fnx - 1];
                row.copy_from_slice(buf);
            },
        );
}

impl Multigrid<'_> {
    /// V-cycle on coarse level `l` (index into `levels`) for the right-hand side in
    /// scratch.b[l], result in scratch.x[l].
    fn cycle(&self, l: usize, s: &mut Scratch) {
        let lev = &self.levels[l];
        if l + 1 == self.levels.len() {
            if let Some(coarsest) = &self.coarsest {
                coarsest.solve(&s.b[l], &mut s.x[l]);
            }
            return;
        }
        let next = &self.levels[l + 1];
        smooth_coarse(lev, &s.b[l], &mut s.x[l], true);
        {
            let (bl, bn) = s.b.split_at_mut(l + 1);
            let (b, x) = (&bl[l], &s.x[l]);
            restrict_rows(lev.nx, lev.ny, &mut bn[0], next.nx, &mut s.tmp, |j, out| {
                residual_row_coarse(lev, b, x, j, out)
            });
        }
        self.cycle(l + 1, s);
        let (head, tail) = s.x.split_at_mut(l + 1);
        prolong_add(
            &tail[0],
            next.nx,
            &mut head[l],
            lev.nx,
            lev.ny,
            &self.masks[l],
        );
        smooth_coarse(lev, &s.b[l], &mut s.x[l], false);
    }
}

impl Preconditioner for Multigrid<'_> {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        self.apply_dot(r, z);
    }

    fn apply_dot(&self, r: &[f64], z: &mut [f64]) -> f64 {
        let a = self.fine;
        let mut s = self.scratch.lock().unwrap_or_else(|e| e.into_inner());
        let s = &mut *s;
        let f = Fine {
            a,
            inv: &self.inv_diag,
            scale: &self.fine_scale,
        };
        // The pre-smoothed x goes into z, and pass 2 works on it in place (see `fine_post`).
        if self.levels.is_empty() {
            fine_pre(&f, r, z, None);
            fine_post(&f, r, None, z, &mut s.halo)
        } else {
            let c0 = &self.levels[0];
            prepare_tmp(&mut s.tmp, a.ny, c0.ny, c0.nx);
            fine_pre(&f, r, z, Some((&mut s.tmp, c0.nx)));
            restrict_columns(&s.tmp, &mut s.b[0], c0.nx);
            self.cycle(0, s);
            fine_post(&f, r, Some((&s.x[0], c0.nx)), z, &mut s.halo)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{Primitive, Shape};
    use crate::grid::Classified;
    use crate::grid::{classify, Grid};
    use crate::solver::{pcg, CgParams};

    /// The unit disc with a straight slit (`center`, `size`, `angle`) cut out, classified on a
    /// grid of `cells` across.
    fn slit_disc(center: [f64; 2], size: [f64; 2], angle: f64, cells: usize) -> Classified {
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

    #[test]
    fn galerkin_levels_are_symmetric() {
        let c = slit_disc([0.5, 0.0], [1.2, 0.05], 0.3, 64);
        let a = GridOperator::new(&c);
        let mg = Multigrid::new(&a).unwrap();
        for l in &mg.levels {
            for k in 0..l.len() {
                if !l.active[k] {
                    continue;
                }
                let (i, j) = (k % l.nx, k / l.nx);
                for (o, &(di, dj)) in OFFSETS.iter().enumerate() {
                    let v = l.st(k)[o];
                    if v == 0.0 {
                        continue;
                    }
                    let kk = (j as isize + dj) as usize * l.nx + (i as isize + di) as usize;
                    let back = l.st(kk)[8 - o];
                    assert!((v - back).abs() <= 1e-12 * v.abs().max(1.0), "{v} {back}");
                }
            }
        }
        // And the preconditioned CG converges quickly.
        let b: Vec<f64> = a
            .diag
            .iter()
            .map(|&d| if d != 0.0 { 1.0 } else { 0.0 })
            .collect();
        let mut x = vec![0.0; b.len()];
        let info = pcg(&a, &mg, &b, &mut x, &CgParams::default(), "mg").unwrap();
        assert!(info.iterations <= 25, "{}", info.iterations);
    }

    /// A slit thinner than a cell leaves fluid on both sides of cut links (the thin nodes of
    /// [`GridOperator`]): the fast kernels must still give the assembled matrix's product
    /// (operator::assemble, the reference), and the V-cycle must stay symmetric.
    #[test]
    fn thin_walls_match_the_assembled_matrix_and_the_cycle_is_symmetric() {
        use crate::operator::{assemble, Numbering};
        let c = slit_disc([0.3, 0.01], [1.2, 0.009], 0.2, 80);
        let a = GridOperator::new(&c);
        let thin: usize = (0..a.ny).map(|j| a.thin_in_row(j).len()).sum();
        assert!(thin > 10, "the slit should make thin nodes, got {thin}");
        let num = Numbering::new(&c);
        let csr = assemble(&c, &num);
        // A rough vector, zero at solid nodes.
        let field = |k: usize, seed: f64| ((k as f64 * 0.618 + seed).sin() * 1e3).fract();
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
        // Symmetry of the preconditioner: u·M⁻¹v = v·M⁻¹u.
        let mg = Multigrid::new(&a).unwrap();
        let mut u = vec![0.0; x.len()];
        let mut v = vec![0.0; x.len()];
        for k in num.nodes() {
            u[k] = field(k, 1.1);
            v[k] = field(k, 2.7);
        }
        let (mut mu, mut mv) = (vec![0.0; x.len()], vec![0.0; x.len()]);
        let umu = mg.apply_dot(&u, &mut mu);
        mg.apply(&v, &mut mv);
        let (a1, a2) = (dot4(&u, &mv), dot4(&v, &mu));
        assert!(
            (a1 - a2).abs() <= 1e-13 * a1.abs().max(a2.abs()),
            "{a1} {a2}"
        );
        assert!((umu - dot4(&u, &mu)).abs() <= 1e-12 * umu.abs());
        assert!(umu > 0.0);
    }

    /// The split coarse sweep ([`sweep_row_split`]) must give the numbers of the general one
    /// ([`sweep_row_impl`]) bit for bit, on every level of a cut geometry, forward from
    /// arbitrary old contents and backward from a current x, with every flag combination the
    /// banded sweep uses.
    #[test]
    fn split_coarse_sweep_matches_the_general_one_bit_for_bit() {
        let c = slit_disc([0.3, 0.01], [1.2, 0.009], 0.2, 160);
        let a = GridOperator::new(&c);
        let mg = Multigrid::new(&a).unwrap();
        let field = |k: usize, seed: f64| ((k as f64 * 0.618 + seed).sin() * 1e3).fract();
        let mut levels = 0;
        for l in &mg.levels {
            let Some(reg) = l.regular_parts() else {
                continue;
            };
            levels += 1;
            let n = l.len();
            // b is zero at inactive nodes, as the restriction leaves it.
            let b: Vec<f64> = (0..n)
                .map(|k| if l.active[k] { field(k, 0.7) } else { 0.0 })
                .collect();
            let old: Vec<f64> = (0..n)
                .map(|k| {
                    let (i, j) = (k % l.nx, k / l.nx);
                    let ring = i == 0 || j == 0 || i + 1 == l.nx || j + 1 == l.ny;
                    if ring || !l.active[k] {
                        0.0
                    } else {
                        field(k, 1.9)
                    }
                })
                .collect();
            let mut parts = vec![0.0; 2 * l.nx];
            for j in 1..l.ny - 1 {
                let (mut x1, mut x2) = (old.clone(), old.clone());
                macro_rules! both {
                    ($f:expr, $s:expr, $n:expr) => {
                        unsafe {
                            sweep_row_impl::<$f, $s, $n>(l, &b, x1.as_mut_ptr(), j);
                            sweep_row_split::<$f, $s, $n>(
                                l,
                                reg,
                                &b,
                                x2.as_mut_ptr(),
                                j,
                                &mut parts,
                            );
                        }
                    };
                }
                both!(true, true, true);
                both!(true, false, true);
                both!(true, true, false);
                both!(true, false, false);
                both!(false, false, false);
                let row = j * l.nx..(j + 1) * l.nx;
                for k in row {
                    // Inactive nodes hold 0 in both (−0 and +0 alike).
                    assert!(
                        x1[k].to_bits() == x2[k].to_bits() || (x1[k] == 0.0 && x2[k] == 0.0),
                        "level {levels}, node {k}: {} {}",
                        x1[k],
                        x2[k]
                    );
                }
            }
        }
        assert!(levels >= 2, "expected several coarse levels, got {levels}");
    }

    /// Issue 15: a coarsest level that the dense Cholesky factorisation cannot take (here one
    /// node with a negative diagonal, which no Galerkin product of the fine operator gives) is
    /// an error that says what failed, with exit code 1, not a panic.
    #[test]
    fn issue_15_coarsest_factorisation_failure_is_an_error() {
        let (nx, ny) = (3, 3);
        let mut active = vec![false; nx * ny];
        let mut ids = vec![0u32; nx * ny];
        active[4] = true;
        ids[4] = 2;
        let mut st = [0.0; 9];
        st[CENTRE] = -1.0;
        let table = vec![[0.0; 9], [0.0; 9], st];
        let inv_table = vec![0.0, 0.0, -1.0];
        let (spans, odd_start, odd_cols) = row_index(nx, ny, &active, &ids);
        let level = Level {
            nx,
            ny,
            active,
            ids,
            table,
            inv_table,
            spans,
            odd_start,
            odd_cols,
            interior: None,
        };
        let Err(e) = Coarsest::new(&level) else {
            panic!("an indefinite coarsest level must not factor");
        };
        assert!(matches!(e, Error::Numerical(_)), "{e:?}");
        let message = e.to_string();
        assert!(message.contains("coarsest level"), "{message}");
        assert!(message.contains("3 × 3 grid"), "{message}");
        assert!(message.contains("Cholesky"), "{message}");
        assert!(!e.is_input_error());
    }
}
