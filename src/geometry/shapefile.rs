//! Shape files: a cross-section written in TOML (`*.toml`).
//!
//! Owns: reading the format of INTERFACE.md ("Shape file"), converting every length to metres
//! and every angle to radians, and reporting each mistake with the file name and the 1-based line
//! of the offending entry. The document is read into a small span-preserving value tree
//! (`Val`, every value carrying its byte range through [`toml::Spanned`]) so that any later
//! check — unknown key, wrong type, non-positive size, bad geometry — can point at its line.
//!
//! Format, in brief:
//!
//! ```toml
//! name = "optional label"
//! units = "mm"          # m (default), cm, mm, um, in
//! [[region]]            # one or more; the fluid is the union of the regions ...
//! kind = "rect"
//! corner = [0, 0]       # lower-left corner before rotation, or `center`
//! size = [12, 4]
//! [[hole]]              # ... minus the union of the holes
//! kind = "circle"
//! center = [6, 2]
//! radius = 1
//! ```
//!
//! Kinds and parameters: `polygon` (`points`), `circle` (`center`, `radius`), `ellipse`
//! (`center`, `semi_axes`, optional `angle_deg`), `rect` (`corner` or `center`, `size`, optional
//! `corner_radius`, optional `angle_deg` — rotation about the rect's own centre).

use super::{Point, Primitive, Shape};
use crate::error::{Error, Result};
use crate::units::length_unit;
use serde::de::{Deserialize, Deserializer, MapAccess, SeqAccess, Visitor};
use std::ops::Range;
use std::path::Path;
use toml::Spanned;

/// Key under which the toml deserializer hands a date-time to `deserialize_any` (an internal
/// detail of toml 0.8; should it change, a date-time value is still refused, only with a less
/// specific message).
const DATETIME_KEY: &str = "$__toml_private_datetime";

/// A TOML value whose nested values keep their byte spans.
#[derive(Debug, Clone)]
enum Val {
    Str(String),
    Int(i64),
    Float(f64),
    Bool(bool),
    Datetime,
    Array(Vec<Spanned<Val>>),
    Table(Vec<(String, Spanned<Val>)>),
}

impl Val {
    /// What the value is, for messages ("an array", ...).
    fn describe(&self) -> String {
        match self {
            Val::Str(s) => format!("the string \"{s}\""),
            Val::Int(i) => format!("the integer {i}"),
            Val::Float(x) => format!("the number {x}"),
            Val::Bool(b) => format!("the boolean {b}"),
            Val::Datetime => "a date-time".to_string(),
            Val::Array(_) => "an array".to_string(),
            Val::Table(_) => "a table".to_string(),
        }
    }
}

impl<'de> Deserialize<'de> for Val {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        d.deserialize_any(ValVisitor)
    }
}

struct ValVisitor;

impl<'de> Visitor<'de> for ValVisitor {
    type Value = Val;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str("a TOML value")
    }
    fn visit_bool<E>(self, v: bool) -> std::result::Result<Val, E> {
        Ok(Val::Bool(v))
    }
    fn visit_i64<E>(self, v: i64) -> std::result::Result<Val, E> {
        Ok(Val::Int(v))
    }
    fn visit_u64<E>(self, v: u64) -> std::result::Result<Val, E> {
        Ok(i64::try_from(v).map_or(Val::Float(v as f64), Val::Int))
    }
    fn visit_f64<E>(self, v: f64) -> std::result::Result<Val, E> {
        Ok(Val::Float(v))
    }
    fn visit_str<E>(self, v: &str) -> std::result::Result<Val, E> {
        Ok(Val::Str(v.to_string()))
    }
    fn visit_string<E>(self, v: String) -> std::result::Result<Val, E> {
        Ok(Val::Str(v))
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> std::result::Result<Val, A::Error> {
        let mut out = Vec::new();
        while let Some(v) = seq.next_element::<Spanned<Val>>()? {
            out.push(v);
        }
        Ok(Val::Array(out))
    }
    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> std::result::Result<Val, A::Error> {
        let mut out = Vec::new();
        while let Some(key) = map.next_key::<String>()? {
            if key == DATETIME_KEY {
                let _text: String = map.next_value()?;
                return Ok(Val::Datetime);
            }
            let value = map.next_value::<Spanned<Val>>()?;
            out.push((key, value));
        }
        Ok(Val::Table(out))
    }
}

