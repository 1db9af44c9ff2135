//! The sharp corners of a cross-section's wetted walls, from its exact geometry.
//!
//! Owns: where the walls of a [`Shape`] meet at an angle ([`Corner`]): every vertex of a
//! polygon or a sharp rectangle, and every point where the boundaries of two primitives meet
//! (a hole's edge on a region's edge, two regions overlapping), with the interior angle α of
//! the fluid there, the directions of its two walls, whether both are straight, each wall's
//! curvature, and the radius within which the fluid is exactly the corner's sector.
//!
//! # Why
//! Near a corner of interior angle α (measured in the fluid) with u = 0 on both walls, the
//! solution of −∇²u = f behaves like a·r^(π/α)·sin(πθ/α) plus smoother terms (Motz 1946; Fix,
//! Gulati & Wakoff 1973). For α > π (a re-entrant corner: a fin tip, the inner corner of an L)
//! the gradient, and so the wall shear, is unbounded like r^(π/α − 1); for α < π it vanishes.
//! The exponent is known from the geometry alone, so the corners are found here, before any
//! grid, and their α is exact (from the tangent directions of the walls that meet there).
//!
//! # How
//! Candidates are the end points of every boundary segment and the points where segments of
//! two different primitives meet (found on polygonal approximations of the segments and
//! refined by Newton's method on the exact curves). Around each candidate the tangent
//! directions of the segments through it cut the plane into sectors; each sector is tested by
//! the composite inside test at a point 10⁻⁶ of the cross-section from the candidate. A run of
//! fluid sectors bounded by solid ones is one corner, of the angle the run spans; a corner
//! within [`SMOOTH_TOLERANCE`] of π is a smooth wall (an arc's tangent end, collinear polygon
//! points) and left out.
//!
//! Invariant: knows nothing of grids or the flow equation.

use super::{add, cross, norm, scale, sub, Point, Segment, Shape, ShapeIndex};
use std::f64::consts::PI;

/// Angles within this of π (radians; 1°) are a smooth wall, not a corner: a polygon's collinear
/// points, the tangent junction of a rounded rectangle's side and arc. (A corner of 181° has an
/// unbounded wall shear in principle, like r^(−0.006): a factor 1.04 over three decades of r,
/// which no grid resolves.)
pub const SMOOTH_TOLERANCE: f64 = PI / 180.0;

/// A sharp corner of the wetted walls.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Corner {
    /// Where the walls meet, metres.
    pub position: Point,
    /// Interior angle α of the fluid, radians, in (0, 2π).
    pub angle: f64,
    /// Direction (radians, from +x counter-clockwise) of the first wall leaving the corner:
    /// the fluid is the sector from `start` counter-clockwise to `start + angle`.
    pub start: f64,
    /// Both walls are straight lines out to [`Corner::clear_radius`].
    pub straight: bool,
    /// Signed curvature of the first and of the second wall where it leaves the corner, 1/m:
    /// 0 for a straight wall, ±1/R for a circular arc of radius R (positive where the wall
    /// bends to the left of its direction away from the corner), `None` for any other curve
    /// (an ellipse).
    pub curvature: [Option<f64>; 2],
    /// Radius within which no other wall comes near: inside it the fluid is the corner's sector
    /// bounded by its own two walls (at an ellipse's wall at most a fifth of its radius of
    /// curvature, where the wall is near its tangent), metres.
    pub clear_radius: f64,
}

impl Corner {
    /// A re-entrant corner (α > π): the wall shear is unbounded there.
    pub fn is_reentrant(&self) -> bool {
        self.angle > PI
    }

    /// Both walls are straight lines or circular arcs near the corner
    /// ([`Corner::curvature`]): the corner's sector maps exactly onto a straight wedge
    /// (`crate::singular`).
    pub fn walls_are_circles(&self) -> bool {
        self.curvature.iter().all(Option::is_some)
    }

    /// The exponent λ = π/α of the leading singular function r^λ·sin(λθ).
    pub fn lambda(&self) -> f64 {
        PI / self.angle
    }

