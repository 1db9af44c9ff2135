//! Cross-sections in physical units, with true curves.
//!
//! Owns: the primitives of a shape (polygon, circle, ellipse, rounded and rotated rectangle),
//! the composite cross-section (union of regions minus union of holes), inside tests, the exact
//! intersection of a straight line with the composite boundary, the walls of the composite
//! (which pieces of which primitive boundaries are in contact with fluid) sampled for the wall
//! shear, and the exact area and perimeter. Also shape files, built-in shapes and mask images
//! (submodules).
//!
//! Invariant: knows nothing of grids, matrices or the flow equation. Everything here is in
//! metres.

pub mod builtin;
pub mod corners;
pub mod mask;
pub mod shapefile;
pub mod svg;
pub mod trace;

use crate::error::{Error, Result};
use std::f64::consts::PI;

/// A point or vector in the cross-section plane, metres.
pub type Point = [f64; 2];

/// Smallest cross-section (and mask pixel) accepted, metres: below 0.1 µm a continuum model of
/// a liquid is no longer sensible.
pub const MIN_EXTENT_M: f64 = 1e-7;
/// Largest extent of a primitive (and of a cross-section), metres: a kilometre is far beyond
/// any duct, and beyond it velocities and pressure drops soon overflow, and squared lengths
/// (areas, the inside tests' cross products) lose every digit or become infinite.
pub const MAX_EXTENT_M: f64 = 1e3;
/// Largest distance of a coordinate from the origin, metres (beyond it a small shape far from
/// the origin loses its digits: a 1 mm circle at 1e30 m is a point).
pub const MAX_COORDINATE_M: f64 = 1e4;
/// Thinnest primitive, metres (10 nm; a continuum model of a liquid does not go further).
pub const MIN_THICKNESS_M: f64 = 1e-8;
/// Thinnest primitive relative to the whole cross-section (its bounding-box diagonal): the
/// crossings of grid lines with walls closer than 1e-12 of it are merged, and the wall tests
/// step 1e-9 of it off a wall, so a thinner hole or region would silently vanish.
pub const MIN_RELATIVE_THICKNESS: f64 = 1e-7;

/// Largest shape file or SVG drawing read, bytes (64 MiB: a drawn cross-section is kilobytes; a
/// polygon of a million points is some 30 MB of text).
pub const MAX_TEXT_INPUT_BYTES: u64 = 64 << 20;

/// Reads a whole input file of at most `limit` bytes. Only a regular file is read (a link to
/// one is followed): a directory, a FIFO, a device such as `/dev/zero` or a socket is refused
/// before it is opened, since reading one may block forever or never end; the size is checked
/// before reading, and the read itself stops at the limit in case the file grows meanwhile.
pub fn read_input_file(path: &std::path::Path, limit: u64) -> Result<Vec<u8>> {
    use std::io::Read;
    let io = |source: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let not_regular = |meta: &std::fs::Metadata| {
        let t = meta.file_type();
        let what = if t.is_dir() {
            "a directory"
        } else {
            "not a regular file (a device, FIFO or socket)"
        };
        Error::param(
            "SHAPE",
            format!("{} is {what}; only regular files are read", path.display()),
        )
    };
    let too_large = |len: u64| {
        Error::param(
            "SHAPE",
            format!(
                "{} is {:.1} MiB, larger than the {} MiB an input file may have",
                path.display(),
                len as f64 / (1u64 << 20) as f64,
                limit >> 20
            ),
        )
    };
    let meta = std::fs::metadata(path).map_err(io)?;
    if !meta.is_file() {
        return Err(not_regular(&meta));
    }
    if meta.len() > limit {
        return Err(too_large(meta.len()));
    }
    let file = std::fs::File::open(path).map_err(io)?;
    // The entry may have changed between the two looks: check what was opened.
    let meta = file.metadata().map_err(io)?;
    if !meta.is_file() {
        return Err(not_regular(&meta));
    }
    let mut bytes = Vec::with_capacity(meta.len().min(limit) as usize);
    file.take(limit + 1).read_to_end(&mut bytes).map_err(io)?;
    if bytes.len() as u64 > limit {
        return Err(too_large(bytes.len() as u64));
    }
    Ok(bytes)
}

fn add(a: Point, b: Point) -> Point {
    [a[0] + b[0], a[1] + b[1]]
}
fn sub(a: Point, b: Point) -> Point {
    [a[0] - b[0], a[1] - b[1]]
}
fn scale(a: Point, s: f64) -> Point {
    [a[0] * s, a[1] * s]
}
fn dot(a: Point, b: Point) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}
fn cross(a: Point, b: Point) -> f64 {
    a[0] * b[1] - a[1] * b[0]
}
fn norm(a: Point) -> f64 {
    a[0].hypot(a[1])
}
fn rotate(a: Point, angle: f64) -> Point {
    let (s, c) = angle.sin_cos();
    [c * a[0] - s * a[1], s * a[0] + c * a[1]]
}

