//! `canalis solve SHAPE --out DIR` (issue 4): the pictures, the CSV files and the VTK file,
//! checked by running the real binary in a temporary directory and reading the files back with
//! independent readers (the `png`/`image` decoders, a hand-written CSV split, `roxmltree` for
//! the VTK XML).

mod common;

use common::{shipped_path, Sandbox};
use serde_json::Value;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// Solves into `out` (relative to the sandbox) and returns the report.json written there.
fn solve_into(sb: &Sandbox, out: &str, args: &[&str]) -> Value {
    let mut all = vec!["solve"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--out", out, "--quiet"]);
    sb.run(&all).assert_success();
    let text = std::fs::read_to_string(sb.path(out).join("report.json")).expect("report.json");
    serde_json::from_str(&text).expect("report.json is JSON")
}

/// A CSV file as (header, rows); no field of ours needs quotes except wall names, which hold
/// none of `,"` for the shapes used here.
fn csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).expect("read a CSV file");
    let mut lines = text.lines();
    let header = lines
        .next()
        .expect("a header line")
        .split(',')
        .map(String::from)
        .collect::<Vec<_>>();
    let rows: Vec<Vec<String>> = lines
        .map(|l| l.split(',').map(String::from).collect::<Vec<_>>())
        .collect();
    for r in &rows {
        assert_eq!(
            r.len(),
            header.len(),
            "ragged CSV row in {}",
            path.display()
        );
    }
    (header, rows)
}

fn num(s: &str) -> f64 {
    s.parse()
        .unwrap_or_else(|_| panic!("{s:?} is not a number"))
}

/// A decoded picture with the map from metres to pixels from its `canalis:view` text chunk.
struct Picture {
    img: image::RgbImage,
    view: HashMap<String, f64>,
}

impl Picture {
    fn load(path: &Path) -> Picture {
        let bytes = std::fs::read(path).expect("read a PNG");
        let decoder = png::Decoder::new(std::io::Cursor::new(&bytes));
        let reader = decoder.read_info().expect("a PNG header");
        let chunk = reader
            .info()
            .uncompressed_latin1_text
            .iter()
            .find(|c| c.keyword == "canalis:view")
            .expect("a canalis:view text chunk")
            .text
            .clone();
        let view = chunk
            .split_whitespace()
            .map(|kv| {
                let (k, v) = kv.split_once('=').expect("key=value");
                (k.to_string(), num(v))
            })
            .collect();
        let img = image::load_from_memory(&bytes)
            .expect("the PNG decodes")
            .to_rgb8();
        Picture { img, view }
    }

    /// The pixel holding the point (x, y) in metres, moved by (dx, dy) pixels.
    fn at(&self, x: f64, y: f64, dx: f64, dy: f64) -> [u8; 3] {
        let v = |k: &str| self.view[k];
        let px = v("left_px") + (x - v("x_min_m")) * v("px_per_m") + dx;
        let py = v("top_px") + (v("y_max_m") - y) * v("px_per_m") + dy;
        self.img.get_pixel(px.floor() as u32, py.floor() as u32).0
    }
}

/// Index of the viridis entry nearest to `c`.
fn map_index(c: [u8; 3]) -> usize {
    (0..256)
        .min_by_key(|&i| {
            let m = canalis::output::png::viridis_u8(i);
            (0..3)
                .map(|k| (m[k] as i32 - c[k] as i32).pow(2))
                .sum::<i32>()
        })
        .unwrap_or(0)
}

fn files(dir: &Path) -> Vec<PathBuf> {
    canalis::output::FILES.iter().map(|f| dir.join(f)).collect()
}

