//! SVG drawings (`*.svg`) as cross-sections.
//!
//! Owns: reading a drawing with the `usvg` crate (which resolves styles, `<use>`, transforms,
//! and turns rects, circles, ellipses, polygons and arcs into paths of lines and cubic Béziers,
//! in single precision), deciding its physical size, and turning its filled shapes into a
//! [`Shape`] in metres.
//!
//! Reading rules (INTERFACE.md, "a drawing"):
//! - Every filled shape is fluid, except fills lighter than luma 0.9 (Rec. 601 luma
//!   Y′ = 0.299 R′ + 0.587 G′ + 0.114 B′ on the 0..1 encoded channels; common practice, no
//!   source), which are solid: a white shape painted over fluid makes a hole. White shapes painted
//!   before the first fluid shape (a white background) cover nothing and are dropped.
//! - Within one shape the fill rule (`nonzero` or `evenodd`) decides which subpaths are outer
//!   boundaries and which are holes: a subpath whose inside is filled and outside is not is a
//!   region, the reverse a hole, and a subpath with the same state on both sides is not a wall.
//!   An open subpath (no `Z` and its ends apart) is refused with a message: the SVG fill would
//!   close it by a straight line, but a gap in a drawn wall is nearly always a drawing error.
//! - Strokes, text, images, clip paths, masks and filters are ignored (with a warning).
//! - The cross-section is the union of the regions minus the union of the holes. Where the
//!   drawing cannot be read that way (fluid inside a hole or painted over a white shape, a white
//!   shape with a hole of its own, subpaths of one shape that cross each other), the painter's
//!   model of the drawing and the union-minus-holes reading are compared on a 200 × 200 sample
//!   lattice over the fluid's bounding box and a disagreement is reported as an error.
//!
//! Geometry: SVG's y axis points down; y is flipped (y_up = −y_svg) so the cross-section is not
//! mirrored. A closed subpath made of N ≥ 3 cubic Béziers that is the affine image of the
//! standard N-piece circle approximation (on-curve points at equal parameter steps 2π/N, handles
//! of length 4/3·tan(π/(2N)) along the tangents; within 1e-5 of its size, the precision of the
//! single-precision coordinates) is taken as the exact ellipse it approximates — this is how
//! `usvg` writes `<circle>`, `<ellipse>` and a full turn of arcs. An affine image of an ellipse is
//! an ellipse: with the image c + M·(cos t, sin t), M = [u v] two conjugate semi-diameters, the
//! semi-axes are the square roots of the eigenvalues of M·Mᵀ and the major axis lies at
//! ½·atan2(2b, a − d) for M·Mᵀ = [[a, b], [b, d]] (exact geometry). So circles and ellipses stay
//! exact curves under any transform, rotations and skews included. Every other curve is flattened
//! to a polygon by adaptive bisection until the chord error is at most 1e-4 of the drawing's
//! bounding-box diagonal, with the bound |B(t) − L(t)| ≤ ¼·√(max(u_x², v_x²) + max(u_y², v_y²)),
//! u = 3P₁ − 2P₀ − P₃, v = 3P₂ − P₀ − 2P₃, L the chord parametrised linearly (from
//! B − L = t(1−t)[(1−t)u + t v]; exact algebra). Arcs that are not a full turn reach us as the
//! Béziers `usvg` made of them (within 0.1 user units or 2.7e-4 of the radius, whichever is
//! larger; a limit of `usvg`).
//!
//! Physical size: `scale` (metres per user unit) when given; else the document's `width` and
//! `height` with a unit (mm, cm, in, pt, pc or px at 96 px/in) together with the `viewBox`
//! (CSS: 1 in = 96 px = 25.4 mm). A document whose size has no unit (or is a percentage) and no
//! `scale` is refused. A warning says which was used.

use super::{polygon_signed_area, Point, Primitive, Shape};
use crate::error::{Error, Result};
use std::f64::consts::PI;
use std::path::Path;
use usvg::roxmltree;

/// Chord error of flattened curves, relative to the drawing's bounding-box diagonal.
pub const FLATTEN_TOLERANCE: f64 = 1e-4;
/// Fills with a luma above this (0..1) are solid.
pub const WHITE_LUMA: f64 = 0.9;
/// Metres per CSS pixel (96 px per inch, CSS Values and Units).
const M_PER_PX: f64 = 0.0254 / 96.0;
/// Samples across the fluid's bounding box in the check of the regions-minus-holes reading.
const CHECK_SAMPLES: usize = 200;

/// Reads an SVG drawing from disk; see [`parse_svg`].
pub fn load_svg(path: &Path, scale: Option<f64>) -> Result<(Shape, Vec<String>)> {
    let bytes = super::read_input_file(path, super::MAX_TEXT_INPUT_BYTES)?;
    let origin = path.display().to_string();
    if bytes.starts_with(&[0x1f, 0x8b]) {
        return Err(parse_err(
            &origin,
            "the file is gzip-compressed (svgz); decompress it to a plain .svg first",
        ));
    }
    let text = String::from_utf8(bytes)
        .map_err(|_| parse_err(&origin, "not an SVG document: the file is not UTF-8 text"))?;
    parse_svg(&text, &origin, scale)
}

fn parse_err(origin: &str, message: impl Into<String>) -> Error {
    Error::ShapeParse {
        origin: origin.to_string(),
        line: None,
        message: message.into(),
    }
}

