//! Keys and mouse events of the live panels, as changes of [`App`] state.

use crossterm::event::{
    Event, KeyCode, KeyEvent, KeyEventKind, KeyModifiers, MouseButton, MouseEvent, MouseEventKind,
};

use super::{App, KeyOutcome, Screen, Window, scroll_start};
use crate::judge::Criteria;
use crate::tui::geometry;
use crate::tui::view::DetailData;

impl App {
    /// Handle one terminal event.
    pub fn handle_event(&mut self, ev: &Event) -> KeyOutcome {
        match ev {
            Event::Key(k) => self.handle_key(k),
            Event::Mouse(m) => self.handle_mouse(m),
            Event::Resize(w, h) => {
                self.resize(*w, *h);
                KeyOutcome::Redraw
            }
            _ => KeyOutcome::Ignored,
        }
    }

    /// Handle one key (press or repeat; releases are ignored).
    pub fn handle_key(&mut self, key: &KeyEvent) -> KeyOutcome {
        if key.kind == KeyEventKind::Release {
            return KeyOutcome::Ignored;
        }
        let ctrl = key.modifiers.contains(KeyModifiers::CONTROL);
        if ctrl {
            return match key.code {
                KeyCode::Char('c') => KeyOutcome::Quit(crate::tui::EXIT_CTRL_C),
                KeyCode::Char('z') => KeyOutcome::Suspend,
                KeyCode::Char('l') => KeyOutcome::Repaint,
                _ => KeyOutcome::Ignored,
            };
        }
        if key.code == KeyCode::Char('q') {
            return KeyOutcome::Quit(crate::tui::EXIT_QUIT);
        }
        if self.help || self.why_open {
            self.help = false;
            self.why_open = false;
            return self.redraw();
        }
        match key.code {
            KeyCode::Char('?') => {
                self.help = true;
                self.redraw()
            }
            KeyCode::Char('p') => {
                self.set_paused(!self.paused);
                self.redraw()
            }
            KeyCode::Char('m') => {
                self.mouse = !self.mouse;
                self.redraw()
            }
            _ => match self.screen {
                Screen::Overview => self.overview_key(key.code),
                Screen::Run(i) => self.run_key(i, key.code),
            },
        }
    }

    fn redraw(&mut self) -> KeyOutcome {
        self.needs_draw = true;
        KeyOutcome::Redraw
    }

    fn overview_key(&mut self, code: KeyCode) -> KeyOutcome {
        let n = self.order.len();
        let page = geometry::overview_rows(self.size.1).max(1);
        let sel = self.selected;
        let new = match code {
            KeyCode::Up | KeyCode::Char('k') => sel.saturating_sub(1),
            KeyCode::Down | KeyCode::Char('j') => (sel + 1).min(n.saturating_sub(1)),
            KeyCode::PageUp => sel.saturating_sub(page),
            KeyCode::PageDown => (sel + page).min(n.saturating_sub(1)),
            KeyCode::Home | KeyCode::Char('g') => 0,
            KeyCode::End | KeyCode::Char('G') => n.saturating_sub(1),
            KeyCode::Enter | KeyCode::Right | KeyCode::Char('o') => {
                return match self.selected_run() {
                    Some(r) => self.open(r),
                    None => KeyOutcome::Ignored,
                };
            }
            KeyCode::Char('a') => {
                return match self.selected_run() {
                    Some(r) => self.toggle_ack(r),
                    None => KeyOutcome::Ignored,
                };
            }
            _ => return KeyOutcome::Ignored,
        };
        if new == sel {
            return KeyOutcome::Ignored;
        }
        self.selected = new;
        self.offset = scroll_start(new, self.offset, page);
        self.redraw()
    }

