//! The thermal entrance march (src/entrance.rs) against references.

use canalis::entrance::{standard_stations, thermal_entrance, MarchParams};
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
        true,
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
    let flow = canalis::entrance::Flow {
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
    println!(
        "steps {} solves {} iterations {} seconds {:.3} setup {:.3}",
        e.steps, e.solves, e.iterations, e.seconds, e.setup_seconds
    );
    for (i, x) in st.iter().enumerate() {
        println!(
            "{x:8.1e} {:10.5} {:10.5} {:10.5} {:10.5}",
            p.nusselt_t_local[i], p.nusselt_t_mean[i], p.nusselt_h1_local[i], p.nusselt_h1_mean[i]
        );
    }
    println!("leveque {:?}", p.leveque);
    println!(
        "fd {} {}  lengths {:?} {:?}",
        heat.nusselt_t, heat.nusselt_h1, p.length_star_t, p.length_star_h1
    );
}
