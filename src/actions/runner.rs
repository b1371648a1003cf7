//! Firing planned actions on verdict transitions, in the background, with an audit trail.
//!
//! The caller feeds every judgement to [`ActionRunner::observe`] and polls
//! [`ActionRunner::poll_finished`] on its own loop; neither blocks. A command runs on a
//! thread of its own (see `exec`), so a slow scheduler never holds up watching. Every fire
//! produces exactly one audit [`Finding`] of kind `Action`: a dry run at once, a real run
//! when it has finished (or could not start), a skip at once when the same action is still
//! running from before.

use std::collections::VecDeque;
use std::sync::mpsc::{self, Receiver, Sender};
use std::thread;
use std::time::{Duration, Instant};

use super::exec::{self, ExecResult, ExecSpec, Outcome};
use super::latch::Latch;
use super::plan::{ActionPlan, Invocation};
use super::{display_argv, fmt_secs, sanitize_line};
use crate::judge::{Finding, FindingKind, Verdict};

/// One judgement as the runner sees it. Deliberately only numbers and a verdict: no text
/// from the log can reach a command through it.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Observation {
    pub verdict: Verdict,
    /// Last iteration seen (`{iteration}`, `SETTLE_ITERATION`).
    pub iteration: i64,
    /// Records the judgement saw (the store's record count when it was judged; counts for
    /// the hold). Never the count of records ingested since: those are not judged yet.
    pub records_seen: u64,
    /// No further records can come: the solver's end-of-run mark, a log stale past the
    /// stale limit, or `check` at end of file. Waives the hold (see the latch rules).
    pub data_final: bool,
    /// The judgement cannot be acted on yet: a large read (the first read of an existing
    /// log, or a re-read from the start) is in progress, or records arrived that the
    /// judgement has not seen. It neither counts, nor fires, nor re-arms.
    pub pending: bool,
}

impl Observation {
    pub fn new(verdict: Verdict, iteration: i64, records_seen: u64) -> Observation {
        Observation { verdict, iteration, records_seen, data_final: false, pending: false }
    }
}

/// One finished execution, with its captured output (first 4 KiB of each stream).
#[derive(Debug, Clone, PartialEq)]
pub struct ActionRecord {
    /// 1-based number of the `[[action]]` table.
    pub action: usize,
    pub argv: Vec<String>,
    pub verdict: Verdict,
    pub iteration: i64,
    pub outcome: Outcome,
    pub elapsed: Duration,
    pub timeout: Duration,
    /// Captured output, lossily decoded.
    pub stdout: String,
    pub stderr: String,
    /// Total bytes written, of which the first 4 KiB are kept.
    pub stdout_bytes: u64,
    pub stderr_bytes: u64,
    pub lingering_killed: bool,
}

/// How many finished executions [`ActionRunner::history`] keeps.
pub const HISTORY_LIMIT: usize = 64;

struct Done {
    index: usize,
    record: ActionRecord,
}

/// Fires the actions of one run (keep one per run).
///
/// Dropping it does not stop commands already running: each one's thread still enforces
/// its timeout, but when settle itself exits, those threads end with it. Call
/// [`ActionRunner::wait_finished`] before exiting to collect their audit entries.
pub struct ActionRunner {
    plan: ActionPlan,
    latches: Vec<Latch>,
    running: Vec<bool>,
    current: Option<Verdict>,
    previous: Option<Verdict>,
    tx: Sender<Done>,
    rx: Receiver<Done>,
    history: VecDeque<ActionRecord>,
}

impl ActionRunner {
    pub fn new(plan: ActionPlan) -> ActionRunner {
        let (tx, rx) = mpsc::channel();
        ActionRunner {
            latches: plan.actions.iter().map(|a| Latch::new(a.hold)).collect(),
            running: vec![false; plan.actions.len()],
            plan,
            current: None,
            previous: None,
            tx,
            rx,
            history: VecDeque::new(),
        }
    }

    pub fn plan(&self) -> &ActionPlan {
        &self.plan
    }

    /// Feed one judgement. With `act` false (no `--act`), a firing action only produces a
    /// "would run" entry; with `act` true it starts in the background. Returns the audit
    /// entries produced now (dry runs, skips, thread failures).
    pub fn observe(&mut self, obs: &Observation, act: bool) -> Vec<Finding> {
        if !obs.pending && self.current != Some(obs.verdict) {
            self.previous = self.current;
            self.current = Some(obs.verdict);
        }
        let data_final = obs.data_final || obs.verdict == Verdict::Stale;
        let mut out = Vec::new();
        for i in 0..self.plan.actions.len() {
            let inside = self.plan.actions[i].on.contains(&obs.verdict);
            if self.latches[i].step(inside, obs.records_seen, data_final, obs.pending) {
                out.extend(self.fire(i, obs, act));
            }
        }
        out
    }

