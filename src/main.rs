//! The `canalis` binary: parses arguments into a validated configuration, calls the library,
//! prints, and maps the outcome to an exit code (0 success, 1 a run that could not finish,
//! 2 bad input or usage).

use canalis::error::Error;
use canalis::geometry::builtin;
use canalis::geometry::mask::{FluidColour, MaskMode, MaskOptions, MinFeature};
use canalis::input::{Input, InputKind};
use canalis::operating::{Drive, FluidSpec, OperatingSpec};
use canalis::pipeline::{self, Method, SolveConfig, VERIFY_CELLS};
use canalis::rating::{Heating, RatingSpec};
use canalis::{output, report, units, verify};
use clap::{Parser, Subcommand, ValueEnum};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "canalis",
    version,
    about = "Fully developed laminar flow in ducts of any cross-section: f·Re, hydraulic \
             diameter, wall shear; at an operating point beyond the laminar range, friction and \
             heat transfer from labelled correlations",
    after_help = "Results are for fully developed flow of a Newtonian fluid with constant \
                  properties: the laminar solution, and beyond the laminar range the \
                  correlations named in the report (Colebrook–White about ±15 %, Gnielinski \
                  about ±20 %, transitional values interpolated with no stated accuracy); they \
                  do not replace local codes or licensed engineering practice."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Solve one cross-section and report.
    Solve(Box<SolveArgs>),
    /// List the built-in parametric shapes and their parameters.
    Shapes,
    /// Run the built-in verification cases against exact solutions.
    Verify {
        /// Grid cells across the longer side of each case.
        #[arg(long, default_value_t = VERIFY_CELLS, allow_hyphen_values = true,
              value_parser = whole_number::<usize>)]
        cells: usize,
    },
}

#[derive(Clone, Copy, ValueEnum)]
enum MaskFluid {
    Dark,
    Light,
}

#[derive(Clone, Copy, ValueEnum)]
enum MaskModeArg {
    /// Walls traced from the grey levels at sub-pixel precision, solved on any --cells.
    Traced,
    /// The staircase of the fluid pixels on the pixel grid (--cells ignored; for checking).
    Pixels,
}

#[derive(Clone, Copy, ValueEnum)]
enum MethodArg {
    /// Conjugate gradient preconditioned by a multigrid V-cycle (fast; the default).
    Multigrid,
    /// Conjugate gradient with Jacobi preconditioning.
    Jacobi,
    /// Plain conjugate gradient (for checking).
    Plain,
}

