//! Draws `shapes/scanned_insert.png`, an invented "scan" of a sectioned mould insert: what a
//! photograph of a cut and polished part looks like to canalis (see shapes/README.md).
//!
//! Scenario (our own): a steel core insert of an injection mould is cut across its cooling
//! channel and photographed at 25 µm per pixel. The channel is an oblique section of an 8 mm
//! drilled bore (cut at 30° to its axis, so an ellipse of semi-axes 4.62 × 4 mm) joined by a
//! 6 mm cross-drilled branch. The picture has what real ones have: a dark channel on light
//! steel, grey anti-aliased edges (each pixel's grey level is its covered fraction, by 4 × 4
//! supersampling), uneven lighting, Gaussian noise, a small pore in the steel (a dark speck) and
//! a chip of swarf in the channel (a light speck), both below canalis's default --min-feature.
//!
//! ```text
//! cargo run --release --example make_scan                  # writes shapes/scanned_insert.png
//! cargo run --release --example make_scan -- other.png     # or another file (not overwritten)
//! canalis solve shapes/scanned_insert.png --pixel 25um
//! ```
//!
//! Reproducible: the noise comes from a fixed-seed SplitMix64 generator (Steele, Lea & Flood,
//! OOPSLA 2014; from memory) and the Box–Muller transform, so every run writes the same bytes.

use std::path::PathBuf;
use std::process::ExitCode;

/// Image size, pixels, and pixel size, mm.
const WIDTH: u32 = 640;
const HEIGHT: u32 = 400;
const PIXEL_MM: f64 = 0.025;

/// SplitMix64: a small, well-mixed 64-bit generator.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in (0, 1).
    fn uniform(&mut self) -> f64 {
        ((self.next() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal (Box–Muller, one of the pair).
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

/// Is the point (mm, y up, origin at the main bore's centre) in the channel?
fn channel(x: f64, y: f64) -> bool {
    let bore = (x / 4.62).powi(2) + (y / 4.0).powi(2) < 1.0;
    let branch = (x - 5.6).powi(2) + (y - 1.2).powi(2) < 3.0 * 3.0;
    bore || branch
}

fn main() -> ExitCode {
    let path = std::env::args()
        .nth(1)
        .map(PathBuf::from)
        .unwrap_or_else(|| {
            PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("shapes/scanned_insert.png")
        });
    if path.exists() {
        eprintln!("error: {} already exists; not overwritten", path.display());
        return ExitCode::from(2);
    }
    let mut rng = SplitMix(0x5EED_CA7A_1150_0007);
    // The channel's box is x ∈ [−4.62, 8.6], y ∈ [−4, 4.2] mm; the picture is centred on it.
    let (cx, cy) = (2.0, 0.1);
    let (steel, water) = (205.0, 38.0);
    let sub = 4;
    let img = image::GrayImage::from_fn(WIDTH, HEIGHT, |col, row| {
        let mut inside = 0;
        for i in 0..sub {
            for j in 0..sub {
                let x = (col as f64 + (i as f64 + 0.5) / sub as f64 - 0.5 * WIDTH as f64)
                    * PIXEL_MM
                    + cx;
                let y = (0.5 * HEIGHT as f64 - row as f64 - (j as f64 + 0.5) / sub as f64)
                    * PIXEL_MM
                    + cy;
                inside += u32::from(channel(x, y));
            }
        }
        let f = inside as f64 / (sub * sub) as f64;
        // Lighting falls off by about 8 % towards the lower right.
        let light = 1.0 - 0.08 * (col as f64 / WIDTH as f64 + row as f64 / HEIGHT as f64) / 2.0;
        let grey = light * (f * water + (1.0 - f) * steel) + 6.0 * rng.normal();
        image::Luma([grey.round().clamp(0.0, 255.0) as u8])
    });
    let mut img = img;
    // A pore in the steel (dark, 2 × 2 pixels) and a chip of swarf in the channel (light,
    // 2 × 2 pixels minus one): specks that --min-feature drops.
    for (c, r) in [(590, 60), (591, 60), (590, 61), (591, 61)] {
        img.put_pixel(c, r, image::Luma([45]));
    }
    for (c, r) in [(240, 215), (241, 215), (240, 216)] {
        img.put_pixel(c, r, image::Luma([210]));
    }
    if let Err(e) = img.save(&path) {
        eprintln!("error: {}: {e}", path.display());
        return ExitCode::from(1);
    }
    println!(
        "wrote {} ({WIDTH} × {HEIGHT} pixels of {} µm)",
        path.display(),
        PIXEL_MM * 1e3
    );
    ExitCode::SUCCESS
}
