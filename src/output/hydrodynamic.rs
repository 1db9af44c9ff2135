//! The hydrodynamic entrance files of `--out`: `hydrodynamic.png` and `hydrodynamic.csv`,
//! written when the run marched the developing velocity from a uniform inlet (with
//! `--entrance`, or a thermal rating, which implies it).
//!
//! Owns: the plot and the table of the developing-flow curves.
//!
//! * `hydrodynamic.csv`: one row per march point of each passage, columns `passage` (1, 2, …
//!   in the order of the report's `passages`), `x_plus`, `apparent_f_re`,
//!   `incremental_pressure_drop`, `max_to_mean_velocity`; numbers in Rust's shortest
//!   round-trip form (full precision). The first three values are the passage's
//!   [`PassageDeveloping::curve`] (below the resolved wall layer the thin-layer limit, as in
//!   the report), so the rows at the stations equal the report's `entrance.hydrodynamic`
//!   arrays; u_max/ū is the curve's u_max/u_max,fd times
//!   [`PassageDeveloping::max_to_mean_fully_developed`].
//! * `hydrodynamic.png`: two panels per passage, stacked, against x+ = x/(D_h·Re) from 1e-5
//!   to 1 on a logarithmic axis. Top: the apparent (Fanning) f·Re, logarithmic, with the fully
//!   developed f·Re as a dashed asymptote, the large-x+ asymptote f·Re + K(∞)/(4x+) and the
//!   small-x+ limit 3.44/√x+ as thin dotted lines. Bottom: u_max/ū and K(x) on a linear axis,
//!   their fully developed values (u_max/ū of the fully developed flow, K(∞)) dashed. Both
//!   mark the entrance length L+ (u_max within 1 % of its fully developed value) with a thin
//!   grey line, the inlet region where the wall layer is thinner than the grid resolves (the
//!   thin-layer limit stands for the pressure there) shaded, and at an operating point with
//!   `--length` the passage's outlet x+ = L/(D_h·Re) (Re of the passage) with a dash-dot line.
//!   Every panel of one kind has the same y axis, so passages compare at a glance; legends and
//!   values stand to the right of each panel, outside the data. The PNG carries a
//!   `canalis:plot` text chunk with each panel's map: `panel` (1, 2, … top down), `passage`,
//!   `y` (what the y axis shows: `apparent_f_re`, or
//!   `max_to_mean_velocity,incremental_pressure_drop`), the plotting area `left_px`,
//!   `right_px`, `top_px`, `bottom_px`, the ranges `x_min`, `x_max`, `y_min`, `y_max` and the
//!   scales: `px = left_px + (right_px − left_px)·log(x+/x_min)/log(x_max/x_min)`, and
//!   `py = bottom_px − (bottom_px − top_px)·log(y/y_min)/log(y_max/y_min)` for
//!   `y_scale=log10`, `py = bottom_px − (bottom_px − top_px)·(y − y_min)/(y_max − y_min)` for
//!   `y_scale=linear`.
//!
//! Drawn with `plotters` on the page of [`super::plot`], like `entrance.png` (embedded DejaVu
//! Sans, twice the size box-filtered down 2 × 2, encoded by `png::encode_rgb`). Colours:
//! Okabe–Ito (see [`super::png`]): f·Re blue, K vermillion (and the K(∞) asymptote of f·Re),
//! u_max/ū bluish green, the thin-layer limit reddish purple.
//!
//! Invariant: computes no physics; every number is a value of the outcome's hydrodynamic
//! entrance or operating point, and the two asymptotes are the formulas above of its values.

use super::plot::{
    asymptote, fitted, font, line_width, log_axis, log_y, march_grid, note_lines, outlet,
    pixels_text, plot_error, power_of_ten, register_font, render, rgb, round_label, stroke,
    styled_mesh, text, title_lines, vertical, x_log_chart, x_text, Area, LogAxis, Page, GREY,
    X_MAX, X_MIN,
};
use super::png::{length_text, sig4, INK, SERIES};
use crate::correlations::Regime;
use crate::error::Result;
use crate::hydrodynamic::{HydrodynamicEntrance, PassageDeveloping, MODEL};
use crate::outcome::Outcome;
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::ShapeStyle;
use std::fmt::Write;