    /// Polar coordinates (r, θ) of `p` about the corner, θ measured from the first wall
    /// towards the second (in [0, α] inside the sector, up to round-off).
    pub fn polar(&self, p: Point) -> (f64, f64) {
        let d = sub(p, self.position);
        (norm(d), self.sector_angle(d[1].atan2(d[0]) - self.start))
    }

    /// An angle `t` from the first wall (any multiple of 2π off) as θ: in [0, α] inside the
    /// sector, up to round-off, and outside it in the solid.
    pub fn sector_angle(&self, t: f64) -> f64 {
        let mut t = t.rem_euclid(2.0 * PI);
        // Points just clockwise of the first wall (round-off) come back as θ ≈ 2π.
        if t > 0.5 * (self.angle + 2.0 * PI) {
            t -= 2.0 * PI;
        }
        // A point on a wall is in the sector whatever the round-off of atan2 and the
        // subtraction (−2π + ε came back as 2π − ε, and so outside it).
        let slack = 1e-9;
        if t < 0.0 && t > -slack {
            t = 0.0;
        } else if t > self.angle && t < self.angle + slack {
            t = self.angle;
        }
        t
    }
}

/// One boundary segment of a primitive, with the primitive's index.
struct Seg {
    prim: usize,
    seg: Segment,
    lo: Point,
    hi: Point,
    /// Polygonal approximation (parameters and points), for the intersection search.
    poly: Vec<(f64, Point)>,
}

fn polyline(seg: &Segment) -> Vec<(f64, Point)> {
    let n = match seg {
        Segment::Line { .. } => 1,
        Segment::Arc { sweep, .. } => ((sweep / (2.0 * PI) * 128.0).ceil() as usize).clamp(8, 128),
        Segment::Ellipse { .. } => 128,
    };
    (0..=n)
        .map(|k| {
            let t = k as f64 / n as f64;
            (t, seg.point(t))
        })
        .collect()
}

/// The segments in a uniform grid of buckets by bounding box (margin included).
struct Buckets {
    lo: Point,
    cell: f64,
    nx: usize,
    ny: usize,
    cells: Vec<Vec<u32>>,
}

impl Buckets {
    fn new(segs: &[Seg], lo: Point, hi: Point) -> Buckets {
        let n = segs.len().max(1);
        let w = (hi[0] - lo[0]).max(hi[1] - lo[1]).max(f64::MIN_POSITIVE);
        let side = ((n as f64).sqrt().ceil() as usize).clamp(1, 512);
        let cell = w / side as f64;
        let mut b = Buckets {
            lo,
            cell,
            nx: side + 1,
            ny: side + 1,
            cells: vec![Vec::new(); (side + 1) * (side + 1)],
        };
        for (k, s) in segs.iter().enumerate() {
            let (x0, y0) = b.cell_of(s.lo);
            let (x1, y1) = b.cell_of(s.hi);
            for cy in y0..=y1 {
                for cx in x0..=x1 {
                    b.cells[cy * b.nx + cx].push(k as u32);
                }
            }
        }
        b
    }

    fn cell_of(&self, p: Point) -> (usize, usize) {
        let f = |v: f64, o: f64, n: usize| {
            let t = ((v - o) / self.cell).floor();
            if t.is_finite() {
                (t.max(0.0) as usize).min(n - 1)
            } else {
                0
            }
        };
        (f(p[0], self.lo[0], self.nx), f(p[1], self.lo[1], self.ny))
    }
}

