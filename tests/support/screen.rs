//! Screen helpers shared by the panel tests (included with `#[path]`, so each test binary
//! compiles its own copy and no extra test binary appears).

use ratatui::Terminal;
use ratatui::backend::TestBackend;
use settle::tui::{App, render};

/// The panels drawn at `w`×`h`, one string per row.
pub fn screen(app: &mut App, w: u16, h: u16) -> Vec<String> {
    app.resize(w, h);
    let mut term = Terminal::new(TestBackend::new(w, h)).expect("test backend");
    term.draw(|f| render(app, f)).expect("draw");
    let buf = term.backend().buffer().clone();
    (0..h).map(|y| (0..w).map(|x| buf[(x, y)].symbol().to_string()).collect::<String>()).collect()
}

/// Text with every run of whitespace made one space (a wrapped line read as prose).
pub fn squeeze(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}
