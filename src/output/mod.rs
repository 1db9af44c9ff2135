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
//!   the run marched the thermal entrance ([`entrance::FILES`], after [`FILES`]);
//! * [`hydrodynamic`]: `hydrodynamic.png` and `hydrodynamic.csv` (the developing-flow curves:
//!   apparent f·Re, K(x), u_max/ū), when the run marched the developing velocity, which it does
//!   whenever it marches the thermal entrance ([`hydrodynamic::FILES`], after the entrance's);
//! * `plot` (private): the page, text and axes the two line plots share.
//!
//! Invariant: consumes an [`Outcome`] and computes no physics; every number it writes is a
//! value of the outcome times a scale factor stated above.

pub mod entrance;
pub mod fields;
pub mod hydrodynamic;
mod plot;
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

/// The paths `--out dir` writes: [`FILES`], then [`entrance::FILES`] and
/// [`hydrodynamic::FILES`] when the run marches the entrance (`entrance`: the thermal march and
/// the developing velocity run together).
pub fn targets(dir: &Path, entrance: bool) -> Vec<PathBuf> {
    let extra: &[&str] = if entrance {
        &[
            entrance::FILES[0],
            entrance::FILES[1],
            hydrodynamic::FILES[0],
            hydrodynamic::FILES[1],
        ]
    } else {
        &[]
    };
    FILES.iter().chain(extra).map(|f| dir.join(f)).collect()
}

/// Refuses when any target file exists and `force` is not set, naming the first one in the way
/// (`entrance`: the run marches the entrance, see [`targets`]).
pub fn check_targets(dir: &Path, force: bool, entrance: bool) -> Result<()> {
    check_targets_protecting(dir, force, entrance, &[])
}

/// [`check_targets`], and refuses, even with `force`, a target that is one of `inputs` (the
/// files the run reads: same file by device and inode, or by canonical path) or a directory.
/// A symbolic link among the targets is never followed: without `force` it is in the way like
/// any file; with `force` the link itself is replaced, not the file it points to.
pub fn check_targets_protecting(
    dir: &Path,
    force: bool,
    entrance: bool,
    inputs: &[PathBuf],
) -> Result<()> {
    let refuse = |p: &Path, why: &str| Err(Error::param("--out", format!("{} {why}", p.display())));
    for p in targets(dir, entrance) {
        // symlink_metadata: the entry itself, never what a link points to.
        let Ok(meta) = std::fs::symlink_metadata(&p) else {
            continue;
        };
        if inputs.iter().any(|i| same_file(i, &p)) {
            return refuse(
                &p,
                "is an input of this run; not overwritten, even with --force",
            );
        }
        if meta.is_dir() {
            return refuse(&p, "is a directory; not overwritten");
        }
        if !force {
            let what = if meta.file_type().is_symlink() {
                "already exists (a symbolic link, not followed)"
            } else {
                "already exists"
            };
            return refuse(
                &p,
                &format!("{what}; not overwritten (use --force to replace it)"),
            );
        }
    }
    Ok(())
}

/// True when `input` and the directory entry `target` are the same file: the same device and
/// inode (hard links included), or the same canonical path. A symbolic link at `target` is
/// not the file it points to (it is replaced, not written through).
fn same_file(input: &Path, target: &Path) -> bool {
    let Ok(t) = std::fs::symlink_metadata(target) else {
        return false;
    };
    if t.file_type().is_symlink() {
        return false;
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let Ok(i) = std::fs::metadata(input) {
            if i.dev() == t.dev() && i.ino() == t.ino() {
                return true;
            }
        }
    }
    match (std::fs::canonicalize(input), std::fs::canonicalize(target)) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    }
}

/// Writes `bytes` to `path` through a new temporary file in the same directory, renamed over
/// `path`: the temporary file is created exclusively (never through an existing entry or
/// link), and the rename replaces the entry `path` itself, so a symbolic link there is
/// replaced, never followed, and a reader never sees a half-written file.
fn write_replacing(path: &Path, bytes: &[u8]) -> Result<()> {
    use std::io::Write;
    let io = |source: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let dir = path.parent().unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let mut attempt = 0u32;
    let (tmp, mut file) = loop {
        let tmp = dir.join(format!(".{name}.{}.{attempt}.tmp", std::process::id()));
        match std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
        {
            Ok(f) => break (tmp, f),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists && attempt < 100 => {
                attempt += 1;
            }
            Err(e) => return Err(io(e)),
        }
    };
    let written = file
        .write_all(bytes)
        .and_then(|_| file.sync_all())
        .and_then(|_| std::fs::rename(&tmp, path));
    if let Err(e) = written {
        let _ = std::fs::remove_file(&tmp);
        return Err(io(e));
    }
    Ok(())
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
    write_all_protecting(outcome, dir, opts, &[])
}

/// [`write_all`], never replacing one of `inputs` ([`check_targets_protecting`]). Each file is
/// written through a temporary file in `dir` and renamed into place; symbolic links in `dir`
/// are never followed.
pub fn write_all_protecting(
    outcome: &Outcome,
    dir: &Path,
    opts: &OutputOptions,
    inputs: &[PathBuf],
) -> Result<Vec<PathBuf>> {
    check_width(opts.image_width)?;
    let marched = outcome.entrance.is_some();
    check_targets_protecting(dir, opts.force, marched, inputs)?;
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
    contents.extend(hydrodynamic::files(outcome, opts.image_width)?);
    std::fs::create_dir_all(dir).map_err(|source| Error::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    // Checked again now that the directory exists and just before writing (the solve may
    // have taken a while).
    check_targets_protecting(dir, opts.force, marched, inputs)?;
    let mut written = Vec::with_capacity(contents.len());
    for (path, bytes) in targets(dir, marched).into_iter().zip(contents) {
        let Some(bytes) = bytes else { continue };
        write_replacing(&path, &bytes)?;
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
