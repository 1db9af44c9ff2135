//! Hostile inputs (issue 19): each class of the issue, through the real binary in a temporary
//! directory. No timings are asserted; exit codes, messages and files are.

mod common;

use common::{num, Sandbox};
use std::path::Path;
use std::process::Stdio;

/// A PNG of `w` × `h` grey pixels from `f(col, row)` (0 black .. 255 white).
fn grey_png(path: &Path, w: u32, h: u32, f: impl Fn(u32, u32) -> u8) {
    let img = image::GrayImage::from_fn(w, h, |x, y| image::Luma([f(x, y)]));
    img.save(path).expect("write a test mask");
}

/// CRC-32 of PNG chunks (ISO 3309), for a hand-made header.
fn crc32(bytes: &[u8]) -> u32 {
    let mut c = 0xffff_ffffu32;
    for &b in bytes {
        c ^= b as u32;
        for _ in 0..8 {
            c = if c & 1 != 0 {
                0xedb8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
        }
    }
    !c
}

/// A PNG whose header claims `w` × `h` grey pixels, with (almost) no pixel data.
fn header_only_png(w: u32, h: u32) -> Vec<u8> {
    let mut out = b"\x89PNG\r\n\x1a\n".to_vec();
    let mut chunk = |kind: &[u8], data: &[u8]| {
        out.extend((data.len() as u32).to_be_bytes());
        let mut body = kind.to_vec();
        body.extend(data);
        out.extend(&body);
        out.extend(crc32(&body).to_be_bytes());
    };
    let mut ihdr = Vec::new();
    ihdr.extend(w.to_be_bytes());
    ihdr.extend(h.to_be_bytes());
    ihdr.extend([8, 0, 0, 0, 0]);
    chunk(b"IHDR", &ihdr);
    // An empty zlib stream: a few bytes where the header promises gigabytes.
    chunk(b"IDAT", &[0x78, 0x9c, 0x03, 0x00, 0x00, 0x00, 0x00, 0x01]);
    chunk(b"IEND", &[]);
    out
}

// ---- 1. Confident wrong answers --------------------------------------------------------------

#[test]
fn issue_19_a_slot_one_cell_high_is_refused_on_a_given_grid_with_the_cells_it_needs() {
    let sb = Sandbox::new();
    sb.input_error(
        &["solve", "rect:w=1000mm,h=1mm", "--cells", "600", "--json"],
        &["--cells", "across", "needs about --cells"],
    );
}

#[test]
fn issue_19_a_default_grid_is_refined_until_every_passage_is_resolved() {
    let sb = Sandbox::new();
    let r = sb.report(&["solve", "rect:w=200mm,h=1mm", "--json"]);
    let warnings = r["warnings"].to_string();
    assert!(warnings.contains("refined to"), "{warnings}");
    assert!(num(&r, "grid.cells_x") > 600.0);
    // Parallel plates: f·Re → 24, u_max/ū → 1.5 (a 200:1 slot is within a few per cent).
    assert!((num(&r, "fanning_f_re") - 23.5).abs() < 0.6, "{r}");
    assert!(num(&r, "max_to_mean_velocity") > 1.4);
}

#[test]
fn issue_19_a_wall_far_thinner_than_the_grid_is_refused_naming_it() {
    let sb = Sandbox::new();
    // A 1 m square split by a wall 10 µm thick: the wall is seen, but resolving it needs a
    // grid beyond any memory limit.
    let f = sb.write(
        "split.toml",
        "[[region]]\nkind = \"rect\"\ncorner = [0, 0]\nsize = [1, 1]\n\n\
         [[hole]]\nkind = \"rect\"\ncenter = [0.5, 0.5]\nsize = [1e-5, 1.2]\n",
    );
    sb.input_error(&["solve", &f, "--json"], &["wall", "thick", "--cells"]);
    // A wall of 1 nm is below what any grid could see: refused by the geometry check.
    let f = sb.write(
        "split_nm.toml",
        "[[region]]\nkind = \"rect\"\ncorner = [0, 0]\nsize = [1, 1]\n\n\
         [[hole]]\nkind = \"rect\"\ncenter = [0.5, 0.5]\nsize = [1e-9, 1.2]\n",
    );
    sb.input_error(&["solve", &f, "--json"], &["hole 1", "thick"]);
}

#[test]
fn issue_19_sliver_passages_of_a_tangent_hole_are_left_out_with_a_warning() {
    let sb = Sandbox::new();
    let f = sb.write(
        "tangent.toml",
        "[[region]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = 1\n\n\
         [[hole]]\nkind = \"circle\"\ncenter = [0.5, 0]\nradius = 0.4999999\n",
    );
    let r = sb.report(&["solve", &f, "--json", "--cells", "200"]);
    assert!(r["warnings"].to_string().contains("sliver"), "{r}");
    for p in r["passages"].as_array().expect("passages") {
        let fre = p["fanning_f_re"].as_f64().expect("f·Re");
        assert!(fre > 5.0 && fre < 30.0, "{p}");
    }
}

#[test]
fn issue_19_a_one_pixel_channel_on_the_pixel_grid_is_refused() {
    let sb = Sandbox::new();
    // A channel one pixel high and 80 long.
    grey_png(&sb.path("slit.png"), 100, 20, |x, y| {
        if (10..90).contains(&x) && y == 10 {
            0
        } else {
            255
        }
    });
    sb.input_error(
        &[
            "solve",
            "slit.png",
            "--pixel",
            "0.1mm",
            "--mask-mode",
            "pixels",
            "--json",
        ],
        &["across", "pixel grid"],
    );
}

// ---- 2. Panics ------------------------------------------------------------------------------

#[test]
fn issue_19_thousands_of_passages_in_rows_of_equal_height_are_ordered() {
    let sb = Sandbox::new();
    // 50 × 50 squares of 5 × 5 pixels, 2 apart: rows of passages with tied centroids.
    grey_png(&sb.path("dots.png"), 350, 350, |x, y| {
        if x % 7 < 5 && y % 7 < 5 {
            0
        } else {
            255
        }
    });
    let r = sb.report(&[
        "solve",
        "dots.png",
        "--pixel",
        "0.01mm",
        "--mask-mode",
        "pixels",
        "--json",
    ]);
    let passages = r["passages"].as_array().expect("passages");
    assert_eq!(passages.len(), 2500);
}

#[cfg(target_os = "linux")]
#[test]
fn issue_19_a_failed_standard_output_is_exit_1_and_never_a_panic() {
    let sb = Sandbox::new();
    for args in [
        vec!["shapes"],
        vec!["verify", "--cells", "16"],
        vec!["solve", "circle:d=8mm", "--cells", "32", "--json"],
        vec!["solve", "circle:d=8mm", "--cells", "32"],
    ] {
        let full = std::fs::OpenOptions::new()
            .write(true)
            .open("/dev/full")
            .expect("/dev/full");
        let out = sb
            .command(&args)
            .stdout(full)
            .stderr(Stdio::piped())
            .output()
            .expect("run");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{args:?}: {stderr}");
        assert!(!stderr.contains("panicked"), "{args:?}: {stderr}");
        assert!(stderr.contains("standard output"), "{args:?}: {stderr}");
    }
}

#[test]
fn issue_19_a_closed_pipe_ends_quietly() {
    let sb = Sandbox::new();
    let mut child = sb
        .command(&["shapes"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("run");
    // The reader goes away before anything is read.
    drop(child.stdout.take());
    let out = child.wait_with_output().expect("wait");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(!stderr.contains("error"), "{stderr}");
}

// ---- 3. Unbounded reading -------------------------------------------------------------------

#[cfg(unix)]
#[test]
fn issue_19_only_regular_files_are_read() {
    let sb = Sandbox::new();
    std::os::unix::fs::symlink("/dev/zero", sb.path("zero.toml")).unwrap();
    std::os::unix::fs::symlink("/dev/zero", sb.path("zero.svg")).unwrap();
    std::os::unix::fs::symlink("/dev/zero", sb.path("zero.png")).unwrap();
    std::fs::create_dir(sb.path("dir.toml")).unwrap();
    let fifo = std::process::Command::new("mkfifo")
        .arg(sb.path("fifo.toml"))
        .status();
    let mut cases = vec![
        vec!["solve", "zero.toml"],
        vec!["solve", "zero.svg"],
        vec!["solve", "zero.png", "--pixel", "1mm"],
        vec!["solve", "dir.toml"],
    ];
    if fifo.is_ok_and(|s| s.success()) {
        cases.push(vec!["solve", "fifo.toml"]);
    }
    for args in cases {
        sb.input_error(&args, &["regular file"]);
    }
}

#[test]
fn issue_19_an_oversized_shape_file_is_refused_before_it_is_read() {
    let sb = Sandbox::new();
    // Sparse: no disk space used.
    let f = std::fs::File::create(sb.path("big.toml")).unwrap();
    f.set_len(65 << 20).unwrap();
    sb.input_error(&["solve", "big.toml"], &["big.toml", "MiB"]);
}

#[test]
fn issue_19_svg_images_are_never_read() {
    let sb = Sandbox::new();
    // Were the image followed, reading a FIFO would block and /dev/zero would never end.
    #[cfg(unix)]
    {
        let _ = std::process::Command::new("mkfifo")
            .arg(sb.path("pipe.png"))
            .status();
    }
    let f = sb.write(
        "img.svg",
        "<svg xmlns=\"http://www.w3.org/2000/svg\" xmlns:xlink=\"http://www.w3.org/1999/xlink\" \
         width=\"10mm\" height=\"10mm\" viewBox=\"0 0 10 10\">\
         <image href=\"pipe.png\" width=\"10\" height=\"10\"/>\
         <image xlink:href=\"/dev/zero\" width=\"10\" height=\"10\"/>\
         <rect width=\"10\" height=\"5\"/></svg>",
    );
    let r = sb.report(&["solve", &f, "--cells", "40", "--json"]);
    assert!(num(&r, "area_m2") > 0.0);
}

#[test]
fn issue_19_a_mask_larger_than_the_memory_limit_is_refused_from_its_header() {
    let sb = Sandbox::new();
    std::fs::write(sb.path("huge.png"), header_only_png(16_000, 16_000)).unwrap();
    sb.input_error(
        &[
            "solve",
            "huge.png",
            "--pixel",
            "1um",
            "--max-memory",
            "256MiB",
        ],
        &["--max-memory", "16000 × 16000"],
    );
}

// ---- 5. Writing outside the output directory -----------------------------------------------

#[cfg(unix)]
#[test]
fn issue_19_links_in_the_output_directory_are_never_followed() {
    let sb = Sandbox::new();
    std::fs::create_dir(sb.path("out")).unwrap();
    std::fs::write(sb.path("outside.txt"), "keep me").unwrap();
    std::os::unix::fs::symlink("../outside.txt", sb.path("out/report.json")).unwrap();
    std::os::unix::fs::symlink("../created.txt", sb.path("out/velocity.csv")).unwrap();
    let args = ["solve", "circle:d=8mm", "--cells", "32", "--out", "out"];
    sb.input_error(&args, &["--out", "symbolic link"]);
    assert!(!sb.path("created.txt").exists());
    // With --force the links themselves are replaced.
    let mut forced = args.to_vec();
    forced.push("--force");
    sb.run(&forced).assert_success();
    assert_eq!(
        std::fs::read_to_string(sb.path("outside.txt")).unwrap(),
        "keep me"
    );
    assert!(!sb.path("created.txt").exists());
    let meta = std::fs::symlink_metadata(sb.path("out/report.json")).unwrap();
    assert!(meta.is_file(), "the link was replaced by the report");
    // No temporary file is left behind.
    let names: Vec<String> = std::fs::read_dir(sb.path("out"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.ends_with(".tmp")), "{names:?}");
}

#[test]
fn issue_19_an_input_in_the_output_directory_is_never_overwritten() {
    let sb = Sandbox::new();
    std::fs::create_dir(sb.path("out")).unwrap();
    grey_png(&sb.path("out/velocity.png"), 60, 60, |x, y| {
        if (10..50).contains(&x) && (10..50).contains(&y) {
            0
        } else {
            255
        }
    });
    let before = std::fs::read(sb.path("out/velocity.png")).unwrap();
    sb.input_error(
        &[
            "solve",
            "out/velocity.png",
            "--pixel",
            "0.1mm",
            "--out",
            "out",
            "--force",
        ],
        &["--out", "input"],
    );
    assert_eq!(std::fs::read(sb.path("out/velocity.png")).unwrap(), before);
}

// ---- 6. Messages ----------------------------------------------------------------------------

#[test]
fn issue_19_negative_numbers_are_refused_naming_the_option() {
    let sb = Sandbox::new();
    let fluid = ["--dpdx", "100", "--viscosity", "1e-3", "--density", "1000"];
    let with = |more: &[&'static str]| -> Vec<&'static str> {
        let mut v = vec!["solve", "circle:d=8mm"];
        v.extend(more);
        v
    };
    let mut viscosity = with(&["--dpdx", "100", "--density", "1000"]);
    viscosity.extend(["--viscosity", "-1e-3"]);
    let mut length = with(&fluid);
    length.extend(["--length", "-2m"]);
    for (args, option) in [
        (with(&["--cells", "-5"]), "--cells"),
        (viscosity, "--viscosity"),
        (with(&["--image-width", "-800"]), "--image-width"),
        (with(&["--max-iterations", "-1"]), "--max-iterations"),
        (with(&["--accuracy", "-1e-3"]), "--accuracy"),
        (with(&["--max-memory", "-1GiB"]), "--max-memory"),
        (length, "--length"),
    ] {
        sb.input_error(&args, &[option]);
    }
    sb.input_error(&["verify", "--cells", "-5"], &["--cells"]);
}

#[test]
fn issue_19_absurd_values_are_refused_naming_the_option() {
    let sb = Sandbox::new();
    let base = ["solve", "circle:d=8mm"];
    let cases: [(&[&str], &str); 4] = [
        (
            &[
                "--dpdx",
                "1e308",
                "--viscosity",
                "1e-3",
                "--density",
                "1000",
            ],
            "--dpdx",
        ),
        (
            &["--dpdx", "100", "--viscosity", "1e308", "--density", "1000"],
            "--viscosity",
        ),
        (
            &["--dpdx", "100", "--viscosity", "1e-3", "--density", "1e308"],
            "--density",
        ),
        (
            &[
                "--flow",
                "1e308",
                "--viscosity",
                "1e-3",
                "--density",
                "1000",
            ],
            "--flow",
        ),
    ];
    for (more, option) in cases {
        let mut args = base.to_vec();
        args.extend(more);
        sb.input_error(&args, &[option, "out of range"]);
    }
    grey_png(&sb.path("m.png"), 40, 40, |x, y| {
        if (5..35).contains(&x) && (5..35).contains(&y) {
            0
        } else {
            255
        }
    });
    sb.input_error(&["solve", "m.png", "--pixel", "1e200m"], &["--pixel"]);
}

#[test]
fn issue_19_huge_coordinates_get_a_message_about_the_size() {
    let sb = Sandbox::new();
    let big = sb.write(
        "big.toml",
        "[[region]]\nkind = \"rect\"\ncorner = [0, 0]\nsize = [1e300, 1e300]\n\n\
         [[hole]]\nkind = \"circle\"\ncenter = [5e299, 5e299]\nradius = 1e299\n",
    );
    sb.input_error(&["solve", &big], &["across", "check the units"]);
    let far = sb.write(
        "far.toml",
        "[[region]]\nkind = \"circle\"\ncenter = [1e30, 1e30]\nradius = 1e-3\n",
    );
    sb.input_error(&["solve", &far], &["from the origin"]);
    let poly = sb.write(
        "poly.toml",
        "[[region]]\nkind = \"polygon\"\npoints = [[0, 0], [1e200, 0], [1e200, 1e200]]\n",
    );
    sb.input_error(&["solve", &poly], &["across"]);
}

#[test]
fn issue_19_control_characters_in_a_name_never_reach_the_terminal() {
    let sb = Sandbox::new();
    let f = sb.write(
        "esc.toml",
        "name = \"\\u001b[2J\\u001b]0;pwned\\u0007duct\"\n\
         [[region]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = 0.004\n",
    );
    let run = sb.run(&["solve", &f, "--cells", "40"]);
    run.assert_success();
    assert!(!run.stdout.contains('\u{1b}'), "{}", run.stdout);
    assert!(!run.stdout.contains('\u{7}'), "{}", run.stdout);
    assert!(run.stdout.contains("duct"));
    // JSON escapes them itself.
    let r = sb.report(&["solve", &f, "--cells", "40", "--json"]);
    assert!(r["shape"].as_str().unwrap().ends_with("duct"));
}

#[test]
fn issue_19_options_that_do_not_apply_to_the_input_are_warned_about() {
    let sb = Sandbox::new();
    let r = sb.report(&[
        "solve",
        "circle:d=8mm",
        "--cells",
        "40",
        "--pixel",
        "1mm",
        "--mask-mode",
        "pixels",
        "--scale",
        "1mm",
        "--json",
    ]);
    let w = r["warnings"].to_string();
    for option in ["--pixel", "--mask-mode", "--scale"] {
        assert!(w.contains(option), "{option}: {w}");
    }
    let f = sb.write(
        "c.toml",
        "[[region]]\nkind = \"circle\"\ncenter = [0, 0]\nradius = 0.004\n",
    );
    let r = sb.report(&["solve", &f, "--cells", "40", "--threshold", "100", "--json"]);
    assert!(r["warnings"].to_string().contains("--threshold"), "{r}");
}

// ---- 4. Time ----------------------------------------------------------------------------------

#[test]
fn issue_19_a_polygon_of_many_points_is_checked_without_comparing_every_pair() {
    let sb = Sandbox::new();
    // A circle as a polygon of 20 000 points (every pair: 2·10⁸ edge tests).
    let n = 20_000;
    let pts: Vec<String> = (0..n)
        .map(|k| {
            let t = 2.0 * std::f64::consts::PI * k as f64 / n as f64;
            format!("[{:.9}, {:.9}]", 4.0 * t.cos(), 4.0 * t.sin())
        })
        .collect();
    let f = sb.write(
        "many.toml",
        &format!(
            "units = \"mm\"\n[[region]]\nkind = \"polygon\"\npoints = [{}]\n",
            pts.join(", ")
        ),
    );
    let r = sb.report(&["solve", &f, "--cells", "64", "--json"]);
    assert!((num(&r, "fanning_f_re") - 16.0).abs() < 0.1, "{r}");
    // A crossing among them is still found and named.
    let mut crossed = pts.clone();
    crossed.swap(100, 101);
    let f = sb.write(
        "crossed.toml",
        &format!(
            "units = \"mm\"\n[[region]]\nkind = \"polygon\"\npoints = [{}]\n",
            crossed.join(", ")
        ),
    );
    sb.input_error(
        &["solve", &f, "--cells", "64"],
        &["crosses itself", "edge 100"],
    );
}
