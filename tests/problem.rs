//! The generalised operator of the problem layer, c·u − ∇·(k∇u) = f with Dirichlet, Robin and
//! Neumann walls, against exact solutions (src/exact.rs; each source named there): values and
//! observed orders on successively halved grids, and the multigrid's iteration counts.
//!
//! Print the tables with `cargo test --release --test problem -- --nocapture`.

use canalis::exact;
use canalis::geometry::{Primitive, Shape};
use canalis::grid::{classify, Classified, Grid};
use canalis::problem::{Coefficients, Field, Numbering, Problem, WallCondition, WallConditions};
use canalis::system::{Method, System};

/// Grid placement of every case: the centre of the bounding box this fraction of a cell beyond
/// a node, away from 0 and ½ so that no wall falls on a grid line (and the cut fractions vary).
const PLACEMENT: [f64; 2] = [0.31, 0.17];

fn disc(radius: f64) -> Shape {
    Shape::new(
        vec![Primitive::Circle {
            center: [0.0, 0.0],
            radius,
        }],
        vec![],
    )
}

fn classified(shape: &Shape, cells: usize, placement: [f64; 2]) -> Classified {
    let (lo, hi) = shape.bbox();
    classify(shape, Grid::covering_placed(lo, hi, cells, placement)).expect("classified grid")
}

/// Solves the problem for the source `f` by multigrid-preconditioned CG to 1e-12; returns the
/// solution in unknown order, the numbering and the iterations.
fn solve(problem: Problem, f: &Field) -> (Vec<f64>, Numbering, usize) {
    let method = if std::env::var("PROBLEM_JACOBI").is_ok() {
        Method::Jacobi
    } else {
        Method::Multigrid
    };
    let mut system = System::new(problem, method).expect("system");
    let b = system.rhs(f);
    let mut x = vec![0.0; b.len()];
    let params = canalis::solver::CgParams {
        tolerance: 1e-12,
        ..Default::default()
    };
    let info = system.solve(&b, &mut x, &params).expect("converged");
    (x, system.numbering().clone(), info.iterations)
}

/// Largest |u − exact| over the nodes, relative to the largest |exact|.
fn max_error(c: &Classified, num: &Numbering, u: &[f64], exact: impl Fn([f64; 2]) -> f64) -> f64 {
    let (mut err, mut top) = (0.0f64, 0.0f64);
    for (q, k) in num.nodes().enumerate() {
        let (i, j) = c.grid.ij(k);
        let e = exact(c.grid.node(i, j));
        err = err.max((u[q] - e).abs());
        top = top.max(e.abs());
    }
    err / top
}

/// Observed order between two grids of spacing ratio 2.
fn order(coarse: f64, fine: f64) -> f64 {
    (coarse / fine).log2()
}

/// Errors on each grid, their orders, printed; returns (finest error, last order).
fn table(title: &str, cells: &[usize], errors: &[f64], iterations: &[usize]) -> (f64, f64) {
    println!("{title}");
    for (k, (&n, &e)) in cells.iter().zip(errors).enumerate() {
        let p = if k > 0 {
            format!("{:6.2}", order(errors[k - 1], e))
        } else {
            "      ".to_string()
        };
        println!(
            "  {n:5} cells  max error {e:.3e}  order {p}  CG iterations {}",
            iterations[k]
        );
    }
    let last = errors.len() - 1;
    (errors[last], order(errors[last - 1], errors[last]))
}

/// c·u − ∇²u = 1 on the unit disc, u = 0 on the wall: u = (1 − I₀(√c·r)/I₀(√c·R))/c (modified
/// Bessel function; src/exact.rs). Second order at c·R² = 1 and 10⁴, where the boundary layer
/// is R/100 thick, and the multigrid's count stays flat however large c·h² grows.
#[test]
fn shifted_disc_is_second_order() {
    for (c, cells, max_err) in [
        (1.0, [50, 100, 200, 400], 1e-5),
        (1e4, [200, 400, 800, 1600], 3e-3),
    ] {
        let shape = disc(1.0);
        let mut errors = Vec::new();
        let mut iterations = Vec::new();
        for &n in &cells {
            let cl = classified(&shape, n, PLACEMENT);
            let problem = Problem {
                shift: Field::Uniform(c),
                ..Problem::laplace(&cl)
            };
            let (u, num, it) = solve(problem, &Field::Uniform(1.0));
            errors.push(max_error(&cl, &num, &u, |p| {
                exact::shifted_disc(c, 1.0, p[0].hypot(p[1]).min(1.0))
            }));
            iterations.push(it);
        }
        let (err, p) = table(
            &format!("shifted disc, c·R² = {c}"),
            &cells,
            &errors,
            &iterations,
        );
        assert!(err < max_err, "c·R² = {c}: error {err:.3e}");
        assert!(p > 1.8, "c·R² = {c}: order {p:.2}");
        assert!(iterations.iter().all(|&i| i <= 20), "{iterations:?}");
    }
    // c·h² ≫ 1 (a marching step far shorter than a cell's diffusion time): the count stays
    // flat, here at 100 cells with c·h² = 4e2 and 4e4.
    for c in [1e6, 1e8] {
        let cl = classified(&disc(1.0), 100, PLACEMENT);
        let problem = Problem {
            shift: Field::Uniform(c),
            ..Problem::laplace(&cl)
        };
        let (_, _, it) = solve(problem, &Field::Uniform(1.0));
        println!(
            "shifted disc, c·h² = {:.0e}: {it} CG iterations",
            c * cl.grid.h * cl.grid.h
        );
        assert!(it <= 20, "c = {c}: {it} iterations");
    }
}