/// Distance from `p` to a segment (exact for lines and arcs; on 1024 points of an ellipse, less
/// the largest sagitta of its chords, so never more than the true distance).
fn distance_to(p: Point, s: &Segment) -> f64 {
    match *s {
        Segment::Line { a, b } => super::segment_distance(p, a, b),
        Segment::Arc {
            center,
            radius,
            start,
            sweep,
        } => {
            let d = sub(p, center);
            let phi = d[1].atan2(d[0]);
            let rel = (phi - start).rem_euclid(2.0 * PI);
            if rel <= sweep {
                (norm(d) - radius).abs()
            } else {
                norm(sub(p, s.point(0.0))).min(norm(sub(p, s.point(1.0))))
            }
        }
        Segment::Ellipse { semi_axes, .. } => {
            let n = 1024;
            let a = semi_axes[0].max(semi_axes[1]);
            let sag = a * (PI / n as f64).powi(2);
            let best = (0..n)
                .map(|k| norm(sub(p, s.point(k as f64 / n as f64))))
                .fold(f64::INFINITY, f64::min);
            (best - sag).max(0.0)
        }
    }
}

/// Points where segments `a` and `b` meet, as parameter pairs (t_a, t_b).
fn meetings(a: &Seg, b: &Seg, tol: f64) -> Vec<(f64, f64)> {
    let mut out: Vec<(f64, f64)> = Vec::new();
    for wa in a.poly.windows(2) {
        for wb in b.poly.windows(2) {
            let (p0, p1, q0, q1) = (wa[0].1, wa[1].1, wb[0].1, wb[1].1);
            // Boxes first (with the tolerance), then the exact test.
            if p0[0].min(p1[0]) > q0[0].max(q1[0]) + tol
                || q0[0].min(q1[0]) > p0[0].max(p1[0]) + tol
                || p0[1].min(p1[1]) > q0[1].max(q1[1]) + tol
                || q0[1].min(q1[1]) > p0[1].max(p1[1]) + tol
            {
                continue;
            }
            let e = sub(p1, p0);
            let f = sub(q1, q0);
            let den = cross(e, f);
            let (mut ta, mut tb) = if den.abs() > 1e-14 * norm(e) * norm(f) {
                let w = sub(q0, p0);
                (cross(w, f) / den, cross(w, e) / den)
            } else {
                continue;
            };
            let slack = 1e-6;
            if !(-slack..=1.0 + slack).contains(&ta) || !(-slack..=1.0 + slack).contains(&tb) {
                continue;
            }
            ta = wa[0].0 + ta.clamp(0.0, 1.0) * (wa[1].0 - wa[0].0);
            tb = wb[0].0 + tb.clamp(0.0, 1.0) * (wb[1].0 - wb[0].0);
            // Newton on P_a(t_a) − P_b(t_b) = 0.
            let mut ok = false;
            for _ in 0..30 {
                let r = sub(a.seg.point(ta), b.seg.point(tb));
                if norm(r) <= tol {
                    ok = true;
                    break;
                }
                let da = a.seg.derivative(ta);
                let db = b.seg.derivative(tb);
                let det = cross(da, [-db[0], -db[1]]);
                if det.abs() <= 1e-300 {
                    break;
                }
                // [da, −db]·[dt_a, dt_b] = −r.
                let dta = cross([-r[0], -r[1]], [-db[0], -db[1]]) / det;
                let dtb = cross(da, [-r[0], -r[1]]) / det;
                ta += dta;
                tb += dtb;
            }
            let inside = |t: f64| (-1e-9..=1.0 + 1e-9).contains(&t);
            if ok && inside(ta) && inside(tb) {
                let (ta, tb) = (ta.clamp(0.0, 1.0), tb.clamp(0.0, 1.0));
                if !out
                    .iter()
                    .any(|&(x, y)| (x - ta).abs() < 1e-9 && (y - tb).abs() < 1e-9)
                {
                    out.push((ta, tb));
                }
            }
        }
    }
    out
}

/// A candidate point with the segments through it (segment index, parameter).
struct Candidate {
    p: Point,
    on: Vec<(usize, f64)>,
}

