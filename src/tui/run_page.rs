//! The page of one run: verdict header, why line, residual and monitor charts, criteria
//! checklist, findings and events, key bar.
//!
//! ```text
//!  wing-a4 · STALLED since it 3 140 · it 4 870 · 38 it/min · grew 4s ago · target not in reach
//!  why: p: slope -0.02 dec/kit over 1 700 it, 1.1 dec above target
//! ╭ residuals · log10 · all ───────────╮╭ criteria 3/5 ────────────╮
//! │  1e0 ⡀                              ││ ✓ Ux  drop ≥ 3 dec  4.2 … │
//! ...
//! ```
//! Wide terminals put the charts left and the checklist and findings right; narrow ones
//! stack them. The verdict is a reverse-video badge, so it reads without colour.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::{Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Chart, Dataset, GraphType, Paragraph};

use super::app::App;
use super::format;
use super::render::{clamp, fit, key_bar, pad, pad_left, panel, span, width};
use super::theme::Theme;
use super::view::{Eta, Level, MonitorChart, ResidualChart, RunView, Window};

/// Columns left of a chart's plot area for the y labels.
pub const Y_GUTTER: u16 = 6;
/// Width from which charts and lists sit side by side.
const SIDE_BY_SIDE: u16 = 70;

/// Rectangles of the run page.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RunLayout {
    pub header: Rect,
    pub why: Rect,
    pub progress: Rect,
    pub residual: Rect,
    pub monitor: Rect,
    pub criteria: Rect,
    pub items: Rect,
    pub keys: Rect,
}

/// Lay out the page in `area` with `progress` bulk-read lines, a monitor chart when
/// `has_monitor`, and room for `criteria` checklist rows.
pub fn layout(area: Rect, progress: u16, has_monitor: bool, criteria: usize) -> RunLayout {
    let row = |y: u16, h: u16| clamp(Rect::new(area.x, y, area.width, h), area);
    let header = row(area.y, 1);
    let why = row(area.y + 1, 1);
    let progress_h = progress.min(area.height.saturating_sub(6));
    let prog = row(area.y + 2, progress_h);
    let top = area.y + 2 + progress_h;
    let bottom = area.bottom().saturating_sub(1);
    let keys = row(bottom, 1);
    let body_h = bottom.saturating_sub(top);
    let crit_wanted = criteria as u16 + 2;
    let r = |x: u16, y: u16, w: u16, h: u16| clamp(Rect::new(x, y, w, h), area);
    let empty = Rect::new(area.x, area.y, 0, 0);
    let (residual, monitor, crit, items);
    if area.width >= SIDE_BY_SIDE {
        let right_w = (area.width * 2 / 5).clamp(28, 64);
        let left_w = area.width - right_w;
        let res_h = if has_monitor && body_h >= 12 { body_h * 3 / 5 } else { body_h };
        residual = r(area.x, top, left_w, res_h);
        monitor =
            if res_h < body_h { r(area.x, top + res_h, left_w, body_h - res_h) } else { empty };
        let mut crit_h = crit_wanted.min((body_h / 2).max(3)).max(3).min(body_h);
        if body_h - crit_h < 3 {
            crit_h = body_h;
        }
        crit = r(area.x + left_w, top, right_w, crit_h);
        items = if crit_h < body_h {
            r(area.x + left_w, top + crit_h, right_w, body_h - crit_h)
        } else {
            empty
        };
    } else {
        let res_h = body_h / 2;
        let crit_h = crit_wanted.min((body_h - res_h) / 2).max(3).min(body_h - res_h);
        residual = r(area.x, top, area.width, res_h);
        monitor = empty;
        crit = r(area.x, top + res_h, area.width, crit_h);
        let used = res_h + crit_h;
        items =
            if used < body_h { r(area.x, top + used, area.width, body_h - used) } else { empty };
    }
    RunLayout { header, why, progress: prog, residual, monitor, criteria: crit, items, keys }
}

