//! The residual history plot: log10 scale, one path per series, criteria thresholds dashed
//! and labelled, restarts marked, each series named at its last value.

use std::fmt::Write;

use super::{
    AXIS_SPACE, Envelope, Frame, Key, LEGEND_ROW, Legend, Line, RIGHT_NAMED, TOP, axes, border,
    dash_attr, empty_note, envelope, non_finite_marks, open, path_data, style, viewport, x_bounds,
};
use crate::report::text::xml;

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
    let f = Frame::full(RIGHT_NAMED, ph, (x0, x1), (y0, y1));
    axes(&mut out, &f, "iteration", "residual (log scale)", true);
    viewport(&mut out, &f);
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
            let y = f.top + f.py((lo + hi) / 2.0);
            Some((y, y, l))
        })
        .collect();
    labels.sort_by(|a, b| a.0.total_cmp(&b.0));
    // Push labels apart (12 px), then back up if the last one fell off the bottom.
    const GAP: f64 = 12.0;
    for k in 1..labels.len() {
        labels[k].1 = labels[k].1.max(labels[k - 1].1 + GAP);
    }
    let bottom = f.top + f.ph() + 6.0;
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
    let x = f.left + f.pw();
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