/// Navier slip on a disc, −∇²u = 1, u = b·∂u/∂n_in at r = R: u = (R² − r² + 2bR)/4 and the
/// flow rate is (1 + 4b/R) times the no-slip one (exact; src/exact.rs). The Robin wall's
/// linear ghost is first order in the maximum norm (src/problem.rs); the flow rate is within
/// 1e-4 of the exact ratio at 400 cells.
#[test]
fn slip_disc_matches_navier_slip() {
    let radius = 1.0;
    let cells = [50, 100, 200, 400];
    for b in [0.02, 0.2] {
        let shape = disc(radius);
        let mut errors = Vec::new();
        let mut ratios = Vec::new();
        let mut iterations = Vec::new();
        for &n in &cells {
            let cl = classified(&shape, n, PLACEMENT);
            let problem = Problem {
                walls: WallConditions::all(WallCondition::Robin(b)),
                ..Problem::laplace(&cl)
            };
            let (u, num, it) = solve(problem, &Field::Uniform(1.0));
            errors.push(max_error(&cl, &num, &u, |p| {
                exact::slip_disc(b, radius, p[0].hypot(p[1]))
            }));
            // The flow rate against the no-slip solution on the same grid, both by the
            // midpoint rule over the nodes plus the slip layer's share: their difference is
            // the slip velocity over the area.
            let (u0, _, _) = solve(Problem::laplace(&cl), &Field::Uniform(1.0));
            let h2 = cl.grid.h * cl.grid.h;
            let extra: f64 = u.iter().zip(&u0).map(|(a, b)| (a - b) * h2).sum::<f64>();
            let area = std::f64::consts::PI * radius * radius;
            let nodes_area = h2 * u.len() as f64;
            let q0 = std::f64::consts::PI * radius.powi(4) / 8.0;
            ratios.push(1.0 + extra / nodes_area * area / q0);
            iterations.push(it);
        }
        let (err, p) = table(
            &format!("slip disc, b/R = {b}"),
            &cells,
            &errors,
            &iterations,
        );
        let want = 1.0 + 4.0 * b / radius;
        let ratio = *ratios.last().unwrap();
        println!("  flow-rate ratio {ratio:.6} (exact {want})");
        assert!(err < 1e-3, "b = {b}: error {err:.3e}");
        assert!(p > 0.8, "b = {b}: order {p:.2}");
        assert!(
            (ratio - want).abs() < 1e-3 * want,
            "ratio {ratio} vs {want}"
        );
        assert!(iterations.iter().all(|&i| i <= 20), "{iterations:?}");
    }
}