pub fn render(app: &App, run: usize, frame: &mut Frame, area: Rect) {
    let Some(slot) = app.slots.get(run) else {
        return;
    };
    let v = &slot.view;
    let theme = &app.theme;
    let has_monitor = !app.detail.monitor_names.is_empty();
    let lay = layout(area, v.progress.len() as u16, has_monitor, v.criteria.len());
    frame.render_widget(Paragraph::new(header(app, run, v)), lay.header);
    let why = Line::from(vec![span(" why: ", theme.dim()), Span::raw(v.why.as_str())]);
    frame.render_widget(Paragraph::new(why), lay.why);
    progress_lines(theme, v, frame, lay.progress);
    residual_panel(app, frame, lay.residual);
    if lay.monitor.area() > 0 {
        monitor_panel(app, frame, lay.monitor);
    }
    criteria_panel(theme, v, frame, lay.criteria);
    if lay.items.area() > 0 {
        items_panel(app, v, frame, lay.items);
    }
    let g = &theme.glyphs;
    let lr = if g.ascii { "<- ->" } else { "←→" };
    let mut keys = vec![("q", "quit"), ("?", "help"), (lr, "series"), ("w", "window")];
    keys.extend([("l", "lin/log"), ("p", "pause"), ("a", "ack"), ("m", "mouse")]);
    if app.slots.len() > 1 {
        keys.push(("Esc/b", "all runs"));
    }
    frame.render_widget(Paragraph::new(key_bar(theme, &keys, lay.keys.width as usize)), lay.keys);
}

fn header<'a>(app: &'a App, run: usize, v: &'a RunView) -> Line<'a> {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let slot = &app.slots[run];
    let mut s: Vec<Span<'a>> = vec![
        Span::raw(" "),
        span(v.name.as_str(), theme.title()),
        Span::raw(g.sep),
        if v.records == 0 {
            span(" WAITING ", theme.selected())
        } else {
            span(format!(" {} ", v.verdict.as_str().to_uppercase()), theme.verdict_badge(v.verdict))
        },
    ];
    if let Some(since) = v.since {
        s.push(Span::raw(format!(" since it {}", format::iteration(since))));
    }
    if slot.acknowledged() {
        s.push(Span::raw(" "));
        s.push(span(g.ack, theme.dim()));
    }
    if app.paused {
        s.push(Span::raw(" "));
        s.push(span(format!("PAUSED +{} rec", slot.pending), theme.selected()));
    }
    let mut facts: Vec<String> = Vec::new();
    if let Some(it) = v.iteration {
        facts.push(format!("it {}", format::iteration(it)));
    }
    if let Some(r) = v.rate_per_min {
        facts.push(format::rate(r));
    }
    if v.ended {
        facts.push("ended".into());
    } else if let Some(g) = v.last_growth {
        let age = app.now.duration_since(g).unwrap_or_default();
        facts.push(format!("grew {} ago", format::age(age)));
    } else {
        facts.push("no growth seen".into());
    }
    match v.eta {
        Eta::Met => facts.push("target met".into()),
        Eta::NotInReach => facts.push("target not in reach".into()),
        Eta::Iterations(n) => {
            let mut t = format!("ETA {} it", format::iteration(n.round() as i64));
            if let Some(r) = v.rate_per_min.filter(|r| *r > 0.0) {
                let secs = n / r * 60.0;
                if secs.is_finite() && secs < 1e9 {
                    t.push_str(&format!(
                        " = {}",
                        format::eta(std::time::Duration::from_secs_f64(secs))
                    ));
                }
            }
            facts.push(t);
        }
        Eta::Unknown => {}
    }
    for f in facts {
        s.push(Span::raw(g.sep));
        s.push(Span::raw(f));
    }
    Line::from(s)
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
                span(" reading ", theme.dim()),
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

fn window_label(w: Window) -> String {
    match w {
        Window::All => "all".into(),
        Window::Last(n) => format!("last {} it", format::iteration(n as i64)),
    }
}

fn decade_label(d: f64) -> String {
    let d = d.round() as i64;
    if d == 0 { "1".into() } else { format!("1e{d}") }
}

