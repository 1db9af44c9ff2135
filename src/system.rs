//! A discrete problem ready to solve: numbering, operator, preconditioner and vector layout
//! in one object.
//!
//! Owns: [`System`], built once from a [`Problem`] and a [`Method`] (set-up: numbering,
//! assembly or the matrix-free operator, the multigrid hierarchy), then applied many times:
//! [`System::solve`] solves A·x = b by preconditioned CG, [`System::smallest_eigenpair`] the
//! pencil A·f = λ·W·f by LOBPCG, both on vectors in unknown order ([`Numbering`]) whatever
//! layout the method works in (the multigrid path works on whole-grid vectors, zero at solid
//! nodes; the system scatters and gathers). The flow solve, the heat-transfer solves and the
//! steps of a march are short calls to it; a march changes the shift between steps with
//! [`System::set_shift`], which rebuilds the operator and the hierarchy.
//!
//! Invariant: knows the solver's traits and the two operator forms, nothing of physics beyond
//! the [`Problem`] it was given.

use crate::error::Result;
use crate::multigrid::Multigrid;
use crate::operator::{assemble, GridOperator};
use crate::problem::{Field, Numbering, Problem};
use crate::solver::{
    bicgstab, pcg_in, smallest_eigenpair, BicgWorkspace, CgInfo, CgParams, CgWorkspace, EigenInfo,
    EigenParams, Identity, InnerCg, Jacobi, LinearOperator, Monitor, Preconditioner, Silent,
};
use sprs::CsMat;
use std::time::Instant;

/// Which preconditioner the conjugate gradient uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Method {
    /// Plain CG.
    Plain,
    /// Jacobi-preconditioned CG.
    Jacobi,
    /// CG preconditioned by a geometric multigrid V-cycle with Galerkin coarse levels.
    #[default]
    Multigrid,
}

impl Method {
    pub fn name(self) -> &'static str {
        match self {
            Method::Plain => "conjugate gradient",
            Method::Jacobi => "Jacobi-preconditioned conjugate gradient",
            Method::Multigrid => "multigrid-preconditioned conjugate gradient",
        }
    }
}

/// The operator and preconditioner of a method.
enum Operators {
    /// CSR over the unknowns (the reference paths), with Jacobi or no preconditioning.
    Matrix {
        a: CsMat<f64>,
        jacobi: Option<Jacobi>,
    },
    /// The matrix-free grid operator inside its multigrid hierarchy.
    Grid(Box<Multigrid>),
}

/// Wall-clock seconds of the set-up.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct SetupTimings {
    /// The operator (CSR assembly or the matrix-free operator).
    pub assembly: f64,
    /// The preconditioner (the multigrid hierarchy).
    pub setup: f64,
}

/// A problem with its numbering, operator and preconditioner (see the module documentation).
pub struct System<'a> {
    problem: Problem<'a>,
    numbering: Numbering,
    method: Method,
    operators: Operators,
    work: CgWorkspace,
    bicg: BicgWorkspace,
    /// Whole-grid right-hand side and solution of the multigrid path (empty otherwise).
    grid_b: Vec<f64>,
    grid_x: Vec<f64>,
    /// On the multigrid path after [`System::update_shift`] without a refresh: the exact
    /// operator of the current problem (the hierarchy's own fine operator is an older one's),
    /// and the diagonal without shift it is updated from.
    current: Option<GridOperator>,
    unshifted_diag: Option<Vec<f64>>,
    timings: SetupTimings,
}