/// File name and text, for turning byte spans into line numbers.
struct Ctx<'a> {
    origin: &'a str,
    text: &'a str,
}

impl Ctx<'_> {
    /// 1-based line of a byte offset.
    fn line_of(&self, offset: usize) -> usize {
        let end = offset.min(self.text.len());
        1 + self.text.as_bytes()[..end]
            .iter()
            .filter(|&&b| b == b'\n')
            .count()
    }

    fn err(&self, span: &Range<usize>, message: impl Into<String>) -> Error {
        Error::ShapeParse {
            origin: self.origin.to_string(),
            line: Some(self.line_of(span.start)),
            message: message.into(),
        }
    }

    fn err_no_line(&self, message: impl Into<String>) -> Error {
        Error::ShapeParse {
            origin: self.origin.to_string(),
            line: None,
            message: message.into(),
        }
    }
}

/// The parameters each kind accepts, in the order they are listed in messages.
fn kind_params(kind: &str) -> Option<&'static [&'static str]> {
    Some(match kind {
        "polygon" => &["points"],
        "circle" => &["center", "radius"],
        "ellipse" => &["center", "semi_axes", "angle_deg"],
        "rect" => &["corner", "center", "size", "corner_radius", "angle_deg"],
        _ => return None,
    })
}

const KINDS: &str = "polygon, circle, ellipse, rect";

/// One `[[region]]` or `[[hole]]` table being read.
struct Entry<'a> {
    ctx: &'a Ctx<'a>,
    /// "region 2 (circle)".
    label: String,
    fields: &'a [(String, Spanned<Val>)],
    /// Span of the whole entry (its `[[region]]` header or inline table).
    span: Range<usize>,
    /// Factor from the file's units to metres.
    factor: f64,
}