#[test]
fn finned_tube_pictures_and_wall_shear_file() {
    let sb = Sandbox::new();
    let report = solve_into(
        &sb,
        "res",
        &[
            &shipped_path("finned_tube.toml"),
            "--cells",
            "120",
            "--image-width",
            "900",
        ],
    );
    let out = sb.path("res");
    for f in files(&out) {
        assert!(f.exists(), "{} was not written", f.display());
    }

    // Both pictures decode and have the requested width.
    let vel = Picture::load(&out.join("velocity.png"));
    let ws = Picture::load(&out.join("wall_shear.png"));
    assert_eq!(vel.img.width(), 900);
    assert_eq!(ws.img.width(), 900);

    // The colour map's ends as published (mpl-colormaps viridis table, CC0: first entry
    // 0.267004, 0.004874, 0.329415; last 0.993248, 0.906157, 0.143936).
    assert_eq!(canalis::output::png::viridis_u8(0), [68, 1, 84]);
    assert_eq!(canalis::output::png::viridis_u8(255), [253, 231, 37]);

    // velocity.csv: one row per fluid node; the fastest node shows the top of the map.
    let (header, rows) = csv(&out.join("velocity.csv"));
    assert_eq!(header, ["x_m", "y_m", "u_over_u_mean"]);
    assert_eq!(
        rows.len() as u64,
        report["grid"]["unknowns"].as_u64().unwrap()
    );
    let fastest = rows
        .iter()
        .max_by(|a, b| num(&a[2]).total_cmp(&num(&b[2])))
        .unwrap();
    let c = vel.at(num(&fastest[0]), num(&fastest[1]), 0.0, 0.0);
    assert!(
        map_index(c) >= 252,
        "colour at u_max {c:?} (index {})",
        map_index(c)
    );

    // Solid pixels: the middle of the east fin (hole centred at (7, 0) mm, shapes/finned_tube
    // .toml) and the corner of the box outside the tube.
    let solid = canalis::output::png::SOLID;
    assert_eq!(vel.at(0.007, 0.0, 0.0, 0.0), solid);
    assert_eq!(vel.at(-0.0079, -0.0079, 0.0, 0.0), solid);
    assert_eq!(ws.at(0.007, 0.0, 0.0, 0.0), solid);

    // wall_shear.csv: Σ ds is the wetted perimeter, and τ/τ_mean averages to 1 over the
    // arc length (the definition of τ_mean; common practice, no source).
    let (header, rows) = csv(&out.join("wall_shear.csv"));
    assert_eq!(
        header,
        [
            "wall_id",
            "wall_name",
            "s_m",
            "ds_m",
            "x_m",
            "y_m",
            "tau_unit_m",
            "tau_over_tau_mean"
        ]
    );
    let perimeter = report["perimeter_m"].as_f64().unwrap();
    let total: f64 = rows.iter().map(|r| num(&r[3])).sum();
    assert!(
        ((total - perimeter) / perimeter).abs() < 5e-3,
        "Σ ds = {total}, perimeter {perimeter}"
    );
    let (mut num_sum, mut len) = (0.0, 0.0);
    for r in &rows {
        let (ds, ratio) = (num(&r[3]), num(&r[7]));
        if ratio.is_finite() {
            num_sum += ratio * ds;
            len += ds;
        }
    }
    assert!(
        ((num_sum / len) - 1.0).abs() < 5e-3,
        "mean τ/τ_mean = {}",
        num_sum / len
    );
    // Five walls: the tube and four fins, named.
    let mut names: Vec<&str> = rows.iter().map(|r| r[1].as_str()).collect();
    names.dedup();
    assert_eq!(names.len(), 5, "{names:?}");
}

/// `velocity.vti` read back by a parser written here from VTK's documented layout ("VTK File
/// Formats", XML formats: appended raw data, `header_type="UInt64"`, vtkZLibDataCompressor):
/// the XML before `<AppendedData>` (closed by hand) for roxmltree, and every `DataArray`
/// decoded from the bytes after the `_` at its `offset`: UInt64 [blocks, block size, last block
/// size (0: full), compressed sizes…], then the zlib blocks. Returns the header text and each
/// array (name, values as f64).
fn read_vti(path: &Path) -> (String, Vec<(String, Vec<f64>)>) {
    use std::io::Read;
    let bytes = std::fs::read(path).expect("velocity.vti");
    let tag = b"<AppendedData encoding=\"raw\">";
    let at = bytes
        .windows(tag.len())
        .position(|w| w == tag)
        .expect("an <AppendedData encoding=\"raw\"> element");
    let underscore = at
        + bytes[at..]
            .iter()
            .position(|&b| b == b'_')
            .expect("the _ marker");
    let data = &bytes[underscore + 1..];
    let header =
        String::from_utf8(bytes[..at].to_vec()).expect("the header is UTF-8") + "</VTKFile>";
    let doc = roxmltree::Document::parse(&header).expect("the header is XML");
    let u64_at = |p: usize| u64::from_le_bytes(data[p..p + 8].try_into().unwrap()) as usize;
    let mut arrays = Vec::new();
    for node in doc.descendants().filter(|n| n.has_tag_name("DataArray")) {
        assert_eq!(node.attribute("format"), Some("appended"));
        let offset: usize = node.attribute("offset").unwrap().parse().unwrap();
        let (blocks, block, last) = (u64_at(offset), u64_at(offset + 8), u64_at(offset + 16));
        let mut p = offset + 24 + 8 * blocks;
        let mut raw = Vec::new();
        for b in 0..blocks {
            let size = u64_at(offset + 24 + 8 * b);
            let mut chunk = Vec::new();
            flate2::read::ZlibDecoder::new(&data[p..p + size])
                .read_to_end(&mut chunk)
                .expect("a zlib block");
            let expect = if b + 1 == blocks && last != 0 {
                last
            } else {
                block
            };
            assert_eq!(
                chunk.len(),
                expect,
                "block {b} of {:?}",
                node.attribute("Name")
            );
            raw.extend(chunk);
            p += size;
        }
        let values: Vec<f64> = match node.attribute("type") {
            Some("Float64") => raw
                .chunks_exact(8)
                .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
                .collect(),
            Some("UInt8") => raw.iter().map(|&b| f64::from(b)).collect(),
            other => panic!("unexpected type {other:?}"),
        };
        arrays.push((node.attribute("Name").unwrap().to_string(), values));
    }
    (header, arrays)
}

