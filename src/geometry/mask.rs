//! Mask images: a cross-section drawn as a bitmap, fluid pixels with the wall on the pixel faces.
//!
//! Owns: reading a PNG, BMP or TIFF (through the `image` crate), the fluid/solid decision per
//! pixel, the mapping of pixels to metres, the [`Domain`] of a mask (inside test, grid-line
//! crossings of the pixel faces, fixed lattice of pixel centres) and the sub-pixel estimate of the
//! wetted walls; also each pixel's grey level as a distance to the threshold ([`Mask::phi`], what
//! `super::trace` traces), the options `--mask-mode` and `--min-feature`, and the dropping of
//! specks ([`Mask::drop_specks`]: connected components, fluid 4-connected, solid 8-connected).
//!
//! Coordinates: x to the right, y up, metres. With `p` the pixel size and `H` the image height,
//! pixel (col, row), row 0 at the top of the image, covers x ∈ [col·p, (col+1)·p] and
//! y ∈ [(H−1−row)·p, (H−row)·p]. The grid nodes are the pixel centres: node (i, j) of
//! [`Mask::lattice`] is pixel (col i, row H−1−j). Everything outside the image is solid.
//!
//! # The flow domain and the walls
//!
//! The solver sees the *staircase*: the union of the fluid pixels, the wall on the pixel faces,
//! so every cut link has θ = ½ (see the cut-cell operator in `operator`). Two fluid pixels that
//! touch only at a corner are not connected (4-connected fluid, as the 5-point stencil is).
//!
//! The wetted perimeter, however, is not the length of the staircase: counting pixel faces gives
//! |cos φ| + |sin φ| per unit length of a wall at angle φ to the axes, up to √2 (41 %) too much
//! on a diagonal wall, 4/π (27 %) too much on a circle. [`Mask::walls`] instead estimates the
//! length of the smooth or polygonal boundary the bitmap was drawn from:
//!
//! 1. The boundary of the fluid pixels is traced into closed chains of unit pixel faces, with
//!    the fluid on the left (outer boundaries counter-clockwise, holes clockwise); where two fluid
//!    pixels touch only at a corner the chain turns so as to keep them apart.
//! 2. Along each chain the *maximal digital straight segments* are found: the longest runs of
//!    consecutive faces that are the digitisation of some straight line (the points of the chain
//!    lie in a strip μ ≤ a·x − b·y < μ + |a| + |b|, the arithmetic line of Reveillès, 1991, from
//!    memory). Test used here: a run with steps only along two perpendicular directions e₁, e₂,
//!    at local coordinates (x_k, y_k) after k steps, is straight iff the minimum over t ∈ [0, 1]
//!    of the spread of t·x_k − (1−t)·y_k is below 1; that spread is convex and piecewise linear
//!    in t with its breaks at the directions of the convex-hull edges of the points, so trying
//!    those finds the minimum exactly. The direction (1−t)·e₁ + t·e₂ at the minimum is the
//!    segment's slope. The runs are found for every start face with two pointers (the end of the
//!    longest run never moves back), at most 512 faces long.
//! 3. The tangent at each face is the weighted mean of the slopes of all maximal segments that
//!    cover it, weight λ(e)·L⁸, with e ∈ (0, 1) the position of the face in the segment,
//!    λ(e) = 64·e³(1−e)³ (the bump of the λ-maximal-segment tangent estimator of Lachaud,
//!    Vialard and de Vieilleville, Image Vision Comput. 2007, from memory) and L the segment
//!    length in faces (longer segments fix the slope better; the power 8 was tuned on discs).
//! 4. Tangent projection: a straight wall at angle φ to the x axis crosses, per unit length,
//!    |cos φ| faces whose normal is ±y and |sin φ| faces whose normal is ±x, so a face with unit
//!    vector e_f (along the chain) under the true unit tangent t stands for p·(t·e_f) of wall,
//!    and the sum is the wall length, exact for a straight wall with the right tangent. The
//!    error is second order in the tangent error (cos δ ≈ 1 − δ²/2) …
//! 5. … plus O(p) at each corner of a polygonal wall, where the number of faces of each side is
//!    only known to ±1. By summation by parts the estimate is Σ_i V_i·(t_{i−1} − t_i) over the
//!    staircase vertices V_i: the turning of the wall is charged at the vertices, and at a corner
//!    the whole turn falls on vertices up to a pixel from the true corner. Where the dominant
//!    (largest-weight) segments on the two sides of a vertex turn by more than 30°, both are at
//!    least 8 faces long, the tangent has settled on their directions within 3° four faces
//!    either side, and the sharp corner X where their lines meet (fitted to the middle half of
//!    each segment) is within 2.5 pixels and reproduces every pixel of the mask within 4 pixels
//!    of it, the vertices of that span are moved to X (see `correct_corners`). Rounded corners
//!    fail the last test and keep the plain estimate.
//!
//! Measured (unit tests below and a wider survey with 12 random sub-pixel offsets per case,
//! perimeter errors): binary discs of 50, 100, 200 and 400 pixels across +0.10…+0.44 %,
//! −0.01…+0.12 %, +0.02…+0.06 %, −0.003…+0.016 % (discs of 20–30 pixels up to 1.4 %); an
//! ellipse 300 × 150 pixels below 0.1 %; squares of 100 pixels aligned with the pixels or turned
//! by 10°, 30° or 60° within 0.05 %, turned by 45° −0.30…+0.41 % (a 45° wall is the same
//! staircase for every offset within 0.35 pixel, so its place is only known to that); regular
//! triangles, hexagons, octagons and 12-gons of circumradius 60 pixels within 0.55 % (a
//! triangle tip that the digitisation leaves as a separate pixel adds its own contour, 4
//! pixels); a 120 × 60 rectangle with corner radius 3 to 20 pixels within 1.2 %. For
//! comparison, the 0.5 iso-line of a Gaussian-smoothed mask traced by marching squares measured
//! +0.53 % on discs and −0.85 % on 100-pixel squares with σ = 1 pixel (corners are rounded
//! off), +0.15 % and −1.25 % with σ = 1.5: smoothing cannot serve both, hence this method.
//! Features only a few pixels across are not resolved (a disc 10 pixels across: up to +5 %).
//!
//! The wall samples (one per face, split further when the requested spacing is finer) lie on the
//! estimated wall: each covering segment's straight line (fitted to the middle half of the
//! segment: slope as above, through the centroid of its face midpoints) gives the foot of the
//! perpendicular from the face midpoint, and these are averaged with the same weights. They are
//! within about half a pixel of the staircase (which is where the solver's wall actually is);
//! the normals are the estimated ones; each sample carries the length of wall its face stands
//! for, so Σ ds is the perimeter. The area reported with the walls is the fluid pixel count ×
//! p², the area of the staircase domain the solver integrates over, so that A, the flow
//! integral and the force balance refer to the same domain.

use super::{Domain, Lattice, Point, WallSample, Walls};
use crate::error::{Error, Result};
use std::path::{Path, PathBuf};

/// Which pixels of a mask image are fluid.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FluidColour {
    /// Fluid where the 8-bit luma is below the threshold.
    #[default]
    Dark,
    /// Fluid where the 8-bit luma is at or above the threshold.
    Light,
}

impl FluidColour {
    /// "dark" or "light", as on the command line.
    pub fn name(self) -> &'static str {
        match self {
            FluidColour::Dark => "dark",
            FluidColour::Light => "light",
        }
    }
}

/// How the walls of a mask reach the solver.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum MaskMode {
    /// The grey levels traced into closed polylines at the threshold (`super::trace`), solved
    /// like a shape file on any grid.
    #[default]
    Traced,
    /// The staircase of the fluid pixels on the pixel grid (this module's [`Domain`]).
    Pixels,
}

impl MaskMode {
    /// "traced" or "pixels", as on the command line.
    pub fn name(self) -> &'static str {
        match self {
            MaskMode::Traced => "traced",
            MaskMode::Pixels => "pixels",
        }
    }
}

/// The smallest connected feature of a mask that is kept (`--min-feature`): fluid specks, and
/// solid specks inside the fluid, of a smaller area are dropped.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum MinFeature {
    /// An area in pixels.
    Pixels(f64),
    /// An area in m².
    Area(f64),
}

/// Default of `--min-feature`: specks of fewer than 8 pixels (a blob under about 3 × 3 pixels,
/// which the image cannot resolve anyway: a disc 10 pixels across is already off by several
/// per cent in perimeter) are scanning noise rather than passages.
pub const DEFAULT_MIN_FEATURE_PIXELS: f64 = 8.0;

impl Default for MinFeature {
    fn default() -> Self {
        MinFeature::Pixels(DEFAULT_MIN_FEATURE_PIXELS)
    }
}

impl MinFeature {
    /// Parses `--min-feature`: `12px` (pixels), an area such as `0.01mm2` (units m2, cm2, mm2,
    /// um2, in2; `mm^2` and `mm²` also read), or `0` (keep everything). A bare non-zero number
    /// is refused, since pixels and square metres differ by many orders of magnitude.
    pub fn parse(text: &str) -> Result<MinFeature> {
        let param = "--min-feature";
        let (v, unit) = crate::units::split_number(text).ok_or_else(|| {
            Error::param(
                param,
                format!("'{text}' does not start with a number (e.g. 10px or 0.01mm2)"),
            )
        })?;
        if !(v.is_finite() && v >= 0.0) {
            return Err(Error::param(
                param,
                format!("'{text}' must be a non-negative area"),
            ));
        }
        let unit = unit.replace("^2", "2").replace('²', "2");
        let length = |u: &str| crate::units::length_unit(u);
        match unit.as_str() {
            "px" | "pixels" | "pixel" => Ok(MinFeature::Pixels(v)),
            "" if v == 0.0 => Ok(MinFeature::Pixels(0.0)),
            "" => Err(Error::param(
                param,
                format!("'{text}' needs a unit: pixels (e.g. {v}px) or an area (e.g. {v}mm2)"),
            )),
            u => match u.strip_suffix('2').and_then(length) {
                Some(f) => Ok(MinFeature::Area(v * f * f)),
                None => Err(Error::param(
                    param,
                    format!("unknown unit '{u}' (use px, m2, cm2, mm2, um2 or in2)"),
                )),
            },
        }
    }

    /// The area in pixels for pixels of `pixel` metres.
    pub fn pixels(self, pixel: f64) -> f64 {
        match self {
            MinFeature::Pixels(n) => n,
            MinFeature::Area(a) => a / (pixel * pixel),
        }
    }
}

