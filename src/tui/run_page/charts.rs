//! The two chart panels of a run page: residuals (log10, every residual) and the focused
//! monitor (its whole history beside a strip zoomed on the judged window).
//!
//! Drawing only: the points, ranges and marks were computed in [`crate::tui::view::chart`].

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::{Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Chart, Dataset, GraphType, Paragraph};

use crate::tui::app::App;
use crate::tui::format;
use crate::tui::geometry::{STRIP_MIN_INNER, Y_GUTTER, clamp};
use crate::tui::render::panel;
use crate::tui::text::{pad_left, width};
use crate::tui::theme::Theme;
use crate::tui::view::{ChartLine, Marks, MonitorChart, ResidualChart, Window};
use crate::view::number;

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

/// A y label of a linear axis spanning `span`: enough digits to tell the labels apart.
fn axis_label(v: f64, span: f64, log: bool) -> String {
    if log {
        return number::value(10f64.powf(v));
    }
    if !(span.is_finite() && span > 0.0) {
        return number::value(v);
    }
    let place = span.log10().floor() as i32 - 1;
    let s = number::at_place(v, place);
    // `-0.00` reads oddly on an axis.
    if s.trim_start_matches('-').chars().all(|c| c == '0' || c == '.') { "0".into() } else { s }
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

pub fn residual_panel(app: &App, frame: &mut Frame, r: Rect) {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let mut title = format!(" residuals{}log10{}{} ", g.sep, g.sep, window_label(app.window));
    if let Some(ch) = &app.detail.residual {
        if ch.restarts > 0 {
            title.push_str(&format!("{}{} restarts, end to end ", g.sep.trim_start(), ch.restarts));
        }
        if let Some(l) = ch.lines.iter().find(|l| l.focused) {
            title.push_str(&format!("{}focus {} ", g.sep.trim_start(), l.name));
        }
    }
    let block = panel(theme, title);
    let inner = clamp(block.inner(r), r);
    frame.render_widget(block, r);
    let Some(ch) = &app.detail.residual else {
        frame.render_widget(Paragraph::new(Span::styled(" no residuals yet", theme.dim())), inner);
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
    let mut order: Vec<&ChartLine> = ch.lines.iter().filter(|l| !l.focused).collect();
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
        sets.push(non_finite_set(theme, &ch.non_finite));
    }
    draw_chart(frame, sets, ch.x, ch.y, plot);
}

fn non_finite_set<'a>(theme: &Theme, points: &'a [(f64, f64)]) -> Dataset<'a> {
    Dataset::default()
        .marker(Marker::Custom('!'))
        .graph_type(GraphType::Scatter)
        .style(theme.error())
        .data(points)
}

fn draw_chart(frame: &mut Frame, sets: Vec<Dataset<'_>>, x: [f64; 2], y: [f64; 2], plot: Rect) {
    let chart = Chart::new(sets)
        .x_axis(Axis::default().bounds(x))
        .y_axis(Axis::default().bounds(y))
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
    let entry = |l: &ChartLine, values: bool| {
        let text =
            if values { format!("{} {}", l.name, number::value(l.last)) } else { l.name.clone() };
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
                spans.push(Span::styled(more, theme.dim()));
            }
            break;
        }
        // The focused series reads in reverse video, visible in every theme.
        let name_style = if l.focused { theme.selected() } else { Style::new() };
        spans.push(Span::styled(sample, theme.series(l.style)));
        spans.push(Span::raw(" "));
        spans.push(Span::styled(text, name_style));
        spans.push(Span::raw("  "));
        used += w;
    }
    if !ch.non_finite.is_empty() && used + 14 <= cells {
        spans.push(Span::styled("! non-finite  ", theme.error()));
        used += 14;
    }
    if used + width(&range) < cells {
        spans.push(Span::raw(" ".repeat(cells - used - width(&range))));
        spans.push(Span::styled(range, theme.dim()));
    }
    Line::from(spans)
}

/// The marks of a monitor plot: mean, tolerance band, confidence interval, start-up clip.
struct MarkGlyphs {
    mean: char,
    band: char,
    ci: char,
    clip: char,
}

fn mark_glyphs(theme: &Theme) -> MarkGlyphs {
    if theme.glyphs.ascii {
        MarkGlyphs { mean: '=', band: ':', ci: '-', clip: '|' }
    } else {
        MarkGlyphs { mean: '─', band: '┄', ci: '╌', clip: '┆' }
    }
}

