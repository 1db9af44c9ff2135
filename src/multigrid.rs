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
//! - **Smoother**: one lexicographic Gauss–Seidel sweep before the coarse correction and one in
//!   the reverse order after it, so the V-cycle is a symmetric positive definite operator, as CG
//!   requires.
//! - **Coarsest level**: dense Cholesky (nalgebra) once the level is small.
//!
//! Invariant: knows the grid's index layout, nothing of geometry or physics.

use crate::operator::GridOperator;
use crate::solver::{LinearOperator, Preconditioner};
use nalgebra::{Cholesky, DMatrix, DVector, Dyn};
use std::cell::RefCell;

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
        use rayon::prelude::*;
        let nx = self.nx;
        let n = self.diag.len();
        // Rows in parallel (each output row is written by one task): the same numbers with any
        // number of threads.
        y.par_chunks_mut(nx).enumerate().for_each(|(j, row)| {
            if j == 0 || (j + 1) * nx >= n {
                row.iter_mut().for_each(|v| *v = 0.0);
                return;
            }
            row[0] = 0.0;
            row[nx - 1] = 0.0;
            for (i, out) in row.iter_mut().enumerate().take(nx - 1).skip(1) {
                let k = j * nx + i;
                let w = &LINK_WEIGHTS[self.links[k] as usize];
                *out = self.diag[k] * x[k]
                    - (w[0] * x[k + 1] + w[1] * x[k - 1] + w[2] * x[k + nx] + w[3] * x[k - nx]);
            }
        });
    }

    fn diagonal(&self) -> Vec<f64> {
        self.diag.clone()
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

/// One coarse level: a 9-point stencil per node of an nx × ny grid (zero rows where inactive).
struct Level {
    nx: usize,
    ny: usize,
    active: Vec<bool>,
    stencil: Vec<[f64; 9]>,
    /// 1/diagonal, 0 where inactive (inactive rows of `stencil` are all zero, so the smoother
    /// needs no branch).
    inv_diag: Vec<f64>,
}

impl Level {
    fn len(&self) -> usize {
        self.nx * self.ny
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
        self.stencil[k]
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

/// The Galerkin coarse level Pᵀ·A·P of a fine level; `scale` holds the row scales of P (None:
/// all 1).
fn coarsen(fine: &(dyn StencilRows + Sync), scale: Option<&[f64]>) -> Level {
    let sc = |k: usize| scale.map_or(1.0, |s| s[k]);
    let (fnx, fny) = (fine.nx(), fine.ny());
    let (nx, ny) = (coarse_size(fnx), coarse_size(fny));
    let mut active = vec![false; nx * ny];
    for j in 1..fny - 1 {
        let (pj, cj) = parents(j);
        for i in 1..fnx - 1 {
            if !fine.is_active(j * fnx + i) {
                continue;
            }
            let (pi, ci) = parents(i);
            for &(jj, _) in &pj[..cj] {
                for &(ii, _) in &pi[..ci] {
                    active[jj * nx + ii] = true;
                }
            }
        }
    }
    // Each fine row j adds to the coarse rows of its parents (one or two). Bands of BAND fine
    // rows touch coarse rows [b·BAND/2 + 1, (b + 1)·BAND/2 + 1], so bands two apart never share
    // a coarse row: the even bands run in parallel, then the odd ones. Within a band the sums
    // run in row order, and a coarse row shared by two bands gets the lower band first: the
    // same numbers with any number of threads.
    use rayon::prelude::*;
    const BAND: usize = 32;
    let mut stencil = vec![[0.0f64; 9]; nx * ny];
    let shared = SharedStencil(stencil.as_mut_ptr());
    let bands = (fny - 2).div_ceil(BAND);
    for phase in 0..2 {
        (0..bands)
            .into_par_iter()
            .filter(|b| b % 2 == phase)
            .for_each(|b| {
                let shared = &shared;
                for j in (1 + b * BAND)..(1 + (b + 1) * BAND).min(fny - 1) {
                    let (pj, cj) = parents(j);
                    for i in 1..fnx - 1 {
                        let k = j * fnx + i;
                        if !fine.is_active(k) {
                            continue;
                        }
                        let (pi, ci) = parents(i);
                        let entries = fine.row(k);
                        let sk = sc(k);
                        for (o, &(di, dj)) in OFFSETS.iter().enumerate() {
                            let a = entries[o];
                            if a == 0.0 {
                                continue;
                            }
                            let (i2, j2) = ((i as isize + di) as usize, (j as isize + dj) as usize);
                            let a = a * sk * sc(j2 * fnx + i2);
                            let (qi, ni) = parents(i2);
                            let (qj, nj) = parents(j2);
                            for &(cj1, wj1) in &pj[..cj] {
                                for &(ci1, wi1) in &pi[..ci] {
                                    let w1 = wi1 * wj1 * a;
                                    // SAFETY: coarse row cj1 belongs to this band's range,
                                    // which no other task of this phase touches (see above);
                                    // the index is inside the coarse grid.
                                    let row = unsafe { &mut *shared.0.add(cj1 * nx + ci1) };
                                    for &(cj2, wj2) in &qj[..nj] {
                                        for &(ci2, wi2) in &qi[..ni] {
                                            let oo = (cj2 + 1 - cj1) * 3 + (ci2 + 1 - ci1);
                                            row[oo] += w1 * wi2 * wj2;
                                        }
                                    }
                                }
                            }
                        }
                    }
                }
            });
    }
    let inv_diag = stencil
        .iter()
        .zip(&active)
        .map(|(st, &a)| if a { 1.0 / st[CENTRE] } else { 0.0 })
        .collect();
    Level {
        nx,
        ny,
        active,
        stencil,
        inv_diag,
    }
}

/// Scratch vectors of one coarse level.
struct Scratch {
    tmp: Vec<f64>,
    x: Vec<Vec<f64>>,
    b: Vec<Vec<f64>>,
    r: Vec<Vec<f64>>,
    r_fine: Vec<f64>,
}

/// The multigrid V-cycle preconditioner. Built once from the fine operator (setup), applied
/// once per CG iteration.
pub struct Multigrid<'a> {
    fine: &'a GridOperator,
    /// 1/d on the fine level, 0 at solid nodes.
    inv_diag: Vec<f64>,
    /// 1 at active nodes, 0 elsewhere: masks[0] the fine level, masks[l + 1] coarse level l.
    masks: Vec<Vec<f64>>,
    levels: Vec<Level>,
    /// Dense Cholesky factor of the coarsest level and the grid indices of its unknowns; None
    /// when there is only the fine level and it is solved by smoothing alone.
    coarsest: Option<(Cholesky<f64, Dyn>, Vec<usize>)>,
    scratch: RefCell<Scratch>,
}

impl<'a> Multigrid<'a> {
    /// Builds the hierarchy: coarsen until a level has at most [`DIRECT_LIMIT`] active nodes or
    /// cannot shrink, then factor that level.
    pub fn new(fine: &'a GridOperator) -> Multigrid<'a> {
        let fine_scale: Vec<f64> = fine
            .diag
            .iter()
            .map(|&d| if d == 0.0 { 0.0 } else { pscale_of(d) })
            .collect();
        let mut levels: Vec<Level> = Vec::new();
        loop {
            let (nx, ny, count) = match levels.last() {
                None => (
                    fine.nx,
                    fine.ny,
                    fine.diag.iter().filter(|&&d| d != 0.0).count(),
                ),
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
        let coarsest = levels.last().map(|l| {
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
                    let v = l.stencil[k][o];
                    if v == 0.0 {
                        continue;
                    }
                    let kk = (j as isize + dj) as usize * l.nx + (i as isize + di) as usize;
                    m[(q, pos[kk])] += v;
                }
                max_diag = max_diag.max(l.stencil[k][CENTRE]);
            }
            // A tiny shift keeps the factorisation defined if bilinear columns restricted to a
            // sliver of fluid became linearly dependent (a null direction of Aᶜ is one P maps to
            // zero, so the shift never reaches the fine grid).
            for q in 0..n {
                m[(q, q)] += 1e-13 * max_diag;
            }
            let chol = Cholesky::new(m).expect("Galerkin coarse operator is positive definite");
            (chol, idx)
        });
        let scratch = Scratch {
            tmp: Vec::with_capacity(fine.diag.len() / 2 + 4 * fine.ny),
            x: levels.iter().map(|l| vec![0.0; l.len()]).collect(),
            b: levels.iter().map(|l| vec![0.0; l.len()]).collect(),
            r: levels.iter().map(|l| vec![0.0; l.len()]).collect(),
            r_fine: vec![0.0; fine.diag.len()],
        };
        let inv_diag = fine
            .diag
            .iter()
            .map(|&d| if d != 0.0 { 1.0 / d } else { 0.0 })
            .collect();
        let mut masks = vec![fine_scale];
        for l in &levels {
            masks.push(
                l.active
                    .iter()
                    .map(|&a| if a { 1.0 } else { 0.0 })
                    .collect(),
            );
        }
        Multigrid {
            fine,
            inv_diag,
            masks,
            levels,
            coarsest,
            scratch: RefCell::new(scratch),
        }
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

/// Red–black Gauss–Seidel on the fine level: all nodes of one colour ((i + j) mod 2) are
/// independent for the 5-point operator, so a sweep has no dependency chain. The forward sweep
/// does red then black, the backward one black then red, which makes post-smoothing the adjoint
/// of pre-smoothing and the V-cycle symmetric. Branch-free: solid nodes have 1/d = 0 and zero
/// right-hand side, so they stay 0; the solid ring keeps every read inside the grid.
fn smooth_fine(a: &GridOperator, inv_diag: &[f64], b: &[f64], x: &mut [f64], forward: bool) {
    use rayon::prelude::*;
    let (nx, ny) = (a.nx, a.ny);
    let colours: [usize; 2] = if forward { [0, 1] } else { [1, 0] };
    let shared = SharedMut(x.as_mut_ptr());
    let len = x.len();
    for c in colours {
        (1..ny - 1).into_par_iter().with_min_len(64).for_each(|j| {
            let shared = &shared;
            // SAFETY: within one colour, row j writes only its own entries of that colour and
            // reads only entries of the other colour (its neighbours along the row and in rows
            // j ± 1), which no task of this colour writes; every index lies inside the grid
            // (solid ring). So no element is written by two tasks or read while written.
            let p = shared.0;
            let row = j * nx;
            let mut k = row + 1 + (j + 1 + c) % 2;
            while k < row + nx - 1 {
                debug_assert!(k + nx < len);
                let w = &LINK_WEIGHTS[a.links[k] as usize];
                unsafe {
                    let s = w[0] * *p.add(k + 1)
                        + w[1] * *p.add(k - 1)
                        + w[2] * *p.add(k + nx)
                        + w[3] * *p.add(k - nx);
                    *p.add(k) = (b[k] + s) * inv_diag[k];
                }
                k += 2;
            }
        });
    }
}

/// A raw pointer to the coarse stencils shared by the band tasks of [`coarsen`].
struct SharedStencil(*mut [f64; 9]);
// SAFETY: used only in `coarsen`, whose concurrent tasks write disjoint coarse rows.
unsafe impl Sync for SharedStencil {}
unsafe impl Send for SharedStencil {}

/// A raw pointer to share a vector between the tasks of one red–black half-sweep.
struct SharedMut(*mut f64);
// SAFETY: used only in `smooth_fine`, whose tasks touch disjoint elements (see there).
unsafe impl Sync for SharedMut {}
unsafe impl Send for SharedMut {}

/// Symmetric Gauss–Seidel on a coarse level: a lexicographic sweep forward (pre-smoothing) or
/// backward (post-smoothing), each one pass through the 9-point stencils.
fn smooth_coarse(l: &Level, b: &[f64], x: &mut [f64], forward: bool) {
    let nx = l.nx;
    let mut step = |k: usize| {
        let st = &l.stencil[k];
        let s = b[k]
            - st[0] * x[k - nx - 1]
            - st[1] * x[k - nx]
            - st[2] * x[k - nx + 1]
            - st[3] * x[k - 1]
            - st[5] * x[k + 1]
            - st[6] * x[k + nx - 1]
            - st[7] * x[k + nx]
            - st[8] * x[k + nx + 1];
        x[k] = s * l.inv_diag[k];
    };
    // Ring nodes inside this range have 1/d = 0 and stay 0; every read stays in the grid.
    let inner = nx + 1..l.len() - nx - 1;
    if forward {
        inner.for_each(&mut step);
    } else {
        inner.rev().for_each(&mut step);
    }
}

/// r = b − A·x on a coarse level.
fn residual_coarse(l: &Level, b: &[f64], x: &[f64], r: &mut [f64]) {
    let nx = l.nx;
    r.iter_mut().for_each(|v| *v = 0.0);
    for j in 1..l.ny - 1 {
        for i in 1..nx - 1 {
            let k = j * nx + i;
            let st = &l.stencil[k];
            if st[CENTRE] == 0.0 {
                continue;
            }
            r[k] = b[k]
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
}

/// 1-D restriction along a line: coarse node I takes fine 2I − 1 (weight 1) and fine 2I − 2,
/// 2I (weight ½), inner nodes only (the transpose of [`parents`]).
#[inline]
fn restrict_line(f: impl Fn(usize) -> f64, fn_len: usize, out: &mut [f64]) {
    let last = fn_len - 2; // last inner fine index
    let len = out.len();
    for (ci, o) in out.iter_mut().enumerate() {
        if ci == 0 || ci + 1 == len {
            *o = 0.0;
            continue;
        }
        let odd = 2 * ci - 1;
        let mut v = if odd <= last { f(odd) } else { 0.0 };
        if 2 * ci - 2 >= 1 && 2 * ci - 2 <= last {
            v += 0.5 * f(2 * ci - 2);
        }
        if 2 * ci <= last {
            v += 0.5 * f(2 * ci);
        }
        *o = v;
    }
}

/// b_c = Pᵀ·r (r on a fine grid of fnx × fny, b_c on the next coarser one), separably: along
/// x into `tmp` (fny × cnx), then along y. The fine residual is zero at solid nodes, so
/// restricting to the fluid needs no mask.
fn restrict(r: &[f64], fnx: usize, fny: usize, bc: &mut [f64], cnx: usize, tmp: &mut Vec<f64>) {
    let cny = bc.len() / cnx;
    tmp.resize(fny * cnx, 0.0);
    for j in 0..fny {
        let row = &r[j * fnx..(j + 1) * fnx];
        restrict_line(|i| row[i], fnx, &mut tmp[j * cnx..(j + 1) * cnx]);
    }
    let mut col = vec![0.0; cny];
    for ci in 0..cnx {
        restrict_line(|j| tmp[j * cnx + ci], fny, &mut col);
        for (cj, v) in col.iter().enumerate() {
            bc[cj * cnx + ci] = *v;
        }
    }
}

/// x += P·x_c on the fine nodes that are active (`mask` is 1 there, 0 elsewhere), separably:
/// along y into `tmp` (fny × cnx), then along x.
fn prolong_add(
    xc: &[f64],
    cnx: usize,
    x: &mut [f64],
    fnx: usize,
    fny: usize,
    mask: &[f64],
    tmp: &mut Vec<f64>,
) {
    tmp.resize(fny * cnx, 0.0);
    for j in 1..fny - 1 {
        let (p, n) = parents(j);
        let t = &mut tmp[j * cnx..(j + 1) * cnx];
        if n == 1 {
            t.copy_from_slice(&xc[p[0].0 * cnx..(p[0].0 + 1) * cnx]);
        } else {
            let (a, b) = (p[0].0 * cnx, p[1].0 * cnx);
            for (ci, tv) in t.iter_mut().enumerate() {
                *tv = 0.5 * (xc[a + ci] + xc[b + ci]);
            }
        }
    }
    for j in 1..fny - 1 {
        let t = &tmp[j * cnx..(j + 1) * cnx];
        let row = j * fnx;
        for i in 1..fnx - 1 {
            let v = if i % 2 == 1 {
                t[i.div_ceil(2)]
            } else {
                0.5 * (t[i / 2] + t[i / 2 + 1])
            };
            x[row + i] += mask[row + i] * v;
        }
    }
}

impl Multigrid<'_> {
    /// V-cycle on coarse level `l` (index into `levels`) for the right-hand side in
    /// scratch.b[l], result in scratch.x[l].
    fn cycle(&self, l: usize, s: &mut Scratch) {
        let lev = &self.levels[l];
        if l + 1 == self.levels.len() {
            if let Some((chol, idx)) = &self.coarsest {
                let rhs = DVector::from_iterator(idx.len(), idx.iter().map(|&k| s.b[l][k]));
                let sol = chol.solve(&rhs);
                s.x[l].iter_mut().for_each(|v| *v = 0.0);
                for (q, &k) in idx.iter().enumerate() {
                    s.x[l][k] = sol[q];
                }
            }
            return;
        }
        let next = &self.levels[l + 1];
        s.x[l].iter_mut().for_each(|v| *v = 0.0);
        smooth_coarse(lev, &s.b[l], &mut s.x[l], true);
        residual_coarse(lev, &s.b[l], &s.x[l], &mut s.r[l]);
        restrict(
            &s.r[l],
            lev.nx,
            lev.ny,
            &mut s.b[l + 1],
            next.nx,
            &mut s.tmp,
        );
        self.cycle(l + 1, s);
        let (head, tail) = s.x.split_at_mut(l + 1);
        prolong_add(
            &tail[0],
            next.nx,
            &mut head[l],
            lev.nx,
            lev.ny,
            &self.masks[l + 1],
            &mut s.tmp,
        );
        smooth_coarse(lev, &s.b[l], &mut s.x[l], false);
    }
}

impl Preconditioner for Multigrid<'_> {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        let a = self.fine;
        z.iter_mut().for_each(|v| *v = 0.0);
        smooth_fine(a, &self.inv_diag, r, z, true);

        if !self.levels.is_empty() {
            let mut s = self.scratch.borrow_mut();
            let s = &mut *s;
            // Fine residual r − A·z, restricted.
            a.apply(z, &mut s.r_fine);
            for ((rf, ri), m) in s.r_fine.iter_mut().zip(r).zip(&self.masks[0]) {
                *rf = (ri - *rf) * m;
            }
            let c0 = &self.levels[0];
            restrict(&s.r_fine, a.nx, a.ny, &mut s.b[0], c0.nx, &mut s.tmp);
            self.cycle(0, s);
            prolong_add(&s.x[0], c0.nx, z, a.nx, a.ny, &self.masks[0], &mut s.tmp);
        }

        smooth_fine(a, &self.inv_diag, r, z, false);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{Primitive, Shape};
    use crate::grid::{classify, Grid};
    use crate::solver::{pcg, CgParams};

    #[test]
    fn galerkin_levels_are_symmetric() {
        let s = Shape::new(
            vec![Primitive::Circle {
                center: [0.0, 0.0],
                radius: 1.0,
            }],
            vec![Primitive::Rect {
                center: [0.5, 0.0],
                size: [1.2, 0.05],
                corner_radius: 0.0,
                angle: 0.3,
            }],
        );
        let (lo, hi) = s.bbox();
        let c = classify(&s, Grid::covering(lo, hi, 64)).unwrap();
        let a = GridOperator::new(&c);
        let mg = Multigrid::new(&a);
        for l in &mg.levels {
            for k in 0..l.len() {
                if !l.active[k] {
                    continue;
                }
                let (i, j) = (k % l.nx, k / l.nx);
                for (o, &(di, dj)) in OFFSETS.iter().enumerate() {
                    let v = l.stencil[k][o];
                    if v == 0.0 {
                        continue;
                    }
                    let kk = (j as isize + dj) as usize * l.nx + (i as isize + di) as usize;
                    let back = l.stencil[kk][8 - o];
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
}