#[derive(clap::Args)]
struct SolveArgs {
    /// The cross-section: a shape file (*.toml), a mask image (*.png, *.bmp, *.tif), a drawing
    /// (*.svg) or a built-in shape such as circle:d=8mm (see `canalis shapes`).
    shape: String,
    /// Grid cells across the longer side of the bounding box [default: 600]. Ignored for
    /// masks with --mask-mode pixels, whose grid is the pixel grid.
    #[arg(long, allow_hyphen_values = true, value_parser = whole_number::<usize>)]
    cells: Option<usize>,
    /// Print exactly one JSON object (the report) on standard output.
    #[arg(long)]
    json: bool,
    /// Write pictures and field files into this directory (created if missing):
    /// velocity.png, wall_shear.png, temperature_h1.png (the H1 temperature field),
    /// velocity.csv, wall_shear.csv, velocity.vti (VTK) and report.json; with --entrance (or a
    /// thermal rating) also entrance.png (local and mean Nu_T, Nu_H1 against x*, the outlet
    /// marked with --length) and entrance.csv (those curves at every march point), and
    /// hydrodynamic.png (apparent f·Re, u_max/ū and K(x) against x+ from a uniform inlet, the
    /// outlet marked with --length) and hydrodynamic.csv (those curves at every march point).
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
    /// Width of the pictures written by --out, pixels (400 to 8000).
    #[arg(long, value_name = "N", default_value_t = output::DEFAULT_IMAGE_WIDTH,
          allow_hyphen_values = true, value_parser = whole_number::<u32>)]
    image_width: u32,
    /// Overwrite existing files in --out.
    #[arg(long)]
    force: bool,
    /// Pressure gradient −dp/dz, Pa/m (positive: pressure falling along the flow), e.g.
    /// 1200, 1.2kPa/m, 0.5bar/m, 3mbar/mm, 0.1psi/ft (also Pa/mm, MPa/m, mbar/m).
    #[arg(
        long,
        value_name = "VALUE",
        conflicts_with = "flow",
        allow_hyphen_values = true
    )]
    dpdx: Option<String>,
    /// Volumetric flow rate, e.g. 2L/min, 1e-5m3/s, 30mL/min, 0.5gpm; also m3/h, L/s, L/h,
    /// mL/s, mL/h, cm3/s, cm3/min, cm3/h, uL/min (µL/min).
    #[arg(long, value_name = "VALUE", allow_hyphen_values = true)]
    flow: Option<String>,
    /// Pressure drop over --length (required), e.g. 10kPa, 0.5bar, 40mbar, 5psi (a bare
    /// number is Pa): the flow rate is found. Not with --dpdx or --flow.
    #[arg(long, value_name = "DP", allow_hyphen_values = true)]
    pressure_drop: Option<String>,
    /// Absolute wall roughness, e.g. 0.05mm (default 0: smooth). Used beyond the laminar range
    /// by the turbulent friction correlation (Colebrook–White at ε/D_h).
    #[arg(long, value_name = "EPS", allow_hyphen_values = true)]
    roughness: Option<String>,
    /// Dynamic viscosity, Pa·s (also mPa.s, cP).
    #[arg(
        long,
        value_name = "VALUE",
        conflicts_with = "fluid",
        allow_hyphen_values = true
    )]
    viscosity: Option<String>,
    /// Density, kg/m³.
    #[arg(
        long,
        value_name = "VALUE",
        conflicts_with = "fluid",
        allow_hyphen_values = true
    )]
    density: Option<String>,
    /// Thermal conductivity, W/(m·K), for film coefficients (with --viscosity/--density).
    #[arg(
        long,
        value_name = "VALUE",
        conflicts_with = "fluid",
        allow_hyphen_values = true
    )]
    conductivity: Option<String>,
    /// Isobaric specific heat, J/(kg·K), for the Prandtl number (with --conductivity).
    #[arg(
        long,
        value_name = "VALUE",
        conflicts_with = "fluid",
        allow_hyphen_values = true
    )]
    specific_heat: Option<String>,
    /// Passage length, e.g. 250mm: pressure drop over it and entrance-length checks.
    #[arg(long, value_name = "L", allow_hyphen_values = true)]
    length: Option<String>,
    /// A named fluid with a property model: water.
    #[arg(long, value_name = "NAME")]
    fluid: Option<String>,
    /// Temperature of a named fluid, e.g. 40C or 313.15K (a bare number is °C).
    #[arg(long, value_name = "T", requires = "fluid", allow_hyphen_values = true)]
    temperature: Option<String>,
    /// Which pixels of a mask are fluid [default: dark].
    #[arg(long, value_enum)]
    mask_fluid: Option<MaskFluid>,
    /// Grey-level threshold of a mask (0..255) [default: 128].
    #[arg(long, allow_hyphen_values = true, value_parser = whole_number::<u8>)]
    threshold: Option<u8>,
    /// Physical size of one mask pixel, e.g. 0.02mm.
    #[arg(long, value_name = "SIZE", allow_hyphen_values = true)]
    pixel: Option<String>,
    /// How a mask's walls reach the solver: traced (sub-pixel walls traced from the grey levels
    /// at the threshold, solved on --cells like a shape file) or pixels (the staircase of the
    /// fluid pixels on the pixel grid) [default: traced].
    #[arg(long, value_enum)]
    mask_mode: Option<MaskModeArg>,
    /// Smallest connected feature of a mask kept: fluid specks, and solid specks inside the
    /// fluid, of a smaller area are dropped with a warning. In pixels (e.g. 20px) or as an area
    /// (e.g. 0.01mm2; m2, cm2, mm2, um2, in2); 0 keeps everything [default: 8px].
    #[arg(long, value_name = "AREA", allow_hyphen_values = true)]
    min_feature: Option<String>,
    /// Size of one SVG user unit, e.g. 0.1mm (overrides the drawing's own width/height).
    #[arg(long, value_name = "VALUE", allow_hyphen_values = true)]
    scale: Option<String>,
    /// Preconditioner of the conjugate gradient.
    #[arg(long, value_enum, default_value = "multigrid")]
    method: MethodArg,
    /// Largest estimated memory a solve may use, e.g. 4GiB, 512MiB [default: 4GiB].
    #[arg(long, value_name = "SIZE", allow_hyphen_values = true)]
    max_memory: Option<String>,
    /// Iteration cap of the conjugate gradient (a solve that needs more exits with status 1).
    #[arg(long, value_name = "N", allow_hyphen_values = true, value_parser = whole_number::<usize>)]
    max_iterations: Option<usize>,
    /// Print nothing but the result (no progress).
    #[arg(long)]
    quiet: bool,
    /// Refine the grid until the relative numerical uncertainty (Grid Convergence Index) of f·Re
    /// and of the Nusselt numbers is below TOL, e.g. 1e-4; grids of ratio 1.5 from 64 cells (or
    /// from --cells), up to --max-memory. With --entrance also the entrance march (its grid
    /// from --entrance-cells up to 1200 cells, its steps up to 32 per decade) until the entrance
    /// values from x* = 1e-4 on meet TOL. Without it the report carries a cheap estimate from
    /// one coarser grid (and for the entrance one coarser grid and one march of longer steps).
    #[arg(long, value_name = "TOL", allow_hyphen_values = true)]
    accuracy: Option<f64>,
    /// Add the entrance regions of the passage to the report: the thermal entrance (local and
    /// mean Nusselt numbers for uniform wall temperature T and uniform heat input H1 against
    /// x* = x/(D_h·Re·Pr) from 1e-5 to 1, fully developed velocity, entrance lengths) and the
    /// hydrodynamic entrance from a uniform inlet velocity (apparent f·Re and K(x) against
    /// x+ = x/(D_h·Re), K(∞), entrance length).
    #[arg(long)]
    entrance: bool,
    /// Minor-loss coefficient K (inlet, outlet, bends: the sum of the ones you know), added to
    /// the pressure drop over --length as K·ρ·ū²/2, reported as minor_loss_pa.
    #[arg(long, value_name = "K", allow_hyphen_values = true)]
    minor_loss: Option<f64>,
    /// Prandtl number of the simultaneously developing flow (velocity and temperature developing
    /// together from a uniform inlet), e.g. 0.7; implies --entrance. Without it a fluid with
    /// known Pr gives it.
    #[arg(long, value_name = "PR", allow_hyphen_values = true)]
    prandtl: Option<f64>,
    /// Cells across the grid of the entrance march at most [default: 300]; a finer --cells grid
    /// is solved again at this resolution for the march.
    #[arg(long, value_name = "N")]
    entrance_cells: Option<usize>,
    /// Thermal rating over --length: the inlet bulk temperature, e.g. 20C (with one of
    /// --wall-temperature, --heat-load, --heat-flux); reports the outlet temperature, heat rate
    /// and mean film coefficient, properties at the mean bulk temperature.
    #[arg(long, value_name = "T")]
    inlet_temperature: Option<String>,
    /// Rating with a uniform wall temperature, e.g. 80C.
    #[arg(long, value_name = "T")]
    wall_temperature: Option<String>,
    /// Rating with this heat input over the length into the fluid, e.g. 500W or 1.2kW
    /// (negative cools), spread evenly over the wetted walls.
    #[arg(long, value_name = "Q", allow_negative_numbers = true)]
    heat_load: Option<String>,
    /// Rating with this heat flux into the fluid on the wetted walls, e.g. 20kW/m2.
    #[arg(long, value_name = "Q", allow_negative_numbers = true)]
    heat_flux: Option<String>,
}

