//! Rates one cooling passage through the library API, without the command line.
//!
//! Loads `shapes/mould_slot.toml` (or the shape file given as the first argument), solves the
//! unit problem −∇²ũ = 1, ũ = 0 on the walls, on a grid of 300 cells across, prints the
//! geometric and dimensionless figures, and then scales them to an invented operating point:
//! water at 30 °C flowing at 2 L/min.
//!
//! ```text
//! cargo run --release --example rate_passage
//! cargo run --release --example rate_passage -- shapes/finned_tube.toml
//! ```
//!
//! Scaling (fully developed laminar flow, u = (G/μ)·ũ with G = −dp/dz):
//! Q = (G/μ)·I with I = ∫ũ dA, so G = μ·Q/I (Pa/m); ū = Q/A; Re = ρ·ū·D_h/μ.
//!
//! All values printed are for fully developed laminar flow: no entrance length, no
//! transition. Above Re ≈ 2300 (common practice, no source; the figure depends on the shape)
//! a real passage is likely to be transitional or turbulent and the true pressure drop is
//! higher than the laminar value printed here.

use canalis::fluids::water;
use canalis::geometry::shapefile::load_shape_file;
use canalis::grid::Grid;
use canalis::pipeline::solve_unit;
use canalis::post::WallKind;
use std::path::PathBuf;
use std::process::ExitCode;

/// Grid cells across the longer side of the bounding box.
const CELLS: usize = 300;
/// Operating point (invented for the demo): water temperature, °C ...
const WATER_TEMPERATURE_C: f64 = 30.0;
/// ... and volumetric flow rate, L/min.
const FLOW_L_MIN: f64 = 2.0;
/// Reynolds number above which laminar flow is not to be relied on (common practice, no
/// source).
const RE_LAMINAR_LIMIT: f64 = 2300.0;

fn main() -> ExitCode {
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("rate_passage: {e}");
            ExitCode::FAILURE
        }
    }
}

fn run() -> canalis::Result<()> {
    let path = match std::env::args_os().nth(1) {
        Some(arg) => PathBuf::from(arg),
        None => PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("shapes/mould_slot.toml"),
    };
    let shape = load_shape_file(&path)?;
    let (lo, hi) = shape.bbox();
    let grid = Grid::covering(lo, hi, CELLS);
    // The walls are the exact curves of the shape file, not a mask's pixel staircase.
    let sol = solve_unit(&shape, grid, WallKind::Exact, &Default::default())?;
    let f = &sol.figures;

    println!("{}", path.display());
    if let Some(name) = &shape.name {
        println!("  {name}");
    }
    println!(
        "grid {} x {} nodes, h = {:.4} mm, {} unknowns; {} CG iterations",
        grid.nx,
        grid.ny,
        grid.h * 1e3,
        sol.numbering.len(),
        sol.info.iterations
    );
    println!();
    println!("area A                  {:.4} mm²", f.area * 1e6);
    println!("wetted perimeter P      {:.4} mm", f.perimeter * 1e3);
    println!(
        "hydraulic diameter D_h  {:.4} mm",
        f.hydraulic_diameter * 1e3
    );
    println!("f·Re (Fanning)          {:.4}", f.fanning_f_re);
    println!("u_max / ū               {:.4}", f.max_to_mean_velocity);
    println!("wall shear max / mean   {:.4}", f.wall_shear_max_to_mean);
    println!("force balance error     {:.2e}", f.force_balance_rel_error);

    // Operating point. Water properties: IAPWS R12-08 viscosity, Kell (1975) density.
    let (fluid, warnings) = water(WATER_TEMPERATURE_C + 273.15)?;
    for w in &warnings {
        println!("warning: {w}");
    }
    let (mu, rho) = (fluid.viscosity_pa_s, fluid.density_kg_m3);
    let q = FLOW_L_MIN * 1e-3 / 60.0; // m³/s
    let gradient = mu * q / f.flow_integral; // G = μQ/I, Pa/m
    let mean_velocity = q / f.area; // ū = Q/A, m/s
    let reynolds = rho * mean_velocity * f.hydraulic_diameter / mu;

    println!();
    println!(
        "operating point: water at {WATER_TEMPERATURE_C} °C (μ = {:.4} mPa·s, ρ = {:.2} kg/m³), \
         {FLOW_L_MIN} L/min",
        mu * 1e3,
        rho
    );
    println!("  (fully developed laminar flow)");
    println!("pressure drop per metre {:.4} kPa/m", gradient * 1e-3);
    println!("mean velocity ū         {:.4} m/s", mean_velocity);
    println!("Reynolds number         {:.0}", reynolds);
    if reynolds > RE_LAMINAR_LIMIT {
        println!(
            "note: Re = {reynolds:.0} is above about {RE_LAMINAR_LIMIT:.0}; the flow is likely \
             not laminar, and the laminar pressure drop above is then a lower bound"
        );
    }
    Ok(())
}
