//! Traced masks: the walls of a mask image as closed polylines at sub-pixel precision.
//!
//! Owns: marching squares on the grey levels of a [`Mask`], the light smoothing of the traced
//! contours (with a fit of their binary parts), and the [`Domain`] of the result ([`Traced`]: inside test
//! by the even–odd rule, grid-line crossings through a row/column bucket index, walls sampled by
//! arc length). Knows nothing of grids or the flow equation: the solver meets a traced mask
//! exactly as it meets a shape file, on a grid of any `--cells`.
//!
//! # Tracing (marching squares with linear interpolation)
//!
//! The samples are the pixel centres, with the value φ = f − level of [`Mask::phi`] (f the fluid
//! fraction of the pixel, 1 − luma/255 for dark fluid, the level the threshold as a fraction);
//! fluid where φ > 0, exactly the pixels [`Mask`] calls fluid. One ring of samples outside the
//! image mirrors the border pixels (φ → −|φ|), so outside is solid and a fluid border pixel is
//! walled at the image border. Each square cell of four samples with mixed signs holds one or
//! two pieces of wall; on each cell edge with a sign change the wall point is where the linear
//! interpolant of φ vanishes, x = x_a + (x_b − x_a)·φ_a/(φ_a − φ_b) (Lorensen & Cline 1987,
//! in its 2-D form; from memory). For an image that is the exact area coverage of a region
//! (anti-aliasing), f is the box-filtered indicator; across a straight wall it is a linear ramp
//! of width one pixel when the wall is near an axis, so the interpolated point is exact there,
//! and nearly so at other angles (measured below).
//!
//! Saddles (two fluid corners on one diagonal, two solid on the other) are resolved in one fixed
//! way: the fluid corners are never joined through the cell, the solid ones are. This is the
//! rule of [`Mask`]: fluid is 4-connected (two fluid pixels touching only at a corner are
//! separate, as no flow passes a pixel corner) and solid is therefore 8-connected. With it the
//! contours are the boundaries of the 4-connected fluid components, they never cross, and
//! every contour is closed. Pieces are oriented with the fluid on their left, so outer
//! boundaries run counter-clockwise and the boundaries of holes clockwise.
//!
//! # Smoothing, and binary images
//!
//! On a binary image every interpolated point falls on a pixel face midway between a fluid and a
//! solid centre: the contour is the "chamfered staircase" through the face midpoints, whose
//! length exceeds the true one by (cos φ + (√2 − 1)·sin φ) − 1 at a wall angle φ ≤ 45° (5.5 %
//! averaged over a circle). Those points carry no sub-pixel information. A vertex counts as
//! binary when the samples on both ends of its cell edge lie within 15 % of the contrast of the
//! image's typical fluid and solid levels (the medians of f over the fluid and over the solid
//! pixels); the others are grey-level (anti-aliased) data. Three steps follow:
//!
//! 1. Fitting, on contours with at least 90 % binary vertices: each binary vertex moves to the
//!    wall point that [`Mask`]'s digital-straight-segment estimator gives for its pixel face
//!    (mask.rs, steps 1–5: tangents of the maximal digital straight segments, corners rebuilt),
//!    the best sub-pixel information a binary boundary has.
//! 2. Smoothing of every contour: 40 passes of v ← v + λ·L(v), λ = ½, with the umbrella
//!    operator L(v)_i = ½(v_{i−1} + v_{i+1}) − v_i, a Gaussian filter of about 3 vertices;
//!    the move of each vertex across the wall is held within 0.5 pixel (binary) or 0.1 pixel
//!    (grey: a box-filtered straight edge puts the linear interpolant within about 0.05 pixel
//!    of the wall, the error being a ripple of one or two pixels' wavelength that the filter
//!    removes).
//! 3. Area restoration: the shrinking of plain Laplacian smoothing (of order σ²·κ) is undone by
//!    one uniform offset of the vertices along their normals, δ = (A_traced − A)/(length),
//!    repeated three times, so every contour keeps the area the marching squares traced (the
//!    volume-restoring step of Desbrun, Meyer, Schröder & Barr, SIGGRAPH 1999; from memory).
//!    Features of a few pixels keep their area but get rounder.
//!
//! Should two smoothed contours cross (possible only in features of about a pixel), both fall
//! back to their unsmoothed form; the traced ones never cross.
//!
//! Measured (tests/mask.rs; 200 pixels across, solved at 400 cells; relative errors of
//! perimeter, area and f·Re against the exact values):
//!
//! | mask | perimeter | area | f·Re |
//! |---|---|---|---|
//! | exact-coverage anti-aliased circle | +2.5e-5 | −5.2e-5 | −9.4e-5 |
//! | exact-coverage ellipse b/a = ½ (a = 100 px) | −1.0e-4 | −1.9e-6 | −3.6e-4 |
//! | binary circle | +2.3e-4 | +1.8e-5 | −3.7e-4 |
//! | binary circle, `--mask-mode pixels` (staircase) | +4.1e-4 | +3.4e-5 | +1.6e-3 |
//!
//! For the choice of filter: unsmoothed, the anti-aliased circle measured +2.6e-3 in perimeter
//! (f·Re −5.1e-3). Taubin's λ|μ filter (λ = 0.5, μ = −0.53; Taubin, SIGGRAPH 1995; from
//! memory), which does not shrink, left the binary circle at +2.0e-3…+6.6e-3 in perimeter
//! (f·Re −3.6e-3…−1.25e-2) for 40–400 pass pairs: its pass band keeps the long one-pixel steps
//! of a nearly axis-parallel wall, which the fit and the Gaussian filter remove. Tracing a
//! 4000 × 4000 image takes about 0.5 s on one core, 1000 × 1000 about 0.04 s.
//!
//! # The domain
//!
//! The even–odd rule over all contours decides inside, so islands in holes and holes in islands
//! work without bookkeeping. An edge index by pixel-sized rows and columns (each edge listed in
//! every row and column band its extent touches) answers the grid's axis-aligned line queries by
//! looking only at the edges of one band: O(edges in the band) per grid line instead of all
//! edges. Crossings use the half-open rule (an edge counts when exactly one end lies strictly on
//! the positive side of the line), which counts a line through a vertex once. [`Traced::walls`]
//! samples each contour at equal arc-length pieces no longer than the requested spacing: the
//! point at the middle of the piece, the normal of the piece's chord (its mean normal), the
//! piece's exact length and its exact Green's-theorem area ½∮(x dy − y dx), so Σ ds is the
//! length of the polylines and Σ area their enclosed area, as for [`super::Shape::walls`].

