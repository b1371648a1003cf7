//! The overview of many runs: one row each, the runs that need a decision first.
//!
//! Only the visible rows are drawn, from snapshots (sparklines included) computed when each
//! run's data changed, so 200 runs cost no more per frame than a screenful.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::Paragraph;

use super::app::{App, attention_rank, scroll_start};
use super::format;
use super::render::{OVERVIEW_TABLE_TOP, clamp, key_bar, overview_rows, pad, pad_left, span};
use super::view::RunView;
use crate::judge::Verdict;

/// Column widths for a given terminal width.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Columns {
    name: usize,
    verdict: usize,
    iteration: usize,
    spark: usize,
    leading: usize,
    worst: usize,
    grew: usize,
}

fn columns(total: usize, longest_name: usize) -> Columns {
    let verdict = 11;
    let iteration = 9;
    let grew = 5;
    let mut name = longest_name.clamp(6, 24);
    // mark + gaps between the always-shown columns
    let fixed = |name: usize| 2 + name + 1 + verdict + 1 + iteration + 1 + grew;
    while fixed(name) + 10 > total && name > 4 {
        name -= 1;
    }
    let rest = total.saturating_sub(fixed(name) + 1);
    let (spark, leading, worst) = if rest >= 12 + 1 + 16 + 1 + 22 {
        (12, 16, rest - 30)
    } else if rest >= 12 + 1 + 12 {
        (12, 0, rest - 13)
    } else {
        (0, 0, rest)
    };
    Columns { name, verdict, iteration, spark, leading, worst, grew }
}

pub fn render(app: &App, frame: &mut Frame, area: Rect) {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let total = area.width as usize;
    frame.render_widget(
        Paragraph::new(title(app)),
        clamp(Rect::new(area.x, area.y, area.width, 1), area),
    );
    let longest = app.slots.iter().map(|s| super::render::width(&s.view.name)).max().unwrap_or(6);
    let c = columns(total, longest);
    let mut head = vec![
        Span::raw("  "),
        Span::raw(pad("run", c.name)),
        Span::raw(" "),
        Span::raw(pad("verdict", c.verdict)),
        Span::raw(" "),
        Span::raw(pad_left("it", c.iteration)),
        Span::raw(" "),
    ];
    if c.spark > 0 {
        head.push(Span::raw(pad("residual", c.spark)));
        head.push(Span::raw(" "));
    }
    if c.leading > 0 {
        head.push(Span::raw(pad("leading", c.leading)));
        head.push(Span::raw(" "));
    }
    head.push(Span::raw(pad("worst criterion", c.worst)));
    head.push(Span::raw(" "));
    head.push(Span::raw(pad_left("grew", c.grew)));
    frame.render_widget(
        Paragraph::new(Line::from(head).style(theme.focused())),
        clamp(Rect::new(area.x, area.y + 1, area.width, 1), area),
    );

    let rows = overview_rows(area.height);
    let start = scroll_start(app.selected, app.offset, rows);
    let lines: Vec<Line<'_>> = app
        .order
        .iter()
        .enumerate()
        .skip(start)
        .take(rows)
        .map(|(pos, &i)| {
            let slot = &app.slots[i];
            let line = row(app, &slot.view, slot.acknowledged(), &c);
            if pos == app.selected { line.style(theme.selected()) } else { line }
        })
        .collect();
    let table = Rect::new(area.x, area.y + OVERVIEW_TABLE_TOP, area.width, rows as u16);
    frame.render_widget(Paragraph::new(lines), clamp(table, area));

    let ud = if g.ascii { "up/down" } else { "↑↓" };
    let keys = [
        ("q", "quit"),
        ("?", "help"),
        (ud, "select"),
        ("Enter", "open"),
        ("a", "ack"),
        ("p", "pause"),
        ("m", "mouse"),
    ];
    let bar = clamp(Rect::new(area.x, area.bottom().saturating_sub(1), area.width, 1), area);
    frame.render_widget(Paragraph::new(key_bar(theme, &keys, total)), bar);
}

fn title(app: &App) -> Line<'_> {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let mut counts = [0usize; 7];
    for s in &app.slots {
        counts[attention_rank(s.view.verdict) as usize] += 1;
    }
    let mut spans = vec![
        span(" settle", theme.title()),
        Span::raw(format!("{}{} runs", g.sep, app.slots.len())),
    ];
    let mut by_rank: Vec<Verdict> = Verdict::ALL.to_vec();
    by_rank.sort_by_key(|v| attention_rank(*v));
    for v in by_rank {
        let n = counts[attention_rank(v) as usize];
        if n > 0 {
            spans.push(Span::raw(g.sep));
            spans.push(span(format!("{n} {}", v.as_str()), theme.verdict_text(v)));
        }
    }
    let reading = app.slots.iter().filter(|s| !s.view.progress.is_empty()).count();
    if reading > 0 {
        spans.push(Span::raw(format!("{}{reading} reading", g.sep)));
    }
    if app.paused {
        let pending: usize = app.slots.iter().map(|s| s.pending).sum();
        spans.push(Span::raw(" "));
        spans.push(span(format!("PAUSED +{pending} rec"), theme.selected()));
    }
    Line::from(spans)
}

fn row<'a>(app: &'a App, v: &'a RunView, acked: bool, c: &Columns) -> Line<'a> {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let ack = if acked { if g.ascii { "a" } else { "✔" } } else { " " };
    let it = v.iteration.map_or_else(|| "-".into(), format::iteration);
    let mut s = vec![
        Span::raw(ack),
        Span::raw(" "),
        span(pad(&v.name, c.name), Style::new()),
        Span::raw(" "),
        if v.records == 0 {
            span(pad("waiting", c.verdict), theme.dim())
        } else {
            span(pad(v.verdict.as_str(), c.verdict), theme.verdict_text(v.verdict))
        },
        Span::raw(" "),
        Span::raw(pad_left(&it, c.iteration)),
        Span::raw(" "),
    ];
    if c.spark > 0 {
        let mut cells: String =
            v.spark.iter().map(|l| l.map_or(' ', |l| g.spark[l.min(7) as usize])).collect();
        cells = pad(&cells, c.spark);
        s.push(Span::raw(cells));
        s.push(Span::raw(" "));
    }
    if c.leading > 0 {
        s.push(Span::raw(pad(&v.leading, c.leading)));
        s.push(Span::raw(" "));
    }
    let worst = match v.progress.first() {
        Some(p) if p.total > 0 => {
            format!("reading {:.0} %", p.read as f64 * 100.0 / p.total as f64)
        }
        _ => v.worst.clone(),
    };
    let worst_style = if v.all_met { theme.met(true) } else { Style::new() };
    s.push(span(pad(&worst, c.worst), worst_style));
    s.push(Span::raw(" "));
    let grew = if v.ended {
        "end".to_string()
    } else {
        v.last_growth.map_or_else(
            || "-".into(),
            |t| format::age(app.now.duration_since(t).unwrap_or_default()),
        )
    };
    s.push(Span::raw(pad_left(&grew, c.grew)));
    Line::from(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_fit_the_width() {
        for w in [20usize, 40, 80, 120, 200, 500] {
            let c = columns(w, 30);
            let used = 2
                + c.name
                + 1
                + c.verdict
                + 1
                + c.iteration
                + 1
                + if c.spark > 0 { c.spark + 1 } else { 0 }
                + if c.leading > 0 { c.leading + 1 } else { 0 }
                + c.worst
                + 1
                + c.grew;
            assert!(used <= w.max(40), "width {w}: {c:?} uses {used}");
        }
        assert_eq!(columns(80, 8).spark, 12);
    }
}
