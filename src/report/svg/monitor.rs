//! The plot of one monitor, by one rule for every monitor: the whole history on the left and
//! the judged final window zoomed on the right, both with the window mean, the tolerance band
//! of the `band` criterion and the 95 % confidence interval of the mean drawn.
//!
//! The history panel shows every value (nothing clipped), so a large start-up swing is seen
//! for what it is; the window panel is scaled to the values of the window, the mean and its
//! interval, so the settling the verdict is about is visible however large the start-up
//! was. The tolerance band joins the window's scale only when it is at most four times as
//! wide as the values; a wider band is said to lie outside the view instead of flattening
//! the trace into a line.

use std::fmt::Write;

use super::{
    AXIS_SPACE, Envelope, Frame, Key, LEFT, LEGEND_ROW, Legend, Line, RIGHT, TOP, WIDTH, axes,
    border, dash_attr, empty_note, envelope, non_finite_marks, open, path_data, style, viewport,
};
use crate::report::text::{num, range, xml};
use crate::view::number;

/// Marks on a monitor plot, all optional.
#[derive(Debug, Clone, Copy, Default)]
pub struct MonitorMarks {
    /// First and last iteration of the judged final window.
    pub window: Option<(i64, i64)>,
    pub mean: Option<f64>,
    pub ci_half: Option<f64>,
    /// Full width of the tolerance band (the `band` criterion), percent of the reference:
    /// |mean|, or `reference` when the judge measured against another; absolute (in the
    /// monitor's unit) when `band_abs`.
    pub band_pct: Option<f64>,
    /// The reference of relative limits when it is not |mean| (a near-zero monitor, a
    /// `scale` from `settle.toml`).
    pub reference: Option<f64>,
    pub band_abs: bool,
    /// What the empty window panel says when there is no window (default: the judge
    /// reported none).
    pub no_window: Option<&'static str>,
    pub transient_end: Option<i64>,
    pub extrapolated: Option<f64>,
}

/// Height of each panel's plot area.
const PLOT_H: f64 = 220.0;
/// Room between the panels for the window panel's y labels.
const GAP: f64 = 86.0;
/// Share of the plot width the history panel gets.
const HISTORY_SHARE: f64 = 0.58;

const BAND_EDGE: &str = "#333333";
const BAND_DASH: &str = "7 3";
const WINDOW_FILL: &str = "#9a9a9a";

/// The marks in data units, as drawn.
struct Drawn {
    mean: Option<f64>,
    ci: Option<(f64, f64)>,
    band: Option<(f64, f64)>,
    extrapolated: Option<f64>,
}

fn drawn(marks: &MonitorMarks) -> Drawn {
    let mean = marks.mean.filter(|m| m.is_finite());
    let ci = match (mean, marks.ci_half.filter(|c| c.is_finite() && *c >= 0.0)) {
        (Some(m), Some(c)) => Some((m - c, m + c)),
        _ => None,
    };
    let band = match (mean, marks.band_pct.filter(|b| b.is_finite() && *b > 0.0)) {
        (Some(m), Some(b)) => {
            let h = if marks.band_abs {
                b / 2.0
            } else {
                marks.reference.unwrap_or(m).abs() * b / 200.0
            };
            Some((m - h, m + h))
        }
        _ => None,
    };
    Drawn { mean, ci, band, extrapolated: marks.extrapolated.filter(|x| x.is_finite()) }
}

/// Finite range of `values[a..b]`.
fn value_range(values: &[f64]) -> Option<(f64, f64)> {
    let mut r: Option<(f64, f64)> = None;
    for &v in values.iter().filter(|v| v.is_finite()) {
        r = Some(r.map_or((v, v), |(lo, hi)| (lo.min(v), hi.max(v))));
    }
    r
}

fn include(r: &mut (f64, f64), v: f64) {
    r.0 = r.0.min(v);
    r.1 = r.1.max(v);
}

/// Bounds with 8 % room (a flat series gets a small range of its own magnitude).
fn pad((lo, hi): (f64, f64)) -> (f64, f64) {
    if hi > lo {
        let p = (hi - lo) * 0.08;
        (lo - p, hi + p)
    } else {
        let p = (lo.abs() * 1e-3).max(1e-12);
        (lo - p, hi + p)
    }
}

