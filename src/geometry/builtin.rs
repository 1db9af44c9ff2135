//! Built-in parametric shapes, written `name:key=value,key=value` (e.g. `circle:d=8mm`).
//!
//! Owns: the catalogue of built-in cross-sections (listed by `canalis shapes`), the parsing of a
//! spec into a [`Shape`] in metres, and the consistency checks of the parameters. Lengths go
//! through [`crate::units::parse_length`] (`8mm`, `0.5in`, a bare number is metres); angles are
//! in degrees; counts are integers. Every shape is centred on the origin.
//!
//! Errors are [`Error::ShapeParse`] with `origin` = the spec and no line.

use super::{Primitive, Shape};
use crate::error::{Error, Result};
use crate::units::parse_length;
use std::f64::consts::PI;

/// One entry of the catalogue of built-in shapes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BuiltinInfo {
    /// The name before the ':' in a spec.
    pub name: &'static str,
    /// (key, meaning) of every accepted parameter; optional ones say so in their meaning.
    pub params: &'static [(&'static str, &'static str)],
    /// One-line description.
    pub description: &'static str,
    /// A spec that works as it is.
    pub example: &'static str,
}

static CATALOGUE: [BuiltinInfo; 10] = [
    BuiltinInfo {
        name: "circle",
        params: &[("d", "diameter"), ("r", "radius (instead of d)")],
        description: "round tube",
        example: "circle:d=8mm",
    },
    BuiltinInfo {
        name: "rect",
        params: &[
            ("w", "width (along x)"),
            ("h", "height (along y)"),
            (
                "r",
                "corner radius (optional, default 0, at most half the smaller side)",
            ),
            ("angle", "rotation in degrees, counter-clockwise (optional)"),
        ],
        description: "rectangle, optionally with rounded corners",
        example: "rect:w=20mm,h=5mm",
    },
    BuiltinInfo {
        name: "square",
        params: &[
            ("side", "side length"),
            (
                "r",
                "corner radius (optional, default 0, at most half the side)",
            ),
            ("angle", "rotation in degrees, counter-clockwise (optional)"),
        ],
        description: "square, optionally with rounded corners",
        example: "square:side=10mm",
    },
    BuiltinInfo {
        name: "ellipse",
        params: &[
            ("a", "semi-axis along x"),
            ("b", "semi-axis along y"),
            ("angle", "rotation in degrees, counter-clockwise (optional)"),
        ],
        description: "ellipse given by its semi-axes",
        example: "ellipse:a=6mm,b=3mm",
    },
    BuiltinInfo {
        name: "triangle",
        params: &[("side", "side length")],
        description: "equilateral triangle, one side horizontal at the bottom",
        example: "triangle:side=10mm",
    },
    BuiltinInfo {
        name: "annulus",
        params: &[
            ("do", "outer diameter"),
            ("di", "inner (core) diameter"),
            (
                "offset",
                "displacement of the core along +x (optional, default 0: concentric)",
            ),
        ],
        description: "tube with a solid round core, concentric or eccentric",
        example: "annulus:do=20mm,di=10mm,offset=2mm",
    },
    BuiltinInfo {
        name: "slot",
        params: &[
            ("w", "overall length (along x)"),
            (
                "h",
                "width (along y); the ends are half circles of this diameter",
            ),
            ("angle", "rotation in degrees, counter-clockwise (optional)"),
        ],
        description: "milled slot with rounded ends (a rect with corner radius min(w, h)/2)",
        example: "slot:w=20mm,h=4mm",
    },
    BuiltinInfo {
        name: "polygon",
        params: &[
            ("n", "number of sides, an integer from 3 to 1000"),
            ("d", "diameter of the circumscribed circle"),
        ],
        description: "regular polygon, one side horizontal at the bottom",
        example: "polygon:n=6,d=10mm",
    },
    BuiltinInfo {
        name: "finned",
        params: &[
            ("d", "inner diameter of the tube"),
            (
                "fins",
                "number of straight internal fins, an integer from 1 to 1000",
            ),
            (
                "height",
                "radial height of each fin, measured from the wall",
            ),
            ("thickness", "thickness of each fin"),
        ],
        description: "round tube with equally spaced straight fins pointing to the centre \
                      (the first along +x)",
        example: "finned:d=20mm,fins=6,height=4mm,thickness=1mm",
    },
    BuiltinInfo {
        name: "square_annulus",
        params: &[
            ("side", "outer side length"),
            ("core", "side length of the square solid core"),
        ],
        description: "square duct with a concentric square solid core",
        example: "square_annulus:side=20mm,core=10mm",
    },
];

