//! SVG drawings as input, through the real `canalis` binary in a temporary directory: each
//! drawing is solved with `--cells 200 --json` and compared with the same cross-section written
//! as a shape file or a built-in shape, solved the same way (exact geometry: the drawing and the
//! shape file describe the same curves, so f·Re, area and perimeter agree to well within
//! 0.05 %). Bad input: exit status 2 with a message naming the file or the option.

use serde_json::Value;
use std::path::Path;
use std::process::{Command, Output};

const SVG_NS: &str = "xmlns=\"http://www.w3.org/2000/svg\"";

fn run(dir: &Path, args: &[&str]) -> Output {
    let out = Command::new(env!("CARGO_BIN_EXE_canalis"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("the binary runs");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!stderr.contains("panicked"), "panic: {stderr}");
    out
}

fn solve(dir: &Path, shape: &str, extra: &[&str]) -> Value {
    let mut args = vec!["solve", shape, "--cells", "200", "--json", "--quiet"];
    args.extend_from_slice(extra);
    let out = run(dir, &args);
    assert_eq!(
        out.status.code(),
        Some(0),
        "canalis {args:?}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("one JSON object")
}

fn write(dir: &Path, name: &str, text: &str) -> String {
    std::fs::write(dir.join(name), text).expect("write");
    name.to_string()
}

/// Relative differences of f·Re, area and perimeter; asserts each is below 0.05 %.
fn compare(what: &str, svg: &Value, reference: &Value) -> [f64; 3] {
    let mut d = [0.0; 3];
    for (k, key) in ["fanning_f_re", "area_m2", "perimeter_m"]
        .iter()
        .enumerate()
    {
        let (a, b) = (
            svg[key].as_f64().expect(key),
            reference[key].as_f64().expect(key),
        );
        d[k] = (a / b - 1.0).abs();
        assert!(d[k] < 5e-4, "{what}: {key} {a} against {b} ({:.2e})", d[k]);
    }
    eprintln!(
        "{what}: relative differences f·Re {:.1e}, area {:.1e}, perimeter {:.1e}",
        d[0], d[1], d[2]
    );
    d
}

fn stderr_of(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).to_string()
}

#[test]
fn circle_matches_the_builtin_circle() {
    let dir = tempfile::tempdir().unwrap();
    // 40 mm wide over 40 user units: 1 unit = 1 mm; r = 4 mm, d = 8 mm (exact geometry).
    let svg = write(
        dir.path(),
        "circle.svg",
        &format!(
            "<svg {SVG_NS} width=\"40mm\" height=\"40mm\" viewBox=\"0 0 40 40\">\
             <circle cx=\"20\" cy=\"15\" r=\"4\" fill=\"black\"/></svg>"
        ),
    );
    let a = solve(dir.path(), &svg, &[]);
    let b = solve(dir.path(), "circle:d=8mm", &[]);
    compare("circle", &a, &b);
    // f·Re = 16 for a circle (Hagen–Poiseuille, exact).
    assert!((a["fanning_f_re"].as_f64().unwrap() / 16.0 - 1.0).abs() < 5e-4);
    let warnings = a["warnings"].to_string();
    assert!(warnings.contains("1 user unit = 1 mm"), "{warnings}");
}

#[test]
fn rotated_ellipse_matches_the_shape_file() {
    let dir = tempfile::tempdir().unwrap();
    // rotate(30) in SVG's y-down frame is −30° in the y-up cross-section.
    let svg = write(
        dir.path(),
        "ellipse.svg",
        &format!(
            "<svg {SVG_NS} width=\"10cm\" height=\"10cm\" viewBox=\"0 0 100 100\">\
             <ellipse transform=\"rotate(30 50 50)\" cx=\"50\" cy=\"50\" rx=\"6\" ry=\"3\" \
             fill=\"#204080\"/></svg>"
        ),
    );
    let toml = write(
        dir.path(),
        "ellipse.toml",
        "units = \"mm\"\n[[region]]\nkind = \"ellipse\"\ncenter = [50, -50]\n\
         semi_axes = [6, 3]\nangle_deg = -30\n",
    );
    let a = solve(dir.path(), &svg, &[]);
    let b = solve(dir.path(), &toml, &[]);
    compare("rotated ellipse", &a, &b);
}

/// Square 20 mm with a circular hole r = 5 mm, the shape file.
const SQUARE_HOLE_TOML: &str = "units = \"mm\"\n[[region]]\nkind = \"polygon\"\n\
    points = [[0, 0], [20, 0], [20, -20], [0, -20]]\n\
    [[hole]]\nkind = \"circle\"\ncenter = [10, -10]\nradius = 5\n";

#[test]
fn evenodd_hole_and_white_circle_match_the_shape_file() {
    let dir = tempfile::tempdir().unwrap();
    let evenodd = write(
        dir.path(),
        "evenodd.svg",
        &format!(
            "<svg {SVG_NS} viewBox=\"0 0 20 20\"><path fill-rule=\"evenodd\" \
             d=\"M0 0 H20 V20 H0 Z M10 5 A5 5 0 0 1 15 10 A5 5 0 0 1 10 15 A5 5 0 0 1 5 10 \
             A5 5 0 0 1 10 5 Z\"/></svg>"
        ),
    );
    let white = write(
        dir.path(),
        "white.svg",
        &format!(
            "<svg {SVG_NS} viewBox=\"0 0 20 20\"><rect width=\"20\" height=\"20\"/>\
             <circle cx=\"10\" cy=\"10\" r=\"5\" fill=\"white\"/></svg>"
        ),
    );
    let toml = write(dir.path(), "square_hole.toml", SQUARE_HOLE_TOML);
    let reference = solve(dir.path(), &toml, &[]);
    let a = solve(dir.path(), &evenodd, &["--scale", "1mm"]);
    compare("square with evenodd hole", &a, &reference);
    let b = solve(dir.path(), &white, &["--scale", "1mm"]);
    compare("square with white circle", &b, &reference);
    compare("white circle against evenodd hole", &b, &a);
}

#[test]
fn bad_drawings_exit_2_with_a_message() {
    let dir = tempfile::tempdir().unwrap();
    let cases = [
        (
            "nofill.svg",
            format!(
                "<svg {SVG_NS} width=\"10mm\" height=\"10mm\"><circle cx=\"5\" cy=\"5\" r=\"2\" \
                 fill=\"none\" stroke=\"black\"/></svg>"
            ),
            "no filled shape",
        ),
        (
            "garbage.svg",
            "this is not a drawing".to_string(),
            "not an SVG",
        ),
        (
            // A filled outline whose ends do not meet (issue 7: open paths are bad input).
            "open.svg",
            format!(
                "<svg {SVG_NS} width=\"10mm\" height=\"10mm\" viewBox=\"0 0 10 10\">\
                 <path d=\"M 1 1 L 9 1 L 9 9 L 1 9\"/></svg>"
            ),
            "open path",
        ),
        (
            "nounits.svg",
            format!(
                "<svg {SVG_NS} viewBox=\"0 0 10 10\"><circle cx=\"5\" cy=\"5\" r=\"2\"/></svg>"
            ),
            "--scale",
        ),
    ];
    for (name, text, needle) in &cases {
        let file = write(dir.path(), name, text);
        let out = run(dir.path(), &["solve", &file, "--json"]);
        let err = stderr_of(&out);
        assert_eq!(out.status.code(), Some(2), "{name}: {err}");
        assert!(err.contains(name) && err.contains(needle), "{name}: {err}");
        assert!(out.stdout.is_empty(), "{name}: stdout not empty");
    }
    // An outline drawn back to its start without Z is closed, not open: it solves.
    let file = write(
        dir.path(),
        "backtostart.svg",
        &format!(
            "<svg {SVG_NS} width=\"10mm\" height=\"10mm\" viewBox=\"0 0 10 10\">\
             <path d=\"M 1 1 L 9 1 L 9 9 L 1 9 L 1 1\"/></svg>"
        ),
    );
    let out = run(dir.path(), &["solve", &file, "--json", "--cells", "64"]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr_of(&out));
    // A file that is not there.
    let out = run(dir.path(), &["solve", "missing.svg"]);
    let err = stderr_of(&out);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("missing.svg"), "{err}");
    // A bad --scale.
    let file = write(
        dir.path(),
        "ok.svg",
        &format!("<svg {SVG_NS} viewBox=\"0 0 10 10\"><circle cx=\"5\" cy=\"5\" r=\"2\"/></svg>"),
    );
    for bad in ["-1mm", "0", "abc", "3furlong"] {
        let out = run(dir.path(), &["solve", &file, "--scale", bad]);
        let err = stderr_of(&out);
        assert_eq!(out.status.code(), Some(2), "--scale {bad}: {err}");
        assert!(err.contains("--scale"), "--scale {bad}: {err}");
    }
}