/// The extrapolated value is drawn when it lies within two data spans of the values.
fn near(x: f64, (lo, hi): (f64, f64)) -> bool {
    let span = if hi > lo { hi - lo } else { lo.abs().max(f64::MIN_POSITIVE) };
    x >= lo - 2.0 * span && x <= hi + 2.0 * span
}

/// The part of `line` inside iterations `[a, b]` of its last segment, as its own line.
fn window_line<'a>(line: &Line<'a>, (a, b): (i64, i64)) -> Line<'a> {
    let n = line.values.len().min(line.iterations.len());
    let mut start = n;
    while start > 0 && line.iterations[start - 1] >= a {
        start -= 1;
    }
    let mut end = n;
    while end > start && line.iterations[end - 1] > b {
        end -= 1;
    }
    Line {
        name: line.name,
        iterations: &line.iterations[start..end],
        values: &line.values[start..end],
        segment_starts: &[],
        style: line.style,
    }
}

/// One monitor: the whole history beside the judged window, zoomed.
pub fn monitor_plot(line: &Line<'_>, marks: &MonitorMarks, standalone: bool) -> String {
    let (colour, dash) = style(line.style);
    let d = drawn(marks);
    let inner = WIDTH - LEFT - RIGHT - GAP;
    let w_hist = (inner * HISTORY_SHARE).round();
    let w_zoom = inner - w_hist;
    // Left: every value, nothing clipped.
    let n = line.values.len().min(line.iterations.len());
    let mut yr = value_range(&line.values[..n]).unwrap_or((0.0, 1.0));
    for v in [d.mean, d.ci.map(|c| c.0), d.ci.map(|c| c.1)].into_iter().flatten() {
        include(&mut yr, v);
    }
    let data = yr;
    let extrap = d.extrapolated.filter(|&x| near(x, data));
    if let Some(x) = extrap {
        include(&mut yr, x);
    }
    let legend = legend(line, marks, &d, extrap.is_some());
    let height = TOP + PLOT_H + AXIS_SPACE + legend.rows() * LEGEND_ROW + 8.0;
    let mut out = String::with_capacity(64 * 1024);
    open(&mut out, height, &format!("Monitor {}", line.name), standalone);

    let env = envelope(line, false);
    let (x0, x1) = super::x_bounds(std::iter::once(line)).unwrap_or((0.0, 1.0));
    let (y0, y1) = pad(yr);
    let hist = Frame { left: LEFT, top: TOP, width: w_hist, height: PLOT_H, x0, x1, y0, y1 };
    panel_title(&mut out, &hist, "whole history");
    axes(&mut out, &hist, "iteration", line.name, false);
    viewport(&mut out, &hist);
    if let Some((a, b)) = marks.window {
        let (xa, xb) = (hist.px(a as f64), hist.px(b as f64));
        let _ = write!(
            out,
            r##"<rect x="{:.1}" y="0" width="{:.1}" height="{PLOT_H:.1}" fill="{WINDOW_FILL}" fill-opacity="0.25"/>"##,
            xa.min(xb),
            (xb - xa).abs().max(1.0)
        );
    }
    if let Some(t) = marks.transient_end {
        let x = hist.px(t as f64);
        let _ = write!(
            out,
            r##"<line x1="{x:.1}" y1="0" x2="{x:.1}" y2="{PLOT_H:.1}" stroke="#444444" stroke-width="1" stroke-dasharray="6 3"/>"##
        );
    }
    extrapolated_line(&mut out, &hist, extrap);
    series_path(&mut out, &hist, &env, line, colour, dash);
    non_finite_marks(&mut out, &hist, &env, colour);
    window_marks(&mut out, &hist, marks.window, &d, colour);
    out.push_str("</svg>");
    border(&mut out, &hist);
    if let Some(t) = marks.transient_end {
        transient_label(&mut out, &hist, t);
    }
    if env.runs.is_empty() {
        empty_note(&mut out, &hist, "no finite values to plot");
    }

    // Right: the judged window, scaled to its values, the mean and its interval.
    let left = LEFT + w_hist + GAP;
    match marks.window {
        Some(win) => zoom_panel(&mut out, line, win, &d, left, w_zoom),
        None => {
            let f =
                Frame { left, top: TOP, width: w_zoom, height: PLOT_H, x0, x1, y0: 0.0, y1: 1.0 };
            panel_title(&mut out, &f, "final window");
            border(&mut out, &f);
            empty_note(&mut out, &f, marks.no_window.unwrap_or("the judge reported no window"));
        }
    }
    legend.draw(&mut out, TOP + PLOT_H + AXIS_SPACE + 6.0);
    out.push_str("</svg>");
    out
}

