//! SVG plots of the report: the residual history (log scale) and one chart per monitor.
//!
//! Plots are strings built from already-judged data; they compute only what drawing needs
//! (bounds, ticks, min/max buckets). Long series are reduced to about [`BUCKETS`] min/max
//! buckets with [`crate::run::downsample::min_max`], so a plot stays a few tens of kB however
//! long the run. Each series is exactly one `<path>` element (restarts are separate sub-paths
//! of it); every other mark uses `<line>`, `<rect>`, `<polygon>` or `<text>`, which keeps the
//! file easy to check.
//!
//! Palette: eight colours picked for this project to stay apart under the common forms of
//! colour-vision deficiency and to step in lightness (so they also differ in greyscale); each
//! series also gets its own dash pattern, so nothing depends on colour alone.

use std::fmt::Write;

use crate::report::text::{iteration, num, xml};
use crate::run::downsample::min_max;

mod monitor;
mod residual;

pub use monitor::{MonitorMarks, monitor_plot};
pub use residual::{Target, residual_plot};

/// Number of min/max buckets a whole series is reduced to.
pub const BUCKETS: usize = 600;

/// Series colours: deep blue, amber, teal, rose, sky, violet, ochre, graphite.
pub const COLOURS: [&str; 8] =
    ["#1b4f9c", "#e08a00", "#127a5e", "#c4477a", "#5fa8d3", "#6b3f99", "#9a7412", "#3d3d3d"];
/// Dash patterns paired with the colours (empty = solid).
pub const DASHES: [&str; 8] =
    ["", "9 3", "2.5 2.5", "9 3 2.5 3", "14 4", "1.5 4", "6 2 2 2 2 2", "12 3 5 3"];

const WIDTH: f64 = 960.0;
const LEFT: f64 = 78.0;
const RIGHT: f64 = 24.0;
/// Right margin of the residual plot, which names each series at its last value.
const RIGHT_NAMED: f64 = 96.0;
const TOP: f64 = 30.0;
const AXIS_SPACE: f64 = 48.0;
const LEGEND_ROW: f64 = 20.0;
const FONT: &str = "DejaVu Sans, Helvetica, Arial, sans-serif";

/// Colour and dash pattern of series number `i` (the pair repeats only after 64 series).
pub fn style(i: usize) -> (&'static str, &'static str) {
    (COLOURS[i % COLOURS.len()], DASHES[(i + i / COLOURS.len()) % DASHES.len()])
}

/// One series to draw.
#[derive(Debug, Clone, Copy)]
pub struct Line<'a> {
    pub name: &'a str,
    pub iterations: &'a [i64],
    pub values: &'a [f64],
    /// Indices where a segment (restart) begins.
    pub segment_starts: &'a [usize],
    /// Index into the palette.
    pub style: usize,
}

/// Min/max envelope of a series in data coordinates, split at restarts and gaps.
struct Envelope {
    /// Runs of (x, low, high); `low`/`high` are log10 values on a log plot, where a value at
    /// or below zero becomes −∞ (drawn at the bottom edge).
    runs: Vec<Vec<(f64, f64, f64)>>,
    /// Iterations of buckets that held a non-finite value.
    non_finite: Vec<f64>,
}

fn envelope(line: &Line<'_>, log: bool) -> Envelope {
    let n = line.values.len().min(line.iterations.len());
    let mut starts: Vec<usize> = line.segment_starts.iter().copied().filter(|&s| s < n).collect();
    starts.push(0);
    starts.sort_unstable();
    starts.dedup();
    let mut runs = Vec::new();
    let mut non_finite = Vec::new();
    let tr = |v: f64| {
        if !log {
            v
        } else if v > 0.0 {
            v.log10()
        } else {
            f64::NEG_INFINITY
        }
    };
    for (k, &a) in starts.iter().enumerate() {
        let b = starts.get(k + 1).copied().unwrap_or(n);
        let buckets = (BUCKETS * (b - a)).div_ceil(n.max(1)).max(1);
        let mut run = Vec::new();
        for bucket in min_max(&line.values[..n], a..b, buckets) {
            let x = line.iterations[(bucket.start + bucket.end - 1) / 2] as f64;
            if bucket.non_finite {
                non_finite.push(x);
            }
            if bucket.min.is_nan() {
                if !run.is_empty() {
                    runs.push(std::mem::take(&mut run));
                }
                continue;
            }
            run.push((x, tr(bucket.min), tr(bucket.max)));
        }
        if !run.is_empty() {
            runs.push(run);
        }
    }
    Envelope { runs, non_finite }
}

