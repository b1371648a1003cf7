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
//!   can without taking the stdout lock and exits at once with 128 + signal;
//! * a main loop that does not wind down in time (stuck in work, or blocked writing to a
//!   stalled link): after a termination signal or the loss of the tty an exit deadline
//!   ([`EXIT_DEADLINE`]) ends the process anyway, so SIGTERM always ends it within a second.
//!
//! The lost terminal. When the terminal goes away (window closed, `tmux kill-server`, SSH
//! connection dropped) the tty reports a hangup and every read returns EOF or EIO at once.
//! crossterm's reader retries such reads forever, so the input thread never hands it a dead
//! descriptor: it waits for readiness on its own epoll registration of the tty (`mio`), stops
//! at a hangup or error, and calls crossterm only with zero timeouts after data arrived. A
//! second watcher thread does nothing but wait for that hangup, so even a hangup that lands
//! inside a crossterm read ends the process (exit code [`EXIT_TTY_LOST`], 129 as for
//! SIGHUP). Resizes come through the signal thread (SIGWINCH), not through crossterm's own
//! wait.
//!
//! Only the fullscreen alternate screen is used: an inline viewport queries the cursor
//! position, which times out under multiplexers and slow links. Mouse capture is off unless
//! asked for, since it blocks the terminal's own text selection.

use std::fs::{File, OpenOptions};
use std::io::{self, IsTerminal, Stdout, Write};
use std::os::fd::{AsRawFd, RawFd};
use std::os::unix::fs::OpenOptionsExt;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, Sender};
use std::sync::{Arc, Mutex, Once};
use std::thread::{self, ThreadId};
use std::time::Duration;

use crossterm::event::{self, DisableMouseCapture, EnableMouseCapture, Event};
use crossterm::terminal::{self, EnterAlternateScreen, LeaveAlternateScreen};
use crossterm::{cursor, execute};
use mio::unix::SourceFd;
use mio::{Events, Interest, Poll, Token};
use ratatui::Terminal;
use ratatui::backend::CrosstermBackend;
use signal_hook::consts::{SIGHUP, SIGINT, SIGQUIT, SIGTERM, SIGTSTP, SIGWINCH};
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
/// The exit deadline is running.
static DEADLINE_ARMED: AtomicBool = AtomicBool::new(false);

/// How often the input threads look at their stop flag.
const INPUT_POLL: Duration = Duration::from_millis(250);
/// Longest time between a termination signal (or the loss of the tty) and the end of the
/// process, whatever the main loop is doing.
pub const EXIT_DEADLINE: Duration = Duration::from_millis(900);

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
/// then exit at once. Nothing here can block: the reset bytes go through a non-blocking
/// descriptor of its own (a full output buffer drops them), and the tty mode is set without
/// waiting for output to drain.
fn emergency_exit(code: i32) -> ! {
    if ACTIVE.swap(false, Ordering::SeqCst) {
        let open = |p: &str| {
            OpenOptions::new()
                .write(true)
                .custom_flags(libc::O_NONBLOCK | libc::O_NOCTTY)
                .open(p)
                .ok()
        };
        // `/proc/self/fd/1` opens stdout's tty anew, for a process without a controlling tty.
        let tty = open("/dev/tty")
            .or_else(|| io::stdout().is_terminal().then(|| open("/proc/self/fd/1")).flatten());
        if let Some(mut tty) = tty {
            let _ = tty.write_all(RESET_SEQUENCE);
        }
        let _ = terminal::disable_raw_mode();
    }
    std::process::exit(code)
}

/// Make sure the process ends within [`EXIT_DEADLINE`] with `code`, whatever the main loop
/// is doing (stuck in work, or blocked writing to a stalled link). The first call arms the
/// deadline; later calls change nothing. The normal way out is faster and wins.
pub fn arm_exit_deadline(code: i32) {
    if DEADLINE_ARMED.swap(true, Ordering::SeqCst) {
        return;
    }
    let spawned = thread::Builder::new().name("settle-deadline".into()).spawn(move || {
        thread::sleep(EXIT_DEADLINE);
        emergency_exit(code);
    });
    if spawned.is_err() {
        DEADLINE_ARMED.store(false, Ordering::SeqCst);
    }
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

/// The tty the keys come from, as crossterm reads it: stdin when it is a terminal, else
/// `/dev/tty` (opened here, so the descriptor lives as long as the watch).
struct TtyIn {
    _opened: Option<File>,
    fd: RawFd,
}

impl TtyIn {
    fn open() -> io::Result<TtyIn> {
        let stdin = io::stdin();
        if stdin.is_terminal() {
            return Ok(TtyIn { _opened: None, fd: stdin.as_raw_fd() });
        }
        let f = OpenOptions::new().read(true).open("/dev/tty")?;
        Ok(TtyIn { fd: f.as_raw_fd(), _opened: Some(f) })
    }
}

/// What a wait on the tty saw.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum TtyState {
    /// Bytes arrived.
    Data,
    /// Hangup or error: the terminal is gone; reads would return EOF or EIO forever.
    Gone,
    /// Nothing within the timeout.
    Quiet,
}

/// An epoll registration of the tty of our own, independent of crossterm's.
struct TtyWatch {
    poll: Poll,
    events: Events,
    _tty: TtyIn,
}

impl TtyWatch {
    fn new() -> io::Result<TtyWatch> {
        let tty = TtyIn::open()?;
        let poll = Poll::new()?;
        poll.registry().register(&mut SourceFd(&tty.fd), Token(0), Interest::READABLE)?;
        Ok(TtyWatch { poll, events: Events::with_capacity(4), _tty: tty })
    }

