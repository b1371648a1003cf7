//! The `watch` command's glue: building live runs and their followers, the headless loop
//! (status lines or JSON lines for batch jobs and pipes), and the bridge from verdicts to
//! opt-in actions. The panels themselves live in `tui`; this module only wires.

use std::io::{self, Write};
use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::sync::mpsc::{Receiver, RecvTimeoutError, Sender};
use std::time::{Duration, Instant, SystemTime};

use crate::actions::{self, ActionRunner, Observation, RunFacts};
use crate::follow::FollowConfig;
use crate::judge::{self, Finding, FindingKind, Judgement, Verdict};
use crate::parser::Registry;
use crate::record::Severity;
use crate::run::config::RunSpec;
use crate::run::headless::{self, HeadlessEvent, HeadlessState};
use crate::run::ingest;
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

/// Records ingested so far for a run (sum over its sources).
fn records(store: &RunStore) -> u64 {
    store.sources.iter().map(|s| s.records() as u64).sum()
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
                    let facts = RunFacts {
                        name: spec.name.clone(),
                        dir: spec.dir.clone(),
                        sources: spec.sources.iter().map(|s| s.path.clone()).collect(),
                        job: spec.job.clone(),
                    };
                    match actions::load_plan(&spec.actions, path, &facts) {
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

    /// Feed one judgement of run `run`; returns audit findings (dry runs, executions,
    /// refusals, finished commands).
    pub fn observe(
        &mut self,
        run: usize,
        verdict: Verdict,
        store: &RunStore,
        final_data: bool,
    ) -> Vec<Finding> {
        let mut out = std::mem::take(&mut self.pending[run]);
        if let Some(r) = self.runners.get_mut(run).and_then(Option::as_mut) {
            let mut obs =
                Observation::new(verdict, store.last_iteration().unwrap_or(0), records(store));
            obs.data_final = final_data;
            out.extend(r.observe(&obs, self.act));
            out.extend(r.poll_finished());
        }
        out
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
        self.observe(run, data.verdict(), &data.store, data_final(data))
    }
}

/// When the headless watcher stops on its own.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ExitWhen {
    /// When every run has ended: end-of-run mark, a crash after divergence, or stale.
    Ended,
    /// Like `ended`, and also as soon as a run is diverging.
    Diverging,
    /// Never: until interrupted.
    Never,
}

/// Options of the headless loop.
#[derive(Debug, Clone)]
pub struct HeadlessOptions {
    pub json: bool,
    pub heartbeat: Duration,
    pub refresh: Duration,
    pub stale_limit: Duration,
    pub exit_when: ExitWhen,
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
    let v = run.verdict();
    run.store.ended() || v == Verdict::Stale || (v == Verdict::Diverging && crashed)
}

/// A run needs no more watching under `exit_when`.
fn is_done(run: &LiveRun, exit_when: ExitWhen) -> bool {
    match exit_when {
        ExitWhen::Never => false,
        ExitWhen::Ended => data_final(run),
        ExitWhen::Diverging => data_final(run) || run.verdict() == Verdict::Diverging,
    }
}

/// Write a line; a closed pipe ends the loop quietly.
fn emit(out: &mut dyn Write, line: &str) -> io::Result<()> {
    out.write_all(line.as_bytes())?;
    out.write_all(b"\n")?;
    out.flush()
}

fn age(run: &LiveRun, now: SystemTime) -> Option<Duration> {
    run.activity.iter().filter_map(|a| a.last_growth).max().and_then(|t| now.duration_since(t).ok())
}

/// The judgement as shown: `stale` applied over the judged verdict.
fn shown(run: &LiveRun) -> Judgement {
    let mut j = run.judgement.clone();
    j.verdict = run.verdict();
    j
}

