//! Fully developed laminar heat transfer: Nu_H1 and Nu_T against exact and tabulated values at
//! the default grid, the observed order of Nu_H1, the iteration counts of the two solves on the
//! shipped shapes, and agreement between the solver paths.

mod common;

use canalis::geometry::builtin::parse_builtin;
use canalis::geometry::shapefile::load_shape_file;
use canalis::geometry::Shape;
use canalis::heat::HeatFigures;
use canalis::pipeline::{Method, UnitOptions, DEFAULT_CELLS};
use canalis::post::WallKind;
use common::{shipped_path, solve_domain};

/// The Nusselt numbers of the built-in shape `spec` on `cells` cells, default options.
fn heat(spec: &str, cells: usize) -> HeatFigures {
    shape_heat(
        &parse_builtin(spec).expect("builtin"),
        cells,
        Method::default(),
    )
}

#[test]
fn nusselt_numbers_at_the_default_grid() {
    // (shape, Nu_H1, Nu_T, source). Circle: Nu_H1 = 48/11 exact, Nu_T = 3.6568 (Graetz
    // eigenvalue, exact series; both Shah & London 1978, from memory). Rectangles: Shah &
    // London 1978, rectangular-duct table (the same three digits in the fully developed laminar
    // table of common heat-transfer textbooks), from memory. Triangle Nu_H1 = 28/9 exact.
    let cases: [(&str, f64, Option<f64>, &str); 6] = [
        (
            "circle:d=1",
            48.0 / 11.0,
            Some(3.6568),
            "exact / Graetz series",
        ),
        (
            "square:side=1",
            3.608,
            Some(2.976),
            "Shah & London 1978 table (from memory)",
        ),
        (
            "rect:w=1,h=0.5",
            4.123,
            Some(3.391),
            "Shah & London 1978 table (from memory)",
        ),
        (
            "rect:w=1,h=0.25",
            5.331,
            Some(4.439),
            "Shah & London 1978 table (from memory)",
        ),
        (
            "rect:w=1,h=0.125",
            6.490,
            Some(5.597),
            "Shah & London 1978 table (from memory)",
        ),
        ("triangle:side=1", 28.0 / 9.0, None, "exact"),
    ];
    for (spec, h1, t, source) in cases {
        let h = heat(spec, DEFAULT_CELLS);
        let e1 = (h.nusselt_h1 - h1) / h1;
        println!(
            "{spec:18} Nu_H1 {:.5} (ref {h1:.4}, {e1:+.2e})  Nu_T {:.5}  [{source}]",
            h.nusselt_h1, h.nusselt_t
        );
        assert!(e1.abs() < 2e-3, "{spec}: Nu_H1 {} vs {h1}", h.nusselt_h1);
        if let Some(t) = t {
            let et = (h.nusselt_t - t) / t;
            assert!(et.abs() < 5e-3, "{spec}: Nu_T {} vs {t}", h.nusselt_t);
        }
    }
    // The triangle's Nu_T is tabulated as 2.47 (from memory), from early coarse computations
    // around its sharp corners: only assert the converged value lies within 1.5 % of it.
    let t = heat("triangle:side=1", DEFAULT_CELLS).nusselt_t;
    println!("triangle Nu_T {t:.5} (tabulated 2.47)");
    assert!(((t - 2.47) / 2.47).abs() < 1.5e-2, "{t}");
}

#[test]
fn nusselt_h1_converges_at_second_order() {
    // Circle against the exact 48/11 (Shah & London 1978, from memory).
    let exact = 48.0 / 11.0;
    let e: Vec<f64> = [200, 400]
        .iter()
        .map(|&n| (heat("circle:d=1", n).nusselt_h1 - exact).abs())
        .collect();
    let p = (e[0] / e[1]).log2();
    println!("circle Nu_H1 errors {e:?}, observed order {p:.2}");
    assert!(p >= 1.8, "{p}");
    // Ellipse b/a = 1/2: no exact value at hand, so the order comes from three grids,
    // p = log2((N₁ − N₂)/(N₂ − N₃)) (Roache 1994, from memory).
    let n: Vec<f64> = [200, 400, 800]
        .iter()
        .map(|&c| heat("ellipse:a=1,b=0.5", c).nusselt_h1)
        .collect();
    let p = ((n[0] - n[1]) / (n[1] - n[2])).log2();
    println!("ellipse Nu_H1 {n:?}, observed order {p:.2}");
    assert!(p >= 1.8, "{p}");
}