fn zoom_panel(
    out: &mut String,
    line: &Line<'_>,
    win: (i64, i64),
    d: &Drawn,
    left: f64,
    width: f64,
) {
    let (colour, dash) = style(line.style);
    let part = window_line(line, win);
    let data = value_range(part.values);
    let mut yr = data.unwrap_or((0.0, 1.0));
    for v in [d.mean, d.ci.map(|c| c.0), d.ci.map(|c| c.1)].into_iter().flatten() {
        include(&mut yr, v);
    }
    let core = yr;
    let band_fits =
        d.band.is_some_and(|(lo, hi)| hi - lo <= 4.0 * (core.1 - core.0).max(f64::MIN_POSITIVE));
    if let (true, Some((lo, hi))) = (band_fits, d.band) {
        include(&mut yr, lo);
        include(&mut yr, hi);
    }
    let extrap = d.extrapolated.filter(|&x| near(x, core));
    if let Some(x) = extrap {
        include(&mut yr, x);
    }
    let (y0, y1) = pad(yr);
    let (x0, x1) = if win.1 > win.0 {
        (win.0 as f64, win.1 as f64)
    } else {
        (win.0 as f64 - 1.0, win.1 as f64 + 1.0)
    };
    let f = Frame { left, top: TOP, width, height: PLOT_H, x0, x1, y0, y1 };
    panel_title(out, &f, &format!("final window, zoomed (it {})", range(win.0, win.1)));
    axes(out, &f, "iteration", "", false);
    viewport(out, &f);
    let env = envelope(&part, false);
    extrapolated_line(out, &f, extrap);
    series_path(out, &f, &env, &part, colour, dash);
    window_marks(out, &f, Some(win), d, colour);
    out.push_str("</svg>");
    border(out, &f);
    if let (false, Some(_)) = (band_fits, d.band) {
        let _ = write!(
            out,
            r##"<text x="{:.1}" y="{:.1}" text-anchor="end" font-size="10.5" fill="#222" stroke="#ffffff" stroke-width="3.5" stroke-linejoin="round" paint-order="stroke">tolerance band lies outside this view</text>"##,
            f.left + f.pw() - 5.0,
            f.top + 13.0
        );
    }
    if env.runs.is_empty() {
        empty_note(out, &f, "no finite values in the window");
    }
}

fn panel_title(out: &mut String, f: &Frame, text: &str) {
    let _ = write!(
        out,
        r##"<text x="{:.1}" y="{:.1}" font-size="12" font-weight="600" fill="#222">{}</text>"##,
        f.left,
        f.top - 9.0,
        xml(text)
    );
}

fn series_path(
    out: &mut String,
    f: &Frame,
    env: &Envelope,
    line: &Line<'_>,
    colour: &str,
    dash: &str,
) {
    let _ = write!(
        out,
        r#"<path d="{}" fill="none" stroke="{colour}" stroke-width="1.6" stroke-linejoin="round"{}><title>{}</title></path>"#,
        path_data(env, f),
        dash_attr(dash),
        xml(line.name)
    );
}

fn extrapolated_line(out: &mut String, f: &Frame, x: Option<f64>) {
    if let Some(x) = x {
        let y = f.py(x);
        let _ = write!(
            out,
            r##"<line x1="0" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#111111" stroke-width="1.2" stroke-dasharray="2 2 8 2"/>"##,
            f.pw()
        );
    }
}