/// Parses an SVG document into a cross-section in metres, with warnings (always one saying how
/// the size was found). `origin` names the document in messages; `scale` is metres per user unit
/// and overrides the document's own size.
pub fn parse_svg(text: &str, origin: &str, scale: Option<f64>) -> Result<(Shape, Vec<String>)> {
    if let Some(s) = scale {
        if !(s.is_finite() && s > 0.0) {
            return Err(Error::param("--scale", "must be a positive length"));
        }
    }
    let opts = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..Default::default()
    };
    let doc =
        roxmltree::Document::parse_with_options(text, opts).map_err(|e| Error::ShapeParse {
            origin: origin.to_string(),
            line: Some(e.pos().row as usize),
            message: format!("not an SVG document: XML syntax: {e}"),
        })?;
    let root = doc.root_element();
    if root.tag_name().name() != "svg" {
        return Err(parse_err(
            origin,
            format!(
                "not an SVG document: the root element is <{}>, not <svg>",
                root.tag_name().name()
            ),
        ));
    }
    if root.tag_name().namespace() != Some("http://www.w3.org/2000/svg") {
        return Err(parse_err(
            origin,
            "the <svg> element lacks the SVG namespace; add xmlns=\"http://www.w3.org/2000/svg\"",
        ));
    }
    // Images carry no geometry, and nothing outside the document is ever read: no resources
    // directory, and both resolvers of `<image href>` (a file name, a data URL) return nothing
    // (usvg's defaults would read any file named there, or parse an embedded SVG).
    let options = usvg::Options {
        dpi: 96.0,
        resources_dir: None,
        image_href_resolver: usvg::ImageHrefResolver {
            resolve_data: Box::new(|_, _, _| None),
            resolve_string: Box::new(|_, _| None),
        },
        ..Default::default()
    };
    let tree = usvg::Tree::from_xmltree(&doc, &options).map_err(|e| match e {
        usvg::Error::InvalidSize => parse_err(
            origin,
            "the drawing has no valid size: width and height must be positive (or give a viewBox)",
        ),
        other => parse_err(origin, format!("not a usable SVG document: {other}")),
    })?;

    let mut warnings = Vec::new();
    let (mx, my) = metres_per_px(&root, &tree, origin, scale, &mut warnings)?;

    // Collect the filled shapes in paint order, in metres.
    let mut walk = Walk {
        mx,
        my,
        elements: Vec::new(),
        notes: Notes::default(),
        filled: 0,
    };
    walk.group(tree.root(), "");
    if doc.descendants().any(|n| n.has_tag_name("text")) {
        walk.notes.text = true;
    }
    warnings.extend(walk.notes.messages());
    let mut elements = walk.elements;
    if elements.is_empty() {
        return Err(parse_err(
            origin,
            "the drawing has no filled shape (only fills count as fluid; strokes, text and \
             images are ignored)",
        ));
    }
    let Some(first_fluid) = elements.iter().position(|e| e.fluid) else {
        return Err(parse_err(
            origin,
            "every filled shape of the drawing is white (solid); fluid needs a darker fill",
        ));
    };
    // White shapes under all fluid cover only solid: drop them.
    elements.drain(..first_fluid);

    // Tolerance from the bounding box of every control point.
    let (lo, hi) = points_bbox(
        elements
            .iter()
            .flat_map(|e| e.subpaths.iter())
            .flat_map(|s| std::iter::once(&s.start).chain(s.segs.iter().flat_map(Seg::points))),
    );
    let diag = (hi[0] - lo[0]).hypot(hi[1] - lo[1]);
    if !(diag.is_finite() && diag > 0.0) {
        return Err(parse_err(
            origin,
            "the filled shapes of the drawing have no extent",
        ));
    }
    let tol = FLATTEN_TOLERANCE * diag;

    // Subpaths → loops.
    let mut shaped: Vec<Element> = Vec::new();
    for e in &elements {
        let mut loops = Vec::new();
        for (k, sub) in e.subpaths.iter().enumerate() {
            let which = if e.subpaths.len() > 1 {
                format!("{}, subpath {}", e.label, k + 1)
            } else {
                e.label.clone()
            };
            // An open outline (no `Z`, ends apart) is refused rather than closed by a straight
            // line as the SVG fill would: a gap in a drawn wall is nearly always a drawing
            // error, and the straight closing line would become a wall of the passage.
            let end = sub.segs.last().map_or(sub.start, Seg::end);
            let gap = ((end[0] - sub.start[0]).powi(2) + (end[1] - sub.start[1]).powi(2)).sqrt();
            // (A single straight segment encloses nothing; it is skipped below with a warning.)
            let encloses = sub.segs.len() >= 2 || matches!(sub.segs.first(), Some(Seg::Cubic(..)));
            if !sub.closed && encloses && gap > 1e-6 * diag {
                return Err(parse_err(
                    origin,
                    format!(
                        "{which} is an open path: its ends are {:.4} mm apart; close the outline \
                         (end the path with Z) so the wall is the one drawn",
                        gap * 1e3
                    ),
                ));
            }
            if let Some(prim) = as_ellipse(sub, diag) {
                let mut poly = ellipse_polygon(&prim, tol);
                // Keep the drawn orientation: the fill rule counts it.
                let drawn = std::iter::once(sub.start)
                    .chain(sub.segs.iter().map(Seg::end))
                    .collect::<Vec<_>>();
                if polygon_signed_area(&drawn) < 0.0 {
                    poly.reverse();
                }
                loops.push(Loop::new(poly, prim));
                continue;
            }
            let poly = dedup(&flatten(sub, tol), 1e-12 * diag);
            if poly.len() < 3 {
                warnings.push(format!(
                    "{which}: skipped, it has fewer than three distinct points"
                ));
                continue;
            }
            // Zero area: every fan triangle from the first point is flat (collinear points).
            let fan: f64 = poly
                .windows(2)
                .map(|w| {
                    let (a, b) = (sub2(w[0], poly[0]), sub2(w[1], poly[0]));
                    (a[0] * b[1] - a[1] * b[0]).abs()
                })
                .sum();
            if fan <= 1e-12 * diag * diag {
                warnings.push(format!("{which}: skipped, it encloses no area"));
                continue;
            }
            let prim = Primitive::Polygon {
                points: poly.clone(),
            };
            if let Err(err) = prim.validate() {
                let m = match err {
                    Error::Geometry(m) => m,
                    other => other.to_string(),
                };
                return Err(parse_err(
                    origin,
                    format!(
                        "{which}: {m} (after flattening its curves); split it into subpaths \
                         that do not cross themselves"
                    ),
                ));
            }
            loops.push(Loop::new(poly, prim));
        }
        if loops.is_empty() {
            if e.subpaths.len() > 1 {
                warnings.push(format!("{}: skipped, nothing of it encloses area", e.label));
            }
            continue;
        }
        shaped.push(Element {
            label: e.label.clone(),
            fluid: e.fluid,
            evenodd: e.evenodd,
            loops,
            walls: Vec::new(),
        });
    }
    if !shaped.iter().any(|e| e.fluid) {
        return Err(parse_err(
            origin,
            "no filled shape of the drawing encloses any area",
        ));
    }

    // Which loops are walls, and on which side the fill lies.
    let eps_abs = 1e-7 * diag;
    for e in shaped.iter_mut() {
        let mut walls = Vec::with_capacity(e.loops.len());
        for l in &e.loops {
            walls.push(classify_loop(e, l, eps_abs));
        }
        e.walls = walls;
    }

    // The shape: fluid shapes give regions and holes, white shapes holes.
    let mut shape = Shape {
        name: title(&root),
        regions: Vec::new(),
        holes: Vec::new(),
    };
    let mut region_polys: Vec<&Loop> = Vec::new();
    let mut hole_polys: Vec<&Loop> = Vec::new();
    for e in &shaped {
        for (l, wall) in e.loops.iter().zip(&e.walls) {
            match (wall, e.fluid) {
                (Wall::Outer, true) => {
                    shape.regions.push(l.prim.clone());
                    region_polys.push(l);
                }
                (Wall::Inner, true) | (Wall::Outer, false) => {
                    shape.holes.push(l.prim.clone());
                    hole_polys.push(l);
                }
                _ => {}
            }
        }
    }
    if shape.regions.is_empty() {
        return Err(parse_err(origin, "no filled shape of the drawing is fluid"));
    }

    // Does union(regions) − union(holes) reproduce the painted drawing?
    let (flo, fhi) = points_bbox(region_polys.iter().flat_map(|l| l.poly.iter()));
    let painted = |p: Point| -> Option<(bool, &str)> {
        shaped
            .iter()
            .rev()
            .find(|e| e.fills(p))
            .map(|e| (e.fluid, e.label.as_str()))
    };
    let read = |p: Point| {
        region_polys.iter().any(|l| l.winding(p) != 0)
            && !hole_polys.iter().any(|l| l.winding(p) != 0)
    };
    // Irrational offsets keep the samples off the drawing's own lattice of round numbers.
    let (ox, oy) = (0.381_966_011_250_105, 0.618_033_988_749_895);
    for j in 0..CHECK_SAMPLES {
        for i in 0..CHECK_SAMPLES {
            let p = [
                flo[0] + (fhi[0] - flo[0]) * (i as f64 + ox) / CHECK_SAMPLES as f64,
                flo[1] + (fhi[1] - flo[1]) * (j as f64 + oy) / CHECK_SAMPLES as f64,
            ];
            let want = painted(p);
            let got = read(p);
            if want.map(|w| w.0).unwrap_or(false) != got {
                let top = want
                    .map(|w| format!("; the top shape there is {}", w.1))
                    .unwrap_or_default();
                return Err(parse_err(
                    origin,
                    format!(
                        "near ({:.4} mm, {:.4} mm) (y up) the drawing shows {} but reads as {} \
                         when taken as the union of the filled shapes minus the white shapes and \
                         fill-rule holes{top}. Fluid inside a hole or over a white shape, a \
                         white shape with a hole of its own, and subpaths of one shape that \
                         cross each other cannot be read; redraw so that every hole contains \
                         no fluid",
                        p[0] * 1e3,
                        p[1] * 1e3,
                        if got { "solid" } else { "fluid" },
                        if got { "fluid" } else { "solid" },
                    ),
                ));
            }
        }
    }

    shape.validate().map_err(|e| match e {
        Error::Geometry(m) => parse_err(origin, m),
        other => other,
    })?;
    Ok((shape, warnings))
}

