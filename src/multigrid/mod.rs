//! Geometric multigrid with Galerkin coarse operators, as a preconditioner for CG.
//!
//! Owns: the level hierarchy built from the fine [`GridOperator`], the transfers, the smoother,
//! the coarsest solve and the V-cycle; it implements the solver's [`Preconditioner`], so CG
//! sees only the solver's two traits (the fine operator's own A·x is `operator`'s).
//!
//! The parts (Trottenberg, Oosterlee & Schüller, *Multigrid*, 2001, ch. 2 and 7; the Galerkin
//! product as in algebraic multigrid, Ruge & Stüben 1987), with the file that holds each:
//! - **Coarsening** (`setup`): vertex-centred; with the solid ring at index 0 on both grids,
//!   coarse node (I, J) sits on fine node (2I − 1, 2J − 1) (`setup::parents`).
//! - **Prolongation P** (`transfer`): bilinear interpolation from the (up to four) coarse
//!   parents of a fine node, restricted to the fluid, with the rows of wall nodes scaled by 4/d
//!   (`setup::pscale_of`); a coarse node exists where at least one fine fluid node
//!   interpolates from it. **Restriction R = Pᵀ.**
//! - **Level operators** (`setup`): A_c = Pᵀ·A·P (Galerkin), a 9-point stencil on every coarse
//!   level. Nothing of the geometry is re-discretised, so a gap thinner than the coarse
//!   spacing, a fin or a tiny passage stays exactly as the fine operator has it.
//! - **Smoother**: on the fine level (`fine`) one red–black Gauss–Seidel sweep before the
//!   coarse correction and one in the reverse colour order after it, done in two streaming
//!   passes over the grid with the residual, the transfers and r·z (`fine::fine_pre`,
//!   `fine::fine_post`); on the coarse levels (`smooth`) a banded lexicographic sweep (bands
//!   in parallel, then the separator rows between them) forward before and backward after.
//!   Post-smoothing is the adjoint of pre-smoothing and the restricted residual uses the
//!   smoother's own diagonal, so the V-cycle is a symmetric positive definite operator, as CG
//!   requires (symmetric to round-off; tested).
//! - **Storage**: the fine level is the matrix-free [`GridOperator`] (diagonal and a link
//!   bitmask per node); each coarse level stores every distinct stencil once with a 4-byte index
//!   per node (see `setup::Level`), and nearly all of its rows are the interior stencil,
//!   which the sweeps apply from registers.
//! - **Coarsest level** (`setup`): dense Cholesky (nalgebra) once the level is small; a level
//!   it cannot factor is an [`Error::Numerical`](crate::Error::Numerical) from
//!   [`Multigrid::new`], not a panic.
//!
//! This file holds the orchestration only: the [`Multigrid`] struct, its setup ([`Multigrid::new`]
//! calls the parts in order), the V-cycle and the [`Preconditioner`] implementation. It computes
//! no stencil, transfer or sweep itself. All `unsafe` code of the module is in `smooth` (the
//! only file that allows it).
//!
//! Invariant: knows the grid's index layout, nothing of geometry or physics.
#![deny(unsafe_code)]

mod fine;
mod setup;
mod smooth;
mod transfer;

use crate::error::Result;
use crate::operator::GridOperator;
use crate::solver::{Preconditioner, BLOCK};
use fine::{fine_post, fine_pre, Fine};
use setup::{coarse_size, coarsen, pscale_of, Coarsest, Level};
use smooth::{residual_row_coarse, smooth_coarse};
use std::sync::Mutex;
use transfer::{prepare_tmp, prolong_add, restrict_columns, restrict_rows};

/// c·H² (the shift against a level's spacing H) from which a level needs no coarser one: the
/// shift then outweighs the Laplacian's diagonal (4) fourfold, and Gauss–Seidel reduces every
/// error component by about that factor per sweep.
const SHIFT_DOMINATES: f64 = 16.0;

