//! The page of one run: verdict header, the why, residual and monitor charts, criteria
//! checklist, findings and events, key bar.
//!
//! ```text
//!  wing-a4 · STALLED since it 3 140 · it 4 870 · target not in reach · grew 4s ago · 38 it/min
//!  why: p slope -0.02 dec/kit (95 % CI -0.05…+0.01) for 1 700 it, 1.1 dec above target
//!       1e-5
//! ╭ residuals · log10 · all ───────────╮╭ criteria 3/5 met ────────╮
//! │  1e0 ⡀                              ││ ✗ p   drop ≥ 3 dec  2.1 dec│
//! ...
//! ```
//! The why is never cut: it wraps onto as many lines as it needs and the charts shrink to
//! make room; only when even the smallest body would not fit does it end in a pointer to
//! the full text (`y`). The header drops its least important facts (rate, age) before the
//! ETA. Wide terminals put the charts left and the checklist and findings right; narrow ones
//! stack them. The verdict is a reverse-video badge, so it reads without colour.

mod charts;

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Clear, Paragraph};

use super::app::App;
use super::format;
use super::geometry::{self, RunShape, WHY_INDENT, clamp};
use super::render::{key_bar, panel};
use super::text::{fit, pad, pad_left, width, wrap};
use super::theme::Theme;
use super::view::{Eta, Level, RunView};
use crate::judge::Verdict;

pub fn render(app: &App, run: usize, frame: &mut Frame, area: Rect) {
    let Some(slot) = app.slots.get(run) else {
        return;
    };
    let v = &slot.view;
    let theme = &app.theme;
    let why = why_lines(theme, v, geometry::why_width(area.width));
    let shape = RunShape {
        why_lines: why.len() as u16,
        progress: v.progress.len() as u16,
        has_monitor: !app.detail.monitor_names.is_empty(),
        // Room for the monitors listed as not judged under the criteria, too.
        criteria: v.criteria.len() + v.not_judged.len(),
    };
    let lay = geometry::run_layout(area, shape);
    let header = header(app, run, v, area.width as usize);
    frame.render_widget(Paragraph::new(header), lay.header);
    let cut = why.len() > lay.why.height as usize;
    frame.render_widget(Paragraph::new(shown_why(theme, why, lay.why.height)), lay.why);
    progress_lines(theme, v, frame, lay.progress);
    charts::residual_panel(app, frame, lay.residual);
    if lay.monitor.area() > 0 {
        charts::monitor_panel(app, frame, lay.monitor);
    }
    criteria_panel(theme, v, frame, lay.criteria);
    if lay.items.area() > 0 {
        items_panel(app, v, frame, lay.items);
    }
    let g = &theme.glyphs;
    let lr = if g.ascii { "<- ->" } else { "←→" };
    let mouse = if app.mouse { "mouse on" } else { "mouse off" };
    let mut keys = vec![("q", "quit"), ("?", "help")];
    if cut {
        keys.push(("y", "whole why"));
    }
    keys.extend([(lr, "series"), ("w", "window"), ("m", mouse), ("p", "pause"), ("a", "ack")]);
    keys.push(("l", "lin/log"));
    if app.slots.len() > 1 {
        keys.push(("Esc/b", "all runs"));
    }
    frame.render_widget(Paragraph::new(key_bar(theme, &keys, lay.keys.width as usize)), lay.keys);
    if app.why_open {
        why_overlay(theme, v, frame, area);
    }
}

/// The why as lines `cells` wide: ` why: ` before the first cause, each cause on its own
/// line(s), continuation lines indented.
fn why_lines<'a>(theme: &Theme, v: &'a RunView, cells: usize) -> Vec<Line<'a>> {
    let indent = " ".repeat(WHY_INDENT as usize);
    let mut out = Vec::new();
    for (k, part) in v.why.iter().enumerate() {
        for (i, text) in wrap(part, cells).into_iter().enumerate() {
            let lead = if k == 0 && i == 0 {
                Span::styled(" why: ", theme.dim())
            } else {
                Span::raw(indent.clone())
            };
            out.push(Line::from(vec![lead, Span::raw(text)]));
        }
    }
    if out.is_empty() {
        out.push(Line::from(Span::styled(" why: -", theme.dim())));
    }
    out
}

