//! Helpers shared by the integration tests: one per boundary, so that an API change of the
//! library touches one place.
//!
//! * [`solve_case`]: the library's solve boundary (grid + `pipeline::solve_unit`).
//! * [`Row`], [`Table`]: a convergence table with observed orders, printed by the tests.

use canalis::geometry::Shape;
use canalis::grid::Grid;
use canalis::outcome::UnitSolution;
use canalis::pipeline::{solve_unit, UnitOptions};
use canalis::post::WallKind;

/// Solves the unit problem −∇²ũ = 1, ũ = 0 on the walls, of `shape` (true curves, so the wall
/// points serve as data of the shear fit) on a grid of `cells` cells across the longer side of
/// its bounding box, with the default options. Panics on failure: in a test that is a bug.
pub fn solve_case(shape: &Shape, cells: usize) -> UnitSolution {
    let (lo, hi) = shape.bbox();
    let grid = Grid::covering(lo, hi, cells);
    // The flow problem only (heat transfer has its own tests in tests/heat.rs).
    let opts = UnitOptions {
        heat: false,
        ..Default::default()
    };
    match solve_unit(shape, grid, WallKind::Exact, &opts) {
        Ok(sol) => sol,
        Err(e) => panic!("solving {:?} on {cells} cells failed: {e}", shape.name),
    }
}

/// Observed order of convergence p = log2(e_coarse / e_fine) for grids of spacing ratio 2.
pub fn observed_order(e_coarse: f64, e_fine: f64) -> f64 {
    (e_coarse.abs() / e_fine.abs()).log2()
}

/// Relative difference |value − reference| / |reference|.
pub fn rel_err(value: f64, reference: f64) -> f64 {
    ((value - reference) / reference).abs()
}

/// One grid of a convergence study: cells across, computed value, its relative error.
#[derive(Debug, Clone, Copy)]
pub struct Row {
    pub cells: usize,
    pub value: f64,
    pub error: f64,
}

/// A convergence study of one quantity on successively halved grids.
#[derive(Debug, Clone)]
pub struct Table {
    pub title: String,
    pub quantity: &'static str,
    pub reference: f64,
    pub rows: Vec<Row>,
}

impl Table {
    pub fn new(title: impl Into<String>, quantity: &'static str, reference: f64) -> Table {
        Table {
            title: title.into(),
            quantity,
            reference,
            rows: Vec::new(),
        }
    }

    /// Adds the value computed on `cells` cells; its error is relative to the reference.
    pub fn push(&mut self, cells: usize, value: f64) {
        self.rows.push(Row {
            cells,
            value,
            error: rel_err(value, self.reference),
        });
    }

    /// Observed order between row k − 1 and row k (grids of spacing ratio 2).
    pub fn order(&self, k: usize) -> f64 {
        observed_order(self.rows[k - 1].error, self.rows[k].error)
    }

    pub fn last(&self) -> Row {
        *self.rows.last().expect("a table with at least one row")
    }

    /// The table as text: one line per grid with cells, value, relative error and the observed
    /// order against the previous grid. Returned whole, so that tests running in parallel can
    /// print it with one `println!` and their tables do not interleave.
    pub fn render(&self) -> String {
        let mut s = format!(
            "{} — {} (reference {:.10})\n{:>7}  {:>16}  {:>10}  {:>6}\n",
            self.title, self.quantity, self.reference, "cells", "value", "rel. error", "order"
        );
        for (k, r) in self.rows.iter().enumerate() {
            let order = if k == 0 {
                "—".to_string()
            } else {
                format!("{:.2}", self.order(k))
            };
            s += &format!(
                "{:>7}  {:>16.10}  {:>10.2e}  {:>6}\n",
                r.cells, r.value, r.error, order
            );
        }
        s
    }
}