/// Gauss–Legendre nodes and weights on [-1, 1], 8 points (exact for polynomials of degree 15).
const GAUSS8: [(f64, f64); 8] = [
    (-0.960_289_856_497_536_3, 0.101_228_536_290_376_26),
    (-0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (-0.525_532_409_916_329, 0.313_706_645_877_887_3),
    (-0.183_434_642_495_649_8, 0.362_683_783_378_362),
    (0.183_434_642_495_649_8, 0.362_683_783_378_362),
    (0.525_532_409_916_329, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (0.960_289_856_497_536_3, 0.101_228_536_290_376_26),
];

/// One piece of a primitive's closed boundary, parametrised by t in [0, 1] counter-clockwise.
#[derive(Debug, Clone, PartialEq)]
pub enum Segment {
    /// Straight edge from `a` to `b`.
    Line { a: Point, b: Point },
    /// Circular arc: angle runs from `start` through `start + sweep` (radians, sweep > 0).
    Arc {
        center: Point,
        radius: f64,
        start: f64,
        sweep: f64,
    },
    /// A whole ellipse with semi-axes `semi_axes`, its first axis at `angle` radians.
    Ellipse {
        center: Point,
        semi_axes: [f64; 2],
        angle: f64,
    },
}

impl Segment {
    /// The point at parameter t.
    pub fn point(&self, t: f64) -> Point {
        match *self {
            Segment::Line { a, b } => add(a, scale(sub(b, a), t)),
            Segment::Arc {
                center,
                radius,
                start,
                sweep,
            } => {
                let phi = start + sweep * t;
                [
                    center[0] + radius * phi.cos(),
                    center[1] + radius * phi.sin(),
                ]
            }
            Segment::Ellipse {
                center,
                semi_axes,
                angle,
            } => {
                let phi = 2.0 * PI * t;
                add(
                    center,
                    rotate([semi_axes[0] * phi.cos(), semi_axes[1] * phi.sin()], angle),
                )
            }
        }
    }

    /// dP/dt at parameter t.
    pub fn derivative(&self, t: f64) -> Point {
        match *self {
            Segment::Line { a, b } => sub(b, a),
            Segment::Arc {
                radius,
                start,
                sweep,
                ..
            } => {
                let phi = start + sweep * t;
                [-radius * sweep * phi.sin(), radius * sweep * phi.cos()]
            }
            Segment::Ellipse {
                semi_axes, angle, ..
            } => {
                let phi = 2.0 * PI * t;
                let w = 2.0 * PI;
                rotate(
                    [-semi_axes[0] * w * phi.sin(), semi_axes[1] * w * phi.cos()],
                    angle,
                )
            }
        }
    }

    /// Arc length between parameters t0 < t1 (exact for lines and arcs, Gauss–Legendre on
    /// sub-panels for ellipses, accurate to round-off for any sensible aspect ratio).
    pub fn length_between(&self, t0: f64, t1: f64) -> f64 {
        match *self {
            Segment::Line { a, b } => norm(sub(b, a)) * (t1 - t0),
            Segment::Arc { radius, sweep, .. } => radius * sweep * (t1 - t0),
            Segment::Ellipse { .. } => {
                let panels = 16;
                let dt = (t1 - t0) / panels as f64;
                let mut sum = 0.0;
                for k in 0..panels {
                    let mid = t0 + (k as f64 + 0.5) * dt;
                    for &(x, w) in &GAUSS8 {
                        sum += w * norm(self.derivative(mid + 0.5 * dt * x));
                    }
                }
                sum * 0.5 * dt
            }
        }
    }

    /// Parameters `s` at which the straight line `origin + s·dir` meets this segment, appended
    /// to `out` with |cos| of the angle between the line and the segment's normal there (1 where
    /// the line crosses at right angles, 0 where it touches). End points count (duplicates are
    /// removed by the caller).
    fn line_hits(&self, origin: Point, dir: Point, out: &mut Vec<(f64, f64)>) {
        match *self {
            Segment::Line { a, b } => {
                let e = sub(b, a);
                let denom = cross(dir, e);
                let w = sub(a, origin);
                if denom.abs() <= 1e-300 {
                    // Parallel: if collinear, both end points are crossings of a sort; the caller
                    // decides by the inside test which of them is a wall.
                    if cross(w, dir).abs() <= 1e-12 * norm(e).max(norm(w)) {
                        let d2 = dot(dir, dir);
                        out.push((dot(w, dir) / d2, 0.0));
                        out.push((dot(sub(b, origin), dir) / d2, 0.0));
                    }
                    return;
                }
                let s = cross(w, e) / denom;
                let u = cross(w, dir) / denom;
                if (-1e-12..=1.0 + 1e-12).contains(&u) {
                    out.push((s, (denom / (norm(dir) * norm(e))).abs()));
                }
            }
            Segment::Arc {
                center,
                radius,
                start,
                sweep,
            } => {
                for s in circle_hits(center, radius, origin, dir) {
                    let p = add(origin, scale(dir, s));
                    let cos = (dot(sub(p, center), dir) / (radius * norm(dir)))
                        .abs()
                        .min(1.0);
                    if sweep >= 2.0 * PI - 1e-12 {
                        out.push((s, cos));
                        continue;
                    }
                    let phi = (p[1] - center[1]).atan2(p[0] - center[0]);
                    let rel = (phi - start).rem_euclid(2.0 * PI);
                    let tol = 1e-10;
                    if rel <= sweep + tol || rel >= 2.0 * PI - tol {
                        out.push((s, cos));
                    }
                }
            }
            Segment::Ellipse {
                center,
                semi_axes,
                angle,
            } => {
                // In the ellipse's own frame the line is q(s) = q0 + s·qd; solve
                // (qx/a)² + (qy/b)² = 1.
                let q0 = rotate(sub(origin, center), -angle);
                let qd = rotate(dir, -angle);
                let (a, b) = (semi_axes[0], semi_axes[1]);
                let p0 = [q0[0] / a, q0[1] / b];
                let pd = [qd[0] / a, qd[1] / b];
                for s in circle_hits([0.0, 0.0], 1.0, p0, pd) {
                    // Normal in the ellipse's frame: the gradient of (qx/a)² + (qy/b)².
                    let q = add(q0, scale(qd, s));
                    let n = [q[0] / (a * a), q[1] / (b * b)];
                    let cos = (dot(n, qd) / (norm(n) * norm(qd))).abs().min(1.0);
                    out.push((s, if cos.is_finite() { cos } else { 1.0 }));
                }
            }
        }
    }
}

/// Parameters s where `origin + s·dir` meets the circle (|p - c| = r).
fn circle_hits(center: Point, radius: f64, origin: Point, dir: Point) -> Vec<f64> {
    let w = sub(origin, center);
    let a = dot(dir, dir);
    let b = dot(w, dir);
    let c = dot(w, w) - radius * radius;
    let disc = b * b - a * c;
    if disc < 0.0 {
        return Vec::new();
    }
    let sq = disc.sqrt();
    // Numerically stable roots of a·s² + 2b·s + c = 0.
    let q = -(b + b.signum() * sq);
    if q == 0.0 {
        return vec![0.0];
    }
    let s1 = q / a;
    let s2 = c / q;
    vec![s1.min(s2), s1.max(s2)]
}

/// One building block of a cross-section, in metres.
#[derive(Debug, Clone, PartialEq)]
pub enum Primitive {
    /// Closed polygon, either orientation, no repeated closing point needed.
    Polygon {
        points: Vec<Point>,
    },
    Circle {
        center: Point,
        radius: f64,
    },
    /// Ellipse with semi-axes along its own axes, the first rotated by `angle` radians.
    Ellipse {
        center: Point,
        semi_axes: [f64; 2],
        angle: f64,
    },
    /// Rectangle of full `size` centred on `center`, rotated by `angle` radians, with rounded
    /// corners of radius `corner_radius` (0 for sharp corners).
    Rect {
        center: Point,
        size: [f64; 2],
        corner_radius: f64,
        angle: f64,
    },
}

impl Primitive {
    /// An unrotated rectangle with sharp corners, centred on `center`.
    pub fn rect(center: Point, size: [f64; 2]) -> Primitive {
        Primitive::Rect {
            center,
            size,
            corner_radius: 0.0,
            angle: 0.0,
        }
    }

    /// Short name of the kind, as in the shape file.
    pub fn kind(&self) -> &'static str {
        match self {
            Primitive::Polygon { .. } => "polygon",
            Primitive::Circle { .. } => "circle",
            Primitive::Ellipse { .. } => "ellipse",
            Primitive::Rect { .. } => "rect",
        }
    }

    /// Checks that the primitive describes a proper closed area: finite numbers, positive sizes,
    /// polygons with at least three distinct points, non-zero area and no crossing edges.
    pub fn validate(&self) -> Result<()> {
        let finite = |v: &[f64]| v.iter().all(|x| x.is_finite());
        self.validate_form()?;
        // Sizes, once every number is known to be finite and every size positive.
        let (lo, hi) = self.bbox();
        let extent = (hi[0] - lo[0]).max(hi[1] - lo[1]);
        let far = [lo[0], lo[1], hi[0], hi[1]]
            .iter()
            .fold(0.0f64, |m, v| m.max(v.abs()));
        if !finite(&[extent, far]) || extent > MAX_EXTENT_M {
            return Err(Error::geometry(format!(
                "it is {extent:.3e} m across, larger than the {MAX_EXTENT_M:e} m canalis accepts \
                 (check the units)"
            )));
        }
        if far > MAX_COORDINATE_M {
            return Err(Error::geometry(format!(
                "it lies {far:.3e} m from the origin, farther than the {MAX_COORDINATE_M:e} m \
                 canalis accepts (move the cross-section near the origin, or check the units)"
            )));
        }
        let thickness = self.thickness();
        if thickness.is_nan() || thickness < MIN_THICKNESS_M {
            return Err(Error::geometry(format!(
                "it is {thickness:.3e} m thick, thinner than the {MIN_THICKNESS_M:e} m canalis \
                 resolves (check the units)"
            )));
        }
        Ok(())
    }

    /// A thickness of the primitive, metres: 2A/P (the thickness of a thin strip, the radius
    /// of a circle).
    pub fn thickness(&self) -> f64 {
        let perimeter: f64 = self
            .segments()
            .iter()
            .map(|s| s.length_between(0.0, 1.0))
            .sum();
        2.0 * self.area() / perimeter
    }

    /// The area enclosed by the primitive, m².
    pub fn area(&self) -> f64 {
        match self {
            Primitive::Polygon { points } => polygon_signed_area(&dedup_points(points)).abs(),
            Primitive::Circle { radius, .. } => PI * radius * radius,
            Primitive::Ellipse { semi_axes, .. } => PI * semi_axes[0] * semi_axes[1],
            Primitive::Rect {
                size,
                corner_radius,
                ..
            } => size[0] * size[1] - (4.0 - PI) * corner_radius * corner_radius,
        }
    }

    /// The checks of [`Primitive::validate`] on the numbers and the form, before the sizes.
    fn validate_form(&self) -> Result<()> {
        let finite = |v: &[f64]| v.iter().all(|x| x.is_finite());
        match self {
            Primitive::Polygon { points } => {
                if !points.iter().all(|p| finite(p)) {
                    return Err(Error::geometry(
                        "a polygon has a coordinate that is not a finite number",
                    ));
                }
                let pts = dedup_points(points);
                if pts.len() < 3 {
                    return Err(Error::geometry(format!(
                        "a polygon needs at least three distinct points, it has {}",
                        pts.len()
                    )));
                }
                if let Some((i, j)) = polygon_self_intersection(&pts) {
                    return Err(Error::geometry(format!(
                        "a polygon crosses itself: edge {} (from point {}) meets edge {} (from point {})",
                        i + 1,
                        i + 1,
                        j + 1,
                        j + 1
                    )));
                }
                let scale = bbox_of(&pts)
                    .map(|(lo, hi)| norm(sub(hi, lo)))
                    .unwrap_or(0.0);
                if !(scale.is_finite() && scale <= MAX_EXTENT_M) {
                    // Checked here too: the area test below is meaningless (infinite) then.
                    return Err(Error::geometry(format!(
                        "it is {scale:.3e} m across, larger than the {MAX_EXTENT_M:e} m canalis \
                         accepts (check the units)"
                    )));
                }
                let area = polygon_signed_area(&pts).abs();
                if area <= 1e-12 * scale * scale {
                    return Err(Error::geometry(
                        "a polygon has zero area (its points are collinear)",
                    ));
                }
            }
            Primitive::Circle { center, radius } => {
                if !finite(center) || !radius.is_finite() || *radius <= 0.0 {
                    return Err(Error::geometry(format!(
                        "a circle needs a finite centre and a positive radius (radius {radius})"
                    )));
                }
            }
            Primitive::Ellipse {
                center,
                semi_axes,
                angle,
            } => {
                if !finite(center)
                    || !angle.is_finite()
                    || !finite(semi_axes)
                    || semi_axes[0] <= 0.0
                    || semi_axes[1] <= 0.0
                {
                    return Err(Error::geometry(format!(
                        "an ellipse needs a finite centre and angle and positive semi-axes (semi-axes {semi_axes:?})"
                    )));
                }
            }
            Primitive::Rect {
                center,
                size,
                corner_radius,
                angle,
            } => {
                if !finite(center)
                    || !finite(size)
                    || !angle.is_finite()
                    || !corner_radius.is_finite()
                    || size[0] <= 0.0
                    || size[1] <= 0.0
                {
                    return Err(Error::geometry(format!(
                        "a rect needs a finite centre and angle and a positive size (size {size:?})"
                    )));
                }
                let half_min = 0.5 * size[0].min(size[1]);
                if *corner_radius < 0.0 || *corner_radius > half_min * (1.0 + 1e-12) {
                    return Err(Error::geometry(format!(
                        "a rect's corner_radius must lie between 0 and half its smaller side ({half_min}), it is {corner_radius}"
                    )));
                }
            }
        }
        Ok(())
    }

    /// The closed boundary, counter-clockwise.
    pub fn segments(&self) -> Vec<Segment> {
        match self {
            Primitive::Polygon { points } => {
                let mut pts = dedup_points(points);
                if polygon_signed_area(&pts) < 0.0 {
                    pts.reverse();
                }
                (0..pts.len())
                    .map(|i| Segment::Line {
                        a: pts[i],
                        b: pts[(i + 1) % pts.len()],
                    })
                    .collect()
            }
            Primitive::Circle { center, radius } => vec![Segment::Arc {
                center: *center,
                radius: *radius,
                start: 0.0,
                sweep: 2.0 * PI,
            }],
            Primitive::Ellipse {
                center,
                semi_axes,
                angle,
            } => vec![Segment::Ellipse {
                center: *center,
                semi_axes: *semi_axes,
                angle: *angle,
            }],
            Primitive::Rect {
                center,
                size,
                corner_radius,
                angle,
            } => {
                let (hx, hy, r) = (
                    0.5 * size[0],
                    0.5 * size[1],
                    corner_radius.min(0.5 * size[0].min(size[1])),
                );
                let map = |p: Point| add(*center, rotate(p, *angle));
                let mut segs = Vec::new();
                // Corners counter-clockwise from the bottom right; each corner is an arc of
                // radius r (skipped when r = 0) followed by the next straight side.
                let corners = [[hx, -hy], [hx, hy], [-hx, hy], [-hx, -hy]];
                let signs = [[1.0, -1.0], [1.0, 1.0], [-1.0, 1.0], [-1.0, -1.0]];
                for k in 0..4 {
                    let s = signs[k];
                    let c_local = [corners[k][0] - s[0] * r, corners[k][1] - s[1] * r];
                    let start_angle = -0.5 * PI + 0.5 * PI * k as f64;
                    // Side leading into corner k ends at the arc start.
                    let arc_start = add(c_local, scale([start_angle.cos(), start_angle.sin()], r));
                    let prev_k = (k + 3) % 4;
                    let sp = signs[prev_k];
                    let prev_c = [
                        corners[prev_k][0] - sp[0] * r,
                        corners[prev_k][1] - sp[1] * r,
                    ];
                    let prev_end_angle = -0.5 * PI + 0.5 * PI * prev_k as f64 + 0.5 * PI;
                    let prev_end = add(
                        prev_c,
                        scale([prev_end_angle.cos(), prev_end_angle.sin()], r),
                    );
                    if norm(sub(arc_start, prev_end)) > 0.0 {
                        segs.push(Segment::Line {
                            a: map(prev_end),
                            b: map(arc_start),
                        });
                    }
                    if r > 0.0 {
                        segs.push(Segment::Arc {
                            center: map(c_local),
                            radius: r,
                            start: start_angle + angle,
                            sweep: 0.5 * PI,
                        });
                    }
                }
                segs
            }
        }
    }

    /// Is `p` inside (boundary points may go either way)?
    pub fn contains(&self, p: Point) -> bool {
        match self {
            Primitive::Polygon { points } => {
                // Even–odd crossing rule with the half-open convention on vertices.
                let n = points.len();
                let mut inside = false;
                let mut j = n - 1;
                for i in 0..n {
                    let (a, b) = (points[i], points[j]);
                    if (a[1] > p[1]) != (b[1] > p[1]) {
                        let x = a[0] + (p[1] - a[1]) * (b[0] - a[0]) / (b[1] - a[1]);
                        if p[0] < x {
                            inside = !inside;
                        }
                    }
                    j = i;
                }
                inside
            }
            Primitive::Circle { center, radius } => {
                let d = sub(p, *center);
                dot(d, d) < radius * radius
            }
            Primitive::Ellipse {
                center,
                semi_axes,
                angle,
            } => {
                let q = rotate(sub(p, *center), -angle);
                (q[0] / semi_axes[0]).powi(2) + (q[1] / semi_axes[1]).powi(2) < 1.0
            }
            Primitive::Rect { .. } => self.rect_sdf(p) < 0.0,
        }
    }

    /// Signed distance to a (rounded) rectangle; only for `Rect`.
    fn rect_sdf(&self, p: Point) -> f64 {
        if let Primitive::Rect {
            center,
            size,
            corner_radius,
            angle,
        } = self
        {
            let q = rotate(sub(p, *center), -angle);
            let r = *corner_radius;
            let d = [
                q[0].abs() - (0.5 * size[0] - r),
                q[1].abs() - (0.5 * size[1] - r),
            ];
            let outside = norm([d[0].max(0.0), d[1].max(0.0)]);
            let inside = d[0].max(d[1]).min(0.0);
            outside + inside - r
        } else {
            f64::NAN
        }
    }

    /// Is `p` within `tol` of the boundary (approximately, for de-duplicating coincident walls)?
    fn near_boundary(&self, p: Point, tol: f64) -> bool {
        match self {
            Primitive::Polygon { points } => {
                let n = points.len();
                (0..n).any(|i| segment_distance(p, points[i], points[(i + 1) % n]) <= tol)
            }
            Primitive::Circle { center, radius } => (norm(sub(p, *center)) - radius).abs() <= tol,
            Primitive::Ellipse {
                center,
                semi_axes,
                angle,
            } => {
                let q = rotate(sub(p, *center), -angle);
                let (a, b) = (semi_axes[0], semi_axes[1]);
                let f = (q[0] / a).powi(2) + (q[1] / b).powi(2) - 1.0;
                let g = norm([2.0 * q[0] / (a * a), 2.0 * q[1] / (b * b)]);
                g > 0.0 && (f / g).abs() <= tol
            }
            Primitive::Rect { .. } => self.rect_sdf(p).abs() <= tol,
        }
    }

    /// Bounding box (low corner, high corner).
    pub fn bbox(&self) -> (Point, Point) {
        match self {
            Primitive::Polygon { points } => bbox_of(points).unwrap_or(([0.0; 2], [0.0; 2])),
            Primitive::Circle { center, radius } => (
                [center[0] - radius, center[1] - radius],
                [center[0] + radius, center[1] + radius],
            ),
            Primitive::Ellipse {
                center,
                semi_axes,
                angle,
            } => {
                let (s, c) = angle.sin_cos();
                let ex = ((semi_axes[0] * c).powi(2) + (semi_axes[1] * s).powi(2)).sqrt();
                let ey = ((semi_axes[0] * s).powi(2) + (semi_axes[1] * c).powi(2)).sqrt();
                (
                    [center[0] - ex, center[1] - ey],
                    [center[0] + ex, center[1] + ey],
                )
            }
            Primitive::Rect { .. } => {
                let mut lo = [f64::INFINITY; 2];
                let mut hi = [f64::NEG_INFINITY; 2];
                for seg in self.segments() {
                    let pts: Vec<Point> = match seg {
                        Segment::Line { a, b } => vec![a, b],
                        Segment::Arc { .. } => {
                            (0..=16).map(|k| seg.point(k as f64 / 16.0)).collect()
                        }
                        Segment::Ellipse { .. } => vec![],
                    };
                    for p in pts {
                        for d in 0..2 {
                            lo[d] = lo[d].min(p[d]);
                            hi[d] = hi[d].max(p[d]);
                        }
                    }
                }
                (lo, hi)
            }
        }
    }

    /// Moves, rotates about the origin and scales the primitive (used by invariance tests and
    /// the built-in shapes).
    pub fn transformed(&self, factor: f64, angle: f64, shift: Point) -> Primitive {
        let map = |p: Point| add(rotate(scale(p, factor), angle), shift);
        match self {
            Primitive::Polygon { points } => Primitive::Polygon {
                points: points.iter().map(|&p| map(p)).collect(),
            },
            Primitive::Circle { center, radius } => Primitive::Circle {
                center: map(*center),
                radius: radius * factor,
            },
            Primitive::Ellipse {
                center,
                semi_axes,
                angle: a0,
            } => Primitive::Ellipse {
                center: map(*center),
                semi_axes: [semi_axes[0] * factor, semi_axes[1] * factor],
                angle: a0 + angle,
            },
            Primitive::Rect {
                center,
                size,
                corner_radius,
                angle: a0,
            } => Primitive::Rect {
                center: map(*center),
                size: [size[0] * factor, size[1] * factor],
                corner_radius: corner_radius * factor,
                angle: a0 + angle,
            },
        }
    }
}

fn segment_distance(p: Point, a: Point, b: Point) -> f64 {
    let e = sub(b, a);
    let l2 = dot(e, e);
    let t = if l2 > 0.0 {
        (dot(sub(p, a), e) / l2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    norm(sub(p, add(a, scale(e, t))))
}

/// Drops consecutive repeated points and a repeated closing point.
fn dedup_points(points: &[Point]) -> Vec<Point> {
    let mut out: Vec<Point> = Vec::with_capacity(points.len());
    for &p in points {
        if out.last() != Some(&p) {
            out.push(p);
        }
    }
    while out.len() > 1 && out.first() == out.last() {
        out.pop();
    }
    out
}

fn bbox_of(points: &[Point]) -> Option<(Point, Point)> {
    let first = *points.first()?;
    let mut lo = first;
    let mut hi = first;
    for p in points {
        for d in 0..2 {
            lo[d] = lo[d].min(p[d]);
            hi[d] = hi[d].max(p[d]);
        }
    }
    Some((lo, hi))
}

/// Shoelace formula; positive for counter-clockwise points.
pub fn polygon_signed_area(points: &[Point]) -> f64 {
    let n = points.len();
    (0..n)
        .map(|i| cross(points[i], points[(i + 1) % n]))
        .sum::<f64>()
        * 0.5
}

/// First pair (i < j, least i, then least j) of non-adjacent edges that touch or cross, if
/// any.
///
/// Edges are put in the cells of a uniform bucket grid of about n cells over the polygon's
/// bounding box (each edge in every cell it passes through, column by column, with a margin of
/// one cell for round-off), and only edges sharing a cell are compared: two edges that meet
/// share the cell of that point. For drawn and traced outlines each cell holds a few edges and
/// the check is O(n) (a polygon of 10⁴ points took 95 s when every pair was compared); an
/// edge far longer than the rest lies in O(√n) cells.
fn polygon_self_intersection(points: &[Point]) -> Option<(usize, usize)> {
    let n = points.len();
    if n < 4 {
        return None;
    }
    let edge = |i: usize| (points[i], points[(i + 1) % n]);
    let (lo, hi) = bbox_of(points)?;
    let side = (n as f64).sqrt().ceil().clamp(1.0, 4096.0) as usize;
    let span = [
        (hi[0] - lo[0]).max(f64::MIN_POSITIVE),
        (hi[1] - lo[1]).max(f64::MIN_POSITIVE),
    ];
    let cell = |v: f64, d: usize| -> usize {
        let t = (v - lo[d]) / span[d] * side as f64;
        if t.is_finite() {
            (t.max(0.0) as usize).min(side - 1)
        } else {
            0
        }
    };
    // The cells of edge i: for each column its bounding box covers, the rows the segment
    // spans within that column, widened by one.
    let visit = |i: usize, f: &mut dyn FnMut(usize)| {
        let (a, b) = edge(i);
        let (cx0, cx1) = (cell(a[0].min(b[0]), 0), cell(a[0].max(b[0]), 0));
        let dx = b[0] - a[0];
        for cx in cx0..=cx1 {
            let (ylo, yhi) = if cx0 == cx1 || dx == 0.0 {
                (a[1].min(b[1]), a[1].max(b[1]))
            } else {
                let x_at = |c: usize| lo[0] + span[0] * c as f64 / side as f64;
                let xa = x_at(cx).max(a[0].min(b[0]));
                let xb = x_at(cx + 1).min(a[0].max(b[0]));
                let y_of = |x: f64| a[1] + (b[1] - a[1]) * ((x - a[0]) / dx).clamp(0.0, 1.0);
                let (ya, yb) = (y_of(xa), y_of(xb));
                (ya.min(yb), ya.max(yb))
            };
            let cy0 = cell(ylo, 1).saturating_sub(1);
            let cy1 = (cell(yhi, 1) + 1).min(side - 1);
            for cy in cy0..=cy1 {
                f(cy * side + cx);
            }
        }
    };
    // Edge lists per cell, built by counting first (no vector per cell).
    let mut start = vec![0usize; side * side + 1];
    for i in 0..n {
        visit(i, &mut |c| start[c + 1] += 1);
    }
    for c in 0..side * side {
        start[c + 1] += start[c];
    }
    let mut fill = start.clone();
    let mut members = vec![0u32; start[side * side]];
    for i in 0..n {
        visit(i, &mut |c| {
            members[fill[c]] = i as u32;
            fill[c] += 1;
        });
    }
    let mut best: Option<(usize, usize)> = None;
    for c in 0..side * side {
        let list = &members[start[c]..start[c + 1]];
        for (x, &i) in list.iter().enumerate() {
            for &j in &list[x + 1..] {
                let (i, j) = if i < j {
                    (i as usize, j as usize)
                } else {
                    (j as usize, i as usize)
                };
                if best.is_some_and(|b| (i, j) >= b) {
                    continue;
                }
                if edges_meet(points, i, j) {
                    best = Some((i, j));
                }
            }
        }
    }
    best
}

/// Do the non-adjacent edges i < j of the closed polygon `points` touch or cross? (Adjacent
/// edges, which share a point by construction, never count.)
fn edges_meet(points: &[Point], i: usize, j: usize) -> bool {
    let n = points.len();
    if j == i + 1 || (i == 0 && j == n - 1) {
        return false;
    }
    segments_meet(
        points[i],
        points[(i + 1) % n],
        points[j],
        points[(j + 1) % n],
    )
}

/// Do the closed segments ab and cd touch or cross? Orientation tests compared by sign (a
/// product of two orientations could underflow to zero or overflow).
pub(crate) fn segments_meet(a: Point, b: Point, c: Point, d: Point) -> bool {
    let orient = |p: Point, q: Point, r: Point| cross(sub(q, p), sub(r, p));
    let (d1, d2) = (orient(a, b, c), orient(a, b, d));
    let (d3, d4) = (orient(c, d, a), orient(c, d, b));
    let opposite = |u: f64, v: f64| (u > 0.0 && v < 0.0) || (u < 0.0 && v > 0.0);
    if opposite(d1, d2) && opposite(d3, d4) {
        return true;
    }
    let on = |p: Point, q: Point, r: Point, o: f64| {
        o == 0.0
            && r[0] >= p[0].min(q[0])
            && r[0] <= p[0].max(q[0])
            && r[1] >= p[1].min(q[1])
            && r[1] <= p[1].max(q[1])
    };
    on(a, b, c, d1) || on(a, b, d, d2) || on(c, d, a, d3) || on(c, d, b, d4)
}

/// One sample of a wall for the wall-shear quadrature: midpoint rule on a short piece of exact
/// boundary.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WallSample {
    /// Which wall: the index into [`Walls::names`].
    pub wall: usize,
    /// Arc length from the start of this wall's primitive boundary, metres.
    pub s: f64,
    /// The point on the wall.
    pub point: Point,
    /// Unit normal pointing out of the fluid (into the solid).
    pub normal: Point,
    /// Length of wall this sample stands for, metres.
    pub ds: f64,
    /// This sample's share of the enclosed fluid area by Green's theorem, ½∫p·n ds over its
    /// piece of wall (m²); summed over the walls of one passage it gives that passage's area.
    pub area: f64,
}

/// The wetted walls of a cross-section: every piece of boundary with fluid on one side.
#[derive(Debug, Clone, Default)]
pub struct Walls {
    /// Name of each wall, e.g. "region 1 (circle)" or "hole 2 (rect)".
    pub names: Vec<String>,
    /// Samples, ordered by wall then arc length.
    pub samples: Vec<WallSample>,
    /// Total wetted length (exact up to the location of wall junctions, found by bisection).
    pub perimeter: f64,
    /// Enclosed fluid area by Green's theorem over the walls, A = ½∮ p·n ds.
    pub area: f64,
}

/// What the grid needs to know of a cross-section, whether it comes from true curves
/// ([`Shape`]) or from a bitmap ([`mask::Mask`]).
pub trait Domain: Sync {
    /// Bounding box of the fluid, (low corner, high corner), metres.
    fn bbox(&self) -> (Point, Point);
    /// Is `p` in the fluid?
    fn contains(&self, p: Point) -> bool;
    /// Sorted parameters s at which `origin + s·dir` crosses a wall (where the fluid indicator
    /// changes). Only axis-aligned `dir` of unit length is asked for.
    fn wall_crossings(&self, origin: Point, dir: Point) -> Vec<f64>;
    /// [`Domain::wall_crossings`] with the wall each crossing belongs to and the angle at which
    /// the line meets it ([`Crossing`]); the parameters are the same numbers. By default every
    /// crossing is on wall 0 at right angles, which is exact for a pixel staircase (its walls
    /// run along the grid lines).
    fn wall_hits(&self, origin: Point, dir: Point) -> Vec<Crossing> {
        self.wall_crossings(origin, dir)
            .into_iter()
            .map(|s| Crossing {
                s,
                wall: 0,
                cos: 1.0,
            })
            .collect()
    }
    /// The wetted walls sampled at spacing at most `spacing`, with perimeter and fluid area.
    fn walls(&self, spacing: f64) -> Walls;
    /// The sharp corners of the walls ([`corners::Corner`]) when the geometry is exact; None
    /// when they are not known (a mask: its traced contour or staircase has no exact vertices).
    fn corners(&self) -> Option<Vec<corners::Corner>> {
        None
    }
    /// A lattice the grid must use, if the domain comes with one (a mask's pixel centres):
    /// (centre of the first node, pitch, nodes across, nodes down).
    fn lattice(&self) -> Option<Lattice> {
        None
    }
}

/// Which wall of a cross-section a crossing belongs to: the index of a shape's primitive
/// (regions first, then holes, in file order); 0 for every wall of a mask. Boundary conditions
/// are given per wall id (`problem::WallConditions`).
pub type WallId = u32;

/// Where a straight line crosses a wall: at parameter `s` along it, on wall `wall`, with
/// `cos` = |cos| of the angle between the line and the wall's normal there (1: at right
/// angles; a Robin or Neumann wall needs it to turn a normal derivative into one along the
/// line).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Crossing {
    pub s: f64,
    pub wall: WallId,
    pub cos: f64,
}

/// A fixed lattice of nodes: node (i, j) sits at `origin + (i·pitch, j·pitch)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lattice {
    pub origin: Point,
    pub pitch: f64,
    pub nx: usize,
    pub ny: usize,
}