/// The VTK file read back by [`read_vti`]: its grid and mask agree with the report and
/// its velocity integrates to the flow.
#[test]
fn vti_reproduces_the_flow_at_an_operating_point() {
    let sb = Sandbox::new();
    let report = solve_into(
        &sb,
        "o",
        &[
            "rect:w=20mm,h=5mm",
            "--cells",
            "120",
            "--dpdx",
            "100",
            "--viscosity",
            "1e-3",
            "--density",
            "1000",
        ],
    );
    let out = sb.path("o");
    let (text, arrays) = read_vti(&out.join("velocity.vti"));
    let doc = roxmltree::Document::parse(&text).expect("velocity.vti's header is XML");
    let root = doc.root_element();
    assert_eq!(root.attribute("header_type"), Some("UInt64"));
    assert_eq!(root.attribute("type"), Some("ImageData"));
    let image = root
        .children()
        .find(|n| n.has_tag_name("ImageData"))
        .expect("an ImageData element");
    let nums = |s: &str| s.split_whitespace().map(num).collect::<Vec<f64>>();
    let extent = nums(image.attribute("WholeExtent").unwrap());
    let origin = nums(image.attribute("Origin").unwrap());
    let spacing = nums(image.attribute("Spacing").unwrap());
    let (nx, ny) = (extent[1] as usize + 1, extent[3] as usize + 1);
    let h = report["grid"]["spacing_m"].as_f64().unwrap();
    assert_eq!(spacing[0], h);
    assert_eq!(spacing[1], h);
    // The grid carries one solid ring around the cells.
    assert_eq!(nx as u64, report["grid"]["cells_x"].as_u64().unwrap() + 2);
    assert_eq!(ny as u64, report["grid"]["cells_y"].as_u64().unwrap() + 2);
    let array = |name: &str| -> Vec<f64> {
        arrays
            .iter()
            .find(|(n, _)| n == name)
            .unwrap_or_else(|| panic!("no DataArray {name}"))
            .1
            .clone()
    };
    let u = array("u_m_s");
    let fluid = array("fluid");
    assert_eq!(u.len(), nx * ny);
    assert_eq!(fluid.len(), nx * ny);
    let unknowns = report["grid"]["unknowns"].as_u64().unwrap() as usize;
    assert_eq!(fluid.iter().filter(|&&f| f == 1.0).count(), unknowns);
    assert!(u.iter().zip(&fluid).all(|(&v, &f)| f == 1.0 || v == 0.0));

    // Node sum Σ u·h² from the VTI against the same sum from velocity.csv (points located by
    // Origin + (i, j)·Spacing): equal to round-off.
    let (_, rows) = csv(&out.join("velocity.csv"));
    let mut csv_sum = 0.0;
    for r in &rows {
        let (x, y, v) = (num(&r[0]), num(&r[1]), num(&r[2]));
        let i = ((x - origin[0]) / h).round() as usize;
        let j = ((y - origin[1]) / h).round() as usize;
        assert_eq!(
            fluid[j * nx + i],
            1.0,
            "CSV node ({x}, {y}) is not fluid in the VTI"
        );
        assert_eq!(u[j * nx + i], v);
        csv_sum += v * h * h;
    }
    let vti_sum: f64 = u.iter().map(|v| v * h * h).sum();
    assert!(((vti_sum - csv_sum) / csv_sum).abs() < 1e-6);
    // Against the report's flow rate (cut-cell quadrature): the nodes are the centres of cells
    // that tile the rectangle exactly (grid::Grid::covering), so Σ u·h² is the 2-D midpoint
    // rule, second order (Euler–Maclaurin); measured +3.1e-4 relative at 120 cells.
    let q = report["flow_rate_m3_s"].as_f64().unwrap();
    let gap = (vti_sum - q) / q;
    assert!(gap.abs() < 1e-3, "node sum {vti_sum} vs flow {q}");
    // With the quadrature weights the VTI carries, the reported flow rate itself comes back:
    // Q = Σ wᵢ·uᵢ + (G/μ)·h²·A/24 (the cut-cell quadrature of post::flow_integral).
    let w = array("quadrature_weight_m2");
    let g_over_mu = report["pressure_gradient_pa_m"].as_f64().unwrap()
        / report["fluid"]["viscosity_pa_s"].as_f64().unwrap();
    let area = report["area_m2"].as_f64().unwrap();
    let q_vti: f64 =
        u.iter().zip(&w).map(|(v, w)| v * w).sum::<f64>() + g_over_mu * h * h * area / 24.0;
    assert!(
        ((q_vti - q) / q).abs() < 1e-9,
        "VTI quadrature {q_vti} vs flow {q}"
    );

    // wall_shear.csv in Pa at an operating point.
    let (header, _) = csv(&out.join("wall_shear.csv"));
    assert_eq!(header[6], "tau_pa");

    // The picture: default width, top of the map at the centre (u_max of a rectangle), bottom
    // of the map just inside a corner (u → 0 at a corner).
    let vel = Picture::load(&out.join("velocity.png"));
    assert_eq!(vel.img.width(), canalis::output::DEFAULT_IMAGE_WIDTH);
    let (_, ws) = csv(&out.join("wall_shear.csv"));
    let xmin = ws.iter().map(|r| num(&r[4])).fold(f64::INFINITY, f64::min);
    let ymin = ws.iter().map(|r| num(&r[5])).fold(f64::INFINITY, f64::min);
    let xmax = ws
        .iter()
        .map(|r| num(&r[4]))
        .fold(f64::NEG_INFINITY, f64::max);
    let ymax = ws
        .iter()
        .map(|r| num(&r[5]))
        .fold(f64::NEG_INFINITY, f64::max);
    let centre = vel.at(0.5 * (xmin + xmax), 0.5 * (ymin + ymax), 0.0, 0.0);
    assert!(map_index(centre) >= 252, "centre {centre:?}");
    let corner = vel.at(xmin, ymin, 4.0, -4.0);
    assert!(
        map_index(corner) <= 3,
        "corner {corner:?} (index {})",
        map_index(corner)
    );
    // Solid just outside the corner.
    assert_eq!(vel.at(xmin, ymin, -8.0, 8.0), canalis::output::png::SOLID);

    // temperature_h1.png: the same sheet for θ = (T − T_w)/(T_b − T_w) of the H1 problem, whose
    // maximum also sits at the centre of a rectangle and which vanishes at the walls.
    let temp = Picture::load(&out.join("temperature_h1.png"));
    assert_eq!(temp.img.width(), canalis::output::DEFAULT_IMAGE_WIDTH);
    let centre = temp.at(0.5 * (xmin + xmax), 0.5 * (ymin + ymax), 0.0, 0.0);
    assert!(map_index(centre) >= 252, "temperature centre {centre:?}");
    assert!(map_index(temp.at(xmin, ymin, 4.0, -4.0)) <= 3);
    assert_eq!(temp.at(xmin, ymin, -8.0, 8.0), canalis::output::png::SOLID);
}