/// The files of this module, in the order [`files`] returns them.
pub const FILES: [&str; 2] = ["hydrodynamic.png", "hydrodynamic.csv"];

const FILE: &str = FILES[0];

/// The thin-layer limit of the apparent f·Re, 3.44/√x+ (the figure the march's Blasius head
/// gives, see [`crate::hydrodynamic`]).
const THIN_LAYER: f64 = 3.44;

const F_COLOUR: [u8; 3] = SERIES[0];
const K_COLOUR: [u8; 3] = SERIES[1];
const U_COLOUR: [u8; 3] = SERIES[2];
const HEAD_COLOUR: [u8; 3] = SERIES[3];

/// The bytes of [`FILES`] (in that order) when the run marched the entrance (each `None` if
/// that march has no hydrodynamic part), or nothing when it did not: the entries line up with
/// [`super::targets`].
pub fn files(o: &Outcome, width: u32) -> Result<Vec<Option<Vec<u8>>>> {
    let Some(e) = &o.entrance else {
        return Ok(Vec::new());
    };
    let Some(h) = &e.hydrodynamic else {
        return Ok(vec![None; FILES.len()]);
    };
    Ok(vec![
        Some(hydrodynamic_png(o, h, width)?),
        Some(hydrodynamic_csv(h).into_bytes()),
    ])
}

/// `hydrodynamic.csv`: every march point of every passage (see the module documentation).
pub fn hydrodynamic_csv(h: &HydrodynamicEntrance) -> String {
    let mut s = String::from(
        "passage,x_plus,apparent_f_re,incremental_pressure_drop,max_to_mean_velocity\n",
    );
    for (k, p) in h.passages.iter().enumerate() {
        for q in &p.curve {
            let _ = writeln!(
                s,
                "{},{},{},{},{}",
                k + 1,
                q[0],
                q[1],
                q[2],
                q[3] * p.max_to_mean_fully_developed
            );
        }
    }
    s
}

// ---------------------------------------------------------------------------------------------
// The plot.

/// (x+, f_app·Re, K, u_max/ū) at the march points within the x+ axis.
fn plotted(p: &PassageDeveloping) -> Vec<[f64; 4]> {
    p.curve
        .iter()
        .filter(|q| q[0] >= X_MIN * (1.0 - 1e-9) && q[0] <= X_MAX * (1.0 + 1e-9))
        .map(|q| {
            [
                q[0].clamp(X_MIN, X_MAX),
                q[1],
                q[2],
                q[3] * p.max_to_mean_fully_developed,
            ]
        })
        .filter(|r| r.iter().all(|v| v.is_finite()) && r[1] > 0.0)
        .collect()
}

/// A linear axis around `lo..hi`: (lower bound, upper bound, labelled ticks, light lines), the
/// bounds on multiples of a round step (1, 2, 2.5 or 5 × 10^k, at most six steps), room above
/// the data, and zero included.
fn linear_axis(lo: f64, hi: f64) -> LogAxis {
    let (lo, hi) = (lo.min(0.0), hi.max(lo + 1e-9));
    let span = (hi - lo) * 1.08;
    let mut step = 1.0;
    'find: for k in -3..6 {
        for m in [1.0, 2.0, 2.5, 5.0] {
            step = m * 10f64.powi(k);
            if span / step <= 6.0 {
                break 'find;
            }
        }
    }
    let a = (lo / step).floor() * step;
    let b = ((lo + span) / step).ceil() * step;
    let ticks = |s: f64| -> Vec<f64> {
        let n = ((b - a) / s).round() as i64;
        (0..=n).map(|i| a + i as f64 * s).collect()
    };
    (a, b, ticks(step), ticks(step / 5.0))
}

/// What one passage's two panels show.
struct Passage<'a> {
    developing: &'a PassageDeveloping,
    /// "Passage k, D_h = …" with several passages.
    heading: Option<String>,
    /// The outlet x+, the passage's Re and whether its flow is laminar.
    outlet: Option<(f64, f64, bool)>,
}

