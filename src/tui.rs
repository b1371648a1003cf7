//! `settle watch`: the live panels, their state and the live loop.
//!
//! Owns the terminal while watching. Data flow (DEVELOPERS.md, "Where the code lives"): the ingest thread sends
//! [`Msg::Ingest`] batches; the main thread (this module's [`run`]) applies them to the run
//! stores, re-judges a run only when it received new data (at most once per refresh
//! interval), decides `stale` itself, calls the [`LiveHooks`] the binary plugs in (actions),
//! and redraws only when something visible changed, at most 10 times a second.
//!
//! * [`app`]: the state ([`App`]), keys as intents, and the snapshots that rendering reads;
//! * [`view`]: building those snapshots (chart points, criteria rows, findings) from a run;
//! * [`mod@render`]: pure drawing of an [`App`] into a frame (no I/O, no statistics), with the
//!   pages in [`run_page`] (one run) and [`overview`] (many runs), laid out by [`geometry`]
//!   (which the state uses too, so neither imports the other) with the cell-width helpers of
//!   [`text`];
//! * [`live`]: the blocking main loop, generic over a [`live::Surface`] so it runs against
//!   ratatui's `TestBackend` in tests;
//! * [`terminal`]: raw mode, alternate screen, panic hook, signal and input threads, and
//!   restoring the terminal on every way out;
//! * [`theme`], [`mod@format`], [`sanitize`]: colours and glyphs, number formats, log text made
//!   safe for the terminal.

pub mod app;
pub mod format;
pub mod geometry;
pub mod live;
pub mod overview;
pub mod render;
pub mod run_page;
pub mod sanitize;
pub mod terminal;
pub mod text;
pub mod theme;
pub mod view;

use std::io;
use std::sync::mpsc::{Receiver, Sender};
use std::time::Duration;

use crate::judge::{Criteria, Finding, Judgement, NothingToJudge, Verdict};
use crate::run::RunStore;
use crate::run::ingest::{IngestBatch, SourceActivity};

pub use app::{App, KeyOutcome, Screen, Window};
pub use render::render;
pub use theme::ColorChoice;

/// Exit code after `q`.
pub const EXIT_QUIT: i32 = 0;
/// Exit code after Ctrl-C typed in the panels (as for SIGINT: 128 + 2).
pub const EXIT_CTRL_C: i32 = 130;
/// Exit code when a worker thread (or the UI) panicked, as Rust uses for a panic.
pub const EXIT_PANIC: i32 = 101;
/// Exit code when the terminal went away (EIO/EPIPE on the tty, input closed): the same as
/// a hangup, 128 + 1.
pub const EXIT_TTY_LOST: i32 = 129;

/// One watched run as the live loop owns it.
#[derive(Debug, Clone, Default)]
pub struct LiveRun {
    pub store: RunStore,
    /// Growth time and bulk-read progress, one per source (same order as `store.sources`).
    pub activity: Vec<SourceActivity>,
    pub criteria: Criteria,
    /// The judge's latest word (never `stale`: that is decided by the live loop).
    pub judgement: Judgement,
    /// Findings from outside the judge, such as action audit entries, oldest first.
    pub extra_findings: Vec<Finding>,
    /// Set by the live loop: the log stopped growing for longer than the stale limit and no
    /// end-of-run mark was seen.
    pub stale: bool,
    /// Why the latest judgement has nothing to judge (no value, or only `info` and ignored
    /// series); set by [`LiveRun::set_judgement`]. Then `judgement` is an empty stand-in that
    /// no view may show as a verdict.
    pub nothing: Option<NothingToJudge>,
    /// Records in the store when `judgement` was made (`None` before the first judgement);
    /// set by [`LiveRun::set_judgement`]. Actions act only on a judgement that saw every
    /// record in the store.
    pub judged_records: Option<u64>,
}

impl LiveRun {
    pub fn new(store: RunStore, criteria: Criteria) -> Self {
        let activity = vec![SourceActivity::default(); store.sources.len()];
        LiveRun { store, activity, criteria, ..Default::default() }
    }

    /// Records ingested so far (sum over the sources).
    pub fn records(&self) -> u64 {
        self.store.sources.iter().map(|s| s.records() as u64).sum()
    }

    /// Store a judgement of the data now in the store, and whether there was anything to
    /// judge in it ([`crate::judge::nothing_to_judge`], cheap: no statistics).
    pub fn set_judgement(&mut self, judgement: Judgement) {
        self.judged_records = Some(self.records());
        self.nothing = crate::judge::nothing_to_judge(&self.store.judge_input(), &self.criteria);
        self.judgement = judgement;
    }

    /// The run has records but nothing the criteria judge: it has no verdict.
    pub fn nothing_to_judge(&self) -> Option<&NothingToJudge> {
        self.nothing.as_ref()
    }

    /// The latest judgement saw every record now in the store (false before the first).
    pub fn judgement_current(&self) -> bool {
        self.judged_records == Some(self.records())
    }

    /// A source is in the middle of a large read (its first read of an existing log, or a
    /// re-read from the start): between progress marks, or holding records whose read has
    /// not finished yet (a finished read reports the growth time, a progress mark does not).
    pub fn bulk_reading(&self) -> bool {
        self.store
            .sources
            .iter()
            .zip(&self.activity)
            .any(|(s, a)| a.progress.is_some() || (s.records() > 0 && a.last_growth.is_none()))
    }

    /// The verdict to show and act on: `stale` overrides everything except `diverging`.
    pub fn verdict(&self) -> Verdict {
        effective_verdict(self.judgement.verdict, self.stale)
    }
}