/// How to read a mask image.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MaskOptions {
    /// Which colour is fluid (default dark).
    pub fluid: FluidColour,
    /// Luma cut, 0..=255 (default 128): dark fluid is luma < threshold, light fluid is
    /// luma ≥ threshold.
    pub threshold: u8,
    /// Physical size of one (square) pixel, metres. The default of 1 m is a placeholder: callers
    /// set it from `--pixel`.
    pub pixel: f64,
    /// Traced sub-pixel walls (default) or the pixel staircase.
    pub mode: MaskMode,
    /// Specks below this area are dropped ([`Mask::drop_specks`]).
    pub min_feature: MinFeature,
    /// Memory the image may take once decoded and converted, bytes (the run's `--max-memory`,
    /// set by the pipeline): an image of more than this / [`MASK_BYTES_PER_PIXEL`] pixels is
    /// refused from its header, before it is decoded.
    pub memory_limit: u64,
}

/// Bytes per pixel of a mask while it is read: the decoded image (up to 8 for 16-bit RGBA),
/// its grey levels with alpha (2), the level field (4) and the fluid bits (measured: a
/// 16 000² image took 3 GB, 12 B per pixel, before this limit).
pub const MASK_BYTES_PER_PIXEL: u64 = 16;
/// Largest mask file read, bytes (1 GiB; the pixel count is the tighter limit for any
/// compressed image).
pub const MAX_MASK_FILE_BYTES: u64 = 1 << 30;

impl Default for MaskOptions {
    fn default() -> Self {
        MaskOptions {
            fluid: FluidColour::Dark,
            threshold: 128,
            pixel: 1.0,
            mode: MaskMode::default(),
            min_feature: MinFeature::default(),
            memory_limit: 4 << 30,
        }
    }
}

/// A cross-section given as a bitmap of fluid and solid pixels.
#[derive(Debug, Clone, PartialEq)]
pub struct Mask {
    width: usize,
    height: usize,
    pixel: f64,
    /// Row-major, row 0 = top of the image.
    fluid: Vec<bool>,
    /// The grey level as a signed distance to the threshold, φ = f − level with f the fluid
    /// fraction in [0, 1] (1 − luma/255 for dark fluid, luma/255 for light); fluid ⇔ φ > 0,
    /// exactly as `fluid`. Row-major like `fluid`.
    phi: Vec<f32>,
    /// The threshold as a fluid fraction (f at the wall).
    level: f64,
    count: usize,
    /// Extent of the fluid pixels: col_min, col_max, row_min, row_max (inclusive).
    extent: [usize; 4],
}

/// Unit steps of the four directions: 0 = +x, 1 = +y, 2 = −x, 3 = −y (y up). Turning left is
/// +1 modulo 4.
const STEP: [[i64; 2]; 4] = [[1, 0], [0, 1], [-1, 0], [0, -1]];

/// Longest digital straight segment searched for, in faces (bounds the cost on long straight
/// walls; the slope of a 512-face segment is fixed to about 1/512², far below what matters).
const MAX_SEGMENT: usize = 512;

/// Exponent of the segment length in the tangent weights (tuned on discs and squares).
const LENGTH_POWER: i32 = 8;

/// Smallest turn between the dominant segments on either side of a chain vertex that is treated
/// as a corner of the wall, degrees.
const CORNER_ANGLE: f64 = 30.0;

/// Most vertices on either side of a corner vertex whose turning is charged to the corner.
const CORNER_SPAN: usize = 4;

/// Shortest dominant segment (faces) on either side of a corner for the corner to be rebuilt:
/// features of a few pixels carry no information on their shape beyond the staircase.
const MIN_CORNER_SIDE: usize = 8;

/// Largest angle between the tangent at either end of a corner's span and the direction of the
/// straight wall on that side, degrees.
const CORNER_SETTLED: f64 = 3.0;

/// Radius round a rebuilt corner within which it must reproduce the mask, pixels.
const CORNER_CHECK: f64 = 4.0;

/// Farthest a reconstructed corner may lie from its staircase vertex, pixels.
const CORNER_REACH: f64 = 2.5;

/// Most sub-samples a single face is split into when a fine spacing is requested.
const MAX_SPLIT: usize = 64;

fn left(k: u8) -> u8 {
    (k + 1) % 4
}
fn right(k: u8) -> u8 {
    (k + 3) % 4
}

/// One closed chain of boundary faces: start vertex (pixel-corner coordinates, y up) and
/// direction code of each face, fluid on the left.
struct Chain {
    edges: Vec<([i64; 2], u8)>,
    /// Twice the signed enclosed area, pixels² (positive for outer boundaries).
    area2: i64,
}

/// Per-face estimate along a chain, pixel units.
struct FaceEstimate {
    /// Estimated wall point.
    point: Point,
    /// Unit tangent along the chain (fluid on the left).
    tangent: Point,
    /// Length of wall the face stands for.
    ds: f64,
}

impl Mask {
    /// Builds a mask from a decoded image. `origin` names the image in messages (the file name).
    ///
    /// The image is converted to 8-bit luma with alpha (the `image` crate's conversion); a fully
    /// transparent pixel is solid whatever its colour, otherwise the luma is compared with the
    /// threshold as [`MaskOptions`] says. Returns the mask and its warnings.
    pub fn from_image(
        img: &image::DynamicImage,
        opts: &MaskOptions,
        origin: &str,
    ) -> Result<(Mask, Vec<String>)> {
        check_pixel(opts.pixel)?;
        let la = img.to_luma_alpha8();
        let (w, h) = (la.width() as usize, la.height() as usize);
        let t = opts.threshold;
        // The level sits half-way between the last fluid and the first solid luma, so that
        // φ = f − level is never zero and φ > 0 is exactly the pixel test (dark fluid: luma < t;
        // light fluid: luma ≥ t).
        let tl = t as f32 - 0.5;
        let level = match opts.fluid {
            FluidColour::Dark => 1.0 - tl as f64 / 255.0,
            FluidColour::Light => tl as f64 / 255.0,
        };
        let phi: Vec<f32> = la
            .pixels()
            .map(|px| {
                let [luma, alpha] = px.0;
                if alpha == 0 {
                    // Fully transparent: solid whatever its colour.
                    return -0.5;
                }
                match opts.fluid {
                    FluidColour::Dark => (tl - luma as f32) / 255.0,
                    FluidColour::Light => (luma as f32 - tl) / 255.0,
                }
            })
            .collect();
        let rule = format!(
            "at threshold {t} (fluid = {}); check --threshold or --mask-fluid",
            opts.fluid.name()
        );
        Self::build(w, h, opts.pixel, phi, level, origin, &rule)
    }

    /// Builds a mask from a fluid fraction `f(col, row)` in [0, 1] (row 0 at the top; for
    /// tests and generated shapes, e.g. the exact pixel coverage of a curve): fluid where
    /// f > `level`, the traced wall at f = `level`.
    pub fn from_fraction(
        width: usize,
        height: usize,
        pixel: f64,
        level: f64,
        f: impl Fn(usize, usize) -> f64,
    ) -> Result<(Mask, Vec<String>)> {
        check_pixel(pixel)?;
        if !(level.is_finite() && level > 0.0 && level < 1.0) {
            return Err(Error::param(
                "mask level",
                format!("the level must lie strictly between 0 and 1, it is {level}"),
            ));
        }
        let n = pixel_count(width, height)?;
        let mut phi = Vec::with_capacity(n);
        for row in 0..height {
            for col in 0..width {
                let v = f(col, row);
                phi.push(if v.is_finite() {
                    (v.clamp(0.0, 1.0) - level) as f32
                } else {
                    -level as f32
                });
            }
        }
        Self::build(width, height, pixel, phi, level, "generated mask", "")
    }

    /// Reads and decodes a mask image (PNG, BMP or TIFF; the format is taken from the content,
    /// else from the file extension). An unreadable file is an [`Error::Io`], an undecodable one
    /// an [`Error::Mask`], both naming the file.
    pub fn load(path: &Path, opts: &MaskOptions) -> Result<(Mask, Vec<String>)> {
        check_pixel(opts.pixel)?;
        let io_err = |source: std::io::Error| Error::Io {
            path: path.to_path_buf(),
            source,
        };
        let mask_err = |message: String| Error::Mask {
            path: path.to_path_buf(),
            message,
        };
        let bytes = super::read_input_file(path, MAX_MASK_FILE_BYTES.min(opts.memory_limit))?;
        let reader_of = |bytes| -> Result<image::ImageReader<std::io::Cursor<&[u8]>>> {
            let mut reader = image::ImageReader::new(std::io::Cursor::new(bytes))
                .with_guessed_format()
                .map_err(io_err)?;
            if reader.format().is_none() {
                if let Ok(f) = image::ImageFormat::from_path(path) {
                    reader.set_format(f);
                }
            }
            if reader.format().is_none() {
                return Err(mask_err(
                    "not an image in a format canalis reads (PNG, BMP, TIFF)".to_string(),
                ));
            }
            Ok(reader)
        };
        // The size from the header first: an image too large for the memory limit is refused
        // before a byte of it is decoded.
        let (w, h) = reader_of(&bytes)?
            .into_dimensions()
            .map_err(|e| mask_err(format!("cannot read the image's header: {e}")))?;
        let max_pixels = opts.memory_limit / MASK_BYTES_PER_PIXEL;
        if w as u64 * h as u64 > max_pixels {
            return Err(Error::param(
                "--max-memory",
                format!(
                    "{}: a {w} × {h} image needs an estimated {:.1} GiB to read, above the \
                     limit of {:.1} GiB ({max_pixels} pixels); use a smaller image or raise \
                     --max-memory",
                    path.display(),
                    (w as u64 * h as u64 * MASK_BYTES_PER_PIXEL) as f64 / (1u64 << 30) as f64,
                    opts.memory_limit as f64 / (1u64 << 30) as f64
                ),
            ));
        }
        let mut reader = reader_of(&bytes)?;
        // The decoders' own limits as a second line: no allocation beyond the memory limit.
        let mut limits = image::Limits::default();
        limits.max_alloc = Some(opts.memory_limit);
        limits.max_image_width = Some(w);
        limits.max_image_height = Some(h);
        reader.limits(limits);
        let img = reader
            .decode()
            .map_err(|e| mask_err(format!("cannot decode the image: {e}")))?;
        Self::from_image(&img, opts, &path.display().to_string())
    }

    /// Builds a mask from a function of (col, row), row 0 at the top, true for fluid; for tests
    /// and generated shapes. `pixel` is the pixel size in metres.
    pub fn from_fn(
        width: usize,
        height: usize,
        pixel: f64,
        f: impl Fn(usize, usize) -> bool,
    ) -> Result<(Mask, Vec<String>)> {
        check_pixel(pixel)?;
        let n = pixel_count(width, height)?;
        let mut phi = Vec::with_capacity(n);
        for row in 0..height {
            for col in 0..width {
                phi.push(if f(col, row) { 0.5 } else { -0.5 });
            }
        }
        Self::build(width, height, pixel, phi, 0.5, "generated mask", "")
    }