/// The sharp corners of the wetted walls of `shape` (module notes), in a deterministic order
/// (by position, x then y).
pub fn corners(shape: &Shape) -> Vec<Corner> {
    let scale_len = shape.scale();
    if !(scale_len.is_finite() && scale_len > 0.0) {
        return Vec::new();
    }
    let tol = 1e-9 * scale_len;
    let mut segs: Vec<Seg> = Vec::new();
    for (k, prim) in shape.primitives().enumerate() {
        for seg in prim.segments() {
            let poly = polyline(&seg);
            let mut lo = [f64::INFINITY; 2];
            let mut hi = [f64::NEG_INFINITY; 2];
            for (_, q) in &poly {
                for d in 0..2 {
                    lo[d] = lo[d].min(q[d]);
                    hi[d] = hi[d].max(q[d]);
                }
            }
            // Arcs bulge beyond their chords by at most the sagitta: widen by it.
            let m = match seg {
                Segment::Line { .. } => tol,
                Segment::Arc { radius, .. } => radius * 0.01 + tol,
                Segment::Ellipse { semi_axes, .. } => semi_axes[0].max(semi_axes[1]) * 0.01 + tol,
            };
            segs.push(Seg {
                prim: k,
                seg,
                lo: [lo[0] - m, lo[1] - m],
                hi: [hi[0] + m, hi[1] + m],
                poly,
            });
        }
    }
    let (blo, bhi) = segs.iter().fold(
        ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]),
        |(lo, hi), s| {
            (
                [lo[0].min(s.lo[0]), lo[1].min(s.lo[1])],
                [hi[0].max(s.hi[0]), hi[1].max(s.hi[1])],
            )
        },
    );
    let buckets = Buckets::new(&segs, blo, bhi);

    // Candidates: end points, and meetings of segments of different primitives.
    let mut cand: Vec<Candidate> = Vec::new();
    for (i, s) in segs.iter().enumerate() {
        if !matches!(s.seg, Segment::Ellipse { .. }) {
            cand.push(Candidate {
                p: s.seg.point(0.0),
                on: vec![(i, 0.0)],
            });
            cand.push(Candidate {
                p: s.seg.point(1.0),
                on: vec![(i, 1.0)],
            });
        }
    }
    let mut seen = std::collections::HashSet::new();
    for cell in &buckets.cells {
        for (x, &i) in cell.iter().enumerate() {
            for &j in &cell[x + 1..] {
                let (i, j) = (i.min(j) as usize, i.max(j) as usize);
                let (a, b) = (&segs[i], &segs[j]);
                if a.prim == b.prim
                    || a.lo[0] > b.hi[0]
                    || b.lo[0] > a.hi[0]
                    || a.lo[1] > b.hi[1]
                    || b.lo[1] > a.hi[1]
                    || !seen.insert((i, j))
                {
                    continue;
                }
                for (ta, tb) in meetings(a, b, tol) {
                    cand.push(Candidate {
                        p: a.seg.point(ta),
                        on: vec![(i, ta), (j, tb)],
                    });
                }
            }
        }
    }
    // Merge candidates within the tolerance.
    cand.sort_by(|a, b| a.p[0].total_cmp(&b.p[0]).then(a.p[1].total_cmp(&b.p[1])));
    let mut merged: Vec<Candidate> = Vec::new();
    let mut used = vec![false; cand.len()];
    for i in 0..cand.len() {
        if used[i] {
            continue;
        }
        let mut c = Candidate {
            p: cand[i].p,
            on: cand[i].on.clone(),
        };
        for j in i + 1..cand.len() {
            if cand[j].p[0] - cand[i].p[0] > 4.0 * tol {
                break;
            }
            if !used[j] && norm(sub(cand[j].p, cand[i].p)) <= 4.0 * tol {
                used[j] = true;
                c.on.extend(cand[j].on.iter().copied());
            }
        }
        merged.push(c);
    }

    let index = ShapeIndex::new(shape, 4.0 * tol);
    let rho = 1e-6 * scale_len;
    let mut out = Vec::new();
    for c in &merged {
        // Tangent directions of the segments through the point.
        let mut dirs: Vec<(f64, Option<f64>)> = Vec::new(); // (angle, curvature)
        for &(k, t) in &c.on {
            let s = &segs[k].seg;
            let d = s.derivative(t);
            let fwd = d[1].atan2(d[0]);
            let back = (-d[1]).atan2(-d[0]);
            if t < 1.0 - 1e-12 {
                dirs.push((fwd, curvature(s, c.p, d)));
            }
            if t > 1e-12 {
                dirs.push((back, curvature(s, c.p, [-d[0], -d[1]])));
            }
        }
        if dirs.len() < 2 {
            continue;
        }
        for d in dirs.iter_mut() {
            d.0 = d.0.rem_euclid(2.0 * PI);
        }
        dirs.sort_by(|a, b| a.0.total_cmp(&b.0));
        dirs.dedup_by(|b, a| {
            if (b.0 - a.0).abs() <= 1e-12 {
                a.1 = same_curvature(a.1, b.1);
                true
            } else {
                false
            }
        });
        if dirs.len() > 1 && (dirs[0].0 + 2.0 * PI - dirs[dirs.len() - 1].0).abs() <= 1e-12 {
            let last = dirs.pop().expect("len > 1");
            dirs[0].1 = same_curvature(dirs[0].1, last.1);
        }
        let n = dirs.len();
        if n < 2 {
            continue;
        }
        // Sector k runs from dirs[k] to dirs[k + 1] (cyclically).
        let span = |k: usize| {
            let a = dirs[k].0;
            let b = dirs[(k + 1) % n].0;
            (b - a).rem_euclid(2.0 * PI)
        };
        let fluid: Vec<bool> = (0..n)
            .map(|k| {
                let mid = dirs[k].0 + 0.5 * span(k);
                index.contains(add(c.p, scale([mid.cos(), mid.sin()], rho)))
            })
            .collect();
        if fluid.iter().all(|&f| f) || fluid.iter().all(|&f| !f) {
            continue;
        }
        // Runs of fluid sectors, starting after a solid one.
        let first_solid = fluid.iter().position(|&f| !f).expect("one is solid");
        let mut k = 0;
        while k < n {
            let s = (first_solid + 1 + k) % n;
            if !fluid[s] {
                k += 1;
                continue;
            }
            let mut angle = 0.0;
            let mut m = 0;
            while k + m < n && fluid[(first_solid + 1 + k + m) % n] {
                angle += span((first_solid + 1 + k + m) % n);
                m += 1;
            }
            let end = (first_solid + 1 + k + m) % n;
            if (angle - PI).abs() > SMOOTH_TOLERANCE {
                out.push(Corner {
                    position: c.p,
                    angle,
                    start: dirs[s].0,
                    straight: dirs[s].1 == Some(0.0) && dirs[end].1 == Some(0.0),
                    curvature: [dirs[s].1, dirs[end].1],
                    clear_radius: clear_radius(c, &segs, &buckets, &index, tol),
                });
            }
            k += m;
        }
    }
    out.sort_by(|a, b| {
        a.position[0]
            .total_cmp(&b.position[0])
            .then(a.position[1].total_cmp(&b.position[1]))
            .then(a.start.total_cmp(&b.start))
    });
    out
}