/// Rows (from the top of a plot `height` rows tall) at which y labels go, with their values.
fn y_ticks(y: [f64; 2], height: u16, decades: bool) -> Vec<(u16, f64)> {
    if height == 0 {
        return Vec::new();
    }
    let h = height as f64 - 1.0;
    let mut ticks = vec![(0u16, y[1])];
    if height >= 2 {
        ticks.push((height - 1, y[0]));
    }
    if decades && height >= 5 && y[1] - y[0] >= 2.0 {
        let span = y[1] - y[0];
        let max_labels = (height as f64 / 2.0).floor().max(2.0);
        let step = (span / max_labels).ceil().max(1.0);
        let mut d = y[1] - step;
        while d > y[0] + 0.5 * step {
            let row = ((y[1] - d) / span * h).round() as u16;
            if ticks.iter().all(|&(r, _)| r.abs_diff(row) >= 2) {
                ticks.push((row, d));
            }
            d -= step;
        }
    } else if !decades && height >= 7 {
        ticks.push(((h / 2.0).round() as u16, (y[0] + y[1]) / 2.0));
    }
    ticks
}

fn residual_panel(app: &App, frame: &mut Frame, r: Rect) {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let mut title = format!(" residuals{}log10{}{} ", g.sep, g.sep, window_label(app.window));
    if let Some(ch) = &app.detail.residual
        && ch.restarts > 0
    {
        title.push_str(&format!("{}{} restarts, end to end ", g.sep.trim_end(), ch.restarts));
    }
    let block = panel(theme, title);
    let inner = clamp(block.inner(r), r);
    frame.render_widget(block, r);
    let Some(ch) = &app.detail.residual else {
        frame.render_widget(Paragraph::new(span(" no residuals yet", theme.dim())), inner);
        return;
    };
    if inner.height < 2 || inner.width <= Y_GUTTER + 2 {
        return;
    }
    let plot = Rect::new(inner.x + Y_GUTTER, inner.y, inner.width - Y_GUTTER, inner.height - 1);
    for (row, d) in y_ticks(ch.y, plot.height, true) {
        let cell = Rect::new(inner.x, plot.y + row, Y_GUTTER, 1);
        frame
            .render_widget(Paragraph::new(pad_left(&decade_label(d), Y_GUTTER as usize - 1)), cell);
    }
    plot_residuals(theme, ch, frame, plot);
    let legend = Rect::new(inner.x, inner.bottom() - 1, inner.width, 1);
    frame.render_widget(Paragraph::new(residual_legend(theme, ch, legend.width as usize)), legend);
}

fn plot_residuals(theme: &Theme, ch: &ResidualChart, frame: &mut Frame, plot: Rect) {
    let any_focus = ch.lines.iter().any(|l| l.focused);
    let mut order: Vec<&super::view::ChartLine> = ch.lines.iter().filter(|l| !l.focused).collect();
    order.extend(ch.lines.iter().filter(|l| l.focused));
    let mut sets: Vec<Dataset<'_>> = order
        .iter()
        .map(|l| {
            let mut style = theme.series(l.style);
            if l.focused {
                style = style.add_modifier(Modifier::BOLD);
            } else if any_focus {
                style = style.add_modifier(Modifier::DIM);
            }
            Dataset::default()
                .marker(theme.series_marker(l.style))
                .graph_type(GraphType::Line)
                .style(style)
                .data(&l.points)
        })
        .collect();
    if !ch.non_finite.is_empty() {
        sets.push(
            Dataset::default()
                .marker(Marker::Custom('!'))
                .graph_type(GraphType::Scatter)
                .style(theme.error())
                .data(&ch.non_finite),
        );
    }
    let chart = Chart::new(sets)
        .x_axis(Axis::default().bounds(ch.x))
        .y_axis(Axis::default().bounds(ch.y))
        .legend_position(None);
    frame.render_widget(chart, plot);
}