    fn build(
        width: usize,
        height: usize,
        pixel: f64,
        phi: Vec<f32>,
        level: f64,
        origin: &str,
        rule: &str,
    ) -> Result<(Mask, Vec<String>)> {
        let err = |message: String| Error::Mask {
            path: PathBuf::from(origin),
            message,
        };
        if width == 0 || height == 0 {
            return Err(err(format!(
                "the image is empty ({width} × {height} pixels)"
            )));
        }
        let fluid: Vec<bool> = phi.iter().map(|&v| v > 0.0).collect();
        let (count, extent) = census(&fluid, width, height);
        if count == 0 {
            let sep = if rule.is_empty() { "" } else { " " };
            return Err(err(format!("the image has no fluid pixels{sep}{rule}")));
        }
        let mask = Mask {
            width,
            height,
            pixel,
            fluid,
            phi,
            level,
            count,
            extent,
        };
        let mut warnings = Vec::new();
        let border = mask.border_fluid_pixels();
        if border > 0 {
            warnings.push(format!(
                "{origin}: {border} fluid pixel{} touch the image border; the border is taken \
                 as a wall there",
                if border == 1 { "" } else { "s" }
            ));
        }
        let corners = mask.corner_contacts();
        if corners > 0 {
            warnings.push(format!(
                "{origin}: at {corners} place{} fluid pixels touch only at a corner; they are \
                 taken as separate (no flow passes a pixel corner)",
                if corners == 1 { "" } else { "s" }
            ));
        }
        Ok((mask, warnings))
    }

    /// Image width, pixels.
    pub fn width(&self) -> usize {
        self.width
    }

    /// Image height, pixels.
    pub fn height(&self) -> usize {
        self.height
    }

    /// Pixel size, metres.
    pub fn pixel(&self) -> f64 {
        self.pixel
    }

    /// Fluid flags, row-major, row 0 at the top of the image.
    pub fn fluid(&self) -> &[bool] {
        &self.fluid
    }

    /// Is pixel (col, row) fluid? Outside the image: no.
    pub fn is_fluid(&self, col: usize, row: usize) -> bool {
        col < self.width && row < self.height && self.fluid[row * self.width + col]
    }

    /// Number of fluid pixels.
    pub fn fluid_pixels(&self) -> usize {
        self.count
    }

    /// Area of the fluid pixels, m² (the staircase domain the solver sees).
    pub fn fluid_area(&self) -> f64 {
        self.count as f64 * self.pixel * self.pixel
    }

    /// The grey level of every pixel as φ = f − [`Mask::level`] (f the fluid fraction in
    /// [0, 1]), row-major, row 0 at the top; fluid ⇔ φ > 0, exactly as [`Mask::fluid`].
    pub fn phi(&self) -> &[f32] {
        &self.phi
    }

    /// The threshold as a fluid fraction: the traced wall is the iso-line f = level.
    pub fn level(&self) -> f64 {
        self.level
    }

    /// Drops connected specks smaller than `min_pixels` pixels: fluid regions (4-connected)
    /// become solid, solid regions (8-connected) that do not touch the image border become
    /// fluid. The grey levels of a dropped speck are mirrored about the level (φ → −φ), so the
    /// traced walls lose it too. Returns the warning that says how many specks were dropped and
    /// the largest of them, or None when there was none. Refuses (naming `--min-feature`) to
    /// drop every fluid region.
    pub fn drop_specks(&mut self, min_pixels: f64, origin: &str) -> Result<Option<String>> {
        if min_pixels.is_nan() || min_pixels <= 1.0 {
            return Ok(None);
        }
        let (w, h) = (self.width, self.height);
        let small = |n: usize| (n as f64) < min_pixels;
        // Fluid specks first, then the solid specks of what is left (so a fluid speck inside a
        // solid speck goes with it).
        let mut dropped = [0usize; 2];
        let mut largest = [0usize; 2];
        for (kind, want) in [(0usize, true), (1, false)] {
            let (label, sizes, border) = components(&self.fluid, w, h, want);
            if want && !sizes.is_empty() && sizes.iter().all(|&n| small(n)) {
                let largest = sizes.iter().copied().max().unwrap_or(0);
                return Err(Error::param(
                    "--min-feature",
                    format!(
                        "{origin}: every fluid region is smaller than {} pixels (the \
                         largest has {largest}); lower --min-feature",
                        pixels_text(min_pixels)
                    ),
                ));
            }
            let drop: Vec<bool> = sizes
                .iter()
                .zip(&border)
                // Solid specks must lie inside the fluid: not on the image border.
                .map(|(&n, &b)| small(n) && (want || !b))
                .collect();
            for (id, &n) in sizes.iter().enumerate() {
                if drop[id] {
                    dropped[kind] += 1;
                    largest[kind] = largest[kind].max(n);
                }
            }
            for k in 0..self.fluid.len() {
                if self.fluid[k] == want && drop[label[k] as usize] {
                    self.fluid[k] = !want;
                    self.phi[k] = -self.phi[k];
                }
            }
        }
        if dropped == [0, 0] {
            return Ok(None);
        }
        let (count, extent) = census(&self.fluid, w, h);
        self.count = count;
        self.extent = extent;
        let p2 = self.pixel * self.pixel;
        let mut parts = Vec::new();
        for (kind, what, place) in [(0, "fluid", ""), (1, "solid", " inside the fluid")] {
            if dropped[kind] > 0 {
                parts.push(format!(
                    "{} {what} speck{}{place} (the largest {} pixel{}, {:.3e} m²)",
                    dropped[kind],
                    if dropped[kind] == 1 { "" } else { "s" },
                    largest[kind],
                    if largest[kind] == 1 { "" } else { "s" },
                    largest[kind] as f64 * p2
                ));
            }
        }
        Ok(Some(format!(
            "{origin}: dropped {} smaller than --min-feature ({} pixels = {:.3e} m²)",
            parts.join(" and "),
            pixels_text(min_pixels),
            min_pixels * p2
        )))
    }

    /// Whether the image is binary: its grey levels take at most two values (one fluid, one
    /// solid), so it carries no sub-pixel information.
    pub fn is_binary(&self) -> bool {
        let mut seen: [Option<f32>; 2] = [None, None];
        for (&v, &fl) in self.phi.iter().zip(&self.fluid) {
            let slot = &mut seen[usize::from(fl)];
            match slot {
                None => *slot = Some(v),
                Some(s) if *s != v => return false,
                _ => {}
            }
        }
        true
    }

    /// A coarser image of the same cross-section: blocks of `factor` × `factor` pixels become
    /// one pixel of size `factor`·[`Mask::pixel`] (block (C, R) covers pixels
    /// C·factor..(C+1)·factor − 1 and likewise in rows; the image grows by solid pixels to a
    /// whole number of blocks, outside being solid, fluid fraction 0). Its fluid fraction is the
    /// area-weighted mean of the block's fractions f = φ + level (box filtering: the exact
    /// coverage of a region at the coarse resolution when the image is its exact coverage at
    /// the fine one), traced at the same level. A binary image stays binary (the image a coarser
    /// scan would give): a coarse pixel is fluid when the mean fraction exceeds the level,
    /// and takes the fine image's fluid or solid grey level. Specks are not dropped again.
    /// For the image-resolution error estimate ([`crate::pipeline`]).
    pub fn coarsened(&self, factor: usize) -> Result<Mask> {
        if factor == 0 {
            return Err(Error::param(
                "coarsening factor",
                "must be a whole number of at least 1",
            ));
        }
        if factor == 1 {
            return Ok(self.clone());
        }
        let (w, h) = (self.width.div_ceil(factor), self.height.div_ceil(factor));
        let level = self.level as f32;
        let binary = self.is_binary();
        let (mut fluid_phi, mut solid_phi) = (0.5 * (1.0 - level), -0.5 * level);
        if binary {
            for (&v, &fl) in self.phi.iter().zip(&self.fluid) {
                if fl {
                    fluid_phi = v;
                } else {
                    solid_phi = v;
                }
            }
        }
        let per_block = (factor * factor) as f64;
        let mut phi = Vec::with_capacity(w * h);
        for row in 0..h {
            for col in 0..w {
                let mut sum = 0.0f64;
                for r in row * factor..((row + 1) * factor).min(self.height) {
                    let base = r * self.width;
                    for c in col * factor..((col + 1) * factor).min(self.width) {
                        sum += (self.phi[base + c] + level).clamp(0.0, 1.0) as f64;
                    }
                }
                let mean = sum / per_block;
                phi.push(if binary {
                    if mean > self.level {
                        fluid_phi
                    } else {
                        solid_phi
                    }
                } else {
                    (mean - self.level) as f32
                });
            }
        }
        let (mask, _) = Self::build(
            w,
            h,
            self.pixel * factor as f64,
            phi,
            self.level,
            "coarsened mask",
            "",
        )?;
        Ok(mask)
    }

    /// The sub-pixel wall estimate of every boundary face (module documentation, steps 1–5),
    /// used by the traced walls of binary images: (twice the face midpoint, estimated wall
    /// point), pixel units with x right and y up (pixel (x, y) covers [x, x+1] × [y, y+1]).
    pub fn face_wall_points(&self) -> Vec<([i64; 2], Point)> {
        let mut out = Vec::new();
        for chain in self.trace() {
            let est = estimate(&chain, &|x, y| self.fluid_up(x, y));
            for (&(v, k), e) in chain.edges.iter().zip(&est) {
                let d = STEP[k as usize];
                out.push(([2 * v[0] + d[0], 2 * v[1] + d[1]], e.point));
            }
        }
        out
    }

    /// Fluid pixels on the outermost rows and columns.
    fn border_fluid_pixels(&self) -> usize {
        let (w, h) = (self.width, self.height);
        (0..h)
            .flat_map(|row| (0..w).map(move |col| (col, row)))
            .filter(|&(c, r)| (c == 0 || r == 0 || c + 1 == w || r + 1 == h) && self.is_fluid(c, r))
            .count()
    }

    /// 2×2 blocks with fluid on one diagonal only.
    fn corner_contacts(&self) -> usize {
        let mut n = 0;
        for row in 0..self.height.saturating_sub(1) {
            for col in 0..self.width.saturating_sub(1) {
                let a = self.is_fluid(col, row);
                let b = self.is_fluid(col + 1, row);
                let c = self.is_fluid(col, row + 1);
                let d = self.is_fluid(col + 1, row + 1);
                if a == d && b == c && a != b {
                    n += 1;
                }
            }
        }
        n
    }

