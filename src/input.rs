//! Where a cross-section comes from, and its loading into a [`Domain`].
//!
//! Owns: [`Input`] (a shape file, a built-in shape, a mask image, an SVG drawing, or a shape
//! built in memory), which of them a command-line argument names ([`InputKind::of`]), the
//! loading of each into a domain with its label and warnings ([`Input::load`]), and the domain
//! of a mask in either mode ([`mask_domain`]: the traced contour or the pixel staircase).
//!
//! Invariant: knows no grid and no solver; parsing of each format stays in
//! [`crate::geometry`].

use crate::error::{Error, Result};
use crate::geometry::builtin::{looks_like_builtin, parse_builtin};
use crate::geometry::mask::{Mask, MaskMode, MaskOptions};
use crate::geometry::shapefile::load_shape_file;
use crate::geometry::svg::load_svg;
use crate::geometry::trace::Traced;
use crate::geometry::{Domain, Shape, MAX_COORDINATE_M, MAX_EXTENT_M, MIN_EXTENT_M};
use crate::post::WallKind;
use std::path::{Path, PathBuf};

/// Where the cross-section comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum Input {
    /// A TOML shape file.
    ShapeFile(PathBuf),
    /// A built-in parametric shape, `name:key=value,...`.
    Builtin(String),
    /// A mask image.
    Mask { path: PathBuf, options: MaskOptions },
    /// An SVG drawing; `scale` is metres per user unit (overrides the document's size).
    Svg { path: PathBuf, scale: Option<f64> },
    /// A cross-section built in memory by a library caller (checked by [`Shape::validate`]
    /// when loaded).
    Shape(Shape),
}

/// Which kind of input a `SHAPE` argument names, judged by its form (the options each kind
/// needs, such as a mask's pixel size, are the caller's to add).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InputKind {
    /// `name:key=value,...` with a known name ([`Input::Builtin`]).
    Builtin,
    /// `*.toml` ([`Input::ShapeFile`]).
    ShapeFile,
    /// `*.png`, `*.bmp`, `*.tif`, `*.tiff` ([`Input::Mask`]).
    Mask,
    /// `*.svg` ([`Input::Svg`]).
    Svg,
}

impl InputKind {
    /// The kind of `arg`. A built-in spec wins unless a file of that name exists; otherwise the
    /// extension decides (any case). An argument with a colon that is no file goes to the
    /// built-in parser even with an unknown name, so that its message lists the known names.
    /// Anything else is an error naming `SHAPE`.
    pub fn of(arg: &str) -> Result<InputKind> {
        let lower = arg.to_ascii_lowercase();
        let ext = Path::new(&lower)
            .extension()
            .and_then(|e| e.to_str())
            .unwrap_or("");
        if looks_like_builtin(arg) {
            Ok(InputKind::Builtin)
        } else if ext == "toml" {
            Ok(InputKind::ShapeFile)
        } else if matches!(ext, "png" | "bmp" | "tif" | "tiff") {
            Ok(InputKind::Mask)
        } else if ext == "svg" {
            Ok(InputKind::Svg)
        } else if arg.contains(':') && !Path::new(arg).exists() {
            Ok(InputKind::Builtin)
        } else {
            Err(Error::param(
                "SHAPE",
                format!(
                    "'{arg}' is neither a shape file (*.toml), a mask image (*.png, *.bmp, \
                     *.tif), a drawing (*.svg) nor a built-in shape (see `canalis shapes`)"
                ),
            ))
        }
    }
}

/// Label and origin of an unnamed in-memory shape.
const IN_MEMORY: &str = "the given shape";

/// A cross-section loaded from its [`Input`], ready to be laid on a grid.
pub struct Loaded {
    /// A label for the cross-section: the shape's own name, else the file or the spec.
    pub name: String,
    pub domain: Box<dyn Domain>,
    /// What the walls are to the local fits (see [`mask_domain`]).
    pub wall_kind: WallKind,
    /// Notes on the input (an SVG's scale, a mask's dropped specks, ...).
    pub warnings: Vec<String>,
}

impl Input {
    /// The file or the spec, as messages name it.
    pub fn origin(&self) -> String {
        match self {
            Input::ShapeFile(p) | Input::Mask { path: p, .. } | Input::Svg { path: p, .. } => {
                p.display().to_string()
            }
            Input::Builtin(spec) => spec.clone(),
            Input::Shape(shape) => shape.name.clone().unwrap_or_else(|| IN_MEMORY.to_string()),
        }
    }

