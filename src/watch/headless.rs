//! The headless loop of `settle watch`: status lines or JSON lines for batch jobs, log
//! pipelines and pipes.
//!
//! Every run prints something from the start: a run with records gets verdict lines (on its
//! first judgement, when its verdict or a criterion changes, and a heartbeat); a run that
//! cannot be judged gets *state* lines with their reason (waiting for its file, unreadable,
//! no parser, a large first read in progress, stale without records; see
//! [`crate::view::headless::RunState`]), on change and as a heartbeat. A verdict is never
//! printed for a run without records. Runs are judged only when they have new data, at most
//! once per refresh interval, stretched so that judging all *growing* runs (new data, or
//! new data within the last minute) costs about 5 % of a core (each run's cost is the
//! median of its last five judgements; all growing runs share one interval), and not during
//! a large first read. While the judge lags,
//! lines say how far the log was read (`it 1450 (read to 1462)`).
//!
//! Exit codes: with `--exit-when ended` (or `diverging`) the loop stops when every run has
//! ended and returns the most severe run's code: a verdict's code, or [`NO_DATA_EXIT`] for
//! a run that never yielded a record (missing, unreadable, no parser) until it went stale,
//! ranked right after `diverging`. A signal ends it with 128 + signal after printing the
//! final lines: within the exit deadline of a second, waiting at most [`SIGNAL_WAIT`] for
//! running actions and re-judging only what is cheap.

use std::io::{self, Write};
use std::sync::mpsc::{Receiver, RecvTimeoutError};
use std::time::{Duration, Instant, SystemTime};

use super::{ActionHooks, ExitWhen, data_final};
use crate::judge::{self, Finding, FindingKind, Judgement, Verdict};
use crate::run::ingest;
use crate::tui::{self, LiveRun, Msg};
use crate::view::headless::{self, HeadlessEvent, HeadlessState, RunState, StateReport};

/// Exit code when a run never yielded a record (its file missing or unreadable, or no
/// parser definition claims it) until it went stale, or its source was given up, or its
/// records held nothing to judge.
pub const NO_DATA_EXIT: i32 = 16;
/// Longest wait for running actions after a signal (the whole wind-down must fit in the
/// exit deadline).
pub const SIGNAL_WAIT: Duration = Duration::from_millis(300);
/// Longest wait for running actions when the watch ends by itself.
const END_WAIT: Duration = Duration::from_secs(5);
/// Judging cost allowed for the final lines after a signal; beyond it the last judgement
/// (of slightly older data, with its iteration shown) is printed.
const SIGNAL_JUDGE_BUDGET: Duration = Duration::from_millis(200);

/// Options of the headless loop.
#[derive(Debug, Clone)]
pub struct HeadlessOptions {
    pub json: bool,
    pub heartbeat: Duration,
    pub refresh: Duration,
    pub stale_limit: Duration,
    pub exit_when: ExitWhen,
}

/// When to print a run's state line: on a new state or reason, and as a heartbeat.
#[derive(Debug, Default)]
struct StatePrint {
    last: Option<(&'static str, String)>,
    at: Option<Instant>,
}

impl StatePrint {
    fn due(&mut self, s: &StateReport, now: Instant, heartbeat: Duration) -> Option<HeadlessEvent> {
        // Reading progress and the stale age change all the time: only the word counts.
        let detail = match s.state {
            RunState::Reading { .. } | RunState::Stale => String::new(),
            _ => s.detail.clone(),
        };
        let key = (s.state.as_str(), detail);
        let event = if self.last.as_ref() != Some(&key) {
            Some(HeadlessEvent::Change)
        } else if self.at.is_none_or(|t| now.saturating_duration_since(t) >= heartbeat) {
            Some(HeadlessEvent::Heartbeat)
        } else {
            None
        };
        if event.is_some() {
            self.last = Some(key);
            self.at = Some(now);
        }
        event
    }

    /// Forget the state (the run has a verdict now).
    fn clear(&mut self) {
        self.last = None;
    }
}

/// A run that grew within this window counts among the runs sharing the judging budget.
const GROWING_WINDOW: Duration = Duration::from_secs(60);
/// Judging costs remembered per run; their median is the run's cost.
const COST_SAMPLES: usize = 5;

/// Per-run bookkeeping of the loop.
struct Track {
    verdict_print: HeadlessState,
    state_print: StatePrint,
    dirty: bool,
    last_judged: Option<Instant>,
    /// The latest judging times (wall clock, so a judgement stretched by a busy machine
    /// counts as costly; the median keeps one such outlier from stretching the gap).
    costs: Vec<Duration>,
    /// When data last arrived after the run's first judgement (the first read does not
    /// make a run "growing").
    grew_at: Option<Instant>,
    done: bool,
}

impl Track {
    fn cost(&self) -> Duration {
        let mut c = self.costs.clone();
        c.sort();
        c.get(c.len() / 2).copied().unwrap_or_default()
    }