/// The headless loop: apply batches, judge at most once per `refresh` per run, print on
/// change and on the heartbeat, run actions, and exit with the worst verdict's code.
///
/// Blocks in `recv_timeout`; with no data it wakes about once a second to check stale runs
/// and heartbeats.
pub fn run_headless(
    mut runs: Vec<LiveRun>,
    rx: Receiver<Msg>,
    opts: &HeadlessOptions,
    hooks: &mut ActionHooks,
    out: &mut dyn Write,
) -> io::Result<i32> {
    let mut states: Vec<HeadlessState> =
        runs.iter().map(|_| HeadlessState::new(opts.heartbeat)).collect();
    let mut dirty = vec![true; runs.len()];
    let mut last_judged: Vec<Option<Instant>> = vec![None; runs.len()];
    let mut costs: Vec<Duration> = vec![Duration::ZERO; runs.len()];
    let mut announced_end = vec![false; runs.len()];
    let tick = Duration::from_millis(1000).min(opts.refresh.max(Duration::from_millis(50)));
    let result = loop {
        // Block for the first message, then take everything already queued before judging.
        let mut next = match rx.recv_timeout(tick) {
            Ok(m) => Some(m),
            Err(RecvTimeoutError::Timeout) => None,
            Err(RecvTimeoutError::Disconnected) => break None,
        };
        let mut stop = None;
        while let Some(msg) = next.take() {
            match msg {
                Msg::Ingest(batch) => {
                    if let Some(run) = runs.get_mut(batch.run)
                        && let (Some(src), Some(act)) = (
                            run.store.sources.get_mut(batch.source),
                            run.activity.get_mut(batch.source),
                        )
                    {
                        ingest::apply(src, act, batch.items);
                        dirty[batch.run] = true;
                    }
                }
                Msg::Signal(sig) => stop = Some(128 + sig),
                Msg::WorkerPanic(msg) => {
                    let _ = writeln!(io::stderr(), "settle: internal error: {msg}");
                    stop = Some(101);
                }
                Msg::InputClosed | Msg::Input(_) => {}
            }
            if stop.is_some() {
                break;
            }
            next = rx.try_recv().ok();
        }
        if stop.is_some() {
            break stop;
        }
        let now = Instant::now();
        let wall = SystemTime::now();
        let active = runs.iter().filter(|r| r.store.last_iteration().is_some()).count();
        for (i, run) in runs.iter_mut().enumerate() {
            let gap = tui::app::judge_gap(opts.refresh, costs[i], active);
            let due = last_judged[i].is_none_or(|t| now.duration_since(t) >= gap);
            if dirty[i] && due && run.store.last_iteration().is_some() {
                let started = Instant::now();
                run.judgement = judge::judge(&run.store.judge_input(), &run.criteria);
                costs[i] = started.elapsed();
                dirty[i] = false;
                last_judged[i] = Some(now);
            }
            if run.store.last_iteration().is_none() {
                continue;
            }
            let grown = age(run, wall);
            run.stale = !run.store.ended() && grown.is_some_and(|a| a > opts.stale_limit);
            let j = shown(run);
            for f in hooks.observe(i, j.verdict, &run.store, data_final(run)) {
                print_finding(out, opts, &run.store.name, &f, wall)?;
            }
            if let Some(reason) = states[i].should_print(&j, now) {
                let line = if opts.json {
                    headless::json_line(&run.store.name, &j, grown, wall, reason.event())
                } else {
                    headless::status_line(&run.store.name, &j, grown, wall)
                };
                emit(out, &line)?;
            }
        }
        for (i, f) in hooks.poll() {
            print_finding(out, opts, &runs[i].store.name, &f, wall)?;
        }
        for (i, run) in runs.iter().enumerate() {
            if !announced_end[i]
                && run.store.last_iteration().is_some()
                && is_done(run, opts.exit_when)
            {
                announced_end[i] = true;
            }
        }
        if !runs.is_empty() && announced_end.iter().all(|&e| e) {
            break None;
        }
    };
    let wall = SystemTime::now();
    for (i, f) in hooks.wait(Duration::from_secs(5)) {
        print_finding(out, opts, &runs[i].store.name, &f, wall)?;
    }
    for run in &mut runs {
        if run.store.last_iteration().is_some() {
            run.judgement = judge::judge(&run.store.judge_input(), &run.criteria);
        }
        let j = shown(run);
        let line = if opts.json {
            headless::json_line(&run.store.name, &j, age(run, wall), wall, HeadlessEvent::End)
        } else {
            format!("{} (final)", headless::status_line(&run.store.name, &j, age(run, wall), wall))
        };
        emit(out, &line)?;
    }
    Ok(result.unwrap_or_else(|| worst(runs.iter().map(LiveRun::verdict)).exit_code()))
}

fn print_finding(
    out: &mut dyn Write,
    opts: &HeadlessOptions,
    run: &str,
    f: &Finding,
    now: SystemTime,
) -> io::Result<()> {
    if f.kind != FindingKind::Action {
        return Ok(());
    }
    let line = if opts.json {
        headless::json_action_line(run, f, now)
    } else {
        headless::action_line(run, f, now)
    };
    emit(out, &line)
}

/// Forward SIGTERM, SIGHUP, SIGINT and SIGQUIT to the loop as [`Msg::Signal`] (headless
/// mode; the panels install their own handling).
pub fn forward_signals(tx: Sender<Msg>) -> io::Result<()> {
    use signal_hook::consts::{SIGHUP, SIGINT, SIGQUIT, SIGTERM};
    let mut signals = signal_hook::iterator::Signals::new([SIGTERM, SIGHUP, SIGINT, SIGQUIT])?;
    std::thread::Builder::new().name("settle-signals".into()).spawn(move || {
        for sig in signals.forever() {
            if tx.send(Msg::Signal(sig)).is_err() {
                break;
            }
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