/// Metres per viewport pixel along x and y (usvg's coordinates are viewport pixels, the
/// viewBox mapping applied), and the warning saying where the size came from.
fn metres_per_px(
    root: &roxmltree::Node,
    tree: &usvg::Tree,
    origin: &str,
    scale: Option<f64>,
    warnings: &mut Vec<String>,
) -> Result<(f64, f64)> {
    let size = tree.size();
    let (wpx, hpx) = (size.width() as f64, size.height() as f64);
    let view_box = root.attribute("viewBox").and_then(parse_view_box);
    // Viewport pixels per user unit, as preserveAspectRatio maps the viewBox.
    let (sx, sy) = match view_box {
        Some(vb) => {
            let (a, b) = (wpx / vb[2], hpx / vb[3]);
            let par = root.attribute("preserveAspectRatio").unwrap_or("");
            let mut words = par.split_whitespace();
            let mut align = words.next().unwrap_or("xMidYMid");
            if align == "defer" {
                align = words.next().unwrap_or("xMidYMid");
            }
            let slice = words.next() == Some("slice");
            if align == "none" {
                (a, b)
            } else if slice {
                (a.max(b), a.max(b))
            } else {
                (a.min(b), a.min(b))
            }
        }
        None => (1.0, 1.0),
    };
    let attrs: Vec<(&str, &str)> = ["width", "height"]
        .iter()
        .filter_map(|&k| root.attribute(k).map(|v| (k, v)))
        .collect();
    let physical = !attrs.is_empty()
        && attrs.iter().all(|(_, v)| {
            matches!(
                length_unit(v),
                Some("mm" | "cm" | "in" | "pt" | "pc" | "px")
            )
        });
    let described: Vec<String> = attrs.iter().map(|(k, v)| format!("{k}=\"{v}\"")).collect();
    let unit_text = |mx: f64, my: f64| {
        if (mx - my).abs() <= 1e-9 * mx {
            format!("1 user unit = {}", fmt_length(mx))
        } else {
            format!(
                "1 user unit = {} across and {} down",
                fmt_length(mx),
                fmt_length(my)
            )
        }
    };
    if let Some(s) = scale {
        let note = if physical {
            format!(" (overrides the document's {})", described.join(" "))
        } else {
            String::new()
        };
        warnings.push(format!("SVG size from --scale: {}{note}", unit_text(s, s)));
        return Ok((s / sx, s / sy));
    }
    if !physical {
        let what = if attrs.is_empty() {
            "no width or height".to_string()
        } else {
            format!("{} without a unit", described.join(" "))
        };
        return Err(parse_err(
            origin,
            format!(
                "the drawing has no physical size ({what}; units mm, cm, in, pt, pc or px are \
                 needed); give the size of one user unit with --scale, e.g. --scale 0.1mm"
            ),
        ));
    }
    let vb = if view_box.is_some() {
        " and viewBox"
    } else {
        " (no viewBox)"
    };
    warnings.push(format!(
        "SVG size from {}{vb}: {}",
        described.join(" "),
        unit_text(sx * M_PER_PX, sy * M_PER_PX)
    ));
    Ok((M_PER_PX, M_PER_PX))
}