/// The signed curvature of `seg` at its point `p`, leaving it in direction `d`
/// ([`Corner::curvature`]): 0 for a line, ±1/R for an arc (+ where its centre lies to the left
/// of `d`), `None` for an ellipse.
fn curvature(seg: &Segment, p: Point, d: Point) -> Option<f64> {
    match *seg {
        Segment::Line { .. } => Some(0.0),
        Segment::Arc { center, radius, .. } => {
            Some(cross(d, sub(center, p)) / (norm(d) * radius * radius))
        }
        Segment::Ellipse { .. } => None,
    }
}

/// Two walls leaving a point in one direction: their common curvature, if they agree.
fn same_curvature(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    match (a, b) {
        (Some(x), Some(y)) if (x - y).abs() <= 1e-9 * x.abs().max(y.abs()) => Some(x),
        _ => None,
    }
}

/// The clear radius of a corner on an ellipse's wall is at most this share of the wall's
/// smallest radius of curvature (canalis's choice: there the wall is within 2 % of the radius
/// off its tangent). Circular arcs set no such bound: the corner's sector between lines and arcs
/// maps exactly onto a straight wedge (`crate::singular`), which bounds the radius there itself.
const CURVED_SHARE: f64 = 0.2;

/// Distance from the candidate to the nearest wall on a segment that does not pass through
/// it: within it the walls through the point are the only ones. Pieces of boundary inside the
/// fluid (where two regions overlap) are no walls and do not count.
fn clear_radius(
    c: &Candidate,
    segs: &[Seg],
    buckets: &Buckets,
    index: &ShapeIndex,
    tol: f64,
) -> f64 {
    let through: Vec<usize> = c.on.iter().map(|&(k, _)| k).collect();
    // An ellipse through the point departs from its tangent by r²/(2ρ): the sector is a
    // fair picture of the fluid only within a fraction of the radius of curvature ρ.
    let mut best =
        c.on.iter()
            .map(|&(k, _)| match segs[k].seg {
                Segment::Line { .. } | Segment::Arc { .. } => f64::INFINITY,
                Segment::Ellipse { semi_axes, .. } => {
                    let (a, b) = (
                        semi_axes[0].max(semi_axes[1]),
                        semi_axes[0].min(semi_axes[1]),
                    );
                    CURVED_SHARE * b * b / a
                }
            })
            .fold(f64::INFINITY, f64::min);
    let (cx, cy) = buckets.cell_of(c.p);
    let mut ring = 0usize;
    let mut checked = std::collections::HashSet::new();
    loop {
        // Cells at Chebyshev distance `ring` from the point's cell.
        let x0 = cx.saturating_sub(ring);
        let x1 = (cx + ring).min(buckets.nx - 1);
        let y0 = cy.saturating_sub(ring);
        let y1 = (cy + ring).min(buckets.ny - 1);
        for y in y0..=y1 {
            for x in x0..=x1 {
                if x.abs_diff(cx) != ring && y.abs_diff(cy) != ring {
                    continue;
                }
                for &k in &buckets.cells[y * buckets.nx + x] {
                    let k = k as usize;
                    if through.contains(&k) || !checked.insert(k) {
                        continue;
                    }
                    let seg = &segs[k].seg;
                    let d = distance_to(c.p, seg);
                    if d < best {
                        best = best.min(wall_distance(c.p, seg, d, index, tol));
                    }
                }
            }
        }
        let covered = x0 == 0 && y0 == 0 && x1 == buckets.nx - 1 && y1 == buckets.ny - 1;
        if covered || (ring as f64) * buckets.cell > best {
            break;
        }
        ring += 1;
    }
    best
}