/// The catalogue of built-in shapes, in the order `canalis shapes` lists them.
pub fn catalogue() -> &'static [BuiltinInfo] {
    &CATALOGUE
}

fn find(name: &str) -> Option<&'static BuiltinInfo> {
    let name = name.trim();
    CATALOGUE.iter().find(|b| b.name.eq_ignore_ascii_case(name))
}

fn known_names() -> String {
    CATALOGUE
        .iter()
        .map(|b| b.name)
        .collect::<Vec<_>>()
        .join(", ")
}

/// True when `spec` reads as a built-in shape: the text before the first ':' is a known shape
/// name, and `spec` is not the path of an existing file (a file wins).
pub fn looks_like_builtin(spec: &str) -> bool {
    match spec.split_once(':') {
        Some((name, _)) => find(name).is_some() && !std::path::Path::new(spec).exists(),
        None => false,
    }
}

/// A length in metres written for people: in millimetres, six significant digits.
fn fmt_len(metres: f64) -> String {
    format!("{} mm", fmt_num(metres * 1e3))
}

/// A number with six significant digits and no trailing zeros.
fn fmt_num(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let digits = (5 - x.abs().log10().floor() as i32).clamp(0, 15) as usize;
    let s = format!("{x:.digits$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// A parsed spec: the catalogue entry and the `key=value` pairs, each key known and unique.
struct Spec<'a> {
    spec: &'a str,
    info: &'static BuiltinInfo,
    values: Vec<(&'a str, &'a str)>,
    /// Pieces of the readable label, in the order they were read.
    label: Vec<String>,
}

impl<'a> Spec<'a> {
    fn err(&self, message: impl Into<String>) -> Error {
        err(self.spec, message)
    }

    /// "d = diameter; r = radius (instead of d)".
    fn expected(&self) -> String {
        self.info
            .params
            .iter()
            .map(|(k, m)| format!("{k} = {m}"))
            .collect::<Vec<_>>()
            .join("; ")
    }

    fn raw(&self, key: &str) -> Option<&'a str> {
        self.values.iter().find(|(k, _)| *k == key).map(|(_, v)| *v)
    }

    fn missing(&self, key: &str) -> Error {
        self.err(format!(
            "missing parameter '{key}'; {} takes: {}",
            self.info.name,
            self.expected()
        ))
    }

    /// An optional length in metres, finite.
    fn length_opt(&mut self, key: &str) -> Result<Option<f64>> {
        let Some(text) = self.raw(key) else {
            return Ok(None);
        };
        let v = parse_length(text, key).map_err(|e| self.err(e.to_string()))?;
        self.label.push(format!("{key}={}", fmt_len(v)));
        Ok(Some(v))
    }

    /// A required, strictly positive length in metres.
    fn positive(&mut self, key: &str) -> Result<f64> {
        let v = self.length_opt(key)?.ok_or_else(|| self.missing(key))?;
        self.check_positive(key, v)
    }

    fn check_positive(&self, key: &str, v: f64) -> Result<f64> {
        if v <= 0.0 {
            return Err(self.err(format!("{key} must be positive, it is {}", fmt_len(v))));
        }
        Ok(v)
    }

    /// An optional angle in degrees, returned in radians (0 when absent).
    fn angle(&mut self, key: &str) -> Result<f64> {
        let Some(text) = self.raw(key) else {
            return Ok(0.0);
        };
        let t = text.trim();
        let num = t
            .strip_suffix("deg")
            .or_else(|| t.strip_suffix('°'))
            .unwrap_or(t)
            .trim();
        let deg: f64 = num
            .parse()
            .ok()
            .filter(|x: &f64| x.is_finite())
            .ok_or_else(|| {
                self.err(format!(
                    "{key}: '{text}' is not an angle in degrees (a finite number, e.g. 30)"
                ))
            })?;
        self.label.push(format!("{key}={} deg", fmt_num(deg)));
        Ok(deg.to_radians())
    }

    /// A required integer in `lo..=hi`.
    fn integer(&mut self, key: &str, lo: usize, hi: usize) -> Result<usize> {
        let text = self.raw(key).ok_or_else(|| self.missing(key))?;
        let n: usize = text.trim().parse().map_err(|_| {
            self.err(format!(
                "{key}: '{text}' is not a whole number (expected {lo} to {hi})"
            ))
        })?;
        if !(lo..=hi).contains(&n) {
            return Err(self.err(format!("{key} must lie between {lo} and {hi}, it is {n}")));
        }
        self.label.push(format!("{key}={n}"));
        Ok(n)
    }

    /// Optional corner radius for a rect of size `size`: 0 ≤ r ≤ min(w, h)/2.
    fn corner_radius(&mut self, key: &str, size: [f64; 2]) -> Result<f64> {
        let Some(r) = self.length_opt(key)? else {
            return Ok(0.0);
        };
        let half_min = 0.5 * size[0].min(size[1]);
        if r < 0.0 || r > half_min * (1.0 + 1e-12) {
            return Err(self.err(format!(
                "{key} (corner radius, {}) must lie between 0 and half the smaller side ({})",
                fmt_len(r),
                fmt_len(half_min)
            )));
        }
        Ok(r.min(half_min))
    }
}