/// The first `rows` lines of the why; when it needs more, the last row says how to read all.
fn shown_why<'a>(theme: &Theme, mut lines: Vec<Line<'a>>, rows: u16) -> Vec<Line<'a>> {
    let rows = rows as usize;
    if lines.len() <= rows || rows == 0 {
        return lines;
    }
    let hidden = lines.len() - (rows - 1);
    lines.truncate(rows - 1);
    let more = format!(
        "{}(+{hidden} more lines: press y for the whole why)",
        " ".repeat(WHY_INDENT as usize)
    );
    lines.push(Line::from(Span::styled(more, theme.dim())));
    lines
}

/// The whole why in a box over the page (`y`).
fn why_overlay(theme: &Theme, v: &RunView, frame: &mut Frame, area: Rect) {
    let w = area.width.saturating_sub(4).max(10);
    let lines: Vec<Line<'_>> = v
        .why
        .iter()
        .flat_map(|p| {
            let mut l: Vec<Line<'_>> = wrap(p, w.saturating_sub(4) as usize)
                .into_iter()
                .map(|t| Line::raw(format!(" {t}")))
                .collect();
            l.push(Line::raw(""));
            l
        })
        .collect();
    let h = (lines.len() as u16 + 2).min(area.height);
    let r = clamp(Rect::new(area.x + (area.width - w) / 2, area.y, w, h), area);
    frame.render_widget(Clear, r);
    frame.render_widget(Paragraph::new(lines).block(panel(theme, " why (any key closes) ")), r);
}

