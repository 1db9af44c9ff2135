//! The thermal entrance files of `--out`: `entrance.png` and `entrance.csv`, written when the
//! run marched the thermal entrance (`--entrance`, or a thermal rating, which implies it).
//!
//! Owns: the plot and the table of the entrance curves.
//!
//! * `entrance.csv`: one row per march point of each passage, columns `passage` (1, 2, … in the
//!   order of the report's `passages`), `x_star`, `nusselt_t_local`, `nusselt_t_mean`,
//!   `nusselt_h1_local`, `nusselt_h1_mean`; numbers in Rust's shortest round-trip form (full
//!   precision). The local values are the passage's [`PassageEntrance::curve`] (below the
//!   resolved thermal layer its Lévêque limit, as in the report), the means are
//!   [`PassageEntrance::means_at`] at the same x*, so the rows at the stations equal the
//!   report's arrays.
//! * `entrance.png`: local and mean Nu_T and Nu_H1 against x* = x/(D_h·Re·Pr), both axes
//!   logarithmic, x* from 1e-5 to 1; the fully developed Nu_T and Nu_H1 as dashed asymptotes;
//!   with a thermal rating the passage's outlet x* as a vertical dash-dot line. One panel per
//!   passage, stacked, all with the same Nu axis so they compare at a glance (four curves a
//!   passage in one panel stay readable, several passages' curves in one panel would not); the
//!   legend and the fully developed values stand to the right of each panel, outside the data.
//!   The PNG carries a `canalis:plot` text chunk with each panel's map from (x*, Nu) to pixels:
//!   `px = left_px + (right_px − left_px)·log(x*/x_min)/log(x_max/x_min)`, likewise
//!   `py = bottom_px − (bottom_px − top_px)·log(Nu/nu_min)/log(nu_max/nu_min)`.
//!
//! Drawn with `plotters` (bitmap backend into an RGB buffer, the embedded DejaVu Sans font
//! registered with its `ab_glyph` text, so no system font) at twice the size and box-filtered
//! down 2 × 2, which antialiases plotters' lines; encoded by [`png::encode_rgb`], the encoder of
//! every picture. Colours: Okabe–Ito (see [`png`]), T the blue family (blue local, sky blue
//! mean), H1 the vermillion family (vermillion local, orange mean).
//!
//! Invariant: computes no physics; every number is a value of the outcome's entrance (or
//! rating), the means by the entrance's own [`PassageEntrance::means_at`].

use super::png::{self, length_text, metrics, sig4, INK, SERIES};
use crate::entrance::{PassageEntrance, ThermalEntrance};
use crate::error::{Error, Result};
use crate::outcome::Outcome;
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::{FontStyle, RGBColor, ShapeStyle, TextStyle};
use std::fmt::Write;

/// The files of this module, in the order [`files`] returns them.
pub const FILES: [&str; 2] = ["entrance.png", "entrance.csv"];

/// The x* axis: 1e-5 to 1, the stations' range (INTERFACE.md).
const X_MIN: f64 = 1e-5;
const X_MAX: f64 = 1.0;
/// Drawn at this many times the final size, then box-filtered down.
const SUPERSAMPLE: u32 = 2;
/// The font family name the embedded font is registered under (plotters' default family).
const FAMILY: &str = "sans-serif";

/// The bytes of [`FILES`] (in that order), or nothing when the run has no thermal entrance.
pub fn files(o: &Outcome, width: u32) -> Result<Vec<Option<Vec<u8>>>> {
    let Some(e) = &o.entrance else {
        return Ok(Vec::new());
    };
    Ok(vec![
        Some(entrance_png(o, &e.thermal, width)?),
        Some(entrance_csv(&e.thermal).into_bytes()),
    ])
}

/// `entrance.csv`: every march point of every passage (see the module documentation).
pub fn entrance_csv(e: &ThermalEntrance) -> String {
    let mut s = String::from(
        "passage,x_star,nusselt_t_local,nusselt_t_mean,nusselt_h1_local,nusselt_h1_mean\n",
    );
    for (k, p) in e.passages.iter().enumerate() {
        for q in &p.curve {
            let (mt, mh) = p.means_at(q[0]).unwrap_or((f64::NAN, f64::NAN));
            let _ = writeln!(s, "{},{},{},{},{},{}", k + 1, q[0], q[1], mt, q[2], mh);
        }
    }
    s
}