/// A half-disc whose straight wall carries no flux solves the full disc's problem (mirror
/// symmetry): −∇²u = 1, u = 0 on the arc, ∂u/∂n = 0 on the flat, u = (R² − r²)/4.
///
/// With the flat halfway between two rows of nodes (θ = ½) the discrete half-disc problem is
/// the full disc's on the mirrored grid, so the two solutions agree to the solver's tolerance.
/// With the flat elsewhere the linear ghost misses the curvature across it, ½·u″·(1 − 2θ)·h²
/// (src/problem.rs), and the solution converges at first order.
#[test]
fn flux_free_wall_is_a_mirror() {
    let radius = 1.0;
    // The disc minus a rectangle below y = 0: wall 0 is the arc, wall 1 the flat.
    let half = Shape::new(
        vec![Primitive::Circle {
            center: [0.0, 0.0],
            radius,
        }],
        vec![Primitive::rect([0.0, -1.0], [4.0, 2.0])],
    );
    let flux_free = |cl: &Classified| -> (Vec<f64>, Numbering, usize) {
        let problem = Problem {
            walls: WallConditions::default().with(1, WallCondition::Neumann(0.0)),
            ..Problem::laplace(cl)
        };
        solve(problem, &Field::Uniform(1.0))
    };
    // Mirror: the same grid over the full disc (both shapes have the disc's bounding box).
    let mirror = [0.31, 0.5];
    for n in [60, 200] {
        let cl = classified(&half, n, mirror);
        let (u, num, _) = flux_free(&cl);
        let full = classified(&disc(radius), n, mirror);
        assert_eq!(full.grid, cl.grid);
        let (v, full_num, _) = solve(Problem::laplace(&full), &Field::Uniform(1.0));
        let mut worst = 0.0f64;
        for (q, k) in num.nodes().enumerate() {
            let other = full_num.unknown_of[k] as usize;
            worst = worst.max((u[q] - v[other]).abs());
        }
        println!("half disc against the full disc, {n} cells: largest difference {worst:.2e}");
        assert!(worst < 1e-10, "{n} cells: {worst:.3e}");
    }
    // Elsewhere: first order.
    let cells = [50, 100, 200, 400];
    let mut errors = Vec::new();
    let mut iterations = Vec::new();
    for &n in &cells {
        let cl = classified(&half, n, PLACEMENT);
        let (u, num, it) = flux_free(&cl);
        errors.push(max_error(&cl, &num, &u, |p| {
            exact::slip_disc(0.0, radius, p[0].hypot(p[1]))
        }));
        iterations.push(it);
    }
    let (err, p) = table(
        "half disc with a flux-free flat off the node rows",
        &cells,
        &errors,
        &iterations,
    );
    assert!(err < 3e-3, "error {err:.3e}");
    assert!(p > 0.9, "order {p:.2}");
    assert!(iterations.iter().all(|&i| i <= 20), "{iterations:?}");
}

/// −∇·(k∇u) = 1 in a channel 0 < y < H with k = 1 below H/2 and 5 above, u = 0 on the floor
/// and the lid, flux-free ends: the layered solution of src/exact.rs, independent of x. The
/// face across the interface takes the harmonic mean of the two layers' k (the flux through it
/// is then exact for a piecewise-linear u).
#[test]
fn layered_conductivity() {
    let (length, height, k1, k2) = (2.0, 1.0, 1.0, 5.0);
    // Walls: floor and lid are the region (wall 0), longer than the channel; the ends x = 0
    // and x = L are the edges of two holes that cut it to length (walls 1 and 2).
    let shape = Shape::new(
        vec![Primitive::rect(
            [0.5 * length, 0.5 * height],
            [length + 0.5, height],
        )],
        vec![
            Primitive::rect([-0.5, 0.5 * height], [1.0, 2.0 * height]),
            Primitive::rect([length + 0.5, 0.5 * height], [1.0, 2.0 * height]),
        ],
    );
    let cells = [40, 80, 160, 320];
    let mut errors = Vec::new();
    let mut iterations = Vec::new();
    for &n in &cells {
        let cl = classified(&shape, n, PLACEMENT);
        let g = cl.grid;
        let y_of = |k: usize| g.node(0, k / g.nx)[1];
        let k_at = |y: f64| if y < 0.5 * height { k1 } else { k2 };
        let mut east = vec![0.0; g.len()];
        let mut north = vec![0.0; g.len()];
        for k in 0..g.len() {
            east[k] = k_at(y_of(k));
            let (ya, yb) = (y_of(k), y_of(k) + g.h);
            north[k] = if (ya < 0.5 * height) == (yb < 0.5 * height) {
                k_at(ya)
            } else {
                // Harmonic mean weighted by the part of the link in each layer.
                let t = (0.5 * height - ya) / g.h;
                1.0 / (t / k1 + (1.0 - t) / k2)
            };
        }
        let problem = Problem {
            coefficients: Coefficients::Faces { east, north },
            walls: WallConditions::default()
                .with(1, WallCondition::Neumann(0.0))
                .with(2, WallCondition::Neumann(0.0)),
            ..Problem::laplace(&cl)
        };
        let (u, num, it) = solve(problem, &Field::Uniform(1.0));
        errors.push(max_error(&cl, &num, &u, |p| {
            exact::layered_slab(k1, k2, height, p[1])
        }));
        iterations.push(it);
    }
    let (err, p) = table("layered channel, k = 1 | 5", &cells, &errors, &iterations);
    assert!(err < 1e-4, "error {err:.3e}");
    assert!(p > 1.8, "order {p:.2}");
}