    /// Fluid test in pixel coordinates with y up (x = col, y = H−1−row); outside = solid.
    fn fluid_up(&self, x: i64, y: i64) -> bool {
        if x < 0 || y < 0 || x >= self.width as i64 || y >= self.height as i64 {
            return false;
        }
        self.fluid[(self.height - 1 - y as usize) * self.width + x as usize]
    }

    /// The pixel (col, row) under the point p, if inside the image.
    fn pixel_at(&self, p: Point) -> Option<(usize, usize)> {
        let fx = p[0] / self.pixel;
        let fy = p[1] / self.pixel;
        if !(fx >= 0.0 && fy >= 0.0 && fx < self.width as f64 && fy < self.height as f64) {
            return None;
        }
        let col = (fx.floor() as usize).min(self.width - 1);
        let up = (fy.floor() as usize).min(self.height - 1);
        Some((col, self.height - 1 - up))
    }

    /// [`Domain::wall_crossings`] along axis `a` (0 = x, 1 = y) for a line whose other
    /// coordinate lies inside the image: the faces at c·p, c = 0..=count, where the pixels on
    /// their two sides differ (outside the image is solid), as s = (c·p − origin_a)/d.
    fn axis_crossings(&self, a: usize, origin: Point, d: f64) -> Vec<f64> {
        let p = self.pixel;
        let other = origin[1 - a] / p;
        // The pixel line the ray runs along (checked inside the image by the caller).
        let k = (other.floor() as usize).min(if a == 0 { self.height } else { self.width } - 1);
        let count = if a == 0 { self.width } else { self.height };
        let at = |c: usize| -> bool {
            if a == 0 {
                self.fluid[(self.height - 1 - k) * self.width + c]
            } else {
                self.fluid[(self.height - 1 - c) * self.width + k]
            }
        };
        let mut out = Vec::new();
        let mut prev = false;
        for c in 0..=count {
            let cur = c < count && at(c);
            if cur != prev {
                out.push((c as f64 * p - origin[a]) / d);
                prev = cur;
            }
        }
        if d < 0.0 {
            out.reverse();
        }
        out
    }

    /// Traces every closed boundary chain of the fluid pixels.
    ///
    /// A face is a boundary face when it separates a fluid pixel from a solid one (or from the
    /// outside of the image). From each face the next is chosen at the end vertex by looking at
    /// the two pixels ahead: if the one on the left is solid the chain turns left (round the
    /// current fluid pixel; at a corner contact this keeps the diagonal pixels apart), if the one
    /// on the left is fluid and the one on the right solid it goes straight, else it turns right.
    fn trace(&self) -> Vec<Chain> {
        let (w, h) = (self.width, self.height);
        // Visited flags per pixel (y-up index), bit = outward normal direction code of the face.
        let mut seen = vec![0u8; w * h];
        let pix = |v: [i64; 2], o: [i64; 2]| -> [i64; 2] {
            [
                if o[0] > 0 { v[0] } else { v[0] - 1 },
                if o[1] > 0 { v[1] } else { v[1] - 1 },
            ]
        };
        let mut chains = Vec::new();
        for row in 0..h {
            let y = (h - 1 - row) as i64;
            for col in 0..w {
                let x = col as i64;
                if !self.fluid_up(x, y) {
                    continue;
                }
                for nc in [1u8, 2, 3, 0] {
                    let n = STEP[nc as usize];
                    let idx = (y as usize) * w + col;
                    if seen[idx] & (1 << nc) != 0 || self.fluid_up(x + n[0], y + n[1]) {
                        continue;
                    }
                    let k0 = left(nc);
                    let d = STEP[k0 as usize];
                    let v0 = [x + (1 + n[0] - d[0]) / 2, y + (1 + n[1] - d[1]) / 2];
                    let mut edges = Vec::new();
                    let (mut v, mut k) = (v0, k0);
                    loop {
                        let d = STEP[k as usize];
                        let l = STEP[left(k) as usize];
                        // Mark the face on the fluid pixel to its left.
                        let fp = pix(v, [d[0] + l[0], d[1] + l[1]]);
                        seen[(fp[1] as usize) * w + fp[0] as usize] |= 1 << right(k);
                        edges.push((v, k));
                        let e = [v[0] + d[0], v[1] + d[1]];
                        let al = pix(e, [d[0] + l[0], d[1] + l[1]]);
                        let ar = pix(e, [d[0] - l[0], d[1] - l[1]]);
                        let nk = if !self.fluid_up(al[0], al[1]) {
                            left(k)
                        } else if !self.fluid_up(ar[0], ar[1]) {
                            k
                        } else {
                            right(k)
                        };
                        v = e;
                        k = nk;
                        if v == v0 && k == k0 {
                            break;
                        }
                    }
                    let mut area2 = 0i64;
                    for &(p, k) in &edges {
                        let d = STEP[k as usize];
                        area2 += p[0] * (p[1] + d[1]) - (p[0] + d[0]) * p[1];
                    }
                    chains.push(Chain { edges, area2 });
                }
            }
        }
        chains
    }
}

/// Number of fluid pixels and their extent: col_min, col_max, row_min, row_max (inclusive).
fn census(fluid: &[bool], width: usize, height: usize) -> (usize, [usize; 4]) {
    let mut count = 0;
    let mut extent = [usize::MAX, 0, usize::MAX, 0];
    for row in 0..height {
        for col in 0..width {
            if fluid[row * width + col] {
                count += 1;
                extent[0] = extent[0].min(col);
                extent[1] = extent[1].max(col);
                extent[2] = extent[2].min(row);
                extent[3] = extent[3].max(row);
            }
        }
    }
    (count, extent)
}

/// Labels the connected components of the pixels with `fluid[k] == want`: 4-connected for fluid,
/// 8-connected for solid (the complement of 4-connected fluid; two solid pixels that touch at a
/// corner between two fluid pixels do meet there, as no flow passes a pixel corner). Returns the
/// label of every pixel (u32::MAX for the other kind), the size of each component and whether it
/// touches the image border.
fn components(
    fluid: &[bool],
    width: usize,
    height: usize,
    want: bool,
) -> (Vec<u32>, Vec<usize>, Vec<bool>) {
    let mut label = vec![u32::MAX; fluid.len()];
    let mut sizes = Vec::new();
    let mut border = Vec::new();
    let mut stack = Vec::new();
    let diagonal = !want;
    for start in 0..fluid.len() {
        if fluid[start] != want || label[start] != u32::MAX {
            continue;
        }
        let id = sizes.len() as u32;
        let (mut size, mut touches) = (0usize, false);
        label[start] = id;
        stack.push(start);
        while let Some(k) = stack.pop() {
            size += 1;
            let (col, row) = ((k % width) as i64, (k / width) as i64);
            if col == 0 || row == 0 || col + 1 == width as i64 || row + 1 == height as i64 {
                touches = true;
            }
            for dr in -1..=1i64 {
                for dc in -1..=1i64 {
                    if (dr == 0 && dc == 0) || (!diagonal && dr != 0 && dc != 0) {
                        continue;
                    }
                    let (c, r) = (col + dc, row + dr);
                    if c < 0 || r < 0 || c >= width as i64 || r >= height as i64 {
                        continue;
                    }
                    let m = r as usize * width + c as usize;
                    if fluid[m] == want && label[m] == u32::MAX {
                        label[m] = id;
                        stack.push(m);
                    }
                }
            }
        }
        sizes.push(size);
        border.push(touches);
    }
    (label, sizes, border)
}

fn check_pixel(pixel: f64) -> Result<()> {
    if !(pixel.is_finite() && pixel > 0.0) {
        return Err(Error::param(
            "--pixel",
            format!("the pixel size must be a positive finite length, got {pixel} m"),
        ));
    }
    Ok(())
}

/// λ(e) = 64·e³(1−e)³: the bump weight of a face at relative position e in a segment.
fn lambda(e: f64) -> f64 {
    let q = e * (1.0 - e);
    64.0 * q * q * q
}

/// Is the run of faces `codes` a digital straight segment? If so, its unit direction.
///
/// A run with one direction is straight along it. A run with two perpendicular directions a, b
/// is mapped to the local staircase P_k = (number of a-steps, number of b-steps) after k faces,
/// and is straight iff min over t ∈ [0, 1] of max_k g_k − min_k g_k < 1 with
/// g_k = t·x_k − (1−t)·y_k (the L1-normalised arithmetic width of Reveillès' definition). That
/// function of t is convex and piecewise linear with its breaks at the directions of the
/// convex-hull edges of the P_k, so the minimum is found by trying those. The direction is
/// (1−t)·a + t·b at the minimum (the middle of a tied range).
fn straight(codes: impl Iterator<Item = u8>, buf: &mut Vec<[f64; 2]>) -> Option<Point> {
    let codes: Vec<u8> = codes.collect();
    let mut mask = 0u8;
    for &c in &codes {
        mask |= 1 << c;
    }
    if mask & 0b0101 == 0b0101 || mask & 0b1010 == 0b1010 {
        return None;
    }
    let present: Vec<u8> = (0..4u8).filter(|c| mask & (1 << c) != 0).collect();
    let vec_of = |c: u8| {
        let s = STEP[c as usize];
        [s[0] as f64, s[1] as f64]
    };
    if present.len() == 1 {
        return Some(vec_of(present[0]));
    }
    let (a, b) = (present[0], present[1]);
    // Local staircase.
    buf.clear();
    let (mut x, mut y) = (0.0, 0.0);
    buf.push([0.0, 0.0]);
    for &c in &codes {
        if c == a {
            x += 1.0;
        } else {
            y += 1.0;
        }
        buf.push([x, y]);
    }
    let hull = convex_hull(buf);
    let spread = |t: f64| {
        let mut lo = f64::INFINITY;
        let mut hi = f64::NEG_INFINITY;
        for p in &hull {
            let g = t * p[0] - (1.0 - t) * p[1];
            lo = lo.min(g);
            hi = hi.max(g);
        }
        hi - lo
    };
    let mut cands = vec![0.0, 1.0];
    for i in 0..hull.len() {
        let p = hull[i];
        let q = hull[(i + 1) % hull.len()];
        let (ex, ey) = (q[0] - p[0], q[1] - p[1]);
        if ex * ey > 0.0 {
            cands.push(ey / (ex + ey));
        }
    }
    let mut best = f64::INFINITY;
    for &t in &cands {
        best = best.min(spread(t));
    }
    if best >= 1.0 - 1e-9 {
        return None;
    }
    let tied: Vec<f64> = cands
        .iter()
        .copied()
        .filter(|&t| spread(t) <= best + 1e-9)
        .collect();
    let tmin = tied.iter().copied().fold(f64::INFINITY, f64::min);
    let tmax = tied.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let t = 0.5 * (tmin + tmax);
    let (va, vb) = (vec_of(a), vec_of(b));
    let d = [(1.0 - t) * va[0] + t * vb[0], (1.0 - t) * va[1] + t * vb[1]];
    let n = d[0].hypot(d[1]);
    Some([d[0] / n, d[1] / n])
}