impl Entry<'_> {
    fn get(&self, key: &str) -> Option<&Spanned<Val>> {
        self.fields.iter().find(|(k, _)| k == key).map(|(_, v)| v)
    }

    fn err(&self, span: &Range<usize>, message: impl std::fmt::Display) -> Error {
        self.ctx.err(span, format!("{}: {message}", self.label))
    }

    fn required(&self, key: &str) -> Result<&Spanned<Val>> {
        self.get(key)
            .ok_or_else(|| self.err(&self.span, format!("missing parameter '{key}'")))
    }

    /// A finite number (integer or float), in the file's own units.
    fn number(&self, what: &str, v: &Spanned<Val>) -> Result<f64> {
        let x = match v.get_ref() {
            Val::Int(i) => *i as f64,
            Val::Float(x) => *x,
            other => {
                return Err(self.err(
                    &v.span(),
                    format!("{what} must be a number, it is {}", other.describe()),
                ))
            }
        };
        if !x.is_finite() {
            return Err(self.err(
                &v.span(),
                format!("{what} must be a finite number, it is {x}"),
            ));
        }
        Ok(x)
    }

    /// A pair of finite numbers `[x, y]`, in the file's own units.
    fn pair(&self, what: &str, v: &Spanned<Val>, form: &str) -> Result<[f64; 2]> {
        match v.get_ref() {
            Val::Array(items) if items.len() == 2 => {
                let x = self.number(&format!("the first number of {what}"), &items[0])?;
                let y = self.number(&format!("the second number of {what}"), &items[1])?;
                Ok([x, y])
            }
            Val::Array(items) => Err(self.err(
                &v.span(),
                format!(
                    "{what} must be {form}, two numbers, it has {} entries",
                    items.len()
                ),
            )),
            other => Err(self.err(
                &v.span(),
                format!("{what} must be {form}, it is {}", other.describe()),
            )),
        }
    }

    /// A point in metres.
    fn point(&self, key: &str) -> Result<Point> {
        let v = self.required(key)?;
        let p = self.pair(&format!("'{key}'"), v, "a point [x, y]")?;
        Ok([p[0] * self.factor, p[1] * self.factor])
    }

    /// A strictly positive length in metres.
    fn length(&self, key: &str) -> Result<f64> {
        let v = self.required(key)?;
        let x = self.number(&format!("'{key}'"), v)?;
        if x <= 0.0 {
            return Err(self.err(&v.span(), format!("'{key}' must be positive, it is {x}")));
        }
        Ok(x * self.factor)
    }

    /// Two strictly positive lengths in metres (`size`, `semi_axes`).
    fn lengths2(&self, key: &str, form: &str) -> Result<[f64; 2]> {
        let v = self.required(key)?;
        let p = self.pair(&format!("'{key}'"), v, form)?;
        if p[0] <= 0.0 || p[1] <= 0.0 {
            return Err(self.err(
                &v.span(),
                format!(
                    "both numbers of '{key}' must be positive, they are [{}, {}]",
                    p[0], p[1]
                ),
            ));
        }
        Ok([p[0] * self.factor, p[1] * self.factor])
    }

    /// Optional `angle_deg`, returned in radians (0 when absent).
    fn angle(&self) -> Result<f64> {
        match self.get("angle_deg") {
            None => Ok(0.0),
            Some(v) => Ok(self.number("'angle_deg'", v)?.to_radians()),
        }
    }

    fn polygon(&self) -> Result<Primitive> {
        let v = self.required("points")?;
        let Val::Array(items) = v.get_ref() else {
            return Err(self.err(
                &v.span(),
                format!(
                    "'points' must be an array of points [[x, y], ...], it is {}",
                    v.get_ref().describe()
                ),
            ));
        };
        if items.len() < 3 {
            return Err(self.err(
                &v.span(),
                format!(
                    "'points' needs at least three points, it has {}",
                    items.len()
                ),
            ));
        }
        let mut points = Vec::with_capacity(items.len());
        for (k, item) in items.iter().enumerate() {
            let p = self.pair(&format!("point {} of 'points'", k + 1), item, "[x, y]")?;
            points.push([p[0] * self.factor, p[1] * self.factor]);
        }
        Ok(Primitive::Polygon { points })
    }

    fn rect(&self) -> Result<Primitive> {
        let size = self.lengths2("size", "[width, height]")?;
        let center = match (self.get("corner"), self.get("center")) {
            (Some(_), Some(c)) => {
                return Err(self.err(&c.span(), "give either 'corner' or 'center', not both"))
            }
            (None, None) => {
                return Err(self.err(
                    &self.span,
                    "missing parameter 'corner' or 'center' (give exactly one)",
                ))
            }
            (None, Some(_)) => self.point("center")?,
            // The corner is the lower-left corner before rotation; the rotation turns the rect
            // about its own centre, so the centre is simply corner + size/2.
            (Some(_), None) => {
                let c = self.point("corner")?;
                [c[0] + 0.5 * size[0], c[1] + 0.5 * size[1]]
            }
        };
        let corner_radius = match self.get("corner_radius") {
            None => 0.0,
            Some(v) => {
                let r = self.number("'corner_radius'", v)?;
                let half_min = 0.5 * size[0].min(size[1]) / self.factor;
                if r < 0.0 || r > half_min * (1.0 + 1e-12) {
                    return Err(self.err(
                        &v.span(),
                        format!(
                            "'corner_radius' must lie between 0 and half the smaller side \
                             ({half_min}), it is {r}"
                        ),
                    ));
                }
                r * self.factor
            }
        };
        Ok(Primitive::Rect {
            center,
            size,
            corner_radius,
            angle: self.angle()?,
        })
    }

    fn primitive(&self, kind: &str) -> Result<Primitive> {
        match kind {
            "polygon" => self.polygon(),
            "circle" => Ok(Primitive::Circle {
                center: self.point("center")?,
                radius: self.length("radius")?,
            }),
            "ellipse" => Ok(Primitive::Ellipse {
                center: self.point("center")?,
                semi_axes: self.lengths2("semi_axes", "[a, b]")?,
                angle: self.angle()?,
            }),
            "rect" => self.rect(),
            // `kind` is checked by the caller against the same list.
            _ => Err(self.err(&self.span, format!("unknown kind '{kind}'"))),
        }
    }
}