impl<'a> System<'a> {
    /// Numbers the unknowns, builds the operator and sets up the preconditioner.
    pub fn new(problem: Problem<'a>, method: Method) -> Result<System<'a>> {
        let numbering = Numbering::new(problem.classified);
        let mut system = System {
            problem,
            numbering,
            method,
            operators: Operators::Matrix {
                a: CsMat::zero((0, 0)),
                jacobi: None,
            },
            work: CgWorkspace::default(),
            bicg: BicgWorkspace::default(),
            grid_b: Vec::new(),
            grid_x: Vec::new(),
            current: None,
            unshifted_diag: None,
            timings: SetupTimings::default(),
        };
        system.build()?;
        Ok(system)
    }

    /// (Re)builds the operator and the preconditioner from the problem.
    fn build(&mut self) -> Result<()> {
        let t0 = Instant::now();
        let (operators, t1) = match self.method {
            Method::Plain | Method::Jacobi => {
                let a = assemble(&self.problem, &self.numbering);
                let t1 = Instant::now();
                let jacobi = (self.method == Method::Jacobi).then(|| Jacobi::new(&a));
                (Operators::Matrix { a, jacobi }, t1)
            }
            Method::Multigrid => {
                let op = GridOperator::new(&self.problem, &self.numbering);
                let t1 = Instant::now();
                (Operators::Grid(Box::new(Multigrid::new(op)?)), t1)
            }
        };
        self.operators = operators;
        self.current = None;
        self.timings = SetupTimings {
            assembly: (t1 - t0).as_secs_f64(),
            setup: t1.elapsed().as_secs_f64(),
        };
        Ok(())
    }

    /// Replaces the shift c and rebuilds the operator and the preconditioner (a marching step
    /// of another length).
    pub fn set_shift(&mut self, shift: Field) -> Result<()> {
        self.problem.shift = shift;
        self.build()
    }

    /// Replaces the shift c. With `refresh` the operator and the preconditioner are rebuilt
    /// ([`System::set_shift`]); without it, on the multigrid path, only the operator's diagonal
    /// is updated and the last hierarchy preconditions the new operator (any fixed symmetric
    /// positive definite preconditioner keeps CG exact; one built for a shift within a small
    /// factor of the new one costs an iteration or two more, far less than a set-up). A march
    /// whose steps grow geometrically refreshes every few steps.
    pub fn update_shift(&mut self, shift: Field, refresh: bool) -> Result<()> {
        if refresh || self.method != Method::Multigrid {
            return self.set_shift(shift);
        }
        let t0 = Instant::now();
        let h2 = self.problem.classified.grid.h * self.problem.classified.grid.h;
        if self.unshifted_diag.is_none() {
            let plain = Problem {
                shift: Field::Zero,
                ..self.problem.clone()
            };
            let mut d = vec![0.0; self.problem.classified.grid.len()];
            for (q, k) in self.numbering.nodes().enumerate() {
                d[k] = plain.stencil(k, q).diag;
            }
            self.unshifted_diag = Some(d);
        }
        self.problem.shift = shift;
        let Operators::Grid(mg) = &self.operators else {
            unreachable!("the multigrid path has a hierarchy");
        };
        let current = self.current.get_or_insert_with(|| mg.operator().clone());
        let base = self.unshifted_diag.as_ref().expect("set above");
        // The same sum as Problem::stencil: the links' part, then c·h².
        for (q, k) in self.numbering.nodes().enumerate() {
            let c = self.problem.shift.at(q);
            current.diag[k] = if c != 0.0 { base[k] + c * h2 } else { base[k] };
        }
        self.timings = SetupTimings {
            assembly: t0.elapsed().as_secs_f64(),
            setup: 0.0,
        };
        Ok(())
    }

    pub fn problem(&self) -> &Problem<'a> {
        &self.problem
    }

    pub fn numbering(&self) -> &Numbering {
        &self.numbering
    }

    /// The numbering, the system given up (its operators borrow nothing the caller needs).
    pub fn into_numbering(self) -> Numbering {
        self.numbering
    }

    pub fn method(&self) -> Method {
        self.method
    }

    /// Seconds of the last set-up.
    pub fn timings(&self) -> SetupTimings {
        self.timings
    }

    /// The multigrid hierarchy, on that path.
    pub fn multigrid(&self) -> Option<&Multigrid> {
        match &self.operators {
            Operators::Grid(mg) => Some(mg),
            Operators::Matrix { .. } => None,
        }
    }