#[test]
fn existing_files_are_never_overwritten_without_force() {
    let sb = Sandbox::new();
    let out = sb.path("o");
    std::fs::create_dir_all(&out).unwrap();
    // One file in the way: refused before anything is written, naming the file.
    std::fs::write(out.join("wall_shear.png"), "keep me").unwrap();
    let args = [
        "solve",
        "circle:d=8mm",
        "--cells",
        "60",
        "--out",
        "o",
        "--quiet",
    ];
    sb.input_error(
        &args,
        &["wall_shear.png already exists; not overwritten", "--force"],
    );
    assert_eq!(
        std::fs::read_dir(&out).unwrap().count(),
        1,
        "nothing else is written"
    );
    assert_eq!(
        std::fs::read_to_string(out.join("wall_shear.png")).unwrap(),
        "keep me"
    );
    // --force replaces it.
    let mut forced = args.to_vec();
    forced.push("--force");
    sb.run(&forced).assert_success();
    assert!(Picture::load(&out.join("wall_shear.png")).img.width() > 0);
    // A second run without --force names the first file in the way.
    sb.input_error(&args, &["report.json already exists"]);
}

#[test]
fn image_width_out_of_range_is_refused() {
    let sb = Sandbox::new();
    let args = [
        "solve",
        "circle:d=8mm",
        "--cells",
        "40",
        "--out",
        "o",
        "--image-width",
        "50",
    ];
    sb.input_error(&args, &["--image-width"]);
    assert!(!sb.path("o").exists(), "nothing is written after a refusal");
}

/// The `canalis:plot` chunk of entrance.png or hydrodynamic.png: one map per panel, key →
/// value (the numeric ones; `scale`, `y`, … are words).
fn plot_maps(bytes: &[u8]) -> Vec<HashMap<String, f64>> {
    let reader = png::Decoder::new(std::io::Cursor::new(bytes))
        .read_info()
        .expect("a PNG header");
    let chunk = reader
        .info()
        .uncompressed_latin1_text
        .iter()
        .find(|c| c.keyword == "canalis:plot")
        .expect("a canalis:plot text chunk")
        .text
        .clone();
    chunk
        .split("; ")
        .map(|panel| {
            panel
                .split_whitespace()
                .filter_map(|kv| kv.split_once('='))
                .filter_map(|(k, v)| Some((k.to_string(), v.parse::<f64>().ok()?)))
                .collect()
        })
        .collect()
}