    /// Block up to `timeout` for bytes or a hangup (edge-triggered: each arrival of bytes is
    /// reported once; a hangup is reported even if it happened before registration).
    fn wait(&mut self, timeout: Duration) -> io::Result<TtyState> {
        match self.poll.poll(&mut self.events, Some(timeout)) {
            Err(e) if e.kind() == io::ErrorKind::Interrupted => return Ok(TtyState::Quiet),
            Err(e) => return Err(e),
            Ok(()) => {}
        }
        let mut state = TtyState::Quiet;
        for ev in self.events.iter() {
            if ev.is_read_closed() || ev.is_error() {
                return Ok(TtyState::Gone);
            }
            if ev.is_readable() {
                state = TtyState::Data;
            }
        }
        Ok(state)
    }
}

/// The tty is gone: tell the main loop, and make sure the process ends even if it cannot
/// listen.
fn tty_gone(tx: &Sender<Msg>) {
    let _ = tx.send(Msg::InputClosed);
    arm_exit_deadline(EXIT_TTY_LOST);
}

/// The input thread: wait on the tty, hand crossterm only what has arrived (zero-timeout
/// calls), stop at a hangup. Never calls into crossterm on a dead descriptor.
fn input_loop(tx: &Sender<Msg>, stop: &AtomicBool) {
    let mut watch = match TtyWatch::new() {
        Ok(w) => w,
        Err(_) => return tty_gone(tx),
    };
    while !stop.load(Ordering::SeqCst) {
        match watch.wait(INPUT_POLL) {
            Ok(TtyState::Quiet) => {}
            Ok(TtyState::Gone) | Err(_) => return tty_gone(tx),
            Ok(TtyState::Data) => loop {
                match event::poll(Duration::ZERO) {
                    Ok(true) => match event::read() {
                        Ok(ev) => {
                            if tx.send(Msg::Input(ev)).is_err() {
                                return;
                            }
                        }
                        Err(_) => return tty_gone(tx),
                    },
                    Ok(false) => break,
                    Err(_) => return tty_gone(tx),
                }
            },
        }
    }
}

/// The hangup watcher: a second registration of the tty that only looks for the hangup, so
/// a hangup landing while the input thread is inside a crossterm read (which would then
/// retry forever) still ends the process.
fn hangup_loop(tx: &Sender<Msg>, stop: &AtomicBool) {
    let Ok(mut watch) = TtyWatch::new() else {
        return;
    };
    while !stop.load(Ordering::SeqCst) {
        if matches!(watch.wait(INPUT_POLL), Ok(TtyState::Gone) | Err(_)) {
            return tty_gone(tx);
        }
    }
}

/// The signal thread: termination signals become [`Msg::Signal`] and arm the exit deadline;
/// a second one exits at once; SIGWINCH
/// becomes a resize event. It lives as long as the process, so a signal during the last
/// steps after the panels closed still ends the process. A repeated SIGHUP is not a second
/// request: the kernel sends one at the hangup and another when the session leader exits.
fn signal_loop(mut signals: Signals, tx: &Sender<Msg>) {
    let mut seen = 0;
    let mut hangups = 0;
    for sig in signals.forever() {
        if sig == SIGWINCH {
            if let Ok((w, h)) = terminal::size() {
                let _ = tx.send(Msg::Input(Event::Resize(w, h)));
            }
            continue;
        }
        if sig == SIGHUP {
            hangups += 1;
            if hangups > 1 {
                continue;
            }
        }
        seen += 1;
        if seen > 1 {
            emergency_exit(128 + sig);
        }
        // Sent or not (the panels may have closed already), the process ends in time.
        let _ = tx.send(Msg::Signal(sig));
        arm_exit_deadline(128 + sig);
    }
}

/// Threads started for the panels; the input threads stop on the way out.
struct Helpers {
    stop: Arc<AtomicBool>,
}

impl Helpers {
    fn start(tx: &Sender<Msg>) -> io::Result<Helpers> {
        let signals = Signals::new([SIGTERM, SIGHUP, SIGINT, SIGQUIT, SIGWINCH])?;
        let handle = signals.handle();
        let stx = tx.clone();
        thread::Builder::new()
            .name("settle-signals".into())
            .spawn(move || signal_loop(signals, &stx))?;
        let stop = Arc::new(AtomicBool::new(false));
        let spawn = |name: &str, f: fn(&Sender<Msg>, &AtomicBool)| {
            let (flag, itx) = (Arc::clone(&stop), tx.clone());
            thread::Builder::new().name(name.into()).spawn(move || f(&itx, &flag))
        };
        let started =
            spawn("settle-input", input_loop).and_then(|_| spawn("settle-hangup", hangup_loop));
        if let Err(e) = started {
            stop.store(true, Ordering::SeqCst);
            handle.close();
            return Err(e);
        }
        Ok(Helpers { stop })
    }

    /// Ask the input threads to stop. They are not joined: each ends within
    /// [`INPUT_POLL`], and waiting for a thread is never worth a hang on the way out.
    fn stop(self) {
        self.stop.store(true, Ordering::SeqCst);
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
    // Dropping a ratatui terminal shows the cursor and prints to stderr when that fails,
    // which panics on a tty that is gone; the terminal was restored already.
    if surface.term.show_cursor().is_err() {
        std::mem::forget(surface);
    }
    end
}