/// A plot area on the page (its top-left corner and size in pixels) and its data bounds.
struct Frame {
    left: f64,
    top: f64,
    width: f64,
    height: f64,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
}

impl Frame {
    /// A plot area across the page, leaving `right` pixels for labels at its right.
    fn full(right: f64, height: f64, (x0, x1): (f64, f64), (y0, y1): (f64, f64)) -> Frame {
        Frame { left: LEFT, top: TOP, width: WIDTH - LEFT - right, height, x0, x1, y0, y1 }
    }
    fn pw(&self) -> f64 {
        self.width
    }
    fn ph(&self) -> f64 {
        self.height
    }
    /// Inner x in pixels.
    fn px(&self, x: f64) -> f64 {
        (x - self.x0) / (self.x1 - self.x0) * self.pw()
    }
    /// Inner y in pixels, clamped a little outside the area (the inner viewport clips).
    fn py(&self, y: f64) -> f64 {
        let p = (self.y1 - y) / (self.y1 - self.y0) * self.ph();
        if p.is_nan() { self.ph() + 4.0 } else { p.clamp(-4.0, self.ph() + 4.0) }
    }
}

/// Open the clipping viewport of a plot area: inside it, coordinates are [`Frame::px`] and
/// [`Frame::py`]. Close it with `</svg>`.
fn viewport(out: &mut String, f: &Frame) {
    let (pw, ph) = (f.pw(), f.ph());
    let _ = write!(
        out,
        r#"<svg x="{:.1}" y="{:.1}" width="{pw:.1}" height="{ph:.1}" viewBox="0 0 {pw:.1} {ph:.1}" overflow="hidden">"#,
        f.left, f.top
    );
}

/// "Nice" tick step near `span / target`: 1, 2 or 5 times a power of ten.
fn nice_step(span: f64, target: f64) -> f64 {
    let raw = (span / target).max(f64::MIN_POSITIVE);
    let mag = 10f64.powf(raw.log10().floor());
    let norm = raw / mag;
    let f = if norm < 1.5 {
        1.0
    } else if norm < 3.0 {
        2.0
    } else if norm < 7.0 {
        5.0
    } else {
        10.0
    };
    f * mag
}

fn ticks(lo: f64, hi: f64, step: f64) -> Vec<f64> {
    let mut out = Vec::new();
    let mut v = (lo / step).ceil() * step;
    while v <= hi + step * 1e-9 && out.len() < 50 {
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        v += step;
    }
    out
}

fn linear_label(v: f64, step: f64) -> String {
    let decimals = (-step.log10().floor()).max(0.0) as usize;
    if decimals <= 6 && v.abs() < 1e6 { format!("{v:.decimals$}") } else { num(v) }
}