    fn judged(&mut self, cost: Duration, now: Instant) {
        if self.costs.len() == COST_SAMPLES {
            self.costs.remove(0);
        }
        self.costs.push(cost);
        self.dirty = false;
        self.last_judged = Some(now);
    }
}

/// The headless loop: apply batches, judge at most once per `refresh` per run, print on
/// change and on the heartbeat, run actions, and exit with the worst run's code.
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
    let started = Instant::now();
    let mut track: Vec<Track> = runs
        .iter()
        .map(|_| Track {
            verdict_print: HeadlessState::new(opts.heartbeat),
            state_print: StatePrint::default(),
            dirty: true,
            last_judged: None,
            costs: Vec::with_capacity(COST_SAMPLES),
            grew_at: None,
            done: false,
        })
        .collect();
    let tick = Duration::from_millis(1000).min(opts.refresh.max(Duration::from_millis(50)));
    // Refusals of actions (unsafe config, bad command) are said at once.
    let wall = SystemTime::now();
    for (i, run) in runs.iter().enumerate() {
        for f in hooks.take_notices(i) {
            print_finding(out, opts, &run.store.name, &f, wall)?;
        }
    }
    let signal = loop {
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
                        let t = &mut track[batch.run];
                        t.dirty = true;
                        if t.last_judged.is_some() {
                            t.grew_at = Some(Instant::now());
                        }
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
        step(&mut runs, &mut track, opts, hooks, out, started)?;
        if opts.exit_when != ExitWhen::Never && !runs.is_empty() && track.iter().all(|t| t.done) {
            break None;
        }
    };
    finish(&mut runs, &mut track, opts, hooks, out, started, signal)
}

/// One pass over the runs after new messages (or the tick): judge what is due, decide
/// stale, feed the actions, print.
fn step(
    runs: &mut [LiveRun],
    track: &mut [Track],
    opts: &HeadlessOptions,
    hooks: &mut ActionHooks,
    out: &mut dyn Write,
    started: Instant,
) -> io::Result<()> {
    let now = Instant::now();
    let wall = SystemTime::now();
    // The runs sharing the judging budget: those with new data, or new data within the last
    // minute. Runs that stopped growing are not judged again and take no share. All of them
    // get the same gap, from their summed cost (each the median of its last judgements), so
    // judging takes about 5 % of a core whatever their sizes, and one slow judgement does
    // not hold one run back for minutes.
    let (mut growing, mut total) = (0u32, Duration::ZERO);
    for (r, t) in runs.iter().zip(track.iter()) {
        let recent = t.grew_at.is_some_and(|g| now.duration_since(g) < GROWING_WINDOW);
        if r.store.last_iteration().is_some() && (t.dirty || recent) {
            growing += 1;
            total += t.cost();
        }
    }
    let gap = if growing == 0 {
        opts.refresh
    } else {
        tui::app::judge_gap(opts.refresh, total / growing, growing as usize)
    };
    for (i, run) in runs.iter_mut().enumerate() {
        let t = &mut track[i];
        let grown = age(run, wall);
        if let Some(st) = state_of(run, grown, started, opts.stale_limit) {
            print_state(out, opts, run, t, &st, grown, (now, wall))?;
            continue;
        }
        let due = t.last_judged.is_none_or(|j| now.duration_since(j) >= gap);
        let mut judged = false;
        if t.dirty && due {
            let begun = Instant::now();
            run.set_judgement(judge::judge(&run.store.judge_input(), &run.criteria));
            t.judged(begun.elapsed(), now);
            judged = true;
        }
        let was_stale = run.stale;
        run.stale = !run.store.ended() && grown.is_some_and(|a| a > opts.stale_limit);
        // Records, but nothing the criteria judge: a state line with the judge's reason,
        // never the empty judgement's verdict.
        if let Some(why) = run.nothing_to_judge() {
            let st = headless::nothing_state(why);
            print_state(out, opts, run, t, &st, grown, (now, wall))?;
            continue;
        }
        t.state_print.clear();
        // Actions see judgements (and stale changes), not every batch: a batch between
        // two judgements carries records no judgement has seen.
        if judged || run.stale != was_stale {
            for f in hooks.observe(i, run) {
                print_finding(out, opts, &run.store.name, &f, wall)?;
            }
        }
        let j = shown(run);
        let read = run.store.last_iteration();
        if let Some(reason) = t.verdict_print.should_print(&j, now) {
            let line = if opts.json {
                headless::json_line_read(&run.store.name, &j, read, grown, wall, reason.event())
            } else {
                headless::status_line_read(&run.store.name, &j, read, grown, wall)
            };
            emit(out, &line)?;
        }
        t.done = match opts.exit_when {
            ExitWhen::Never => false,
            ExitWhen::Ended => data_final(run),
            ExitWhen::Diverging => data_final(run) || run.verdict() == Verdict::Diverging,
        };
    }
    for (i, f) in hooks.poll() {
        print_finding(out, opts, &runs[i].store.name, &f, wall)?;
    }
    Ok(())
}