use super::mask::Mask;
use super::{segments_meet, Crossing, Domain, Point, WallSample, Walls};

/// Step of the Laplacian smoothing, v ← v + λ·L(v).
const LAMBDA: f64 = 0.5;
/// Smoothing passes (a Gaussian filter of σ ≈ √(λ·passes/2) ≈ 3 vertices).
const PASSES: usize = 40;
/// Farthest a smoothed binary vertex may move across the wall from its place, pixels.
const BINARY_SHIFT: f64 = 0.5;
/// Fewest vertices of a contour that is smoothed.
const MIN_SMOOTHED: usize = 12;
/// A contour with at least this fraction of binary vertices is a binary contour: its binary
/// vertices start from the digital-straight-segment estimate of [`Mask`].
const BINARY_CONTOUR: f64 = 0.9;
/// Farthest a smoothed grey-level (anti-aliased) vertex may move across the wall, pixels.
const GREY_SHIFT: f64 = 0.1;
/// A sample within this fraction of the image contrast of the typical fluid (solid) level is
/// "binary".
const BINARY_TOLERANCE: f64 = 0.15;

/// What the tracing did, for reports and tests.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct TraceStats {
    /// Closed contours traced.
    pub contours: usize,
    /// Vertices over all contours.
    pub vertices: usize,
    /// Vertices found binary (smoothed).
    pub binary_vertices: usize,
    /// Contours whose smoothing was undone because it made them cross.
    pub reverted: usize,
}

/// Row or column bands of the edge index: band b covers [lo + b·size, lo + (b+1)·size].
#[derive(Debug, Clone, Default)]
struct Bands {
    lo: f64,
    size: f64,
    /// Edges of band b: items[start[b]..start[b + 1]].
    start: Vec<u32>,
    items: Vec<u32>,
}

impl Bands {
    fn new(edges: &[[Point; 2]], axis: usize, lo: f64, hi: f64, size: f64) -> Bands {
        // At most 2²⁴ bands (a guard; traced masks have one per pixel row).
        let size = size.max((hi - lo) / (1u32 << 24) as f64);
        let nb = (((hi - lo) / size).floor() as usize + 1).clamp(1, 1 << 24);
        let band = |v: f64| (((v - lo) / size).floor().max(0.0) as usize).min(nb - 1);
        let range = |e: &[Point; 2]| {
            let (a, b) = (e[0][axis], e[1][axis]);
            (band(a.min(b)), band(a.max(b)))
        };
        let mut count = vec![0u32; nb + 1];
        for e in edges {
            let (b0, b1) = range(e);
            for c in &mut count[b0..=b1] {
                *c += 1;
            }
        }
        let mut start = vec![0u32; nb + 1];
        for b in 0..nb {
            start[b + 1] = start[b] + count[b];
        }
        let mut fill = start.clone();
        let mut items = vec![0u32; start[nb] as usize];
        for (k, e) in edges.iter().enumerate() {
            let (b0, b1) = range(e);
            for f in &mut fill[b0..=b1] {
                items[*f as usize] = k as u32;
                *f += 1;
            }
        }
        Bands {
            lo,
            size,
            start,
            items,
        }
    }