/// Issue 16, item 4: `--entrance --out` adds entrance.png (local and mean Nu against x*) and
/// entrance.csv (those curves at every march point); the CSV agrees with the report.
#[test]
fn issue_16_entrance_plot_and_curves() {
    let sb = Sandbox::new();
    let report = solve_into(
        &sb,
        "o",
        &[
            "circle:d=8mm",
            "--cells",
            "60",
            "--entrance",
            "--image-width",
            "900",
        ],
    );
    let out = sb.path("o");
    let mut expected: Vec<PathBuf> = files(&out);
    expected.extend(canalis::output::entrance::FILES.iter().map(|f| out.join(f)));
    for f in &expected {
        assert!(f.exists(), "{} is written", f.display());
    }

    // The picture: a PNG of the requested width, with the map of its panel.
    let bytes = std::fs::read(out.join("entrance.png")).unwrap();
    let reader = png::Decoder::new(std::io::Cursor::new(&bytes))
        .read_info()
        .expect("entrance.png has a PNG header");
    assert_eq!(reader.info().width, 900);
    assert!(reader.info().height > 400);
    let img = image::load_from_memory(&bytes)
        .expect("entrance.png decodes")
        .to_rgb8();
    let maps = plot_maps(&bytes);
    assert_eq!(maps.len(), 1, "one passage, one panel");
    let m = &maps[0];
    assert_eq!((m["x_min"], m["x_max"]), (1e-5, 1.0));
    assert!(m["left_px"] < m["right_px"] && m["right_px"] <= 900.0);
    assert!(m["top_px"] < m["bottom_px"] && m["bottom_px"] <= img.height() as f64);

    // The curves: every march point, x* rising from the inlet region to 1.
    let (header, rows) = csv(&out.join("entrance.csv"));
    assert_eq!(
        header,
        [
            "passage",
            "x_star",
            "nusselt_t_local",
            "nusselt_t_mean",
            "nusselt_h1_local",
            "nusselt_h1_mean"
        ]
    );
    let values: Vec<Vec<f64>> = rows
        .iter()
        .map(|r| r.iter().map(|s| num(s)).collect())
        .collect();
    assert!(values.len() > 30, "{} rows", values.len());
    assert!(values.iter().all(|r| r[0] == 1.0), "a single passage");
    assert!(values
        .iter()
        .all(|r| r[2..].iter().all(|v| v.is_finite() && *v > 0.0)));
    assert!(values[0][1] <= 1e-5, "first x* {}", values[0][1]);
    assert_eq!(values.last().unwrap()[1], 1.0);
    assert!(values.windows(2).all(|w| w[1][1] > w[0][1]), "x* increases");

    // The report's stations are rows of the CSV with the same values.
    let th = &report["entrance"]["thermal"];
    let arr = |k: &str| -> Vec<f64> {
        th[k]
            .as_array()
            .unwrap_or_else(|| panic!("entrance.thermal.{k}"))
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect()
    };
    let last_t = *arr("nusselt_t_local").last().unwrap();
    let last = values.last().unwrap();
    assert!(
        (last[2] - last_t).abs() <= 1e-12 * last_t.abs(),
        "{} vs {last_t}",
        last[2]
    );
    let xs = arr("x_star");
    for (key, col) in [
        ("nusselt_t_local", 2),
        ("nusselt_t_mean", 3),
        ("nusselt_h1_local", 4),
        ("nusselt_h1_mean", 5),
    ] {
        for (x, v) in xs.iter().zip(arr(key)) {
            let row = values
                .iter()
                .find(|r| (r[1] - x).abs() <= 1e-9 * x)
                .unwrap_or_else(|| panic!("station {x} is a row"));
            assert!(
                (row[col] - v).abs() <= 1e-12 * v.abs(),
                "{key} at {x}: {} vs {v}",
                row[col]
            );
        }
    }

    // From x* = 0.3 on, the local Nu_T curve and its dashed asymptote both lie at the fully
    // developed Nu_T, drawn in the T colour (Okabe–Ito blue) where the panel's map puts it.
    let nu_t = num_at(&report, "nusselt_t");
    let px_of = |x: f64| {
        m["left_px"]
            + (m["right_px"] - m["left_px"]) * (x / m["x_min"]).ln()
                / (m["x_max"] / m["x_min"]).ln()
    };
    let py_of = |nu: f64| {
        m["bottom_px"]
            - (m["bottom_px"] - m["top_px"]) * (nu / m["nu_min"]).ln()
                / (m["nu_max"] / m["nu_min"]).ln()
    };
    let blue = [0i32, 114, 178];
    let near_blue = (-3..=3).any(|dy| {
        (0..40).any(|dx| {
            let p = img
                .get_pixel(px_of(0.3) as u32 + dx, (py_of(nu_t) + dy as f64) as u32)
                .0;
            (0..3).map(|k| (p[k] as i32 - blue[k]).abs()).max().unwrap() < 40
        })
    });
    assert!(near_blue, "the Nu_T line is at Nu_T = {nu_t}");
}