/// Convex hull (Andrew's monotone chain) of points already sorted by (x, y); collinear points
/// dropped. Returns the vertices in counter-clockwise order.
fn convex_hull(pts: &[[f64; 2]]) -> Vec<[f64; 2]> {
    if pts.len() < 3 {
        return pts.to_vec();
    }
    let cross = |o: [f64; 2], a: [f64; 2], b: [f64; 2]| {
        (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0])
    };
    let mut hull: Vec<[f64; 2]> = Vec::with_capacity(2 * pts.len());
    for &p in pts {
        while hull.len() >= 2 && cross(hull[hull.len() - 2], hull[hull.len() - 1], p) <= 0.0 {
            hull.pop();
        }
        hull.push(p);
    }
    let lower = hull.len() + 1;
    for &p in pts.iter().rev().skip(1) {
        while hull.len() >= lower && cross(hull[hull.len() - 2], hull[hull.len() - 1], p) <= 0.0 {
            hull.pop();
        }
        hull.push(p);
    }
    hull.pop();
    hull
}

/// Tangent, wall point and length of wall at every face of a chain (module documentation,
/// steps 2–5), pixel units.
fn estimate(chain: &Chain, fluid: &dyn Fn(i64, i64) -> bool) -> Vec<FaceEstimate> {
    let edges = &chain.edges;
    let n = edges.len();
    let code = |i: usize| edges[i % n].1;
    let mid = |i: usize| {
        let (v, k) = edges[i % n];
        let d = STEP[k as usize];
        [
            v[0] as f64 + 0.5 * d[0] as f64,
            v[1] as f64 + 0.5 * d[1] as f64,
        ]
    };
    // A closed chain always has all four directions, so no straight run covers all of it.
    let max_len = (n - 1).min(MAX_SEGMENT);
    let mut buf = Vec::new();
    // f[i]: last face of the longest straight run starting at face i (indices unwrapped).
    let mut f = vec![0usize; n];
    let mut j = 0usize;
    for (i, fi) in f.iter_mut().enumerate() {
        if j < i {
            j = i;
        }
        while j + 2 - i <= max_len && straight((i..=j + 1).map(code), &mut buf).is_some() {
            j += 1;
        }
        *fi = j;
    }
    let mut tan = vec![[0.0f64; 2]; n];
    let mut pos = vec![[0.0f64; 2]; n];
    let mut wsum = vec![0.0f64; n];
    // Lines of the maximal segments (a point, the unit direction, the segment length in faces),
    // and for each face the segment of largest weight covering it (its "dominant" segment).
    let mut lines: Vec<(Point, Point, usize)> = Vec::new();
    let mut dom = vec![(usize::MAX, 0.0f64); n];
    for i in 0..n {
        let maximal = if i == 0 {
            f[0] + n > f[n - 1]
        } else {
            f[i] > f[i - 1]
        };
        if !maximal {
            continue;
        }
        let j = f[i];
        let Some(d) = straight((i..=j).map(code), &mut buf) else {
            continue;
        };
        let len = j + 1 - i;
        let weight = (len as f64).powi(LENGTH_POWER);
        // The line of the segment, for the wall points and the corners: its end faces may
        // belong to the next stretch of wall (a straight run of N faces and the first face
        // round a corner form a segment of slope 1/N; a straight wall running into a small
        // arc takes in the first steps of the arc), so it is fitted to the middle half of the
        // segment.
        let trim = len / 4;
        let (ti, tj) = (i + trim, j - trim);
        let dl = straight((ti..=tj).map(code), &mut buf).unwrap_or(d);
        let mut c = [0.0, 0.0];
        for k in ti..=tj {
            let m = mid(k);
            c[0] += m[0];
            c[1] += m[1];
        }
        let cnt = (tj + 1 - ti) as f64;
        c = [c[0] / cnt, c[1] / cnt];
        let id = lines.len();
        lines.push((c, dl, len));
        for k in i..=j {
            let e = (k - i) as f64 + 0.5;
            let w = lambda(e / len as f64) * weight;
            let m = mid(k);
            let along = (m[0] - c[0]) * dl[0] + (m[1] - c[1]) * dl[1];
            let idx = k % n;
            tan[idx][0] += w * d[0];
            tan[idx][1] += w * d[1];
            pos[idx][0] += w * (c[0] + along * dl[0]);
            pos[idx][1] += w * (c[1] + along * dl[1]);
            wsum[idx] += w;
            if w > dom[idx].1 {
                dom[idx] = (id, w);
            }
        }
    }
    let tangents: Vec<Point> = (0..n)
        .map(|i| {
            let s = STEP[code(i) as usize];
            let face = [s[0] as f64, s[1] as f64];
            let t = tan[i];
            let len = t[0].hypot(t[1]);
            if len.is_finite() && len > 0.0 {
                let u = [t[0] / len, t[1] / len];
                if u[0] * face[0] + u[1] * face[1] > 1e-12 {
                    return u;
                }
            }
            face
        })
        .collect();
    // Projection estimate per face, then the corner corrections.
    let mut ds: Vec<f64> = (0..n)
        .map(|i| {
            let s = STEP[code(i) as usize];
            tangents[i][0] * s[0] as f64 + tangents[i][1] * s[1] as f64
        })
        .collect();
    correct_corners(edges, &tangents, &dom, &lines, fluid, &mut ds);
    (0..n)
        .map(|i| {
            let point = if wsum[i] > 0.0 && wsum[i].is_finite() {
                [pos[i][0] / wsum[i], pos[i][1] / wsum[i]]
            } else {
                mid(i)
            };
            FaceEstimate {
                point,
                tangent: tangents[i],
                ds: ds[i],
            }
        })
        .collect()
}

/// Corner corrections of the per-face lengths `ds` (pixel units) of one chain.
///
/// Summation by parts turns the projection estimate into Σ_i t_i·(V_{i+1} − V_i) =
/// Σ_i V_i·(t_{i−1} − t_i), V_i the staircase vertex where face i starts: the wall is charged
/// its turning at the staircase vertices. Along a smooth wall the tangent turns a little at
/// every vertex and the half-pixel scatter of the vertices averages out; at a corner the whole
/// turn falls on a few vertices up to about a pixel from the true corner, an error of O(1)
/// pixel per corner. So where the dominant segments on the two sides of a vertex turn by more
/// than [`CORNER_ANGLE`], the corner X is taken as the intersection of their lines
/// ([`corner_point`], which also asks for straight stretches of [`MIN_CORNER_SIDE`] faces and
/// X within [`CORNER_REACH`]) provided the sharp corner reproduces the mask round it
/// ([`corner_fits`]), and the vertices V_k within [`CORNER_SPAN`] faces (and short of half-way
/// to the next corner) are replaced by X, provided the tangent has settled within
/// [`CORNER_SETTLED`] on the two sides' directions at the ends of that span. The estimate
/// changes by δ = Σ_k (X − V_k)·(t_{k−1} − t_k), which is spread over the faces of the span in
/// proportion to their lengths. For a polygon this recovers the length of the straight sides
/// up to their intersections.
fn correct_corners(
    edges: &[([i64; 2], u8)],
    tangents: &[Point],
    dom: &[(usize, f64)],
    lines: &[(Point, Point, usize)],
    fluid: &dyn Fn(i64, i64) -> bool,
    ds: &mut [f64],
) {
    let n = edges.len();
    let vertex = |i: usize| {
        let v = edges[i % n].0;
        [v[0] as f64, v[1] as f64]
    };
    // Corner vertices and their corner points.
    let mut corners: Vec<(usize, Point, Point, Point)> = Vec::new();
    for i in 0..n {
        let (a, b) = (dom[(i + n - 1) % n].0, dom[i].0);
        if a == b || a == usize::MAX || b == usize::MAX {
            continue;
        }
        if let Some(x) = corner_point(lines[a], lines[b], vertex(i)) {
            if corner_fits(lines[a], lines[b], x, fluid) {
                corners.push((i, x, lines[a].1, lines[b].1));
            }
        }
    }
    let m = corners.len();
    for (ci, &(i, x, da, db)) in corners.iter().enumerate() {
        // Half-width of the span: up to CORNER_SPAN, and short of half-way to the neighbours.
        let gap = |other: usize, forward: bool| {
            if m == 1 {
                n
            } else if forward {
                (other + n - i) % n
            } else {
                (i + n - other) % n
            }
        };
        let next = corners[(ci + 1) % m].0;
        let prev = corners[(ci + m - 1) % m].0;
        let fwd = CORNER_SPAN.min(gap(next, true).saturating_sub(1) / 2);
        let back = CORNER_SPAN.min(gap(prev, false).saturating_sub(1) / 2);
        if fwd + back + 2 > n {
            continue;
        }
        // Vertices k = i − back ..= i + fwd; faces i − back − 1 ..= i + fwd. The tangent must
        // have settled on the two sides' directions at the ends of the span, else the turning
        // is not all this corner's (a rounded corner, a curve running into a straight wall).
        let (ta, tb) = (tangents[(i + n - back - 1) % n], tangents[(i + fwd) % n]);
        let settled = CORNER_SETTLED.to_radians().cos();
        if ta[0] * da[0] + ta[1] * da[1] < settled || tb[0] * db[0] + tb[1] * db[1] < settled {
            continue;
        }
        let mut delta = 0.0;
        for off in 0..=(back + fwd) {
            let k = (i + n - back + off) % n;
            let v = vertex(k);
            let (t0, t1) = (tangents[(k + n - 1) % n], tangents[k]);
            delta += (x[0] - v[0]) * (t0[0] - t1[0]) + (x[1] - v[1]) * (t0[1] - t1[1]);
        }
        let faces: Vec<usize> = (0..=(back + fwd + 1))
            .map(|off| (i + n - back - 1 + off) % n)
            .collect();
        let total: f64 = faces.iter().map(|&k| ds[k]).sum();
        if !(delta.is_finite() && total > 0.0) {
            continue;
        }
        let factor = 1.0 + delta / total;
        if factor < 0.25 {
            continue;
        }
        for &k in &faces {
            ds[k] *= factor;
        }
    }
}