/// The unit of an SVG length attribute ("" for none), if it starts with a positive number.
fn length_unit(text: &str) -> Option<&str> {
    let (value, unit) = crate::units::split_number(text)?;
    (value.is_finite() && value > 0.0).then_some(unit)
}

fn parse_view_box(text: &str) -> Option<[f64; 4]> {
    let v: Vec<f64> = text
        .split(|c: char| c == ',' || c.is_whitespace())
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().ok())
        .collect::<Option<_>>()?;
    (v.len() == 4 && v.iter().all(|x| x.is_finite()) && v[2] > 0.0 && v[3] > 0.0)
        .then(|| [v[0], v[1], v[2], v[3]])
}

/// A length in metres for messages, in mm with six significant digits.
fn fmt_length(m: f64) -> String {
    let mm = m * 1e3;
    let digits = (5 - mm.abs().log10().floor() as i32).clamp(0, 12) as usize;
    let s = format!("{mm:.digits$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    format!("{s} mm")
}

/// The document's `<title>`, if any.
fn title(root: &roxmltree::Node) -> Option<String> {
    root.children()
        .find(|n| n.has_tag_name("title"))
        .and_then(|n| n.text())
        .map(|t| t.trim().to_string())
        .filter(|t| !t.is_empty())
}

// ---------------------------------------------------------------------------------------------
// Collecting the filled shapes.

#[derive(Debug, Clone, Copy)]
enum Seg {
    Line(Point),
    Cubic(Point, Point, Point),
}

impl Seg {
    fn end(&self) -> Point {
        match *self {
            Seg::Line(p) | Seg::Cubic(_, _, p) => p,
        }
    }
    fn points(&self) -> Vec<&Point> {
        match self {
            Seg::Line(p) => vec![p],
            Seg::Cubic(a, b, c) => vec![a, b, c],
        }
    }
}

#[derive(Debug, Clone)]
struct Subpath {
    start: Point,
    segs: Vec<Seg>,
    /// Ended by a close command (`Z`); usvg closes the subpaths of rects, circles, ellipses
    /// and polygons itself.
    closed: bool,
}

/// A filled shape as drawn, in metres.
struct Drawn {
    label: String,
    fluid: bool,
    evenodd: bool,
    subpaths: Vec<Subpath>,
}

#[derive(Default)]
struct Notes {
    strokes: usize,
    stroke_only: usize,
    images: usize,
    text: bool,
    clips: usize,
    filters: usize,
    gradients: usize,
    transparent: usize,
}

impl Notes {
    fn messages(&self) -> Vec<String> {
        let mut w = Vec::new();
        let n = |k: usize, what: &str| format!("{k} {what}");
        if self.stroke_only > 0 {
            w.push(format!(
                "{} ignored: only fills are fluid",
                n(self.stroke_only, "stroked shape(s) without a fill")
            ));
        }
        if self.strokes > 0 {
            w.push(format!(
                "the strokes of {} are ignored: the fill alone is the cross-section",
                n(self.strokes, "filled shape(s)")
            ));
        }
        if self.images > 0 {
            w.push(format!("{} ignored", n(self.images, "embedded image(s)")));
        }
        if self.text {
            w.push("text in the drawing is ignored".to_string());
        }
        if self.clips > 0 {
            w.push(format!(
                "{} ignored: shapes are read unclipped",
                n(self.clips, "clip path(s) or mask(s)")
            ));
        }
        if self.filters > 0 {
            w.push(format!("{} ignored", n(self.filters, "filter(s)")));
        }
        if self.gradients > 0 {
            w.push(format!(
                "{} a gradient or pattern, taken as fluid",
                n(self.gradients, "shape(s) filled with")
            ));
        }
        if self.transparent > 0 {
            w.push(format!(
                "{} ignored",
                n(self.transparent, "fully transparent fill(s)")
            ));
        }
        w
    }
}

struct Walk {
    mx: f64,
    my: f64,
    elements: Vec<Drawn>,
    notes: Notes,
    /// Filled shapes met so far (for labels of shapes without an id).
    filled: usize,
}

impl Walk {
    fn group(&mut self, g: &usvg::Group, id: &str) {
        if g.clip_path().is_some() || g.mask().is_some() {
            self.notes.clips += 1;
        }
        if !g.filters().is_empty() {
            self.notes.filters += 1;
        }
        let id = if g.id().is_empty() { id } else { g.id() };
        for node in g.children() {
            match node {
                usvg::Node::Group(child) => self.group(child, id),
                usvg::Node::Path(p) => self.path(p, id),
                usvg::Node::Image(_) => self.notes.images += 1,
                usvg::Node::Text(_) => self.notes.text = true,
            }
        }
    }

    fn path(&mut self, p: &usvg::Path, group_id: &str) {
        if !p.is_visible() {
            return;
        }
        let Some(fill) = p.fill() else {
            if p.stroke().is_some() {
                self.notes.stroke_only += 1;
            }
            return;
        };
        if fill.opacity().get() <= 0.0 {
            self.notes.transparent += 1;
            return;
        }
        if p.stroke().is_some() {
            self.notes.strokes += 1;
        }
        let fluid = match fill.paint() {
            usvg::Paint::Color(c) => {
                let luma =
                    (0.299 * c.red as f64 + 0.587 * c.green as f64 + 0.114 * c.blue as f64) / 255.0;
                luma <= WHITE_LUMA
            }
            _ => {
                self.notes.gradients += 1;
                true
            }
        };
        self.filled += 1;
        let id = if p.id().is_empty() { group_id } else { p.id() };
        let label = if id.is_empty() {
            format!("filled shape {}", self.filled)
        } else {
            format!("element \"{id}\"")
        };
        let t = p.abs_transform();
        let (mx, my) = (self.mx, self.my);
        let map = |q: usvg::tiny_skia_path::Point| -> Point {
            let (x, y) = (q.x as f64, q.y as f64);
            let px = t.sx as f64 * x + t.kx as f64 * y + t.tx as f64;
            let py = t.ky as f64 * x + t.sy as f64 * y + t.ty as f64;
            [px * mx, -py * my]
        };
        let mut subpaths = Vec::new();
        let mut current: Option<Subpath> = None;
        let mut last_start: Option<Point> = None;
        let mut at = [0.0, 0.0];
        for seg in p.data().segments() {
            use usvg::tiny_skia_path::PathSegment as S;
            if !matches!(seg, S::MoveTo(_) | S::Close) && current.is_none() {
                // Drawing on after a close starts a new subpath at the closed one's start.
                let start = last_start.unwrap_or(at);
                current = Some(Subpath {
                    start,
                    segs: Vec::new(),
                    closed: false,
                });
                at = start;
            }
            match seg {
                S::MoveTo(q) => {
                    if let Some(s) = current.take() {
                        subpaths.push(s);
                    }
                    at = map(q);
                    last_start = Some(at);
                    current = Some(Subpath {
                        start: at,
                        segs: Vec::new(),
                        closed: false,
                    });
                }
                S::LineTo(q) => {
                    at = map(q);
                    if let Some(s) = current.as_mut() {
                        s.segs.push(Seg::Line(at));
                    }
                }
                S::QuadTo(c, q) => {
                    // Degree elevation: the same curve as a cubic (exact).
                    let (c, q) = (map(c), map(q));
                    let c1 = [
                        at[0] + 2.0 / 3.0 * (c[0] - at[0]),
                        at[1] + 2.0 / 3.0 * (c[1] - at[1]),
                    ];
                    let c2 = [
                        q[0] + 2.0 / 3.0 * (c[0] - q[0]),
                        q[1] + 2.0 / 3.0 * (c[1] - q[1]),
                    ];
                    at = q;
                    if let Some(s) = current.as_mut() {
                        s.segs.push(Seg::Cubic(c1, c2, q));
                    }
                }
                S::CubicTo(a, b, q) => {
                    at = map(q);
                    let seg = Seg::Cubic(map(a), map(b), at);
                    if let Some(s) = current.as_mut() {
                        s.segs.push(seg);
                    }
                }
                S::Close => {
                    if let Some(mut s) = current.take() {
                        at = s.start;
                        s.closed = true;
                        subpaths.push(s);
                    }
                }
            }
        }
        if let Some(s) = current.take() {
            subpaths.push(s);
        }
        subpaths.retain(|s| !s.segs.is_empty());
        self.elements.push(Drawn {
            label,
            fluid,
            evenodd: fill.rule() == usvg::FillRule::EvenOdd,
            subpaths,
        });
    }
}

// ---------------------------------------------------------------------------------------------
// Loops, fill rules and walls.

/// A closed subpath: its polygon (exact or flattened, for the topology) and its primitive.
struct Loop {
    poly: Vec<Point>,
    prim: Primitive,
    lo: Point,
    hi: Point,
}

impl Loop {
    fn new(poly: Vec<Point>, prim: Primitive) -> Loop {
        let (lo, hi) = points_bbox(poly.iter());
        Loop { poly, prim, lo, hi }
    }

    /// Winding number of the polygon about `p` (crossing rule with signs; 0 outside).
    fn winding(&self, p: Point) -> i32 {
        if p[0] < self.lo[0] || p[0] > self.hi[0] || p[1] < self.lo[1] || p[1] > self.hi[1] {
            return 0;
        }
        let n = self.poly.len();
        let mut w = 0;
        for i in 0..n {
            let (a, b) = (self.poly[i], self.poly[(i + 1) % n]);
            let left = (b[0] - a[0]) * (p[1] - a[1]) - (p[0] - a[0]) * (b[1] - a[1]);
            if a[1] <= p[1] {
                if b[1] > p[1] && left > 0.0 {
                    w += 1;
                }
            } else if b[1] <= p[1] && left < 0.0 {
                w -= 1;
            }
        }
        w
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Wall {
    /// Filled inside, empty outside.
    Outer,
    /// Empty inside, filled outside.
    Inner,
    /// The same on both sides: no wall.
    None,
}

struct Element {
    label: String,
    fluid: bool,
    evenodd: bool,
    loops: Vec<Loop>,
    walls: Vec<Wall>,
}

impl Element {
    /// Does the shape's fill cover `p` under its fill rule?
    fn fills(&self, p: Point) -> bool {
        let w: i32 = self.loops.iter().map(|l| l.winding(p)).sum();
        if self.evenodd {
            w % 2 != 0
        } else {
            w != 0
        }
    }
}

/// Tests the fill just inside and just outside the loop, beside the middle of its longest edge.
fn classify_loop(e: &Element, l: &Loop, eps_abs: f64) -> Wall {
    let n = l.poly.len();
    let (mut a, mut b) = (l.poly[0], l.poly[1 % n]);
    let mut best = 0.0;
    for i in 0..n {
        let (p, q) = (l.poly[i], l.poly[(i + 1) % n]);
        let len = (q[0] - p[0]).hypot(q[1] - p[1]);
        if len > best {
            best = len;
            (a, b) = (p, q);
        }
    }
    let eps = eps_abs.min(1e-3 * best);
    let m = [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])];
    let nrm = [-(b[1] - a[1]) / best, (b[0] - a[0]) / best];
    let p1 = [m[0] + eps * nrm[0], m[1] + eps * nrm[1]];
    let p2 = [m[0] - eps * nrm[0], m[1] - eps * nrm[1]];
    let (inside, outside) = match (l.winding(p1) != 0, l.winding(p2) != 0) {
        (true, false) => (p1, p2),
        (false, true) => (p2, p1),
        _ => return Wall::None,
    };
    match (e.fills(inside), e.fills(outside)) {
        (true, false) => Wall::Outer,
        (false, true) => Wall::Inner,
        _ => Wall::None,
    }
}

fn sub2(a: Point, b: Point) -> Point {
    [a[0] - b[0], a[1] - b[1]]
}

fn points_bbox<'a>(points: impl Iterator<Item = &'a Point>) -> (Point, Point) {
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for p in points {
        for d in 0..2 {
            lo[d] = lo[d].min(p[d]);
            hi[d] = hi[d].max(p[d]);
        }
    }
    (lo, hi)
}