/// Coarsest levels at or below this many active nodes are solved directly.
const DIRECT_LIMIT: usize = 400;

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
pub struct Multigrid {
    fine: GridOperator,
    /// 1/d on the fine level, 0 at solid nodes, in single precision: the smoother is then
    /// Gauss–Seidel for the matrix A′ whose diagonal is d′ = 1/fl(1/d), a relative change below
    /// 6e-8 (it saves 4 bytes a node in each pass). The fine residual that is restricted is
    /// b − A′·x, the smoother's own matrix, which keeps the V-cycle exactly a symmetric
    /// operator (with the exact A there the cycle's asymmetry was measured at 2e-9, the order
    /// of d′ − d; the V-cycle then approximates A′⁻¹, a preconditioner for A as good as A⁻¹'s
    /// approximation). d′ is recomputed from this vector where the residual needs it
    /// (`fine::diag_of_inv`) rather than stored: 10 MB fewer to fault in at a million unknowns
    /// and 8 bytes a node fewer read per V-cycle, for one division a node.
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

impl Multigrid {
    /// Builds the hierarchy: coarsen until a level has at most `DIRECT_LIMIT` active nodes or
    /// cannot shrink, then factor that level.
    ///
    /// # Errors
    /// [`Error::Numerical`](crate::Error::Numerical) when the coarsest level's Galerkin
    /// operator is not numerically positive definite, so its Cholesky factorisation breaks
    /// down.
    pub fn new(fine: GridOperator) -> Result<Multigrid> {
        use rayon::prelude::*;
        // The fine level's per-node numbers in one pass: row scale of P, 1/d.
        let n = fine.diag.len();
        let (mut fine_scale, mut inv_diag) = (vec![0.0f32; n], vec![0.0f32; n]);
        fine_scale
            .par_chunks_mut(BLOCK)
            .zip(inv_diag.par_chunks_mut(BLOCK))
            .zip(fine.diag.par_chunks(BLOCK))
            .enumerate()
            .for_each(|(blk, ((sc, inv), d))| {
                for i in 0..d.len() {
                    if d[i] != 0.0 {
                        sc[i] = pscale_of(d[i], fine.regular_diag(blk * BLOCK + i)) as f32;
                        inv[i] = (1.0 / d[i]) as f32;
                    }
                }
            });
        let fine_count = fine.diag.par_iter().filter(|&&d| d != 0.0).count();
        let mut levels: Vec<Level> = Vec::new();
        let mut shift_stop = false;
        loop {
            let (nx, ny, count) = match levels.last() {
                None => (fine.nx, fine.ny, fine_count),
                Some(l) => (l.nx, l.ny, l.active_count()),
            };
            if count <= DIRECT_LIMIT || coarse_size(nx) >= nx || coarse_size(ny) >= ny {
                break;
            }
            // A shift c with c·H² ≥ SHIFT_DOMINATES on the next level (H its spacing) damps
            // every error component there by the smoother alone: no coarser level is needed,
            // and the last one is smoothed instead of solved.
            if fine.mean_shift * 4f64.powi(levels.len() as i32 + 1) >= SHIFT_DOMINATES {
                shift_stop = true;
                break;
            }
            let next = match levels.last() {
                None => coarsen(&fine, Some(&fine_scale)),
                Some(l) => coarsen(l, None),
            };
            levels.push(next);
        }
        let coarsest = if shift_stop {
            None
        } else {
            levels.last().map(Coarsest::new).transpose()?
        };
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

    /// The fine-level operator the hierarchy was built from.
    pub fn operator(&self) -> &GridOperator {
        &self.fine
    }
}

impl Multigrid {
    /// V-cycle on coarse level `l` (index into `levels`) for the right-hand side in
    /// scratch.b[l], result in scratch.x[l].
    fn cycle(&self, l: usize, s: &mut Scratch) {
        let lev = &self.levels[l];
        if l + 1 == self.levels.len() {
            match &self.coarsest {
                Some(coarsest) => coarsest.solve(&s.b[l], &mut s.x[l]),
                // A level the shift dominates: one symmetric sweep pair from zero.
                None => {
                    smooth_coarse(lev, &s.b[l], &mut s.x[l], true);
                    smooth_coarse(lev, &s.b[l], &mut s.x[l], false);
                }
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

impl Preconditioner for Multigrid {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        self.apply_dot(r, z);
    }

    fn apply_dot(&self, r: &[f64], z: &mut [f64]) -> f64 {
        let a = &self.fine;
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
    use crate::operator::fixtures::{rough as field, slit_disc};
    use crate::operator::Numbering;
    use crate::solver::dot4;

    /// On a slit thinner than a cell (thin nodes, see [`GridOperator`]) the V-cycle must stay
    /// symmetric, u·M⁻¹v = v·M⁻¹u, and positive, and `apply_dot` must return r·z.
    #[test]
    fn the_cycle_is_symmetric_on_thin_walls() {
        let c = slit_disc([0.3, 0.01], [1.2, 0.009], 0.2, 80);
        let a = crate::operator::fixtures::laplace_operator(&c);
        let num = Numbering::new(&c);
        let n = a.diag.len();
        let mg = Multigrid::new(a.clone()).unwrap();
        let mut u = vec![0.0; n];
        let mut v = vec![0.0; n];
        for k in num.nodes() {
            u[k] = field(k, 1.1);
            v[k] = field(k, 2.7);
        }
        let (mut mu, mut mv) = (vec![0.0; n], vec![0.0; n]);
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
}