    /// The edges whose extent along the axis may contain v.
    fn at(&self, v: f64) -> &[u32] {
        let nb = self.start.len() - 1;
        let b = ((v - self.lo) / self.size).floor();
        if !(b >= 0.0 && b < nb as f64) {
            return &[];
        }
        let b = b as usize;
        &self.items[self.start[b] as usize..self.start[b + 1] as usize]
    }
}

/// A cross-section bounded by closed polylines (metres), fluid by the even–odd rule.
#[derive(Debug, Clone)]
pub struct Traced {
    /// Closed contours (the last vertex joins the first), fluid on the left, largest enclosed
    /// area first.
    contours: Vec<Vec<Point>>,
    /// Every edge of every contour.
    edges: Vec<[Point; 2]>,
    rows: Bands,
    cols: Bands,
    bbox: (Point, Point),
    stats: TraceStats,
}

impl Traced {
    /// Traces the walls of `mask` (module documentation).
    pub fn from_mask(mask: &Mask) -> Traced {
        let (mut contours, binary) = march(mask);
        let mut stats = TraceStats {
            contours: contours.len(),
            vertices: contours.iter().map(Vec::len).sum(),
            binary_vertices: binary.iter().flatten().filter(|&&b| b).count(),
            reverted: 0,
        };
        let traced = contours.clone();
        if stats.binary_vertices > 0 {
            place_binary_vertices(mask, &mut contours, &binary);
        }
        for ((c, w), t) in contours.iter_mut().zip(&binary).zip(&traced) {
            smooth(c, w, super::polygon_signed_area(t));
            if !c.iter().flatten().all(|v| v.is_finite()) {
                c.clone_from(t);
            }
        }
        // Undo the smoothing of contours that now cross (never seen on real masks; a guard).
        for _ in 0..4 {
            let bad = crossing_contours(&contours);
            if bad.is_empty() {
                break;
            }
            for k in bad {
                if contours[k] != traced[k] {
                    contours[k] = traced[k].clone();
                    stats.reverted += 1;
                }
            }
        }
        let p = mask.pixel();
        let metres: Vec<Vec<Point>> = contours
            .into_iter()
            .map(|c| c.into_iter().map(|v| [v[0] * p, v[1] * p]).collect())
            .collect();
        Traced::from_polylines(metres, p, stats)
    }

    /// A domain of closed polylines (metres, fluid on the left of each, no two crossing);
    /// `band` is the width of the index bands (about the edge length).
    pub fn from_polylines(contours: Vec<Vec<Point>>, band: f64, stats: TraceStats) -> Traced {
        let mut contours: Vec<Vec<Point>> = contours.into_iter().filter(|c| c.len() >= 3).collect();
        // Largest first; stable, so equal areas keep the tracing order.
        contours.sort_by(|a, b| {
            super::polygon_signed_area(b)
                .abs()
                .total_cmp(&super::polygon_signed_area(a).abs())
        });
        let mut lo = [f64::INFINITY; 2];
        let mut hi = [f64::NEG_INFINITY; 2];
        let mut edges = Vec::new();
        for c in &contours {
            for (i, &a) in c.iter().enumerate() {
                let b = c[(i + 1) % c.len()];
                edges.push([a, b]);
                for d in 0..2 {
                    lo[d] = lo[d].min(a[d]);
                    hi[d] = hi[d].max(a[d]);
                }
            }
        }
        if edges.is_empty() {
            lo = [0.0; 2];
            hi = [0.0; 2];
        }
        let size = if band.is_finite() && band > 0.0 {
            band
        } else {
            ((hi[0] - lo[0]).max(hi[1] - lo[1]) / 256.0).max(f64::MIN_POSITIVE)
        };
        let rows = Bands::new(&edges, 1, lo[1], hi[1], size);
        let cols = Bands::new(&edges, 0, lo[0], hi[0], size);
        Traced {
            contours,
            edges,
            rows,
            cols,
            bbox: (lo, hi),
            stats,
        }
    }

    /// The contours, metres, largest enclosed area first.
    pub fn contours(&self) -> &[Vec<Point>] {
        &self.contours
    }

    /// What the tracing did.
    pub fn stats(&self) -> TraceStats {
        self.stats
    }

    /// Crossings of `origin + s·dir` with the edges `candidates`, unsorted.
    fn hits(&self, candidates: impl Iterator<Item = usize>, origin: Point, dir: Point) -> Vec<f64> {
        self.hits_at(candidates, origin, dir, |s, _| s)
    }

    /// [`Traced::hits`] with the angle of each crossing ([`Crossing`]; every wall is wall 0).
    fn hits_with_angles(
        &self,
        candidates: impl Iterator<Item = usize>,
        origin: Point,
        dir: Point,
    ) -> Vec<Crossing> {
        let len = dir[0].hypot(dir[1]);
        self.hits_at(candidates, origin, dir, |s, [a, b]| {
            let e = [b[0] - a[0], b[1] - a[1]];
            let cos = ((dir[0] * e[1] - dir[1] * e[0]) / (len * e[0].hypot(e[1]))).abs();
            Crossing {
                s,
                wall: 0,
                cos: if cos.is_finite() { cos.min(1.0) } else { 1.0 },
            }
        })
    }