/// Print a run's state line when due (new state or reason, heartbeat), and whether the run
/// is done: a final state, or (nothing to judge) data that cannot grow any more.
fn print_state(
    out: &mut dyn Write,
    opts: &HeadlessOptions,
    run: &LiveRun,
    t: &mut Track,
    st: &StateReport,
    grown: Option<Duration>,
    (now, wall): (Instant, SystemTime),
) -> io::Result<()> {
    if let Some(event) = t.state_print.due(st, now, opts.heartbeat) {
        emit(out, &state_text(opts, &run.store.name, st, grown, wall, event))?;
    }
    // The verdict lines start afresh once the run has a verdict again.
    t.verdict_print = HeadlessState::new(opts.heartbeat);
    t.done = st.state.is_final()
        || (st.state == RunState::NothingToJudge
            && opts.exit_when != ExitWhen::Never
            && data_final(run));
    Ok(())
}

/// The final lines and the exit code.
fn finish(
    runs: &mut [LiveRun],
    track: &mut [Track],
    opts: &HeadlessOptions,
    hooks: &mut ActionHooks,
    out: &mut dyn Write,
    started: Instant,
    signal: Option<i32>,
) -> io::Result<i32> {
    let wall = SystemTime::now();
    let wait = if signal.is_some() { SIGNAL_WAIT } else { END_WAIT };
    for (i, f) in hooks.wait(wait) {
        print_finding(out, opts, &runs[i].store.name, &f, wall)?;
    }
    let mut budget = SIGNAL_JUDGE_BUDGET;
    let mut codes = Vec::with_capacity(runs.len());
    for (run, t) in runs.iter_mut().zip(track.iter()) {
        let grown = age(run, wall);
        if let Some(st) = state_of(run, grown, started, opts.stale_limit) {
            emit(out, &state_text(opts, &run.store.name, &st, grown, wall, HeadlessEvent::End))?;
            codes.push(if matches!(st.state, RunState::Reading { .. }) {
                // Stopped in the middle of reading: its verdict is unknown.
                None
            } else {
                Some(NO_DATA_EXIT)
            });
            continue;
        }
        // Re-judge new data unless a signal leaves no time for it.
        let affordable = signal.is_none() || t.cost() <= budget;
        if (t.dirty || run.judged_records.is_none()) && affordable {
            budget = budget.saturating_sub(t.cost());
            run.set_judgement(judge::judge(&run.store.judge_input(), &run.criteria));
        }
        if let Some(why) = run.nothing_to_judge() {
            let st = headless::nothing_state(why);
            emit(out, &state_text(opts, &run.store.name, &st, grown, wall, HeadlessEvent::End))?;
            codes.push(Some(NO_DATA_EXIT));
            continue;
        }
        let j = shown(run);
        let line = if opts.json {
            headless::json_line(&run.store.name, &j, grown, wall, HeadlessEvent::End)
        } else {
            format!("{} (final)", headless::status_line(&run.store.name, &j, grown, wall))
        };
        emit(out, &line)?;
        codes.push(Some(j.verdict.exit_code()));
    }
    Ok(signal.unwrap_or_else(|| worst_code(&codes)))
}

/// The most severe code of the runs: diverging, then no data, then the other verdicts in
/// their order (see `worst`); a run stopped mid-read counts as converging.
fn worst_code(codes: &[Option<i32>]) -> i32 {
    let rank = |c: i32| match c {
        c if c == Verdict::Diverging.exit_code() => 0,
        NO_DATA_EXIT => 1,
        c => {
            Verdict::ALL.iter().find(|v| v.exit_code() == c).map_or(9, |v| 2 + super::severity(*v))
        }
    };
    codes
        .iter()
        .map(|c| c.unwrap_or(Verdict::Converging.exit_code()))
        .min_by_key(|&c| rank(c))
        .unwrap_or(Verdict::Converging.exit_code())
}

/// The state line of a run that has no verdict to show, if it has none.
fn state_of(
    run: &LiveRun,
    grown: Option<Duration>,
    started: Instant,
    stale_limit: Duration,
) -> Option<StateReport> {
    let quiet = grown.map_or(started.elapsed(), |g| g.min(started.elapsed()));
    headless::run_state(&run.store, &run.activity, quiet, stale_limit)
}

fn state_text(
    opts: &HeadlessOptions,
    run: &str,
    st: &StateReport,
    grown: Option<Duration>,
    wall: SystemTime,
    event: HeadlessEvent,
) -> String {
    if opts.json {
        headless::json_state_line(run, st, grown, wall, event)
    } else if event == HeadlessEvent::End {
        format!("{} (final)", headless::state_line(run, st, grown, wall))
    } else {
        headless::state_line(run, st, grown, wall)
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_data_ranks_right_after_diverging() {
        let c = |v: Verdict| Some(v.exit_code());
        assert_eq!(worst_code(&[c(Verdict::Converged), Some(NO_DATA_EXIT)]), NO_DATA_EXIT);
        assert_eq!(worst_code(&[Some(NO_DATA_EXIT), c(Verdict::Diverging)]), 14);
        assert_eq!(worst_code(&[c(Verdict::Stalled), c(Verdict::Oscillating)]), 12);
        assert_eq!(worst_code(&[c(Verdict::Converged), None]), 10);
        assert_eq!(worst_code(&[]), 10);
    }
}
