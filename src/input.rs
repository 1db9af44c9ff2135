//! Where a cross-section comes from, and its loading into a [`Domain`].
//!
//! Owns: [`Input`] (a shape file, a built-in shape, a mask image, an SVG drawing), the loading
//! of each into a domain with its label and warnings ([`Input::load`]), and the domain of a
//! mask in either mode ([`mask_domain`]: the traced contour or the pixel staircase).
//!
//! Invariant: knows no grid and no solver; parsing of each format stays in
//! [`crate::geometry`].

use crate::error::{Error, Result};
use crate::geometry::builtin::parse_builtin;
use crate::geometry::mask::{Mask, MaskMode, MaskOptions};
use crate::geometry::shapefile::load_shape_file;
use crate::geometry::svg::load_svg;
use crate::geometry::trace::Traced;
use crate::geometry::Domain;
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
}

/// A cross-section loaded from its [`Input`], ready to be laid on a grid.
pub struct Loaded {
    /// A label for the cross-section: the shape's own name, else the file or the spec.
    pub name: String,
    pub domain: Box<dyn Domain>,
    /// Whether the walls may serve as exact walls (see [`mask_domain`] and
    /// [`crate::pipeline::solve_unit`]).
    pub exact_wall: bool,
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
        }
    }

    /// Reads the input and builds its domain. A cross-section whose holes cover all its regions
    /// (no wetted wall, no area) is an error naming the input.
    pub fn load(&self) -> Result<Loaded> {
        let mut warnings = Vec::new();
        let (name, domain, exact_wall): (String, Box<dyn Domain>, bool) = match self {
            Input::ShapeFile(path) => {
                let shape = load_shape_file(path)?;
                let name = shape
                    .name
                    .clone()
                    .unwrap_or_else(|| path.display().to_string());
                (name, Box::new(shape), true)
            }
            Input::Svg { path, scale } => {
                let (shape, w) = load_svg(path, *scale)?;
                warnings.extend(w);
                let name = shape
                    .name
                    .clone()
                    .unwrap_or_else(|| path.display().to_string());
                (name, Box::new(shape), true)
            }
            Input::Builtin(spec) => {
                let shape = parse_builtin(spec)?;
                let name = shape.name.clone().unwrap_or_else(|| spec.clone());
                (name, Box::new(shape), true)
            }
            Input::Mask { path, options } => {
                let (domain, exact_wall, w) = load_mask_domain(path, options)?;
                warnings.extend(w);
                (path.display().to_string(), domain, exact_wall)
            }
        };
        let (lo, hi) = domain.bbox();
        let extent = (hi[0] - lo[0]).max(hi[1] - lo[1]);
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
            exact_wall,
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
/// [`load_mask`]. Returns the domain, whether its walls may serve as exact walls (see
/// [`crate::pipeline::solve_unit`]) and the warnings.
pub fn load_mask_domain(
    path: &Path,
    options: &MaskOptions,
) -> Result<(Box<dyn Domain>, bool, Vec<String>)> {
    let (mask, mut warnings) = load_mask(path, options)?;
    let (domain, exact_wall, w) = mask_domain(mask, options.mode);
    warnings.extend(w);
    Ok((domain, exact_wall, warnings))
}

/// The domain of a mask in the given mode, whether its walls count as exact, and a note on
/// what the walls are.
///
/// Traced walls are exact walls to the solver: the wall correction and the wall-shear fit with
/// the wall points as data (both assume a smooth wall through the cut points, which a traced
/// polyline is to within its sub-pixel vertices) measured better on traced circles and
/// ellipses than without them (tests/mask.rs). The staircase of `pixels` mode is not: it has a
/// re-entrant corner at every step.
pub fn mask_domain(mask: Mask, mode: MaskMode) -> (Box<dyn Domain>, bool, Vec<String>) {
    match mode {
        MaskMode::Pixels => (
            Box::new(mask),
            false,
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
            (Box::new(traced), TRACED_EXACT_WALL, notes)
        }
    }
}

/// Whether traced mask walls are treated as exact walls (measured; see [`mask_domain`]).
const TRACED_EXACT_WALL: bool = true;