    fn run_key(&mut self, run: usize, code: KeyCode) -> KeyOutcome {
        let many = self.slots.len() > 1;
        let nseries = self.slots.get(run).map_or(0, |s| s.view.series.len());
        match code {
            KeyCode::Esc | KeyCode::Backspace | KeyCode::Char('b') if many => {
                self.screen = Screen::Overview;
                self.detail = DetailData::default();
                self.redraw()
            }
            KeyCode::Tab | KeyCode::Right => {
                self.focus = match self.focus {
                    None if nseries > 0 => Some(0),
                    Some(f) if f + 1 < nseries => Some(f + 1),
                    _ => None,
                };
                self.rebuild_detail();
                self.redraw()
            }
            KeyCode::BackTab | KeyCode::Left => {
                self.focus = match self.focus {
                    None if nseries > 0 => Some(nseries - 1),
                    Some(f) if f > 0 => Some(f - 1),
                    _ => None,
                };
                self.rebuild_detail();
                self.redraw()
            }
            KeyCode::Char('w') => {
                let w = self.slots[run].live.criteria.window.unwrap_or(Criteria::DEFAULT_WINDOW);
                self.window = match self.window {
                    Window::All => Window::Last(w * 4),
                    Window::Last(n) if n > w => Window::Last(w),
                    Window::Last(_) => Window::All,
                };
                self.rebuild_detail();
                self.redraw()
            }
            KeyCode::Char('l') => {
                self.monitor_log = !self.monitor_log;
                self.rebuild_detail();
                self.redraw()
            }
            KeyCode::Char('a') => self.toggle_ack(run),
            KeyCode::Char('y') => {
                self.why_open = true;
                self.redraw()
            }
            KeyCode::Down | KeyCode::Char('j') => self.scroll_items(run, 1),
            KeyCode::Up | KeyCode::Char('k') => self.scroll_items(run, -1),
            KeyCode::PageDown => self.scroll_items(run, 10),
            KeyCode::PageUp => self.scroll_items(run, -10),
            KeyCode::Home | KeyCode::Char('g') => self.scroll_items(run, isize::MIN / 2),
            _ => KeyOutcome::Ignored,
        }
    }

    fn scroll_items(&mut self, run: usize, by: isize) -> KeyOutcome {
        let n = self.slots.get(run).map_or(0, |s| s.view.items.len());
        let new = (self.item_scroll as isize + by).clamp(0, n.saturating_sub(1) as isize) as usize;
        if new == self.item_scroll {
            return KeyOutcome::Ignored;
        }
        self.item_scroll = new;
        self.redraw()
    }

    /// Open run `i` in its own page.
    pub fn open(&mut self, i: usize) -> KeyOutcome {
        if i >= self.slots.len() {
            return KeyOutcome::Ignored;
        }
        self.screen = Screen::Run(i);
        self.focus = None;
        self.item_scroll = 0;
        if let Some(k) = self.order.iter().position(|&x| x == i) {
            self.selected = k;
        }
        self.rebuild_detail();
        self.redraw()
    }

    fn toggle_ack(&mut self, run: usize) -> KeyOutcome {
        let slot = &mut self.slots[run];
        slot.ack = if slot.acknowledged() { None } else { Some(slot.view.verdict) };
        if !self.paused {
            self.resort();
        }
        self.redraw()
    }

    /// Freeze (or unfreeze) what the panels show; data keeps flowing into the stores and the
    /// judge and hooks keep running.
    pub fn set_paused(&mut self, paused: bool) {
        if paused == self.paused {
            return;
        }
        self.paused = paused;
        if paused {
            for s in &mut self.slots {
                s.frozen = Some(s.live.store.sources.iter().map(|src| src.records()).collect());
                s.pending = 0;
            }
        } else {
            for i in 0..self.slots.len() {
                self.slots[i].frozen = None;
                self.slots[i].pending = 0;
                self.rebuild_view(i);
            }
            self.resort();
            self.rebuild_detail();
        }
        self.needs_draw = true;
    }

    fn handle_mouse(&mut self, m: &MouseEvent) -> KeyOutcome {
        let code = match m.kind {
            MouseEventKind::ScrollDown => KeyCode::Down,
            MouseEventKind::ScrollUp => KeyCode::Up,
            MouseEventKind::Down(MouseButton::Left) if self.screen == Screen::Overview => {
                let top = geometry::OVERVIEW_TABLE_TOP;
                if m.row < top {
                    return KeyOutcome::Ignored;
                }
                let rows = geometry::overview_rows(self.size.1);
                let start = scroll_start(self.selected, self.offset, rows);
                let pos = start + (m.row - top) as usize;
                if pos >= self.order.len() || (m.row - top) as usize >= rows {
                    return KeyOutcome::Ignored;
                }
                if pos == self.selected {
                    return self.open(self.order[pos]);
                }
                self.selected = pos;
                self.offset = start;
                return self.redraw();
            }
            _ => return KeyOutcome::Ignored,
        };
        if self.help {
            return KeyOutcome::Ignored;
        }
        match self.screen {
            Screen::Overview => self.overview_key(code),
            Screen::Run(i) => self.run_key(i, code),
        }
    }
}
