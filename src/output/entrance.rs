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
//! Drawn with `plotters` on the page of [`super::plot`] (embedded DejaVu Sans, twice the size
//! box-filtered down 2 × 2, encoded by `png::encode_rgb`, the encoder of every picture; the
//! axis helpers and the outlet marker are shared with `hydrodynamic.png` there). Colours:
//! Okabe–Ito (see [`super::png`]), T the blue family (blue local, sky blue mean), H1 the
//! vermillion family (vermillion local, orange mean).
//!
//! Invariant: computes no physics; every number is a value of the outcome's entrance (or
//! rating), the means by the entrance's own [`PassageEntrance::means_at`].

use super::plot::{
    asymptote, fitted, font, line_width, log_axis, log_y, march_grid, note_lines, outlet,
    pixels_text, plot_error, power_of_ten, register_font, render, rgb, round_label, stroke,
    styled_mesh, text, title_lines, x_log_chart, x_text, LogAxis, Page, GREY, X_MAX, X_MIN,
};
use super::png::{length_text, sig4, INK, SERIES};
use crate::entrance::{PassageEntrance, ThermalEntrance};
use crate::error::Result;
use crate::outcome::Outcome;
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use std::fmt::Write;

/// The files of this module, in the order [`files`] returns them.
pub const FILES: [&str; 2] = ["entrance.png", "entrance.csv"];

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

/// Okabe–Ito pairs: T (blue, sky blue), H1 (vermillion, orange); [local, mean].
const T_COLOURS: [[u8; 3]; 2] = [SERIES[0], SERIES[5]];
const H1_COLOURS: [[u8; 3]; 2] = [SERIES[1], SERIES[4]];

const FILE: &str = FILES[0];

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
    let axis = log_axis(lo, hi);

    let page = Page::new(width);
    let (fs, margin) = (page.fs, page.margin);
    let (title, title_h) = title_lines(
        &o.name,
        &[
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
        ],
        fs,
        margin,
        page.avail,
    );
    let (note, note_h) = note_lines(&footer_text(o, e), fs, page.avail);
    let panel_h = (0.5 * page.w as f64 + if several { 2.2 * fs } else { 0.0 }).round() as u32;
    let heights = vec![panel_h; panels.len()];
    render(
        &page,
        &title,
        title_h,
        &heights,
        &note,
        note_h,
        FILE,
        |k, area| {
            let map = draw_panel(area, &panels[k], &axis, fs, margin)?;
            Ok(format!(
                "panel={} {} x_min={X_MIN} x_max={X_MAX} nu_min={} nu_max={} scale=log10",
                k + 1,
                pixels_text(map),
                axis.0,
                axis.1
            ))
        },
    )
}

/// The note under the panels: the march's grid and steps, and what the shading means.
fn footer_text(o: &Outcome, e: &ThermalEntrance) -> String {
    let cells = march_grid(o);
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
    s
}

/// Draws one passage's panel; returns the plotting area in pixels (left, right, top, bottom).
fn draw_panel(
    area: &DrawingArea<BitMapBackend, Shift>,
    panel: &Panel,
    axis: &LogAxis,
    fs: f64,
    margin: f64,
) -> Result<(i32, i32, i32, i32)> {
    let err = plot_error(FILE);
    let (nu_lo, nu_hi, _, _) = axis;
    let w = area.dim_in_pixel().0 as f64;
    let legend_w = (0.27 * w).round();
    let (chart_area, legend_area) = area.split_horizontally((w - legend_w).round() as u32);
    let (chart_area, legend_area) = (
        chart_area.margin(0, 0, margin.round() as i32, 0),
        legend_area.margin(0, 0, 0, margin.round() as i32),
    );
    let mut top = 0.6 * fs;
    if let Some(hd) = &panel.heading {
        text(&chart_area, hd, (0.0, 0.9 * fs), font(1.05 * fs, INK), FILE)?;
        top += 2.2 * fs;
    }
    let mut chart = x_log_chart(&chart_area, top, fs, log_y(axis), FILE)?;
    let line_w = line_width(fs);
    let x_fmt = |v: &f64| power_of_ten(*v);
    let y_fmt = |v: &f64| round_label(*v);
    styled_mesh(&mut chart, fs)
        .x_desc("x* = x / (D_h·Re·Pr)")
        .y_desc("Nusselt number")
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .draw()
        .map_err(&err)?;

    let p = panel.entrance;
    // The inlet region where the Lévêque limit stands for the local values.
    let lev = p.leveque.resolved_from;
    if lev > X_MIN {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(X_MIN, *nu_lo), (lev.min(X_MAX), *nu_hi)],
                rgb([120, 120, 120]).mix(0.09).filled(),
            )))
            .map_err(&err)?;
    }
    // Asymptotes, dashed, under the curves.
    for (fd, c) in [
        (p.nusselt_t_fully_developed, T_COLOURS[0]),
        (p.nusselt_h1_fully_developed, H1_COLOURS[0]),
    ] {
        asymptote(&mut chart, fd, (*nu_lo, *nu_hi), c, fs, line_w, FILE)?;
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
            .map_err(&err)?;
    }
    // A frame around the data (the mesh draws the left and bottom axes only).
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(X_MIN, *nu_lo), (X_MAX, *nu_hi)],
            stroke(INK, 0.12 * fs),
        )))
        .map_err(&err)?;
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let plot_px = (xr.start, xr.end, yr.start, yr.end);
    if let Some((x_out, _, _)) = panel.outlet {
        if (X_MIN..=X_MAX).contains(&x_out) {
            let label = format!("outlet x* = {}", x_text(x_out));
            outlet(
                &mut chart,
                &chart_area,
                x_out,
                (*nu_lo, *nu_hi),
                &label,
                fs,
                line_w,
                FILE,
            )?;
        }
    }
    draw_legend(&legend_area, panel, top + 0.2 * fs, fs, line_w)?;
    Ok(plot_px)
}

/// The legend and the passage's figures, right of its panel.
fn draw_legend(
    area: &DrawingArea<BitMapBackend, Shift>,
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
    let put = |s: &str, y: f64, size: f64, c: [u8; 3], x: f64| -> Result<()> {
        let size = fitted(s, size, avail - x);
        text(area, s, (x, y - 0.5 * size), font(size, c), FILE)
    };
    let solid = |y: f64, c: [u8; 3]| {
        area.draw(&PathElement::new(
            vec![(x0 as i32, y as i32), ((x0 + sample) as i32, y as i32)],
            stroke(c, line_w),
        ))
        .map_err(plot_error(FILE))
    };
    let dashed = |y: f64, c: [u8; 3], w: f64, dash: f64, gap: f64| {
        area.draw(&DashedPathElement::new(
            vec![(x0 as i32, y as i32), ((x0 + sample) as i32, y as i32)],
            dash.round() as i32,
            gap.round() as i32,
            stroke(c, w),
        ))
        .map_err(plot_error(FILE))
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
