//! Numbers with units, as every option takes them.
#![no_main]
use canalis::geometry::mask::MinFeature;
use canalis::units;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let _ = units::parse_length(text, "--length");
    let _ = units::parse_flow_rate(text, "--flow");
    let _ = units::parse_pressure_gradient(text, "--dpdx");
    let _ = units::parse_pressure(text, "--pressure-drop");
    let _ = units::parse_temperature(text, "--temperature");
    let _ = units::parse_viscosity(text, "--viscosity");
    let _ = units::parse_density(text, "--density");
    let _ = MinFeature::parse(text);
    if let Some((v, _)) = units::split_number(text) {
        let _ = units::format_significant(v, 1e-3);
    }
});