    /// Each crossing of `origin + s·dir` with the edges `candidates` as `make(s, edge)`.
    fn hits_at<T>(
        &self,
        candidates: impl Iterator<Item = usize>,
        origin: Point,
        dir: Point,
        make: impl Fn(f64, [Point; 2]) -> T,
    ) -> Vec<T> {
        let d2 = dir[0] * dir[0] + dir[1] * dir[1];
        let side = |p: Point| dir[0] * (p[1] - origin[1]) - dir[1] * (p[0] - origin[0]);
        let mut out = Vec::new();
        for k in candidates {
            let [a, b] = self.edges[k];
            let (da, db) = (side(a), side(b));
            if (da > 0.0) != (db > 0.0) {
                let t = da / (da - db);
                let x = [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])];
                let s = ((x[0] - origin[0]) * dir[0] + (x[1] - origin[1]) * dir[1]) / d2;
                out.push(make(s, [a, b]));
            }
        }
        out
    }
}

impl Domain for Traced {
    fn bbox(&self) -> (Point, Point) {
        self.bbox
    }

    /// Even–odd rule: the number of edges crossed by the ray to +x is odd.
    fn contains(&self, p: Point) -> bool {
        if !(p[0].is_finite() && p[1].is_finite()) {
            return false;
        }
        let band = self.rows.at(p[1]).iter().map(|&k| k as usize);
        self.hits(band, p, [1.0, 0.0])
            .iter()
            .filter(|&&s| s > 0.0)
            .count()
            % 2
            == 1
    }

    /// Every crossing of a polyline edge is a wall (the contours do not cross one another).
    fn wall_crossings(&self, origin: Point, dir: Point) -> Vec<f64> {
        self.wall_hits(origin, dir).iter().map(|c| c.s).collect()
    }

    fn wall_hits(&self, origin: Point, dir: Point) -> Vec<Crossing> {
        if !(origin.iter().chain(dir.iter()).all(|v| v.is_finite())) || dir == [0.0, 0.0] {
            return Vec::new();
        }
        let mut s = if dir[1] == 0.0 {
            let band = self.rows.at(origin[1]).iter().map(|&k| k as usize);
            self.hits_with_angles(band, origin, dir)
        } else if dir[0] == 0.0 {
            let band = self.cols.at(origin[0]).iter().map(|&k| k as usize);
            self.hits_with_angles(band, origin, dir)
        } else {
            self.hits_with_angles(0..self.edges.len(), origin, dir)
        };
        s.sort_by(|a, b| a.s.total_cmp(&b.s));
        s
    }

    /// Each contour ("contour 1", "contour 2", ... largest first) in equal arc-length pieces
    /// no longer than `spacing` (at least 8 per contour; one per edge when `spacing` is not a
    /// positive length).
    fn walls(&self, spacing: f64) -> Walls {
        let mut walls = Walls::default();
        for (ci, c) in self.contours.iter().enumerate() {
            let n = c.len();
            let vert = |i: usize| c[i % n];
            let mut cum = Vec::with_capacity(n + 1);
            cum.push(0.0);
            for i in 0..n {
                let (a, b) = (vert(i), vert(i + 1));
                cum.push(cum[i] + (b[0] - a[0]).hypot(b[1] - a[1]));
            }
            let total = cum[n];
            if total <= 0.0 {
                continue;
            }
            walls.names.push(format!("contour {}", ci + 1));
            let wall = walls.names.len() - 1;
            let pieces = if spacing.is_finite() && spacing > 0.0 {
                ((total / spacing).ceil() as usize).max(8)
            } else {
                n
            };
            // The point at arc length s, and the edge it lies on.
            let mut e = 0usize;
            let mut at = |s: f64| -> (Point, usize) {
                while e + 1 < n && cum[e + 1] <= s {
                    e += 1;
                }
                let (a, b) = (vert(e), vert(e + 1));
                let len = cum[e + 1] - cum[e];
                let t = if len > 0.0 {
                    ((s - cum[e]) / len).clamp(0.0, 1.0)
                } else {
                    0.0
                };
                ([a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])], e)
            };
            let cross = |a: Point, b: Point| a[0] * b[1] - a[1] * b[0];
            let step = total / pieces as f64;
            let (mut pa, mut ea) = at(0.0);
            for q in 0..pieces {
                let sb = if q + 1 == pieces {
                    total
                } else {
                    (q + 1) as f64 * step
                };
                let sa = q as f64 * step;
                let (pm, em) = at(0.5 * (sa + sb));
                let (pb, eb) = at(sb);
                // ½∮(x dy − y dx) over the piece: its straight bits pa → vertices → pb.
                let mut area2 = 0.0;
                let mut prev = pa;
                for k in ea + 1..=eb {
                    let v = vert(k);
                    area2 += cross(prev, v);
                    prev = v;
                }
                area2 += cross(prev, pb);
                let mut t = [pb[0] - pa[0], pb[1] - pa[1]];
                let mut len = t[0].hypot(t[1]);
                if len <= 0.0 {
                    let (a, b) = (vert(em), vert(em + 1));
                    t = [b[0] - a[0], b[1] - a[1]];
                    len = t[0].hypot(t[1]).max(f64::MIN_POSITIVE);
                }
                let normal = [t[1] / len, -t[0] / len];
                walls.samples.push(WallSample {
                    wall,
                    s: 0.5 * (sa + sb),
                    point: pm,
                    normal,
                    ds: sb - sa,
                    area: 0.5 * area2,
                });
                walls.perimeter += sb - sa;
                walls.area += 0.5 * area2;
                pa = pb;
                ea = eb;
            }
        }
        walls
    }
}