fn err(spec: &str, message: impl Into<String>) -> Error {
    Error::ShapeParse {
        origin: spec.to_string(),
        line: None,
        message: message.into(),
    }
}

/// Splits `name:key=value,...` and checks the keys against the catalogue.
fn split_spec(spec: &str) -> Result<Spec<'_>> {
    let Some((name, rest)) = spec.split_once(':') else {
        return Err(match find(spec) {
            Some(info) => err(
                spec,
                format!(
                    "the shape '{}' needs its parameters, for example {}",
                    info.name, info.example
                ),
            ),
            None => err(
                spec,
                format!(
                    "not a built-in shape (written name:key=value,key=value); known shapes: {}",
                    known_names()
                ),
            ),
        });
    };
    let info = find(name).ok_or_else(|| {
        err(
            spec,
            format!(
                "unknown built-in shape '{}'; known shapes: {}",
                name.trim(),
                known_names()
            ),
        )
    })?;
    let mut s = Spec {
        spec,
        info,
        values: Vec::new(),
        label: Vec::new(),
    };
    // Empty items (a trailing comma, ",,") are skipped.
    for item in rest.split(',').filter(|i| !i.trim().is_empty()) {
        let Some((key, value)) = item.split_once('=') else {
            return Err(s.err(format!(
                "'{}' is not key=value; {} takes: {}",
                item.trim(),
                info.name,
                s.expected()
            )));
        };
        let key = key.trim();
        if !info.params.iter().any(|(k, _)| *k == key) {
            return Err(s.err(format!(
                "unknown parameter '{key}' for {}; expected: {}",
                info.name,
                s.expected()
            )));
        }
        if s.raw(key).is_some() {
            return Err(s.err(format!("parameter '{key}' is given twice")));
        }
        s.values.push((key, value.trim()));
    }
    Ok(s)
}

fn origin_circle(radius: f64) -> Primitive {
    Primitive::Circle {
        center: [0.0, 0.0],
        radius,
    }
}