    /// The right-hand side of the source `source` ([`Problem::rhs`]), in unknown order.
    pub fn rhs(&self, source: &Field) -> Vec<f64> {
        self.problem.rhs(&self.numbering, source)
    }

    /// Solves A·x = b (unknown order), starting from x.
    pub fn solve(&mut self, b: &[f64], x: &mut [f64], params: &CgParams) -> Result<CgInfo> {
        self.solve_monitored(b, x, params, &Silent)
    }

    /// [`System::solve`] reporting every CG iteration to `monitor`.
    pub fn solve_monitored(
        &mut self,
        b: &[f64],
        x: &mut [f64],
        params: &CgParams,
        monitor: &dyn Monitor,
    ) -> Result<CgInfo> {
        let name = self.method.name();
        match &self.operators {
            Operators::Matrix { a, jacobi } => {
                let pre: &dyn Preconditioner = match jacobi {
                    Some(j) => j,
                    None => &Identity,
                };
                pcg_in(&mut self.work, a, pre, b, x, params, name, monitor)
            }
            Operators::Grid(mg) => {
                let op = self.current.as_ref().unwrap_or(mg.operator());
                // The whole-grid vectors, taken on the first solve (fresh pages are slow to
                // fault in; a system that is never solved never pays for them).
                let n = mg.operator().diag.len();
                self.grid_b.resize(n, 0.0);
                self.grid_x.resize(n, 0.0);
                let (gb, gx) = (&mut self.grid_b, &mut self.grid_x);
                for (q, k) in self.numbering.nodes().enumerate() {
                    gb[k] = b[q];
                    gx[k] = x[q];
                }
                let info = pcg_in(
                    &mut self.work,
                    op,
                    mg.as_ref(),
                    gb,
                    gx,
                    params,
                    name,
                    monitor,
                )?;
                for (q, k) in self.numbering.nodes().enumerate() {
                    x[q] = gx[k];
                }
                Ok(info)
            }
        }
    }

    /// Solves (A + B)·x = b (unknown order) by BiCGStab ([`bicgstab`]), starting from x, for a
    /// nonsymmetric perturbation B given on vectors of unknowns (a march's cross-flow
    /// convection); the preconditioner is A's (the multigrid V-cycle of the symmetric part,
    /// Jacobi or none).
    pub fn solve_perturbed(
        &mut self,
        perturbation: &dyn LinearOperator,
        b: &[f64],
        x: &mut [f64],
        params: &CgParams,
    ) -> Result<CgInfo> {
        let name = "BiCGStab preconditioned by the symmetric part";
        match &self.operators {
            Operators::Matrix { a, jacobi } => {
                let pre: &dyn Preconditioner = match jacobi {
                    Some(j) => j,
                    None => &Identity,
                };
                let sum = Sum(a, perturbation);
                bicgstab(&mut self.bicg, &sum, pre, b, x, params, name)
            }
            Operators::Grid(mg) => {
                let op = self.current.as_ref().unwrap_or(mg.operator());
                let on_op = OnUnknowns::new(op, mg.as_ref(), &self.numbering);
                let on_pre = OnUnknowns::new(op, mg.as_ref(), &self.numbering);
                let sum = Sum(&on_op, perturbation);
                bicgstab(&mut self.bicg, &sum, &on_pre, b, x, params, name)
            }
        }
    }

