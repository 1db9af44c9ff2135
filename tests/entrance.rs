//! The thermal entrance march (src/entrance.rs) against references.

#[path = "reference/graetz.rs"]
mod graetz;

use canalis::entrance::{standard_stations, thermal_entrance, Flow, MarchParams};
use canalis::geometry::{Primitive, Shape};
use canalis::grid::Grid;
use canalis::pipeline::{solve_unit, UnitOptions};
use canalis::system::Method;

#[test]
fn circle_table() {
    let shape = Shape::new(
        vec![Primitive::Circle {
            center: [0.0, 0.0],
            radius: 1.0,
        }],
        vec![],
    );
    let cells: usize = std::env::var("CELLS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(300);
    let (lo, hi) = shape.bbox();
    let sol = solve_unit(
        &shape,
        Grid::covering(lo, hi, cells),
        canalis::post::WallKind::Exact,
        &UnitOptions::default(),
    )
    .unwrap();
    let heat = sol.heat.as_ref().unwrap();
    let st = standard_stations();
    let env = |k: &str, d: f64| {
        std::env::var(k)
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(d)
    };
    let params = MarchParams {
        first: env("FIRST", 1e-7),
        ratio: env("RATIO", 1.25),
        tolerance: env("TOL", 1e-9),
    };
    let flow = Flow {
        classified: &sol.classified,
        u: &sol.u,
        passages: &sol.passages,
        walls: &sol.walls,
        shear: &sol.shear,
    };
    let e = thermal_entrance(
        &flow,
        Some(&[(heat.nusselt_t, heat.nusselt_h1)]),
        &st,
        Method::Multigrid,
        &params,
    )
    .unwrap();
    let p = &e.passages[0];
    let r = graetz::circle(&st);
    println!("{cells} cells: steps {} solves {} iterations {} seconds {:.3} setup {:.3} (flow solve {:.3})", e.steps, e.solves, e.iterations, e.seconds, e.setup_seconds, sol.seconds.solve + sol.seconds.assembly + sol.seconds.setup + sol.seconds.heat);
    let rel = |a: f64, b: f64| (a - b) / b;
    let mut worst = [0.0f64; 2];
    for (i, x) in st.iter().enumerate() {
        let e4 = [
            rel(p.nusselt_t_local[i], r[i].nu_t_local),
            rel(p.nusselt_t_mean[i], r[i].nu_t_mean),
            rel(p.nusselt_h1_local[i], r[i].nu_h_local),
            rel(p.nusselt_h1_mean[i], r[i].nu_h_mean),
        ];
        println!(
            "{x:8.1e} {:10.5} {:+.1e} {:10.5} {:+.1e} {:10.5} {:+.1e} {:10.5} {:+.1e}",
            p.nusselt_t_local[i],
            e4[0],
            p.nusselt_t_mean[i],
            e4[1],
            p.nusselt_h1_local[i],
            e4[2],
            p.nusselt_h1_mean[i],
            e4[3]
        );
        let m = e4.iter().fold(0.0f64, |a, b| a.max(b.abs()));
        if *x >= 1e-3 {
            worst[1] = worst[1].max(m)
        } else if *x >= 1e-4 {
            worst[0] = worst[0].max(m)
        }
    }
    println!(
        "worst 1e-4..1e-3 {:.2e}, from 1e-3 {:.2e}; leveque {:?}",
        worst[0], worst[1], p.leveque
    );
}
