//! The `watch` command's glue: building live runs and their followers, the headless loop
//! ([`headless`]: status lines or JSON lines for batch jobs and pipes), and the bridge from
//! verdicts to opt-in actions. The panels themselves live in `tui`; this module only wires.

pub mod headless;

pub use headless::{HeadlessOptions, NO_DATA_EXIT, run_headless};

use std::io;
use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::sync::mpsc::{Receiver, Sender};
use std::time::Duration;

use crate::actions::{self, ActionRunner, Observation, RunFacts};
use crate::follow::FollowConfig;
use crate::judge::{Finding, Verdict};
use crate::parser::Registry;
use crate::record::Severity;
use crate::run::config::RunSpec;
use crate::run::pipeline::{self, LiveSource, PipelineError, SourceReader};
use crate::run::{RunStore, SourceStore};
use crate::tui::{self, LiveHooks, LiveRun, Msg};

/// Build the live runs and the readers that feed them (one reader per source).
pub fn prepare(
    specs: &[RunSpec],
    registry: &Arc<Registry>,
    follow: &FollowConfig,
) -> Result<(Vec<LiveRun>, Vec<LiveSource>), PipelineError> {
    let mut runs = Vec::new();
    let mut sources = Vec::new();
    for (r, spec) in specs.iter().enumerate() {
        let mut store = RunStore::new(spec.name.clone());
        for (s, src) in spec.sources.iter().enumerate() {
            let reader = SourceReader::new(src, registry.clone(), follow.clone())?;
            store.sources.push(SourceStore::new(
                src.label.clone(),
                src.parser.clone().unwrap_or_else(|| "-".into()),
            ));
            sources.push(LiveSource { run: r, source: s, reader });
        }
        runs.push(LiveRun::new(store, spec.criteria.clone()));
    }
    Ok((runs, sources))
}

/// Start the ingest thread feeding `tx`.
pub fn start_ingest(
    sources: Vec<LiveSource>,
    poll: Duration,
    tx: Sender<Msg>,
    shutdown: Arc<AtomicBool>,
) -> io::Result<std::thread::JoinHandle<()>> {
    pipeline::spawn_live(sources, poll, tx, Msg::Ingest, Msg::WorkerPanic, shutdown)
}

/// Opt-in actions of every run, driven by verdicts (`LiveHooks` for the panels; called
/// directly by the headless loop).
pub struct ActionHooks {
    runners: Vec<Option<ActionRunner>>,
    /// Refusals and load errors, reported once per run at the first judgement.
    pending: Vec<Vec<Finding>>,
    act: bool,
}

impl ActionHooks {
    /// Validate the actions of each run. A refused config (permissions, bad placeholder)
    /// disables that run's actions and becomes a finding; watching goes on.
    pub fn new(specs: &[RunSpec], act: bool) -> ActionHooks {
        let mut runners = Vec::new();
        let mut pending = Vec::new();
        for spec in specs {
            let (runner, notes) = match (&spec.config_path, spec.actions.is_empty()) {
                (Some(path), false) => {
                    // Loaded by `config::load`: the facts of the file the text came from.
                    let Some(file) = spec.config_facts else {
                        let e = actions::ActionError::Io {
                            path: path.clone(),
                            message: "its owner and mode were not read with its text".into(),
                        };
                        runners.push(None);
                        pending.push(vec![e.finding()]);
                        continue;
                    };
                    let facts = RunFacts {
                        name: spec.name.clone(),
                        dir: spec.dir.clone(),
                        sources: spec.sources.iter().map(|s| s.path.clone()).collect(),
                        job: spec.job.clone(),
                    };
                    match actions::load_plan(&spec.actions, path, &file, &facts) {
                        Ok(plan) => (Some(ActionRunner::new(plan)), Vec::new()),
                        Err(e) => (None, vec![e.finding()]),
                    }
                }
                _ => (None, Vec::new()),
            };
            runners.push(runner);
            pending.push(notes);
        }
        ActionHooks { runners, pending, act }
    }

    /// Feed the latest judgement of run `run` (after it was judged, or when its `stale` state
    /// changed); returns audit findings (dry runs, executions, refusals, finished commands).
    ///
    /// The hold counts the records the judgement saw, never records ingested since. A
    /// judgement older than the data in the store, or made while a large read is in progress
    /// (the first read of an existing log), is pending: it neither counts nor fires.
    pub fn observe(&mut self, run: usize, data: &LiveRun) -> Vec<Finding> {
        let mut out = std::mem::take(&mut self.pending[run]);
        let Some(judged) = data.judged_records else {
            return out;
        };
        // Nothing to judge: no verdict, so nothing for an action to act on.
        if data.nothing_to_judge().is_some() {
            return out;
        }
        if let Some(r) = self.runners.get_mut(run).and_then(Option::as_mut) {
            let mut obs = Observation::new(data.verdict(), data.judgement.iterations, judged);
            obs.data_final = data_final(data);
            obs.pending = data.bulk_reading() || !data.judgement_current();
            out.extend(r.observe(&obs, self.act));
            out.extend(r.poll_finished());
        }
        out
    }

    /// Refusals and load errors of run `run` not reported yet (the headless watcher prints
    /// them at once; otherwise they come with the first judgement).
    pub fn take_notices(&mut self, run: usize) -> Vec<Finding> {
        self.pending.get_mut(run).map(std::mem::take).unwrap_or_default()
    }