/// Drops consecutive points closer than `tol` and a closing point equal to the first.
fn dedup(points: &[Point], tol: f64) -> Vec<Point> {
    let close = |a: Point, b: Point| (a[0] - b[0]).hypot(a[1] - b[1]) <= tol;
    let mut out: Vec<Point> = Vec::with_capacity(points.len());
    for &p in points {
        if out.last().is_none_or(|&q| !close(p, q)) {
            out.push(p);
        }
    }
    while out.len() > 1 && close(out[0], out[out.len() - 1]) {
        out.pop();
    }
    out
}

// ---------------------------------------------------------------------------------------------
// Curves.

/// The subpath as a polygon: lines as they are, cubics flattened to chord error ≤ `tol`.
fn flatten(sub: &Subpath, tol: f64) -> Vec<Point> {
    let mut out = vec![sub.start];
    let mut at = sub.start;
    for seg in &sub.segs {
        match *seg {
            Seg::Line(p) => out.push(p),
            Seg::Cubic(a, b, p) => flatten_cubic([at, a, b, p], tol, 0, &mut out),
        }
        at = seg.end();
    }
    out
}

/// Adaptive bisection (de Casteljau at t = ½) until the flatness bound of the module doc is
/// at most `tol`; pushes the end points of the pieces.
fn flatten_cubic(c: [Point; 4], tol: f64, depth: u32, out: &mut Vec<Point>) {
    let [p0, p1, p2, p3] = c;
    let u = [
        3.0 * p1[0] - 2.0 * p0[0] - p3[0],
        3.0 * p1[1] - 2.0 * p0[1] - p3[1],
    ];
    let v = [
        3.0 * p2[0] - p0[0] - 2.0 * p3[0],
        3.0 * p2[1] - p0[1] - 2.0 * p3[1],
    ];
    let bound2 = (u[0] * u[0]).max(v[0] * v[0]) + (u[1] * u[1]).max(v[1] * v[1]);
    if bound2 <= 16.0 * tol * tol || depth >= 30 {
        out.push(p3);
        return;
    }
    let mid = |a: Point, b: Point| [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])];
    let (q0, q1, q2) = (mid(p0, p1), mid(p1, p2), mid(p2, p3));
    let (r0, r1) = (mid(q0, q1), mid(q1, q2));
    let s = mid(r0, r1);
    flatten_cubic([p0, q0, r0, s], tol, depth + 1, out);
    flatten_cubic([s, r1, q2, p3], tol, depth + 1, out);
}