/// A cross-section: the union of its regions minus the union of its holes.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Shape {
    pub name: Option<String>,
    pub regions: Vec<Primitive>,
    pub holes: Vec<Primitive>,
}

impl Shape {
    /// An unnamed cross-section of these regions minus these holes.
    pub fn new(regions: Vec<Primitive>, holes: Vec<Primitive>) -> Shape {
        Shape {
            name: None,
            regions,
            holes,
        }
    }

    /// Validates every primitive, naming the one at fault.
    pub fn validate(&self) -> Result<()> {
        if self.regions.is_empty() {
            return Err(Error::geometry("the cross-section has no region"));
        }
        for (list, label) in [(&self.regions, "region"), (&self.holes, "hole")] {
            for (k, p) in list.iter().enumerate() {
                p.validate().map_err(|e| match e {
                    Error::Geometry(m) => {
                        Error::geometry(format!("{label} {} ({}): {m}", k + 1, p.kind()))
                    }
                    other => other,
                })?;
            }
        }
        let scale = self.scale();
        for (list, label) in [(&self.regions, "region"), (&self.holes, "hole")] {
            for (k, p) in list.iter().enumerate() {
                let t = p.thickness();
                if t < MIN_RELATIVE_THICKNESS * scale {
                    return Err(Error::geometry(format!(
                        "{label} {} ({}) is {t:.3e} m thick, less than {MIN_RELATIVE_THICKNESS:e} \
                         of the cross-section ({scale:.3e} m across): no grid canalis can solve \
                         resolves it",
                        k + 1,
                        p.kind()
                    )));
                }
            }
        }
        Ok(())
    }

