//! Owning the real terminal: raw mode, alternate screen, and giving both back on every way
//! out.
//!
//! * quit, Ctrl-C (a key in raw mode), a signal (SIGTERM, SIGHUP, SIGINT, SIGQUIT through a
//!   `signal_hook` iterator thread), a worker panic, the loss of the tty: the main loop
//!   returns and [`restore`] runs before the exit code is returned;
//! * a panic on the UI thread: the chained panic hook restores first, then calls the
//!   previous hook so the message is readable;
//! * a panic on any other thread while the panels are up: the hook forwards it to the main
//!   loop as [`Msg::WorkerPanic`] (printing it onto the alternate screen would lose it);
//! * a second signal while the first is being handled: the signal thread restores what it
//!   can without taking the stdout lock and exits at once with 128 + signal.
//!
//! Only the fullscreen alternate screen is used: an inline viewport queries the cursor
//! position, which times out under multiplexers and slow links. Mouse capture is off unless
//! asked for, since it blocks the terminal's own text selection.

use std::io::{self, Stdout, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, Sender};
use std::sync::{Arc, Mutex, Once};
use std::thread::{self, JoinHandle, ThreadId};
use std::time::Duration;

use crossterm::event::{self, DisableMouseCapture, EnableMouseCapture};
use crossterm::terminal::{self, EnterAlternateScreen, LeaveAlternateScreen};
use crossterm::{cursor, execute};
use ratatui::Terminal;
use ratatui::backend::CrosstermBackend;
use signal_hook::consts::{SIGHUP, SIGINT, SIGQUIT, SIGTERM, SIGTSTP};
use signal_hook::iterator::Signals;

use super::app::App;
use super::live::{self, Surface};
use super::{EXIT_TTY_LOST, LiveHooks, Msg, render};

/// The terminal is in raw mode on the alternate screen.
static ACTIVE: AtomicBool = AtomicBool::new(false);
/// The thread that draws; panics elsewhere are forwarded to it.
static UI_THREAD: Mutex<Option<ThreadId>> = Mutex::new(None);
/// Where the panic hook forwards worker panics.
static PANIC_TX: Mutex<Option<Sender<Msg>>> = Mutex::new(None);
static HOOK: Once = Once::new();

/// How often the input thread looks at its stop flag.
const INPUT_POLL: Duration = Duration::from_millis(250);

/// Bytes that undo everything [`enter`] may have turned on: mouse modes, alternate screen,
/// hidden cursor. Written directly by the emergency path.
const RESET_SEQUENCE: &[u8] =
    b"\x1b[?1000l\x1b[?1002l\x1b[?1003l\x1b[?1006l\x1b[?1015l\x1b[?1049l\x1b[?25h";

/// Raw mode, alternate screen, hidden cursor, and mouse capture when `mouse`.
pub fn enter(mouse: bool) -> io::Result<()> {
    terminal::enable_raw_mode()?;
    ACTIVE.store(true, Ordering::SeqCst);
    let mut out = io::stdout();
    let r = execute!(out, EnterAlternateScreen, cursor::Hide)
        .and_then(|()| if mouse { execute!(out, EnableMouseCapture) } else { Ok(()) });
    if let Err(e) = r {
        restore();
        return Err(e);
    }
    Ok(())
}

/// Give the terminal back (idempotent; errors are ignored since this runs on the way out).
pub fn restore() {
    if ACTIVE.swap(false, Ordering::SeqCst) {
        let mut out = io::stdout();
        let _ = execute!(out, DisableMouseCapture, LeaveAlternateScreen, cursor::Show);
        let _ = out.flush();
        let _ = terminal::disable_raw_mode();
    }
}

/// Restore without the stdout lock (the UI thread may hold it, blocked on a stalled link),
/// then exit at once.
fn emergency_exit(code: i32) -> ! {
    if ACTIVE.swap(false, Ordering::SeqCst) {
        if let Ok(mut tty) = std::fs::OpenOptions::new().write(true).open("/dev/tty") {
            let _ = tty.write_all(RESET_SEQUENCE);
        }
        let _ = terminal::disable_raw_mode();
    }
    std::process::exit(code)
}

/// Install (once per process) the panic hook that restores the terminal before the previous
/// hook prints, and forwards panics of other threads to the UI thread while it runs.
fn install_panic_hook() {
    HOOK.call_once(|| {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            let me = thread::current();
            let on_ui = UI_THREAD.lock().map_or(true, |t| t.is_none_or(|id| id == me.id()));
            if !on_ui && ACTIVE.load(Ordering::SeqCst) {
                let tx = PANIC_TX.lock().ok().and_then(|t| t.clone());
                if let Some(tx) = tx {
                    let what = info
                        .payload()
                        .downcast_ref::<&str>()
                        .map(|s| s.to_string())
                        .or_else(|| info.payload().downcast_ref::<String>().cloned())
                        .unwrap_or_else(|| "panic".into());
                    let place = info
                        .location()
                        .map(|l| format!(" at {}:{}", l.file(), l.line()))
                        .unwrap_or_default();
                    let text = format!(
                        "internal error: thread '{}' panicked{place}: {what}",
                        me.name().unwrap_or("unnamed")
                    );
                    if tx.send(Msg::WorkerPanic(text)).is_ok() {
                        return;
                    }
                }
            }
            restore();
            previous(info);
        }));
    });
}