/// The exact circle or ellipse a closed run of N ≥ 3 cubics stands for, if it is the affine
/// image of the standard N-piece circle approximation (module doc). `diag` sets the scale of
/// the position tolerance.
fn as_ellipse(sub: &Subpath, diag: f64) -> Option<Primitive> {
    let n = sub.segs.len();
    if n < 3 {
        return None;
    }
    let mut on = Vec::with_capacity(n + 1);
    let mut ctrl = Vec::with_capacity(n);
    on.push(sub.start);
    for seg in &sub.segs {
        let Seg::Cubic(a, b, p) = *seg else {
            return None;
        };
        ctrl.push((a, b));
        on.push(p);
    }
    let nf = n as f64;
    let c = [
        on[..n].iter().map(|p| p[0]).sum::<f64>() / nf,
        on[..n].iter().map(|p| p[1]).sum::<f64>() / nf,
    ];
    let alpha = 2.0 * PI / nf;
    let u = [on[0][0] - c[0], on[0][1] - c[1]];
    let w = [on[1][0] - c[0], on[1][1] - c[1]];
    let v = [
        (w[0] - u[0] * alpha.cos()) / alpha.sin(),
        (w[1] - u[1] * alpha.cos()) / alpha.sin(),
    ];
    let size = u[0].hypot(u[1]).max(v[0].hypot(v[1]));
    if size.is_nan() || size <= 1e-9 * diag {
        return None;
    }
    let tol = 1e-5 * size + 1e-6 * (c[0].hypot(c[1]) + diag);
    let at = |t: f64| {
        let (s, co) = t.sin_cos();
        [c[0] + u[0] * co + v[0] * s, c[1] + u[1] * co + v[1] * s]
    };
    let tangent = |t: f64| {
        let (s, co) = t.sin_cos();
        [-u[0] * s + v[0] * co, -u[1] * s + v[1] * co]
    };
    let far = |a: Point, b: Point| (a[0] - b[0]).hypot(a[1] - b[1]) > tol;
    let t0 = tangent(0.0);
    let k = ((ctrl[0].0[0] - on[0][0]) * t0[0] + (ctrl[0].0[1] - on[0][1]) * t0[1])
        / (t0[0] * t0[0] + t0[1] * t0[1]);
    // k multiplies the tangent dP/dθ: the standard handle is 4/3·tan(α/4) of it.
    let k_std = 4.0 / 3.0 * (alpha / 4.0).tan();
    if (k / k_std - 1.0).abs().is_nan() || (k / k_std - 1.0).abs() > 1e-3 {
        return None;
    }
    for (j, &p) in on.iter().enumerate() {
        if far(p, at(j as f64 * alpha)) {
            return None;
        }
    }
    for (j, &(a, b)) in ctrl.iter().enumerate() {
        let (ta, tb) = (j as f64 * alpha, (j + 1) as f64 * alpha);
        let (pa, pb) = (at(ta), at(tb));
        let (da, db) = (tangent(ta), tangent(tb));
        if far(a, [pa[0] + k * da[0], pa[1] + k * da[1]])
            || far(b, [pb[0] - k * db[0], pb[1] - k * db[1]])
        {
            return None;
        }
    }
    // M·Mᵀ for M = [u v].
    let ma = u[0] * u[0] + v[0] * v[0];
    let mb = u[0] * u[1] + v[0] * v[1];
    let md = u[1] * u[1] + v[1] * v[1];
    let mean = 0.5 * (ma + md);
    let r = (0.25 * (ma - md) * (ma - md) + mb * mb).sqrt();
    let (l1, l2) = (mean + r, mean - r);
    if l2.is_nan() || l2 <= 1e-18 * l1 {
        return None;
    }
    let (a1, a2) = (l1.sqrt(), l2.sqrt());
    if a1 - a2 <= 1e-6 * a1 {
        return Some(Primitive::Circle {
            center: c,
            radius: (a1 * a2).sqrt(),
        });
    }
    Some(Primitive::Ellipse {
        center: c,
        semi_axes: [a1, a2],
        angle: 0.5 * (2.0 * mb).atan2(ma - md),
    })
}

