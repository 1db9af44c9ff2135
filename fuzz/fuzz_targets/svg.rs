//! SVG drawings: any document, with and without --scale; loading what was accepted.
#![no_main]
use canalis::geometry::svg::parse_svg;
use canalis::input::Input;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    for scale in [None, Some(1e-4)] {
        if let Ok((shape, _)) = parse_svg(text, "fuzz.svg", scale) {
            let _ = Input::Shape(shape).load();
        }
    }
});
