//! Shape files: parsing and checking any text, then the walls of what was accepted.
#![no_main]
use canalis::geometry::shapefile::parse_shape_file;
use canalis::input::Input;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok(shape) = parse_shape_file(text, "fuzz.toml") {
        // Loading checks the sizes and computes the walls (area, perimeter).
        let _ = Input::Shape(shape).load();
    }
});