    /// One line per planned action of run `run` (empty when it has none or they were
    /// refused): what would fire, on which verdicts, with which command.
    pub fn plan_summary(&self, run: usize) -> Vec<String> {
        self.runners
            .get(run)
            .and_then(Option::as_ref)
            .map(|r| r.plan().summary())
            .unwrap_or_default()
    }

    /// Results of commands that finished since the last call.
    pub fn poll(&mut self) -> Vec<(usize, Finding)> {
        let mut out = Vec::new();
        for (i, r) in self.runners.iter_mut().enumerate() {
            if let Some(r) = r {
                out.extend(r.poll_finished().into_iter().map(|f| (i, f)));
            }
        }
        out
    }

    /// Wait (bounded) for running commands before exiting.
    pub fn wait(&mut self, limit: Duration) -> Vec<(usize, Finding)> {
        let mut out = Vec::new();
        for (i, r) in self.runners.iter_mut().enumerate() {
            if let Some(r) = r {
                out.extend(r.wait_finished(limit).into_iter().map(|f| (i, f)));
            }
        }
        out
    }
}

impl LiveHooks for ActionHooks {
    fn on_judged(&mut self, run: usize, data: &LiveRun) -> Vec<Finding> {
        self.observe(run, data)
    }
}

/// When the headless watcher stops on its own.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ExitWhen {
    /// When every run has ended: end-of-run mark, a crash after divergence, or stale; a
    /// run without records when it went stale or its file was given up (exit code 16).
    Ended,
    /// Like `ended`, and also as soon as a run is diverging.
    Diverging,
    /// Never: until interrupted.
    Never,
}

/// Severity order of verdicts for the exit code of several runs (worst first).
fn severity(v: Verdict) -> u8 {
    match v {
        Verdict::Diverging => 0,
        Verdict::Oscillating => 1,
        Verdict::Suspect => 2,
        Verdict::Stalled => 3,
        Verdict::Stale => 4,
        Verdict::Converging => 5,
        Verdict::Converged => 6,
    }
}

/// The verdict whose exit code a multi-run watcher returns: the most severe one.
pub fn worst(verdicts: impl IntoIterator<Item = Verdict>) -> Verdict {
    verdicts.into_iter().min_by_key(|&v| severity(v)).unwrap_or(Verdict::Converging)
}

/// No more records can be expected: the end-of-run mark, a stale log, or a crash message
/// after divergence. Actions then fire without waiting for their `hold` records.
///
/// Never before every source of the run has been read once: the log's end mark can arrive
/// before the monitor files of the same run have been read at all, and a judgement then
/// would lack them (a source has been read once when it grew, or gave a note: missing,
/// empty, unreadable).
fn data_final(run: &LiveRun) -> bool {
    let all_read = run
        .store
        .sources
        .iter()
        .zip(&run.activity)
        .all(|(s, a)| a.last_growth.is_some() || !s.notes.is_empty() || s.stats.lines > 0);
    if !all_read {
        return false;
    }
    let crashed =
        run.store.sources.iter().any(|s| s.events.iter().any(|e| e.severity == Severity::Error));
    run.store.ended() || run.stale || (run.verdict() == Verdict::Diverging && crashed)
}

/// Forward SIGTERM, SIGHUP, SIGINT and SIGQUIT to the loop as [`Msg::Signal`] (headless
/// mode; the panels install their own handling). The first signal also arms the exit
/// deadline, so the process ends within a second whatever the loop is doing (it prints its
/// final lines well before); a second signal ends it at once.
pub fn forward_signals(tx: Sender<Msg>) -> io::Result<()> {
    use signal_hook::consts::{SIGHUP, SIGINT, SIGQUIT, SIGTERM};
    let mut signals = signal_hook::iterator::Signals::new([SIGTERM, SIGHUP, SIGINT, SIGQUIT])?;
    std::thread::Builder::new().name("settle-signals".into()).spawn(move || {
        let mut seen = false;
        for sig in signals.forever() {
            if std::mem::replace(&mut seen, true) {
                std::process::exit(128 + sig);
            }
            let _ = tx.send(Msg::Signal(sig));
            tui::terminal::arm_exit_deadline(128 + sig);
        }
    })?;
    Ok(())
}

/// Expand `watch` arguments into runs, by the same rules as `check` and `report`
/// ([`crate::run::resolve`]): files given together are one run, `+` separates runs, a
/// directory is its `settle.toml` or the runs its recognised files form, a folder of case
/// directories is one run per directory. With `each`, every file is its own run. The notes
/// say what was looked at and left out, and why.
pub fn resolve_runs(
    paths: &[PathBuf],
    parsers: &[String],
    registry: &Registry,
    each: bool,
) -> Result<crate::run::resolve::Resolved, String> {
    crate::run::resolve::runs(paths, parsers, registry, each)
}

/// Run the panels (the terminal must be a tty).
pub fn run_panels(
    runs: Vec<LiveRun>,
    rx: Receiver<Msg>,
    tx: Sender<Msg>,
    opts: tui::TuiOptions,
    hooks: &mut ActionHooks,
) -> io::Result<i32> {
    tui::run(runs, rx, tx, opts, hooks)
}
