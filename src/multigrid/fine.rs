//! The fine level's part of the V-cycle: two streaming passes over the grid that smooth,
//! form and restrict the residual, prolong the coarse correction and return r·z.
//!
//! Owns: the passes ([`fine_pre`], [`fine_post`]), their row kernels ([`presmooth_row`],
//! [`half_sweep_row`], [`residual_row_fine`]), the smoother's diagonal d′ ([`diag_of_inv`]),
//! the ring buffers of rows ([`Rows`]) and the per-thread pool of row scratch ([`Buffer`],
//! which the transfers and the coarse sweeps take their scratch from too).
//!
//! Does not touch: the coarse levels or their stencils; the fine operator's own A·x (that is
//! `operator`'s, whose row helpers it reuses). No `unsafe` here: all of the module's is in
//! `smooth`.

use super::transfer::{prolong_row, restrict_line};
use crate::operator::{off_sum, span_neighbours, zero_outside, GridOperator};
use crate::solver::dot4;

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
pub(super) struct Fine<'a> {
    pub(super) a: &'a GridOperator,
    /// 1/d in single precision (see [`super::Multigrid`]).
    pub(super) inv: &'a [f32],
    /// Row scales of P.
    pub(super) scale: &'a [f32],
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
    for (k, off) in a.irregular_in_row(j) {
        if (k - row + j) % 2 == 1 {
            let s = off_sum(off, t(k + 1), t(k - 1), t(k + nx), t(k - nx));
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
    for (k, off) in a.irregular_in_row(j) {
        let i = k - row;
        if (i + j) % 2 == colour {
            let sum = off_sum(off, xc[i + 1], xc[i - 1], xn[i], xs[i]);
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
    for (k, off) in a.irregular_in_row(j) {
        let i = k - row;
        let sum = off_sum(off, xc[i + 1], xc[i - 1], xn[i], xs[i]);
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
pub(super) struct Buffer(Vec<f64>);

impl Buffer {
    pub(super) fn take(len: usize) -> Buffer {
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
pub(super) fn fine_pre(f: &Fine, b: &[f64], x: &mut [f64], restrict: Option<(&mut [f64], usize)>) {
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
pub(super) fn fine_post(
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