/// A whole number for a count option; a negative or fractional value is refused with a message
/// that clap prefixes with the option's name (exit 2). Negative numbers reach this parser
/// (`allow_hyphen_values`) instead of being taken for unknown options.
fn whole_number<T: TryFrom<u64>>(text: &str) -> Result<T, String> {
    let t = text.trim();
    if t.starts_with('-') {
        return Err(format!(
            "'{text}' is negative; give a positive whole number"
        ));
    }
    let v: u64 = t
        .parse()
        .map_err(|_| format!("'{text}' is not a whole number"))?;
    T::try_from(v).map_err(|_| format!("'{text}' is too large"))
}

fn parse_bytes(text: &str) -> Result<u64, Error> {
    let t = text.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let v: f64 = num
        .parse()
        .map_err(|_| Error::param("--max-memory", format!("'{text}' is not a size")))?;
    if !v.is_finite() {
        return Err(Error::param(
            "--max-memory",
            format!("'{text}' is not a size"),
        ));
    }
    let f = match unit.trim() {
        "" | "B" => 1.0,
        "KiB" | "K" | "kB" => 1024.0,
        "MiB" | "M" | "MB" => 1024.0 * 1024.0,
        "GiB" | "G" | "GB" => 1024.0 * 1024.0 * 1024.0,
        u => {
            return Err(Error::param(
                "--max-memory",
                format!("unknown unit '{u}' (use B, KiB, MiB, GiB)"),
            ))
        }
    };
    Ok((v * f) as u64)
}

