//! The overview of many runs: one row each, the runs that need a decision first.
//!
//! Only the visible rows are drawn, from snapshots (sparklines included) computed when each
//! run's data changed, so 200 runs cost no more per frame than a screenful.
//!
//! Runs of a sweep often share a long name prefix (`real/case3c_step_rebound_a04`, `…_a06`):
//! when the names do not fit, the shared prefix is named once in the title and each row
//! shows the part that tells the runs apart. The title counts the same states the rows show
//! (`waiting` included), and the worst-criterion column shortens names, never numbers.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::Paragraph;

use super::app::{App, attention_rank, scroll_start};
use super::format;
use super::geometry::{OVERVIEW_TABLE_TOP, clamp, overview_rows};
use super::render::{key_bar, span};
use super::text::{fit, fit_middle, pad, pad_left, width};
use super::view::{RunView, Worst};
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

#[cfg(test)]
fn columns(total: usize, longest_name: usize) -> Columns {
    columns_for(total, longest_name, 0)
}

/// [`columns`] with the verdict column wide enough for a state word of `state_w` cells
/// (`nothing-to-judge`), so that no row cuts its state.
fn columns_for(total: usize, longest_name: usize, state_w: usize) -> Columns {
    let verdict = 11.max(state_w + 1);
    let iteration = 9;
    let grew = 5;
    let mut name = longest_name.clamp(6, (total / 4).max(28));
    // mark + gaps between the always-shown columns; the worst criterion keeps 14 cells.
    let fixed = |name: usize| 2 + name + 1 + verdict + 1 + iteration + 1 + grew;
    while fixed(name) + 1 + 14 > total && name > 6 {
        name -= 1;
    }
    let rest = total.saturating_sub(fixed(name) + 1);
    let (spark, leading, worst) = if rest >= 12 + 1 + 16 + 1 + 22 {
        (12, 16, rest - 30)
    } else if rest >= 12 + 1 + 18 {
        (12, 0, rest - 13)
    } else {
        (0, 0, rest)
    };
    Columns { name, verdict, iteration, spark, leading, worst, grew }
}

/// The prefix all `names` share, cut back to just after a separator (`/`, `_`, `-`, `.`,
/// `:` or a space) so that no word is split; empty for fewer than two names.
pub fn shared_prefix<'a>(names: &[&'a str]) -> &'a str {
    let Some((first, rest)) = names.split_first() else { return "" };
    if rest.is_empty() {
        return "";
    }
    let mut len = first.len();
    for n in rest {
        len = first.bytes().zip(n.bytes()).take(len).take_while(|(a, b)| a == b).count();
    }
    let common = &first[..len];
    match common.rfind(|c: char| "/_-.: ".contains(c)) {
        Some(k) => &first[..=k],
        None => "",
    }
}

/// Names as the rows show them: whole when they fit `cells`, else without the shared prefix
/// (marked with a leading ellipsis) and cut in the middle if still too long.
fn display_names(names: &[&str], cells: usize, ascii: bool) -> (Vec<String>, Option<String>) {
    let longest = names.iter().map(|n| width(n)).max().unwrap_or(0);
    let prefix = shared_prefix(names);
    if longest <= cells || width(prefix) < 4 {
        return (names.iter().map(|n| fit_middle(n, cells)).collect(), None);
    }
    let ell = if ascii { "~" } else { "…" };
    let shown =
        names.iter().map(|n| fit_middle(&format!("{ell}{}", &n[prefix.len()..]), cells)).collect();
    (shown, Some(prefix.to_string()))
}

/// The worst criterion in `cells`: whole if it fits, else with the series name shortened,
/// then without the criterion's name; the numbers are cut only when nothing else is left.
pub fn worst_text(w: &Worst, cells: usize) -> String {
    let full = format!("{} {} {}", w.series, w.name, w.numbers);
    if width(&full) <= cells {
        return full;
    }
    let nums = width(&w.numbers);
    let with_name = width(&w.name) + 1 + nums + 1;
    if cells >= with_name + 3 {
        return format!("{} {} {}", fit(&w.series, cells - with_name), w.name, w.numbers);
    }
    if cells >= nums + 4 {
        return format!("{} {}", fit(&w.series, cells - nums - 1), w.numbers);
    }
    fit(&w.numbers, cells)
}

pub fn render(app: &App, frame: &mut Frame, area: Rect) {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let total = area.width as usize;
    let names: Vec<&str> = app.slots.iter().map(|s| s.view.name.as_str()).collect();
    let longest = names.iter().map(|n| width(n)).max().unwrap_or(6);
    let state_w = app.slots.iter().map(|s| width(s.view.state_word())).max().unwrap_or(0);
    let c = columns_for(total, longest, state_w);
    let (shown_names, prefix) = display_names(&names, c.name, g.ascii);
    // Without the shared prefix the names may need less room: give it to the other columns.
    let c = columns_for(total, shown_names.iter().map(|n| width(n)).max().unwrap_or(6), state_w);
    frame.render_widget(
        Paragraph::new(title(app, prefix.as_deref(), total)),
        clamp(Rect::new(area.x, area.y, area.width, 1), area),
    );
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
            let line = row(app, &slot.view, &shown_names[i], slot.acknowledged(), &c);
            if pos == app.selected { line.style(theme.selected()) } else { line }
        })
        .collect();
    let table = Rect::new(area.x, area.y + OVERVIEW_TABLE_TOP, area.width, rows as u16);
    frame.render_widget(Paragraph::new(lines), clamp(table, area));

    let ud = if g.ascii { "up/down" } else { "↑↓" };
    let mouse = if app.mouse { "mouse on" } else { "mouse off" };
    let keys = [
        ("q", "quit"),
        ("?", "help"),
        (ud, "select"),
        ("Enter", "open"),
        ("a", "ack"),
        ("m", mouse),
        ("p", "pause"),
    ];
    let bar = clamp(Rect::new(area.x, area.bottom().saturating_sub(1), area.width, 1), area);
    frame.render_widget(Paragraph::new(key_bar(theme, &keys, total)), bar);
}