    /// Reads the input and builds its domain. A cross-section whose holes cover all its regions
    /// (no wetted wall, no area) is an error naming the input.
    pub fn load(&self) -> Result<Loaded> {
        let mut warnings = Vec::new();
        let (name, domain, wall_kind): (String, Box<dyn Domain>, WallKind) = match self {
            Input::ShapeFile(path) => {
                let shape = load_shape_file(path)?;
                let name = shape
                    .name
                    .clone()
                    .unwrap_or_else(|| path.display().to_string());
                (name, Box::new(shape), WallKind::Exact)
            }
            Input::Svg { path, scale } => {
                let (shape, w) = load_svg(path, *scale)?;
                warnings.extend(w);
                let name = shape
                    .name
                    .clone()
                    .unwrap_or_else(|| path.display().to_string());
                (name, Box::new(shape), WallKind::Exact)
            }
            Input::Builtin(spec) => {
                let shape = parse_builtin(spec)?;
                let name = shape.name.clone().unwrap_or_else(|| spec.clone());
                (name, Box::new(shape), WallKind::Exact)
            }
            Input::Shape(shape) => {
                shape.validate()?;
                (self.origin(), Box::new(shape.clone()), WallKind::Exact)
            }
            Input::Mask { path, options } => {
                let (domain, wall_kind, w) = load_mask_domain(path, options)?;
                warnings.extend(w);
                (path.display().to_string(), domain, wall_kind)
            }
        };
        let (lo, hi) = domain.bbox();
        let extent = (hi[0] - lo[0]).max(hi[1] - lo[1]);
        let far = [lo[0], lo[1], hi[0], hi[1]]
            .iter()
            .fold(0.0f64, |m, v| m.max(v.abs()));
        // Sizes a duct can have (a mask's from --pixel, a drawing's from --scale or its units).
        let sized_by = match self {
            Input::Mask { .. } => "--pixel",
            Input::Svg { .. } => "--scale",
            _ => "SHAPE",
        };
        if !(extent.is_finite() && (MIN_EXTENT_M..=MAX_EXTENT_M).contains(&extent)) {
            return Err(Error::param(
                sized_by,
                format!(
                    "{}: the cross-section is {extent:.3e} m across; canalis accepts \
                     {MIN_EXTENT_M:e} m to {MAX_EXTENT_M:e} m (check the units{})",
                    self.origin(),
                    if sized_by == "SHAPE" {
                        String::new()
                    } else {
                        format!(" and {sized_by}")
                    }
                ),
            ));
        }
        if far.is_nan() || far > MAX_COORDINATE_M {
            return Err(Error::param(
                sized_by,
                format!(
                    "{}: the cross-section lies {far:.3e} m from the origin, farther than the \
                     {MAX_COORDINATE_M:e} m canalis accepts",
                    self.origin()
                ),
            ));
        }
        if domain.lattice().is_none() && domain.walls(extent / 64.0).area <= 1e-12 * extent * extent
        {
            return Err(Error::geometry(format!(
                "{}: no fluid is left: the holes cover every region",
                self.origin()
            )));
        }
        Ok(Loaded {
            name,
            domain,
            wall_kind,
            warnings,
        })
    }
}

/// Reads a mask image as a solve does: [`Mask::load`], then [`Mask::drop_specks`] below the
/// smallest feature of `options`. Returns the mask and the warnings of both.
pub fn load_mask(path: &Path, options: &MaskOptions) -> Result<(Mask, Vec<String>)> {
    let (mut mask, mut warnings) = Mask::load(path, options)?;
    let origin = path.display().to_string();
    let min_pixels = options.min_feature.pixels(mask.pixel());
    warnings.extend(mask.drop_specks(min_pixels, &origin)?);
    Ok((mask, warnings))
}

/// Reads a mask image and builds the domain its options ask for: [`mask_domain`] after
/// [`load_mask`]. Returns the domain, what its walls are to the local fits and the warnings.
pub fn load_mask_domain(
    path: &Path,
    options: &MaskOptions,
) -> Result<(Box<dyn Domain>, WallKind, Vec<String>)> {
    let (mask, mut warnings) = load_mask(path, options)?;
    let (domain, wall_kind, w) = mask_domain(mask, options.mode);
    warnings.extend(w);
    Ok((domain, wall_kind, warnings))
}

/// The domain of a mask in the given mode, what its walls are to the local fits, and a note on
/// what the walls are.
///
/// Traced walls are exact walls to the solver: the wall correction and the wall-shear fit with
/// the wall points as data (both assume a smooth wall through the cut points, which a traced
/// polyline is to within its sub-pixel vertices) measured better on traced circles and
/// ellipses than without them (tests/mask.rs). The staircase of `pixels` mode is not: it has a
/// re-entrant corner at every step.
pub fn mask_domain(mask: Mask, mode: MaskMode) -> (Box<dyn Domain>, WallKind, Vec<String>) {
    match mode {
        MaskMode::Pixels => (
            Box::new(mask),
            WallKind::Staircase,
            vec![
                "mask input: the walls are the pixel faces (a staircase); the perimeter is a \
                 sub-pixel contour estimate and the local wall shear is approximate"
                    .to_string(),
            ],
        ),
        MaskMode::Traced => {
            let traced = Traced::from_mask(&mask);
            let st = traced.stats();
            let mut notes = Vec::new();
            if st.vertices > 0 && 2 * st.binary_vertices > st.vertices {
                notes.push(format!(
                    "mask input: the image is binary along {:.0} % of the traced walls (no grey \
                     levels there), so those walls were smoothed; features only a few pixels \
                     across are not resolved (--mask-mode pixels gives the staircase)",
                    100.0 * st.binary_vertices as f64 / st.vertices as f64
                ));
            }
            (Box::new(traced), TRACED_WALLS, notes)
        }
    }
}

/// Traced mask walls are treated as exact walls (measured; see [`mask_domain`]).
const TRACED_WALLS: WallKind = WallKind::Exact;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kinds_by_form() {
        assert_eq!(InputKind::of("circle:d=8mm").unwrap(), InputKind::Builtin);
        assert_eq!(InputKind::of("ducts/a.toml").unwrap(), InputKind::ShapeFile);
        assert_eq!(InputKind::of("scan.PNG").unwrap(), InputKind::Mask);
        assert_eq!(InputKind::of("scan.tiff").unwrap(), InputKind::Mask);
        assert_eq!(InputKind::of("plate.svg").unwrap(), InputKind::Svg);
        // An unknown built-in name still reaches the built-in parser, whose message lists the
        // known names.
        assert_eq!(InputKind::of("blob:d=8mm").unwrap(), InputKind::Builtin);
        match InputKind::of("notes.txt") {
            Err(Error::InvalidParameter { parameter, message }) => {
                assert_eq!(parameter, "SHAPE");
                assert!(message.contains("notes.txt"), "{message}");
            }
            other => panic!("{other:?}"),
        }
    }
}
