//! The parts the line plots of `--out` share (`entrance.png`, `hydrodynamic.png`): the page,
//! the font, the text, the logarithmic x axis from 1e-5 to 1 and the outlet marker.
//!
//! Owns: how a plot page is laid out and rendered ([`render`]: a title block, panels stacked
//! top down, a note under them), drawn with `plotters` (bitmap backend into an RGB buffer, the
//! embedded DejaVu Sans registered with its `ab_glyph` text, so no system font) at
//! [`SUPERSAMPLE`] times the final size and box-filtered down ([`downsample`]), which
//! antialiases plotters' lines; encoded by [`png::encode_rgb`], the encoder of every picture,
//! with a `canalis:plot` text chunk holding each panel's map from data to pixels. The axis
//! helpers: round values on decades ([`decade_values`], [`log_axis`]), tick labels
//! ([`power_of_ten`], [`round_label`], [`x_text`]).
//!
//! Invariant: knows no quantity of any plot (beyond the entrance grid a note names,
//! [`march_grid`]); what a panel shows is its caller's.

use super::png::{self, metrics, INK};
use crate::error::{Error, Result};
use plotters::chart::MeshStyle;
use plotters::coord::combinators::{LogCoord, WithKeyPoints};
use plotters::coord::ranged1d::{AsRangedCoord, Ranged, ValueFormatter};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::{FontStyle, RGBColor, ShapeStyle, TextStyle};

/// The x axis of the entrance plots: 1e-5 to 1, the stations' range (INTERFACE.md).
pub(super) const X_MIN: f64 = 1e-5;
pub(super) const X_MAX: f64 = 1.0;
/// Drawn at this many times the final size, then box-filtered down.
pub(super) const SUPERSAMPLE: u32 = 2;
/// The font family name the embedded font is registered under (plotters' default family).
const FAMILY: &str = "sans-serif";
/// Secondary text.
pub(super) const GREY: [u8; 3] = [95, 95, 95];

pub(super) fn rgb(c: [u8; 3]) -> RGBColor {
    RGBColor(c[0], c[1], c[2])
}

/// A line of colour `c`, `width` pixels wide (at least one).
pub(super) fn stroke(c: [u8; 3], width: f64) -> ShapeStyle {
    ShapeStyle {
        color: rgb(c).to_rgba(),
        filled: false,
        stroke_width: width.round().max(1.0) as u32,
    }
}

/// Registers the embedded DejaVu Sans with plotters once per process.
pub(super) fn register_font() -> Result<()> {
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

/// The error of drawing `file`, for `map_err`.
pub(super) fn plot_error<E: std::fmt::Display>(file: &str) -> impl Fn(E) -> Error + '_ {
    move |e| Error::param("--out", format!("{file} could not be drawn: {e}"))
}

/// The round values m·10^k, m in `mantissas`, from below `lo` to above `hi` (inclusive).
pub(super) fn decade_values(lo: f64, hi: f64, mantissas: &[f64]) -> Vec<f64> {
    let mut v = Vec::new();
    let (k0, k1) = (lo.log10().floor() as i32 - 1, hi.log10().ceil() as i32 + 1);
    for k in k0..=k1 {
        for m in mantissas {
            v.push(m * 10f64.powi(k));
        }
    }
    v
}

/// A logarithmic y axis: (lower bound, upper bound, labelled ticks, light grid lines).
pub(super) type LogAxis = (f64, f64, Vec<f64>, Vec<f64>);

/// A logarithmic axis around `lo..hi`: bounds on the 1, 1.5, 2, 3, 5, 7 × 10^k series with room
/// around the data, labelled ticks and light grid lines.
pub(super) fn log_axis(lo: f64, hi: f64) -> LogAxis {
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

/// The x axis's labelled decades and light grid lines, [`X_MIN`] to [`X_MAX`].
pub(super) fn x_ticks() -> (Vec<f64>, Vec<f64>) {
    let bold: Vec<f64> = (-5..=0).map(|k| 10f64.powi(k)).collect();
    let light = decade_values(X_MIN, X_MAX, &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0])
        .into_iter()
        .filter(|v| *v >= X_MIN * (1.0 - 1e-9) && *v <= X_MAX * (1.0 + 1e-9))
        .collect();
    (bold, light)
}

