//! SVG drawings as input, through the real `canalis` binary in a temporary directory: each
//! drawing is solved with `--cells 200 --json` and compared with the same cross-section written
//! as a shape file or a built-in shape, solved the same way (exact geometry: the drawing and the
//! shape file describe the same curves, so f·Re, area and perimeter agree to well within
//! 0.05 %). Bad input: exit status 2 with a message naming the file or the option.

mod common;

use common::Sandbox;
use serde_json::Value;

const SVG_NS: &str = "xmlns=\"http://www.w3.org/2000/svg\"";

/// The report of `shape` solved on 200 cells.
fn solve(sb: &Sandbox, shape: &str, extra: &[&str]) -> Value {
    let mut args = vec!["solve", shape, "--cells", "200", "--json", "--quiet"];
    args.extend_from_slice(extra);
    sb.report(&args)
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

#[test]
fn circle_matches_the_builtin_circle() {
    let sb = Sandbox::new();
    // 40 mm wide over 40 user units: 1 unit = 1 mm; r = 4 mm, d = 8 mm (exact geometry).
    let svg = sb.write(
        "circle.svg",
        &format!(
            "<svg {SVG_NS} width=\"40mm\" height=\"40mm\" viewBox=\"0 0 40 40\">\
             <circle cx=\"20\" cy=\"15\" r=\"4\" fill=\"black\"/></svg>"
        ),
    );
    let a = solve(&sb, &svg, &[]);
    let b = solve(&sb, "circle:d=8mm", &[]);
    compare("circle", &a, &b);
    // f·Re = 16 for a circle (Hagen–Poiseuille, exact).
    assert!((a["fanning_f_re"].as_f64().unwrap() / 16.0 - 1.0).abs() < 5e-4);
    let warnings = a["warnings"].to_string();
    assert!(warnings.contains("1 user unit = 1 mm"), "{warnings}");
}

#[test]
fn rotated_ellipse_matches_the_shape_file() {
    let sb = Sandbox::new();
    // rotate(30) in SVG's y-down frame is −30° in the y-up cross-section.
    let svg = sb.write(
        "ellipse.svg",
        &format!(
            "<svg {SVG_NS} width=\"10cm\" height=\"10cm\" viewBox=\"0 0 100 100\">\
             <ellipse transform=\"rotate(30 50 50)\" cx=\"50\" cy=\"50\" rx=\"6\" ry=\"3\" \
             fill=\"#204080\"/></svg>"
        ),
    );
    let toml = sb.write(
        "ellipse.toml",
        "units = \"mm\"\n[[region]]\nkind = \"ellipse\"\ncenter = [50, -50]\n\
         semi_axes = [6, 3]\nangle_deg = -30\n",
    );
    let a = solve(&sb, &svg, &[]);
    let b = solve(&sb, &toml, &[]);
    compare("rotated ellipse", &a, &b);
}

/// Square 20 mm with a circular hole r = 5 mm, the shape file.
const SQUARE_HOLE_TOML: &str = "units = \"mm\"\n[[region]]\nkind = \"polygon\"\n\
    points = [[0, 0], [20, 0], [20, -20], [0, -20]]\n\
    [[hole]]\nkind = \"circle\"\ncenter = [10, -10]\nradius = 5\n";

#[test]
fn evenodd_hole_and_white_circle_match_the_shape_file() {
    let sb = Sandbox::new();
    let evenodd = sb.write(
        "evenodd.svg",
        &format!(
            "<svg {SVG_NS} viewBox=\"0 0 20 20\"><path fill-rule=\"evenodd\" \
             d=\"M0 0 H20 V20 H0 Z M10 5 A5 5 0 0 1 15 10 A5 5 0 0 1 10 15 A5 5 0 0 1 5 10 \
             A5 5 0 0 1 10 5 Z\"/></svg>"
        ),
    );
    let white = sb.write(
        "white.svg",
        &format!(
            "<svg {SVG_NS} viewBox=\"0 0 20 20\"><rect width=\"20\" height=\"20\"/>\
             <circle cx=\"10\" cy=\"10\" r=\"5\" fill=\"white\"/></svg>"
        ),
    );
    let toml = sb.write("square_hole.toml", SQUARE_HOLE_TOML);
    let reference = solve(&sb, &toml, &[]);
    let a = solve(&sb, &evenodd, &["--scale", "1mm"]);
    compare("square with evenodd hole", &a, &reference);
    let b = solve(&sb, &white, &["--scale", "1mm"]);
    compare("square with white circle", &b, &reference);
    compare("white circle against evenodd hole", &b, &a);
}

#[test]
fn bad_drawings_exit_2_with_a_message() {
    let sb = Sandbox::new();
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
        let file = sb.write(name, text);
        sb.input_error(&["solve", &file, "--json"], &[name, needle]);
    }
    // An outline drawn back to its start without Z is closed, not open: it solves.
    let file = sb.write(
        "backtostart.svg",
        &format!(
            "<svg {SVG_NS} width=\"10mm\" height=\"10mm\" viewBox=\"0 0 10 10\">\
             <path d=\"M 1 1 L 9 1 L 9 9 L 1 9 L 1 1\"/></svg>"
        ),
    );
    sb.run(&["solve", &file, "--json", "--cells", "64"])
        .assert_success();
    // A file that is not there.
    sb.input_error(&["solve", "missing.svg"], &["missing.svg"]);
    // A bad --scale.
    let file = sb.write(
        "ok.svg",
        &format!("<svg {SVG_NS} viewBox=\"0 0 10 10\"><circle cx=\"5\" cy=\"5\" r=\"2\"/></svg>"),
    );
    for bad in ["-1mm", "0", "abc", "3furlong"] {
        sb.input_error(&["solve", &file, "--scale", bad], &["--scale"]);
    }
}