fn num_at(report: &Value, key: &str) -> f64 {
    report[key]
        .as_f64()
        .unwrap_or_else(|| panic!("report key {key}"))
}

/// Without `--entrance` (and no rating) `--out` writes exactly what it wrote before issue 16,
/// and an entrance file in the way does not stop it; with `--entrance` it does, before the
/// solve, and `--force` replaces it.
#[test]
fn issue_16_entrance_files_only_with_the_entrance() {
    let sb = Sandbox::new();
    let out = sb.path("o");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("entrance.csv"), "keep me").unwrap();
    std::fs::write(out.join("hydrodynamic.png"), "keep me").unwrap();
    solve_into(&sb, "o", &["circle:d=8mm", "--cells", "40"]);
    let mut names: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    let mut want: Vec<String> = canalis::output::FILES
        .iter()
        .map(|s| s.to_string())
        .chain(["entrance.csv".to_string(), "hydrodynamic.png".to_string()])
        .collect();
    want.sort();
    assert_eq!(names, want, "the files of --out without --entrance");
    assert!(!out.join("entrance.png").exists());
    assert_eq!(
        std::fs::read_to_string(out.join("entrance.csv")).unwrap(),
        "keep me"
    );

    let args = [
        "solve",
        "circle:d=8mm",
        "--cells",
        "40",
        "--entrance",
        "--out",
        "o2",
        "--quiet",
    ];
    std::fs::create_dir_all(sb.path("o2")).unwrap();
    std::fs::write(sb.path("o2").join("entrance.png"), "keep me").unwrap();
    sb.input_error(&args, &["entrance.png already exists", "--force"]);
    assert_eq!(std::fs::read_dir(sb.path("o2")).unwrap().count(), 1);
    let mut forced = args.to_vec();
    forced.push("--force");
    sb.run(&forced).assert_success();
    assert!(image::open(sb.path("o2").join("entrance.png")).is_ok());
}

/// With a thermal rating the outlet x* is marked by a vertical dark line at its place on the
/// x* axis.
#[test]
fn issue_16_entrance_plot_marks_the_outlet() {
    let sb = Sandbox::new();
    let report = solve_into(
        &sb,
        "o",
        &[
            "circle:d=8mm",
            "--cells",
            "50",
            "--flow",
            "0.5L/min",
            "--fluid",
            "water",
            "--temperature",
            "20C",
            "--length",
            "100mm",
            "--inlet-temperature",
            "20C",
            "--wall-temperature",
            "60C",
        ],
    );
    let x_out = report["rating"]["x_star"].as_f64().expect("rating.x_star");
    assert!((1e-4..0.1).contains(&x_out), "outlet x* {x_out}");
    let bytes = std::fs::read(sb.path("o").join("entrance.png")).unwrap();
    let m = &plot_maps(&bytes)[0];
    let img = image::load_from_memory(&bytes).unwrap().to_rgb8();
    let px = m["left_px"]
        + (m["right_px"] - m["left_px"]) * (x_out / m["x_min"]).ln()
            / (m["x_max"] / m["x_min"]).ln();
    // The dash-dot line covers most of the column's height in dark ink.
    let (top, bottom) = (m["top_px"] as u32 + 2, m["bottom_px"] as u32 - 2);
    let dark = |x: u32| {
        (top..bottom)
            .filter(|&y| img.get_pixel(x, y).0.iter().all(|&c| c < 110))
            .count()
    };
    let best = (px as u32 - 2..=px as u32 + 2).map(dark).max().unwrap();
    assert!(
        best as f64 > 0.5 * (bottom - top) as f64,
        "{best} dark pixels of {} at x* = {x_out}",
        bottom - top
    );
    // Well away from it, no such line.
    let away = m["left_px"] + 0.5 * (px - m["left_px"]);
    assert!(((dark(away as u32)) as f64) < 0.2 * (bottom - top) as f64);
}

