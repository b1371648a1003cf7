//! Pure drawing of the live panels: `render(&App, &mut Frame)`.
//!
//! No I/O, no statistics, no mutation: everything drawn was computed by the app layer when
//! data or settings changed (see [`crate::tui::view`]). Every rectangle is clamped to the
//! frame; below 20×5 only a "too small" note is drawn, since widgets misbehave in tiny areas.
//! The page layouts live in [`super::run_page`] and [`super::overview`]; this module holds
//! the dispatch, the help overlay and the small text helpers they share.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Clear, Paragraph};

use super::app::{App, Screen};
use super::theme::Theme;
use super::{overview, run_page};

/// Smallest frame that gets real panels.
pub const MIN_WIDTH: u16 = 20;
pub const MIN_HEIGHT: u16 = 5;
/// Screen row of the first overview table row (below the title and the column header).
pub const OVERVIEW_TABLE_TOP: u16 = 2;

/// Draw `app` into `frame`.
pub fn render(app: &App, frame: &mut Frame) {
    let area = frame.area();
    if area.width < MIN_WIDTH || area.height < MIN_HEIGHT {
        too_small(frame, area);
        return;
    }
    match app.screen {
        Screen::Overview => overview::render(app, frame, area),
        Screen::Run(i) => run_page::render(app, i, frame, area),
    }
    if app.help {
        help(app, frame, area);
    }
}

/// Table rows visible on the overview at terminal height `height`.
pub fn overview_rows(height: u16) -> usize {
    height.saturating_sub(OVERVIEW_TABLE_TOP + 1) as usize
}

/// Columns of the residual chart's plot area at terminal size `size` (for bucketing).
pub fn chart_columns(size: (u16, u16)) -> usize {
    let area = Rect::new(0, 0, size.0, size.1);
    run_page::layout(area, 0, true, 4).residual.width.saturating_sub(2 + run_page::Y_GUTTER)
        as usize
}

fn too_small(frame: &mut Frame, area: Rect) {
    if area.width == 0 || area.height == 0 {
        return;
    }
    let msg = if area.width >= 18 { "terminal too small" } else { "too small" };
    let text = fit(msg, area.width as usize);
    frame.render_widget(Paragraph::new(text), area);
}

fn help(app: &App, frame: &mut Frame, area: Rect) {
    let g = &app.theme.glyphs;
    let (lr, ud) = if g.ascii { ("<- ->", "up/down") } else { ("← →", "↑ ↓") };
    let rows: Vec<(String, &str)> = vec![
        ("q".into(), "quit (Ctrl-C too)"),
        ("?".into(), "show or hide this help"),
        ("Enter".into(), "open the selected run (overview)"),
        ("Esc b Bksp".into(), "back to the overview"),
        (format!("Tab {lr}"), "focus the next/previous series"),
        (ud.into(), "select a run / scroll findings"),
        ("PgUp PgDn g".into(), "page up / down, top"),
        ("w".into(), "chart window: all, 4x criteria window, window"),
        ("l".into(), "monitor chart linear / log10"),
        ("p".into(), "pause the view (data is still read and judged)"),
        ("a".into(), "acknowledge the current verdict (again: undo)"),
        ("m".into(), "mouse capture on/off (off keeps terminal selection)"),
        ("Ctrl-L".into(), "repaint the screen"),
        ("Ctrl-Z".into(), "suspend to the shell"),
    ];
    let legend = format!(
        "{} met  {} not met  {} caused the verdict  {} acknowledged",
        g.ok, g.fail, g.cause, g.ack
    );
    let mut lines: Vec<Line<'_>> = rows
        .iter()
        .map(|(k, d)| {
            Line::from(vec![Span::styled(format!(" {k:<12}"), app.theme.key()), Span::raw(*d)])
        })
        .collect();
    lines.push(Line::raw(""));
    lines.push(Line::raw(format!(" {legend}")));
    let w = (area.width.saturating_sub(4)).min(66);
    let h = (lines.len() as u16 + 2).min(area.height);
    let x = area.x + (area.width - w) / 2;
    let y = area.y + (area.height - h) / 2;
    let r = clamp(Rect::new(x, y, w, h), area);
    frame.render_widget(Clear, r);
    frame.render_widget(Paragraph::new(lines).block(panel(&app.theme, " keys ")), r);
}