    /// Is `p` in the fluid?
    pub fn contains(&self, p: Point) -> bool {
        self.regions.iter().any(|r| r.contains(p)) && !self.holes.iter().any(|h| h.contains(p))
    }

    /// Bounding box of the regions.
    pub fn bbox(&self) -> (Point, Point) {
        let mut lo = [f64::INFINITY; 2];
        let mut hi = [f64::NEG_INFINITY; 2];
        for r in &self.regions {
            let (a, b) = r.bbox();
            for d in 0..2 {
                lo[d] = lo[d].min(a[d]);
                hi[d] = hi[d].max(b[d]);
            }
        }
        (lo, hi)
    }

    /// A length scale for tolerances: the bounding-box diagonal.
    pub fn scale(&self) -> f64 {
        let (lo, hi) = self.bbox();
        norm(sub(hi, lo))
    }

    /// Regions, then holes: the order of the wall ids ([`WallId`]).
    pub fn primitives(&self) -> impl Iterator<Item = &Primitive> {
        self.regions.iter().chain(self.holes.iter())
    }

    /// Parameters s, sorted, at which the line `origin + s·dir` passes through a wall of the
    /// composite cross-section, i.e. where the fluid indicator changes. The crossings of every
    /// primitive boundary are candidates; a candidate is a wall when the composite indicator
    /// differs just before and just after it (tested at the midpoints between successive
    /// candidates), which is exactly how a union minus holes is decided.
    pub fn wall_crossings(&self, origin: Point, dir: Point) -> Vec<f64> {
        self.wall_hits(origin, dir).iter().map(|c| c.s).collect()
    }