/// A polygon through the exact circle or ellipse, chord error about `tol` (topology only).
fn ellipse_polygon(prim: &Primitive, tol: f64) -> Vec<Point> {
    let (c, a, b, angle) = match *prim {
        Primitive::Circle { center, radius } => (center, radius, radius, 0.0),
        Primitive::Ellipse {
            center,
            semi_axes,
            angle,
        } => (center, semi_axes[0], semi_axes[1], angle),
        _ => return Vec::new(),
    };
    // Sagitta of a chord spanning dθ on a circle of the largest curvature radius a²/b:
    // R·dθ²/8 ≤ tol.
    let rmax = a * a / b;
    let n = ((2.0 * PI) / (8.0 * tol / rmax).sqrt())
        .ceil()
        .clamp(16.0, 20_000.0) as usize;
    let (s, co) = angle.sin_cos();
    (0..n)
        .map(|k| {
            let t = 2.0 * PI * k as f64 / n as f64;
            let (x, y) = (a * t.cos(), b * t.sin());
            [c[0] + co * x - s * y, c[1] + s * x + co * y]
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn doc(size: &str, body: &str) -> String {
        format!("<svg xmlns=\"http://www.w3.org/2000/svg\" {size}>{body}</svg>")
    }

    fn parse(text: &str, scale: Option<f64>) -> (Shape, Vec<String>) {
        parse_svg(text, "t.svg", scale).unwrap_or_else(|e| panic!("{e}"))
    }

    fn msg(text: &str, scale: Option<f64>) -> String {
        match parse_svg(text, "t.svg", scale) {
            Err(e) => e.to_string(),
            Ok(_) => panic!("expected an error"),
        }
    }

    #[test]
    fn circle_is_exact_and_sized_by_mm() {
        // width 50 mm over a viewBox of 100 units: 1 unit = 0.5 mm (exact arithmetic).
        let (s, w) = parse(
            &doc(
                "width=\"50mm\" height=\"50mm\" viewBox=\"0 0 100 100\"",
                "<circle cx=\"50\" cy=\"40\" r=\"20\"/>",
            ),
            None,
        );
        assert!(w[0].contains("1 user unit = 0.5 mm"), "{w:?}");
        let Primitive::Circle { center, radius } = s.regions[0] else {
            panic!("{:?}", s.regions)
        };
        assert!((radius - 0.010).abs() < 1e-9, "{radius}");
        assert!((center[0] - 0.025).abs() < 1e-9 && (center[1] + 0.020).abs() < 1e-9);
    }

    #[test]
    fn rotated_and_skewed_ellipses_stay_ellipses() {
        // rotate(30): semi-axes 30 and 10 units at +30° in SVG (y down) → −30° with y up.
        let (s, _) = parse(
            &doc(
                "viewBox=\"0 0 100 100\"",
                "<ellipse transform=\"rotate(30 50 50)\" cx=\"50\" cy=\"50\" rx=\"30\" ry=\"10\"/>",
            ),
            Some(1e-3),
        );
        let Primitive::Ellipse {
            semi_axes, angle, ..
        } = s.regions[0]
        else {
            panic!("{:?}", s.regions)
        };
        assert!((semi_axes[0] - 0.030).abs() < 1e-8 && (semi_axes[1] - 0.010).abs() < 1e-8);
        let d = (angle + PI / 6.0).rem_euclid(PI);
        assert!(d.min(PI - d) < 1e-6, "{angle}");
        // A skew keeps an ellipse an ellipse; the area is det(M)·π·r² (exact geometry).
        let (s, _) = parse(
            &doc(
                "viewBox=\"0 0 100 100\"",
                "<circle transform=\"skewX(20)\" cx=\"30\" cy=\"50\" r=\"10\"/>",
            ),
            Some(1e-3),
        );
        let Primitive::Ellipse { semi_axes, .. } = s.regions[0] else {
            panic!("{:?}", s.regions)
        };
        let area = PI * semi_axes[0] * semi_axes[1];
        assert!((area / (PI * 1e-4) - 1.0).abs() < 1e-6, "{area}");
    }

    #[test]
    fn evenodd_subpath_and_white_fill_make_holes() {
        let ring = "M10 10 H90 V90 H10 Z M50 30 A20 20 0 0 1 70 50 A20 20 0 0 1 50 70 \
                    A20 20 0 0 1 30 50 A20 20 0 0 1 50 30 Z";
        let (s, _) = parse(
            &doc(
                "viewBox=\"0 0 100 100\"",
                &format!("<path fill-rule=\"evenodd\" d=\"{ring}\"/>"),
            ),
            Some(1e-3),
        );
        assert_eq!((s.regions.len(), s.holes.len()), (1, 1));
        assert!(
            matches!(s.holes[0], Primitive::Circle { radius, .. } if (radius - 0.02).abs() < 1e-8)
        );
        // nonzero with both subpaths the same way round: the circle is no wall at all.
        let (s, _) = parse(
            &doc("viewBox=\"0 0 100 100\"", &format!("<path d=\"{ring}\"/>")),
            Some(1e-3),
        );
        assert_eq!((s.regions.len(), s.holes.len()), (1, 0));
        let (s, _) = parse(
            &doc(
                "viewBox=\"0 0 100 100\"",
                "<rect x=\"0\" y=\"0\" width=\"100\" height=\"100\" fill=\"#fff\"/>\
                 <rect x=\"10\" y=\"10\" width=\"80\" height=\"80\" fill=\"navy\"/>\
                 <circle cx=\"50\" cy=\"50\" r=\"20\" fill=\"rgb(240,240,240)\"/>",
            ),
            Some(1e-3),
        );
        // The white background is dropped; the light grey circle is a hole.
        assert_eq!((s.regions.len(), s.holes.len()), (1, 1));
    }

    #[test]
    fn flattened_curve_area_within_the_bound() {
        // A cubic lens: area by Green's theorem with Gauss–Legendre quadrature on the exact
        // Béziers (exact geometry up to round-off) against the flattened polygon; the chord
        // error bound δ gives |ΔA| ≤ ⅔·δ·P (parabolic segment area; common practice, no source).
        let d = "M0 0 C20 -30 80 -30 100 0 C80 30 20 30 0 0 Z";
        let (s, _) = parse(
            &doc("viewBox=\"-10 -30 120 60\"", &format!("<path d=\"{d}\"/>")),
            Some(1.0),
        );
        let Primitive::Polygon { points } = &s.regions[0] else {
            panic!()
        };
        let cubic = |p: [[f64; 2]; 4], t: f64| {
            let m = 1.0 - t;
            let b = [m * m * m, 3.0 * m * m * t, 3.0 * m * t * t, t * t * t];
            let db = [
                -3.0 * m * m,
                3.0 * m * m - 6.0 * m * t,
                6.0 * m * t - 3.0 * t * t,
                3.0 * t * t,
            ];
            let x: f64 = (0..4).map(|i| b[i] * p[i][0]).sum();
            let y: f64 = (0..4).map(|i| b[i] * p[i][1]).sum();
            let dx: f64 = (0..4).map(|i| db[i] * p[i][0]).sum();
            let dy: f64 = (0..4).map(|i| db[i] * p[i][1]).sum();
            (x, y, dx, dy)
        };
        let flip = |p: [[f64; 2]; 4]| p.map(|q| [q[0], -q[1]]);
        let segs = [
            flip([[0.0, 0.0], [20.0, -30.0], [80.0, -30.0], [100.0, 0.0]]),
            flip([[100.0, 0.0], [80.0, 30.0], [20.0, 30.0], [0.0, 0.0]]),
        ];
        let (mut area, mut per) = (0.0, 0.0);
        for seg in segs {
            for k in 0..64 {
                for &(x, w) in &super::super::GAUSS8 {
                    let t = (k as f64 + 0.5 + 0.5 * x) / 64.0;
                    let (px, py, dx, dy) = cubic(seg, t);
                    area += 0.5 * (px * dy - py * dx) * w * 0.5 / 64.0;
                    per += dx.hypot(dy) * w * 0.5 / 64.0;
                }
            }
        }
        let poly = polygon_signed_area(points);
        let diag = 100f64.hypot(2.0 * 22.5);
        let bound = 2.0 / 3.0 * FLATTEN_TOLERANCE * diag * per;
        // Measured: 3240 exact against 3238.97 flattened (3.2e-4 relative), bound 1.67.
        assert!(
            (poly.abs() - area.abs()).abs() <= bound,
            "{poly} {area} {bound}"
        );
    }

    #[test]
    fn flatness_bound_holds() {
        // B(t) − L(t) = t(1−t)[(1−t)u + t v] ⇒ the bound of the module doc (exact algebra),
        // checked on a few cubics.
        let cases = [
            [[0.0, 0.0], [1.0, 3.0], [4.0, -2.0], [5.0, 1.0]],
            [[0.0, 0.0], [10.0, 0.0], [0.0, 10.0], [10.0, 10.0]],
        ];
        for c in cases {
            let mut out = vec![c[0]];
            flatten_cubic(c, 0.01, 0, &mut out);
            // Every sampled curve point lies within tol of the polygon.
            for k in 0..=1000 {
                let t = k as f64 / 1000.0;
                let m = 1.0 - t;
                let p = [
                    m * m * m * c[0][0]
                        + 3.0 * m * m * t * c[1][0]
                        + 3.0 * m * t * t * c[2][0]
                        + t * t * t * c[3][0],
                    m * m * m * c[0][1]
                        + 3.0 * m * m * t * c[1][1]
                        + 3.0 * m * t * t * c[2][1]
                        + t * t * t * c[3][1],
                ];
                let dist = out
                    .windows(2)
                    .map(|w| super::super::segment_distance(p, w[0], w[1]))
                    .fold(f64::INFINITY, f64::min);
                assert!(dist <= 0.01 + 1e-12, "{dist}");
            }
        }
    }

    #[test]
    fn errors_name_the_trouble() {
        let m = msg(
            &doc(
                "viewBox=\"0 0 10 10\"",
                "<circle cx=\"5\" cy=\"5\" r=\"2\"/>",
            ),
            None,
        );
        assert!(m.contains("t.svg") && m.contains("--scale"), "{m}");
        let m = msg(
            &doc(
                "width=\"10\" height=\"10\"",
                "<circle cx=\"5\" cy=\"5\" r=\"2\"/>",
            ),
            None,
        );
        assert!(m.contains("without a unit") && m.contains("--scale"), "{m}");
        let m = msg(
            &doc(
                "width=\"10mm\" height=\"10mm\"",
                "<circle cx=\"5\" cy=\"5\" r=\"2\" fill=\"none\" stroke=\"black\"/>",
            ),
            None,
        );
        assert!(m.contains("no filled shape"), "{m}");
        let m = msg("<html><body/></html>", None);
        assert!(m.contains("not an SVG"), "{m}");
        let m = msg("this is not XML", None);
        assert!(m.contains("not an SVG"), "{m}");
        let m = msg(
            &doc(
                "width=\"10mm\" height=\"10mm\"",
                "<path id=\"bow\" d=\"M1 1 L9 9 L9 1 L1 9 Z\"/>",
            ),
            None,
        );
        assert!(
            m.contains("element \"bow\"") && m.contains("crosses itself"),
            "{m}"
        );
        let m = msg(
            &doc(
                "width=\"10mm\" height=\"10mm\"",
                "<path fill-rule=\"evenodd\" d=\"M0 0 H10 V10 H0 Z M2 2 H8 V8 H2 Z M4 4 H6 V6 H4 Z\"/>",
            ),
            None,
        );
        assert!(m.contains("cannot be read"), "{m}");
        let (_, w) = parse(
            &doc(
                "width=\"10mm\" height=\"10mm\"",
                "<path d=\"M1 1 L5 5\"/><rect width=\"5\" height=\"5\"/>",
            ),
            None,
        );
        assert!(
            w.iter()
                .any(|w| w.contains("encloses no area") || w.contains("skipped")),
            "{w:?}"
        );
    }
}