fn residual_legend<'a>(theme: &Theme, ch: &'a ResidualChart, cells: usize) -> Line<'a> {
    let g = &theme.glyphs;
    let range = format!(
        "{}{}{} it",
        format::iteration(ch.x[0].round() as i64),
        if g.ascii { ".." } else { "…" },
        format::iteration(ch.x[1].round() as i64)
    );
    // Entries with last values if they all fit, else names only, else as many as fit.
    let entry = |l: &super::view::ChartLine, values: bool| {
        let text =
            if values { format!("{} {}", l.name, format::sci(l.last)) } else { l.name.clone() };
        (theme.series_sample(l.style), text)
    };
    let total = |values: bool| -> usize {
        ch.lines
            .iter()
            .map(|l| {
                let (a, b) = entry(l, values);
                width(&a) + 1 + width(&b) + 2
            })
            .sum::<usize>()
            + 1
    };
    let with_values = total(true) + width(&range) < cells;
    let mut spans: Vec<Span<'a>> = vec![Span::raw(" ")];
    let mut used = 1usize;
    for (k, l) in ch.lines.iter().enumerate() {
        let (sample, text) = entry(l, with_values);
        let w = width(&sample) + 1 + width(&text) + 2;
        let left = ch.lines.len() - k;
        let more = format!("+{left}");
        let reserve = if left > 1 { more.len() } else { 0 };
        if used + w + reserve > cells {
            if used + more.len() <= cells {
                used += more.len();
                spans.push(span(more, theme.dim()));
            }
            break;
        }
        let name_style = if l.focused { theme.focused() } else { Style::new() };
        spans.push(span(sample, theme.series(l.style)));
        spans.push(Span::raw(" "));
        spans.push(span(text, name_style));
        spans.push(Span::raw("  "));
        used += w;
    }
    if !ch.non_finite.is_empty() && used + 14 <= cells {
        spans.push(span("! non-finite  ", theme.error()));
        used += 14;
    }
    if used + width(&range) < cells {
        spans.push(Span::raw(" ".repeat(cells - used - width(&range))));
        spans.push(span(range, theme.dim()));
    }
    Line::from(spans)
}

fn monitor_panel(app: &App, frame: &mut Frame, r: Rect) {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let d = &app.detail;
    let Some(ch) = &d.monitor else {
        let block = panel(theme, " monitors ");
        let inner = clamp(block.inner(r), r);
        frame.render_widget(block, r);
        frame.render_widget(Paragraph::new(span(" no monitor values yet", theme.dim())), inner);
        return;
    };
    let mut title = format!(" {}{}last {}", ch.name, g.sep, format::value(ch.last));
    if let Some(dp) = ch.drift_pct {
        title.push_str(&format!("{}drift {} %", g.sep, format::short(dp)));
    }
    title.push_str(&format!("{}{} ", g.sep, if ch.log { "log10" } else { "linear" }));
    let block = panel(theme, title);
    let inner = clamp(block.inner(r), r);
    frame.render_widget(block, r);
    if inner.height < 2 || inner.width < 12 {
        return;
    }
    let label = |y: f64| format::value(if ch.log { 10f64.powf(y) } else { y });
    let ticks = y_ticks(ch.y, inner.height - 1, false);
    let gutter = ticks.iter().map(|&(_, y)| width(&label(y))).max().unwrap_or(1).min(10) as u16 + 1;
    if inner.width <= gutter + 4 {
        return;
    }
    let plot = Rect::new(inner.x + gutter, inner.y, inner.width - gutter, inner.height - 1);
    for (row, y) in ticks {
        let cell = Rect::new(inner.x, plot.y + row, gutter, 1);
        frame.render_widget(Paragraph::new(pad_left(&label(y), gutter as usize - 1)), cell);
    }
    plot_monitor(theme, ch, frame, plot);
    let legend_r = Rect::new(inner.x, inner.bottom() - 1, inner.width, 1);
    let mut spans = vec![
        Span::raw(" "),
        span(theme.series_sample(ch.style), theme.series(ch.style)),
        Span::raw(format!(" {}  ", ch.name)),
    ];
    if ch.band.is_some() {
        let (band_mark, mean_mark) = if g.ascii { (":", ".") } else { ("┄", "·") };
        spans.push(span(
            format!("{band_mark} band {}{} %", g.pm, format::short(ch.band_pct / 2.0)),
            theme.band(),
        ));
        spans.push(span(format!("  {mean_mark} mean  "), theme.band()));
    }
    if let Some(note) = &ch.note {
        spans.push(span(note.as_str(), theme.warning()));
        spans.push(Span::raw("  "));
    }
    if let (Some(k), n) = (d.monitor_shown, d.monitor_names.len())
        && n > 1
    {
        spans.push(span(format!("[{}/{n}]", k + 1), theme.dim()));
    }
    frame.render_widget(Paragraph::new(Line::from(spans)), legend_r);
}