/// Raw arguments → validated configuration ([`SolveConfig::validate`]).
fn config(a: &SolveArgs) -> Result<SolveConfig, Error> {
    let input = match InputKind::of(&a.shape)? {
        InputKind::Builtin => Input::Builtin(a.shape.clone()),
        InputKind::ShapeFile => Input::ShapeFile(PathBuf::from(&a.shape)),
        InputKind::Mask => {
            let pixel = a.pixel.as_deref().ok_or_else(|| {
                Error::param(
                    "--pixel",
                    format!(
                        "a mask image needs the physical size of one pixel, e.g. --pixel 0.02mm \
                         ({})",
                        a.shape
                    ),
                )
            })?;
            let pixel = units::parse_length(pixel, "--pixel")?;
            Input::Mask {
                path: PathBuf::from(&a.shape),
                options: MaskOptions {
                    fluid: match a.mask_fluid.unwrap_or(MaskFluid::Dark) {
                        MaskFluid::Dark => FluidColour::Dark,
                        MaskFluid::Light => FluidColour::Light,
                    },
                    threshold: a.threshold.unwrap_or(128),
                    pixel,
                    mode: match a.mask_mode.unwrap_or(MaskModeArg::Traced) {
                        MaskModeArg::Traced => MaskMode::Traced,
                        MaskModeArg::Pixels => MaskMode::Pixels,
                    },
                    min_feature: match a.min_feature.as_deref() {
                        Some(text) => MinFeature::parse(text)?,
                        None => MinFeature::default(),
                    },
                    // The run's --max-memory (pipeline::run sets it from the configuration).
                    ..MaskOptions::default()
                },
            }
        }
        InputKind::Svg => {
            let scale = a
                .scale
                .as_deref()
                .map(|text| units::parse_length(text, "--scale"))
                .transpose()?;
            Input::Svg {
                path: PathBuf::from(&a.shape),
                scale,
            }
        }
    };
    let mut c = SolveConfig::new(input);
    c.warnings = inapplicable_options(a, InputKind::of(&a.shape)?);
    c.cells = a.cells;
    c.unit.method = match a.method {
        MethodArg::Multigrid => Method::Multigrid,
        MethodArg::Jacobi => Method::Jacobi,
        MethodArg::Plain => Method::Plain,
    };
    if let Some(n) = a.max_iterations {
        c.unit.cg.max_iterations = n;
    }
    if let Some(m) = &a.max_memory {
        c.memory_limit = parse_bytes(m)?;
    }
    c.prandtl = a.prandtl;
    c.minor_loss = a.minor_loss;
    if a.entrance || a.entrance_cells.is_some() || a.prandtl.is_some() {
        c.entrance = Some(pipeline::EntranceOptions {
            cells: a.entrance_cells.unwrap_or(pipeline::ENTRANCE_CELLS),
        });
    }
    if let Some(tol) = a.accuracy {
        // A fraction between 0 and 1 (SolveConfig::validate).
        c.error_estimate = pipeline::ErrorEstimate::Accuracy(tol);
    }
    if a.pressure_drop.is_some() {
        if a.dpdx.is_some() || a.flow.is_some() {
            return Err(Error::param(
                "--pressure-drop",
                "give one drive only: --pressure-drop (with --length), --dpdx or --flow",
            ));
        }
        if a.length.is_none() {
            return Err(Error::param(
                "--pressure-drop",
                "a pressure drop needs the length it acts over: add --length L",
            ));
        }
    }
    let drive = match (&a.dpdx, &a.flow, &a.pressure_drop) {
        (Some(g), _, _) => Some(Drive::PressureGradient(units::parse_pressure_gradient(
            g, "--dpdx",
        )?)),
        (None, Some(q), _) => Some(Drive::FlowRate(units::parse_flow_rate(q, "--flow")?)),
        (None, None, Some(dp)) => Some(Drive::PressureDrop(units::parse_pressure(
            dp,
            "--pressure-drop",
        )?)),
        (None, None, None) => None,
    };
    let roughness = a
        .roughness
        .as_deref()
        .map(|e| units::parse_length(e, "--roughness"))
        .transpose()?;
    if roughness.is_some() && drive.is_none() {
        return Err(Error::param(
            "--roughness",
            "the wall roughness matters at an operating point only: add --flow, --dpdx or \
             --pressure-drop, and a fluid",
        ));
    }
    let fluid = match (&a.fluid, &a.viscosity, &a.density) {
        (Some(name), _, _) => Some(FluidSpec::Named {
            name: name.clone(),
            temperature_k: a
                .temperature
                .as_deref()
                .map(|t| units::parse_temperature(t, "--temperature"))
                .transpose()?,
        }),
        (None, Some(mu), Some(rho)) => {
            let number = |v: &Option<String>, name: &str| -> Result<Option<f64>, Error> {
                v.as_deref()
                    .map(|t| {
                        t.trim().parse::<f64>().map_err(|_| {
                            Error::param(name, format!("'{t}' is not a number (SI units)"))
                        })
                    })
                    .transpose()
            };
            let conductivity = number(&a.conductivity, "--conductivity")?;
            let specific_heat = number(&a.specific_heat, "--specific-heat")?;
            if specific_heat.is_some() && conductivity.is_none() {
                return Err(Error::param(
                    "--conductivity",
                    "the Prandtl number and film coefficients need the thermal conductivity: \
                     --specific-heat was given without --conductivity",
                ));
            }
            Some(FluidSpec::Given {
                viscosity: units::parse_viscosity(mu, "--viscosity")?,
                density: units::parse_density(rho, "--density")?,
                conductivity,
                specific_heat,
            })
        }
        (None, Some(_), None) => {
            return Err(Error::param(
                "--density",
                "--viscosity needs --density as well (the Reynolds number needs both)",
            ))
        }
        (None, None, Some(_)) => {
            return Err(Error::param(
                "--viscosity",
                "--density needs --viscosity as well",
            ))
        }
        (None, None, None) => None,
    };
    if (a.conductivity.is_some() || a.specific_heat.is_some()) && a.viscosity.is_none() {
        return Err(Error::param(
            "--conductivity",
            "--conductivity and --specific-heat describe a fluid given by --viscosity and \
             --density (a named fluid brings its own)",
        ));
    }
    if a.length.is_some() && (drive.is_none() || fluid.is_none()) {
        return Err(Error::param(
            "--length",
            "the pressure drop over a length needs an operating point: --dpdx, --flow or \
             --pressure-drop, and a fluid",
        ));
    }
    c.operating = match (drive, fluid) {
        (Some(drive), Some(fluid)) => Some(OperatingSpec {
            drive,
            fluid,
            length: a
                .length
                .as_deref()
                .map(|l| units::parse_length(l, "--length"))
                .transpose()?,
            roughness: roughness.unwrap_or(0.0),
        }),
        (Some(_), None) => {
            return Err(Error::param(
                "--fluid",
                "an operating point needs a fluid: --fluid water --temperature T, or \
                 --viscosity and --density",
            ))
        }
        (None, Some(_)) => {
            return Err(Error::param(
                "--dpdx",
                "a fluid was given without an operating point: add --dpdx, --flow or \
                 --pressure-drop",
            ))
        }
        (None, None) => None,
    };
    c.rating = rating_spec(a)?;
    // Every value checked now, before the output directory or the geometry is looked at.
    c.validate()?;
    Ok(c)
}