/// Distance from `p` to the wall points of `seg` (`d`: the distance to the whole segment), on
/// 256 points of it, less half their spacing (so never more than the true distance to a wall
/// point between them); infinite when no point of the segment is a wall (fluid or solid on
/// both sides).
fn wall_distance(p: Point, seg: &Segment, d: f64, index: &ShapeIndex, tol: f64) -> f64 {
    let n = 256;
    let step = seg.length_between(0.0, 1.0) / n as f64;
    let eps = 16.0 * tol;
    let mut best = f64::INFINITY;
    for k in 0..=n {
        let t = k as f64 / n as f64;
        let q = seg.point(t);
        let dq = seg.derivative(t);
        let len = norm(dq);
        if len == 0.0 {
            continue;
        }
        let nrm = [dq[1] / len, -dq[0] / len];
        let a = index.contains(add(q, scale(nrm, eps)));
        let b = index.contains(sub(q, scale(nrm, eps)));
        if a != b {
            best = best.min(norm(sub(q, p)));
        }
    }
    (best - 0.5 * step).max(d)
}

/// The interior angle of the fluid at a polygon vertex, for tests: the angle between the two
/// edges at `p`, measured on the side of `inside`.
#[cfg(test)]
fn vertex_angle(prev: Point, p: Point, next: Point) -> f64 {
    let a = sub(prev, p);
    let b = sub(next, p);
    cross(a, b).atan2(super::dot(a, b)).rem_euclid(2.0 * PI)
}