/// Legend entry: a line sample or a filled swatch.
enum Key {
    Line { colour: &'static str, dash: &'static str, width: f64 },
    Swatch { fill: &'static str, opacity: f64 },
}

struct Legend {
    items: Vec<(Key, String)>,
}

impl Legend {
    fn layout(&self) -> Vec<(f64, f64)> {
        let mut pos = Vec::with_capacity(self.items.len());
        let (mut x, mut row) = (0.0, 0.0);
        let avail = WIDTH - LEFT - RIGHT;
        for (_, label) in &self.items {
            let w = 40.0 + 6.6 * label.chars().count().min(48) as f64;
            if x > 0.0 && x + w > avail {
                x = 0.0;
                row += 1.0;
            }
            pos.push((x, row));
            x += w + 14.0;
        }
        pos
    }
    fn rows(&self) -> f64 {
        self.layout().last().map_or(0.0, |p| p.1 + 1.0)
    }
    fn draw(&self, out: &mut String, top: f64) {
        for ((key, label), (x, row)) in self.items.iter().zip(self.layout()) {
            let x = LEFT + x;
            let y = top + row * LEGEND_ROW;
            match key {
                Key::Line { colour, dash, width } => {
                    let _ = write!(
                        out,
                        r#"<line x1="{x:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="{colour}" stroke-width="{width}"{}/>"#,
                        x + 32.0,
                        dash_attr(dash)
                    );
                }
                Key::Swatch { fill, opacity } => {
                    let _ = write!(
                        out,
                        r##"<rect x="{x:.1}" y="{:.1}" width="32" height="10" fill="{fill}" fill-opacity="{opacity}" stroke="#777" stroke-width="0.5"/>"##,
                        y - 5.0
                    );
                }
            }
            let shown: String = if label.chars().count() > 48 {
                label.chars().take(47).chain(['…']).collect()
            } else {
                label.clone()
            };
            let _ = write!(
                out,
                r#"<text x="{:.1}" y="{:.1}" font-size="12">{}</text>"#,
                x + 38.0,
                y + 4.0,
                xml(&shown)
            );
        }
    }
}

fn dash_attr(dash: &str) -> String {
    if dash.is_empty() { String::new() } else { format!(r#" stroke-dasharray="{dash}""#) }
}

/// Opening of an SVG document (standalone file) or inline element (HTML).
fn open(out: &mut String, height: f64, title: &str, standalone: bool) {
    if standalone {
        let _ = write!(
            out,
            r#"<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{height:.0}" viewBox="0 0 {WIDTH} {height:.0}" font-family="{FONT}" font-size="12">"#
        );
    } else {
        let _ = write!(
            out,
            r#"<svg class="plot" viewBox="0 0 {WIDTH} {height:.0}" role="img" aria-label="{}" font-family="{FONT}" font-size="12">"#,
            xml(title)
        );
    }
    let _ = write!(
        out,
        r##"<title>{}</title><rect x="0" y="0" width="{WIDTH}" height="{height:.0}" fill="#ffffff"/>"##,
        xml(title)
    );
}

/// Axes, grid, ticks and axis labels around the plot area.
fn axes(out: &mut String, f: &Frame, x_label: &str, y_label: &str, log: bool) {
    let (pw, ph) = (f.pw(), f.ph());
    let (left, top) = (f.left, f.top);
    // x ticks (iterations), fewer on a narrow panel.
    let step = nice_step(f.x1 - f.x0, (pw / 110.0).clamp(3.0, 8.0)).max(1.0);
    for t in ticks(f.x0, f.x1, step) {
        let x = left + f.px(t);
        let _ = write!(
            out,
            r##"<line x1="{x:.1}" y1="{top:.1}" x2="{x:.1}" y2="{:.1}" stroke="#e3e3e3" stroke-width="1"/><line x1="{x:.1}" y1="{:.1}" x2="{x:.1}" y2="{:.1}" stroke="#444"/><text x="{x:.1}" y="{:.1}" text-anchor="middle" font-size="11">{}</text>"##,
            top + ph,
            top + ph,
            top + ph + 5.0,
            top + ph + 18.0,
            iteration(t.round() as i64)
        );
    }
    // y ticks.
    let span = f.y1 - f.y0;
    let (step, decades) =
        if log { ((span / 8.0).ceil().max(1.0), true) } else { (nice_step(span, 6.0), false) };
    for t in ticks(f.y0, f.y1, step) {
        let y = top + f.py(t);
        let label = if decades {
            format!(r#"10<tspan dy="-6" font-size="9">{}</tspan>"#, t.round() as i64)
        } else {
            xml(&linear_label(t, step))
        };
        let _ = write!(
            out,
            r##"<line x1="{left:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#e3e3e3" stroke-width="1"/><line x1="{:.1}" y1="{y:.1}" x2="{left:.1}" y2="{y:.1}" stroke="#444"/><text x="{:.1}" y="{:.1}" text-anchor="end" font-size="11">{label}</text>"##,
            left + pw,
            left - 5.0,
            left - 8.0,
            y + 4.0
        );
    }
    if !x_label.is_empty() {
        let _ = write!(
            out,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle" font-size="12">{}</text>"#,
            left + pw / 2.0,
            top + ph + 36.0,
            xml(x_label)
        );
    }
    if !y_label.is_empty() {
        let (yx, yy) = (left - 62.0, top + ph / 2.0);
        let _ = write!(
            out,
            r#"<text x="{yx:.1}" y="{yy:.1}" text-anchor="middle" font-size="12" transform="rotate(-90 {yx:.1} {yy:.1})">{}</text>"#,
            xml(y_label)
        );
    }
}

/// The border of the plot area, drawn after everything inside so grid lines cannot cover it.
fn border(out: &mut String, f: &Frame) {
    let _ = write!(
        out,
        r##"<rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="none" stroke="#444" stroke-width="1"/>"##,
        f.left,
        f.top,
        f.pw(),
        f.ph()
    );
}

/// The `d` attribute of a series envelope.
fn path_data(env: &Envelope, f: &Frame) -> String {
    let mut d = String::new();
    for run in &env.runs {
        for (k, &(x, lo, hi)) in run.iter().enumerate() {
            let px = f.px(x);
            let cmd = if k == 0 { 'M' } else { 'L' };
            let _ = write!(d, "{cmd}{px:.1},{:.1}", f.py(hi));
            if lo != hi {
                let _ = write!(d, "L{px:.1},{:.1}", f.py(lo));
            }
        }
    }
    d
}

fn x_bounds<'a>(lines: impl Iterator<Item = &'a Line<'a>>) -> Option<(f64, f64)> {
    let mut b: Option<(f64, f64)> = None;
    for l in lines {
        for &it in l.iterations.iter().take(l.values.len()) {
            let x = it as f64;
            b = Some(b.map_or((x, x), |(lo, hi)| (lo.min(x), hi.max(x))));
        }
    }
    b.map(|(lo, hi)| if hi > lo { (lo, hi) } else { (lo - 1.0, hi + 1.0) })
}

fn empty_note(out: &mut String, f: &Frame, text: &str) {
    let _ = write!(
        out,
        r##"<text x="{:.1}" y="{:.1}" text-anchor="middle" font-size="13" fill="#444">{}</text>"##,
        f.left + f.pw() / 2.0,
        f.top + f.ph() / 2.0,
        xml(text)
    );
}

/// Small downward triangles at the top edge where a bucket held NaN or infinity.
fn non_finite_marks(out: &mut String, f: &Frame, e: &Envelope, colour: &str) {
    let mut last = f64::NEG_INFINITY;
    for &x in &e.non_finite {
        let px = f.px(x);
        if px - last < 6.0 {
            continue;
        }
        last = px;
        let _ = write!(
            out,
            r##"<polygon points="{:.1},0 {:.1},0 {px:.1},8" fill="{colour}" stroke="#000" stroke-width="0.5"><title>non-finite value near iteration {}</title></polygon>"##,
            px - 4.0,
            px + 4.0,
            iteration(x as i64)
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn long_series_are_bucketed() {
        let its: Vec<i64> = (1..=100_000).collect();
        let vals: Vec<f64> = its.iter().map(|&i| 10f64.powf(-(i as f64) / 20_000.0)).collect();
        let line =
            Line { name: "p", iterations: &its, values: &vals, segment_starts: &[0], style: 0 };
        let svg = residual_plot(&[line], &[], true);
        assert_eq!(svg.matches("<path").count(), 1);
        assert!(svg.len() < 40_000, "{} bytes", svg.len());
    }

    #[test]
    fn nice_ticks() {
        assert_eq!(nice_step(1000.0, 8.0), 100.0);
        assert_eq!(nice_step(3.0, 6.0), 0.5);
        assert_eq!(ticks(0.0, 1.0, 0.25), vec![0.0, 0.25, 0.5, 0.75, 1.0]);
        assert_eq!(linear_label(0.25, 0.05), "0.25");
    }

    #[test]
    fn restarts_become_subpaths() {
        let its = [1, 2, 3, 2, 3, 4];
        let vals = [1.0, 0.5, 0.25, 0.5, 0.2, 0.1];
        let line =
            Line { name: "p", iterations: &its, values: &vals, segment_starts: &[0, 3], style: 0 };
        let svg = residual_plot(&[line], &[], false);
        let d_start = svg.find(" d=\"").expect("path has data");
        let d = &svg[d_start + 4..];
        let d = &d[..d.find('"').expect("closing quote")];
        assert_eq!(d.matches('M').count(), 2, "{d}");
        assert!(svg.contains(">restart<"));
    }
}