/// The header, fitted to `cells`: the least important facts are dropped first (rate, age,
/// iteration, since), so the verdict and the ETA stay.
fn header<'a>(app: &'a App, run: usize, v: &'a RunView, cells: usize) -> Line<'a> {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let slot = &app.slots[run];
    let badge = if let Some(n) = &v.no_verdict {
        // No verdict: the state in its place, loud when the user must act.
        let style = if n.alarm { theme.verdict_badge(Verdict::Stale) } else { theme.selected() };
        Span::styled(format!(" {} ", n.word.to_uppercase()), style)
    } else {
        Span::styled(
            format!(" {} ", v.verdict.as_str().to_uppercase()),
            theme.verdict_badge(v.verdict),
        )
    };
    // (priority, spans): lower numbers are kept longer.
    let mut parts: Vec<(u8, Vec<Span<'a>>)> = Vec::new();
    if let Some(since) = v.since {
        parts.push((4, vec![Span::raw(format!(" since it {}", format::iteration(since)))]));
    }
    if slot.acknowledged() {
        parts.push((1, vec![Span::raw(" "), Span::styled(g.ack, theme.dim())]));
    }
    if app.paused {
        let text = format!("PAUSED +{} rec", slot.pending);
        parts.push((0, vec![Span::raw(" "), Span::styled(text, theme.selected())]));
    }
    let fact = |p: u8, text: String| (p, vec![Span::raw(g.sep), Span::raw(text)]);
    if let Some(it) = v.iteration {
        parts.push(fact(3, format!("it {}", format::iteration(it))));
    }
    if let Some(e) = eta_text(v, g.ascii) {
        parts.push(fact(1, e));
    }
    if v.ended {
        parts.push(fact(2, "ended".into()));
    } else if let Some(grew) = v.last_growth {
        let age = app.now.duration_since(grew).unwrap_or_default();
        parts.push(fact(5, format!("grew {} ago", format::age(age))));
    } else {
        parts.push(fact(5, "no growth seen".into()));
    }
    if let Some(r) = v.rate_per_min {
        parts.push(fact(6, format::rate(r)));
    }
    let fixed = 1 + width(&v.name) + width(g.sep) + badge.width();
    let spans_w = |ps: &[(u8, Vec<Span<'a>>)]| -> usize {
        ps.iter().flat_map(|(_, s)| s.iter()).map(Span::width).sum()
    };
    while fixed + spans_w(&parts) > cells {
        let Some(worst) = parts.iter().map(|(p, _)| *p).max().filter(|&p| p > 0) else { break };
        let k = parts.iter().rposition(|(p, _)| *p == worst).unwrap_or(0);
        parts.remove(k);
    }
    let name_room = cells.saturating_sub(spans_w(&parts) + width(g.sep) + badge.width() + 1).max(4);
    let mut s: Vec<Span<'a>> = vec![
        Span::raw(" "),
        Span::styled(fit(&v.name, name_room), theme.title()),
        Span::raw(g.sep),
        badge,
    ];
    s.extend(parts.into_iter().flat_map(|(_, p)| p));
    Line::from(s)
}

fn eta_text(v: &RunView, ascii: bool) -> Option<String> {
    Some(match v.eta {
        Eta::Met => "target met".into(),
        Eta::NotInReach => "target not in reach".into(),
        Eta::Iterations(n, range) => {
            let mut t = format!("ETA {} it", format::iteration(n.round() as i64));
            if let Some((lo, hi)) = range {
                // The range of the estimate, rounded as `check` and the headless lines do.
                let dash = if ascii { "-" } else { "–" };
                if let Some(text) = crate::view::evidence::eta_range_text((lo, hi), dash) {
                    t.push_str(&format!(" ({text})"));
                }
            }
            if let Some(r) = v.rate_per_min.filter(|r| *r > 0.0) {
                let secs = n / r * 60.0;
                if secs.is_finite() && secs < 1e9 {
                    let d = std::time::Duration::from_secs_f64(secs);
                    t.push_str(&format!(" = {}", format::eta(d)));
                }
            }
            t
        }
        Eta::Unknown => return None,
    })
}

fn progress_lines(theme: &Theme, v: &RunView, frame: &mut Frame, r: Rect) {
    let bar_cells = 20usize;
    let lines: Vec<Line<'_>> = v
        .progress
        .iter()
        .take(r.height as usize)
        .map(|p| {
            let frac = if p.total > 0 { p.read as f64 / p.total as f64 } else { 0.0 };
            let filled = ((frac * bar_cells as f64).round() as usize).min(bar_cells);
            let (on, off) = if theme.glyphs.ascii { ("#", "-") } else { ("█", "░") };
            Line::from(vec![
                Span::styled(" reading ", theme.dim()),
                Span::raw(format!(
                    "[{}{}] {:.0} % of {} ({}) ",
                    on.repeat(filled),
                    off.repeat(bar_cells - filled),
                    frac * 100.0,
                    format::bytes(p.total),
                    format::bytes(p.read)
                )),
                Span::raw(p.label.clone()),
            ])
        })
        .collect();
    frame.render_widget(Paragraph::new(lines), r);
}

/// The checklist, failing criteria first. Thresholds and values are never cut: the series
/// name gives way first, and rows that do not fit are counted on a last `+N more` line.
fn criteria_panel(theme: &Theme, v: &RunView, frame: &mut Frame, r: Rect) {
    let g = &theme.glyphs;
    let met = v.criteria.iter().filter(|c| c.met).count();
    let block = panel(theme, format!(" criteria {met}/{} met ", v.criteria.len()));
    let inner = clamp(block.inner(r), r);
    frame.render_widget(block, r);
    if v.criteria.is_empty() {
        let text = if v.no_verdict.is_some() { " no verdict" } else { " none judged yet" };
        frame.render_widget(Paragraph::new(Span::styled(text, theme.dim())), inner);
        return;
    }
    let w = inner.width as usize;
    let rows = inner.height as usize;
    let n = v.criteria.len();
    let shown = if n > rows { rows.saturating_sub(1) } else { n };
    let visible = &v.criteria[..shown];
    let mark_w = width(g.ok).max(width(g.fail));
    let rule_w = visible.iter().map(|c| width(&c.rule)).max().unwrap_or(1);
    let value_w = visible.iter().map(|c| width(&c.value)).max().unwrap_or(1);
    let longest_series = visible.iter().map(|c| width(&c.series)).max().unwrap_or(1);
    let series_w = w.saturating_sub(1 + mark_w + 1 + 1 + rule_w + 1 + value_w).min(longest_series);
    let mut lines: Vec<Line<'_>> = visible
        .iter()
        .map(|c| {
            let mark = if c.met { g.ok } else { g.fail };
            let rule_style = if c.default { theme.dim() } else { Style::new() };
            Line::from(vec![
                Span::raw(" "),
                Span::styled(mark, theme.met(c.met)),
                Span::raw(" "),
                Span::raw(pad(&fit_series(&c.series, series_w, g.ascii), series_w)),
                Span::raw(if series_w > 0 { " " } else { "" }),
                Span::styled(format!("{:<rule_w$}", c.rule, rule_w = rule_w), rule_style),
                Span::raw(" "),
                Span::styled(pad_left(&c.value, value_w), theme.met(c.met)),
            ])
        })
        .collect();
    if shown < n {
        let hidden = &v.criteria[shown..];
        let failing = hidden.iter().filter(|c| !c.met).count();
        let text = match failing {
            0 => format!(" +{} more, all met", hidden.len()),
            f if f == hidden.len() => format!(" +{} more, none met", hidden.len()),
            f => format!(" +{} more ({f} not met)", hidden.len()),
        };
        let style = if failing > 0 { theme.met(false) } else { theme.dim() };
        lines.push(Line::from(Span::styled(text, style)));
    }
    // Monitors shown but not judged, below the criteria while there is room (the findings
    // list says it too).
    for name in &v.not_judged {
        if lines.len() >= rows {
            break;
        }
        let text = format!(" {} {name} {}", g.sep.trim(), crate::view::evidence::ROUND_OFF_WORDS);
        lines.push(Line::from(Span::styled(fit(&text, w), theme.dim())));
    }
    frame.render_widget(Paragraph::new(lines), inner);
}

fn items_panel(app: &App, v: &RunView, frame: &mut Frame, r: Rect) {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let n = v.items.len();
    let start = app.item_scroll.min(n.saturating_sub(1));
    let more = if start > 0 { format!(" {}+{start} above ", g.sep.trim()) } else { String::new() };
    let block = panel(theme, format!(" findings & events ({n}){more} "));
    let inner = clamp(block.inner(r), r);
    frame.render_widget(block, r);
    if n == 0 {
        frame.render_widget(Paragraph::new(Span::styled(" nothing found", theme.dim())), inner);
        return;
    }
    let shown = &v.items[start..(start + inner.height as usize).min(n)];
    let it_w = shown
        .iter()
        .map(|i| i.iteration.map_or(1, |it| width(&format::iteration(it))))
        .max()
        .unwrap_or(1);
    let lines: Vec<Line<'_>> = shown
        .iter()
        .map(|i| {
            let it = i.iteration.map_or_else(|| "-".to_string(), format::iteration);
            let (mark, style) = match i.level {
                Level::Cause => (g.cause, theme.cause()),
                Level::Error => (" ", theme.error()),
                Level::Warning => (" ", theme.warning()),
                Level::Info => (" ", Style::new()),
            };
            let head = format!("{} {} ", pad_left(&it, it_w), i.tag);
            let rest = inner.width as usize;
            let used = width(mark) + width(&head);
            Line::from(vec![
                Span::styled(mark, style),
                Span::styled(head, style),
                Span::raw(fit(&i.text, rest.saturating_sub(used))),
            ])
        })
        .collect();
    frame.render_widget(Paragraph::new(lines), inner);
}

/// A series name cut to `w` columns in the middle (keeping its file tag and its end), with the
/// cut marked `~` in ASCII mode, as the other cut texts of the panels are.
fn fit_series(name: &str, w: usize, ascii: bool) -> String {
    let fitted = crate::run::store::fit_name(name, w);
    if ascii && fitted != name { fitted.replace('…', "~") } else { fitted }
}