/// `hydrodynamic.png`: see the module documentation.
pub fn hydrodynamic_png(o: &Outcome, h: &HydrodynamicEntrance, width: u32) -> Result<Vec<u8>> {
    register_font()?;
    let several = h.passages.len() > 1;
    let length = o
        .operating
        .as_ref()
        .and_then(|op| op.length.as_ref())
        .map(|l| l.length_m);
    let passages: Vec<Passage> = h
        .passages
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let dh = o.unit.passages.get(k).map(|f| f.hydraulic_diameter);
            let point = o.operating.as_ref().and_then(|op| op.passages.get(k));
            Passage {
                developing: p,
                heading: several.then(|| match dh {
                    Some(d) => format!("Passage {}   D_h = {}", k + 1, length_text(d)),
                    None => format!("Passage {}", k + 1),
                }),
                outlet: match (length, dh, point) {
                    (Some(l), Some(d), Some(r)) if d > 0.0 && r.reynolds > 0.0 => Some((
                        l / (d * r.reynolds),
                        r.reynolds,
                        r.regime == Regime::Laminar,
                    )),
                    _ => None,
                },
            }
        })
        .collect();
    // One axis for every top panel, one for every bottom panel.
    let (mut f_lo, mut f_hi) = (f64::INFINITY, 0.0f64);
    let (mut l_lo, mut l_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in &h.passages {
        let mut fs = vec![p.fanning_f_re];
        let mut ls = vec![p.max_to_mean_fully_developed, p.k_infinity];
        for r in plotted(p) {
            fs.push(r[1]);
            ls.extend([r[2], r[3]]);
        }
        for v in fs.into_iter().filter(|v| v.is_finite() && *v > 0.0) {
            f_lo = f_lo.min(v);
            f_hi = f_hi.max(v);
        }
        for v in ls.into_iter().filter(|v| v.is_finite()) {
            l_lo = l_lo.min(v);
            l_hi = l_hi.max(v);
        }
    }
    if !(f_lo.is_finite() && f_hi > 0.0) {
        (f_lo, f_hi) = (10.0, 1000.0);
    }
    if !(l_lo.is_finite() && l_hi.is_finite()) {
        (l_lo, l_hi) = (0.0, 2.0);
    }
    let f_axis = log_axis(f_lo, f_hi);
    let l_axis = linear_axis(l_lo, l_hi);

    let page = Page::new(width);
    let (fs, margin) = (page.fs, page.margin);
    let model = format!("Model: {MODEL}");
    let (title, title_h) = title_lines(
        &o.name,
        &[
            (
                "Hydrodynamic entrance from a uniform inlet velocity: apparent friction f_app·Re, \
                 velocity maximum u_max/ū and incremental pressure drop K(x)",
                fs,
                INK,
            ),
            (&model, 0.9 * fs, GREY),
        ],
        fs,
        margin,
        page.avail,
    );
    let (note, note_h) = note_lines(&footer_text(o, h), fs, page.avail);
    let heading = if several { 2.2 * fs } else { 0.0 };
    let top_h = (0.42 * page.w as f64 + heading).round() as u32;
    let bottom_h = (0.3 * page.w as f64).round() as u32;
    let heights: Vec<u32> = passages.iter().flat_map(|_| [top_h, bottom_h]).collect();
    render(
        &page,
        &title,
        title_h,
        &heights,
        &note,
        note_h,
        FILE,
        |k, area| {
            let passage = &passages[k / 2];
            let (map, axis, y, scale) = if k % 2 == 0 {
                let map = draw_friction(area, passage, &f_axis, fs, margin)?;
                (map, &f_axis, "apparent_f_re", "log10")
            } else {
                let map = draw_development(area, passage, &l_axis, fs, margin)?;
                (
                    map,
                    &l_axis,
                    "max_to_mean_velocity,incremental_pressure_drop",
                    "linear",
                )
            };
            Ok(format!(
                "panel={} passage={} y={y} {} x_min={X_MIN} x_max={X_MAX} y_min={} y_max={} \
                 x_scale=log10 y_scale={scale}",
                k + 1,
                k / 2 + 1,
                pixels_text(map),
                axis.0,
                axis.1
            ))
        },
    )
}