/// `stale` overrides every verdict except `diverging` (README "Verdicts and exit codes").
pub fn effective_verdict(judged: Verdict, stale: bool) -> Verdict {
    if stale && judged != Verdict::Diverging { Verdict::Stale } else { judged }
}

/// Everything that reaches the main loop, over one channel.
#[derive(Debug)]
pub enum Msg {
    /// Parsed data for one source of one run (from the ingest thread).
    Ingest(IngestBatch),
    /// A terminal event (from the input thread).
    Input(crossterm::event::Event),
    /// SIGTERM, SIGHUP, SIGINT or SIGQUIT arrived (from the signal thread).
    Signal(i32),
    /// The terminal input failed (EIO: the tty went away).
    InputClosed,
    /// A worker thread panicked; the text says where and why. The panic hook installed by
    /// [`run`] sends this for any panic outside the UI thread.
    WorkerPanic(String),
}

/// Options of the live panels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TuiOptions {
    pub color: ColorChoice,
    /// Plain ASCII output (`--ascii`); also chosen when no UTF-8 locale is set.
    pub ascii: bool,
    /// Half blocks instead of Braille for chart lines (`--no-braille`), for fonts without
    /// Braille patterns.
    pub no_braille: bool,
    /// Chart refresh and re-judge interval (`--refresh`, default 1 s).
    pub refresh: Duration,
    /// A log that has not grown for this long without an end-of-run mark is `stale`
    /// (default 5 min).
    pub stale_limit: Duration,
    /// Start with mouse capture on (it blocks the terminal's own selection; `m` toggles).
    pub mouse: bool,
}

impl Default for TuiOptions {
    fn default() -> Self {
        TuiOptions {
            color: ColorChoice::Auto,
            ascii: false,
            no_braille: false,
            refresh: Duration::from_secs(1),
            stale_limit: Duration::from_secs(300),
            mouse: false,
        }
    }
}

/// What the binary plugs into the live loop.
pub trait LiveHooks {
    /// Called after run `run` was judged (new data) or its `stale` state changed; the
    /// returned findings (audit entries of actions run) are appended to the run's
    /// `extra_findings` and shown.
    fn on_judged(&mut self, run: usize, run_data: &LiveRun) -> Vec<Finding>;
}

/// Hooks that do nothing (no actions configured).
#[derive(Debug, Default, Clone, Copy)]
pub struct NoHooks;

impl LiveHooks for NoHooks {
    fn on_judged(&mut self, _run: usize, _run_data: &LiveRun) -> Vec<Finding> {
        Vec::new()
    }
}

/// Watch `runs` in the terminal until the user quits or a signal arrives.
///
/// Takes over the terminal (raw mode, alternate screen), installs a chained panic hook and
/// the signal and input threads, runs [`live::run_loop`], and restores the terminal on every
/// way out. `tx` is the sending side of `rx`, used by the input and signal threads.
///
/// Returns the exit code: [`EXIT_QUIT`] after `q`, [`EXIT_CTRL_C`] after Ctrl-C,
/// 128 + signal after a signal, [`EXIT_PANIC`] after a worker panic (its message is written
/// to stderr once the terminal is restored), [`EXIT_TTY_LOST`] when the terminal went away.
/// An error means the terminal could not be set up.
pub fn run(
    runs: Vec<LiveRun>,
    rx: Receiver<Msg>,
    tx: Sender<Msg>,
    opts: TuiOptions,
    hooks: &mut dyn LiveHooks,
) -> io::Result<i32> {
    let (color, ascii) = theme::from_env(opts.color, opts.ascii);
    let theme = theme::Theme::new(color, ascii, !opts.no_braille);
    let mut app = App::new(runs, opts, theme);
    let code = terminal::run_in_terminal(&mut app, rx, tx, hooks)?;
    if code == EXIT_QUIT || code == EXIT_CTRL_C {
        // Once the terminal is back: the verdict stays in the scroll-back after the panels
        // are gone. A closed stdout is not an error here.
        use std::io::Write;
        let _ = writeln!(io::stdout(), "{}", farewell(&app));
    }
    Ok(code)
}

/// The line printed after the user quits: the open run's verdict and its first reason, or
/// the counts of an overview (`6 runs: 1 diverging, 5 converged`).
pub fn farewell(app: &App) -> String {
    let views: Vec<&view::RunView> =
        (0..app.runs().count()).filter_map(|i| app.run_view(i)).collect();
    match views.as_slice() {
        [v] => {
            let mut line = format!("{}: {}", v.name, v.state_word().to_uppercase());
            if let Some(it) = v.iteration {
                line.push_str(&format!(" at it {}", format::iteration(it)));
            }
            if let Some(first) = v.why.first() {
                let dash = if app.theme.glyphs.ascii { "-" } else { "—" };
                line.push_str(&format!(" {dash} {first}"));
            }
            if v.why.len() > 1 {
                line.push_str(&format!(" (+{} more)", v.why.len() - 1));
            }
            line
        }
        _ => {
            let mut counts: Vec<(&str, usize)> = Vec::new();
            for v in &views {
                match counts.iter_mut().find(|(w, _)| *w == v.state_word()) {
                    Some(c) => c.1 += 1,
                    None => counts.push((v.state_word(), 1)),
                }
            }
            counts.sort_by_key(|(w, _)| Verdict::parse(w).map_or(u8::MAX, app::attention_rank));
            let parts: Vec<String> = counts.iter().map(|(w, n)| format!("{n} {w}")).collect();
            format!("{} runs: {}", views.len(), parts.join(", "))
        }
    }
}