impl Shape {
    /// The sharp corners of the wetted walls ([`corners`]).
    pub fn corners(&self) -> Vec<Corner> {
        corners(self)
    }
}

#[cfg(test)]
mod tests {
    use super::super::{dot, Primitive};
    use super::*;

    fn poly(points: &[[f64; 2]]) -> Primitive {
        Primitive::Polygon {
            points: points.to_vec(),
        }
    }

    fn deg(a: f64) -> f64 {
        a * 180.0 / PI
    }

    #[test]
    fn l_shape_has_one_reentrant_corner_and_five_right_angles() {
        let l = Shape::new(
            vec![poly(&[
                [0.0, 0.0],
                [2.0, 0.0],
                [2.0, 1.0],
                [1.0, 1.0],
                [1.0, 2.0],
                [0.0, 2.0],
            ])],
            vec![],
        );
        let c = l.corners();
        assert_eq!(c.len(), 6, "{c:?}");
        let re: Vec<&Corner> = c.iter().filter(|c| c.is_reentrant()).collect();
        assert_eq!(re.len(), 1);
        assert!((deg(re[0].angle) - 270.0).abs() < 1e-9);
        assert_eq!(re[0].position, [1.0, 1.0]);
        assert!((re[0].lambda() - 2.0 / 3.0).abs() < 1e-12);
        assert!(re[0].straight);
        // The nearest wall not through (1, 1): the corners (2, 1) and (1, 2) at distance 1.
        assert!((re[0].clear_radius - 1.0).abs() < 1e-12);
        // The sector: θ = 0 along one wall, 3π/2 along the other, the solid quadrant outside.
        let (_, t) = re[0].polar([1.5, 0.5]);
        assert!((0.0..=re[0].angle).contains(&t), "{t}");
        let (_, t) = re[0].polar([1.5, 1.5]);
        assert!(t > re[0].angle || t < 0.0, "{t}");
        // Points on either wall are in the sector (θ = 0 or α exactly, never just outside).
        for p in [[1.0, 1.7], [1.3, 1.0], [1.0 + 1e-17, 1.9]] {
            let (_, t) = re[0].polar(p);
            assert!((0.0..=re[0].angle).contains(&t), "{p:?}: {t}");
        }
        for k in c.iter().filter(|c| !c.is_reentrant()) {
            assert!((deg(k.angle) - 90.0).abs() < 1e-9);
        }
        // The helper agrees on the vertex.
        assert!((deg(vertex_angle([2.0, 1.0], [1.0, 1.0], [1.0, 2.0])) - 90.0).abs() < 1e-9);
    }

    #[test]
    fn a_hole_meeting_a_region_edge_and_a_fin_tip() {
        // A rectangle 2 × 1 with a fin from the bottom wall: a rect hole from y = −0.1 to 0.5,
        // x from 0.95 to 1.05. Corners: the rectangle's four right angles, the fin's two roots
        // (90°, where the hole's edges meet the region's bottom edge) and two tips (270°).
        let s = Shape::new(
            vec![Primitive::rect([1.0, 0.5], [2.0, 1.0])],
            vec![Primitive::rect([1.0, 0.2], [0.1, 0.6])],
        );
        let c = s.corners();
        let re: Vec<&Corner> = c.iter().filter(|c| c.is_reentrant()).collect();
        assert_eq!(re.len(), 2, "{c:?}");
        for k in &re {
            assert!((deg(k.angle) - 270.0).abs() < 1e-9);
            assert!((k.position[1] - 0.5).abs() < 1e-12);
            assert!((k.clear_radius - 0.1).abs() < 1e-9, "{}", k.clear_radius);
        }
        let right: Vec<&Corner> = c
            .iter()
            .filter(|c| (deg(c.angle) - 90.0).abs() < 1e-9)
            .collect();
        assert_eq!(right.len(), 6, "{c:?}");
        assert!(right
            .iter()
            .any(|k| (k.position[0] - 0.95).abs() < 1e-12 && k.position[1].abs() < 1e-12));
    }