/// Issue 17, item 5: `--entrance --out` adds hydrodynamic.png (f_app·Re, u_max/ū and K(x)
/// against x+) and hydrodynamic.csv (those curves at every march point); the CSV's rows at the
/// stations are the report's `entrance.hydrodynamic` arrays, and a hydrodynamic file in the way
/// stops an entrance run before the solve.
#[test]
fn issue_17_hydrodynamic_plot_and_curves() {
    let sb = Sandbox::new();
    let report = solve_into(
        &sb,
        "o",
        &[
            "circle:d=8mm",
            "--cells",
            "80",
            "--entrance",
            "--entrance-cells",
            "80",
            "--image-width",
            "900",
        ],
    );
    let out = sb.path("o");
    let mut expected: Vec<PathBuf> = files(&out);
    expected.extend(canalis::output::entrance::FILES.iter().map(|f| out.join(f)));
    expected.extend(
        canalis::output::hydrodynamic::FILES
            .iter()
            .map(|f| out.join(f)),
    );
    assert_eq!(
        canalis::output::hydrodynamic::FILES,
        ["hydrodynamic.png", "hydrodynamic.csv"]
    );
    for f in &expected {
        assert!(f.exists(), "{} is written", f.display());
    }

    // The table: every march point, x+ rising from below the axis to 1.
    let (header, rows) = csv(&out.join("hydrodynamic.csv"));
    assert_eq!(
        header,
        [
            "passage",
            "x_plus",
            "apparent_f_re",
            "incremental_pressure_drop",
            "max_to_mean_velocity"
        ]
    );
    let values: Vec<Vec<f64>> = rows
        .iter()
        .map(|r| r.iter().map(|s| num(s)).collect())
        .collect();
    assert!(values.len() > 30, "{} rows", values.len());
    assert!(values.iter().all(|r| r[0] == 1.0), "a single passage");
    assert!(values.iter().all(|r| r[1..].iter().all(|v| v.is_finite())));
    assert!(values[0][1] <= 1e-5, "first x+ {}", values[0][1]);
    assert_eq!(values.last().unwrap()[1], 1.0);
    assert!(values.windows(2).all(|w| w[1][1] > w[0][1]), "x+ increases");
    // u_max/ū: uniform at the inlet, the section's fully developed value at the end (the
    // march's grid is coarser than nothing else here: both grids have 80 cells).
    assert!(
        values[0][4] >= 1.0 && values[0][4] < 1.1,
        "{}",
        values[0][4]
    );
    let developed = num_at(&report, "max_to_mean_velocity");
    let last = values.last().unwrap()[4];
    assert!(
        (last - developed).abs() < 0.02 * developed,
        "u_max/ū at x+ = 1: {last}, fully developed {developed}"
    );

    // The report's stations are rows of the table with the same values.
    let hy = &report["entrance"]["hydrodynamic"];
    let arr = |k: &str| -> Vec<f64> {
        hy[k]
            .as_array()
            .unwrap_or_else(|| panic!("entrance.hydrodynamic.{k}"))
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect()
    };
    let xs = arr("x_plus");
    assert!(xs.len() > 5);
    for (key, col) in [("apparent_f_re", 2), ("incremental_pressure_drop", 3)] {
        for (x, v) in xs.iter().zip(arr(key)) {
            let row = values
                .iter()
                .find(|r| (r[1] - x).abs() <= 1e-9 * x)
                .unwrap_or_else(|| panic!("station {x} is a row"));
            assert!(
                (row[col] - v).abs() <= 1e-12 * v.abs().max(1.0),
                "{key} at {x}: {} vs {v}",
                row[col]
            );
        }
    }

    // The picture: a PNG of the requested width, two panels for the one passage, the
    // friction's above the development's.
    let bytes = std::fs::read(out.join("hydrodynamic.png")).unwrap();
    let reader = png::Decoder::new(std::io::Cursor::new(&bytes))
        .read_info()
        .expect("hydrodynamic.png has a PNG header");
    assert_eq!(reader.info().width, 900);
    let img = image::load_from_memory(&bytes)
        .expect("hydrodynamic.png decodes")
        .to_rgb8();
    let maps = plot_maps(&bytes);
    assert_eq!(maps.len(), 2, "one passage, two panels");
    for (k, m) in maps.iter().enumerate() {
        assert_eq!(m["panel"], (k + 1) as f64);
        assert_eq!(m["passage"], 1.0);
        assert_eq!((m["x_min"], m["x_max"]), (1e-5, 1.0));
        assert!(m["left_px"] < m["right_px"] && m["right_px"] <= 900.0);
        assert!(m["top_px"] < m["bottom_px"] && m["bottom_px"] <= img.height() as f64);
        assert!(m["y_min"] < m["y_max"]);
    }
    assert!(maps[0]["bottom_px"] < maps[1]["top_px"]);
    let chunk = String::from_utf8_lossy(&bytes).into_owned();
    assert!(chunk.contains("y=apparent_f_re") && chunk.contains("y_scale=linear"));

    // At x+ = 0.3 the curves are drawn where the maps put the table's values: f_app·Re in
    // Okabe–Ito blue (log axis, top), K(x) in vermillion and u_max/ū in bluish green (linear
    // axis, bottom).
    let row = values
        .iter()
        .min_by(|a, b| (a[1] - 0.3).abs().total_cmp(&(b[1] - 0.3).abs()))
        .unwrap();
    let px_of = |m: &HashMap<String, f64>, x: f64| {
        m["left_px"]
            + (m["right_px"] - m["left_px"]) * (x / m["x_min"]).ln()
                / (m["x_max"] / m["x_min"]).ln()
    };
    let py_log = |m: &HashMap<String, f64>, y: f64| {
        m["bottom_px"]
            - (m["bottom_px"] - m["top_px"]) * (y / m["y_min"]).ln()
                / (m["y_max"] / m["y_min"]).ln()
    };
    let py_lin = |m: &HashMap<String, f64>, y: f64| {
        m["bottom_px"]
            - (m["bottom_px"] - m["top_px"]) * (y - m["y_min"]) / (m["y_max"] - m["y_min"])
    };
    let near = |px: f64, py: f64, c: [i32; 3]| {
        (-3..=3).any(|dy| {
            (-3..=3).any(|dx| {
                let p = img
                    .get_pixel((px as i32 + dx) as u32, (py as i32 + dy) as u32)
                    .0;
                (0..3).map(|k| (p[k] as i32 - c[k]).abs()).max().unwrap() < 40
            })
        })
    };
    let (top, bottom) = (&maps[0], &maps[1]);
    assert!(
        near(px_of(top, row[1]), py_log(top, row[2]), [0, 114, 178]),
        "f_app·Re = {} at x+ = {}",
        row[2],
        row[1]
    );
    assert!(
        near(px_of(bottom, row[1]), py_lin(bottom, row[3]), [213, 94, 0]),
        "K = {} at x+ = {}",
        row[3],
        row[1]
    );
    assert!(
        near(px_of(bottom, row[1]), py_lin(bottom, row[4]), [0, 158, 115]),
        "u_max/ū = {} at x+ = {}",
        row[4],
        row[1]
    );

    // A hydrodynamic file in the way stops the next entrance run before the solve.
    let args = [
        "solve",
        "circle:d=8mm",
        "--cells",
        "40",
        "--entrance",
        "--out",
        "o2",
        "--quiet",
    ];
    std::fs::create_dir_all(sb.path("o2")).unwrap();
    std::fs::write(sb.path("o2").join("hydrodynamic.csv"), "keep me").unwrap();
    sb.input_error(&args, &["hydrodynamic.csv already exists", "--force"]);
    assert_eq!(std::fs::read_dir(sb.path("o2")).unwrap().count(), 1);
    assert_eq!(
        std::fs::read_to_string(sb.path("o2").join("hydrodynamic.csv")).unwrap(),
        "keep me"
    );
}