pub fn monitor_panel(app: &App, frame: &mut Frame, r: Rect) {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let d = &app.detail;
    let Some(ch) = &d.monitor else {
        let block = panel(theme, " monitors ");
        let inner = clamp(block.inner(r), r);
        frame.render_widget(block, r);
        let note = Span::styled(" no monitor values yet", theme.dim());
        frame.render_widget(Paragraph::new(note), inner);
        return;
    };
    let mut title = format!(" {}", ch.name);
    if let (Some(k), n) = (d.monitor_shown, d.monitor_names.len())
        && n > 1
    {
        title.push_str(&format!(" [{}/{n}]", k + 1));
    }
    // (priority, text): what the judge used comes first, the last value goes first when
    // the panel is too narrow for all; a part is dropped whole, never cut inside a number.
    let round_off = ch.evidence.iter().any(|e| e == crate::view::evidence::ROUND_OFF_WORDS);
    let mut parts: Vec<(u8, String)> = vec![(3, format!("last {}", number::sig(ch.last, 5)))];
    if let Some(dp) = ch.drift_pct.filter(|_| !round_off) {
        parts.push((2, format!("drift {} %", number::value(dp))));
    }
    parts.extend(ch.evidence.iter().map(|e| (1, e.clone())));
    if ch.log {
        parts.push((0, "log10".into()));
    }
    let room = (r.width as usize).saturating_sub(4);
    let total = |ps: &[(u8, String)]| {
        width(&title) + ps.iter().map(|(_, t)| width(g.sep) + width(t)).sum::<usize>() + 1
    };
    while total(&parts) > room {
        let Some(worst) = parts.iter().map(|(p, _)| *p).max() else { break };
        let k = parts.iter().rposition(|(p, _)| *p == worst).unwrap_or(0);
        parts.remove(k);
    }
    for (_, text) in &parts {
        title.push_str(&format!("{}{text}", g.sep));
    }
    title.push(' ');
    let block = panel(theme, title);
    let inner = clamp(block.inner(r), r);
    frame.render_widget(block, r);
    if inner.height < 2 || inner.width < 12 {
        return;
    }
    let mg = mark_glyphs(theme);
    let plots = Rect::new(inner.x, inner.y, inner.width, inner.height - 1);
    let strip_w = match &ch.zoom {
        Some(_) if inner.width >= STRIP_MIN_INNER => inner.width / 3,
        _ => 0,
    };
    let main = Rect::new(plots.x, plots.y, plots.width - strip_w, plots.height);
    history_plot(theme, ch, &mg, frame, main);
    let legend_w = if strip_w > 0 { main.width } else { inner.width };
    let legend_r = Rect::new(inner.x, inner.bottom() - 1, legend_w, 1);
    let legend = monitor_legend(theme, ch, &mg, legend_r.width as usize);
    frame.render_widget(Paragraph::new(legend), legend_r);
    if let (Some(z), true) = (&ch.zoom, strip_w > 0) {
        let strip = Rect::new(main.right(), plots.y, strip_w, plots.height);
        let sep = g.border.vertical_left;
        for row in 0..strip.height {
            let cell = Rect::new(strip.x, strip.y + row, 1, 1);
            frame.render_widget(Paragraph::new(Span::styled(sep, theme.border())), cell);
        }
        let area = Rect::new(strip.x + 1, strip.y, strip.width - 1, strip.height);
        let range = range_text(z.iterations, g.ascii);
        let word = if z.judged { "window" } else { "last" };
        let full = match ch.window_iterations.filter(|_| z.judged) {
            Some(n) => format!("{word} {range} ({n} it)"),
            None => format!("{word} {range}"),
        };
        let short = format!("{word} {range}");
        let label = [full, short, range]
            .into_iter()
            .find(|l| width(l) < strip.width as usize)
            .unwrap_or_default();
        let zoom = Plot { points: &z.points, non_finite: &[], x: z.x, y: z.y, clip: None };
        plot_with_labels(theme, &zoom, ch, &mg, frame, area);
        let label_r = Rect::new(strip.x + 1, inner.bottom() - 1, strip.width - 1, 1);
        let label =
            Span::styled(crate::tui::text::fit(&label, label_r.width as usize), theme.dim());
        frame.render_widget(Paragraph::new(label), label_r);
    }
}

fn range_text((a, b): (i64, i64), ascii: bool) -> String {
    let dash = if ascii { "-" } else { "–" };
    format!("{}{dash}{}", format::iteration(a), format::iteration(b))
}

/// What one monitor plot draws.
struct Plot<'a> {
    points: &'a [(f64, f64)],
    /// Buckets that held NaN or infinity, drawn as `!` on the top edge.
    non_finite: &'a [(f64, f64)],
    x: [f64; 2],
    y: [f64; 2],
    /// x of the start-up clip line.
    clip: Option<f64>,
}

fn history_plot(theme: &Theme, ch: &MonitorChart, mg: &MarkGlyphs, frame: &mut Frame, r: Rect) {
    let plot = Plot {
        points: &ch.points,
        non_finite: &ch.non_finite,
        x: ch.x,
        y: ch.y,
        clip: ch.clipped_until.map(|(x, _)| x),
    };
    plot_with_labels(theme, &plot, ch, mg, frame, r);
}

