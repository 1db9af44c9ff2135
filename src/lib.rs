//! canalis: fully developed laminar flow in ducts of any cross-section.
//!
//! The pipeline, in one paragraph: a cross-section ([`geometry`]) from a shape file, a built-in
//! shape or a mask image is laid on a uniform Cartesian grid ([`grid`]), which classifies nodes as
//! fluid or solid and finds where each grid line crosses a wall. The [`operator`] numbers the
//! fluid nodes and assembles the symmetric cut-cell Laplacian of the unit problem −∇²ũ = 1,
//! ũ = 0 on every wall. The [`solver`] runs a preconditioned conjugate gradient. [`post`] turns ũ
//! into the figures of merit (flow integral, f·Re, velocity ratio, wall shear, force balance);
//! [`fluids`] supplies viscosity and density for an operating point; [`report`] formats results;
//! [`pipeline`] runs the stages in order from a validated configuration.

pub mod correlations;
pub mod error;
pub mod exact;
pub mod fluids;
pub mod geometry;
pub mod grid;
pub mod multigrid;
pub mod operator;
pub mod output;
pub mod pipeline;
pub mod post;
pub mod problem;
pub mod report;
pub mod solver;
pub mod study;
pub mod system;
pub mod units;
pub mod verify;

pub use error::{Error, Result};