/// Vertices of a regular n-gon inscribed in a circle of radius `radius` about the origin, one
/// side horizontal at the bottom: vertex k at the angle −π/2 + π/n + 2πk/n.
fn regular_polygon(n: usize, radius: f64) -> Vec<[f64; 2]> {
    (0..n)
        .map(|k| {
            let phi = -0.5 * PI + PI / n as f64 + 2.0 * PI * k as f64 / n as f64;
            [radius * phi.cos(), radius * phi.sin()]
        })
        .collect()
}

/// Parses a built-in shape spec such as `annulus:do=20mm,di=10mm,offset=2mm`.
pub fn parse_builtin(spec: &str) -> Result<Shape> {
    let mut s = split_spec(spec)?;
    let mut holes = Vec::new();
    let region = match s.info.name {
        "circle" => {
            let d = s.length_opt("d")?;
            let r = s.length_opt("r")?;
            let radius = match (d, r) {
                (Some(_), Some(_)) => return Err(s.err("give d or r, not both")),
                (None, None) => return Err(s.missing("d")),
                (Some(d), None) => 0.5 * s.check_positive("d", d)?,
                (None, Some(r)) => s.check_positive("r", r)?,
            };
            origin_circle(radius)
        }
        "rect" => {
            let size = [s.positive("w")?, s.positive("h")?];
            let corner_radius = s.corner_radius("r", size)?;
            Primitive::Rect {
                center: [0.0, 0.0],
                size,
                corner_radius,
                angle: s.angle("angle")?,
            }
        }
        "square" => {
            let side = s.positive("side")?;
            let corner_radius = s.corner_radius("r", [side, side])?;
            Primitive::Rect {
                center: [0.0, 0.0],
                size: [side, side],
                corner_radius,
                angle: s.angle("angle")?,
            }
        }
        "ellipse" => Primitive::Ellipse {
            center: [0.0, 0.0],
            semi_axes: [s.positive("a")?, s.positive("b")?],
            angle: s.angle("angle")?,
        },
        "triangle" => {
            // Equilateral triangle with its centroid at the origin: circumradius side/√3,
            // bottom side at y = −side/(2√3) (inradius).
            let side = s.positive("side")?;
            Primitive::Polygon {
                points: regular_polygon(3, side / 3f64.sqrt()),
            }
        }
        "annulus" => {
            let d_out = s.positive("do")?;
            let d_in = s.positive("di")?;
            let offset = s.length_opt("offset")?.unwrap_or(0.0);
            if d_in >= d_out {
                return Err(s.err(format!(
                    "di ({}) must be smaller than do ({})",
                    fmt_len(d_in),
                    fmt_len(d_out)
                )));
            }
            // The core stays clear of the outer wall when |e| + r_i < r_o.
            let gap = 0.5 * (d_out - d_in);
            if offset.abs() >= gap {
                return Err(s.err(format!(
                    "offset ({}) makes the core touch the outer wall: it must be smaller than \
                     (do - di)/2 = {}",
                    fmt_len(offset),
                    fmt_len(gap)
                )));
            }
            holes.push(Primitive::Circle {
                center: [offset, 0.0],
                radius: 0.5 * d_in,
            });
            origin_circle(0.5 * d_out)
        }
        "slot" => {
            let w = s.positive("w")?;
            let h = s.positive("h")?;
            Primitive::Rect {
                center: [0.0, 0.0],
                size: [w, h],
                corner_radius: 0.5 * w.min(h),
                angle: s.angle("angle")?,
            }
        }
        "polygon" => {
            let n = s.integer("n", 3, 1000)?;
            let d = s.positive("d")?;
            Primitive::Polygon {
                points: regular_polygon(n, 0.5 * d),
            }
        }
        "finned" => {
            let d = s.positive("d")?;
            let fins = s.integer("fins", 1, 1000)?;
            let height = s.positive("height")?;
            let t = s.positive("thickness")?;
            let radius = 0.5 * d;
            if height >= radius {
                return Err(s.err(format!(
                    "height ({}) must be smaller than d/2 ({}): the fins would meet at the centre",
                    fmt_len(height),
                    fmt_len(radius)
                )));
            }
            if t >= d {
                return Err(s.err(format!(
                    "thickness ({}) must be smaller than d ({})",
                    fmt_len(t),
                    fmt_len(d)
                )));
            }
            // Each fin is the strip |y'| ≤ t/2, x' ≥ r_tip in its own frame (x' along the fin).
            // Adjacent fins are 2π/n apart; their closest points are the tip corners
            // (r_tip, ±t/2), at the polar angle atan(t/(2·r_tip)), so the fins are clear of
            // each other when that angle is below π/n.
            let r_tip = radius - height;
            if fins > 1 && (0.5 * t).atan2(r_tip) >= PI / fins as f64 {
                return Err(s.err(format!(
                    "{fins} fins of thickness {} and height {} overlap at their tips; use fewer, \
                     thinner or shorter fins",
                    fmt_len(t),
                    fmt_len(height)
                )));
            }
            // The strip runs out to r_tip + height + t, beyond the wall, so the root is flush
            // with the wall whatever the thickness.
            let length = height + t;
            let mid = r_tip + 0.5 * length;
            for k in 0..fins {
                let phi = 2.0 * PI * k as f64 / fins as f64;
                holes.push(Primitive::Rect {
                    center: [mid * phi.cos(), mid * phi.sin()],
                    size: [length, t],
                    corner_radius: 0.0,
                    angle: phi,
                });
            }
            origin_circle(radius)
        }
        "square_annulus" => {
            let side = s.positive("side")?;
            let core = s.positive("core")?;
            if core >= side {
                return Err(s.err(format!(
                    "core ({}) must be smaller than side ({})",
                    fmt_len(core),
                    fmt_len(side)
                )));
            }
            holes.push(Primitive::Rect {
                center: [0.0, 0.0],
                size: [core, core],
                corner_radius: 0.0,
                angle: 0.0,
            });
            Primitive::Rect {
                center: [0.0, 0.0],
                size: [side, side],
                corner_radius: 0.0,
                angle: 0.0,
            }
        }
        other => {
            // Every catalogue name has a branch above; this is a guard, not a user error path.
            return Err(s.err(format!("the built-in shape '{other}' is not implemented")));
        }
    };
    let shape = Shape {
        name: Some(format!("{} {}", s.info.name, s.label.join(" "))),
        regions: vec![region],
        holes,
    };
    shape.validate().map_err(|e| match e {
        Error::Geometry(m) => s.err(m),
        other => other,
    })?;
    Ok(shape)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Exact perimeter and area of a built-in shape (walls sampled at 1/200 of its size).
    fn p_a(spec: &str) -> (f64, f64) {
        let s = parse_builtin(spec).unwrap();
        let w = s.walls(s.scale() / 200.0);
        (w.perimeter, w.area)
    }

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    fn message(spec: &str) -> String {
        match parse_builtin(spec) {
            Err(Error::ShapeParse {
                origin,
                line,
                message,
            }) => {
                assert_eq!(origin, spec);
                assert_eq!(line, None);
                message
            }
            other => panic!("{spec}: expected a ShapeParse error, got {other:?}"),
        }
    }

    // All closed forms below are elementary geometry (common practice, no source) unless noted.

    #[test]
    fn circle() {
        let (p, a) = p_a("circle:d=8mm");
        assert!(rel(p, PI * 8e-3) < 1e-12, "{p}");
        assert!(rel(a, PI * 16e-6) < 1e-12, "{a}");
        assert_eq!(
            parse_builtin("circle:r=4mm").unwrap().regions,
            parse_builtin("circle:d=8mm").unwrap().regions
        );
        assert_eq!(
            parse_builtin("circle:d=8mm").unwrap().name.as_deref(),
            Some("circle d=8 mm")
        );
        // Units and spaces.
        let s = parse_builtin(" Circle : d = 0.5 in ").unwrap();
        assert_eq!(s.regions[0], origin_circle(0.0127 / 2.0));
    }

    #[test]
    fn rect_and_square() {
        let (p, a) = p_a("rect:w=20mm,h=5mm");
        assert!(rel(p, 50e-3) < 1e-12 && rel(a, 100e-6) < 1e-12, "{p} {a}");
        // Rounded corners: P = 2(w + h) − 8r + 2πr, A = wh − (4 − π)r².
        let (p, a) = p_a("rect:w=20mm,h=5mm,r=1mm,angle=30");
        let r = 1e-3;
        assert!(rel(p, 50e-3 - 8.0 * r + 2.0 * PI * r) < 1e-9, "{p}");
        assert!(rel(a, 100e-6 - (4.0 - PI) * r * r) < 1e-9, "{a}");
        // Rotated by 90°: the bounding box swaps.
        let (lo, hi) = parse_builtin("rect:w=20mm,h=5mm,angle=90").unwrap().bbox();
        assert!((hi[0] - lo[0] - 5e-3).abs() < 1e-12 && (hi[1] - lo[1] - 20e-3).abs() < 1e-12);
        let (p, a) = p_a("square:side=10mm");
        assert!(rel(p, 40e-3) < 1e-12 && rel(a, 100e-6) < 1e-12, "{p} {a}");
        // A square rotated by 45° has a bounding box of side·√2.
        let (lo, hi) = parse_builtin("square:side=1,angle=45").unwrap().bbox();
        assert!((hi[0] - lo[0] - 2f64.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn ellipse() {
        let (_, a) = p_a("ellipse:a=6mm,b=3mm");
        assert!(rel(a, PI * 18e-6) < 1e-10, "{a}");
        let s = parse_builtin("ellipse:a=6mm,b=3mm").unwrap();
        let (lo, hi) = s.bbox();
        assert!((lo[0] + 6e-3).abs() < 1e-15 && (hi[1] - 3e-3).abs() < 1e-15);
        let (lo, hi) = parse_builtin("ellipse:a=6mm,b=3mm,angle=90")
            .unwrap()
            .bbox();
        assert!((hi[0] - 3e-3).abs() < 1e-15 && (lo[1] + 6e-3).abs() < 1e-15);
    }

    #[test]
    fn triangle() {
        // Equilateral: A = (√3/4)s², P = 3s, centroid at the origin, bottom side at
        // y = −s/(2√3), apex at y = s/√3.
        let side = 10e-3;
        let (p, a) = p_a("triangle:side=10mm");
        assert!(rel(p, 3.0 * side) < 1e-12, "{p}");
        assert!(rel(a, 0.25 * 3f64.sqrt() * side * side) < 1e-12, "{a}");
        let s = parse_builtin("triangle:side=10mm").unwrap();
        let (lo, hi) = s.bbox();
        assert!((lo[1] + side / (2.0 * 3f64.sqrt())).abs() < 1e-15);
        assert!((hi[1] - side / 3f64.sqrt()).abs() < 1e-15);
        assert!((lo[0] + 0.5 * side).abs() < 1e-15 && (hi[0] - 0.5 * side).abs() < 1e-15);
        if let Primitive::Polygon { points } = &s.regions[0] {
            let cy: f64 = points.iter().map(|p| p[1]).sum::<f64>() / 3.0;
            assert!(cy.abs() < 1e-15);
            // Vertices at −30°, 90°, 210°: the first and the last form the bottom side.
            assert!(
                (points[0][1] - points[2][1]).abs() < 1e-15,
                "bottom side horizontal"
            );
        } else {
            panic!("not a polygon");
        }
    }

    #[test]
    fn annulus() {
        // A = π(ro² − ri²), P = 2π(ro + ri), whatever the offset.
        let (ro, ri) = (10e-3, 5e-3);
        for spec in [
            "annulus:do=20mm,di=10mm",
            "annulus:do=20mm,di=10mm,offset=2mm",
            "annulus:do=20mm,di=10mm,offset=-4.9mm",
        ] {
            let (p, a) = p_a(spec);
            assert!(rel(p, 2.0 * PI * (ro + ri)) < 1e-10, "{spec}: {p}");
            assert!(rel(a, PI * (ro * ro - ri * ri)) < 1e-10, "{spec}: {a}");
        }
        let s = parse_builtin("annulus:do=20mm,di=10mm,offset=2mm").unwrap();
        assert_eq!(
            s.holes,
            vec![Primitive::Circle {
                center: [2e-3, 0.0],
                radius: 5e-3
            }]
        );
        assert!(s.contains([-6e-3, 0.0]) && !s.contains([6e-3, 0.0]));
        assert!(message("annulus:do=20mm,di=20mm").contains("smaller than do"));
        assert!(message("annulus:do=20mm,di=10mm,offset=5mm").contains("touch the outer wall"));
    }

    #[test]
    fn slot() {
        // Stadium of length w and width h: P = 2(w − h) + πh, A = (w − h)h + πh²/4.
        let (w, h) = (20e-3, 4e-3);
        let (p, a) = p_a("slot:w=20mm,h=4mm");
        assert!(rel(p, 2.0 * (w - h) + PI * h) < 1e-9, "{p}");
        assert!(rel(a, (w - h) * h + 0.25 * PI * h * h) < 1e-9, "{a}");
        // Upright slot: the same shape turned by 90°.
        let (p2, a2) = p_a("slot:w=4mm,h=20mm");
        assert!(rel(p2, p) < 1e-9 && rel(a2, a) < 1e-9);
    }

    #[test]
    fn regular_polygons() {
        // Regular n-gon of circumradius R: A = (n/2)R² sin(2π/n), P = 2nR sin(π/n).
        for n in [3usize, 4, 6, 17, 1000] {
            let r: f64 = 5e-3;
            let spec = format!("polygon:n={n},d=10mm");
            let s = parse_builtin(&spec).unwrap();
            let w = s.walls(s.scale() / 200.0);
            let nf = n as f64;
            let a = 0.5 * nf * r * r * (2.0 * PI / nf).sin();
            let p = 2.0 * nf * r * (PI / nf).sin();
            assert!(rel(w.area, a) < 1e-9, "{spec}: {} {a}", w.area);
            assert!(rel(w.perimeter, p) < 1e-9, "{spec}: {} {p}", w.perimeter);
        }
        // n = 4 is the axis-aligned square of side R√2.
        let (lo, hi) = parse_builtin("polygon:n=4,d=2").unwrap().bbox();
        assert!((hi[0] - lo[0] - 2f64.sqrt()).abs() < 1e-12);
        assert!(message("polygon:n=2,d=1").contains("between 3 and 1000"));
        assert!(message("polygon:n=6.5,d=1").contains("not a whole number"));
    }

    #[test]
    fn finned_tube() {
        // n fins of thickness t reaching r_tip = R − H. Each fin side meets the wall at
        // x_w = √(R² − t²/4); the wall loses the arc 2R·asin(t/2R) per fin and gains two
        // sides of length x_w − r_tip plus the tip t. The fin removes the strip t(x_w − r_tip)
        // plus the circular segment of half-angle asin(t/2R), R²(θ − sin θ)/2 with θ = 2 asin.
        let (d, n, h, t): (f64, usize, f64, f64) = (20e-3, 6, 4e-3, 1e-3);
        let rr = 0.5 * d;
        let r_tip = rr - h;
        let xw = (rr * rr - 0.25 * t * t).sqrt();
        let theta = 2.0 * (0.5 * t / rr).asin();
        let nf = n as f64;
        let p = 2.0 * PI * rr - nf * rr * theta + nf * (2.0 * (xw - r_tip) + t);
        let a = PI * rr * rr - nf * (t * (xw - r_tip) + 0.5 * rr * rr * (theta - theta.sin()));
        let (pw, aw) = p_a("finned:d=20mm,fins=6,height=4mm,thickness=1mm");
        // Wall junctions are located by `Shape::walls` to about 1e-9 of the size each (24 of
        // them here), hence the looser tolerance.
        assert!(rel(pw, p) < 1e-7, "{pw} vs {p}");
        assert!(rel(aw, a) < 1e-7, "{aw} vs {a}");
        let s = parse_builtin("finned:d=20mm,fins=6,height=4mm,thickness=1mm").unwrap();
        assert_eq!(s.holes.len(), 6);
        assert!(s.contains([0.0, 0.0]));
        assert!(!s.contains([rr - 0.5 * h, 0.0]), "inside the first fin");
        assert!(message("finned:d=20mm,fins=6,height=10mm,thickness=1mm").contains("d/2"));
        // 40 fins of 2 mm reaching r_tip = 4 mm: atan(1/4) ≈ 14° > 180°/40 = 4.5°.
        assert!(message("finned:d=20mm,fins=40,height=6mm,thickness=2mm").contains("overlap"));
        assert!(message("finned:d=20mm,fins=0,height=6mm,thickness=2mm").contains("between 1"));
    }

    #[test]
    fn square_annulus() {
        let (p, a) = p_a("square_annulus:side=20mm,core=10mm");
        assert!(rel(p, 120e-3) < 1e-9 && rel(a, 300e-6) < 1e-9, "{p} {a}");
        assert!(message("square_annulus:side=2,core=3").contains("smaller than side"));
    }

    #[test]
    fn errors_name_the_fault() {
        let m = message("hexagon:d=3mm");
        assert!(m.contains("unknown built-in shape 'hexagon'") && m.contains("circle, rect"));
        let m = message("rect:w=20mm");
        assert!(
            m.contains("missing parameter 'h'") && m.contains("w = width"),
            "{m}"
        );
        let m = message("circle:diameter=8mm");
        assert!(m.contains("unknown parameter 'diameter'") && m.contains("d = diameter;"));
        assert!(message("circle:d=8mm,d=9mm").contains("'d' is given twice"));
        let m = message("circle:d=eight");
        assert!(m.starts_with("d: ") && m.contains("number"), "{m}");
        let m = message("circle:d=8 furlong");
        assert!(m.contains("unknown unit 'furlong'"), "{m}");
        assert!(message("circle:d=-8mm").contains("d must be positive"));
        assert!(message("circle:d=0").contains("positive"));
        assert!(message("circle:d=8mm,r=4mm").contains("not both"));
        assert!(message("circle:d8mm").contains("not key=value"));
        assert!(message("circle").contains("for example circle:d=8mm"));
        assert!(message("nothing here").contains("known shapes"));
        assert!(message("rect:w=2,h=1,r=0.6").contains("half the smaller side"));
        assert!(message("rect:w=2,h=1,angle=north").contains("angle"));
        assert!(message("ellipse:a=1,b=inf").starts_with("b: "));
        // Trailing commas are harmless.
        assert!(parse_builtin("circle:d=8mm,").is_ok());
    }

    #[test]
    fn catalogue_examples_parse_and_names_are_unique() {
        let cat = catalogue();
        for (k, info) in cat.iter().enumerate() {
            assert!(cat[..k].iter().all(|o| o.name != info.name));
            assert!(info.example.starts_with(&format!("{}:", info.name)));
            let s = parse_builtin(info.example).unwrap();
            assert!(s.name.as_deref().unwrap().starts_with(info.name));
            assert!(looks_like_builtin(info.example));
        }
        assert!(!looks_like_builtin("duct.toml"));
        assert!(!looks_like_builtin("C:\\shapes\\duct.toml"));
        assert!(!looks_like_builtin("hexagon:d=1"));
    }

    #[test]
    fn labels_are_readable() {
        let s = parse_builtin("annulus:do=20mm,di=0.5in,offset=2mm").unwrap();
        assert_eq!(
            s.name.as_deref(),
            Some("annulus do=20 mm di=12.7 mm offset=2 mm")
        );
        let s = parse_builtin("polygon:d=1um,n=6").unwrap();
        assert_eq!(s.name.as_deref(), Some("polygon n=6 d=0.001 mm"));
        let s = parse_builtin("rect:w=2mm,h=1mm,angle=30").unwrap();
        assert_eq!(s.name.as_deref(), Some("rect w=2 mm h=1 mm angle=30 deg"));
    }
}
