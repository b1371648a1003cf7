//! Pure drawing of the live panels: `render(&App, &mut Frame)`.
//!
//! No I/O, no statistics, no mutation: everything drawn was computed by the app layer when
//! data or settings changed (see [`crate::tui::view`]). Every rectangle is clamped to the
//! frame; below 20×5 only a "too small" note is drawn, since widgets misbehave in tiny areas.
//! The page layouts live in [`super::run_page`] and [`super::overview`], their geometry in
//! [`super::geometry`]; this module holds the dispatch, the help overlay and the panel and
//! key-bar helpers the pages share.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Clear, Paragraph};

use super::app::{App, Screen};
use super::geometry::{MIN_HEIGHT, MIN_WIDTH};
use super::text::{fit, width};
use super::theme::Theme;
use super::{overview, run_page};

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
    let mouse = if app.mouse {
        "mouse capture: now on (Shift+drag still selects)"
    } else {
        "mouse capture: now off (terminal selection works)"
    };
    let rows: Vec<(String, &str)> = vec![
        ("q".into(), "quit (Ctrl-C too)"),
        ("?".into(), "show or hide this help"),
        ("Enter".into(), "open the selected run (overview)"),
        ("Esc b Bksp".into(), "back to the overview"),
        (format!("Tab {lr}"), "focus the next/previous series: residuals, then monitors"),
        ("y".into(), "the whole why, when it did not fit"),
        (ud.into(), "select a run / scroll findings"),
        ("PgUp PgDn g".into(), "page up / down, top"),
        ("w".into(), "chart window: all, 4x criteria window, window"),
        ("l".into(), "monitor chart linear / log10"),
        ("p".into(), "pause the view (data is still read and judged)"),
        ("a".into(), "acknowledge the current verdict (again: undo)"),
        ("m".into(), mouse),
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
    let w = (area.width.saturating_sub(4)).min(72);
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

pub use super::geometry::clamp;

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