// ---------------------------------------------------------------------------------------------
// The plot.

fn rgb(c: [u8; 3]) -> RGBColor {
    RGBColor(c[0], c[1], c[2])
}

/// Okabe–Ito pairs: T (blue, sky blue), H1 (vermillion, orange); [local, mean].
const T_COLOURS: [[u8; 3]; 2] = [SERIES[0], SERIES[5]];
const H1_COLOURS: [[u8; 3]; 2] = [SERIES[1], SERIES[4]];
const GREY: [u8; 3] = [95, 95, 95];

/// Registers the embedded DejaVu Sans with plotters once per process.
fn register_font() -> Result<()> {
    static DONE: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    let ok = *DONE.get_or_init(|| {
        plotters::style::register_font(FAMILY, FontStyle::Normal, dejavu::sans::regular()).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err(Error::param("--out", "the embedded font is unusable"))
    }
}

fn plot_error(e: impl std::fmt::Display) -> Error {
    Error::param("--out", format!("entrance.png could not be drawn: {e}"))
}

/// What one panel shows: a passage's curves and, with a rating, its outlet.
struct Panel<'a> {
    entrance: &'a PassageEntrance,
    /// "Passage k, D_h = …" with several passages.
    heading: Option<String>,
    /// The outlet x*, the mean Nu over the length and whether the laminar entrance gave it.
    outlet: Option<(f64, f64, bool)>,
}

/// (x*, Nu_x,T, Nu_m,T, Nu_x,H1, Nu_m,H1) at the march points within the x* axis.
fn plotted(p: &PassageEntrance) -> Vec<[f64; 5]> {
    p.curve
        .iter()
        .filter(|q| q[0] >= X_MIN * (1.0 - 1e-9) && q[0] <= X_MAX * (1.0 + 1e-9))
        .filter_map(|q| {
            let (mt, mh) = p.means_at(q[0])?;
            let row = [q[0].clamp(X_MIN, X_MAX), q[1], mt, q[2], mh];
            row.iter().all(|v| v.is_finite() && *v > 0.0).then_some(row)
        })
        .collect()
}

/// The round values m·10^k, m in `mantissas`, from below `lo` to above `hi` (inclusive).
fn decade_values(lo: f64, hi: f64, mantissas: &[f64]) -> Vec<f64> {
    let mut v = Vec::new();
    let (k0, k1) = (lo.log10().floor() as i32 - 1, hi.log10().ceil() as i32 + 1);
    for k in k0..=k1 {
        for m in mantissas {
            v.push(m * 10f64.powi(k));
        }
    }
    v
}

/// The Nu axis: bounds on the 1, 1.5, 2, 3, 5, 7 × 10^k series with room around the data,
/// labelled ticks and light grid lines.
fn nu_axis(lo: f64, hi: f64) -> (f64, f64, Vec<f64>, Vec<f64>) {
    let bounds = decade_values(lo, hi, &[1.0, 1.5, 2.0, 3.0, 5.0, 7.0]);
    let a = bounds
        .iter()
        .copied()
        .filter(|&v| v <= 0.87 * lo)
        .fold(f64::NAN, f64::max);
    let b = bounds
        .iter()
        .copied()
        .filter(|&v| v >= 1.12 * hi)
        .fold(f64::NAN, f64::min);
    let within = |v: &f64| *v >= a * (1.0 - 1e-9) && *v <= b * (1.0 + 1e-9);
    let labelled: &[f64] = if (b / a).log10() <= 2.5 {
        &[1.0, 2.0, 3.0, 5.0]
    } else {
        &[1.0, 2.0, 5.0]
    };
    let bold = decade_values(a, b, labelled)
        .into_iter()
        .filter(within)
        .collect();
    let light = decade_values(a, b, &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0])
        .into_iter()
        .filter(within)
        .collect();
    (a, b, bold, light)
}