/// Reads one `[[region]]` / `[[hole]]` entry (a table; its span starts at its `[[region]]`
/// header, or at the `{` of an inline table, which is the line reported for the entry as a whole).
fn parse_entry(
    ctx: &Ctx,
    list: &str,
    index: usize,
    value: &Spanned<Val>,
    factor: f64,
) -> Result<Primitive> {
    let span = value.span();
    let Val::Table(fields) = value.get_ref() else {
        return Err(ctx.err(
            &span,
            format!(
                "{list} {index} must be a table, it is {}",
                value.get_ref().describe()
            ),
        ));
    };
    let kind_v = fields.iter().find(|(k, _)| k == "kind").map(|(_, v)| v);
    let Some(kind_v) = kind_v else {
        return Err(ctx.err(
            &span,
            format!("{list} {index}: missing 'kind'; expected one of {KINDS}"),
        ));
    };
    let Val::Str(kind) = kind_v.get_ref() else {
        return Err(ctx.err(
            &kind_v.span(),
            format!(
                "{list} {index}: 'kind' must be a string (one of {KINDS}), it is {}",
                kind_v.get_ref().describe()
            ),
        ));
    };
    let Some(params) = kind_params(kind) else {
        return Err(ctx.err(
            &kind_v.span(),
            format!("{list} {index}: unknown kind '{kind}'; expected one of {KINDS}"),
        ));
    };
    let label = format!("{list} {index} ({kind})");
    for (key, v) in fields {
        if key != "kind" && !params.contains(&key.as_str()) {
            return Err(ctx.err(
                &v.span(),
                format!(
                    "{label}: unknown parameter '{key}'; expected {}",
                    params.join(", ")
                ),
            ));
        }
    }
    let entry = Entry {
        ctx,
        label,
        fields,
        span,
        factor,
    };
    let prim = entry.primitive(kind)?;
    prim.validate().map_err(|e| match e {
        Error::Geometry(m) => entry.err(&entry.span, m),
        other => other,
    })?;
    Ok(prim)
}

/// Parses the text of a shape file; `origin` (the file name) is used in messages.
///
/// Every length is multiplied by the factor of `units` (metres by default), `angle_deg` is
/// converted to radians, and a `rect` given by its lower-left `corner` is stored by its centre,
/// corner + size/2. Each primitive is validated where it is read, so a geometry error carries the
/// line of its entry; the whole shape is validated at the end.
pub fn parse_shape_file(text: &str, origin: &str) -> Result<Shape> {
    let ctx = Ctx { origin, text };
    let root: Val = toml::from_str(text).map_err(|e| Error::ShapeParse {
        origin: origin.to_string(),
        line: e.span().map(|s| ctx.line_of(s.start)),
        message: format!(
            "TOML syntax: {}",
            e.message().trim().lines().collect::<Vec<_>>().join("; ")
        ),
    })?;
    let Val::Table(top) = root else {
        return Err(ctx.err_no_line("the file is not a TOML table"));
    };

    let mut name = None;
    let mut factor = 1.0;
    let mut lists: Vec<(&str, &Spanned<Val>)> = Vec::new();
    for (key, v) in &top {
        match key.as_str() {
            "name" => match v.get_ref() {
                Val::Str(s) => name = Some(s.clone()),
                other => {
                    return Err(ctx.err(
                        &v.span(),
                        format!("'name' must be a string, it is {}", other.describe()),
                    ))
                }
            },
            "units" => match v.get_ref() {
                Val::Str(s) => {
                    let u = s.trim();
                    factor = length_unit(u).filter(|_| !u.is_empty()).ok_or_else(|| {
                        ctx.err(
                            &v.span(),
                            format!("unknown units '{s}'; known: m, cm, mm, um, in"),
                        )
                    })?;
                }
                other => {
                    return Err(ctx.err(
                        &v.span(),
                        format!(
                            "'units' must be a string (m, cm, mm, um, in), it is {}",
                            other.describe()
                        ),
                    ))
                }
            },
            "region" | "hole" => lists.push((key.as_str(), v)),
            other => {
                return Err(ctx.err(
                    &v.span(),
                    format!("unknown key '{other}'; expected name, units, region, hole"),
                ))
            }
        }
    }

    let mut shape = Shape {
        name,
        regions: Vec::new(),
        holes: Vec::new(),
    };
    for (list, v) in lists {
        let Val::Array(items) = v.get_ref() else {
            return Err(ctx.err(
                &v.span(),
                format!(
                    "'{list}' must be an array of tables, written [[{list}]], it is {}",
                    v.get_ref().describe()
                ),
            ));
        };
        for (k, item) in items.iter().enumerate() {
            let prim = parse_entry(&ctx, list, k + 1, item, factor)?;
            if list == "region" {
                shape.regions.push(prim);
            } else {
                shape.holes.push(prim);
            }
        }
    }
    if shape.regions.is_empty() {
        return Err(ctx
            .err_no_line("the file has no [[region]]; a cross-section needs at least one region"));
    }
    shape.validate().map_err(|e| match e {
        Error::Geometry(m) => ctx.err_no_line(m),
        other => other,
    })?;
    Ok(shape)
}

