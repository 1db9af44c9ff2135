//! The coarse levels: their node layout, the Galerkin product that makes their operators, the
//! stored stencils, and the dense Cholesky factorisation of the coarsest one.
//!
//! Owns: [`Level`] (one coarse level's stencil table and row index), the coarse-node layout
//! ([`parents`], [`coarse_size`]), the row scales of P ([`pscale_of`]), the Galerkin product
//! A_c = Pᵀ·A·P ([`galerkin_row`], [`coarsen`]) over any level's rows ([`StencilRows`]) and
//! the coarsest-level solve ([`Coarsest`]). All of it runs once per hierarchy, at setup, but
//! [`Coarsest::solve`], which the V-cycle calls at the bottom.
//!
//! Does not touch: the rest of the per-cycle work (sweeps, transfers, the fine passes) or the
//! fine level's vectors; it builds what they read.

use crate::error::{Error, Result};
use crate::operator::GridOperator;
use nalgebra::{Cholesky, DMatrix, DVector, Dyn};

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

/// Table index of the interior stencil of a coarse level (0 is the zero row of inactive nodes).
pub(super) const REGULAR_ID: u32 = 1;

/// One coarse level: a 9-point stencil per node of an nx × ny grid (zero rows where inactive).
///
/// The stencils are stored once each: `ids[k]` indexes `table`. Away from the walls every
/// Galerkin stencil of a level is the same (the product of the same arithmetic on the same
/// numbers, bit for bit), so the table holds one entry for the whole interior plus one per node
/// near a wall, and a sweep reads 4 bytes per node instead of 72: the coarse levels are bound
/// by memory traffic, so this is what they cost.
pub(super) struct Level {
    pub(super) nx: usize,
    pub(super) ny: usize,
    pub(super) active: Vec<bool>,
    pub(super) ids: Vec<u32>,
    /// Distinct stencils; entry 0 is the all-zero row of inactive nodes.
    pub(super) table: Vec<[f64; 9]>,
    /// 1/diagonal of each table entry, 0 for entry 0 (so the smoother needs no branch).
    pub(super) inv_table: Vec<f64>,
    /// Per row, the columns lo..hi from its first to its last active node ((1, 1) when it has
    /// none), and the columns inside them whose stencil is not the interior one:
    /// `odd_cols[odd_start[j]..odd_start[j + 1]]` (for the sweeps, `smooth::sweep_row`).
    pub(super) spans: Vec<(u32, u32)>,
    pub(super) odd_start: Vec<u32>,
    pub(super) odd_cols: Vec<u32>,
    /// [`interior_parts`] of the table, found once at setup.
    interior: Option<Interior>,
}

/// The interior stencil of a level as (N/S edge, E/W edge, corner, centre, 1/centre).
pub(super) type Interior = (f64, f64, f64, f64, f64);

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
    pub(super) fn len(&self) -> usize {
        self.nx * self.ny
    }
    #[inline]
    fn st(&self, k: usize) -> &[f64; 9] {
        &self.table[self.ids[k] as usize]
    }
    /// The interior stencil's parts ([`interior_parts`]), for the fast paths of the sweeps and
    /// the residual.
    #[inline]
    pub(super) fn regular_parts(&self) -> Option<Interior> {
        self.interior
    }
    pub(super) fn active_count(&self) -> usize {
        self.active.iter().filter(|&&a| a).count()
    }
}

/// Access to the entries of a level's operator, fine or coarse, for the Galerkin product.
pub(super) trait StencilRows {
    fn nx(&self) -> usize;
    fn ny(&self) -> usize;
    fn is_active(&self, k: usize) -> bool;
    /// Row k as a 9-point stencil (zeros where there is no entry).
    fn row(&self, k: usize) -> [f64; 9];
    /// Per node: active, and regular (an interior node with the level's standard stencil and
    /// a prolongation row scale of 1; a conservative test: false is always safe).
    fn masks(&self) -> (Vec<bool>, Vec<bool>);
}

/// Row scale of the prolongation at a fine node with diagonal d whose diagonal without cut
/// links would be `regular` ([`GridOperator::regular_diag`], 4 for the plain Laplacian):
/// min(1, regular/d).
///
/// Next to a wall that cuts a link at θ·h the diagonal is 3 + 1/θ > 4 and the node is tied to
/// the wall value 0; bilinear interpolation from coarse nodes (some of them beyond the wall)
/// overstates the smooth error there, and the coarse correction loses accuracy along curved
/// walls (measured: CG iterations on a disc grew from 11 to 16 between 128 and 2048 cells).
/// Scaling those rows of P by 4/d, the ratio of a regular node's diagonal to this one, is a
/// matrix-dependent prolongation (in the spirit of Alcouffe, Brandt, Dendy & Painter 1981 and de
/// Zeeuw 1990, from memory) reduced to a row scaling, so the coarse operators stay 9-point and
/// R = Pᵀ keeps the V-cycle symmetric. With it the count stays at 10–11 from 128 to 2048 cells.
pub(super) fn pscale_of(d: f64, regular: f64) -> f64 {
    if d > regular {
        regular / d
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
        let regular = (0..self.diag.len())
            .into_par_iter()
            .map(|k| self.is_interior(k))
            .collect();
        (active, regular)
    }
    fn row(&self, k: usize) -> [f64; 9] {
        let w = self.off_diagonals(k);
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
pub(super) fn parents(i: usize) -> ([(usize, f64); 2], usize) {
    if i % 2 == 1 {
        ([(i.div_ceil(2), 1.0), (0, 0.0)], 1)
    } else {
        ([(i / 2, 0.5), (i / 2 + 1, 0.5)], 2)
    }
}

/// Coarse size of a fine size (both with their rings).
pub(super) fn coarse_size(n: usize) -> usize {
    n / 2 + 2
}

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
pub(super) fn coarsen(fine: &(dyn StencilRows + Sync), scale: Option<&[f32]>) -> Level {
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
pub(super) struct Coarsest {
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
    pub(super) fn new(l: &Level) -> Result<Coarsest> {
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
    pub(super) fn solve(&self, b: &[f64], x: &mut [f64]) {
        let (chol, idx) = (&self.chol, &self.idx);
        let rhs = DVector::from_iterator(idx.len(), idx.iter().map(|&k| b[k]));
        let sol = chol.solve(&rhs);
        x.iter_mut().for_each(|v| *v = 0.0);
        for (q, &k) in idx.iter().enumerate() {
            x[k] = sol[q];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::multigrid::Multigrid;
    use crate::operator::fixtures::slit_disc;
    use crate::solver::{pcg, CgParams};

    #[test]
    fn galerkin_levels_are_symmetric() {
        let c = slit_disc([0.5, 0.0], [1.2, 0.05], 0.3, 64);
        let a = crate::operator::fixtures::laplace_operator(&c);
        let mg = Multigrid::new(a.clone()).unwrap();
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