/// Marching squares over the padded sample lattice (module documentation). Returns the closed
/// contours in pixel units (x right, y up, pixel (col, row) covering [col, col+1] ×
/// [H−1−row, H−row]) and, per vertex, whether it is binary.
fn march(mask: &Mask) -> (Vec<Vec<Point>>, Vec<Vec<bool>>) {
    let (w, h) = (mask.width(), mask.height());
    let phi = mask.phi();
    let level = mask.level();
    let nx = w + 2;
    // Sample (i, j) of the padded lattice, j up; pixel (i−1, j−1) in y-up pixel coordinates.
    let sample = |i: usize, j: usize| -> f64 {
        let (ci, cj) = (i.clamp(1, w) - 1, j.clamp(1, h) - 1);
        let v = phi[(h - 1 - cj) * w + ci] as f64;
        if (1..=w).contains(&i) && (1..=h).contains(&j) {
            v
        } else {
            -v.abs()
        }
    };
    // Edge ids: 2·(j·nx + i) for the edge from sample (i, j) to (i+1, j), + 1 for the edge to
    // (i, j+1).
    let hid = |i: usize, j: usize| 2 * (j * nx + i) as u64;
    let vid = |i: usize, j: usize| 2 * (j * nx + i) as u64 + 1;
    let mut links: Vec<(u64, u64)> = Vec::new();
    for cj in 0..h + 1 {
        for ci in 0..w + 1 {
            let v = [
                sample(ci, cj),
                sample(ci + 1, cj),
                sample(ci + 1, cj + 1),
                sample(ci, cj + 1),
            ];
            let f = v.map(|x| x > 0.0);
            if f.iter().all(|&x| x == f[0]) {
                continue;
            }
            // Cell edges counter-clockwise: bottom, right, top, left; edge k runs from corner k
            // to corner k + 1.
            let ids = [hid(ci, cj), vid(ci + 1, cj), hid(ci, cj + 1), vid(ci, cj)];
            for k in 0..4 {
                if !f[k] || f[(k + 1) % 4] {
                    continue;
                }
                // The walk leaves the fluid at edge k; the wall piece runs from there to the
                // edge where the walk last entered the fluid (going backwards round the cell),
                // with the fluid corners between on its left; so each fluid corner of a saddle
                // is cut off on its own (the saddle rule).
                for back in 1..4 {
                    let m = (k + 4 - back) % 4;
                    if !f[m] && f[(m + 1) % 4] {
                        links.push((ids[k], ids[m]));
                        break;
                    }
                }
            }
        }
    }
    // Typical fluid and solid levels: medians of f over the fluid and the solid pixels.
    let (fluid_level, solid_level) = typical_levels(phi, level);
    let contrast = (fluid_level - solid_level).max(1e-6);
    let tol = BINARY_TOLERANCE * contrast;
    let vertex = |id: u64| -> (Point, bool) {
        let node = (id / 2) as usize;
        let (i, j) = (node % nx, node / nx);
        let (i2, j2) = if id.is_multiple_of(2) {
            (i + 1, j)
        } else {
            (i, j + 1)
        };
        let (va, vb) = (sample(i, j), sample(i2, j2));
        let t = va / (va - vb);
        let (x0, y0) = (i as f64 - 0.5, j as f64 - 0.5);
        let p = [x0 + t * (i2 - i) as f64, y0 + t * (j2 - j) as f64];
        let (hi, lo) = (va.max(vb) + level, va.min(vb) + level);
        let binary = hi >= fluid_level - tol && lo <= solid_level + tol;
        (p, binary)
    };
    // Follow the links into closed chains (each wall point has exactly one link out and one
    // in), in the order of the edge ids, so the result does not depend on hashing.
    links.sort_unstable();
    let mut used = vec![false; links.len()];
    let mut contours = Vec::new();
    let mut flags = Vec::new();
    for start in 0..links.len() {
        if used[start] {
            continue;
        }
        let mut pts = Vec::new();
        let mut bin = Vec::new();
        let mut k = start;
        loop {
            used[k] = true;
            let (p, b) = vertex(links[k].0);
            if pts.last() != Some(&p) {
                pts.push(p);
                bin.push(b);
            }
            let to = links[k].1;
            match links.binary_search_by(|l| l.0.cmp(&to)) {
                Ok(next) if !used[next] => k = next,
                _ => break,
            }
        }
        while pts.len() > 1 && pts.first() == pts.last() {
            pts.pop();
            bin.pop();
        }
        if pts.len() >= 3 {
            contours.push(pts);
            flags.push(bin);
        }
    }
    (contours, flags)
}