/// `settle · 24 runs · 2 diverging · … · 1 waiting`, counting exactly the words the rows
/// show, then the shared name prefix when the rows leave it out.
fn title<'a>(app: &'a App, prefix: Option<&str>, cells: usize) -> Line<'a> {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let mut spans = vec![
        span(" settle", theme.title()),
        Span::raw(format!("{}{} runs", g.sep, app.slots.len())),
    ];
    let mut by_rank: Vec<Verdict> = Verdict::ALL.to_vec();
    by_rank.sort_by_key(|v| attention_rank(*v));
    for v in by_rank {
        let n =
            app.slots.iter().filter(|s| s.view.no_verdict.is_none() && s.view.verdict == v).count();
        if n > 0 {
            spans.push(Span::raw(g.sep));
            spans.push(span(format!("{n} {}", v.as_str()), theme.verdict_text(v)));
        }
    }
    // Runs without a verdict, by their state word, in the order first seen.
    let mut states: Vec<(&str, bool, usize)> = Vec::new();
    for s in &app.slots {
        if let Some(nv) = &s.view.no_verdict {
            match states.iter_mut().find(|(w, _, _)| *w == nv.word) {
                Some(e) => e.2 += 1,
                None => states.push((nv.word, nv.alarm, 1)),
            }
        }
    }
    states.sort_by_key(|(_, alarm, _)| !alarm);
    for (word, alarm, n) in states {
        spans.push(Span::raw(g.sep));
        let style = if alarm { theme.verdict_text(Verdict::Stale) } else { theme.dim() };
        spans.push(span(format!("{n} {word}"), style));
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
    if let Some(p) = prefix {
        // The shared prefix in what is left of the line, cut in its middle if need be.
        let ell = if g.ascii { "~" } else { "…" };
        let used: usize = spans.iter().map(Span::width).sum::<usize>() + width(g.sep) + 7 + 1;
        let room = cells.saturating_sub(used);
        if room >= 6 {
            spans.push(Span::raw(g.sep));
            spans.push(span(format!("names: {}{ell}", fit_middle(p, room)), theme.dim()));
        }
    }
    Line::from(spans)
}

fn row<'a>(app: &'a App, v: &'a RunView, name: &str, acked: bool, c: &Columns) -> Line<'a> {
    let theme = &app.theme;
    let g = &theme.glyphs;
    let ack = if acked { if g.ascii { "a" } else { "✔" } } else { " " };
    let it = v.iteration.map_or_else(|| "-".into(), format::iteration);
    let state_style = match &v.no_verdict {
        Some(n) if n.alarm => theme.verdict_text(Verdict::Stale),
        Some(_) => theme.dim(),
        None => theme.verdict_text(v.verdict),
    };
    let mut s = vec![
        Span::raw(ack),
        Span::raw(" "),
        span(pad(name, c.name), Style::new()),
        Span::raw(" "),
        span(pad(v.state_word(), c.verdict), state_style),
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
    let worst = match (v.progress.first(), &v.worst) {
        (Some(p), _) if p.total > 0 => {
            format!("reading {:.0} %", p.read as f64 * 100.0 / p.total as f64)
        }
        (_, Some(w)) => worst_text(w, c.worst),
        (_, None) if v.all_met => format!("all {} met", v.criteria.len()),
        _ => "-".into(),
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

    #[test]
    fn shared_prefixes_end_at_a_separator() {
        let names = ["real/case3c_step_rebound_a04", "real/case3c_step_rebound_a06"];
        assert_eq!(shared_prefix(&names), "real/case3c_step_rebound_");
        assert_eq!(shared_prefix(&["aoa-02", "aoa-16"]), "aoa-");
        assert_eq!(shared_prefix(&["wing", "winglet"]), "");
        assert_eq!(shared_prefix(&["only-one"]), "");
        let (shown, prefix) = display_names(&names, 10, false);
        assert_eq!(prefix.as_deref(), Some("real/case3c_step_rebound_"));
        assert_eq!(shown, ["…a04", "…a06"]);
        let (shown, prefix) = display_names(&names, 40, false);
        assert_eq!((shown[0].as_str(), prefix), (names[0], None));
    }

    #[test]
    fn the_worst_column_never_cuts_numbers_first() {
        let w = Worst {
            series: "forces.csv:drag".into(),
            name: "drift".into(),
            numbers: "0.35/0.1 %".into(),
        };
        assert_eq!(worst_text(&w, 40), "forces.csv:drag drift 0.35/0.1 %");
        assert_eq!(worst_text(&w, 24), "forces~ drift 0.35/0.1 %");
        assert!(worst_text(&w, 15).ends_with(" 0.35/0.1 %"));
        assert_eq!(worst_text(&w, 10), "0.35/0.1 %");
    }
}