/// A bordered panel with a title, in the theme's border set.
pub fn panel<'a>(theme: &Theme, title: impl Into<Line<'a>>) -> Block<'a> {
    Block::bordered()
        .border_set(theme.glyphs.border)
        .border_style(theme.border())
        .title(title)
        .title_style(theme.title())
}

/// `r` limited to `area`.
pub fn clamp(r: Rect, area: Rect) -> Rect {
    let i = r.intersection(area);
    if i.width == 0 || i.height == 0 { Rect::new(area.x, area.y, 0, 0) } else { i }
}

/// Display width of `s` in terminal cells.
pub fn width(s: &str) -> usize {
    Span::raw(s).width()
}

fn char_width(c: char) -> usize {
    let mut b = [0u8; 4];
    Span::raw(&*c.encode_utf8(&mut b)).width()
}

/// `s` cut to at most `max` cells, ending in `~`/`…` when cut.
pub fn fit(s: &str, max: usize) -> String {
    if width(s) <= max {
        return s.to_string();
    }
    if max == 0 {
        return String::new();
    }
    let ell = if s.is_ascii() { "~" } else { "…" };
    let mut out = String::new();
    let mut w = 0;
    for c in s.chars() {
        let cw = char_width(c);
        if w + cw > max - 1 {
            break;
        }
        out.push(c);
        w += cw;
    }
    out.push_str(ell);
    out
}

/// `s` fitted and padded with spaces to exactly `cells` cells (left-aligned).
pub fn pad(s: &str, cells: usize) -> String {
    let f = fit(s, cells);
    let w = width(&f);
    format!("{f}{}", " ".repeat(cells.saturating_sub(w)))
}

/// `s` fitted and padded on the left to exactly `cells` cells (right-aligned).
pub fn pad_left(s: &str, cells: usize) -> String {
    let f = fit(s, cells);
    let w = width(&f);
    format!("{}{f}", " ".repeat(cells.saturating_sub(w)))
}

/// A key bar from `(key, action)` pairs, dropping whole entries that do not fit.
pub fn key_bar<'a>(theme: &Theme, keys: &[(&'a str, &'a str)], cells: usize) -> Line<'a> {
    let mut spans = Vec::new();
    let mut used = 0;
    for (k, a) in keys {
        let w = width(k) + width(a) + 3;
        if used + w > cells {
            break;
        }
        spans.push(Span::raw(" "));
        spans.push(Span::styled(*k, theme.key()));
        spans.push(Span::raw(format!(" {a} ")));
        used += w;
    }
    Line::from(spans)
}

/// A span of `text` in `style`.
pub fn span<'a>(text: impl Into<std::borrow::Cow<'a, str>>, style: Style) -> Span<'a> {
    Span::styled(text, style)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fit_and_pad_respect_cell_widths() {
        assert_eq!(fit("residual", 5), "resi~");
        assert_eq!(fit("Δp long", 4), "Δp …");
        assert_eq!(fit("ab", 2), "ab");
        assert_eq!(pad("ab", 4), "ab  ");
        assert_eq!(pad_left("ab", 4), "  ab");
        assert_eq!(pad("abcdef", 3), "ab~");
    }

    #[test]
    fn clamp_stays_inside() {
        let a = Rect::new(0, 0, 10, 5);
        assert_eq!(clamp(Rect::new(8, 3, 10, 10), a), Rect::new(8, 3, 2, 2));
        assert_eq!(clamp(Rect::new(20, 20, 3, 3), a).area(), 0);
    }
}