/// 10^k with a superscript exponent ("1" for 10⁰).
pub(super) fn power_of_ten(v: f64) -> String {
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

/// A tick label: the round value as written (0.5, 3, 20, 150).
pub(super) fn round_label(v: f64) -> String {
    let r = (v * 1e6).round() / 1e6;
    format!("{r}")
}

/// An x value with three significant digits, plainly written from 1e-3 up, else with a power
/// of ten.
pub(super) fn x_text(v: f64) -> String {
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

/// The mean of each `f` × `f` block of RGB pixels.
pub(super) fn downsample(buf: &[u8], w: usize, h: usize, f: usize) -> Vec<u8> {
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

/// The x axis of every plot: x from [`X_MIN`] to [`X_MAX`] on a log scale ([`x_ticks`]).
pub(super) type XAxis = WithKeyPoints<LogCoord<f64>>;

/// A chart on `area` with the shared x axis and the y axis `y`, its plotting area `top` pixels
/// below the area's top (a heading's room), margins and label areas scaled with the font size
/// `fs`.
pub(super) fn x_log_chart<'a, DB, Y>(
    area: &'a DrawingArea<DB, Shift>,
    top: f64,
    fs: f64,
    y: Y,
    file: &str,
) -> Result<ChartContext<'a, DB, Cartesian2d<XAxis, Y::CoordDescType>>>
where
    DB: DrawingBackend,
    Y: AsRangedCoord,
{
    let (x_bold, x_light) = x_ticks();
    ChartBuilder::on(area)
        .margin_top(top.round() as i32)
        .margin_right((0.8 * fs).round() as i32)
        .x_label_area_size((3.3 * fs).round() as i32)
        .y_label_area_size((4.2 * fs).round() as i32)
        .build_cartesian_2d(
            (X_MIN..X_MAX)
                .log_scale()
                .with_key_points(x_bold)
                .with_light_points(x_light),
            y,
        )
        .map_err(plot_error(file))
}

/// A logarithmic y axis from `lo` to `hi` with its bold and light values ([`log_axis`]).
pub(super) fn log_y((lo, hi, bold, light): &LogAxis) -> WithKeyPoints<LogCoord<f64>> {
    (*lo..*hi)
        .log_scale()
        .with_key_points(bold.clone())
        .with_light_points(light.clone())
}

/// The width of a curve at font size `fs`, pixels.
pub(super) fn line_width(fs: f64) -> f64 {
    (fs / 7.0).max(2.0)
}

/// The mesh every panel shares: label fonts, grid lines, axis and tick marks at font size
/// `fs`. The caller adds what its axes say (descriptions, label formatters and counts) and
/// draws it.
pub(super) fn styled_mesh<'a, 'b, DB, X, Y, XT, YT>(
    chart: &'b mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
    fs: f64,
) -> MeshStyle<'a, 'b, X, Y, DB>
where
    DB: DrawingBackend,
    X: Ranged<ValueType = XT> + ValueFormatter<XT>,
    Y: Ranged<ValueType = YT> + ValueFormatter<YT>,
{
    let mut mesh = chart.configure_mesh();
    mesh.label_style(font(fs, INK))
        .axis_desc_style(font(fs, INK))
        .bold_line_style(stroke([215, 215, 215], 0.1 * fs))
        .light_line_style(stroke([238, 238, 238], 0.1 * fs))
        .axis_style(stroke(INK, 0.12 * fs))
        .set_all_tick_mark_size((0.35 * fs).round() as i32);
    mesh
}

pub(super) fn font(size: f64, c: [u8; 3]) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&rgb(c))
}

pub(super) fn text<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    s: &str,
    at: (f64, f64),
    style: TextStyle,
    file: &str,
) -> Result<()> {
    area.draw(&Text::new(
        s.to_string(),
        (at.0.round() as i32, at.1.round() as i32),
        style,
    ))
    .map_err(plot_error(file))
}

/// Lines of text: (text, size, colour, baseline-free top y), laid out top down.
pub(super) type Lines = Vec<(String, f64, [u8; 3], f64)>;

/// Width of `s` at `size` pixels in the embedded font.
pub(super) fn text_width(s: &str, size: f64) -> f64 {
    (FAMILY, size)
        .into_font()
        .box_size(s)
        .map_or(0.0, |(w, _)| w as f64)
}

/// The largest size up to `size` at which `s` fits in `max_w` pixels.
pub(super) fn fitted(s: &str, size: f64, max_w: f64) -> f64 {
    let tw = text_width(s, size);
    if tw > max_w && tw > 0.0 {
        size * max_w / tw
    } else {
        size
    }
}