/// 10^k with a superscript exponent ("1" for 10⁰).
fn power_of_ten(v: f64) -> String {
    let k = v.log10().round() as i32;
    if k == 0 {
        return "1".into();
    }
    let sup = |c: char| match c {
        '-' => '⁻',
        '0' => '⁰',
        '1' => '¹',
        '2' => '²',
        '3' => '³',
        '4' => '⁴',
        '5' => '⁵',
        '6' => '⁶',
        '7' => '⁷',
        '8' => '⁸',
        _ => '⁹',
    };
    format!("10{}", k.to_string().chars().map(sup).collect::<String>())
}

/// A Nu tick label: the round value as written (0.5, 3, 20, 150).
fn nu_label(v: f64) -> String {
    let r = (v * 1e6).round() / 1e6;
    format!("{r}")
}

/// x* with three significant digits, plainly written from 1e-3 up, else with a power of ten.
fn x_text(v: f64) -> String {
    if !(v.is_finite() && v > 0.0) {
        return format!("{v}");
    }
    if v >= 1e-3 {
        let d = (2 - v.log10().floor() as i32).max(0) as usize;
        format!("{v:.d$}")
    } else {
        let k = v.log10().floor();
        format!("{:.2}×{}", v / 10f64.powf(k), power_of_ten(10f64.powf(k)))
    }
}

/// `entrance.png`: see the module documentation.
pub fn entrance_png(o: &Outcome, e: &ThermalEntrance, width: u32) -> Result<Vec<u8>> {
    register_font()?;
    let several = e.passages.len() > 1;
    let panels: Vec<Panel> = e
        .passages
        .iter()
        .enumerate()
        .map(|(k, p)| Panel {
            entrance: p,
            heading: several.then(|| {
                let dh = o.unit.passages.get(k).map(|f| f.hydraulic_diameter);
                match dh {
                    Some(d) => format!("Passage {}   D_h = {}", k + 1, length_text(d)),
                    None => format!("Passage {}", k + 1),
                }
            }),
            outlet: o.rating.as_ref().and_then(|r| r.passages.get(k)).map(|r| {
                (
                    r.x_star,
                    r.nusselt_mean,
                    r.regime == crate::correlations::Regime::Laminar,
                )
            }),
        })
        .collect();
    // One Nu axis for every panel.
    let (mut lo, mut hi) = (f64::INFINITY, 0.0f64);
    for p in &e.passages {
        for row in plotted(p) {
            for v in &row[1..] {
                lo = lo.min(*v);
                hi = hi.max(*v);
            }
        }
        for v in [p.nusselt_t_fully_developed, p.nusselt_h1_fully_developed] {
            if v.is_finite() && v > 0.0 {
                lo = lo.min(v);
                hi = hi.max(v);
            }
        }
    }
    if !(lo.is_finite() && hi > 0.0) {
        (lo, hi) = (1.0, 100.0);
    }
    let axis = nu_axis(lo, hi);

    let ss = SUPERSAMPLE;
    let (fs1, margin1) = metrics(width);
    let (fs, margin) = (fs1 * ss as f64, margin1 * ss as f64);
    let w = width * ss;
    let avail = w as f64 - 2.0 * margin;
    let (title, header) = title_lines(o, fs, margin, avail);
    let (note, footer) = footer_lines(o, e, fs, avail);
    let (header, footer) = (
        header.round() as u32,
        (footer + 0.5 * margin).round() as u32,
    );
    let panel_h = (0.5 * w as f64 + if several { 2.2 * fs } else { 0.0 }).round() as u32;
    let h = header + panel_h * panels.len() as u32 + footer;
    let mut buf = vec![255u8; (w * h * 3) as usize];
    let mut maps = String::new();
    {
        let root = BitMapBackend::with_buffer(&mut buf, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error)?;
        let (head, rest) = root.split_vertically(header);
        draw_lines(&head, &title, margin)?;
        let mut rest = rest;
        for (k, panel) in panels.iter().enumerate() {
            let (area, below) = rest.split_vertically(panel_h);
            let map = draw_panel(&area, panel, &axis, fs, margin)?;
            let _ = write!(
                maps,
                "{}panel={} left_px={} right_px={} top_px={} bottom_px={} x_min={X_MIN} \
                 x_max={X_MAX} nu_min={} nu_max={} scale=log10",
                if k == 0 { "" } else { "; " },
                k + 1,
                map.0 as f64 / ss as f64,
                map.1 as f64 / ss as f64,
                map.2 as f64 / ss as f64,
                map.3 as f64 / ss as f64,
                axis.0,
                axis.1
            );
            rest = below;
        }
        draw_lines(&rest, &note, margin)?;
        root.present().map_err(plot_error)?;
    }
    let small = downsample(&buf, w as usize, h as usize, ss as usize);
    png::encode_rgb(w / ss, h / ss, &small, &[("canalis:plot", maps)])
}