/// The real terminal as a [`Surface`].
struct CrosstermSurface {
    term: Terminal<CrosstermBackend<Stdout>>,
    mouse: bool,
}

impl Surface for CrosstermSurface {
    fn draw(&mut self, app: &App) -> io::Result<()> {
        self.term.draw(|f| render(app, f)).map(|_| ())
    }

    fn size(&self) -> io::Result<(u16, u16)> {
        self.term.size().map(|s| (s.width, s.height))
    }

    fn set_mouse_capture(&mut self, on: bool) -> io::Result<()> {
        self.mouse = on;
        let mut out = io::stdout();
        if on { execute!(out, EnableMouseCapture) } else { execute!(out, DisableMouseCapture) }
    }

    fn repaint(&mut self) -> io::Result<()> {
        self.term.clear()
    }

    fn suspend(&mut self) -> io::Result<()> {
        restore();
        signal_hook::low_level::raise(SIGTSTP)?;
        // Continued (fg): take the terminal again and repaint everything.
        enter(self.mouse)?;
        self.term.autoresize()?;
        self.term.clear()
    }
}

/// Threads started for the panels, stopped on the way out.
struct Helpers {
    stop: Arc<AtomicBool>,
    signals: signal_hook::iterator::Handle,
    input: Option<JoinHandle<()>>,
    signal_thread: Option<JoinHandle<()>>,
}

impl Helpers {
    fn start(tx: &Sender<Msg>) -> io::Result<Helpers> {
        let mut signals = Signals::new([SIGTERM, SIGHUP, SIGINT, SIGQUIT])?;
        let handle = signals.handle();
        let stx = tx.clone();
        let signal_thread =
            thread::Builder::new().name("settle-signals".into()).spawn(move || {
                let mut seen = 0;
                for sig in signals.forever() {
                    seen += 1;
                    if seen > 1 || stx.send(Msg::Signal(sig)).is_err() {
                        emergency_exit(128 + sig);
                    }
                }
            })?;
        let stop = Arc::new(AtomicBool::new(false));
        let flag = Arc::clone(&stop);
        let itx = tx.clone();
        let input = thread::Builder::new().name("settle-input".into()).spawn(move || {
            while !flag.load(Ordering::SeqCst) {
                match event::poll(INPUT_POLL) {
                    Ok(true) => match event::read() {
                        Ok(ev) => {
                            if itx.send(Msg::Input(ev)).is_err() {
                                return;
                            }
                        }
                        Err(_) => {
                            let _ = itx.send(Msg::InputClosed);
                            return;
                        }
                    },
                    Ok(false) => {}
                    Err(_) => {
                        let _ = itx.send(Msg::InputClosed);
                        return;
                    }
                }
            }
        });
        let input = match input {
            Ok(h) => h,
            Err(e) => {
                handle.close();
                return Err(e);
            }
        };
        Ok(Helpers {
            stop,
            signals: handle,
            input: Some(input),
            signal_thread: Some(signal_thread),
        })
    }

    fn stop(mut self) {
        self.stop.store(true, Ordering::SeqCst);
        self.signals.close();
        if let Some(h) = self.signal_thread.take() {
            let _ = h.join();
        }
        if let Some(h) = self.input.take() {
            let _ = h.join();
        }
    }
}

/// Set up the terminal and helper threads, run the loop, restore, report.
pub fn run_in_terminal(
    app: &mut App,
    rx: Receiver<Msg>,
    tx: Sender<Msg>,
    hooks: &mut dyn LiveHooks,
) -> io::Result<i32> {
    install_panic_hook();
    if let Ok(mut t) = UI_THREAD.lock() {
        *t = Some(thread::current().id());
    }
    if let Ok(mut t) = PANIC_TX.lock() {
        *t = Some(tx.clone());
    }
    let result = run_guarded(app, &rx, &tx, hooks);
    restore();
    if let Ok(mut t) = PANIC_TX.lock() {
        *t = None;
    }
    if let Ok(mut t) = UI_THREAD.lock() {
        *t = None;
    }
    match result {
        Ok(end) => {
            if let Some(m) = end.message {
                let _ = writeln!(io::stderr(), "settle: {m}");
            }
            Ok(end.code)
        }
        Err(e) if live::terminal_gone(&e) => Ok(EXIT_TTY_LOST),
        Err(e) => Err(e),
    }
}

fn run_guarded(
    app: &mut App,
    rx: &Receiver<Msg>,
    tx: &Sender<Msg>,
    hooks: &mut dyn LiveHooks,
) -> io::Result<live::LoopEnd> {
    enter(app.mouse_capture())?;
    let term = Terminal::new(CrosstermBackend::new(io::stdout()))?;
    let helpers = Helpers::start(tx)?;
    let mut surface = CrosstermSurface { term, mouse: app.mouse_capture() };
    let end = live::run_loop(&mut surface, app, rx, hooks);
    restore();
    helpers.stop();
    end
}