/// The Nusselt numbers of `s` on `cells` cells with `method`.
fn shape_heat(s: &Shape, cells: usize, method: Method) -> HeatFigures {
    let opts = UnitOptions {
        method,
        ..UnitOptions::default()
    };
    let sol = solve_domain(s, WallKind::Exact, cells, &opts);
    sol.heat.expect("heat transfer is on by default")
}

/// A shipped shape file, by name without `.toml`.
fn shipped(name: &str) -> Shape {
    let path = shipped_path(&format!("{name}.toml"));
    load_shape_file(std::path::Path::new(&path)).expect("shipped shape")
}

const SHIPPED: [&str; 7] = [
    "cold_plate_channel",
    "d_section",
    "eccentric_annulus",
    "finned_tube",
    "heat_exchanger_fin",
    "mould_slot",
    "twin_bore",
];

#[test]
fn issue_3_heat_transfer_needs_few_iterations_on_the_shipped_shapes() {
    // Issue 3 asks the whole default solve of a shipped example to stay fast; the heat-transfer
    // part does when the Nu_H1 solve takes about as many multigrid CG iterations as a flow
    // solve and LOBPCG few steps (counts are deterministic; times belong to the bench).
    // Measured at the default grid: Nu_H1 8–9 iterations, Nu_T 4–8 steps (the eccentric
    // annulus, whose two lowest modes are close, needs the most).
    for name in SHIPPED {
        let h = shape_heat(&shipped(name), DEFAULT_CELLS, Method::Multigrid);
        let e = &h.eigen;
        println!(
            "{name:20} Nu_H1 {} iterations, Nu_T {} steps, {} V-cycles, residual {:.1e}",
            h.h1_iterations, e.iterations, e.preconditioner_applications, e.relative_residual
        );
        assert!(h.h1_iterations <= 10, "{name}: {}", h.h1_iterations);
        assert!(e.iterations <= 10, "{name}: {e:?}");
        assert!(
            e.preconditioner_applications <= e.iterations + 1,
            "{name}: {e:?}"
        );
        assert!(e.relative_residual <= 1e-5, "{name}: {e:?}");
        // The residual falls every step (a locally optimal method on an SPD pencil).
        for pair in e.residuals.windows(2) {
            assert!(pair[1] < pair[0], "{name}: {:?}", e.residuals);
        }
    }
}

#[test]
fn nusselt_numbers_agree_between_solver_paths_and_repeat_exactly() {
    // The Jacobi path (CSR matrix, LOBPCG preconditioned by inner Jacobi CG) against the
    // multigrid path (grid operator, V-cycle): the same discrete problems, so the same numbers
    // to the solvers' tolerances (flow 1e-10, eigen-residual 1e-5, whose eigenvalue error is
    // about its square; common practice, no source). The eccentric annulus has close low modes,
    // the twin bore two passages. A second multigrid run repeats the first to the last bit.
    let annulus = parse_builtin("annulus:do=20mm,di=10mm,offset=2mm").expect("builtin");
    for (name, s) in [("annulus", annulus), ("twin_bore", shipped("twin_bore"))] {
        let mg = shape_heat(&s, 120, Method::Multigrid);
        let jc = shape_heat(&s, 120, Method::Jacobi);
        let again = shape_heat(&s, 120, Method::Multigrid);
        let dt = (mg.nusselt_t - jc.nusselt_t).abs() / mg.nusselt_t;
        let dh = (mg.nusselt_h1 - jc.nusselt_h1).abs() / mg.nusselt_h1;
        println!(
            "{name}: Nu_T {} vs {} ({dt:.1e}), Nu_H1 {dh:.1e}",
            mg.nusselt_t, jc.nusselt_t
        );
        assert!(
            dt < 1e-8,
            "{name}: Nu_T {} vs {}",
            mg.nusselt_t,
            jc.nusselt_t
        );
        assert!(
            dh < 1e-8,
            "{name}: Nu_H1 {} vs {}",
            mg.nusselt_h1,
            jc.nusselt_h1
        );
        assert_eq!(mg.nusselt_t.to_bits(), again.nusselt_t.to_bits(), "{name}");
        assert_eq!(
            mg.nusselt_h1.to_bits(),
            again.nusselt_h1.to_bits(),
            "{name}"
        );
        assert_eq!(mg.eigen, again.eigen, "{name}");
    }
}