    /// [`Shape::wall_crossings`] with the wall each crossing belongs to (the index of its
    /// primitive in [`Shape::primitives`] order: regions, then holes) and the angle there.
    /// Where two primitives' boundaries cross the line at the same point (a junction), the
    /// first of them in that order names the wall.
    pub fn wall_hits(&self, origin: Point, dir: Point) -> Vec<Crossing> {
        let mut cand: Vec<Crossing> = Vec::new();
        let mut hits = Vec::new();
        for (wall, prim) in self.primitives().enumerate() {
            for seg in prim.segments() {
                hits.clear();
                seg.line_hits(origin, dir, &mut hits);
                cand.extend(hits.iter().map(|&(s, cos)| Crossing {
                    s,
                    wall: wall as u32,
                    cos,
                }));
            }
        }
        cand.retain(|c| c.s.is_finite());
        // Stable: equal parameters keep the primitives' order.
        cand.sort_by(|a, b| a.s.total_cmp(&b.s));
        let tol = 1e-12 * self.scale() / norm(dir);
        cand.dedup_by(|a, b| (a.s - b.s).abs() <= tol);
        let at = |s: f64| self.contains(add(origin, scale(dir, s)));
        let mut walls = Vec::with_capacity(cand.len());
        let mut state = false;
        for k in 0..cand.len() {
            let next = if k + 1 < cand.len() {
                at(0.5 * (cand[k].s + cand[k + 1].s))
            } else {
                false
            };
            if next != state {
                walls.push(cand[k]);
                state = next;
            }
        }
        walls
    }