/// The note under the panels: the march's grid and steps, what the shading means, and whether
/// the march settled.
fn footer_text(o: &Outcome, h: &HydrodynamicEntrance) -> String {
    let cells = march_grid(o);
    let mut s = format!(
        "Marched on {cells} in {} steps; the curves join the march's points.",
        h.steps
    );
    if h.passages.iter().any(|p| p.resolved_from > X_MIN) {
        s.push_str(
            " Shaded: the inlet region where the wall layer is too thin for the grid and its \
             thin-layer limit 3.44/√x+ stands for the pressure.",
        );
    }
    if !h.settled {
        s.push_str(" The flow had not settled to its fully developed state by the last point.");
    }
    s
}

/// The left part of a panel (the chart) and the right (the legend), and the chart's top
/// margin (below the heading, when there is one).
fn split<'a>(
    area: &Area<'a>,
    heading: Option<&str>,
    fs: f64,
    margin: f64,
) -> Result<(Area<'a>, Area<'a>, f64)> {
    let w = area.dim_in_pixel().0 as f64;
    let legend_w = (0.27 * w).round();
    let (chart_area, legend_area) = area.split_horizontally((w - legend_w).round() as u32);
    let (chart_area, legend_area) = (
        chart_area.margin(0, 0, margin.round() as i32, 0),
        legend_area.margin(0, 0, 0, margin.round() as i32),
    );
    let mut top = 0.6 * fs;
    if let Some(hd) = heading {
        text(&chart_area, hd, (0.0, 0.9 * fs), font(1.05 * fs, INK), FILE)?;
        top += 2.2 * fs;
    }
    Ok((chart_area, legend_area, top))
}

/// The thin solid grey line of L+.
fn length_style(fs: f64) -> ShapeStyle {
    stroke(GREY, 0.35 * line_width(fs))
}

/// `f` at 400 points evenly spaced in log x+ over the axis, where it lies within `lo..hi`.
fn clipped(f: impl Fn(f64) -> f64, lo: f64, hi: f64) -> Vec<(f64, f64)> {
    let n = 400;
    (0..=n)
        .map(|i| X_MIN * (X_MAX / X_MIN).powf(i as f64 / n as f64))
        .map(|x| (x, f(x)))
        .filter(|(_, v)| v.is_finite() && *v >= lo && *v <= hi)
        .collect()
}

