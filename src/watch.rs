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
        if let Some(r) = self.runners.get_mut(run).and_then(Option::as_mut) {
            let mut obs = Observation::new(data.verdict(), data.judgement.iterations, judged);
            obs.data_final = data_final(data);
            obs.pending = data.bulk_reading() || !data.judgement_current();
            out.extend(r.observe(&obs, self.act));
            out.extend(r.poll_finished());
        }
        out
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
fn data_final(run: &LiveRun) -> bool {
    let crashed =
        run.store.sources.iter().any(|s| s.events.iter().any(|e| e.severity == Severity::Error));
    run.store.ended() || run.stale || (run.verdict() == Verdict::Diverging && crashed)
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
            let mut judged = false;
            if dirty[i] && due && run.store.last_iteration().is_some() {
                let started = Instant::now();
                run.set_judgement(judge::judge(&run.store.judge_input(), &run.criteria));
                costs[i] = started.elapsed();
                dirty[i] = false;
                last_judged[i] = Some(now);
                judged = true;
            }
            if run.store.last_iteration().is_none() {
                continue;
            }
            let grown = age(run, wall);
            let was_stale = run.stale;
            run.stale = !run.store.ended() && grown.is_some_and(|a| a > opts.stale_limit);
            let j = shown(run);
            // Actions see judgements (and stale changes), not every batch: a batch between
            // two judgements carries records no judgement has seen.
            if judged || run.stale != was_stale {
                for f in hooks.observe(i, run) {
                    print_finding(out, opts, &run.store.name, &f, wall)?;
                }
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
            run.set_judgement(judge::judge(&run.store.judge_input(), &run.criteria));
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

/// Expand `watch` arguments into runs: a directory holding settle.toml is one run; a
/// directory without one contributes each subdirectory that holds one (a sweep); files are
/// one run each, or together one run with `one_run`.
pub fn resolve_runs(
    paths: &[PathBuf],
    parser: Option<&str>,
    one_run: bool,
) -> Result<Vec<RunSpec>, String> {
    use crate::run::config;
    let mut specs = Vec::new();
    let mut files = Vec::new();
    for p in paths {
        if p.is_dir() {
            let c = p.join(config::CONFIG_NAME);
            if c.is_file() {
                specs.push(config::load(&c).map_err(|e| e.to_string())?);
                continue;
            }
            let mut subs: Vec<PathBuf> = std::fs::read_dir(p)
                .map_err(|e| format!("{}: {e}", p.display()))?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|d| d.join(config::CONFIG_NAME).is_file())
                .collect();
            if subs.is_empty() {
                return Err(format!(
                    "{}: no {} here or in its subdirectories; give log files instead",
                    p.display(),
                    config::CONFIG_NAME
                ));
            }
            subs.sort_by(|a, b| {
                crate::follow::natural_cmp(&a.to_string_lossy(), &b.to_string_lossy())
            });
            for d in subs {
                specs.push(config::load(&d.join(config::CONFIG_NAME)).map_err(|e| e.to_string())?);
            }
        } else {
            files.push(p.clone());
        }
    }
    if one_run && !files.is_empty() {
        specs.push(config::from_files(&files, parser));
    } else {
        for f in files {
            specs.push(config::from_files(std::slice::from_ref(&f), parser));
        }
    }
    Ok(specs)
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
