//! The transfers between a level and the next coarser one: restriction R = Pᵀ and prolongation
//! P (bilinear, with the fine level's row scales), both separable and row by row.
//!
//! Owns: the 1-D restriction of a line ([`restrict_line`]), the restriction of a residual
//! given row by row ([`restrict_rows`], [`restrict_columns`], the buffer of x-restricted rows
//! [`prepare_tmp`]) and the prolongation of one row or of a whole level ([`prolong_row`],
//! [`prolong_add`]).
//!
//! Does not touch: any operator or stencil (the residual rows come from the caller), the
//! smoothers, or the coarse-node layout, which it takes from `setup` ([`parents`]).

use super::fine::Buffer;
use super::setup::parents;

/// 1-D restriction along a line: coarse node I takes fine 2I − 1 (weight 1) and fine 2I − 2,
/// 2I (weight ½) (the transpose of [`parents`]). `row` must be zero on its ring and hold at
/// least 2·(out.len() − 2) + 1 entries (pad with zeros), so no index needs a test.
#[inline]
pub(super) fn restrict_line(row: &[f64], out: &mut [f64]) {
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
pub(super) fn restrict_rows(
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
pub(super) fn prepare_tmp(tmp: &mut Vec<f64>, fny: usize, cny: usize, cnx: usize) {
    let rows = (2 * cny).max(fny);
    tmp.resize(rows * cnx, 0.0);
    tmp[fny * cnx..].iter_mut().for_each(|v| *v = 0.0);
}

/// The y half of the restriction: coarse row J takes x-restricted fine rows 2J − 1 with weight
/// 1, 2J − 2 and 2J with ½.
#[inline]
pub(super) fn restrict_columns(tmp: &[f64], bc: &mut [f64], cnx: usize) {
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
pub(super) fn prolong_row<S: Copy + Into<f64>>(
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
pub(super) fn prolong_add(
    xc: &[f64],
    cnx: usize,
    x: &mut [f64],
    fnx: usize,
    fny: usize,
    mask: &[u8],
) {
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
