//! Rates one cooling passage through the library API, without the command line.
//!
//! Loads `shapes/mould_slot.toml` (or the shape file given as the first argument) into a shape
//! in memory, and hands it to the pipeline with an invented operating point, water at 30 °C
//! flowing at 2 L/min, on a grid of 300 cells across: the pipeline checks the configuration,
//! solves the unit problem −∇²ũ = 1, ũ = 0 on the walls, and scales it to the operating point.
//! The example prints the geometric and dimensionless figures and the dimensional ones.
//!
//! ```text
//! cargo run --release --example rate_passage
//! cargo run --release --example rate_passage -- shapes/finned_tube.toml
//! ```
//!
//! Scaling (fully developed laminar flow, u = (G/μ)·ũ with G = −dp/dz, done by
//! `operating::operating_point`): Q = (G/μ)·I with I = ∫ũ dA, so G = μ·Q/I (Pa/m); ū = Q/A;
//! Re = ρ·ū·D_h/μ.
//!
//! All values printed are for fully developed laminar flow: no entrance length, no
//! transition. Above Re ≈ 2300 (common practice, no source; the figure depends on the shape)
//! a real passage is likely to be transitional or turbulent and the true pressure drop is
//! higher than the laminar value printed here; the pipeline's warnings, printed at the end,
//! say so from Re = 2000.

use canalis::geometry::shapefile::load_shape_file;
use canalis::input::Input;
use canalis::operating::{Drive, FluidSpec, OperatingSpec};
use canalis::pipeline::{self, ErrorEstimate, SolveConfig};
use std::path::PathBuf;
use std::process::ExitCode;

/// Grid cells across the longer side of the bounding box.
const CELLS: usize = 300;
/// Operating point (invented for the demo): water temperature, °C ...
const WATER_TEMPERATURE_C: f64 = 30.0;
/// ... and volumetric flow rate, L/min.
const FLOW_L_MIN: f64 = 2.0;

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
    println!("{}", path.display());
    if let Some(name) = &shape.name {
        println!("  {name}");
    }

    let mut config = SolveConfig::new(Input::Shape(shape));
    config.cells = Some(CELLS);
    // One grid, no error bars: the CLI's default adds a cheap estimate from a coarser grid.
    config.error_estimate = ErrorEstimate::Off;
    config.operating = Some(OperatingSpec {
        drive: Drive::FlowRate(FLOW_L_MIN * 1e-3 / 60.0), // m³/s
        // Water properties: IAPWS R12-08 viscosity, Kell (1975) density (canalis::fluids).
        fluid: FluidSpec::Named {
            name: "water".into(),
            temperature_k: Some(WATER_TEMPERATURE_C + 273.15),
        },
        length: None,
        roughness: 0.0,
    });
    let outcome = pipeline::run(&config)?;
    let (sol, f) = (&outcome.unit, &outcome.unit.figures);
    let grid = sol.classified.grid;

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

    if let Some(op) = &outcome.operating {
        println!();
        println!(
            "operating point: water at {WATER_TEMPERATURE_C} °C (μ = {:.4} mPa·s, ρ = {:.2} \
             kg/m³), {FLOW_L_MIN} L/min",
            op.fluid.viscosity_pa_s * 1e3,
            op.fluid.density_kg_m3
        );
        println!("  (fully developed laminar flow)");
        println!(
            "pressure drop per metre {:.4} kPa/m",
            op.pressure_gradient_pa_m * 1e-3
        );
        println!("mean velocity ū         {:.4} m/s", op.mean_velocity_m_s);
        println!("Reynolds number         {:.0}", op.reynolds);
    }
    for w in &outcome.warnings {
        println!("warning: {w}");
    }
    Ok(())
}