    /// The wetted walls, sampled at spacing at most `spacing` (metres), with exact perimeter
    /// and area.
    ///
    /// Each primitive boundary is scanned: a boundary point is on a wall when the composite
    /// indicator differs on its two sides (tested at ±ε along the normal). Ends of wall pieces
    /// are located by bisection to round-off. Boundary pieces that coincide with those of an
    /// earlier primitive are counted once. Within a wall piece the samples are midpoints of equal
    /// parameter intervals, each carrying its exact arc length, so Σ ds is the exact wetted
    /// length and Σ τ·ds is the midpoint rule (second order).
    pub fn walls(&self, spacing: f64) -> Walls {
        let prims: Vec<&Primitive> = self.primitives().collect();
        let eps = 1e-9 * self.scale();
        // The inside and near-wall tests below run dozens of times per wall sample: through an
        // index they cost O(1) each for many holes or a polygon of many points (every
        // primitive and every edge scanned made 10⁴ points take 95 s). Same answers as the
        // plain tests, bit for bit.
        let index = ShapeIndex::new(self, 4.0 * eps);
        let mut walls = Walls::default();
        for (pi, prim) in prims.iter().enumerate() {
            let label = if pi < self.regions.len() {
                format!("region {} ({})", pi + 1, prim.kind())
            } else {
                format!("hole {} ({})", pi + 1 - self.regions.len(), prim.kind())
            };
            let wall_id = walls.names.len();
            let mut any = false;
            let mut s_offset = 0.0;
            for seg in prim.segments() {
                // State along the segment: 0 = not a wall, +1 = wall with the fluid on the
                // inner side of this primitive's boundary (normal points out of the primitive
                // into solid), -1 = wall with fluid on the outer side.
                let state = |t: f64| -> i8 {
                    let p = seg.point(t);
                    let d = seg.derivative(t);
                    let len = norm(d);
                    if len == 0.0 {
                        return 0;
                    }
                    let n_out = [d[1] / len, -d[0] / len]; // right of a CCW tangent = outward
                    if index.near_boundary_before(pi, p, 4.0 * eps) {
                        return 0;
                    }
                    let fin = index.contains(sub(p, scale(n_out, eps)));
                    let fout = index.contains(add(p, scale(n_out, eps)));
                    match (fin, fout) {
                        (true, false) => 1,
                        (false, true) => -1,
                        _ => 0,
                    }
                };
                let seg_len = seg.length_between(0.0, 1.0);
                let m = ((seg_len / spacing).ceil() as usize * 4).clamp(64, 1 << 22);
                // Find the pieces [t0, t1] of constant non-zero state.
                let mut pieces: Vec<(f64, f64, i8)> = Vec::new();
                let mut t_prev = 0.0;
                let mut st_prev = state(0.5 / m as f64);
                let mut piece_start = 0.0;
                for k in 1..m {
                    let t = (k as f64 + 0.5) / m as f64;
                    let st = state(t);
                    if st != st_prev {
                        // Bisection between the two samples for the switch point.
                        let (mut lo, mut hi) = (t_prev, t);
                        for _ in 0..60 {
                            let mid = 0.5 * (lo + hi);
                            if state(mid) == st_prev {
                                lo = mid;
                            } else {
                                hi = mid;
                            }
                        }
                        let t_switch = 0.5 * (lo + hi);
                        if st_prev != 0 {
                            pieces.push((piece_start, t_switch, st_prev));
                        }
                        piece_start = t_switch;
                        st_prev = st;
                    }
                    t_prev = t;
                }
                if st_prev != 0 {
                    pieces.push((piece_start, 1.0, st_prev));
                }
                // The first piece starts at t = 0 only if the state there matches: samples
                // start at t = 0.5/m, so the interval [0, 0.5/m) is taken with the first sample.
                for (t0, t1, st) in pieces {
                    let len = seg.length_between(t0, t1);
                    if len <= 0.0 {
                        continue;
                    }
                    any = true;
                    let k = ((len / spacing).ceil() as usize).max(2);
                    let dt = (t1 - t0) / k as f64;
                    for q in 0..k {
                        let ta = t0 + q as f64 * dt;
                        let tm = ta + 0.5 * dt;
                        let p = seg.point(tm);
                        let d = seg.derivative(tm);
                        let l = norm(d);
                        let sign = st as f64;
                        let normal = [sign * d[1] / l, -sign * d[0] / l];
                        let ds = seg.length_between(ta, ta + dt);
                        // Green's theorem area contribution with Gauss quadrature on the piece.
                        let mut area_part = 0.0;
                        for &(x, w) in &GAUSS8 {
                            let tt = tm + 0.5 * dt * x;
                            let pp = seg.point(tt);
                            let dd = seg.derivative(tt);
                            // p·n ds with n ds = sign·(dy, -dx) dt.
                            area_part += w * sign * (pp[0] * dd[1] - pp[1] * dd[0]);
                        }
                        walls.area += 0.25 * dt * area_part;
                        walls.perimeter += ds;
                        walls.samples.push(WallSample {
                            wall: wall_id,
                            s: s_offset + seg.length_between(0.0, tm),
                            point: p,
                            normal,
                            ds,
                            area: 0.25 * dt * area_part,
                        });
                    }
                }
                s_offset += seg_len;
            }
            if any {
                walls.names.push(label);
            }
        }
        walls
    }
}