/// The thermal rating options: `--inlet-temperature` with exactly one of `--wall-temperature`,
/// `--heat-load`, `--heat-flux`.
fn rating_spec(a: &SolveArgs) -> Result<Option<RatingSpec>, Error> {
    let heating = [
        a.wall_temperature.as_deref().map(|t| {
            units::parse_temperature(t, "--wall-temperature").map(Heating::WallTemperature)
        }),
        a.heat_load
            .as_deref()
            .map(|q| units::parse_heat_rate(q, "--heat-load").map(Heating::HeatLoad)),
        a.heat_flux
            .as_deref()
            .map(|q| units::parse_heat_flux(q, "--heat-flux").map(Heating::HeatFlux)),
    ];
    let given: Vec<Heating> = heating.into_iter().flatten().collect::<Result<_, _>>()?;
    match (&a.inlet_temperature, given.as_slice()) {
        (None, []) => Ok(None),
        (None, _) => Err(Error::param(
            "--inlet-temperature",
            "a thermal rating needs the inlet temperature as well",
        )),
        (Some(_), []) => Err(Error::param(
            "--inlet-temperature",
            "give one of --wall-temperature, --heat-load or --heat-flux with it",
        )),
        (Some(t), [h]) => Ok(Some(RatingSpec {
            inlet_temperature_k: units::parse_temperature(t, "--inlet-temperature")?,
            heating: *h,
        })),
        (Some(_), _) => Err(Error::param(
            "--wall-temperature",
            "give only one of --wall-temperature, --heat-load and --heat-flux",
        )),
    }
}