/// The mean of each `f` × `f` block of RGB pixels.
fn downsample(buf: &[u8], w: usize, h: usize, f: usize) -> Vec<u8> {
    let (sw, sh) = (w / f, h / f);
    let mut out = vec![0u8; sw * sh * 3];
    for y in 0..sh {
        for x in 0..sw {
            for c in 0..3 {
                let mut sum = 0u32;
                for dy in 0..f {
                    for dx in 0..f {
                        sum += buf[((y * f + dy) * w + x * f + dx) * 3 + c] as u32;
                    }
                }
                out[(y * sw + x) * 3 + c] = ((sum as f64) / (f * f) as f64).round() as u8;
            }
        }
    }
    out
}

fn font(size: f64, c: [u8; 3]) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&rgb(c))
}

fn text<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    s: &str,
    at: (f64, f64),
    style: TextStyle,
) -> Result<()> {
    area.draw(&Text::new(
        s.to_string(),
        (at.0.round() as i32, at.1.round() as i32),
        style,
    ))
    .map_err(plot_error)
}

/// Lines of text: (text, size, colour, baseline-free top y), laid out top down.
type Lines = Vec<(String, f64, [u8; 3], f64)>;

/// Width of `s` at `size` pixels in the embedded font.
fn text_width(s: &str, size: f64) -> f64 {
    (FAMILY, size)
        .into_font()
        .box_size(s)
        .map_or(0.0, |(w, _)| w as f64)
}

/// The largest size up to `size` at which `s` fits in `max_w` pixels.
fn fitted(s: &str, size: f64, max_w: f64) -> f64 {
    let tw = text_width(s, size);
    if tw > max_w && tw > 0.0 {
        size * max_w / tw
    } else {
        size
    }
}

/// `s` broken at spaces into lines no wider than `max_w` (a single long word stays whole).
fn wrap(s: &str, size: f64, max_w: f64) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    for word in s.split(' ') {
        match lines.last_mut() {
            Some(line) if text_width(&format!("{line} {word}"), size) <= max_w => {
                line.push(' ');
                line.push_str(word);
            }
            _ => lines.push(word.to_string()),
        }
    }
    lines
}

/// The title block: the shape's name, what is plotted and the model, wrapped to the width.
fn title_lines(o: &Outcome, fs: f64, margin: f64, avail: f64) -> (Lines, f64) {
    let mut lines = Vec::new();
    let size = fitted(&o.name, 1.3 * fs, avail);
    lines.push((o.name.clone(), size, INK, margin));
    let mut y = margin + 2.0 * fs;
    for (s, size, c) in [
        (
            "Thermal entrance: local and mean Nusselt numbers, T (uniform wall temperature) \
             and H1 (uniform heat input)",
            fs,
            INK,
        ),
        (
            "Model: fully developed laminar velocity, uniform inlet temperature, constant \
             properties, no axial conduction",
            0.9 * fs,
            GREY,
        ),
    ] {
        for line in wrap(s, size, avail) {
            lines.push((line, size, c, y));
            y += 1.45 * size;
        }
    }
    (lines, y + 0.4 * fs)
}