/// Does the sharp corner at `x` between the lines of `a` (before) and `b` (after) digitise to
/// the mask? Every pixel centre within [`CORNER_CHECK`] pixels of `x` must be fluid exactly when
/// it lies on the fluid side (the left) of both lines at a convex corner, of either line at a
/// concave one; centres within 0.1 pixel of a line are not counted. A rounded corner fails:
/// the sharp corner would take in pixels between the arc and the corner that are solid.
fn corner_fits(
    a: (Point, Point, usize),
    b: (Point, Point, usize),
    x: Point,
    fluid: &dyn Fn(i64, i64) -> bool,
) -> bool {
    let ((ca, da, _), (cb, db, _)) = (a, b);
    let convex = da[0] * db[1] - da[1] * db[0] > 0.0;
    let side = |c: Point, d: Point, p: Point| d[0] * (p[1] - c[1]) - d[1] * (p[0] - c[0]);
    let r = CORNER_CHECK;
    let (x0, x1) = ((x[0] - r).floor() as i64, (x[0] + r).ceil() as i64);
    let (y0, y1) = ((x[1] - r).floor() as i64, (x[1] + r).ceil() as i64);
    for py in y0..=y1 {
        for px in x0..=x1 {
            let q = [px as f64 + 0.5, py as f64 + 0.5];
            if (q[0] - x[0]).hypot(q[1] - x[1]) > r {
                continue;
            }
            let (sa, sb) = (side(ca, da, q), side(cb, db, q));
            if sa.abs() < 0.1 || sb.abs() < 0.1 {
                continue;
            }
            let inside = if convex {
                sa > 0.0 && sb > 0.0
            } else {
                sa > 0.0 || sb > 0.0
            };
            if inside != fluid(px, py) {
                return false;
            }
        }
    }
    true
}

/// The corner between two straight stretches of wall, if the dominant segments `a` (before the
/// vertex `v`) and `b` (after it) turn by more than [`CORNER_ANGLE`]: the intersection of their
/// lines, accepted within [`CORNER_REACH`] pixels of the staircase vertex.
fn corner_point(a: (Point, Point, usize), b: (Point, Point, usize), v: Point) -> Option<Point> {
    let ((ca, da, la), (cb, db, lb)) = (a, b);
    if la < MIN_CORNER_SIDE || lb < MIN_CORNER_SIDE {
        return None;
    }
    let cos = da[0] * db[0] + da[1] * db[1];
    let sin = da[0] * db[1] - da[1] * db[0];
    if cos > CORNER_ANGLE.to_radians().cos() || sin.abs() < 0.2 {
        return None;
    }
    let w = [cb[0] - ca[0], cb[1] - ca[1]];
    let s = (w[0] * db[1] - w[1] * db[0]) / sin;
    let x = [ca[0] + s * da[0], ca[1] + s * da[1]];
    let dist = (x[0] - v[0]).hypot(x[1] - v[1]);
    (dist.is_finite() && dist <= CORNER_REACH).then_some(x)
}

impl Domain for Mask {
    /// The extent of the fluid pixels.
    fn bbox(&self) -> (Point, Point) {
        let p = self.pixel;
        let h = self.height;
        let [c0, c1, r0, r1] = self.extent;
        (
            [c0 as f64 * p, (h - 1 - r1) as f64 * p],
            [(c1 + 1) as f64 * p, (h - r0) as f64 * p],
        )
    }

    /// The pixel under `p` is fluid; outside the image is solid. A point on a pixel face belongs
    /// to the pixel to its right (above).
    fn contains(&self, p: Point) -> bool {
        self.pixel_at(p)
            .is_some_and(|(col, row)| self.fluid[row * self.width + col])
    }

    /// Parameters s, ascending, where `origin + s·dir` passes a pixel face (or the image border)
    /// between a fluid and a solid pixel. The candidates are the crossings of the line with the
    /// pixel-face lines inside the image and the ends of its piece inside the image; a candidate
    /// is a wall where the fluid test differs between the midpoints on its two sides.
    fn wall_crossings(&self, origin: Point, dir: Point) -> Vec<f64> {
        let p = self.pixel;
        let ext = [self.width as f64 * p, self.height as f64 * p];
        let counts = [self.width, self.height];
        if !(origin.iter().chain(dir.iter()).all(|v| v.is_finite())) || dir == [0.0, 0.0] {
            return Vec::new();
        }
        let (mut s_lo, mut s_hi) = (f64::NEG_INFINITY, f64::INFINITY);
        for a in 0..2 {
            if dir[a] == 0.0 {
                if !(origin[a] >= 0.0 && origin[a] < ext[a]) {
                    return Vec::new();
                }
            } else {
                let s1 = -origin[a] / dir[a];
                let s2 = (ext[a] - origin[a]) / dir[a];
                s_lo = s_lo.max(s1.min(s2));
                s_hi = s_hi.min(s1.max(s2));
            }
        }
        if s_lo.partial_cmp(&s_hi) != Some(std::cmp::Ordering::Less) {
            return Vec::new();
        }
        // Axis-aligned (the grid's case): walk the pixel row or column directly.
        for a in 0..2 {
            let b = 1 - a;
            if dir[b] == 0.0 {
                return self.axis_crossings(a, origin, dir[a]);
            }
        }
        let mut cand = vec![s_lo, s_hi];
        for a in 0..2 {
            if dir[a] != 0.0 {
                for c in 1..counts[a] {
                    let s = (c as f64 * p - origin[a]) / dir[a];
                    if s > s_lo && s < s_hi {
                        cand.push(s);
                    }
                }
            }
        }
        cand.sort_by(|a, b| a.total_cmp(b));
        let norm = dir[0].hypot(dir[1]);
        let tol = 1e-9 * p / norm;
        cand.dedup_by(|a, b| (*a - *b).abs() <= tol);
        let at = |s: f64| self.contains([origin[0] + s * dir[0], origin[1] + s * dir[1]]);
        let mut out = Vec::new();
        let mut state = false;
        for k in 0..cand.len() {
            let next = k + 1 < cand.len() && at(0.5 * (cand[k] + cand[k + 1]));
            if next != state {
                out.push(cand[k]);
                state = next;
            }
        }
        out
    }

    /// The estimated walls (see the module documentation): one closed contour per boundary
    /// chain, named "contour 1", "contour 2", ... by enclosed area, largest first; samples at
    /// most `spacing` apart (a face is split into equal parts along its tangent when it is
    /// longer than `spacing`, up to 64 parts); perimeter = Σ ds; area = fluid pixels × p².
    fn walls(&self, spacing: f64) -> Walls {
        let p = self.pixel;
        let mut chains = self.trace();
        // Stable: equal areas keep the tracing order (top row first).
        chains.sort_by_key(|c| std::cmp::Reverse(c.area2.unsigned_abs()));
        let mut walls = Walls {
            area: self.fluid_area(),
            ..Walls::default()
        };
        for (ci, chain) in chains.iter().enumerate() {
            walls.names.push(format!("contour {}", ci + 1));
            let est = estimate(chain, &|x, y| self.fluid_up(x, y));
            let mut s = 0.0;
            for e in &est {
                let t = e.tangent;
                let ds = p * e.ds;
                let parts = if spacing.is_finite() && spacing > 0.0 && ds > spacing {
                    ((ds / spacing).ceil() as usize).clamp(1, MAX_SPLIT)
                } else {
                    1
                };
                let dq = ds / parts as f64;
                let centre = [e.point[0] * p, e.point[1] * p];
                for q in 0..parts {
                    let off = (q as f64 + 0.5) * dq - 0.5 * ds;
                    let point = [centre[0] + off * t[0], centre[1] + off * t[1]];
                    let normal = [t[1], -t[0]];
                    walls.samples.push(WallSample {
                        wall: ci,
                        s: s + (q as f64 + 0.5) * dq,
                        point,
                        normal,
                        ds: dq,
                        // Midpoint rule of ½∮p·n ds on the straight piece (exact for a line).
                        area: 0.5 * (point[0] * normal[0] + point[1] * normal[1]) * dq,
                    });
                }
                s += ds;
            }
            walls.perimeter += s;
        }
        walls
    }

    /// Node (i, j) is the centre of pixel (col i, row H−1−j).
    fn lattice(&self) -> Option<Lattice> {
        Some(Lattice {
            origin: [0.5 * self.pixel, 0.5 * self.pixel],
            pitch: self.pixel,
            nx: self.width,
            ny: self.height,
        })
    }
}

/// width × height, or an error when that overflows.
fn pixel_count(width: usize, height: usize) -> Result<usize> {
    width.checked_mul(height).ok_or_else(|| {
        Error::param(
            "mask size",
            format!("{width} × {height} pixels is too large"),
        )
    })
}

