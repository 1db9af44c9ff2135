//! The multigrid-preconditioned CG against the reference Jacobi-preconditioned CG, and its
//! robustness: iteration counts (deterministic, so assertable) on shapes that trouble multigrid
//! (thin gaps, tiny cut fractions, re-entrant corners, disconnected passages, holes, masks).

mod common;

use canalis::geometry::builtin::parse_builtin;
use canalis::geometry::mask::Mask;
use canalis::geometry::{Domain, Primitive, Shape};
use canalis::outcome::UnitSolution;
use canalis::pipeline::{Method, UnitOptions};
use canalis::post::WallKind;
use common::solve_domain;

fn solve(domain: &dyn Domain, cells: usize, method: Method, correction: bool) -> UnitSolution {
    // The flow problem only: these tests are about the linear solver.
    let opts = UnitOptions {
        method,
        heat: false,
        wall_correction: correction,
        ..Default::default()
    };
    // A mask's pixel staircase; every other domain here has exact walls.
    let walls = match domain.lattice() {
        Some(_) => WallKind::Staircase,
        None => WallKind::Exact,
    };
    solve_domain(domain, walls, cells, &opts)
}

/// Two separate round passages, each given as (centre, radius) in metres.
fn two_bores(a: ([f64; 2], f64), b: ([f64; 2], f64)) -> Box<dyn Domain> {
    let disc = |(center, radius): ([f64; 2], f64)| Primitive::Circle { center, radius };
    Box::new(Shape::new(vec![disc(a), disc(b)], vec![]))
}

fn shapes() -> Vec<(&'static str, Box<dyn Domain>)> {
    let b = |s: &str| -> Box<dyn Domain> { Box::new(parse_builtin(s).expect("builtin")) };
    // A slit 0.3 grid spacings wide at 200 cells: a thin solid plate nearly cutting a square.
    let plate = Shape::new(
        vec![Primitive::rect([0.0, 0.0], [1.0, 1.0])],
        vec![Primitive::rect([0.1, 0.0013], [0.8, 0.0015])],
    );
    // A wall that grazes grid nodes: a circle whose radius puts walls within 1e-6·h of nodes.
    let grazing = Shape::new(
        vec![Primitive::Circle {
            center: [0.0, 0.0],
            radius: 0.5 - 1e-9,
        }],
        vec![],
    );
    let (mask, _) = Mask::from_fn(200, 200, 1e-4, |c, r| {
        let inside = (4..196).contains(&c) && (4..196).contains(&r);
        inside && !(c >= 100 && r < 100)
    })
    .expect("mask");
    vec![
        ("circle", b("circle:d=10mm")),
        ("eccentric annulus", b("annulus:do=20mm,di=10mm,offset=2mm")),
        (
            "four-fin tube",
            b("finned:d=16mm,fins=4,height=3mm,thickness=1mm"),
        ),
        (
            "twin bore",
            two_bores(([0.0, 0.0], 3e-3), ([9e-3, 1e-3], 5e-3)),
        ),
        // One above the other: solid grid rows between the passages (empty row spans).
        (
            "stacked bores",
            two_bores(([0.0, 0.0], 3e-3), ([1e-3, 9e-3], 4e-3)),
        ),
        ("thin plate", Box::new(plate)),
        ("grazing circle", Box::new(grazing)),
        ("L-shaped mask", Box::new(mask)),
    ]
}

#[test]
fn multigrid_matches_jacobi_and_converges_fast() {
    // The two preconditioners solve the same linear system to the same residual, so the flow
    // integrals must agree far below the discretisation error (1e-9 relative; common practice,
    // no source). The comparison is made without the wall correction: its right-hand side is
    // built from a first solve stopped at 1e-3 by design, which differs between the methods
    // (by 2e-9 in the flow integral of the eccentric annulus), so with it the two systems are
    // not quite the same. Iterations: at most 25 per solve (issue 3), on the default pipeline.
    for (name, domain) in shapes() {
        let mg = solve(domain.as_ref(), 200, Method::Multigrid, true);
        let mg_plain = solve(domain.as_ref(), 200, Method::Multigrid, false);
        let jc = solve(domain.as_ref(), 200, Method::Jacobi, false);
        let (a, b) = (mg_plain.figures.flow_integral, jc.figures.flow_integral);
        let per_pass: Vec<usize> = mg.passes.iter().map(|p| p.iterations).collect();
        println!(
            "{name:18} multigrid {per_pass:?} iterations, Jacobi {} in all; flow integrals differ by {:.1e}",
            jc.info.iterations,
            ((a - b) / b).abs()
        );
        assert!(((a - b) / b).abs() < 1e-9, "{name}: {a} vs {b}");
        for p in &mg.passes {
            assert!(p.iterations <= 25, "{name}: {per_pass:?}");
        }
        // The last solve reaches the full tolerance (the first one, followed by the wall
        // correction, stops at 1e-3 by design: see pipeline::FIRST_PASS_TOLERANCE).
        let last = mg.passes.last().expect("a solve");
        assert!(
            last.relative_residual <= 1e-10,
            "{name}: {}",
            last.relative_residual
        );
    }
}

#[test]
fn multigrid_iterations_do_not_grow_with_the_grid() {
    // One solve from zero to the full tolerance 1e-10 (no wall correction) on a disc, whose
    // curved wall cuts links at every fraction θ.
    let circle = parse_builtin("circle:d=10mm").expect("builtin");
    let opts = UnitOptions {
        method: Method::Multigrid,
        wall_correction: false,
        heat: false,
        ..Default::default()
    };
    let counts: Vec<usize> = [128, 256, 512, 1024]
        .iter()
        .map(|&n| {
            let sol = solve_domain(&circle, WallKind::Exact, n, &opts);
            assert!(sol.info.relative_residual <= 1e-10);
            sol.info.iterations
        })
        .collect();
    println!("iterations to 1e-10 at 128, 256, 512, 1024 cells: {counts:?}");
    assert!(counts.iter().all(|&c| c <= 25), "{counts:?}");
    // No growth from 256 to 1024 cells (issue 3); 4096 is in the benchmark.
    assert!(counts[3] <= counts[1], "{counts:?}");
}

#[test]
fn results_do_not_depend_on_the_number_of_threads() {
    // Issue 3: parallel work must give identical results from run to run, whatever the number
    // of threads (fixed work split and fixed-order reductions; common practice, no source).
    // Bitwise, on shapes that take every path of the fine passes: cut walls, the thin plate's
    // fluid-to-fluid cut links, a mask.
    let run = |threads: usize, domain: &dyn Domain| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool")
            .install(|| solve(domain, 160, Method::Multigrid, true))
    };
    for (name, domain) in shapes() {
        let one = run(1, domain.as_ref());
        let two = run(2, domain.as_ref());
        let three = run(3, domain.as_ref());
        for other in [&two, &three] {
            assert_eq!(one.info.iterations, other.info.iterations, "{name}");
            assert_eq!(
                one.figures.flow_integral.to_bits(),
                other.figures.flow_integral.to_bits(),
                "{name}"
            );
            assert!(
                one.u
                    .iter()
                    .zip(&other.u)
                    .all(|(a, b)| a.to_bits() == b.to_bits()),
                "{name}: the velocity fields differ"
            );
        }
    }
}