/// The top panel: f_app·Re with its asymptotes; returns the plotting area in pixels (left,
/// right, top, bottom).
fn draw_friction(
    area: &DrawingArea<BitMapBackend, Shift>,
    passage: &Passage,
    axis: &LogAxis,
    fs: f64,
    margin: f64,
) -> Result<(i32, i32, i32, i32)> {
    let err = plot_error(FILE);
    let (lo, hi, _, _) = axis;
    let (chart_area, legend_area, top) = split(area, passage.heading.as_deref(), fs, margin)?;
    let mut chart = x_log_chart(&chart_area, top, fs, log_y(axis), FILE)?;
    let line_w = line_width(fs);
    let x_fmt = |v: &f64| power_of_ten(*v);
    let y_fmt = |v: &f64| round_label(*v);
    styled_mesh(&mut chart, fs)
        .x_desc("x+ = x / (D_h·Re)")
        .y_desc("apparent f·Re (Fanning)")
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .draw()
        .map_err(&err)?;

    let p = passage.developing;
    shade_head(&mut chart, p, (*lo, *hi))?;
    // The fully developed value, dashed, under the curve.
    let f_re = p.fanning_f_re;
    asymptote(&mut chart, f_re, (*lo, *hi), F_COLOUR, fs, line_w, FILE)?;
    let rows = plotted(p);
    chart
        .draw_series(LineSeries::new(
            rows.iter().map(|r| (r[0], r[1].clamp(*lo, *hi))),
            stroke(F_COLOUR, line_w),
        ))
        .map_err(&err)?;
    // The limits over the curve, which follows them at both ends.
    let k_inf = p.k_infinity;
    for (points, c) in [
        (clipped(|x| f_re + k_inf / (4.0 * x), *lo, *hi), K_COLOUR),
        (clipped(|x| THIN_LAYER / x.sqrt(), *lo, *hi), HEAD_COLOUR),
    ] {
        if points.len() < 2 {
            continue;
        }
        let dot = stroke(c, 0.5 * line_w).filled();
        let r = (0.4 * line_w).round().max(1.0) as i32;
        chart
            .draw_series(DottedLineSeries::new(
                points,
                0,
                (0.45 * fs).round() as i32,
                move |at| Circle::new(at, r, dot),
            ))
            .map_err(&err)?;
    }
    let plot_px = finish(&mut chart, passage, (*lo, *hi), fs, true)?;
    if let Some((x_out, _, _)) = passage.outlet {
        if (X_MIN..=X_MAX).contains(&x_out) {
            let label = format!("outlet x+ = {}", x_text(x_out));
            outlet(
                &mut chart,
                &chart_area,
                x_out,
                (*lo, *hi),
                &label,
                fs,
                line_w,
                FILE,
            )?;
        }
    }
    let mut legend = Legend::new(&legend_area, top + 0.2 * fs, fs);
    legend.line(Sample::Solid(F_COLOUR), "apparent f·Re")?;
    legend.line(
        Sample::Dashed(F_COLOUR),
        &format!("f·Re = {} (developed)", sig4(f_re)),
    )?;
    legend.line(Sample::Dotted(K_COLOUR), "f·Re + K(∞)/(4x+)")?;
    legend.line(Sample::Dotted(HEAD_COLOUR), "3.44/√x+ (thin layer)")?;
    legend.gap();
    match p.length_plus {
        Some(l) => legend.line(Sample::Length, &format!("L+ = {} (1 %)", x_text(l)))?,
        None => legend.note("L+ (1 %): beyond the march", GREY, 0.9)?,
    }
    if let Some((x_out, re, laminar)) = passage.outlet {
        legend.line(Sample::Outlet, &format!("outlet x+ = {}", x_text(x_out)))?;
        if !(X_MIN..=X_MAX).contains(&x_out) {
            legend.note("(outside the x+ axis)", GREY, 0.85)?;
        }
        if !laminar {
            legend.note(
                &format!("Re = {}: not laminar, the march does not apply", sig4(re)),
                GREY,
                0.85,
            )?;
        }
    }
    Ok(plot_px)
}

/// The bottom panel: u_max/ū and K(x); returns the plotting area in pixels.
fn draw_development(
    area: &DrawingArea<BitMapBackend, Shift>,
    passage: &Passage,
    axis: &LogAxis,
    fs: f64,
    margin: f64,
) -> Result<(i32, i32, i32, i32)> {
    let err = plot_error(FILE);
    let (lo, hi, bold, _) = axis;
    let (chart_area, legend_area, top) = split(area, None, fs, margin)?;
    let mut chart = x_log_chart(&chart_area, top, fs, *lo..*hi, FILE)?;
    let line_w = line_width(fs);
    let x_fmt = |v: &f64| power_of_ten(*v);
    let y_fmt = |v: &f64| round_label(*v);
    styled_mesh(&mut chart, fs)
        .x_desc("x+ = x / (D_h·Re)")
        .y_desc("u_max/ū,  K(x)")
        .y_labels(bold.len())
        .y_max_light_lines(4)
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .draw()
        .map_err(&err)?;

    let p = passage.developing;
    shade_head(&mut chart, p, (*lo, *hi))?;
    for (fd, c) in [
        (p.max_to_mean_fully_developed, U_COLOUR),
        (p.k_infinity, K_COLOUR),
    ] {
        asymptote(&mut chart, fd, (*lo, *hi), c, fs, line_w, FILE)?;
    }
    let rows = plotted(p);
    for (col, c) in [(2, K_COLOUR), (3, U_COLOUR)] {
        chart
            .draw_series(LineSeries::new(
                rows.iter().map(|r| (r[0], r[col].clamp(*lo, *hi))),
                stroke(c, line_w),
            ))
            .map_err(&err)?;
    }
    let plot_px = finish(&mut chart, passage, (*lo, *hi), fs, false)?;
    let mut legend = Legend::new(&legend_area, top + 0.2 * fs, fs);
    legend.line(Sample::Solid(U_COLOUR), "u_max/ū")?;
    legend.line(
        Sample::Dashed(U_COLOUR),
        &format!(
            "u_max/ū = {} (developed)",
            sig4(p.max_to_mean_fully_developed)
        ),
    )?;
    legend.line(Sample::Solid(K_COLOUR), "K(x)")?;
    legend.line(
        Sample::Dashed(K_COLOUR),
        &format!("K(∞) = {}", sig4(p.k_infinity)),
    )?;
    Ok(plot_px)
}