/// Moves every binary vertex (on a pixel face, between a fluid and a solid centre) to the
/// sub-pixel wall estimate of [`Mask`] for that face (digital straight segments; mask.rs).
fn place_binary_vertices(mask: &Mask, contours: &mut [Vec<Point>], binary: &[Vec<bool>]) {
    let est: std::collections::HashMap<[i64; 2], Point> =
        mask.face_wall_points().into_iter().collect();
    for (c, b) in contours.iter_mut().zip(binary) {
        let count = b.iter().filter(|&&x| x).count();
        if c.len() < MIN_SMOOTHED || (count as f64) < BINARY_CONTOUR * b.len() as f64 {
            continue;
        }
        for (v, &is_binary) in c.iter_mut().zip(b) {
            if !is_binary {
                continue;
            }
            // A vertex on the face x = i (y in [j−1, j]) or y = j: twice its face midpoint.
            let key = if (v[0] - v[0].round()).abs() < (v[1] - v[1].round()).abs() {
                [2 * v[0].round() as i64, (2.0 * v[1]).round() as i64]
            } else {
                [(2.0 * v[0]).round() as i64, 2 * v[1].round() as i64]
            };
            if let Some(&p) = est.get(&key) {
                *v = p;
            }
        }
    }
}

/// Medians of f = φ + level over the fluid pixels and over the solid pixels (1 and 0 when a
/// kind is missing), by a histogram of 1024 bins on [0, 1].
fn typical_levels(phi: &[f32], level: f64) -> (f64, f64) {
    const BINS: usize = 1024;
    let mut hist = [vec![0usize; BINS], vec![0usize; BINS]];
    for &v in phi {
        let f = (v as f64 + level).clamp(0.0, 1.0);
        let b = ((f * BINS as f64) as usize).min(BINS - 1);
        hist[usize::from(v > 0.0)][b] += 1;
    }
    let median = |h: &[usize], empty: f64| {
        let n: usize = h.iter().sum();
        if n == 0 {
            return empty;
        }
        let mut acc = 0;
        for (b, &c) in h.iter().enumerate() {
            acc += c;
            if 2 * acc >= n {
                return (b as f64 + 0.5) / BINS as f64;
            }
        }
        empty
    };
    (median(&hist[1], 1.0), median(&hist[0], 0.0))
}

/// Laplacian smoothing of a closed polyline with area restoration (module documentation,
/// steps 2 and 3); `target` is the signed area to keep.
fn smooth(c: &mut [Point], binary: &[bool], target: f64) {
    let n = c.len();
    // A contour of a few vertices is a feature of a pixel or two: nothing to smooth.
    if n < MIN_SMOOTHED {
        return;
    }
    let orig = c.to_vec();
    let mut next = c.to_vec();
    for _ in 0..PASSES {
        for i in 0..n {
            let max_shift = if binary[i] { BINARY_SHIFT } else { GREY_SHIFT };
            let (a, b) = (c[(i + n - 1) % n], c[(i + 1) % n]);
            let mut p = [
                c[i][0] + LAMBDA * (0.5 * (a[0] + b[0]) - c[i][0]),
                c[i][1] + LAMBDA * (0.5 * (a[1] + b[1]) - c[i][1]),
            ];
            // Only the move across the wall is limited: sliding along it changes nothing of
            // the shape.
            let t = [b[0] - a[0], b[1] - a[1]];
            let tl = t[0].hypot(t[1]);
            if tl > 0.0 {
                let nrm = [t[1] / tl, -t[0] / tl];
                let d = [p[0] - orig[i][0], p[1] - orig[i][1]];
                let dn = d[0] * nrm[0] + d[1] * nrm[1];
                if dn.abs() > max_shift {
                    let cut = dn - max_shift.copysign(dn);
                    p = [p[0] - cut * nrm[0], p[1] - cut * nrm[1]];
                }
            }
            next[i] = p;
        }
        c.copy_from_slice(&next);
    }
    // Restore the traced area by a uniform offset of the vertices along their normals,
    // δ = (A_traced − A_smoothed) / (length they stand for).
    for _ in 0..3 {
        let area = super::polygon_signed_area(c);
        let mut normals = vec![[0.0; 2]; n];
        let mut length = 0.0;
        for i in 0..n {
            let (a, b) = (c[(i + n - 1) % n], c[(i + 1) % n]);
            let d = [b[0] - a[0], b[1] - a[1]];
            let l = d[0].hypot(d[1]);
            if l > 0.0 {
                // Out of the fluid: right of the direction of travel.
                normals[i] = [d[1] / l, -d[0] / l];
                length += 0.5 * l;
            }
        }
        if length <= 0.0 {
            break;
        }
        let delta = ((target - area) / length).clamp(-BINARY_SHIFT, BINARY_SHIFT);
        for (v, nrm) in c.iter_mut().zip(&normals) {
            *v = [v[0] + delta * nrm[0], v[1] + delta * nrm[1]];
        }
    }
}