/// `s` broken at spaces into lines no wider than `max_w` (a single long word stays whole).
pub(super) fn wrap(s: &str, size: f64, max_w: f64) -> Vec<String> {
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

/// The title block: `name` (fitted to the width), then each (text, size, colour) of `rest`
/// wrapped to the width; returns the lines and the block's height.
pub(super) fn title_lines(
    name: &str,
    rest: &[(&str, f64, [u8; 3])],
    fs: f64,
    margin: f64,
    avail: f64,
) -> (Lines, f64) {
    let mut lines = Vec::new();
    let size = fitted(name, 1.3 * fs, avail);
    lines.push((name.to_string(), size, INK, margin));
    let mut y = margin + 2.0 * fs;
    for &(s, size, c) in rest {
        for line in wrap(s, size, avail) {
            lines.push((line, size, c, y));
            y += 1.45 * size;
        }
    }
    (lines, y + 0.4 * fs)
}

/// The note under the panels, wrapped to the width; returns the lines and their height.
pub(super) fn note_lines(s: &str, fs: f64, avail: f64) -> (Lines, f64) {
    let size = 0.8 * fs;
    let mut y = 0.9 * fs;
    let mut lines = Vec::new();
    for line in wrap(s, size, avail) {
        lines.push((line, size, GREY, y));
        y += 1.4 * size;
    }
    (lines, y)
}

pub(super) fn draw_lines<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    lines: &Lines,
    x: f64,
    file: &str,
) -> Result<()> {
    for (s, size, c, y) in lines {
        text(area, s, (x, *y), font(*size, *c), file)?;
    }
    Ok(())
}

/// The size of a page `width` pixels wide, as drawn (supersampled).
pub(super) struct Page {
    /// Font size and margin, pixels.
    pub fs: f64,
    pub margin: f64,
    /// Width, pixels, and the width between the margins.
    pub w: u32,
    pub avail: f64,
}

impl Page {
    pub fn new(width: u32) -> Page {
        let ss = SUPERSAMPLE;
        let (fs1, margin1) = metrics(width);
        let (fs, margin) = (fs1 * ss as f64, margin1 * ss as f64);
        let w = width * ss;
        Page {
            fs,
            margin,
            w,
            avail: w as f64 - 2.0 * margin,
        }
    }
}

/// A panel's plotting area in final pixels, for the `canalis:plot` chunk: `left_px=… right_px=…
/// top_px=… bottom_px=…` from the drawn (left, right, top, bottom).
pub(super) fn pixels_text(px: (i32, i32, i32, i32)) -> String {
    let ss = SUPERSAMPLE as f64;
    format!(
        "left_px={} right_px={} top_px={} bottom_px={}",
        px.0 as f64 / ss,
        px.1 as f64 / ss,
        px.2 as f64 / ss,
        px.3 as f64 / ss
    )
}

/// Renders a page: the `title` block (`title_h` pixels high), the panels of heights `panels`
/// top down, each drawn by `draw(k, area)`, which returns the panel's map for the chunk, then
/// the `note` (`note_h` pixels high, plus half a margin); box-filtered and encoded with the
/// maps, `; `-separated, in a `canalis:plot` text chunk.
#[allow(clippy::too_many_arguments)]
pub(super) fn render<F>(
    page: &Page,
    title: &Lines,
    title_h: f64,
    panels: &[u32],
    note: &Lines,
    note_h: f64,
    file: &str,
    mut draw: F,
) -> Result<Vec<u8>>
where
    F: FnMut(usize, &DrawingArea<BitMapBackend, Shift>) -> Result<String>,
{
    let ss = SUPERSAMPLE;
    let (header, footer) = (
        title_h.round() as u32,
        (note_h + 0.5 * page.margin).round() as u32,
    );
    let w = page.w;
    let h = header + panels.iter().sum::<u32>() + footer;
    let mut buf = vec![255u8; (w * h * 3) as usize];
    let mut maps = Vec::new();
    {
        let root = BitMapBackend::with_buffer(&mut buf, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error(file))?;
        let (head, rest) = root.split_vertically(header);
        draw_lines(&head, title, page.margin, file)?;
        let mut rest = rest;
        for (k, &panel_h) in panels.iter().enumerate() {
            let (area, below) = rest.split_vertically(panel_h);
            maps.push(draw(k, &area)?);
            rest = below;
        }
        draw_lines(&rest, note, page.margin, file)?;
        root.present().map_err(plot_error(file))?;
    }
    let small = downsample(&buf, w as usize, h as usize, ss as usize);
    png::encode_rgb(w / ss, h / ss, &small, &[("canalis:plot", maps.join("; "))])
}

/// A part of the page being drawn.
pub(super) type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

/// The chart of a panel: the log x axis of [`X_MIN`]..[`X_MAX`] against `Y`.
pub(super) type Chart<'a, 'b, Y> = ChartContext<'a, BitMapBackend<'b>, Cartesian2d<XAxis, Y>>;

/// A vertical line at `x` across the y range `y`, dashed (`dash`, `gap` in pixels) or solid
/// (`dash` = 0).
pub(super) fn vertical<Y: Ranged<ValueType = f64>>(
    chart: &mut Chart<'_, '_, Y>,
    x: f64,
    y: (f64, f64),
    (dash, gap): (f64, f64),
    style: ShapeStyle,
    file: &str,
) -> Result<()> {
    let points = [(x, y.0), (x, y.1)];
    if dash > 0.0 {
        chart
            .draw_series(DashedLineSeries::new(
                points,
                dash.round() as i32,
                gap.round() as i32,
                style,
            ))
            .map_err(plot_error(file))?;
    } else {
        chart
            .draw_series(LineSeries::new(points, style))
            .map_err(plot_error(file))?;
    }
    Ok(())
}