/// The note under the panels: the march's grid and steps, and what the shading means.
fn footer_lines(o: &Outcome, e: &ThermalEntrance, fs: f64, avail: f64) -> (Lines, f64) {
    let cells = o
        .entrance
        .as_ref()
        .map(|x| format!("{} × {} cells", x.cells.0, x.cells.1))
        .unwrap_or_default();
    let leveque = e.passages.iter().any(|p| p.leveque.resolved_from > X_MIN);
    let mut s = format!(
        "Marched on {cells} in {} steps; the curves join the march's points.",
        e.steps
    );
    if leveque {
        s.push_str(
            " Shaded: the inlet region where the thermal layer is too thin for the grid and its \
             thin-layer (Lévêque) limit stands for the local values.",
        );
    }
    let size = 0.8 * fs;
    let mut y = 0.9 * fs;
    let mut lines = Vec::new();
    for line in wrap(&s, size, avail) {
        lines.push((line, size, GREY, y));
        y += 1.4 * size;
    }
    (lines, y)
}

fn draw_lines<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    lines: &Lines,
    x: f64,
) -> Result<()> {
    for (s, size, c, y) in lines {
        text(area, s, (x, *y), font(*size, *c))?;
    }
    Ok(())
}

/// Draws one passage's panel; returns the plotting area in pixels (left, right, top, bottom).
fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    panel: &Panel,
    axis: &(f64, f64, Vec<f64>, Vec<f64>),
    fs: f64,
    margin: f64,
) -> Result<(i32, i32, i32, i32)> {
    let (nu_lo, nu_hi, nu_bold, nu_light) = axis;
    let w = area.dim_in_pixel().0 as f64;
    let legend_w = (0.27 * w).round();
    let (chart_area, legend_area) = area.split_horizontally((w - legend_w).round() as u32);
    let (chart_area, legend_area) = (
        chart_area.margin(0, 0, margin.round() as i32, 0),
        legend_area.margin(0, 0, 0, margin.round() as i32),
    );
    let mut top = 0.6 * fs;
    if let Some(hd) = &panel.heading {
        text(&chart_area, hd, (0.0, 0.9 * fs), font(1.05 * fs, INK))?;
        top += 2.2 * fs;
    }
    let x_bold: Vec<f64> = (-5..=0).map(|k| 10f64.powi(k)).collect();
    let x_light: Vec<f64> =
        decade_values(X_MIN, X_MAX, &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0])
            .into_iter()
            .filter(|v| *v >= X_MIN * (1.0 - 1e-9) && *v <= X_MAX * (1.0 + 1e-9))
            .collect();
    let mut chart = ChartBuilder::on(&chart_area)
        .margin_top(top.round() as i32)
        .margin_right((0.8 * fs).round() as i32)
        .x_label_area_size((3.3 * fs).round() as i32)
        .y_label_area_size((4.2 * fs).round() as i32)
        .build_cartesian_2d(
            (X_MIN..X_MAX)
                .log_scale()
                .with_key_points(x_bold)
                .with_light_points(x_light),
            (*nu_lo..*nu_hi)
                .log_scale()
                .with_key_points(nu_bold.clone())
                .with_light_points(nu_light.clone()),
        )
        .map_err(plot_error)?;
    let stroke = |c: [u8; 3], width: f64| ShapeStyle {
        color: rgb(c).to_rgba(),
        filled: false,
        stroke_width: width.round().max(1.0) as u32,
    };
    let line_w = (fs / 7.0).max(2.0);
    let x_fmt = |v: &f64| power_of_ten(*v);
    let y_fmt = |v: &f64| nu_label(*v);
    chart
        .configure_mesh()
        .x_desc("x* = x / (D_h·Re·Pr)")
        .y_desc("Nusselt number")
        .label_style(font(fs, INK))
        .axis_desc_style(font(fs, INK))
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .bold_line_style(stroke([215, 215, 215], 0.1 * fs))
        .light_line_style(stroke([238, 238, 238], 0.1 * fs))
        .axis_style(stroke(INK, 0.12 * fs))
        .set_all_tick_mark_size((0.35 * fs).round() as i32)
        .draw()
        .map_err(plot_error)?;

    let p = panel.entrance;
    // The inlet region where the Lévêque limit stands for the local values.
    let lev = p.leveque.resolved_from;
    if lev > X_MIN {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(X_MIN, *nu_lo), (lev.min(X_MAX), *nu_hi)],
                rgb([120, 120, 120]).mix(0.09).filled(),
            )))
            .map_err(plot_error)?;
    }
    // Asymptotes, dashed, under the curves.
    let dash = (0.9 * fs).round() as i32;
    for (fd, c) in [
        (p.nusselt_t_fully_developed, T_COLOURS[0]),
        (p.nusselt_h1_fully_developed, H1_COLOURS[0]),
    ] {
        if fd.is_finite() && fd > *nu_lo && fd < *nu_hi {
            chart
                .draw_series(DashedLineSeries::new(
                    [(X_MIN, fd), (X_MAX, fd)],
                    dash,
                    (0.6 * fs).round() as i32,
                    stroke(c, 0.6 * line_w),
                ))
                .map_err(plot_error)?;
        }
    }
    // The curves: means first, so the local values lie on top.
    let rows = plotted(p);
    for (col, c) in [
        (2, T_COLOURS[1]),
        (4, H1_COLOURS[1]),
        (1, T_COLOURS[0]),
        (3, H1_COLOURS[0]),
    ] {
        chart
            .draw_series(LineSeries::new(
                rows.iter().map(|r| (r[0], r[col].clamp(*nu_lo, *nu_hi))),
                stroke(c, line_w),
            ))
            .map_err(plot_error)?;
    }
    // A frame around the data (the mesh draws the left and bottom axes only).
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(X_MIN, *nu_lo), (X_MAX, *nu_hi)],
            stroke(INK, 0.12 * fs),
        )))
        .map_err(plot_error)?;
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let plot_px = (xr.start, xr.end, yr.start, yr.end);
    // The outlet.
    if let Some((x_out, _, _)) = panel.outlet {
        if (X_MIN..=X_MAX).contains(&x_out) {
            chart
                .draw_series(DashedLineSeries::new(
                    [(x_out, *nu_lo), (x_out, *nu_hi)],
                    (1.2 * fs).round() as i32,
                    (0.35 * fs).round() as i32,
                    stroke(INK, 0.7 * line_w),
                ))
                .map_err(plot_error)?;
            let label = format!("outlet x* = {}", x_text(x_out));
            let (px, _) = chart.backend_coord(&(x_out, *nu_hi));
            let base = chart_area.get_base_pixel();
            let px = (px - base.0) as f64;
            let style = font(0.9 * fs, INK);
            let tw = chart_area
                .estimate_text_size(&label, &style)
                .map(|s| s.0 as f64)
                .unwrap_or(0.0);
            // Right of the line unless that leaves the plot, then left of it.
            let x = if px + 0.4 * fs + tw <= (plot_px.1 - base.0) as f64 {
                px + 0.4 * fs
            } else {
                px - 0.4 * fs - tw
            };
            let y = (plot_px.2 - base.1) as f64 + 0.5 * fs;
            chart_area
                .draw(&Rectangle::new(
                    [
                        ((x - 0.2 * fs) as i32, (y - 0.15 * fs) as i32),
                        ((x + tw + 0.2 * fs) as i32, (y + 1.15 * fs) as i32),
                    ],
                    WHITE.mix(0.85).filled(),
                ))
                .map_err(plot_error)?;
            text(&chart_area, &label, (x, y), style)?;
        }
    }
    draw_legend(&legend_area, panel, top + 0.2 * fs, fs, line_w)?;
    Ok(plot_px)
}

