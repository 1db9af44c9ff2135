//! canalis: fully developed laminar flow in ducts of any cross-section.
//!
//! The pipeline, in one paragraph: an [`input`] (a shape file, a built-in shape, a mask image or
//! a drawing) is loaded into a cross-section ([`geometry`]) and laid on a uniform Cartesian grid
//! ([`grid`]), which classifies nodes as fluid or solid and finds where each grid line crosses a
//! wall, and which wall. A [`problem`] says what is solved on the fluid nodes,
//! c·u − ∇·(k∇u) = f with a condition per wall, and writes the cut-cell row of each unknown;
//! the [`operator`] stores those rows (CSR or matrix-free on the grid). A [`system`] owns a
//! problem's numbering, operator and preconditioner ([`multigrid`]) and solves it by the
//! conjugate gradient of [`solver`]. The flow problem −∇²ũ = 1, ũ = 0 on every wall, is one
//! system: [`post`] turns ũ into the figures of merit (flow integral, f·Re, velocity ratio,
//! wall shear, force balance); [`heat`] solves the two heat-transfer problems on the same system
//! (Nu_H1, Nu_T); [`entrance`] marches the thermal entrance along the passage. [`operating`]
//! scales the unit solution to a fluid ([`fluids`]) and a drive; [`study`] estimates the
//! numerical uncertainty from the grids that [`study::runs`] solves around the run.
//! [`pipeline`] runs the stages in order from a validated configuration and returns an
//! [`outcome::Outcome`], which [`report`] (JSON and text) and [`output`] (the files of `--out`)
//! consume.
//!
//! Dependencies point one way, each module using only those before it in this list (and the
//! leaves [`error`] and [`units`]): geometry → grid → problem → operator → solver → multigrid →
//! system → post → heat → entrance → fluids → operating → study → outcome → report → output →
//! input → pipeline → exact → verify.
//! Two exceptions: [`operator`] implements the solver's `LinearOperator` trait for its grid
//! operator, and [`study::runs`], which [`pipeline::run`] calls, calls back
//! `pipeline::run_once` for each grid of an estimate. DEVELOPERS.md has the module map.

pub mod correlations;
pub mod entrance;
pub mod error;
pub mod exact;
pub mod fluids;
pub mod geometry;
pub mod grid;
pub mod heat;
pub mod hydrodynamic;
pub mod input;
pub mod multigrid;
pub mod operating;
pub mod operator;
pub mod outcome;
pub mod output;
pub mod pipeline;
pub mod post;
pub mod problem;
pub mod rating;
pub mod report;
pub mod resolution;
pub mod singular;
pub mod solver;
pub mod study;
pub mod system;
pub mod units;
pub mod verify;

pub use error::{Error, Result};