/// Warnings for options given on the command line that do not apply to the kind of input (they
/// are ignored, and silently ignoring them hides a mistake).
fn inapplicable_options(a: &SolveArgs, kind: InputKind) -> Vec<String> {
    let what = match kind {
        InputKind::Builtin => "a built-in shape",
        InputKind::ShapeFile => "a shape file",
        InputKind::Mask => "a mask image",
        InputKind::Svg => "a drawing",
    };
    let mut given = Vec::new();
    if kind != InputKind::Mask {
        for (set, name) in [
            (a.pixel.is_some(), "--pixel"),
            (a.mask_fluid.is_some(), "--mask-fluid"),
            (a.threshold.is_some(), "--threshold"),
            (a.mask_mode.is_some(), "--mask-mode"),
            (a.min_feature.is_some(), "--min-feature"),
        ] {
            if set {
                given.push((name, "mask images"));
            }
        }
    }
    if kind != InputKind::Svg && a.scale.is_some() {
        given.push(("--scale", "drawings (*.svg)"));
    }
    given
        .into_iter()
        .map(|(name, applies)| {
            format!(
                "{name} applies to {applies} only; ignored for {what} ({})",
                a.shape
            )
        })
        .collect()
}

/// A progress line on standard error that updates in place: the run's current stage and its
/// time, shown from one second on by a ticker thread (so that a long step with no solver
/// iterations, such as loading a huge polygon, shows too), and the solver's residual while it
/// iterates.
struct Progress {
    state: std::sync::Arc<ProgressState>,
    ticker: Option<std::thread::JoinHandle<()>>,
}

struct ProgressState {
    start: std::time::Instant,
    /// The current stage, and the solver's last iteration and residual in it (if any).
    stage: std::sync::Mutex<(String, Option<(usize, f64)>)>,
    shown: std::sync::atomic::AtomicBool,
    done: std::sync::atomic::AtomicBool,
}

