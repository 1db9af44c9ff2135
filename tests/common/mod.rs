//! Helpers shared by the integration tests: one per boundary, so that an API change of the
//! library or the binary touches one place.
//!
//! * The library's solve boundary: [`solve_domain`] (a domain on its grid through
//!   `pipeline::solve_unit`), [`solve_case`] (a shape, flow only), [`exact_case`].
//! * The binary's boundary: [`Sandbox`] runs `canalis` in a fresh temporary directory, [`Run`]
//!   holds what it printed, [`Sandbox::input_error`] checks the contract of a bad input, [`num`]
//!   reads a number from a report.
//! * Shared data: [`shipped_path`], [`coverage`] (exact pixel coverage of a disc, for
//!   anti-aliased masks), [`rel_err`].
//! * [`Row`], [`Table`]: a convergence table with observed orders, printed by the tests.
//! * The entrance marches: [`run_entrance`] (a built-in shape at the default entrance grid, no
//!   error estimate, optionally with a Prandtl number for the combined entry).
//!
//! Each test binary compiles this module and uses a part of it, hence `allow(dead_code)`.
#![allow(dead_code)]

pub mod coverage;

use canalis::exact::{self, ExactCase};
use canalis::geometry::{Domain, Shape};
use canalis::grid::Grid;
use canalis::outcome::UnitSolution;
use canalis::pipeline::{solve_unit, UnitOptions};
use canalis::post::WallKind;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

// ---------------------------------------------------------------------------------------------
// The library

/// The grid a solve of `domain` uses: a mask's pixel lattice, else `cells` cells across the
/// longer side of the bounding box.
pub fn grid_for(domain: &dyn Domain, cells: usize) -> Grid {
    match domain.lattice() {
        Some(l) => Grid::from_lattice(l),
        None => {
            let (lo, hi) = domain.bbox();
            Grid::covering(lo, hi, cells)
        }
    }
}

/// Solves the unit problem −∇²ũ = 1, ũ = 0 on the walls, of `domain` on [`grid_for`] with
/// `options`. Panics on failure: in a test that is a bug.
pub fn solve_domain(
    domain: &dyn Domain,
    walls: WallKind,
    cells: usize,
    options: &UnitOptions,
) -> UnitSolution {
    match solve_unit(domain, grid_for(domain, cells), walls, options) {
        Ok(sol) => sol,
        Err(e) => panic!("solving on {cells} cells failed: {e}"),
    }
}

/// Solves the unit problem of `shape` (true curves, so the wall points serve as data of the
/// shear fit) on a grid of `cells` cells across the longer side of its bounding box, the flow
/// problem only (heat transfer has its own tests in tests/heat.rs).
pub fn solve_case(shape: &Shape, cells: usize) -> UnitSolution {
    let opts = UnitOptions {
        heat: false,
        ..Default::default()
    };
    solve_domain(shape, WallKind::Exact, cells, &opts)
}

/// The exact verification case called `key` (src/exact.rs).
pub fn exact_case(key: &str) -> ExactCase {
    match exact::cases().into_iter().find(|c| c.key == key) {
        Some(c) => c,
        None => panic!("no exact case {key}"),
    }
}

/// Path of a shipped shape, e.g. `shipped_path("finned_tube.toml")`.
pub fn shipped_path(file: &str) -> String {
    format!("{}/shapes/{file}", env!("CARGO_MANIFEST_DIR"))
}

/// Relative difference |value − reference| / |reference|.
pub fn rel_err(value: f64, reference: f64) -> f64 {
    ((value - reference) / reference).abs()
}

// ---------------------------------------------------------------------------------------------
// The binary

/// A fresh temporary directory that the binary runs in (files are named relative to it).
pub struct Sandbox {
    dir: tempfile::TempDir,
}

/// What one run of the binary produced.
pub struct Run {
    pub code: Option<i32>,
    pub stdout: String,
    pub stderr: String,
    pub args: String,
}

impl Run {
    /// Everything a failing assertion should show.
    pub fn context(&self) -> String {
        format!(
            "canalis {}\nexit status {:?}\n--- stdout ---\n{}\n--- stderr ---\n{}",
            self.args, self.code, self.stdout, self.stderr
        )
    }

    pub fn assert_no_panic(&self) {
        assert!(
            !self.stderr.contains("panicked") && !self.stdout.contains("panicked"),
            "the binary panicked\n{}",
            self.context()
        );
    }

    pub fn assert_success(&self) -> &Self {
        self.assert_no_panic();
        assert_eq!(self.code, Some(0), "expected success\n{}", self.context());
        self
    }

