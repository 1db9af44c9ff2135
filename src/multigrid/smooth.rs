//! The coarse levels' smoother, symmetric Gauss–Seidel in a banded order, and their residual.
//!
//! Owns: the banded sweep ([`smooth_coarse`]), its row kernels ([`sweep_row`],
//! [`sweep_row_split`], [`sweep_row_impl`], [`table_part`]) and the coarse residual
//! ([`residual_row_coarse`]).
//!
//! **All of the multigrid module's `unsafe` code is in this file** (the parent module denies
//! `unsafe_code`, this file alone allows it): the bands of one phase of a sweep write disjoint
//! rows of one vector, shared through a raw pointer ([`SharedMut`]). Every `unsafe` carries a
//! SAFETY comment.
//!
//! Does not touch: the fine level (it only takes row scratch from `fine`'s [`Buffer`] pool),
//! the transfers, or how a level is built (it reads the [`Level`] that `setup` made).
#![allow(unsafe_code)]

use super::fine::Buffer;
use super::setup::{Interior, Level, REGULAR_ID};
use crate::operator::zero_outside;

/// A raw pointer to share a coarse level's vector between the tasks of one phase of its banded
/// sweep.
struct SharedMut(*mut f64);
// SAFETY: used only in the banded coarse sweeps, whose tasks of one phase write disjoint rows
// and read no row another task writes (see `smooth_coarse`).
unsafe impl Sync for SharedMut {}
// SAFETY: as for `Sync`: the pointer is dereferenced only under that discipline, whichever
// thread of the pool holds it.
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
pub(super) fn smooth_coarse(l: &Level, b: &[f64], x: &mut [f64], forward: bool) {
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
            let first = rows.start;
            let mut parts = Buffer::take(2 * l.nx);
            if forward {
                for j in rows {
                    // SAFETY: this task writes only the rows of its band and reads those and
                    // the separator rows next to them, which no task writes in this phase;
                    // other bands are at least one separator row away. All indices lie inside
                    // the grid (j is an inner row), and `parts` holds 2·nx values.
                    unsafe { sweep_row(l, b, shared.0, j, (true, j == first, true), &mut parts) };
                }
            } else {
                for j in rows.rev() {
                    // SAFETY: as in the forward loop above: row j is this task's band.
                    unsafe { sweep_row(l, b, shared.0, j, (false, false, false), &mut parts) };
                }
            }
        });
    };
    let separators_phase = || {
        separators.par_iter().for_each(|&j| {
            let shared = &shared;
            let mut parts = Buffer::take(2 * l.nx);
            // SAFETY: separator rows are BAND_ROWS + 1 rows apart, so this task writes row j
            // and reads rows j ± 1 (band rows), which no task writes in this phase; j is an
            // inner row, and `parts` holds 2·nx values.
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
        // SAFETY: this function's own contract, passed on unchanged; `parts` holds at least
        // 2·nx ≥ 2·(hi − lo) values, as `sweep_row_split` needs.
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
    // SAFETY: this function's own contract, passed on unchanged.
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
///
/// # Safety
/// As [`sweep_row`].
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
    // SAFETY: k lies in rows j − 1..=j + 1 (inside the level's vector), which no other thread
    // writes during the call (the caller's contract).
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
            // SAFETY: k is in row j, which is this call's alone to read and write (the
            // caller's contract); no reference into the vector is alive.
            unsafe { *x.add(k) = prev };
        }
    } else {
        for k in (row + 1..row + nx - 1).rev() {
            let (a, c) = part(k);
            prev = a - c * prev;
            // SAFETY: as in the forward loop.
            unsafe { *x.add(k) = prev };
        }
    }
}

/// Row j of r = b − A·x on a coarse level (zero at inactive nodes and on the ring).
#[inline]
pub(super) fn residual_row_coarse(l: &Level, b: &[f64], x: &[f64], j: usize, r: &mut [f64]) {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::multigrid::Multigrid;
    use crate::operator::fixtures::{rough as field, slit_disc};

    /// The split coarse sweep ([`sweep_row_split`]) must give the numbers of the general one
    /// ([`sweep_row_impl`]) bit for bit, on every level of a cut geometry, forward from
    /// arbitrary old contents and backward from a current x, with every flag combination the
    /// banded sweep uses.
    #[test]
    fn split_coarse_sweep_matches_the_general_one_bit_for_bit() {
        let c = slit_disc([0.3, 0.01], [1.2, 0.009], 0.2, 160);
        let a = crate::operator::fixtures::laplace_operator(&c);
        let mg = Multigrid::new(a.clone()).unwrap();
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
                        // SAFETY: one thread, x1 and x2 are whole vectors of the level, j an
                        // inner row, `parts` 2·nx values.
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
}