impl ProgressState {
    fn show(&self) {
        use std::sync::atomic::Ordering::Relaxed;
        let t = self.start.elapsed().as_secs_f64();
        let (stage, it) = match self.stage.lock() {
            Ok(g) => g.clone(),
            Err(e) => e.into_inner().clone(),
        };
        let detail = it.map_or(String::new(), |(i, r)| {
            format!(": iteration {i:>5}, relative residual {r:.2e}")
        });
        self.shown.store(true, Relaxed);
        // A failed write to standard error is not worth stopping a run for.
        let _ = write!(std::io::stderr(), "\r  {stage}{detail}, {t:.1} s          ");
    }
}

impl Progress {
    fn new() -> Progress {
        let state = std::sync::Arc::new(ProgressState {
            start: std::time::Instant::now(),
            stage: std::sync::Mutex::new(("starting".to_string(), None)),
            shown: std::sync::atomic::AtomicBool::new(false),
            done: std::sync::atomic::AtomicBool::new(false),
        });
        let s = state.clone();
        let ticker = std::thread::Builder::new()
            .name("progress".into())
            .spawn(move || {
                use std::sync::atomic::Ordering::Relaxed;
                while !s.done.load(Relaxed) {
                    std::thread::park_timeout(std::time::Duration::from_millis(250));
                    if !s.done.load(Relaxed) && s.start.elapsed().as_secs_f64() > 1.0 {
                        s.show();
                    }
                }
            })
            .ok();
        Progress { state, ticker }
    }

    fn finish(mut self) {
        use std::sync::atomic::Ordering::Relaxed;
        self.state.done.store(true, Relaxed);
        if let Some(t) = self.ticker.take() {
            t.thread().unpark();
            let _ = t.join();
        }
        if self.state.shown.load(Relaxed) {
            let _ = writeln!(std::io::stderr());
        }
    }
}

impl canalis::solver::Monitor for Progress {
    fn iteration(&self, iteration: usize, relative_residual: f64) {
        if let Ok(mut g) = self.state.stage.lock() {
            g.1 = Some((iteration, relative_residual));
        }
    }

    fn stage(&self, name: &str) {
        if let Ok(mut g) = self.state.stage.lock() {
            *g = (name.to_string(), None);
        }
    }
}

/// Why a command failed: a library error (exit 2 for bad input, 1 otherwise), or standard
/// output that could not take the result (exit 1; a closed pipe ends quietly).
enum Failure {
    Run(Error),
    Stdout(std::io::Error),
}

impl From<Error> for Failure {
    fn from(e: Error) -> Self {
        Failure::Run(e)
    }
}

/// Writes `text` to standard output and flushes it, so that a failed write (a full disk,
/// `> /dev/full`) is seen here rather than lost at exit.
fn print_out(text: &str) -> Result<(), Failure> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|_| out.flush())
        .map_err(Failure::Stdout)
}

fn solve(a: &SolveArgs) -> Result<bool, Failure> {
    let cfg = config(a)?;
    let out_options = output::OutputOptions {
        image_width: a.image_width,
        force: a.force,
    };
    // Files the run reads, which --out must never replace.
    let inputs: Vec<PathBuf> = match &cfg.input {
        Input::ShapeFile(p) | Input::Mask { path: p, .. } | Input::Svg { path: p, .. } => {
            vec![p.clone()]
        }
        _ => Vec::new(),
    };
    if let Some(dir) = &a.out {
        // Check before the solve, so a long run is not wasted on a file in the way.
        output::check_options(&out_options)?;
        // A rating implies the entrance march, which adds its files.
        let marches = cfg.entrance.is_some() || cfg.rating.is_some();
        output::check_targets_protecting(dir, a.force, marches, &inputs)?;
    }
    let outcome = if a.json || a.quiet {
        pipeline::run(&cfg)?
    } else {
        let progress = Progress::new();
        let o = pipeline::run_monitored(&cfg, &progress);
        progress.finish();
        o?
    };
    let text = if a.json {
        let json = report::json_report(&outcome);
        serde_json::to_string_pretty(&json)
            .map_err(|e| Error::Numerical(format!("the report could not be serialised: {e}")))?
            + "\n"
    } else {
        // Names and labels come from the input: no control characters reach the terminal.
        sanitise(&report::summary(&outcome))
    };
    if let Some(dir) = &a.out {
        output::write_all_protecting(&outcome, dir, &out_options, &inputs)?;
    }
    print_out(&text)?;
    Ok(true)
}