    fn fire(&mut self, i: usize, obs: &Observation, act: bool) -> Option<Finding> {
        let number = self.plan.actions[i].number;
        let inv = match self.plan.invocation(i, obs.verdict, self.previous, obs.iteration) {
            Ok(inv) => inv,
            Err(why) => {
                let detail = format!("refused to run action #{number}: {why}");
                return Some(audit(obs.iteration, "refused", 0.0, sanitize_line(&detail)));
            }
        };
        let shown = display_argv(&inv.argv);
        if !act {
            let keys: Vec<String> =
                inv.env.iter().map(|(k, _)| k.to_string_lossy().into_owned()).collect();
            let detail = format!(
                "would run {shown} (action #{number}, dry run: pass --act to execute; \
                 cwd {}; timeout {}; env {})",
                sanitize_line(&inv.cwd.display().to_string()),
                fmt_secs(inv.timeout),
                keys.join(" ")
            );
            return Some(audit(obs.iteration, "dry_run", 0.0, detail));
        }
        if self.running[i] {
            let detail =
                format!("skipped {shown} (action #{number}): its previous run is still going");
            return Some(audit(obs.iteration, "skipped", 0.0, detail));
        }
        let tx = self.tx.clone();
        let (verdict, iteration) = (obs.verdict, obs.iteration);
        let spawned =
            thread::Builder::new().name(format!("settle-action-{number}")).spawn(move || {
                let record = execute(number, verdict, iteration, inv);
                // The runner may be gone (settle exiting); nothing left to tell then.
                let _ = tx.send(Done { index: i, record });
            });
        match spawned {
            Ok(_) => {
                self.running[i] = true;
                None
            }
            Err(e) => {
                let detail = format!("could not start {shown} (action #{number}): no thread: {e}");
                Some(audit(obs.iteration, "spawn_failed", 0.0, detail))
            }
        }
    }

    /// Audit entries of executions that finished since the last call. Never blocks.
    pub fn poll_finished(&mut self) -> Vec<Finding> {
        let mut out = Vec::new();
        while let Ok(done) = self.rx.try_recv() {
            out.push(self.finish(done));
        }
        out
    }

    /// Wait up to `limit` for running executions to finish (end of a headless run, tests).
    pub fn wait_finished(&mut self, limit: Duration) -> Vec<Finding> {
        let until = Instant::now() + limit;
        let mut out = self.poll_finished();
        while self.running() > 0 {
            let left = until.saturating_duration_since(Instant::now());
            if left.is_zero() {
                break;
            }
            match self.rx.recv_timeout(left) {
                Ok(done) => out.push(self.finish(done)),
                Err(_) => break,
            }
        }
        out
    }

    fn finish(&mut self, done: Done) -> Finding {
        if let Some(r) = self.running.get_mut(done.index) {
            *r = false;
        }
        let f = record_finding(&done.record);
        if self.history.len() == HISTORY_LIMIT {
            self.history.pop_front();
        }
        self.history.push_back(done.record);
        f
    }

    /// Number of executions still going.
    pub fn running(&self) -> usize {
        self.running.iter().filter(|r| **r).count()
    }

    /// The last [`HISTORY_LIMIT`] finished executions, oldest first.
    pub fn history(&self) -> impl Iterator<Item = &ActionRecord> {
        self.history.iter()
    }
}

fn execute(number: usize, verdict: Verdict, iteration: i64, inv: Invocation) -> ActionRecord {
    let spec = ExecSpec {
        program: inv.program,
        args: inv.args,
        env: inv.env,
        cwd: inv.cwd,
        timeout: inv.timeout,
    };
    let ExecResult { outcome, elapsed, stdout, stderr, lingering_killed } = exec::run(&spec);
    ActionRecord {
        action: number,
        argv: inv.argv,
        verdict,
        iteration,
        outcome,
        elapsed,
        timeout: spec.timeout,
        stdout: String::from_utf8_lossy(&stdout.head).into_owned(),
        stderr: String::from_utf8_lossy(&stderr.head).into_owned(),
        stdout_bytes: stdout.total,
        stderr_bytes: stderr.total,
        lingering_killed,
    }
}

fn audit(iteration: i64, statistic: &str, value: f64, detail: String) -> Finding {
    Finding {
        kind: FindingKind::Action,
        series: None,
        first: iteration,
        last: iteration,
        statistic: statistic.to_string(),
        value,
        threshold: None,
        p_value: None,
        period: None,
        amplitude: None,
        supports: None,
        detail,
    }
}

/// The audit entry of a finished execution: `ran scancel 123456: exit 0 after 0.1 s`.
pub fn record_finding(r: &ActionRecord) -> Finding {
    let shown = display_argv(&r.argv);
    let first_line = |s: &str| {
        s.lines().map(str::trim).find(|l| !l.is_empty()).map(|l| {
            let l = sanitize_line(l);
            if l.chars().count() > 160 {
                format!("{}…", l.chars().take(160).collect::<String>())
            } else {
                l
            }
        })
    };
    let (statistic, value, mut detail) = match &r.outcome {
        Outcome::Exited { code: Some(c), .. } => (
            "exit_code",
            f64::from(*c),
            format!("ran {shown}: exit {c} after {}", fmt_secs(r.elapsed)),
        ),
        Outcome::Exited { signal, .. } => {
            let s = signal.unwrap_or(0);
            (
                "signal",
                f64::from(s),
                format!("ran {shown}: ended by signal {s} after {}", fmt_secs(r.elapsed)),
            )
        }
        Outcome::TimedOut => (
            "timeout_s",
            r.timeout.as_secs_f64(),
            format!(
                "ran {shown}: timed out after {}; its process group was killed",
                fmt_secs(r.timeout)
            ),
        ),
        Outcome::SpawnFailed(e) => {
            ("spawn_failed", 0.0, format!("could not start {shown}: {}", sanitize_line(e)))
        }
    };
    let failed = !matches!(r.outcome, Outcome::Exited { code: Some(0), .. });
    let excerpt = if failed {
        first_line(&r.stderr).or_else(|| first_line(&r.stdout))
    } else {
        first_line(&r.stdout).or_else(|| first_line(&r.stderr))
    };
    if let Some(l) = excerpt {
        detail.push_str("; output: ");
        detail.push_str(&l);
    }
    if r.lingering_killed {
        detail.push_str("; processes it left holding its output were killed at the timeout");
    }
    audit(r.iteration, statistic, value, detail)
}
