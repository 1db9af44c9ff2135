//! The files of `canalis solve SHAPE --out DIR`.
//!
//! Owns: which files `--out` writes ([`FILES`]), the refusal to overwrite any of them without
//! `--force` (all targets are checked before the first is written, so a refused run leaves
//! nothing half-written), and the scaling of the unit solution for display: with an operating
//! point u = (G/μ)·ũ in m/s and τ = G·τ̃ in Pa; without one u/ū and τ/τ̄ (ū = I/A from the flow
//! integral I = ∫ũ dA, τ̄ the perimeter mean of τ̃).
//!
//! * [`png`]: `velocity.png`, `wall_shear.png` and `temperature_h1.png` (the H1 temperature
//!   θ = φ/φ_b, when heat transfer was solved; rasterised here, embedded font, no system
//!   fonts needed);
//! * [`fields`]: `velocity.csv`, `wall_shear.csv` and `velocity.vti` (VTK XML ImageData);
//! * [`entrance`]: `entrance.png` and `entrance.csv` (the thermal entrance curves), only when
//!   the run marched the thermal entrance ([`entrance::FILES`], after [`FILES`]).
//!
//! Invariant: consumes an [`Outcome`] and computes no physics; every number it writes is a
//! value of the outcome times a scale factor stated above.

pub mod entrance;
pub mod fields;
pub mod png;

use crate::error::{Error, Result};
use crate::outcome::Outcome;
use crate::report;
use std::path::{Path, PathBuf};

/// Every file `--out` writes, in the order written.
pub const FILES: [&str; 7] = [
    "report.json",
    "velocity.csv",
    "wall_shear.csv",
    "velocity.vti",
    "velocity.png",
    "wall_shear.png",
    "temperature_h1.png",
];

/// Default width of the pictures, pixels.
pub const DEFAULT_IMAGE_WIDTH: u32 = 1200;
/// Narrowest picture whose labels still fit.
pub const MIN_IMAGE_WIDTH: u32 = 400;
/// Widest picture accepted (an 8000 px sheet is already ~200 MB of pixels in memory).
pub const MAX_IMAGE_WIDTH: u32 = 8000;

/// How to write the files of `--out`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OutputOptions {
    /// Width of the pictures, pixels (the height follows the shape).
    pub image_width: u32,
    /// Replace files that already exist.
    pub force: bool,
}

impl Default for OutputOptions {
    fn default() -> Self {
        OutputOptions {
            image_width: DEFAULT_IMAGE_WIDTH,
            force: false,
        }
    }
}

/// The paths `--out dir` writes: [`FILES`], then [`entrance::FILES`] when the run marches the
/// thermal entrance (`entrance`).
pub fn targets(dir: &Path, entrance: bool) -> Vec<PathBuf> {
    let extra: &[&str] = if entrance { &entrance::FILES } else { &[] };
    FILES.iter().chain(extra).map(|f| dir.join(f)).collect()
}

/// Refuses when any target file exists and `force` is not set, naming the first one in the way
/// (`entrance`: the run marches the thermal entrance, see [`targets`]).
pub fn check_targets(dir: &Path, force: bool, entrance: bool) -> Result<()> {
    if force {
        return Ok(());
    }
    match targets(dir, entrance).into_iter().find(|p| p.exists()) {
        Some(p) => Err(Error::param(
            "--out",
            format!(
                "{} already exists; not overwritten (use --force to replace it)",
                p.display()
            ),
        )),
        None => Ok(()),
    }
}

fn check_width(width: u32) -> Result<()> {
    if !(MIN_IMAGE_WIDTH..=MAX_IMAGE_WIDTH).contains(&width) {
        return Err(Error::param(
            "--image-width",
            format!(
                "{width} px is out of range; use {MIN_IMAGE_WIDTH} to {MAX_IMAGE_WIDTH} \
                 (the default is {DEFAULT_IMAGE_WIDTH})"
            ),
        ));
    }
    Ok(())
}

/// Refuses an `--image-width` outside [`MIN_IMAGE_WIDTH`]..=[`MAX_IMAGE_WIDTH`] (for checking
/// before a long solve).
pub fn check_options(opts: &OutputOptions) -> Result<()> {
    check_width(opts.image_width)
}