/// With a length at an operating point each passage's outlet x+ = L/(D_h·Re) is marked by a
/// vertical dark line in both panels of hydrodynamic.png.
#[test]
fn issue_17_hydrodynamic_plot_marks_the_outlet() {
    let sb = Sandbox::new();
    let report = solve_into(
        &sb,
        "o",
        &[
            "circle:d=8mm",
            "--cells",
            "60",
            "--entrance",
            "--entrance-cells",
            "60",
            "--flow",
            "0.5L/min",
            "--fluid",
            "water",
            "--temperature",
            "20C",
            "--length",
            "100mm",
        ],
    );
    let re = num_at(&report, "reynolds");
    let dh = num_at(&report, "hydraulic_diameter_m");
    let x_out = 0.1 / (dh * re);
    assert!((1e-4..0.5).contains(&x_out), "outlet x+ {x_out}");
    let bytes = std::fs::read(sb.path("o").join("hydrodynamic.png")).unwrap();
    let img = image::load_from_memory(&bytes).unwrap().to_rgb8();
    for m in &plot_maps(&bytes) {
        let px = m["left_px"]
            + (m["right_px"] - m["left_px"]) * (x_out / m["x_min"]).ln()
                / (m["x_max"] / m["x_min"]).ln();
        let (top, bottom) = (m["top_px"] as u32 + 2, m["bottom_px"] as u32 - 2);
        let dark = |x: u32| {
            (top..bottom)
                .filter(|&y| img.get_pixel(x, y).0.iter().all(|&c| c < 110))
                .count()
        };
        let best = (px as u32 - 2..=px as u32 + 2).map(dark).max().unwrap();
        assert!(
            best as f64 > 0.5 * (bottom - top) as f64,
            "{best} dark pixels of {} at x+ = {x_out} in panel {}",
            bottom - top,
            m["panel"]
        );
        let away = m["left_px"] + 0.5 * (px - m["left_px"]);
        assert!(((dark(away as u32)) as f64) < 0.2 * (bottom - top) as f64);
    }
}
