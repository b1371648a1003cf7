//! The main loop of `settle watch`: one thread, blocking on one channel.
//!
//! It blocks in `recv_timeout` until a message arrives or the earliest deadline passes
//! (a due refresh of runs with new data, a run turning stale, an age label changing, the
//! next frame allowed by the 10 Hz cap), so an idle watcher costs no CPU. Queued messages
//! are drained before drawing, so a resize storm or a burst of batches costs one frame.
//! The loop is generic over a [`Surface`], so tests drive it with ratatui's `TestBackend`.

use std::io;
use std::sync::mpsc::{Receiver, RecvTimeoutError};
use std::time::{Duration, Instant, SystemTime};

use super::app::{App, KeyOutcome};
use super::{EXIT_PANIC, EXIT_TTY_LOST, LiveHooks, Msg};

/// Shortest time between two frames (at most 10 redraws a second, for SSH links).
pub const FRAME_INTERVAL: Duration = Duration::from_millis(100);
/// Longest time spent applying queued messages before drawing a frame.
const DRAIN_BUDGET: Duration = Duration::from_millis(50);
/// Upper bound of a wait when nothing is due (the wait ends earlier on any message).
const IDLE_WAIT: Duration = Duration::from_secs(3_600);

/// Where frames go and the terminal controls the loop needs.
pub trait Surface {
    /// Draw `app` (only changed cells are sent).
    fn draw(&mut self, app: &App) -> io::Result<()>;
    /// Current size in cells.
    fn size(&self) -> io::Result<(u16, u16)>;
    /// Turn mouse capture on or off.
    fn set_mouse_capture(&mut self, on: bool) -> io::Result<()>;
    /// Forget what is on screen so the next draw repaints everything.
    fn repaint(&mut self) -> io::Result<()>;
    /// Give the terminal back and stop the process until it is continued (Ctrl-Z), then
    /// take the terminal again.
    fn suspend(&mut self) -> io::Result<()>;
}

/// How and why the loop ended.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LoopEnd {
    pub code: i32,
    /// To be written to stderr once the terminal is restored (worker panic).
    pub message: Option<String>,
}

impl LoopEnd {
    fn code(code: i32) -> Self {
        LoopEnd { code, message: None }
    }
}

/// True for the errors that mean the terminal is gone (hangup, closed pty, broken pipe):
/// the program then exits quietly.
pub fn terminal_gone(e: &io::Error) -> bool {
    e.kind() == io::ErrorKind::BrokenPipe
        || matches!(e.raw_os_error(), Some(libc::EIO) | Some(libc::ENXIO) | Some(libc::EPIPE))
}

/// Run until quit, a signal, a worker panic or the loss of the terminal.
pub fn run_loop(
    surface: &mut dyn Surface,
    app: &mut App,
    rx: &Receiver<Msg>,
    hooks: &mut dyn LiveHooks,
) -> io::Result<LoopEnd> {
    match inner_loop(surface, app, rx, hooks) {
        Err(e) if terminal_gone(&e) => Ok(LoopEnd::code(EXIT_TTY_LOST)),
        other => other,
    }
}

fn inner_loop(
    surface: &mut dyn Surface,
    app: &mut App,
    rx: &Receiver<Msg>,
    hooks: &mut dyn LiveHooks,
) -> io::Result<LoopEnd> {
    let (w, h) = surface.size()?;
    app.resize(w, h);
    let mut mouse_on = app.mouse_capture();
    let mut last_draw: Option<Instant> = None;
    app.tick(SystemTime::now(), hooks);
    loop {
        if app.needs_draw() && last_draw.is_none_or(|d| d.elapsed() >= FRAME_INTERVAL) {
            surface.draw(app)?;
            app.drawn();
            last_draw = Some(Instant::now());
        }
        let timeout = wait_time(app, last_draw);
        let first = match rx.recv_timeout(timeout) {
            Ok(m) => Some(m),
            Err(RecvTimeoutError::Timeout) => None,
            // Every sender is gone: nothing can ever arrive again.
            Err(RecvTimeoutError::Disconnected) => return Ok(LoopEnd::code(super::EXIT_QUIT)),
        };
        let started = Instant::now();
        let mut next = first;
        while let Some(msg) = next {
            if let Some(end) = handle(surface, app, msg)? {
                return Ok(end);
            }
            if app.mouse_capture() != mouse_on {
                mouse_on = app.mouse_capture();
                surface.set_mouse_capture(mouse_on)?;
            }
            if started.elapsed() >= DRAIN_BUDGET {
                break;
            }
            next = rx.try_recv().ok();
        }
        app.tick(SystemTime::now(), hooks);
    }
}

/// How long to wait for the next message.
fn wait_time(app: &App, last_draw: Option<Instant>) -> Duration {
    let mut timeout = IDLE_WAIT;
    if let Some(t) = app.next_deadline() {
        timeout = timeout.min(t.duration_since(SystemTime::now()).unwrap_or(Duration::ZERO));
    }
    if app.needs_draw() {
        let since = last_draw.map_or(FRAME_INTERVAL, |d| d.elapsed());
        timeout = timeout.min(FRAME_INTERVAL.saturating_sub(since));
    }
    timeout
}

fn handle(surface: &mut dyn Surface, app: &mut App, msg: Msg) -> io::Result<Option<LoopEnd>> {
    match msg {
        Msg::Ingest(batch) => app.apply_batch(batch),
        Msg::Input(ev) => match app.handle_event(&ev) {
            KeyOutcome::Quit(code) => return Ok(Some(LoopEnd::code(code))),
            KeyOutcome::Suspend => {
                surface.suspend()?;
                let (w, h) = surface.size()?;
                app.resize(w, h);
            }
            KeyOutcome::Repaint => {
                surface.repaint()?;
                let (w, h) = surface.size()?;
                app.resize(w, h);
            }
            KeyOutcome::Redraw | KeyOutcome::Ignored => {}
        },
        Msg::Signal(sig) => return Ok(Some(LoopEnd::code(128 + sig))),
        Msg::InputClosed => return Ok(Some(LoopEnd::code(EXIT_TTY_LOST))),
        Msg::WorkerPanic(text) => {
            return Ok(Some(LoopEnd { code: EXIT_PANIC, message: Some(text) }));
        }
    }
    Ok(None)
}