/// Writes every file of [`targets`] into `dir` (created if missing) and returns their paths.
/// Nothing is written when any target exists and `opts.force` is not set; all files are
/// rendered in memory first, so a failure while rendering leaves none behind either.
pub fn write_all(outcome: &Outcome, dir: &Path, opts: &OutputOptions) -> Result<Vec<PathBuf>> {
    check_width(opts.image_width)?;
    let marched = outcome.entrance.is_some();
    check_targets(dir, opts.force, marched)?;
    let scale = Scale::of(outcome);
    let json = serde_json::to_string_pretty(&report::json_report(outcome))
        .map_err(|e| Error::param("--out", format!("the report could not be serialised: {e}")))?
        + "\n";
    // The temperature map exists only when heat transfer was solved.
    let mut contents: Vec<Option<Vec<u8>>> = vec![
        Some(json.into_bytes()),
        Some(fields::velocity_csv(outcome, &scale).into_bytes()),
        Some(fields::wall_shear_csv(outcome, &scale).into_bytes()),
        Some(fields::velocity_vti(outcome, &scale)),
        Some(png::velocity_png(outcome, &scale, opts.image_width)?),
        Some(png::wall_shear_png(outcome, &scale, opts.image_width)?),
        png::temperature_h1_png(outcome, opts.image_width)?,
    ];
    contents.extend(entrance::files(outcome, opts.image_width)?);
    std::fs::create_dir_all(dir).map_err(|source| Error::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let mut written = Vec::with_capacity(contents.len());
    for (path, bytes) in targets(dir, marched).into_iter().zip(contents) {
        let Some(bytes) = bytes else { continue };
        std::fs::write(&path, bytes).map_err(|source| Error::Io {
            path: path.clone(),
            source,
        })?;
        written.push(path);
    }
    Ok(written)
}

/// How the unit solution is shown: scale factors from ũ and τ̃ to the displayed quantities,
/// with their labels.
#[derive(Debug, Clone, PartialEq)]
pub struct Scale {
    /// Displayed velocity per ũ: G/μ (m/s per m²) at an operating point, else 1/ū.
    pub u_factor: f64,
    /// Displayed wall shear per τ̃: G (Pa per m) at an operating point, else 1/τ̄.
    pub tau_factor: f64,
    /// Mean wall shear in displayed units (1 without an operating point).
    pub tau_mean: f64,
    /// Mean velocity in displayed units (1 without an operating point).
    pub u_mean: f64,
    /// True at an operating point (SI units), false for the ratios.
    pub physical: bool,
    /// True when the wall shear is shown in Pa: at a laminar operating point only. Beyond the
    /// laminar range the laminar distribution is shown over its mean (the turbulent one is not
    /// the laminar one scaled).
    pub tau_physical: bool,
    /// False at an operating point beyond the laminar range: the fields shown are the laminar
    /// solution's, the velocity scaled to carry the operating point's flow rate.
    pub laminar: bool,
}

impl Scale {
    pub fn of(o: &Outcome) -> Scale {
        let f = &o.unit.figures;
        match &o.operating {
            Some(op) if op.regime == crate::correlations::Regime::Laminar => {
                let g = op.pressure_gradient_pa_m;
                let u_factor = g / op.fluid.viscosity_pa_s;
                Scale {
                    u_factor,
                    tau_factor: g,
                    tau_mean: g * f.wall_shear_mean,
                    u_mean: u_factor * f.flow_integral / f.area,
                    physical: true,
                    tau_physical: true,
                    laminar: true,
                }
            }
            // Beyond the laminar range: the laminar profile that carries the flow rate Q
            // (u = (Q/I)·ũ), and the laminar wall-shear distribution over its mean.
            Some(op) => {
                let u_factor = op.flow_rate_m3_s / f.flow_integral;
                Scale {
                    u_factor,
                    tau_factor: 1.0 / f.wall_shear_mean,
                    tau_mean: 1.0,
                    u_mean: u_factor * f.flow_integral / f.area,
                    physical: true,
                    tau_physical: false,
                    laminar: false,
                }
            }
            None => Scale {
                u_factor: f.area / f.flow_integral,
                tau_factor: 1.0 / f.wall_shear_mean,
                tau_mean: 1.0,
                u_mean: 1.0,
                physical: false,
                tau_physical: false,
                laminar: true,
            },
        }
    }

    /// Column / array name of the velocity.
    pub fn u_name(&self) -> &'static str {
        if self.physical {
            "u_m_s"
        } else {
            "u_over_u_mean"
        }
    }

    /// Axis label of the velocity.
    pub fn u_label(&self) -> &'static str {
        if self.physical {
            "axial velocity u [m/s]"
        } else {
            "u / u_mean"
        }
    }

    /// Column name of the wall shear.
    pub fn tau_name(&self) -> &'static str {
        if self.tau_physical {
            "tau_pa"
        } else {
            "tau_unit_m"
        }
    }

    /// Axis label of the wall shear.
    pub fn tau_label(&self) -> &'static str {
        if self.tau_physical {
            "wall shear stress τ [Pa]"
        } else {
            "τ / τ_mean"
        }
    }
}

/// A length unit that suits a drawing of extent `extent` metres: (name, metres per unit).
pub fn display_unit(extent: f64) -> (&'static str, f64) {
    if extent >= 0.5 {
        ("m", 1.0)
    } else if extent >= 0.5e-3 {
        ("mm", 1e-3)
    } else {
        ("µm", 1e-6)
    }
}