/// Edges of a polygon by horizontal slabs: the inside test (even–odd, as
/// [`Primitive::contains`]) and the near-wall test (as [`Primitive::near_boundary`]) look only
/// at the edges of the slabs around the point, with the same per-edge arithmetic, so they give
/// the same answers as the plain tests.
struct Slabs<'a> {
    points: &'a [Point],
    y0: f64,
    per_y: f64,
    count: usize,
    start: Vec<usize>,
    /// Edge i joins points[i] and points[i − 1] (cyclically), as in the plain inside test.
    edges: Vec<u32>,
}

impl<'a> Slabs<'a> {
    fn new(points: &'a [Point]) -> Slabs<'a> {
        let n = points.len();
        let (lo, hi) = bbox_of(points).unwrap_or(([0.0; 2], [0.0; 2]));
        let count = (n / 4).clamp(1, 1 << 16);
        let per_y = count as f64 / (hi[1] - lo[1]).max(f64::MIN_POSITIVE);
        let mut slabs = Slabs {
            points,
            y0: lo[1],
            per_y,
            count,
            start: vec![0; count + 1],
            edges: Vec::new(),
        };
        let range = |s: &Slabs, i: usize| {
            let (a, b) = (points[i], points[(i + n - 1) % n]);
            (s.slab(a[1].min(b[1])), s.slab(a[1].max(b[1])))
        };
        for i in 0..n {
            let (s0, s1) = range(&slabs, i);
            for s in s0..=s1 {
                slabs.start[s + 1] += 1;
            }
        }
        for s in 0..count {
            slabs.start[s + 1] += slabs.start[s];
        }
        let mut fill = slabs.start.clone();
        slabs.edges = vec![0; slabs.start[count]];
        for i in 0..n {
            let (s0, s1) = range(&slabs, i);
            for f in &mut fill[s0..=s1] {
                slabs.edges[*f] = i as u32;
                *f += 1;
            }
        }
        slabs
    }

    fn slab(&self, y: f64) -> usize {
        let t = (y - self.y0) * self.per_y;
        if t.is_finite() {
            (t.max(0.0) as usize).min(self.count - 1)
        } else {
            0
        }
    }

    fn contains(&self, p: Point) -> bool {
        let n = self.points.len();
        let s = self.slab(p[1]);
        let mut inside = false;
        for &i in &self.edges[self.start[s]..self.start[s + 1]] {
            let i = i as usize;
            let (a, b) = (self.points[i], self.points[(i + n - 1) % n]);
            if (a[1] > p[1]) != (b[1] > p[1]) {
                let x = a[0] + (p[1] - a[1]) * (b[0] - a[0]) / (b[1] - a[1]);
                if p[0] < x {
                    inside = !inside;
                }
            }
        }
        inside
    }

    fn near_boundary(&self, p: Point, tol: f64) -> bool {
        let n = self.points.len();
        let (s0, s1) = (self.slab(p[1] - tol), self.slab(p[1] + tol));
        self.edges[self.start[s0]..self.start[s1 + 1]]
            .iter()
            .any(|&i| {
                let i = i as usize;
                // Edge i of the slabs is the plain test's edge i − 1 (points[i − 1], points[i]).
                let j = (i + n - 1) % n;
                segment_distance(p, self.points[j], self.points[i]) <= tol
            })
    }
}

/// The primitives of a shape in the cells of a uniform grid over their bounding boxes (each
/// box widened by a margin), with [`Slabs`] for polygons of many points: the inside and
/// near-wall tests of [`Shape::walls`] in O(1) per point for ordinary shapes, with the
/// answers of [`Shape::contains`] and [`Primitive::near_boundary`].
struct ShapeIndex<'a> {
    prims: Vec<&'a Primitive>,
    regions: usize,
    boxes: Vec<(Point, Point)>,
    slabs: Vec<Option<Slabs<'a>>>,
    lo: Point,
    per: [f64; 2],
    side: usize,
    start: Vec<usize>,
    members: Vec<u32>,
}

/// Polygons with more points than this get [`Slabs`].
const SLAB_POINTS: usize = 64;

impl<'a> ShapeIndex<'a> {
    /// `tol`: the largest near-wall tolerance that will be asked.
    fn new(shape: &'a Shape, tol: f64) -> ShapeIndex<'a> {
        let prims: Vec<&Primitive> = shape.primitives().collect();
        // Margins: the near-wall tolerance, and a hundredth of the box (a rounded rectangle's
        // box comes from points sampled on its arcs, which may fall short of the true extent).
        let boxes: Vec<(Point, Point)> = prims
            .iter()
            .map(|p| {
                let (lo, hi) = p.bbox();
                let m = 2.0 * tol + 0.01 * (hi[0] - lo[0]).max(hi[1] - lo[1]);
                ([lo[0] - m, lo[1] - m], [hi[0] + m, hi[1] + m])
            })
            .collect();
        let slabs = prims
            .iter()
            .map(|p| match p {
                Primitive::Polygon { points } if points.len() > SLAB_POINTS => {
                    Some(Slabs::new(points))
                }
                _ => None,
            })
            .collect();
        let mut lo = [f64::INFINITY; 2];
        let mut hi = [f64::NEG_INFINITY; 2];
        for (a, b) in &boxes {
            for d in 0..2 {
                lo[d] = lo[d].min(a[d]);
                hi[d] = hi[d].max(b[d]);
            }
        }
        let side = ((prims.len() as f64).sqrt().ceil() as usize).clamp(1, 1024);
        let per = [
            side as f64 / (hi[0] - lo[0]).max(f64::MIN_POSITIVE),
            side as f64 / (hi[1] - lo[1]).max(f64::MIN_POSITIVE),
        ];
        let mut index = ShapeIndex {
            regions: shape.regions.len(),
            prims,
            boxes,
            slabs,
            lo,
            per,
            side,
            start: vec![0; side * side + 1],
            members: Vec::new(),
        };
        let cells_of = |ix: &ShapeIndex, k: usize| {
            let (a, b) = ix.boxes[k];
            (
                ix.cell(a[0], 0),
                ix.cell(b[0], 0),
                ix.cell(a[1], 1),
                ix.cell(b[1], 1),
            )
        };
        for k in 0..index.prims.len() {
            let (x0, x1, y0, y1) = cells_of(&index, k);
            for cy in y0..=y1 {
                for cx in x0..=x1 {
                    index.start[cy * side + cx + 1] += 1;
                }
            }
        }
        for c in 0..side * side {
            index.start[c + 1] += index.start[c];
        }
        let mut fill = index.start.clone();
        index.members = vec![0; index.start[side * side]];
        for k in 0..index.prims.len() {
            let (x0, x1, y0, y1) = cells_of(&index, k);
            for cy in y0..=y1 {
                for cx in x0..=x1 {
                    let c = cy * side + cx;
                    index.members[fill[c]] = k as u32;
                    fill[c] += 1;
                }
            }
        }
        index
    }

    fn cell(&self, v: f64, d: usize) -> usize {
        let t = (v - self.lo[d]) * self.per[d];
        if t.is_finite() {
            (t.max(0.0) as usize).min(self.side - 1)
        } else {
            0
        }
    }

    /// The primitives whose widened box holds `p`, in primitive order.
    fn near(&self, p: Point) -> impl Iterator<Item = usize> + '_ {
        let c = self.cell(p[1], 1) * self.side + self.cell(p[0], 0);
        self.members[self.start[c]..self.start[c + 1]]
            .iter()
            .map(|&k| k as usize)
            .filter(move |&k| {
                let (a, b) = self.boxes[k];
                // Outside every box, or not a number: the plain tests would scan them all, and
                // a point off every box is in none.
                p[0] >= a[0] && p[0] <= b[0] && p[1] >= a[1] && p[1] <= b[1]
            })
    }