    /// Stdout parsed as exactly one JSON object (serde_json rejects anything after it).
    pub fn json(&self) -> Value {
        let v: Value = match serde_json::from_str(&self.stdout) {
            Ok(v) => v,
            Err(e) => panic!(
                "stdout is not exactly one JSON value: {e}\n{}",
                self.context()
            ),
        };
        assert!(
            v.is_object(),
            "stdout is not a JSON object\n{}",
            self.context()
        );
        v
    }
}

impl Sandbox {
    pub fn new() -> Sandbox {
        Sandbox {
            dir: tempfile::tempdir().expect("create a temporary directory"),
        }
    }

    /// The directory itself.
    pub fn dir(&self) -> &Path {
        self.dir.path()
    }

    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Writes a text file into the sandbox and returns its name (relative to the sandbox).
    pub fn write(&self, name: &str, text: &str) -> String {
        std::fs::write(self.path(name), text).expect("write a test file");
        name.to_string()
    }

    /// The binary with `args`, to run in the sandbox, for tests that set up its standard
    /// streams themselves.
    pub fn command(&self, args: &[&str]) -> Command {
        let mut c = Command::new(env!("CARGO_BIN_EXE_canalis"));
        c.args(args)
            .current_dir(self.dir.path())
            .env("RUST_BACKTRACE", "0");
        c
    }

    /// Runs the binary with `args` in the sandbox.
    pub fn run(&self, args: &[&str]) -> Run {
        let out = Command::new(env!("CARGO_BIN_EXE_canalis"))
            .args(args)
            .current_dir(self.dir.path())
            .env("RUST_BACKTRACE", "0")
            .output()
            .expect("start the canalis binary");
        Run {
            code: out.status.code(),
            stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
            stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
            args: args.join(" "),
        }
    }

    /// Runs `args`, expects success and `--json` output, and returns the report.
    pub fn report(&self, args: &[&str]) -> Value {
        let run = self.run(args);
        run.assert_success();
        run.json()
    }

    /// The contract of a bad input: exit status 2, no panic, nothing on stdout, and an error
    /// message on stderr that contains every one of `needles`. Returns the run for further checks.
    pub fn input_error(&self, args: &[&str], needles: &[&str]) -> Run {
        let run = self.run(args);
        run.assert_no_panic();
        assert_eq!(
            run.code,
            Some(2),
            "expected exit status 2 (bad input)\n{}",
            run.context()
        );
        assert!(
            run.stdout.trim().is_empty(),
            "nothing belongs on stdout after an error\n{}",
            run.context()
        );
        // The progress line ("solving FILE ...") names the file too; only the error
        // message itself counts.
        let message = run.stderr.find("error").map_or("", |i| &run.stderr[i..]);
        for needle in needles {
            assert!(
                message.contains(needle),
                "stderr should contain {needle:?}\n{}",
                run.context()
            );
        }
        run
    }
}

/// A number at `key` (a path of object keys, `grid.cells_x`) of a report.
pub fn num(report: &Value, key: &str) -> f64 {
    let mut v = report;
    for k in key.split('.') {
        v = match v.get(k) {
            Some(x) => x,
            None => panic!("report has no key {key:?}: {report:#}"),
        };
    }
    match v.as_f64() {
        Some(x) => x,
        None => panic!("report key {key:?} is not a number: {v}"),
    }
}

// ---------------------------------------------------------------------------------------------
// Convergence tables

/// Observed order of convergence p = log2(e_coarse / e_fine) for grids of spacing ratio 2.
pub fn observed_order(e_coarse: f64, e_fine: f64) -> f64 {
    (e_coarse.abs() / e_fine.abs()).log2()
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

/// A run of the built-in shape `spec` with the entrance marches at the default entrance grid
/// and no error estimate; with `prandtl` the combined entry too.
pub fn run_entrance(spec: &str, prandtl: Option<f64>) -> canalis::outcome::Outcome {
    use canalis::input::Input;
    use canalis::pipeline::{self, EntranceOptions, SolveConfig, ENTRANCE_CELLS};
    let mut config = SolveConfig::new(Input::Builtin(spec.into()));
    config.error_estimate = pipeline::ErrorEstimate::Off;
    config.entrance = Some(EntranceOptions {
        cells: ENTRANCE_CELLS,
    });
    config.prandtl = prandtl;
    match pipeline::run(&config) {
        Ok(o) => o,
        Err(e) => panic!("{spec}: {e}"),
    }
}