/// Indices of contours with an edge that touches or crosses a non-adjacent edge (of the same
/// or another contour), found through a one-pixel bucket grid.
fn crossing_contours(contours: &[Vec<Point>]) -> Vec<usize> {
    let mut cells: Vec<(i64, i64, u32, u32)> = Vec::new();
    for (ci, c) in contours.iter().enumerate() {
        let n = c.len();
        for i in 0..n {
            let (a, b) = (c[i], c[(i + 1) % n]);
            let (x0, x1) = (a[0].min(b[0]).floor() as i64, a[0].max(b[0]).floor() as i64);
            let (y0, y1) = (a[1].min(b[1]).floor() as i64, a[1].max(b[1]).floor() as i64);
            for x in x0..=x1 {
                for y in y0..=y1 {
                    cells.push((x, y, ci as u32, i as u32));
                }
            }
        }
    }
    cells.sort_unstable();
    let mut bad = Vec::new();
    let seg = |c: u32, i: u32| {
        let c = &contours[c as usize];
        (c[i as usize], c[(i as usize + 1) % c.len()])
    };
    let mut g = 0;
    while g < cells.len() {
        let mut e = g;
        while e < cells.len() && (cells[e].0, cells[e].1) == (cells[g].0, cells[g].1) {
            e += 1;
        }
        for p in g..e {
            for q in p + 1..e {
                let (c1, i1) = (cells[p].2, cells[p].3);
                let (c2, i2) = (cells[q].2, cells[q].3);
                if c1 == c2 {
                    let n = contours[c1 as usize].len() as u32;
                    if i1 == i2 || (i1 + 1) % n == i2 || (i2 + 1) % n == i1 {
                        continue;
                    }
                }
                let (a, b) = seg(c1, i1);
                let (c, d) = seg(c2, i2);
                if segments_meet(a, b, c, d) {
                    bad.push(c1 as usize);
                    bad.push(c2 as usize);
                }
            }
        }
        g = e;
    }
    bad.sort_unstable();
    bad.dedup();
    bad
}

#[cfg(test)]
mod tests {
    use super::*;

    fn traced(pattern: &[&str]) -> Traced {
        let (w, h) = (pattern[0].len(), pattern.len());
        let (m, _) =
            Mask::from_fn(w, h, 1.0, |c, r| pattern[r].as_bytes()[c] == b'X').expect("mask");
        Traced::from_mask(&m)
    }

    #[test]
    fn a_block_traces_to_one_contour_with_its_pixel_area() {
        // A 3 × 2 block: the chamfered staircase through the face midpoints cuts ⅛ pixel² off
        // each of the 4 corners (exact geometry, common practice, no source), so 5.5 pixels²;
        // a contour this small is left as traced.
        let t = traced(&[".....", ".XXX.", ".XXX.", "....."]);
        assert_eq!(t.contours().len(), 1);
        let w = t.walls(0.1);
        assert!((w.area - 5.5).abs() < 1e-4, "{}", w.area);
        assert!(w.area > 0.0 && w.perimeter > 8.0 && w.perimeter < 10.0);
        assert!(t.contains([2.5, 1.5]) && !t.contains([0.2, 0.2]) && !t.contains([9.0, 1.5]));
        let c = t.wall_crossings([-1.0, 1.5], [1.0, 0.0]);
        assert_eq!(c.len(), 2, "{c:?}");
        assert!(
            c[0] > 1.5 && c[0] < 2.5 && c[1] > 4.5 && c[1] < 5.5,
            "{c:?}"
        );
    }

