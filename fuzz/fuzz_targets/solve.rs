//! The whole `solve` front end on small grids: a shape file's text and a few option values,
//! through `pipeline::run` (validation, loading, the resolution check, the solve, the bounds,
//! the operating point and the report).
#![no_main]
use canalis::geometry::shapefile::parse_shape_file;
use canalis::input::Input;
use canalis::operating::{Drive, FluidSpec, OperatingSpec};
use canalis::pipeline::{self, SolveConfig};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if data.len() < 4 {
        return;
    }
    let (head, rest) = data.split_at(4);
    let Ok(text) = std::str::from_utf8(rest) else {
        return;
    };
    let Ok(shape) = parse_shape_file(text, "fuzz.toml") else {
        return;
    };
    let mut c = SolveConfig::new(Input::Shape(shape));
    c.cells = Some(8 + (head[0] as usize % 40));
    c.unit.heat = head[1] & 1 == 1;
    c.unit.cg.max_iterations = 200;
    c.memory_limit = 64 << 20;
    if head[2] & 1 == 1 {
        c.operating = Some(OperatingSpec {
            drive: if head[2] & 2 == 2 {
                Drive::FlowRate(10f64.powi(head[3] as i32 % 40 - 30))
            } else {
                Drive::PressureGradient(10f64.powi(head[3] as i32 % 40 - 20))
            },
            fluid: FluidSpec::Given {
                viscosity: 1e-3,
                density: 1000.0,
                conductivity: Some(0.6),
                specific_heat: Some(4180.0),
            },
            length: Some(0.1),
            roughness: if head[1] & 2 == 2 { 5e-5 } else { 0.0 },
        });
    }
    if let Ok(outcome) = pipeline::run(&c) {
        let _ = canalis::report::json_report(&outcome);
        let _ = canalis::report::summary(&outcome);
        let f = &outcome.unit.figures;
        assert!(f.max_to_mean_velocity >= 1.0, "u_max/u_mean {}", f.max_to_mean_velocity);
        assert!(f.flow_integral > 0.0 && f.fanning_f_re.is_finite());
    }
});