/// Tolerance band (dashed edges), confidence interval (filled) and mean (solid) over the
/// window's x range, on top of the history so they stay visible.
fn window_marks(out: &mut String, f: &Frame, window: Option<(i64, i64)>, d: &Drawn, colour: &str) {
    let (Some((a, b)), Some(m)) = (window, d.mean) else { return };
    let (xa, xb) = (f.px(a as f64), f.px(b as f64));
    let (x, w) = (xa.min(xb), (xb - xa).abs().max(1.0));
    if let Some((lo, hi)) = d.band {
        for v in [lo, hi] {
            let y = f.py(v);
            let _ = write!(
                out,
                r##"<line x1="{x:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="{BAND_EDGE}" stroke-width="1.3" stroke-dasharray="{BAND_DASH}"/>"##,
                x + w
            );
        }
    }
    if let Some((lo, hi)) = d.ci {
        let (ya, yb) = (f.py(hi), f.py(lo));
        let _ = write!(
            out,
            r##"<rect x="{x:.1}" y="{ya:.1}" width="{w:.1}" height="{:.1}" fill="{colour}" fill-opacity="0.35" stroke="#111111" stroke-width="0.6" stroke-dasharray="2 2"/>"##,
            (yb - ya).max(1.0)
        );
    }
    let y = f.py(m);
    let _ = write!(
        out,
        r##"<line x1="{x:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#ffffff" stroke-width="3.4"/><line x1="{x:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#111111" stroke-width="1.6"/>"##,
        x + w,
        x + w
    );
}

/// "start-up transient" beside the dashed line, on whichever side has room.
fn transient_label(out: &mut String, f: &Frame, t: i64) {
    let x = f.left + f.px(t as f64);
    let text = "start-up transient (not judged)";
    let width = 6.0 * text.chars().count() as f64;
    let (tx, anchor) = if x - f.left > width + 8.0 { (x - 5.0, "end") } else { (x + 5.0, "start") };
    if anchor == "start" && tx + width > f.left + f.pw() {
        return;
    }
    let _ = write!(
        out,
        r##"<text x="{tx:.1}" y="{:.1}" text-anchor="{anchor}" font-size="10.5" fill="#222" stroke="#ffffff" stroke-width="3.5" stroke-linejoin="round" paint-order="stroke">{text}</text>"##,
        f.top + 13.0
    );
}

fn legend(line: &Line<'_>, marks: &MonitorMarks, d: &Drawn, on_scale: bool) -> Legend {
    let (colour, dash) = style(line.style);
    let mut legend = Legend { items: Vec::new() };
    legend.items.push((Key::Line { colour, dash, width: 1.6 }, line.name.to_string()));
    if marks.window.is_some() {
        legend
            .items
            .push((Key::Swatch { fill: WINDOW_FILL, opacity: 0.25 }, "final window".into()));
    }
    if d.mean.is_some() {
        legend.items.push((
            Key::Line { colour: "#111111", dash: "", width: 1.4 },
            "mean over the final window".into(),
        ));
    }
    if let (Some(_), Some(b)) = (d.band, marks.band_pct) {
        legend.items.push((
            Key::Line { colour: BAND_EDGE, dash: BAND_DASH, width: 1.3 },
            if marks.band_abs {
                format!("tolerance band ± {} (band criterion)", number::exact(b / 2.0))
            } else {
                format!("tolerance band ± {} % (band criterion)", number::exact(b / 2.0))
            },
        ));
    }
    if d.ci.is_some() {
        legend
            .items
            .push((Key::Swatch { fill: colour, opacity: 0.35 }, "95 % CI of the mean".into()));
    }
    if marks.transient_end.is_some() {
        legend.items.push((
            Key::Line { colour: "#444444", dash: "6 3", width: 1.0 },
            "start-up transient ends (vertical)".into(),
        ));
    }
    if let Some(x) = d.extrapolated {
        let label = if on_scale {
            "extrapolated converged value".to_string()
        } else {
            format!("extrapolated value {} (off scale)", num(x))
        };
        legend.items.push((Key::Line { colour: "#111111", dash: "2 2 8 2", width: 1.2 }, label));
    }
    legend
}