/// The legend and the passage's figures, right of its panel.
fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    panel: &Panel,
    top: f64,
    fs: f64,
    line_w: f64,
) -> Result<()> {
    let p = panel.entrance;
    let avail = area.dim_in_pixel().0 as f64;
    let x0 = 0.8 * fs;
    let sample = 2.2 * fs;
    let tx = x0 + sample + 0.6 * fs;
    let mut y = top;
    let step = 1.55 * fs;
    let stroke = |c: [u8; 3], w: f64| ShapeStyle {
        color: rgb(c).to_rgba(),
        filled: false,
        stroke_width: w.round().max(1.0) as u32,
    };
    let put = |s: &str, y: f64, size: f64, c: [u8; 3], x: f64| -> Result<()> {
        let size = fitted(s, size, avail - x);
        text(area, s, (x, y - 0.5 * size), font(size, c))
    };
    let solid = |y: f64, c: [u8; 3]| {
        area.draw(&PathElement::new(
            vec![(x0 as i32, y as i32), ((x0 + sample) as i32, y as i32)],
            stroke(c, line_w),
        ))
        .map_err(plot_error)
    };
    let dashed = |y: f64, c: [u8; 3], w: f64, dash: f64, gap: f64| {
        area.draw(&DashedPathElement::new(
            vec![(x0 as i32, y as i32), ((x0 + sample) as i32, y as i32)],
            dash.round() as i32,
            gap.round() as i32,
            stroke(c, w),
        ))
        .map_err(plot_error)
    };
    for (label, c) in [
        ("Nu_x,T   local", T_COLOURS[0]),
        ("Nu_m,T   mean", T_COLOURS[1]),
        ("Nu_x,H1  local", H1_COLOURS[0]),
        ("Nu_m,H1  mean", H1_COLOURS[1]),
    ] {
        solid(y, c)?;
        put(label, y, fs, INK, tx)?;
        y += step;
    }
    y += 0.3 * fs;
    put("fully developed:", y, 0.9 * fs, GREY, x0)?;
    y += 1.3 * fs;
    for (label, v, c) in [
        ("Nu_T", p.nusselt_t_fully_developed, T_COLOURS[0]),
        ("Nu_H1", p.nusselt_h1_fully_developed, H1_COLOURS[0]),
    ] {
        dashed(y, c, 0.6 * line_w, 0.9 * fs, 0.6 * fs)?;
        put(&format!("{label} = {}", sig4(v)), y, fs, INK, tx)?;
        y += step;
    }
    y += 0.3 * fs;
    let len = |v: Option<f64>| v.map_or("beyond 1".to_string(), x_text);
    put("entrance length x* (5 %):", y, 0.9 * fs, GREY, x0)?;
    y += 1.3 * fs;
    put(
        &format!(
            "T: {}    H1: {}",
            len(p.length_star_t),
            len(p.length_star_h1)
        ),
        y,
        0.9 * fs,
        INK,
        x0,
    )?;
    y += step + 0.3 * fs;
    if let Some((x_out, nu_mean, laminar)) = panel.outlet {
        dashed(y, INK, 0.7 * line_w, 1.2 * fs, 0.35 * fs)?;
        put(&format!("outlet x* = {}", x_text(x_out)), y, fs, INK, tx)?;
        y += 1.3 * fs;
        if !(X_MIN..=X_MAX).contains(&x_out) {
            put("(outside the x* axis)", y, 0.85 * fs, GREY, tx)?;
            y += 1.2 * fs;
        }
        let model = if laminar {
            format!("rating: mean Nu {}", sig4(nu_mean))
        } else {
            format!("rating: mean Nu {} (correlation)", sig4(nu_mean))
        };
        put(&model, y, 0.85 * fs, GREY, x0)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nu_axis_rounds_outward_on_the_decade_series() {
        let (a, b, bold, light) = nu_axis(3.66, 90.6);
        assert_eq!((a, b), (3.0, 150.0));
        assert_eq!(bold.first().copied(), Some(3.0));
        assert_eq!(bold.last().copied(), Some(100.0));
        assert!(light.contains(&4.0) && light.contains(&90.0));
    }

    #[test]
    fn labels_read_as_written() {
        assert_eq!(power_of_ten(1e-5), "10⁻⁵");
        assert_eq!(power_of_ten(1.0), "1");
        assert_eq!(nu_label(150.0), "150");
        assert_eq!(nu_label(0.5), "0.5");
        assert_eq!(x_text(0.0312345), "0.0312");
        assert_eq!(x_text(3.2e-5), "3.20×10⁻⁵");
    }
}