fn plot_monitor(theme: &Theme, ch: &MonitorChart, frame: &mut Frame, plot: Rect) {
    let band_lines: Vec<[(f64, f64); 2]> = match (ch.band, ch.mean) {
        (Some((lo, hi)), Some(m)) => vec![
            [(ch.x[0], lo), (ch.x[1], lo)],
            [(ch.x[0], hi), (ch.x[1], hi)],
            [(ch.x[0], m), (ch.x[1], m)],
        ],
        _ => Vec::new(),
    };
    let (band_mark, mean_mark) = if theme.glyphs.ascii { (':', '.') } else { ('┄', '·') };
    let mut sets: Vec<Dataset<'_>> = band_lines
        .iter()
        .enumerate()
        .map(|(k, l)| {
            Dataset::default()
                .marker(Marker::Custom(if k < 2 { band_mark } else { mean_mark }))
                .graph_type(GraphType::Line)
                .style(theme.band())
                .data(l)
        })
        .collect();
    sets.push(
        Dataset::default()
            .marker(theme.series_marker(ch.style))
            .graph_type(GraphType::Line)
            .style(theme.series(ch.style))
            .data(&ch.points),
    );
    if !ch.non_finite.is_empty() {
        sets.push(
            Dataset::default()
                .marker(Marker::Custom('!'))
                .graph_type(GraphType::Scatter)
                .style(theme.error())
                .data(&ch.non_finite),
        );
    }
    let chart = Chart::new(sets)
        .x_axis(Axis::default().bounds(ch.x))
        .y_axis(Axis::default().bounds(ch.y))
        .legend_position(None);
    frame.render_widget(chart, plot);
}

fn criteria_panel(theme: &Theme, v: &RunView, frame: &mut Frame, r: Rect) {
    let g = &theme.glyphs;
    let met = v.criteria.iter().filter(|c| c.met).count();
    let block = panel(theme, format!(" criteria {met}/{} met ", v.criteria.len()));
    let inner = clamp(block.inner(r), r);
    frame.render_widget(block, r);
    if v.criteria.is_empty() {
        frame.render_widget(Paragraph::new(span(" none judged yet", theme.dim())), inner);
        return;
    }
    let w = inner.width as usize;
    let mark_w = width(g.ok).max(width(g.fail));
    let series_w = v.criteria.iter().map(|c| width(&c.series)).max().unwrap_or(1).min(w / 3).max(1);
    let value_w = v.criteria.iter().map(|c| width(&c.value)).max().unwrap_or(1).min(w / 3);
    let rule_room = w.saturating_sub(1 + mark_w + 1 + series_w + 1 + 1 + value_w);
    let rule_w = v.criteria.iter().map(|c| width(&c.rule)).max().unwrap_or(1).min(rule_room);
    let lines: Vec<Line<'_>> = v
        .criteria
        .iter()
        .take(inner.height as usize)
        .map(|c| {
            let mark = if c.met { g.ok } else { g.fail };
            Line::from(vec![
                Span::raw(" "),
                span(mark, theme.met(c.met)),
                Span::raw(" "),
                Span::raw(pad(&crate::run::store::fit_name(&c.series, series_w), series_w)),
                Span::raw(" "),
                span(pad(&c.rule, rule_w), if c.default { theme.dim() } else { Style::new() }),
                Span::raw(" "),
                span(pad_left(&c.value, value_w), theme.met(c.met)),
            ])
        })
        .collect();
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
        frame.render_widget(Paragraph::new(span(" nothing found", theme.dim())), inner);
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
                span(mark, style),
                span(head, style),
                Span::raw(fit(&i.text, rest.saturating_sub(used))),
            ])
        })
        .collect();
    frame.render_widget(Paragraph::new(lines), inner);
}