    fn prim_contains(&self, k: usize, p: Point) -> bool {
        match &self.slabs[k] {
            Some(s) => s.contains(p),
            None => self.prims[k].contains(p),
        }
    }

    /// [`Shape::contains`].
    fn contains(&self, p: Point) -> bool {
        let mut region = false;
        for k in self.near(p) {
            if self.prim_contains(k, p) {
                if k >= self.regions {
                    return false;
                }
                region = true;
            }
        }
        region
    }

    /// Is `p` within `tol` of the boundary of one of the first `count` primitives?
    fn near_boundary_before(&self, count: usize, p: Point, tol: f64) -> bool {
        self.near(p)
            .filter(|&k| k < count)
            .any(|k| match &self.slabs[k] {
                Some(s) => s.near_boundary(p, tol),
                None => self.prims[k].near_boundary(p, tol),
            })
    }
}

impl Domain for Shape {
    fn bbox(&self) -> (Point, Point) {
        Shape::bbox(self)
    }
    fn contains(&self, p: Point) -> bool {
        Shape::contains(self, p)
    }
    fn wall_crossings(&self, origin: Point, dir: Point) -> Vec<f64> {
        Shape::wall_crossings(self, origin, dir)
    }
    fn wall_hits(&self, origin: Point, dir: Point) -> Vec<Crossing> {
        Shape::wall_hits(self, origin, dir)
    }
    fn walls(&self, spacing: f64) -> Walls {
        Shape::walls(self, spacing)
    }
    fn corners(&self) -> Option<Vec<corners::Corner>> {
        Some(Shape::corners(self))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn circle(r: f64) -> Shape {
        Shape {
            name: None,
            regions: vec![Primitive::Circle {
                center: [0.1, -0.2],
                radius: r,
            }],
            holes: vec![],
        }
    }

    #[test]
    fn circle_walls_are_exact() {
        // Exact: P = 2πr, A = πr² (common practice, no source).
        let w = circle(0.5).walls(0.01);
        assert!((w.perimeter - PI).abs() < 1e-12, "{}", w.perimeter);
        assert!((w.area - PI * 0.25).abs() < 1e-12, "{}", w.area);
        assert_eq!(w.names.len(), 1);
    }

    #[test]
    fn ellipse_perimeter_matches_series() {
        // Ramanujan's second approximation, error ~1e-10 relative at b/a = 0.5 (from memory).
        let (a, b) = (2.0, 1.0);
        let s = Shape {
            name: None,
            regions: vec![Primitive::Ellipse {
                center: [0.0, 0.0],
                semi_axes: [a, b],
                angle: 0.3,
            }],
            holes: vec![],
        };
        let w = s.walls(0.01);
        let hh = ((a - b) / (a + b)).powi(2);
        let ram = PI * (a + b) * (1.0 + 3.0 * hh / (10.0 + (4.0 - 3.0 * hh).sqrt()));
        assert!(
            (w.perimeter - ram).abs() / ram < 1e-9,
            "{} vs {}",
            w.perimeter,
            ram
        );
        assert!((w.area - PI * a * b).abs() < 1e-10);
    }

    #[test]
    fn annulus_and_overlaps() {
        let s = Shape {
            name: None,
            regions: vec![Primitive::Circle {
                center: [0.0, 0.0],
                radius: 1.0,
            }],
            holes: vec![Primitive::Circle {
                center: [0.2, 0.0],
                radius: 0.5,
            }],
        };
        let w = s.walls(0.01);
        assert!((w.perimeter - 3.0 * PI).abs() < 1e-10);
        assert!((w.area - 0.75 * PI).abs() < 1e-10);
        // Two overlapping unit squares: union is 1.5 x 1, perimeter 5.
        let sq = |x: f64| Primitive::Polygon {
            points: vec![[x, 0.0], [x + 1.0, 0.0], [x + 1.0, 1.0], [x, 1.0]],
        };
        let s = Shape {
            name: None,
            regions: vec![sq(0.0), sq(0.5)],
            holes: vec![],
        };
        let w = s.walls(0.01);
        assert!((w.perimeter - 5.0).abs() < 1e-7, "{}", w.perimeter);
        assert!((w.area - 1.5).abs() < 1e-7, "{}", w.area);
        // Identical regions count once.
        let s = Shape {
            name: None,
            regions: vec![sq(0.0), sq(0.0)],
            holes: vec![],
        };
        assert!((s.walls(0.01).perimeter - 4.0).abs() < 1e-7);
    }

    #[test]
    fn rounded_rect_geometry() {
        // Rounded rectangle: P = 2(w + h) - 8r + 2πr, A = wh - (4 - π)r².
        let (w0, h0, r) = (3.0, 1.0, 0.25);
        let s = Shape {
            name: None,
            regions: vec![Primitive::Rect {
                center: [1.0, 2.0],
                size: [w0, h0],
                corner_radius: r,
                angle: 0.4,
            }],
            holes: vec![],
        };
        let w = s.walls(0.01);
        let p = 2.0 * (w0 + h0) - 8.0 * r + 2.0 * PI * r;
        let a = w0 * h0 - (4.0 - PI) * r * r;
        assert!((w.perimeter - p).abs() < 1e-9, "{} {}", w.perimeter, p);
        assert!((w.area - a).abs() < 1e-9, "{} {}", w.area, a);
        assert!(s.contains([1.0, 2.0]));
    }

    #[test]
    fn crossings_of_annulus() {
        let s = Shape {
            name: None,
            regions: vec![Primitive::Circle {
                center: [0.0, 0.0],
                radius: 1.0,
            }],
            holes: vec![Primitive::Circle {
                center: [0.0, 0.0],
                radius: 0.5,
            }],
        };
        let c = s.wall_crossings([-2.0, 0.0], [1.0, 0.0]);
        assert_eq!(c.len(), 4);
        assert!((c[0] - 1.0).abs() < 1e-12 && (c[1] - 1.5).abs() < 1e-12);
        assert!((c[2] - 2.5).abs() < 1e-12 && (c[3] - 3.0).abs() < 1e-12);
    }

    #[test]
    fn bad_polygons_are_refused() {
        let bow = Primitive::Polygon {
            points: vec![[0.0, 0.0], [1.0, 1.0], [1.0, 0.0], [0.0, 1.0]],
        };
        assert!(bow
            .validate()
            .unwrap_err()
            .to_string()
            .contains("crosses itself"));
        let line = Primitive::Polygon {
            points: vec![[0.0, 0.0], [1.0, 1.0], [2.0, 2.0]],
        };
        assert!(line
            .validate()
            .unwrap_err()
            .to_string()
            .contains("zero area"));
        let two = Primitive::Polygon {
            points: vec![[0.0, 0.0], [1.0, 1.0], [1.0, 1.0]],
        };
        assert!(two
            .validate()
            .unwrap_err()
            .to_string()
            .contains("three distinct"));
    }
}