    #[test]
    fn smooth_shapes_have_no_corners_and_a_d_section_has_two() {
        let circle = Shape::new(
            vec![Primitive::Circle {
                center: [0.0, 0.0],
                radius: 1.0,
            }],
            vec![],
        );
        assert!(circle.corners().is_empty());
        let slot = Shape::new(
            vec![Primitive::Rect {
                center: [0.0, 0.0],
                size: [4.0, 1.0],
                corner_radius: 0.5,
                angle: 0.3,
            }],
            vec![],
        );
        assert!(slot.corners().is_empty(), "{:?}", slot.corners());
        // D-section: circle r = 5 cut by a flat at y = 3; the flat meets the arc at (±4, 3) at
        // the angle between the chord and the tangent: atan2 gives 180° − acos(3/5)·… ; the
        // fluid angle is π/2 − asin(3/5)... measured: the angle between the flat (towards the
        // centre line) and the arc's tangent (downwards) = π − acos(−3/5)... check numerically.
        let d = Shape::new(
            vec![Primitive::Circle {
                center: [0.0, 0.0],
                radius: 5.0,
            }],
            vec![Primitive::rect([0.0, 4.5], [12.0, 3.0])],
        );
        let c = d.corners();
        assert_eq!(c.len(), 2, "{c:?}");
        // At (4, 3): the flat goes towards −x, the arc's tangent downwards is (3, −4)/5 rotated:
        // tangent of the circle at (4, 3) is ±(−3, 4)/5; into the fluid (downwards) (3, −4)/5.
        // Angle from (−1, 0) to (3, −4)/5 measured through the fluid (below the flat):
        let want = {
            let a = [-1.0, 0.0];
            let b = [0.6, -0.8];
            (cross(a, b).atan2(dot(a, b))).abs()
        };
        for k in &c {
            assert!(!k.is_reentrant());
            assert!(
                (k.angle - want).abs() < 1e-9,
                "{} {}",
                deg(k.angle),
                deg(want)
            );
            assert!(!k.straight);
            // The flat is straight; the arc of radius 5 bends towards the fluid, to the left
            // or the right of its direction away from the corner by which wall is first.
            let mut kappa: Vec<f64> = k.curvature.iter().map(|c| c.unwrap()).collect();
            kappa.sort_by(|a, b| a.abs().total_cmp(&b.abs()));
            assert_eq!(kappa[0], 0.0);
            assert!((kappa[1].abs() - 0.2).abs() < 1e-12, "{kappa:?}");
            assert!(k.walls_are_circles());
        }
    }

    #[test]
    fn union_of_two_rects_gives_reentrant_corners_where_they_overlap() {
        // A T: a bar 3 × 1 on top of a stem 1 × 2 that reaches into it.
        let t = Shape::new(
            vec![
                Primitive::rect([1.5, 2.5], [3.0, 1.0]),
                Primitive::rect([1.5, 1.25], [1.0, 2.5]),
            ],
            vec![],
        );
        let c = t.corners();
        let re: Vec<&Corner> = c.iter().filter(|c| c.is_reentrant()).collect();
        assert_eq!(re.len(), 2, "{c:?}");
        for k in &re {
            assert!((deg(k.angle) - 270.0).abs() < 1e-9);
            assert!((k.position[1] - 2.0).abs() < 1e-12);
            // The stem's top edge (y = 2.5) lies in the fluid and is no wall: the nearest wall
            // is the other re-entrant corner's, 1 away.
            assert!((k.clear_radius - 1.0).abs() < 1e-2, "{}", k.clear_radius);
        }
        assert_eq!(c.len(), 8, "{c:?}");
    }
}