/// Shades the inlet region where the thin-layer limit stands for the pressure.
fn shade_head<Y: plotters::coord::ranged1d::Ranged<ValueType = f64>>(
    chart: &mut super::plot::Chart<'_, '_, Y>,
    p: &PassageDeveloping,
    (lo, hi): (f64, f64),
) -> Result<()> {
    let from = p.resolved_from;
    if from > X_MIN {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(X_MIN, lo), (from.min(X_MAX), hi)],
                rgb([120, 120, 120]).mix(0.09).filled(),
            )))
            .map_err(plot_error(FILE))?;
    }
    Ok(())
}

/// The frame, L+ and (on the bottom panel; the top one draws it with its label) the outlet;
/// returns the plotting area in pixels.
fn finish<Y: plotters::coord::ranged1d::Ranged<ValueType = f64>>(
    chart: &mut super::plot::Chart<'_, '_, Y>,
    passage: &Passage,
    (lo, hi): (f64, f64),
    fs: f64,
    top_panel: bool,
) -> Result<(i32, i32, i32, i32)> {
    // A frame around the data (the mesh draws the left and bottom axes only).
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(X_MIN, lo), (X_MAX, hi)],
            stroke(INK, 0.12 * fs),
        )))
        .map_err(plot_error(FILE))?;
    if let Some(l) = passage.developing.length_plus {
        if (X_MIN..=X_MAX).contains(&l) {
            vertical(chart, l, (lo, hi), (0.0, 0.0), length_style(fs), FILE)?;
        }
    }
    if !top_panel {
        if let Some((x_out, _, _)) = passage.outlet {
            if (X_MIN..=X_MAX).contains(&x_out) {
                super::plot::outlet_line(chart, x_out, (lo, hi), fs, line_width(fs), FILE)?;
            }
        }
    }
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    Ok((xr.start, xr.end, yr.start, yr.end))
}

/// What a legend line shows left of its text.
enum Sample {
    Solid([u8; 3]),
    Dashed([u8; 3]),
    Dotted([u8; 3]),
    /// The thin grey line of L+.
    Length,
    /// The dark dash-dot line of the outlet.
    Outlet,
}

/// A legend right of a panel, written top down.
struct Legend<'a, 'b> {
    area: &'a DrawingArea<BitMapBackend<'b>, Shift>,
    fs: f64,
    y: f64,
}

impl<'a, 'b> Legend<'a, 'b> {
    fn new(area: &'a DrawingArea<BitMapBackend<'b>, Shift>, top: f64, fs: f64) -> Self {
        Legend { area, fs, y: top }
    }

    /// The sample's left end and length, and where its text begins.
    fn columns(&self) -> (f64, f64, f64) {
        let x0 = 0.8 * self.fs;
        let sample = 2.2 * self.fs;
        (x0, sample, x0 + sample + 0.6 * self.fs)
    }

    fn put(&self, s: &str, size: f64, c: [u8; 3], x: f64) -> Result<()> {
        let avail = self.area.dim_in_pixel().0 as f64;
        let size = fitted(s, size, avail - x);
        text(self.area, s, (x, self.y - 0.5 * size), font(size, c), FILE)
    }