/// Reads and parses a shape file from disk.
pub fn load_shape_file(path: &Path) -> Result<Shape> {
    let bytes = super::read_input_file(path, super::MAX_TEXT_INPUT_BYTES)?;
    let text = String::from_utf8(bytes).map_err(|e| Error::ShapeParse {
        origin: path.display().to_string(),
        line: None,
        message: format!("not a shape file: the text is not UTF-8 ({e})"),
    })?;
    parse_shape_file(&text, &path.display().to_string())
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    fn err_of(text: &str) -> (Option<usize>, String) {
        match parse_shape_file(text, "t.toml") {
            Err(Error::ShapeParse {
                origin,
                line,
                message,
            }) => {
                assert_eq!(origin, "t.toml");
                (line, message)
            }
            other => panic!("expected a ShapeParse error, got {other:?}"),
        }
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs().max(1e-3)
    }

    #[test]
    fn interface_example_parses_to_metres() {
        // The example of INTERFACE.md, "Shape file (*.toml)".
        let text = r#"
name = "optional label"
units = "mm"                       # m, mm, um, in; default m

[[region]]
kind = "polygon"
points = [[0, 0], [12, 0], [12, 4], [0, 4]]   # closed automatically, either orientation

[[region]]
kind = "circle"
center = [6, 4]
radius = 2.5

[[hole]]
kind = "circle"
center = [6, 2]
radius = 1
"#;
        let s = parse_shape_file(text, "example.toml").unwrap();
        assert_eq!(s.name.as_deref(), Some("optional label"));
        assert_eq!(s.regions.len(), 2);
        assert_eq!(s.holes.len(), 1);
        match &s.regions[0] {
            Primitive::Polygon { points } => {
                let want = [[0.0, 0.0], [12e-3, 0.0], [12e-3, 4e-3], [0.0, 4e-3]];
                assert_eq!(points.len(), 4);
                for (p, q) in points.iter().zip(want.iter()) {
                    assert!(close(p[0], q[0]) && close(p[1], q[1]), "{p:?} vs {q:?}");
                }
            }
            other => panic!("{other:?}"),
        }
        match &s.regions[1] {
            Primitive::Circle { center, radius } => {
                assert!(close(center[0], 6e-3) && close(center[1], 4e-3));
                assert!(close(*radius, 2.5e-3));
            }
            other => panic!("{other:?}"),
        }
        match &s.holes[0] {
            Primitive::Circle { center, radius } => {
                assert!(close(center[0], 6e-3) && close(center[1], 2e-3));
                assert!(close(*radius, 1e-3));
            }
            other => panic!("{other:?}"),
        }
        // Area: rectangle 12×4 plus the upper half disc of radius 2.5 (the lower half lies
        // inside the rectangle) minus the hole of radius 1 (inside the rectangle), in mm².
        // Exact elementary geometry (common practice, no source).
        let a = (48.0 + 0.5 * PI * 2.5 * 2.5 - PI) * 1e-6;
        // `Shape::walls` locates the wall junctions to about 1e-9 of the size.
        let w = s.walls(1e-4);
        assert!((w.area - a).abs() < 1e-7 * a, "{} vs {a}", w.area);
    }

    #[test]
    fn rect_and_ellipse_conversions() {
        let text = r#"
units = "in"
[[region]]
kind = "rect"
corner = [1, 2]
size = [4, 2]
corner_radius = 0.5
angle_deg = 90

[[region]]
kind = "rect"
center = [0, 0]
size = [1, 1]

[[region]]
kind = "ellipse"
center = [10, 0]
semi_axes = [2, 1]
angle_deg = 30
"#;
        let s = parse_shape_file(text, "t.toml").unwrap();
        let inch = 0.0254;
        match &s.regions[0] {
            Primitive::Rect {
                center,
                size,
                corner_radius,
                angle,
            } => {
                // Lower-left corner (1, 2), size (4, 2): centre (3, 3).
                assert!(close(center[0], 3.0 * inch) && close(center[1], 3.0 * inch));
                assert!(close(size[0], 4.0 * inch) && close(size[1], 2.0 * inch));
                assert!(close(*corner_radius, 0.5 * inch));
                assert!(close(*angle, 0.5 * PI));
            }
            other => panic!("{other:?}"),
        }
        match &s.regions[1] {
            Primitive::Rect {
                corner_radius,
                angle,
                ..
            } => {
                assert_eq!(*corner_radius, 0.0);
                assert_eq!(*angle, 0.0);
            }
            other => panic!("{other:?}"),
        }
        match &s.regions[2] {
            Primitive::Ellipse {
                center,
                semi_axes,
                angle,
            } => {
                assert!(close(center[0], 10.0 * inch) && center[1] == 0.0);
                assert!(close(semi_axes[0], 2.0 * inch) && close(semi_axes[1], inch));
                assert!(close(*angle, PI / 6.0));
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn default_units_are_metres_and_inline_tables_work() {
        let text = "region = [{ kind = \"circle\", center = [0.5, 0], radius = 0.25 }]\n";
        let s = parse_shape_file(text, "t.toml").unwrap();
        assert_eq!(
            s.regions[0],
            Primitive::Circle {
                center: [0.5, 0.0],
                radius: 0.25
            }
        );
        assert_eq!(s.name, None);
    }

    #[test]
    fn syntax_error_has_its_line() {
        let (line, msg) = err_of("units = \"mm\"\n\n[[region]]\nkind = = \"circle\"\n");
        assert_eq!(line, Some(4), "{msg}");
        assert!(msg.contains("TOML syntax"), "{msg}");
    }

    #[test]
    fn unknown_parameter_names_it_and_the_expected_ones() {
        let text = "\
[[region]]
kind = \"circle\"
center = [0, 0]
radius = 1

[[region]]
kind = \"circle\"
center = [0, 0]
radus = 2
";
        let (line, msg) = err_of(text);
        assert_eq!(line, Some(9), "{msg}");
        assert_eq!(
            msg,
            "region 2 (circle): unknown parameter 'radus'; expected center, radius"
        );
    }

    #[test]
    fn missing_parameter_points_at_the_entry() {
        let text = "\
units = \"mm\"

[[region]]
kind = \"ellipse\"
center = [0, 0]
";
        let (line, msg) = err_of(text);
        assert_eq!(line, Some(3), "{msg}");
        assert!(msg.contains("region 1 (ellipse)"), "{msg}");
        assert!(msg.contains("missing parameter 'semi_axes'"), "{msg}");
    }

    #[test]
    fn unknown_kind_and_top_level_key_and_units() {
        let (line, msg) = err_of("[[region]]\nkind = \"hexagon\"\n");
        assert_eq!(line, Some(2));
        assert!(msg.contains("unknown kind 'hexagon'") && msg.contains("polygon, circle"));

        let (line, msg) = err_of("name = \"x\"\nscale = 2\n");
        assert_eq!(line, Some(2));
        assert!(msg.contains("unknown key 'scale'"), "{msg}");

        let (line, msg) = err_of("\nunits = \"ft\"\n");
        assert_eq!(line, Some(2));
        assert!(msg.contains("'ft'") && msg.contains("mm"), "{msg}");

        let (line, msg) = err_of("[[region]]\ncenter = [0, 0]\nradius = 1\n");
        assert_eq!(line, Some(1));
        assert!(msg.contains("missing 'kind'"), "{msg}");
    }

    #[test]
    fn wrong_types_and_bad_numbers() {
        let cases: &[(&str, usize, &str)] = &[
            (
                "[[region]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = \"big\"\n",
                4,
                "'radius' must be a number",
            ),
            (
                "[[region]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = -1\n",
                4,
                "'radius' must be positive",
            ),
            (
                "[[region]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = inf\n",
                4,
                "'radius' must be a finite number",
            ),
            (
                "[[region]]\nkind = \"circle\"\ncenter = [0, 0, 1]\nradius = 1\n",
                3,
                "'center' must be a point",
            ),
            (
                "[[region]]\nkind = \"circle\"\ncenter = [0, nan]\nradius = 1\n",
                3,
                "second number of 'center' must be a finite number",
            ),
            (
                "[[region]]\nkind = \"rect\"\ncenter = [0, 0]\nsize = [1, 0]\n",
                4,
                "'size' must be positive",
            ),
            (
                "[[region]]\nkind = \"rect\"\ncenter = [0, 0]\nsize = [2, 1]\ncorner_radius = 0.6\n",
                5,
                "'corner_radius'",
            ),
            (
                "[[region]]\nkind = \"rect\"\ncorner = [0, 0]\ncenter = [0, 0]\nsize = [2, 1]\n",
                4,
                "either 'corner' or 'center'",
            ),
            (
                "[[region]]\nkind = \"rect\"\nsize = [2, 1]\n",
                1,
                "'corner' or 'center'",
            ),
            (
                "[[region]]\nkind = \"ellipse\"\ncenter = [0, 0]\nsemi_axes = [2, 1]\nangle_deg = \"north\"\n",
                5,
                "'angle_deg' must be a number",
            ),
            (
                "[[region]]\nkind = \"polygon\"\npoints = [[0, 0], [1, 0]]\n",
                3,
                "at least three points",
            ),
            (
                "[[region]]\nkind = \"polygon\"\npoints = [\n  [0, 0],\n  [1, 0],\n  [1],\n]\n",
                6,
                "point 3 of 'points'",
            ),
            ("name = 3\n[[region]]\n", 1, "'name' must be a string"),
            ("[region]\nkind = \"circle\"\n", 1, "array of tables"),
        ];
        for &(text, want_line, want_msg) in cases {
            let (line, msg) = err_of(text);
            assert_eq!(line, Some(want_line), "{text}\n{msg}");
            assert!(msg.contains(want_msg), "{text}\n{msg}");
        }
    }

    #[test]
    fn geometry_errors_carry_the_entry_line() {
        let text = "\
[[region]]
kind = \"circle\"
center = [0, 0]
radius = 1

[[hole]]
kind = \"polygon\"
points = [[0, 0], [1, 1], [1, 0], [0, 1]]
";
        let (line, msg) = err_of(text);
        assert_eq!(line, Some(6), "{msg}");
        assert!(msg.starts_with("hole 1 (polygon): "), "{msg}");
        assert!(msg.contains("crosses itself"), "{msg}");
    }

    #[test]
    fn no_region_is_an_error() {
        let (line, msg) = err_of("name = \"empty\"\n");
        assert_eq!(line, None);
        assert!(msg.contains("no [[region]]"), "{msg}");
        let (_, msg) = err_of("[[hole]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = 1\n");
        assert!(msg.contains("no [[region]]"), "{msg}");
    }

    #[test]
    fn missing_file_is_an_io_error() {
        let e = load_shape_file(Path::new("/nonexistent/dir/shape.toml")).unwrap_err();
        assert!(matches!(e, Error::Io { .. }), "{e:?}");
        assert!(e.to_string().contains("shape.toml"));
    }

    #[test]
    fn load_reads_a_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("c.toml");
        std::fs::write(
            &path,
            "[[region]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = 1\nradius2 = 3\n",
        )
        .unwrap();
        let e = load_shape_file(&path).unwrap_err();
        let text = e.to_string();
        assert!(text.contains("c.toml, line 5"), "{text}");
    }
}