    #[test]
    fn saddles_keep_diagonal_fluid_apart_and_holes_work() {
        // Two fluid pixels touching at a corner: two contours (fluid is 4-connected, as in
        // mask.rs).
        let t = traced(&["....", ".X..", "..X.", "...."]);
        assert_eq!(t.contours().len(), 2);
        // A ring: an outer contour (counter-clockwise, positive area) and a hole (clockwise).
        let t = traced(&[
            ".......", ".XXXXX.", ".X...X.", ".X...X.", ".X...X.", ".XXXXX.", ".......",
        ]);
        assert_eq!(t.contours().len(), 2);
        let a: Vec<f64> = t
            .contours()
            .iter()
            .map(|c| super::super::polygon_signed_area(c))
            .collect();
        assert!(a[0] > 0.0 && a[1] < 0.0, "{a:?}");
        assert!(!t.contains([3.5, 3.5]) && t.contains([1.5, 3.5]));
        // Crossings along the middle row: enter, leave, enter the far side, leave.
        assert_eq!(t.wall_crossings([-1.0, 3.5], [1.0, 0.0]).len(), 4);
        assert_eq!(t.wall_crossings([3.5, -1.0], [0.0, 1.0]).len(), 4);
        // A general direction gives the same count as the bands.
        assert_eq!(t.wall_crossings([-1.0, 3.5], [1.0, 1e-9]).len(), 4);
    }

    #[test]
    fn crossings_agree_with_the_inside_test() {
        // A grey-level blob: every node between two crossings is inside, every other outside.
        let (m, _) = Mask::from_fraction(40, 30, 0.5, 0.5, |c, r| {
            let (x, y) = (c as f64 - 17.3, r as f64 - 13.9);
            (1.0 - (x * x / 120.0 + y * y / 40.0)).clamp(0.0, 1.0)
        })
        .expect("mask");
        let t = Traced::from_mask(&m);
        for j in 0..60 {
            let y = 0.123 + j as f64 * 0.25;
            let c = t.wall_crossings([-1.0, y], [1.0, 0.0]);
            assert_eq!(c.len() % 2, 0);
            for i in 0..90 {
                let s = 0.5 + i as f64 * 0.2317;
                let inside = c.partition_point(|&v| v < s) % 2 == 1;
                assert_eq!(inside, t.contains([s - 1.0, y]), "({s}, {y})");
            }
        }
        assert!(t.wall_crossings([f64::NAN, 0.0], [1.0, 0.0]).is_empty());
        assert!(t.wall_crossings([0.0, 1e6], [1.0, 0.0]).is_empty());
    }

    #[test]
    fn noise_and_checkerboards_trace_without_trouble() {
        // Random pixels (fixed-seed linear congruential generator) and a checkerboard: every
        // contour closed, walls finite, crossings of every grid line even in number.
        let mut state = 12345u64;
        let mut bits = Vec::new();
        for _ in 0..60 * 40 {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            bits.push((state >> 33).is_multiple_of(3));
        }
        let masks = [
            Mask::from_fn(60, 40, 1e-3, |c, r| bits[r * 60 + c])
                .unwrap()
                .0,
            Mask::from_fn(9, 7, 1e-3, |c, r| (c + r) % 2 == 0)
                .unwrap()
                .0,
        ];
        for m in &masks {
            let t = Traced::from_mask(m);
            let w = t.walls(2e-4);
            assert!(
                w.perimeter.is_finite() && w.area > 0.0,
                "{} {}",
                w.perimeter,
                w.area
            );
            for j in 0..200 {
                let y = j as f64 * 2.1e-4 + 1e-7;
                assert_eq!(t.wall_crossings([-1.0, y], [1.0, 0.0]).len() % 2, 0);
                assert_eq!(t.wall_crossings([y, -1.0], [0.0, 1.0]).len() % 2, 0);
            }
        }
    }

    #[test]
    fn walls_sum_to_the_polygon() {
        let sq = vec![[0.0, 0.0], [2.0, 0.0], [2.0, 1.0], [0.0, 1.0]];
        let hole = vec![[0.5, 0.25], [0.5, 0.75], [1.0, 0.75], [1.0, 0.25]];
        let t = Traced::from_polylines(vec![sq, hole], 0.1, TraceStats::default());
        // Exact: A = 2 − 0.25, P = 6 + 2 (common practice, no source).
        for spacing in [0.013, 0.5, f64::NAN] {
            let w = t.walls(spacing);
            assert!((w.area - 1.75).abs() < 1e-12, "{}", w.area);
            assert!((w.perimeter - 8.0).abs() < 1e-12, "{}", w.perimeter);
            assert_eq!(w.names.len(), 2);
            for s in &w.samples {
                assert!((s.normal[0].hypot(s.normal[1]) - 1.0).abs() < 1e-12);
            }
        }
        // Normals out of the fluid: down at the bottom edge, towards the hole's centre inside it.
        let w = t.walls(0.1);
        let bottom = w
            .samples
            .iter()
            .find(|s| s.point[1] == 0.0)
            .expect("bottom");
        assert_eq!(bottom.normal, [0.0, -1.0]);
        let hole_left = w
            .samples
            .iter()
            .find(|s| s.wall == 1 && s.point[0] == 0.5)
            .expect("hole side");
        assert!((hole_left.normal[0] - 1.0).abs() < 1e-12);
    }
}
