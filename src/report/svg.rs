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

/// A horizontal threshold on the residual plot, in data units.
#[derive(Debug, Clone)]
pub struct Target {
    /// The series the threshold belongs to.
    pub series: String,
    /// The rule, e.g. `≥ 3 dec` or `≤ 1e-5`.
    pub rule: String,
    pub value: f64,
    pub style: usize,
}

/// Marks on a monitor plot, all optional.
#[derive(Debug, Clone, Copy, Default)]
pub struct MonitorMarks {
    pub window: Option<(i64, i64)>,
    pub mean: Option<f64>,
    pub ci_half: Option<f64>,
    pub transient_end: Option<i64>,
    pub extrapolated: Option<f64>,
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

/// Plot area and data bounds.
struct Frame {
    right: f64,
    height: f64,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
}

impl Frame {
    fn pw(&self) -> f64 {
        WIDTH - LEFT - self.right
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
    // x ticks (iterations).
    let step = nice_step(f.x1 - f.x0, 8.0).max(1.0);
    for t in ticks(f.x0, f.x1, step) {
        let x = LEFT + f.px(t);
        let _ = write!(
            out,
            r##"<line x1="{x:.1}" y1="{TOP}" x2="{x:.1}" y2="{:.1}" stroke="#e3e3e3" stroke-width="1"/><line x1="{x:.1}" y1="{:.1}" x2="{x:.1}" y2="{:.1}" stroke="#444"/><text x="{x:.1}" y="{:.1}" text-anchor="middle" font-size="11">{}</text>"##,
            TOP + ph,
            TOP + ph,
            TOP + ph + 5.0,
            TOP + ph + 18.0,
            iteration(t.round() as i64)
        );
    }
    // y ticks.
    let span = f.y1 - f.y0;
    let (step, decades) =
        if log { ((span / 8.0).ceil().max(1.0), true) } else { (nice_step(span, 6.0), false) };
    for t in ticks(f.y0, f.y1, step) {
        let y = TOP + f.py(t);
        let label = if decades {
            format!(r#"10<tspan dy="-6" font-size="9">{}</tspan>"#, t.round() as i64)
        } else {
            xml(&linear_label(t, step))
        };
        let _ = write!(
            out,
            r##"<line x1="{LEFT}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#e3e3e3" stroke-width="1"/><line x1="{:.1}" y1="{y:.1}" x2="{LEFT}" y2="{y:.1}" stroke="#444"/><text x="{:.1}" y="{:.1}" text-anchor="end" font-size="11">{label}</text>"##,
            LEFT + pw,
            LEFT - 5.0,
            LEFT - 8.0,
            y + 4.0
        );
    }
    let _ = write!(
        out,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle" font-size="12">{}</text><text x="16" y="{:.1}" text-anchor="middle" font-size="12" transform="rotate(-90 16 {:.1})">{}</text>"#,
        LEFT + pw / 2.0,
        TOP + ph + 36.0,
        xml(x_label),
        TOP + ph / 2.0,
        TOP + ph / 2.0,
        xml(y_label)
    );
}

/// The border of the plot area, drawn after everything inside so grid lines cannot cover it.
fn border(out: &mut String, f: &Frame) {
    let _ = write!(
        out,
        r##"<rect x="{LEFT}" y="{TOP}" width="{:.1}" height="{:.1}" fill="none" stroke="#444" stroke-width="1"/>"##,
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
        LEFT + f.pw() / 2.0,
        TOP + f.ph() / 2.0,
        xml(text)
    );
}

/// Iterations at which a restart (segment after the first) begins, over all lines.
fn restarts(lines: &[Line<'_>]) -> Vec<i64> {
    let mut out: Vec<i64> = lines
        .iter()
        .flat_map(|l| {
            l.segment_starts
                .iter()
                .filter(|&&s| s > 0 && s < l.iterations.len())
                .map(|&s| l.iterations[s])
        })
        .collect();
    out.sort_unstable();
    out.dedup();
    out
}

/// The residual history: log10 scale, one path per series, targets dashed, restarts marked.
pub fn residual_plot(lines: &[Line<'_>], targets: &[Target], standalone: bool) -> String {
    let envs: Vec<Envelope> = lines.iter().map(|l| envelope(l, true)).collect();
    let mut legend = Legend { items: Vec::new() };
    for l in lines {
        let (colour, dash) = style(l.style);
        legend.items.push((Key::Line { colour, dash, width: 1.8 }, l.name.to_string()));
    }
    let targets: Vec<&Target> =
        targets.iter().filter(|t| t.value.is_finite() && t.value > 0.0).collect();
    if !targets.is_empty() {
        legend.items.push((
            Key::Line { colour: "#555555", dash: "5 4", width: 1.0 },
            "criterion threshold (dashed, labelled)".into(),
        ));
    }
    let restart_its = restarts(lines);
    if !restart_its.is_empty() {
        legend.items.push((
            Key::Line { colour: "#666666", dash: "1 3", width: 1.2 },
            "restart (vertical)".into(),
        ));
    }
    let ph = 300.0;
    let height = TOP + ph + AXIS_SPACE + legend.rows() * LEGEND_ROW + 8.0;
    let mut out = String::with_capacity(64 * 1024);
    open(&mut out, height, "Residual history, log scale", standalone);

    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for e in &envs {
        for run in &e.runs {
            for &(_, l, h) in run {
                for v in [l, h] {
                    if v.is_finite() {
                        lo = lo.min(v);
                        hi = hi.max(v);
                    }
                }
            }
        }
    }
    for t in &targets {
        lo = lo.min(t.value.log10());
        hi = hi.max(t.value.log10());
    }
    let xb = x_bounds(lines.iter());
    let (y0, y1) = if lo <= hi {
        let (a, b) = (lo.floor(), hi.ceil());
        if b > a { (a, b) } else { (a - 1.0, a + 1.0) }
    } else {
        (-6.0, 0.0)
    };
    let (x0, x1) = xb.unwrap_or((0.0, 1.0));
    let f = Frame { right: RIGHT_NAMED, height: ph, x0, x1, y0, y1 };
    axes(&mut out, &f, "iteration", "residual (log scale)", true);
    let _ = write!(
        out,
        r#"<svg x="{LEFT}" y="{TOP}" width="{:.1}" height="{ph:.1}" viewBox="0 0 {:.1} {ph:.1}" overflow="hidden">"#,
        f.pw(),
        f.pw()
    );
    for &it in &restart_its {
        let x = f.px(it as f64);
        let _ = write!(
            out,
            r##"<line x1="{x:.1}" y1="0" x2="{x:.1}" y2="{ph:.1}" stroke="#666666" stroke-width="1.2" stroke-dasharray="1 3"/><text x="{:.1}" y="12" font-size="10" fill="#444">restart</text>"##,
            x + 3.0
        );
    }
    let targets = group_targets(&targets, &f);
    for t in &targets {
        let y = f.py(t.value.log10());
        let _ = write!(
            out,
            r#"<line x1="0" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="{}" stroke-width="1" stroke-dasharray="5 4"/>"#,
            f.pw(),
            t.colour
        );
    }
    for (l, e) in lines.iter().zip(&envs) {
        let (colour, dash) = style(l.style);
        let _ = write!(
            out,
            r#"<path d="{}" fill="none" stroke="{colour}" stroke-width="1.8" stroke-linejoin="round"{}><title>{}</title></path>"#,
            path_data(e, &f),
            dash_attr(dash),
            xml(l.name)
        );
        non_finite_marks(&mut out, &f, e, colour);
    }
    target_labels(&mut out, &f, &targets, &envs);
    out.push_str("</svg>");
    border(&mut out, &f);
    end_labels(&mut out, &f, lines, &envs);
    if lines.iter().all(|l| l.values.is_empty()) {
        empty_note(&mut out, &f, "no residual values were read");
    } else if envs.iter().all(|e| e.runs.is_empty()) {
        empty_note(&mut out, &f, "no finite residual values to plot");
    }
    legend.draw(&mut out, TOP + ph + AXIS_SPACE + 6.0);
    out.push_str("</svg>");
    out
}

/// Thresholds that would draw on top of each other (within a few pixels) share one line and
/// one label.
struct TargetLine {
    value: f64,
    colour: &'static str,
    label: String,
}

fn group_targets(targets: &[&Target], f: &Frame) -> Vec<TargetLine> {
    let mut sorted: Vec<&Target> = targets.to_vec();
    sorted.sort_by(|a, b| b.value.total_cmp(&a.value));
    let mut out: Vec<(TargetLine, Vec<&Target>)> = Vec::new();
    for t in sorted {
        let y = f.py(t.value.log10());
        match out.last_mut() {
            Some((line, members)) if (f.py(line.value.log10()) - y).abs() < 6.0 => {
                members.push(t);
                line.colour = "#555555";
            }
            _ => out.push((
                TargetLine { value: t.value, colour: style(t.style).0, label: String::new() },
                vec![t],
            )),
        }
    }
    out.into_iter()
        .map(|(mut line, members)| {
            // "p ≥ 3 dec" + "Ux ≥ 3 dec" → "p, Ux ≥ 3 dec" when the rule is the same.
            line.label = if members.iter().all(|m| m.rule == members[0].rule) {
                let names: Vec<&str> = members.iter().map(|m| m.series.as_str()).collect();
                format!("{} {}", names.join(", "), members[0].rule)
            } else {
                let parts: Vec<String> =
                    members.iter().map(|m| format!("{} {}", m.series, m.rule)).collect();
                parts.join("; ")
            };
            line
        })
        .collect()
}

/// Labels of the threshold lines, on top of the series with a white halo, on whichever side
/// of the line (above or below) fewer series pass through.
fn target_labels(out: &mut String, f: &Frame, targets: &[TargetLine], envs: &[Envelope]) {
    for t in targets {
        let y = f.py(t.value.log10());
        let width = 6.2 * t.label.chars().count() as f64 + 8.0;
        let x0 = f.pw() - width;
        // How many envelope samples cross the band [a, b] within the label's width.
        let crowd = |a: f64, b: f64| {
            envs.iter()
                .flat_map(|e| e.runs.iter().flatten())
                .filter(|&&(x, lo, hi)| {
                    f.px(x) >= x0 && f.py(hi).min(f.py(lo)) <= b && f.py(hi).max(f.py(lo)) >= a
                })
                .count()
        };
        let above = if y < 14.0 { usize::MAX } else { crowd(y - 14.0, y - 1.0) };
        let below = if y > f.ph() - 14.0 { usize::MAX } else { crowd(y + 1.0, y + 14.0) };
        let ty = if below < above { y + 12.0 } else { y - 4.0 };
        let _ = write!(
            out,
            r##"<text x="{:.1}" y="{ty:.1}" text-anchor="end" font-size="10.5" fill="#111" stroke="#ffffff" stroke-width="3.5" stroke-linejoin="round" paint-order="stroke">{}</text>"##,
            f.pw() - 4.0,
            xml(&t.label)
        );
    }
}

/// Each series named in the right margin at the height of its last value, with a leader line,
/// so series can be told apart without colour (greyscale print) and without the legend.
fn end_labels(out: &mut String, f: &Frame, lines: &[Line<'_>], envs: &[Envelope]) {
    let mut labels: Vec<(f64, f64, &Line<'_>)> = lines
        .iter()
        .zip(envs)
        .filter_map(|(l, e)| {
            let &(_, lo, hi) = e.runs.last()?.last()?;
            let y = TOP + f.py((lo + hi) / 2.0);
            Some((y, y, l))
        })
        .collect();
    labels.sort_by(|a, b| a.0.total_cmp(&b.0));
    // Push labels apart (12 px), then back up if the last one fell off the bottom.
    const GAP: f64 = 12.0;
    for k in 1..labels.len() {
        labels[k].1 = labels[k].1.max(labels[k - 1].1 + GAP);
    }
    let bottom = TOP + f.ph() + 6.0;
    if let Some(last) = labels.last().map(|l| l.1)
        && last > bottom
    {
        let shift = last - bottom;
        for l in &mut labels {
            l.1 -= shift;
        }
        for k in (0..labels.len().saturating_sub(1)).rev() {
            labels[k].1 = labels[k].1.min(labels[k + 1].1 - GAP);
        }
    }
    let x = LEFT + f.pw();
    for (y, ly, l) in labels {
        let (colour, _) = style(l.style);
        let name: String = if l.name.chars().count() > 11 {
            l.name.chars().take(10).chain(['…']).collect()
        } else {
            l.name.to_string()
        };
        let _ = write!(
            out,
            r##"<line x1="{x:.1}" y1="{y:.1}" x2="{:.1}" y2="{ly:.1}" stroke="{colour}" stroke-width="1.4"/><text x="{:.1}" y="{:.1}" font-size="10.5" fill="#222">{}</text>"##,
            x + 10.0,
            x + 13.0,
            ly + 3.5,
            xml(&name)
        );
    }
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

/// One monitor: its history, the final window shaded, the window mean and its confidence band,
/// the end of the start-up transient and the extrapolated value when known.
pub fn monitor_plot(line: &Line<'_>, marks: &MonitorMarks, standalone: bool) -> String {
    let env = envelope(line, false);
    let (colour, dash) = style(line.style);
    let mut legend = Legend { items: Vec::new() };
    legend.items.push((Key::Line { colour, dash, width: 1.6 }, line.name.to_string()));
    if marks.window.is_some() {
        legend.items.push((Key::Swatch { fill: "#9a9a9a", opacity: 0.25 }, "final window".into()));
    }
    if marks.mean.is_some() {
        legend.items.push((
            Key::Line { colour: "#111111", dash: "", width: 1.4 },
            "mean over the final window".into(),
        ));
    }
    if marks.mean.is_some() && marks.ci_half.is_some() {
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

    // Vertical range: the values after the start-up transient, so that a large initial
    // swing does not flatten the part that matters; the transient is clipped, not rescaled.
    let skip_until = marks.transient_end.unwrap_or(i64::MIN);
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for (&it, &v) in line.iterations.iter().zip(line.values) {
        if it >= skip_until && v.is_finite() {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    }
    if let (Some(m), ci) = (marks.mean, marks.ci_half.unwrap_or(0.0))
        && m.is_finite()
        && ci.is_finite()
    {
        lo = lo.min(m - ci);
        hi = hi.max(m + ci);
    }
    let mut extrap_off_scale = false;
    if let Some(x) = marks.extrapolated.filter(|x| x.is_finite()) {
        // Scale of the data itself (for a flat history: its magnitude), never of `x`.
        let span = if hi > lo { hi - lo } else { lo.abs().max(f64::MIN_POSITIVE) };
        if lo <= hi && (x < lo - 2.0 * span || x > hi + 2.0 * span) {
            extrap_off_scale = true;
        } else {
            lo = lo.min(x);
            hi = hi.max(x);
        }
    }
    if let Some(x) = marks.extrapolated.filter(|x| x.is_finite()) {
        let label = if extrap_off_scale {
            format!("extrapolated value {} (off scale)", num(x))
        } else {
            "extrapolated converged value".to_string()
        };
        legend.items.push((Key::Line { colour: "#111111", dash: "2 2 8 2", width: 1.2 }, label));
    }
    let (y0, y1) = if lo < hi {
        let pad = (hi - lo) * 0.08;
        (lo - pad, hi + pad)
    } else if lo == hi {
        let pad = (lo.abs() * 1e-3).max(1e-12);
        (lo - pad, hi + pad)
    } else {
        (0.0, 1.0)
    };

    let ph = 220.0;
    let height = TOP + ph + AXIS_SPACE + legend.rows() * LEGEND_ROW + 8.0;
    let mut out = String::with_capacity(48 * 1024);
    open(&mut out, height, &format!("Monitor {}", line.name), standalone);
    let (x0, x1) = x_bounds(std::iter::once(line)).unwrap_or((0.0, 1.0));
    let f = Frame { right: RIGHT, height: ph, x0, x1, y0, y1 };
    axes(&mut out, &f, "iteration", line.name, false);
    let _ = write!(
        out,
        r#"<svg x="{LEFT}" y="{TOP}" width="{:.1}" height="{ph:.1}" viewBox="0 0 {:.1} {ph:.1}" overflow="hidden">"#,
        f.pw(),
        f.pw()
    );
    if let Some((a, b)) = marks.window {
        let (xa, xb) = (f.px(a as f64), f.px(b as f64));
        let _ = write!(
            out,
            r##"<rect x="{:.1}" y="0" width="{:.1}" height="{ph:.1}" fill="#9a9a9a" fill-opacity="0.25"/>"##,
            xa.min(xb),
            (xb - xa).abs().max(1.0)
        );
    }
    if let Some(t) = marks.transient_end {
        let x = f.px(t as f64);
        let _ = write!(
            out,
            r##"<line x1="{x:.1}" y1="0" x2="{x:.1}" y2="{ph:.1}" stroke="#444444" stroke-width="1" stroke-dasharray="6 3"/>"##
        );
    }
    if let Some(x) = marks.extrapolated.filter(|x| x.is_finite() && !extrap_off_scale) {
        let y = f.py(x);
        let _ = write!(
            out,
            r##"<line x1="0" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#111111" stroke-width="1.2" stroke-dasharray="2 2 8 2"/>"##,
            f.pw()
        );
    }
    let _ = write!(
        out,
        r#"<path d="{}" fill="none" stroke="{colour}" stroke-width="1.6" stroke-linejoin="round"{}><title>{}</title></path>"#,
        path_data(&env, &f),
        dash_attr(dash),
        xml(line.name)
    );
    non_finite_marks(&mut out, &f, &env, colour);
    if let Some(t) = marks.transient_end {
        let x = f.px(t as f64);
        if x > 180.0 {
            let _ = write!(
                out,
                r##"<text x="{:.1}" y="13" text-anchor="end" font-size="10.5" fill="#222" stroke="#ffffff" stroke-width="3.5" stroke-linejoin="round" paint-order="stroke">start-up transient (not judged)</text>"##,
                x - 5.0
            );
        }
    }
    // Mean and confidence band on top of the (often dense) history, so they stay visible.
    if let (Some((a, b)), Some(m)) = (marks.window, marks.mean.filter(|m| m.is_finite())) {
        let (xa, xb) = (f.px(a as f64), f.px(b as f64));
        let (x, w) = (xa.min(xb), (xb - xa).abs().max(1.0));
        if let Some(ci) = marks.ci_half.filter(|c| c.is_finite()) {
            let (ya, yb) = (f.py(m + ci), f.py(m - ci));
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
    out.push_str("</svg>");
    border(&mut out, &f);
    if env.runs.is_empty() {
        empty_note(&mut out, &f, "no finite values to plot");
    }
    legend.draw(&mut out, TOP + ph + AXIS_SPACE + 6.0);
    out.push_str("</svg>");
    out
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