    fn line(&mut self, sample: Sample, label: &str) -> Result<()> {
        let err = plot_error(FILE);
        let fs = self.fs;
        let line_w = line_width(fs);
        let (x0, len, tx) = self.columns();
        let y = self.y as i32;
        let ends = vec![(x0 as i32, y), ((x0 + len) as i32, y)];
        let dashed = |c: [u8; 3], w: f64, dash: f64, gap: f64| {
            self.area
                .draw(&DashedPathElement::new(
                    ends.clone(),
                    dash.round() as i32,
                    gap.round() as i32,
                    stroke(c, w),
                ))
                .map_err(&err)
        };
        match sample {
            Sample::Solid(c) => self
                .area
                .draw(&PathElement::new(ends.clone(), stroke(c, line_w)))
                .map_err(&err)?,
            Sample::Dashed(c) => dashed(c, 0.6 * line_w, 0.9 * fs, 0.6 * fs)?,
            Sample::Outlet => dashed(INK, 0.7 * line_w, 1.2 * fs, 0.35 * fs)?,
            Sample::Length => self
                .area
                .draw(&PathElement::new(ends.clone(), length_style(fs)))
                .map_err(&err)?,
            Sample::Dotted(c) => {
                let r = (0.4 * line_w).round().max(1.0) as i32;
                let n = (len / (0.45 * fs)).floor() as i32;
                for i in 0..=n {
                    let x = (x0 + i as f64 * 0.45 * fs) as i32;
                    self.area
                        .draw(&Circle::new((x, y), r, stroke(c, 0.5 * line_w).filled()))
                        .map_err(&err)?;
                }
            }
        }
        self.put(label, fs, INK, tx)?;
        self.y += 1.55 * fs;
        Ok(())
    }

    /// A line of text from the sample's column, `scale` × the font size.
    fn note(&mut self, s: &str, c: [u8; 3], scale: f64) -> Result<()> {
        let (x0, _, _) = self.columns();
        self.put(s, scale * self.fs, c, x0)?;
        self.y += 1.4 * scale * self.fs;
        Ok(())
    }

    fn gap(&mut self) {
        self.y += 0.3 * self.fs;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_axis_takes_zero_and_a_round_step() {
        let (a, b, bold, light) = linear_axis(0.02, 2.0);
        assert_eq!(a, 0.0);
        assert_eq!(b, 2.5);
        assert_eq!(bold, vec![0.0, 0.5, 1.0, 1.5, 2.0, 2.5]);
        assert_eq!(light.len(), 26);
        let (a, b, _, _) = linear_axis(-0.3, 1.2);
        assert!(a <= -0.3 && b >= 1.2 * 1.0);
    }

    fn passage() -> PassageDeveloping {
        PassageDeveloping {
            apparent_f_re: vec![],
            incremental_pressure_drop: vec![],
            k_infinity: 1.25,
            length_plus: Some(0.05),
            fanning_f_re: 16.0,
            resolved_from: 1e-4,
            max_to_mean_fully_developed: 2.0,
            curve: vec![
                [1e-6, 3440.0, 0.01, 0.5],
                [1e-5, 1088.0, 0.04, 0.55],
                [1.0, 16.3, 1.25, 1.0],
            ],
        }
    }

    #[test]
    fn csv_scales_the_velocity_maximum_to_the_mean() {
        let h = HydrodynamicEntrance {
            x_plus: vec![1e-5, 1.0],
            passages: vec![passage()],
            steps: 3,
            solves: 9,
            iterations: 30,
            seconds: 0.0,
            settled: true,
            combined: None,
        };
        let csv = hydrodynamic_csv(&h);
        let lines: Vec<&str> = csv.lines().collect();
        assert_eq!(
            lines[0],
            "passage,x_plus,apparent_f_re,incremental_pressure_drop,max_to_mean_velocity"
        );
        assert_eq!(lines.len(), 4);
        assert_eq!(lines[3], "1,1,16.3,1.25,2");
        // Below the x+ axis the point is left out of the plot, not of the table.
        assert_eq!(plotted(&passage()).len(), 2);
    }
}
