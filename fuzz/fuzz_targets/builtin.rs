//! Built-in shape specs: `name:key=value,...`.
#![no_main]
use canalis::geometry::builtin::parse_builtin;
use canalis::input::Input;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(spec) = std::str::from_utf8(data) else {
        return;
    };
    let _ = canalis::input::InputKind::of(spec);
    if parse_builtin(spec).is_ok() {
        let _ = Input::Builtin(spec.to_string()).load();
    }
});