    /// The smallest eigenpair of A·f = λ·W·f, W = diag(`weights`) (unknown order, scaled
    /// like the rows of A), by LOBPCG ([`smallest_eigenpair`]) preconditioned by the
    /// multigrid V-cycle, or on the reference paths by an inner CG of the method to a relative
    /// residual of 1e-2. `x` holds the start and returns the eigenvector; `name` names the
    /// solve in a non-convergence error.
    pub fn smallest_eigenpair(
        &self,
        weights: &[f64],
        x: &mut [f64],
        params: &EigenParams,
        name: &str,
    ) -> Result<EigenInfo> {
        match &self.operators {
            Operators::Matrix { a, jacobi } => {
                let pre: &dyn Preconditioner = match jacobi {
                    Some(j) => j,
                    None => &Identity,
                };
                let inner = InnerCg::new(
                    a,
                    pre,
                    CgParams {
                        tolerance: 1e-2,
                        ..CgParams::default()
                    },
                );
                smallest_eigenpair(a, &inner, weights, x, &[], params, name)
            }
            Operators::Grid(mg) => {
                let op = self.current.as_ref().unwrap_or(mg.operator());
                let on = OnUnknowns::new(op, mg.as_ref(), &self.numbering);
                smallest_eigenpair(&on, &on, weights, x, &[], params, name)
            }
        }
    }
}

/// The sum of two operators on the same vectors.
struct Sum<'a>(&'a dyn LinearOperator, &'a dyn LinearOperator);

impl LinearOperator for Sum<'_> {
    fn dim(&self) -> usize {
        self.0.dim()
    }

    fn apply(&self, x: &[f64], y: &mut [f64]) {
        let mut z = vec![0.0; y.len()];
        self.0.apply(x, y);
        self.1.apply(x, &mut z);
        for (y, z) in y.iter_mut().zip(&z) {
            *y += z;
        }
    }

    fn diagonal(&self) -> Vec<f64> {
        let mut d = self.0.diagonal();
        for (d, e) in d.iter_mut().zip(self.1.diagonal()) {
            *d += e;
        }
        d
    }

    fn abs_product_norm(&self, x: &[f64]) -> f64 {
        self.0.abs_product_norm(x) + self.1.abs_product_norm(x)
    }
}

/// A whole-grid operator and preconditioner (the multigrid path's, zero at solid nodes) seen
/// on vectors of unknowns: scatter to the grid, apply, gather back. The eigen-solver's vector
/// work then runs on the unknowns only, a third to a half of the grid nodes.
struct OnUnknowns<'a> {
    op: &'a dyn LinearOperator,
    pre: &'a dyn Preconditioner,
    num: &'a Numbering,
    /// Grid vectors in and out; entries at solid nodes stay zero.
    scratch: std::cell::RefCell<(Vec<f64>, Vec<f64>)>,
}

impl<'a> OnUnknowns<'a> {
    fn new(op: &'a dyn LinearOperator, pre: &'a dyn Preconditioner, num: &'a Numbering) -> Self {
        let n = op.dim();
        OnUnknowns {
            op,
            pre,
            num,
            scratch: std::cell::RefCell::new((vec![0.0; n], vec![0.0; n])),
        }
    }

    fn through(&self, x: &[f64], y: &mut [f64], f: impl Fn(&[f64], &mut [f64])) {
        let mut s = self.scratch.borrow_mut();
        let (gx, gy) = &mut *s;
        for (q, k) in self.num.nodes().enumerate() {
            gx[k] = x[q];
        }
        f(gx, gy);
        for (q, k) in self.num.nodes().enumerate() {
            y[q] = gy[k];
        }
    }
}

impl LinearOperator for OnUnknowns<'_> {
    fn dim(&self) -> usize {
        self.num.len()
    }

    fn apply(&self, x: &[f64], y: &mut [f64]) {
        self.through(x, y, |gx, gy| self.op.apply(gx, gy));
    }

    fn diagonal(&self) -> Vec<f64> {
        let d = self.op.diagonal();
        self.num.nodes().map(|k| d[k]).collect()
    }

    fn abs_product_norm(&self, x: &[f64]) -> f64 {
        let mut s = self.scratch.borrow_mut();
        let gx = &mut s.0;
        for (q, k) in self.num.nodes().enumerate() {
            gx[k] = x[q];
        }
        self.op.abs_product_norm(gx)
    }
}

impl Preconditioner for OnUnknowns<'_> {
    fn apply(&self, r: &[f64], z: &mut [f64]) {
        self.through(r, z, |gr, gz| self.pre.apply(gr, gz));
    }
}