/// A monitor plot in `r` with its y labels on the left, the marks of `ch` across it.
fn plot_with_labels(
    theme: &Theme,
    p: &Plot<'_>,
    ch: &MonitorChart,
    mg: &MarkGlyphs,
    frame: &mut Frame,
    r: Rect,
) {
    if r.height == 0 || r.width < 6 {
        return;
    }
    let span = p.y[1] - p.y[0];
    let labels: Vec<(u16, String)> = y_ticks(p.y, r.height, false)
        .into_iter()
        .map(|(row, v)| (row, axis_label(v, span, ch.log)))
        .collect();
    let gutter = labels.iter().map(|(_, l)| width(l)).max().unwrap_or(1).min(10) as u16 + 1;
    if r.width <= gutter + 3 {
        return;
    }
    for (row, l) in &labels {
        let cell = Rect::new(r.x, r.y + row, gutter, 1);
        frame.render_widget(Paragraph::new(pad_left(l, gutter as usize - 1)), cell);
    }
    let plot = Rect::new(r.x + gutter, r.y, r.width - gutter, r.height);
    let lines = mark_lines(&ch.marks, p.x);
    let clip_line = p.clip.map(|cx| [(cx, p.y[0]), (cx, p.y[1])]);
    let mut sets: Vec<Dataset<'_>> = Vec::new();
    for edge in lines.band.iter().flatten() {
        sets.push(line_set(edge, mg.band, theme.band()));
    }
    for edge in lines.ci.iter().flatten() {
        sets.push(line_set(edge, mg.ci, theme.band()));
    }
    if let Some(l) = &lines.mean {
        sets.push(line_set(l, mg.mean, theme.band()));
    }
    if let Some(l) = &clip_line {
        sets.push(line_set(l, mg.clip, theme.dim()));
    }
    sets.push(
        Dataset::default()
            .marker(theme.series_marker(ch.style))
            .graph_type(GraphType::Line)
            .style(theme.series(ch.style))
            .data(p.points),
    );
    if !p.non_finite.is_empty() {
        sets.push(non_finite_set(theme, p.non_finite));
    }
    draw_chart(frame, sets, p.x, p.y, plot);
}

/// Horizontal lines of the marks across `x`.
struct MarkLines {
    mean: Option<[(f64, f64); 2]>,
    band: Option<[[(f64, f64); 2]; 2]>,
    ci: Option<[[(f64, f64); 2]; 2]>,
}

fn mark_lines(m: &Marks, x: [f64; 2]) -> MarkLines {
    let h = |y: f64| [(x[0], y), (x[1], y)];
    MarkLines {
        mean: m.mean.map(h),
        band: m.band.map(|(a, b)| [h(a), h(b)]),
        ci: m.ci.map(|(a, b)| [h(a), h(b)]),
    }
}

fn line_set(data: &[(f64, f64)], c: char, style: Style) -> Dataset<'_> {
    Dataset::default().marker(Marker::Custom(c)).graph_type(GraphType::Line).style(style).data(data)
}

fn monitor_legend<'a>(
    theme: &Theme,
    ch: &'a MonitorChart,
    mg: &MarkGlyphs,
    cells: usize,
) -> Line<'a> {
    let g = &theme.glyphs;
    let mut entries: Vec<(String, Style)> = Vec::new();
    if ch.marks.mean.is_some() {
        entries.push((format!("{} mean", mg.mean), theme.band()));
    }
    if let Some(p) = ch.band_pct.filter(|_| ch.marks.band.is_some()) {
        // Relative to the mean unless the judge measured against another reference (then
        // named when there is room; the chart's title says it in full).
        let unit = match (ch.band_abs, ch.reference) {
            (true, _) => String::new(),
            (false, Some(r)) if cells >= 70 => format!(" % of {}", number::value(r)),
            (false, _) => " %".into(),
        };
        entries.push((
            format!("{} band {}{}{unit}", mg.band, g.pm, number::exact(p / 2.0)),
            theme.band(),
        ));
    }
    if let (Some(c), Some(_)) = (ch.ci_half, ch.marks.ci) {
        entries.push((format!("{} 95 % CI {}{}", mg.ci, g.pm, number::value(c)), theme.band()));
    }
    if let Some((_, it)) = ch.clipped_until {
        entries.push((
            format!("{} start-up clipped to it {}", mg.clip, format::iteration(it)),
            theme.dim(),
        ));
    }
    if let Some(note) = &ch.note {
        entries.push((note.clone(), theme.warning()));
    }
    let mut spans = vec![
        Span::raw(" "),
        Span::styled(theme.series_sample(ch.style), theme.series(ch.style)),
        Span::raw(format!(" {}", ch.name)),
    ];
    let mut used = 2 + width(&theme.series_sample(ch.style)) + width(&ch.name);
    for (text, style) in entries {
        let w = width(&text) + 2;
        if used + w > cells {
            break;
        }
        spans.push(Span::raw("  "));
        spans.push(Span::styled(text, style));
        used += w;
    }
    Line::from(spans)
}