/// A pixel count for messages: whole numbers as such, fractions to one decimal, huge counts
/// (an area far larger than the image) in scientific notation.
fn pixels_text(n: f64) -> String {
    if n >= 1e7 {
        format!("{n:.3e}")
    } else if n.fract() == 0.0 {
        format!("{n:.0}")
    } else {
        format!("{n:.1}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    /// Binary disc of diameter `d` pixels (pixel centre inside ⇒ fluid), centre offset `off`
    /// pixels from the middle of the image, pixel size 1 mm.
    fn disc(d: f64, off: [f64; 2]) -> Mask {
        let n = d.ceil() as usize + 8;
        let c = [0.5 * n as f64 + off[0], 0.5 * n as f64 + off[1]];
        let r2 = 0.25 * d * d;
        Mask::from_fn(n, n, 1e-3, |col, row| {
            let x = col as f64 + 0.5 - c[0];
            let y = (n - 1 - row) as f64 + 0.5 - c[1];
            x * x + y * y < r2
        })
        .unwrap()
        .0
    }

    #[test]
    fn coarsened_keeps_size_area_and_binariness() {
        // A binary disc stays binary, with the pixel size scaled and about the same fluid area
        // (majority rule per block, 13 coarse pixels across: within 5 %; area of a disc πd²/4).
        let m = disc(40.0, [0.3, 0.2]);
        assert!(m.is_binary());
        let c = m.coarsened(3).unwrap();
        assert!(c.is_binary());
        assert_eq!(c.width(), m.width().div_ceil(3));
        assert!((c.pixel() - 3e-3).abs() < 1e-15);
        let area = PI * 400.0 * 1e-6;
        assert!(
            (c.fluid_area() - area).abs() < 0.05 * area,
            "{}",
            c.fluid_area()
        );
        // A grey image: block means of the fluid fraction, so the total fluid fraction (the
        // area of a box-filtered image) is kept exactly; factor 1 changes nothing.
        let (g, _) = Mask::from_fraction(10, 7, 1e-3, 0.5, |col, row| {
            ((col * 7 + row * 3) % 11) as f64 / 10.0
        })
        .unwrap();
        assert!(!g.is_binary());
        let total = |m: &Mask| -> f64 {
            m.phi()
                .iter()
                .map(|&p| (p as f64 + m.level()).clamp(0.0, 1.0))
                .sum::<f64>()
                * m.pixel()
                * m.pixel()
        };
        let gc = g.coarsened(2).unwrap();
        assert!((total(&gc) - total(&g)).abs() < 1e-6 * total(&g));
        assert_eq!(g.coarsened(1).unwrap().phi(), g.phi());
        assert!(g.coarsened(0).is_err());
    }

    /// Binary square of `side` pixels turned by `deg` degrees, centre offset `off`.
    fn square(side: f64, deg: f64, off: [f64; 2]) -> Mask {
        let n = (side * 1.5).ceil() as usize + 8;
        let c = [0.5 * n as f64 + off[0], 0.5 * n as f64 + off[1]];
        let (s, co) = deg.to_radians().sin_cos();
        Mask::from_fn(n, n, 1e-3, |col, row| {
            let x = col as f64 + 0.5 - c[0];
            let y = (n - 1 - row) as f64 + 0.5 - c[1];
            let u = co * x + s * y;
            let v = -s * x + co * y;
            u.abs() < 0.5 * side && v.abs() < 0.5 * side
        })
        .unwrap()
        .0
    }

    const OFFSETS: [[f64; 2]; 3] = [[0.0, 0.0], [0.31, 0.17], [0.47, 0.73]];

    #[test]
    fn disc_perimeter_within_one_percent() {
        // Exact: P = π·d (common practice, no source). The Hagen–Poiseuille check case needs P to
        // better than 1 % (common practice, no source).
        let mut worst: f64 = 0.0;
        for d in [100.0, 200.0, 400.0] {
            for off in OFFSETS {
                let m = disc(d, off);
                let w = m.walls(m.pixel());
                let err = w.perimeter / (PI * d * 1e-3) - 1.0;
                eprintln!(
                    "disc d = {d} px, offset {off:?}: perimeter error {:+.4} %",
                    100.0 * err
                );
                assert_eq!(w.names, vec!["contour 1".to_string()]);
                let sum: f64 = w.samples.iter().map(|s| s.ds).sum();
                assert!((sum - w.perimeter).abs() < 1e-12 * w.perimeter);
                assert!(err.abs() < 0.01, "d = {d}: {err}");
                worst = worst.max(err.abs());
            }
        }
        eprintln!("discs: worst perimeter error {:.4} %", 100.0 * worst);
        assert!(worst < 0.003, "worst {worst}");
    }

    #[test]
    fn square_perimeter_within_one_percent() {
        // Exact: P = 4·side (common practice, no source).
        for side in [100.0, 200.0] {
            for deg in [0.0, 30.0, 45.0, 10.0] {
                for off in OFFSETS {
                    let m = square(side, deg, off);
                    let w = m.walls(m.pixel());
                    let err = w.perimeter / (4.0 * side * 1e-3) - 1.0;
                    eprintln!(
                        "square {side} px at {deg}°, offset {off:?}: perimeter error {:+.4} %",
                        100.0 * err
                    );
                    assert!(err.abs() < 0.01, "side {side}, {deg}°: {err}");
                }
            }
        }
    }

    /// Binary image of `inside(x, y)` (pixel units, origin at the image centre shifted by
    /// `off`), n × n pixels of size 1.
    fn raster(n: usize, off: [f64; 2], inside: impl Fn(f64, f64) -> bool) -> Mask {
        let c = [0.5 * n as f64 + off[0], 0.5 * n as f64 + off[1]];
        Mask::from_fn(n, n, 1.0, |col, row| {
            inside(col as f64 + 0.5 - c[0], (n - 1 - row) as f64 + 0.5 - c[1])
        })
        .unwrap()
        .0
    }

    #[test]
    fn polygon_and_rounded_corner_perimeters() {
        // Regular n-gon of circumradius R: P = 2nR·sin(π/n); rectangle w × h with corner
        // radius r: P = 2(w + h) − 8r + 2πr (common practice, no source).
        for (sides, ang) in [(3usize, 0.1f64), (6, 0.37), (8, 0.1)] {
            let rr = 60.0;
            let exact = 2.0 * sides as f64 * rr * (PI / sides as f64).sin();
            let apothem = rr * (PI / sides as f64).cos();
            for off in OFFSETS {
                let m = raster(140, off, |x, y| {
                    (0..sides).all(|k| {
                        let phi = ang + (k as f64 + 0.5) * 2.0 * PI / sides as f64;
                        x * phi.cos() + y * phi.sin() < apothem
                    })
                });
                let err = m.walls(1.0).perimeter / exact - 1.0;
                eprintln!(
                    "{sides}-gon R 60 px at {ang} rad, offset {off:?}: {:+.4} %",
                    100.0 * err
                );
                assert!(err.abs() < 0.01, "{sides}-gon: {err}");
            }
        }
        let (w, h) = (120.0f64, 60.0f64);
        for (r, ang) in [(5.0f64, 0.0f64), (10.0, 0.3), (20.0, 0.785)] {
            let (s, c) = ang.sin_cos();
            let exact = 2.0 * (w + h) - 8.0 * r + 2.0 * PI * r;
            for off in OFFSETS {
                let m = raster(150, off, |x, y| {
                    let (u, v) = ((c * x + s * y).abs(), (-s * x + c * y).abs());
                    let du = (u - (0.5 * w - r)).max(0.0);
                    let dv = (v - (0.5 * h - r)).max(0.0);
                    u < 0.5 * w && v < 0.5 * h && du * du + dv * dv < r * r
                });
                let err = m.walls(1.0).perimeter / exact - 1.0;
                eprintln!(
                    "rectangle 120 × 60 px, corner radius {r} px, at {ang} rad, offset {off:?}: \
                     {:+.4} %",
                    100.0 * err
                );
                assert!(err.abs() < 0.01, "r = {r}: {err}");
            }
        }
    }

    #[test]
    fn ellipse_and_annulus_perimeters() {
        // Ellipse a = 150, b = 75 px: Ramanujan's second approximation (from memory), far more
        // accurate than needed here.
        let (a, b) = (150.0, 75.0);
        let n = 2 * a as usize + 8;
        let m = Mask::from_fn(n, n, 1.0, |col, row| {
            let x = col as f64 + 0.5 - 0.5 * n as f64 - 0.23;
            let y = (n - 1 - row) as f64 + 0.5 - 0.5 * n as f64 - 0.41;
            let (s, c) = 0.4f64.sin_cos();
            let (u, v) = (c * x + s * y, -s * x + c * y);
            (u / a).powi(2) + (v / b).powi(2) < 1.0
        })
        .unwrap()
        .0;
        let hh = ((a - b) / (a + b)).powi(2);
        let ram = PI * (a + b) * (1.0 + 3.0 * hh / (10.0 + (4.0 - 3.0 * hh).sqrt()));
        let err = m.walls(1.0).perimeter / ram - 1.0;
        eprintln!(
            "ellipse 300 × 150 px: perimeter error {:+.4} %",
            100.0 * err
        );
        assert!(err.abs() < 0.01);

        // Annulus do = 200, di = 100 px: P = π·(do + di) (common practice, no source); the hole
        // is a second contour whose normals point out of the fluid, i.e. towards the centre.
        let n = 210;
        let c = 105.0;
        let m = Mask::from_fn(n, n, 1.0, |col, row| {
            let x = col as f64 + 0.5 - c;
            let y = (n - 1 - row) as f64 + 0.5 - c;
            let r2 = x * x + y * y;
            (50.0 * 50.0..100.0 * 100.0).contains(&r2)
        })
        .unwrap()
        .0;
        let w = m.walls(1.0);
        assert_eq!(w.names, vec!["contour 1", "contour 2"]);
        let err = w.perimeter / (PI * 300.0) - 1.0;
        eprintln!("annulus 200/100 px: perimeter error {:+.4} %", 100.0 * err);
        assert!(err.abs() < 0.01);
        let mut len = [0.0; 2];
        for s in &w.samples {
            let r = [s.point[0] - c, s.point[1] - c];
            let radial = (r[0] * s.normal[0] + r[1] * s.normal[1]) / r[0].hypot(r[1]);
            let rad = r[0].hypot(r[1]);
            if s.wall == 0 {
                assert!(radial > 0.9, "{s:?}");
                assert!((rad - 100.0).abs() < 0.75, "{s:?}");
            } else {
                assert!(radial < -0.9, "{s:?}");
                assert!((rad - 50.0).abs() < 0.75, "{s:?}");
            }
            assert!((s.normal[0].hypot(s.normal[1]) - 1.0).abs() < 1e-12);
            len[s.wall] += s.ds;
        }
        assert!((len[0] / (PI * 200.0) - 1.0).abs() < 0.01);
        assert!((len[1] / (PI * 100.0) - 1.0).abs() < 0.01);
        // Samples ordered by wall, then by arc length.
        for pair in w.samples.windows(2) {
            assert!(
                pair[0].wall < pair[1].wall
                    || (pair[0].wall == pair[1].wall && pair[0].s < pair[1].s)
            );
        }
        assert_eq!(w.area, m.fluid_pixels() as f64);
    }

    #[test]
    fn spacing_splits_faces() {
        let m = disc(40.0, [0.2, 0.1]);
        let coarse = m.walls(m.pixel());
        let fine = m.walls(0.3 * m.pixel());
        assert!(fine.samples.len() > 2 * coarse.samples.len());
        assert!(fine
            .samples
            .iter()
            .all(|s| s.ds <= 0.3 * m.pixel() * (1.0 + 1e-12)));
        assert!((fine.perimeter - coarse.perimeter).abs() < 1e-12 * coarse.perimeter);
        // A nonsensical spacing falls back to one sample per face.
        assert_eq!(m.walls(f64::NAN).samples.len(), coarse.samples.len());
    }

    #[test]
    fn thin_and_tiny_features_do_not_break() {
        // A one-pixel-wide line of 50 pixels: P = 2·50 + 2 (common practice, no source).
        let m = Mask::from_fn(60, 5, 1.0, |c, r| r == 2 && (5..55).contains(&c))
            .unwrap()
            .0;
        let w = m.walls(1.0);
        assert_eq!(w.names.len(), 1);
        assert!((w.perimeter - 102.0).abs() < 0.5, "{}", w.perimeter);
        // A diagonal line of single pixels touching at corners: separate pixels, each a square
        // of perimeter 4.
        let (m, warn) = Mask::from_fn(12, 12, 1.0, |c, r| c == r && c > 0 && c < 11).unwrap();
        assert!(
            warn.iter().any(|s| s.contains("touch only at a corner")),
            "{warn:?}"
        );
        let w = m.walls(1.0);
        assert_eq!(w.names.len(), 10);
        assert!((w.perimeter - 40.0).abs() < 1e-9, "{}", w.perimeter);
        // A one-pixel-wide diagonal band that is 4-connected (a staircase of width 1).
        let m = Mask::from_fn(40, 40, 1.0, |c, r| c == r || c == r + 1)
            .unwrap()
            .0;
        let w = m.walls(0.5);
        assert_eq!(w.names.len(), 1);
        assert!(w.perimeter.is_finite() && w.perimeter > 0.0);
        // A checkerboard: every fluid pixel is its own contour.
        let m = Mask::from_fn(9, 7, 1.0, |c, r| (c + r) % 2 == 0).unwrap().0;
        let w = m.walls(1.0);
        assert_eq!(w.names.len(), m.fluid_pixels());
        assert!((w.perimeter - 4.0 * m.fluid_pixels() as f64).abs() < 1e-9);
        // A single pixel filling the image.
        let m = Mask::from_fn(1, 1, 2.0, |_, _| true).unwrap().0;
        let w = m.walls(2.0);
        assert!((w.perimeter - 8.0).abs() < 1e-12);
        assert_eq!(w.area, 4.0);
    }

    #[test]
    fn crossings_of_a_small_mask() {
        // Pixel size 0.5; rows from the top (X = fluid):
        //   row 0:  . X X . X      y in [1.0, 1.5]
        //   row 1:  X X . . X      y in [0.5, 1.0]
        //   row 2:  . . . . .      y in [0.0, 0.5]
        let pattern = [".XX.X", "XX..X", "....."];
        let m = Mask::from_fn(5, 3, 0.5, |c, r| pattern[r].as_bytes()[c] == b'X')
            .unwrap()
            .0;
        let close = |a: Vec<f64>, b: &[f64]| {
            a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).abs() < 1e-12)
        };
        let c = m.wall_crossings([-1.0, 0.75], [1.0, 0.0]);
        assert!(close(c.clone(), &[1.0, 2.0, 3.0, 3.5]), "{c:?}");
        let c = m.wall_crossings([3.0, 0.75], [-1.0, 0.0]);
        assert!(close(c.clone(), &[0.5, 1.0, 2.0, 3.0]), "{c:?}");
        let c = m.wall_crossings([0.0, 1.25], [1.0, 0.0]);
        assert!(close(c.clone(), &[0.5, 1.5, 2.0, 2.5]), "{c:?}");
        let c = m.wall_crossings([0.75, -1.0], [0.0, 1.0]);
        assert!(close(c.clone(), &[1.5, 2.5]), "{c:?}");
        let c = m.wall_crossings([0.75, 2.0], [0.0, -1.0]);
        assert!(close(c.clone(), &[0.5, 1.5]), "{c:?}");
        // Column 4: fluid in rows 0 and 1, through the top border.
        let c = m.wall_crossings([2.25, 0.0], [0.0, 1.0]);
        assert!(close(c.clone(), &[0.5, 1.5]), "{c:?}");
        // Lines missing the fluid or the image.
        assert!(m.wall_crossings([0.0, 0.25], [1.0, 0.0]).is_empty());
        assert!(m.wall_crossings([0.0, 2.0], [1.0, 0.0]).is_empty());
        assert!(m.wall_crossings([-0.1, 0.0], [0.0, 1.0]).is_empty());
        assert!(m.wall_crossings([f64::NAN, 0.0], [1.0, 0.0]).is_empty());
        // A diagonal line (not asked for by the grid, but answered): from (0, 0.5) at 45° it
        // passes pixels (col 0, row 1) fluid, then (col 1, row 0) at the corner (0.5, 1.0),
        // fluid, and leaves the image at (1.0, 1.5).
        let c = m.wall_crossings([0.0, 0.5], [1.0, 1.0]);
        assert!(close(c.clone(), &[0.0, 1.0]), "{c:?}");
        // Inside tests and the fluid box.
        assert!(m.contains([0.25, 0.75]) && m.contains([2.4, 1.4]));
        assert!(!m.contains([1.25, 0.75]) && !m.contains([-0.1, 0.75]) && !m.contains([0.25, 1.6]));
        assert_eq!(m.bbox(), ([0.0, 0.5], [2.5, 1.5]));
    }

    #[test]
    fn lattice_maps_nodes_to_pixel_centres() {
        let (w, h) = (7, 4);
        let fl = |c: usize, r: usize| (c * 3 + r * 5).is_multiple_of(4) || (c == 2 && r == 3);
        let p = 0.25;
        let m = Mask::from_fn(w, h, p, fl).unwrap().0;
        let l = m.lattice().unwrap();
        assert_eq!(l.origin, [0.125, 0.125]);
        assert_eq!((l.pitch, l.nx, l.ny), (p, w, h));
        for i in 0..w {
            for j in 0..h {
                let node = [l.origin[0] + i as f64 * p, l.origin[1] + j as f64 * p];
                assert_eq!(m.contains(node), fl(i, h - 1 - j), "node ({i}, {j})");
                assert_eq!(m.is_fluid(i, h - 1 - j), fl(i, h - 1 - j));
            }
        }
        // Pixel (col 2, row 3) is the bottom row: y in [0, p].
        assert!(m.contains([2.5 * p, 0.1 * p]));
    }

    #[test]
    fn bad_masks_are_refused_and_borders_warned() {
        let e = Mask::from_fn(4, 4, 1.0, |_, _| false).unwrap_err();
        assert!(e.to_string().contains("no fluid pixels"), "{e}");
        let img = image::DynamicImage::new_luma8(0, 0);
        let e = Mask::from_image(&img, &MaskOptions::default(), "empty.png").unwrap_err();
        assert!(matches!(e, Error::Mask { .. }));
        assert!(
            e.to_string().starts_with("empty.png: the image is empty"),
            "{e}"
        );
        assert!(Mask::from_fn(0, 3, 1.0, |_, _| true).is_err());
        for bad in [0.0, -1e-3, f64::NAN, f64::INFINITY] {
            let e = Mask::from_fn(2, 2, bad, |_, _| true).unwrap_err();
            assert!(e.to_string().contains("--pixel"), "{e}");
            let opts = MaskOptions {
                pixel: bad,
                ..MaskOptions::default()
            };
            let img = image::DynamicImage::new_luma8(2, 2);
            assert!(Mask::from_image(&img, &opts, "x.png").is_err());
        }
        // Fluid on the border: warned, and the border is a wall.
        let (m, warn) = Mask::from_fn(3, 3, 1.0, |_, _| true).unwrap();
        assert_eq!(warn.len(), 1);
        assert!(
            warn[0].contains("8 fluid pixels touch the image border"),
            "{warn:?}"
        );
        // The 3 × 3 staircase has length 12; a shape this small could as well be rounder, so
        // the estimate is a little less.
        let per = m.walls(1.0).perimeter;
        assert!((11.0..=12.0 + 1e-9).contains(&per), "{per}");
        assert_eq!(m.wall_crossings([-1.0, 1.5], [1.0, 0.0]), vec![1.0, 4.0]);
        let (_, warn) = Mask::from_fn(3, 3, 1.0, |c, r| c == 1 && r == 1).unwrap();
        assert!(warn.is_empty(), "{warn:?}");
    }

    #[test]
    fn png_files_dark_light_threshold_alpha() {
        let dir = tempfile::tempdir().unwrap();
        // 20 × 10 image: a 6 × 4 block of luma 100 on a background of luma 200, and one pixel of
        // luma 20 at (0, 0).
        let img = image::GrayImage::from_fn(20, 10, |x, y| {
            if (5..11).contains(&x) && (3..7).contains(&y) {
                image::Luma([100])
            } else if x == 0 && y == 0 {
                image::Luma([20])
            } else {
                image::Luma([200])
            }
        });
        let path = dir.path().join("mask.png");
        img.save(&path).unwrap();
        let mm = MaskOptions {
            pixel: 1e-4,
            ..MaskOptions::default()
        };
        let (m, warn) = Mask::load(&path, &mm).unwrap();
        assert_eq!((m.width(), m.height(), m.fluid_pixels()), (20, 10, 25));
        assert!(m.is_fluid(5, 3) && m.is_fluid(0, 0) && !m.is_fluid(4, 3));
        assert_eq!(warn.len(), 1, "{warn:?}");
        assert!(warn[0].contains("mask.png") && warn[0].contains("border"));
        assert!((m.fluid_area() - 25e-8).abs() < 1e-20);
        // Threshold: at 90 only the darkest pixel is fluid; at 10 none.
        let t90 = MaskOptions {
            threshold: 90,
            ..mm
        };
        assert_eq!(Mask::load(&path, &t90).unwrap().0.fluid_pixels(), 1);
        let t10 = MaskOptions {
            threshold: 10,
            ..mm
        };
        let e = Mask::load(&path, &t10).unwrap_err().to_string();
        assert!(e.contains("mask.png"), "{e}");
        assert!(
            e.contains(
                "no fluid pixels at threshold 10 (fluid = dark); check --threshold or --mask-fluid"
            ),
            "{e}"
        );
        // Light fluid: the background (200 ≥ 150) is fluid, the block and the dark pixel are not.
        let light = MaskOptions {
            fluid: FluidColour::Light,
            threshold: 150,
            ..mm
        };
        let (m, _) = Mask::load(&path, &light).unwrap();
        assert_eq!(m.fluid_pixels(), 200 - 25);
        assert!(!m.is_fluid(5, 3) && m.is_fluid(4, 3));
        let w = m.walls(m.pixel());
        assert_eq!(w.names.len(), 2); // the outer border and the hole of the block
                                      // The same image as BMP.
        let bmp = dir.path().join("mask.bmp");
        img.save(&bmp).unwrap();
        assert_eq!(Mask::load(&bmp, &mm).unwrap().0.fluid_pixels(), 25);
        // Fully transparent pixels are solid whatever their colour.
        let rgba = image::RgbaImage::from_fn(8, 8, |x, _| {
            if x < 4 {
                image::Rgba([0, 0, 0, 0])
            } else {
                image::Rgba([0, 0, 0, 255])
            }
        });
        let alpha = dir.path().join("alpha.png");
        rgba.save(&alpha).unwrap();
        assert_eq!(Mask::load(&alpha, &mm).unwrap().0.fluid_pixels(), 32);
        // A missing file is an I/O error naming it; a file that is no image a mask error.
        let missing = dir.path().join("missing.png");
        let e = Mask::load(&missing, &mm).unwrap_err();
        assert!(matches!(e, Error::Io { .. }));
        assert!(e.to_string().contains("missing.png"));
        let junk = dir.path().join("junk.png");
        std::fs::write(&junk, b"this is not a picture").unwrap();
        let e = Mask::load(&junk, &mm).unwrap_err();
        assert!(matches!(e, Error::Mask { .. }), "{e}");
        assert!(e.to_string().contains("junk.png"), "{e}");
        let junk = dir.path().join("junk.dat");
        std::fs::write(&junk, b"this is not a picture").unwrap();
        let e = Mask::load(&junk, &mm).unwrap_err();
        assert!(e.to_string().contains("junk.dat"), "{e}");
    }
}