/// The outlet's line: dark, long dashes and short gaps, at `x` across the y range `y`.
pub(super) fn outlet_line<Y: Ranged<ValueType = f64>>(
    chart: &mut Chart<'_, '_, Y>,
    x: f64,
    y: (f64, f64),
    fs: f64,
    line_w: f64,
    file: &str,
) -> Result<()> {
    vertical(
        chart,
        x,
        y,
        (1.2 * fs, 0.35 * fs),
        stroke(INK, 0.7 * line_w),
        file,
    )
}

/// "N × M cells", the entrance marches' grid, for a plot's note (empty without one).
pub(super) fn march_grid(o: &crate::outcome::Outcome) -> String {
    o.entrance
        .as_ref()
        .map(|x| format!("{} × {} cells", x.cells.0, x.cells.1))
        .unwrap_or_default()
}

/// A fully developed value `v` as a dashed horizontal asymptote of colour `c` across the x
/// axis, drawn only when it lies inside the y range `y`.
pub(super) fn asymptote<Y: Ranged<ValueType = f64>>(
    chart: &mut Chart<'_, '_, Y>,
    v: f64,
    y: (f64, f64),
    c: [u8; 3],
    fs: f64,
    line_w: f64,
    file: &str,
) -> Result<()> {
    if !(v.is_finite() && v > y.0 && v < y.1) {
        return Ok(());
    }
    chart
        .draw_series(DashedLineSeries::new(
            [(X_MIN, v), (X_MAX, v)],
            (0.9 * fs).round() as i32,
            (0.6 * fs).round() as i32,
            stroke(c, 0.6 * line_w),
        ))
        .map_err(plot_error(file))?;
    Ok(())
}

/// The outlet: its line ([`outlet_line`]) at `x` across the y range `y`, `label` on a white
/// box at the top of the plot, right of the line unless that leaves the plot, then left of it.
#[allow(clippy::too_many_arguments)]
pub(super) fn outlet<Y: Ranged<ValueType = f64>>(
    chart: &mut Chart<'_, '_, Y>,
    chart_area: &DrawingArea<BitMapBackend, Shift>,
    x: f64,
    y: (f64, f64),
    label: &str,
    fs: f64,
    line_w: f64,
    file: &str,
) -> Result<()> {
    outlet_line(chart, x, y, fs, line_w, file)?;
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let (px, _) = chart.backend_coord(&(x, y.1));
    let base = chart_area.get_base_pixel();
    let px = (px - base.0) as f64;
    let style = font(0.9 * fs, INK);
    let tw = chart_area
        .estimate_text_size(label, &style)
        .map(|s| s.0 as f64)
        .unwrap_or(0.0);
    let x = if px + 0.4 * fs + tw <= (xr.end - base.0) as f64 {
        px + 0.4 * fs
    } else {
        px - 0.4 * fs - tw
    };
    let y = (yr.start - base.1) as f64 + 0.5 * fs;
    chart_area
        .draw(&Rectangle::new(
            [
                ((x - 0.2 * fs) as i32, (y - 0.15 * fs) as i32),
                ((x + tw + 0.2 * fs) as i32, (y + 1.15 * fs) as i32),
            ],
            WHITE.mix(0.85).filled(),
        ))
        .map_err(plot_error(file))?;
    text(chart_area, label, (x, y), style, file)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_axis_rounds_outward_on_the_decade_series() {
        let (a, b, bold, light) = log_axis(3.66, 90.6);
        assert_eq!((a, b), (3.0, 150.0));
        assert_eq!(bold.first().copied(), Some(3.0));
        assert_eq!(bold.last().copied(), Some(100.0));
        assert!(light.contains(&4.0) && light.contains(&90.0));
    }

    #[test]
    fn labels_read_as_written() {
        assert_eq!(power_of_ten(1e-5), "10⁻⁵");
        assert_eq!(power_of_ten(1.0), "1");
        assert_eq!(round_label(150.0), "150");
        assert_eq!(round_label(0.5), "0.5");
        assert_eq!(x_text(0.0312345), "0.0312");
        assert_eq!(x_text(3.2e-5), "3.20×10⁻⁵");
    }

    #[test]
    fn downsampling_averages_blocks() {
        // 2 × 2 pixels, one white and three black: a quarter grey.
        let buf = [255, 255, 255, 0, 0, 0, 0, 0, 0, 0, 0, 0];
        assert_eq!(downsample(&buf, 2, 2, 2), vec![64, 64, 64]);
    }
}