/// `text` with every control character but newline and tab shown as `\u{..}` (names, labels
/// and file names come from the input; an escape sequence in them must not reach a terminal).
fn sanitise(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c.is_control() && c != '\n' && c != '\t' {
            out.push_str(&c.escape_unicode().to_string());
        } else {
            out.push(c);
        }
    }
    out
}

fn shapes() -> Result<bool, Failure> {
    use std::fmt::Write as _;
    let mut text = String::new();
    let _ = writeln!(
        text,
        "Built-in shapes, written name:key=value,... (lengths take m, mm, um, in):"
    );
    let shapes = builtin::catalogue();
    // Columns wider than the longest name (key) by two (three) spaces, so that none runs into
    // its text (square_annulus did into a fixed column of 10).
    let name_width = shapes.iter().map(|s| s.name.len()).max().unwrap_or(0) + 2;
    let key_width = shapes
        .iter()
        .flat_map(|s| s.params.iter().map(|(k, _)| k.len()))
        .chain(["example".len()])
        .max()
        .unwrap_or(0)
        + 3;
    for s in shapes {
        let _ = writeln!(text);
        let _ = writeln!(text, "  {:<name_width$}{}", s.name, s.description);
        for (k, meaning) in s.params {
            let _ = writeln!(text, "      {k:<key_width$}{meaning}");
        }
        let _ = writeln!(text, "      {:<key_width$}{}", "example", s.example);
    }
    print_out(&text)?;
    Ok(true)
}

fn run_verify(cells: usize) -> Result<bool, Failure> {
    use std::fmt::Write as _;
    if !(8..=4096).contains(&cells) {
        return Err(Error::param("--cells", "use between 8 and 4096 cells").into());
    }
    let checks = verify::run(cells)?;
    let mut text = String::new();
    let _ = writeln!(
        text,
        "Verification at {cells} cells across (exact solutions of fully developed laminar flow)"
    );
    let _ = writeln!(
        text,
        "{:<42} {:<32} {:>14} {:>14} {:>10} {:>9}  result",
        "case", "quantity", "value", "reference", "error", "limit"
    );
    let mut all = true;
    for c in &checks {
        all &= c.passed();
        let _ = writeln!(
            text,
            "{:<42} {:<32} {:>14.8} {:>14.8} {:>10.2e} {:>9.1e}  {}",
            c.case,
            c.quantity,
            c.value,
            c.reference,
            c.error,
            c.tolerance,
            if c.passed() { "pass" } else { "FAIL" }
        );
    }
    let passed = checks.iter().filter(|c| c.passed()).count();
    let _ = writeln!(text, "{passed} of {} checks passed", checks.len());
    print_out(&text)?;
    Ok(all)
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return if e.use_stderr() {
                ExitCode::from(2)
            } else {
                ExitCode::SUCCESS
            };
        }
    };
    // (Each solve moves itself onto a worker of rayon's pool: pipeline::solve_unit_monitored.)
    let result = match &cli.command {
        Command::Solve(a) => solve(a),
        Command::Shapes => shapes(),
        Command::Verify { cells } => run_verify(*cells),
    };
    match result {
        Ok(true) => ExitCode::SUCCESS,
        Ok(false) => ExitCode::from(1),
        // The reader went away (`| head`): nothing to tell it. A listing ends as it would have;
        // a solve's report did not arrive in full, which is a failure.
        Err(Failure::Stdout(e)) if e.kind() == std::io::ErrorKind::BrokenPipe => {
            match cli.command {
                Command::Solve(_) => ExitCode::from(1),
                _ => ExitCode::SUCCESS,
            }
        }
        Err(Failure::Stdout(e)) => {
            let _ = writeln!(
                std::io::stderr(),
                "error: standard output: {e}; the result was not written"
            );
            ExitCode::from(1)
        }
        Err(Failure::Run(e)) => {
            let _ = writeln!(std::io::stderr(), "error: {}", sanitise(&e.to_string()));
            ExitCode::from(if e.is_input_error() { 2 } else { 1 })
        }
    }
}
