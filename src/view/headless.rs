//! Headless output of `settle watch --headless`: one plain status line or one JSON object
//! per line, and the rule for when to print; the state lines of runs without a verdict are
//! in [`state`].
//!
//! Pure formatting: the caller owns the loop, the clock and the writer. Text lines hold no
//! colour and no control characters (C0/C1 controls and DEL become `^X` or `\u{..}`, tabs
//! are expanded to the next multiple of 8 columns), so they are safe in a log file, under
//! `tmux` and through `grep`. JSON lines are lossless: serde_json escapes every control
//! character, so they are just as safe on a terminal.
//!
//! Text line, fields separated by ` | ` (absent facts are left out):
//!
//! ```text
//! 2026-12-01T10:04:11Z duct-bend-07 converging | it 1450 | grew 4 s ago | 2/4 criteria met | open: p drop 2.1 dec (need >= 3), Cd drift 0.35 % (need <= 0.1; window 312 it) | eta ~900 it (600-1400)
//! 2026-12-01T10:09:40Z duct-bend-07 stalled since it 3140 | it 4870 | grew 9 s ago | 3/4 criteria met | open: p drop 2.1 dec (need >= 3) | why: <detail of the deciding finding>
//! 2026-12-01T10:09:41Z duct-bend-07 action | ran scancel 123456: exit 0 after 0.1 s
//! ```
//!
//! JSON line keys (stable; new keys may be added at the end, none renamed or removed):
//!
//! | key | value |
//! | --- | --- |
//! | `time` | UTC, RFC 3339 to the second (`2026-12-01T10:04:11Z`) |
//! | `event` | `change` (first judgement, verdict or a criterion's met flag changed; a new state), `heartbeat`, `action`, `end` |
//! | `run` | run name |
//! | `verdict` | verdict word (absent in `action` and state lines) |
//! | `since` | iteration the verdict holds since, or `null` |
//! | `iteration` | last iteration seen (for `action`: iteration at which it fired) |
//! | `grew_s_ago` | seconds since the log last grew, or `null` |
//! | `criteria` | list of `{name, series, value, threshold, comparison, unit, met}`; `value` is `null` when not computable yet, `comparison` is `at_least` or `at_most` |
//! | `causes` | list of `{kind, series, detail}` of the findings that decided the verdict |
//! | `eta_iterations` | estimated iterations until the slowest residual reaches its target (converging only), or `null` |
//! | `criteria[].window` | monitor criteria: the window (iterations) the value was computed over, else `null` |
//! | `status`, `detail` | `action` lines only: the audit statistic (`exit_code`, `dry_run`, `timeout_s`, `refused`, ...) and its sentence |
//! | `read_iteration` | last iteration read from the log (ahead of `iteration` while the judge is throttled), or `null` |
//! | `eta_range` | `[fewest, most]` iterations of that estimate (from the 95 % interval of the rate), or `null` |
//! | `not_judged` | monitors shown but not judged because they carry only round-off (list of names) |
//! | `state`, `detail`, `percent_read` | state lines only (no `verdict`): `waiting`, `reading`, `unreadable`, `no-parser`, `nothing-to-judge` or `stale`, the reason, and the share of a large read done (see [`RunState`]) |

mod state;

pub use state::{
    RunState, STOPPED_NOTE, StateReport, json_state_line, nothing_state, run_state, state_line,
};

use std::time::{Duration, Instant, SystemTime};

use serde::Serialize;

use crate::judge::{
    Comparison, CriterionResult, Finding, FindingKind, Judgement, ResidualSummary, Verdict,
};
use crate::view::time::format_utc;
use crate::view::{evidence, words};

/// Why a JSON line was written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum HeadlessEvent {
    /// First judgement, or the verdict or a criterion's met flag changed.
    Change,
    /// Nothing changed for the heartbeat interval.
    Heartbeat,
    /// An action audit entry.
    Action,
    /// The last line of a run (watch ended).
    End,
}

impl HeadlessEvent {
    pub fn as_str(self) -> &'static str {
        match self {
            HeadlessEvent::Change => "change",
            HeadlessEvent::Heartbeat => "heartbeat",
            HeadlessEvent::Action => "action",
            HeadlessEvent::End => "end",
        }
    }
}

/// Why [`HeadlessState::should_print`] wants a line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum PrintReason {
    First,
    Verdict,
    Criteria,
    Heartbeat,
}

impl PrintReason {
    pub fn as_str(self) -> &'static str {
        match self {
            PrintReason::First => "first",
            PrintReason::Verdict => "verdict",
            PrintReason::Criteria => "criteria",
            PrintReason::Heartbeat => "heartbeat",
        }
    }

    /// The `event` of the JSON line this reason prints.
    pub fn event(self) -> HeadlessEvent {
        match self {
            PrintReason::Heartbeat => HeadlessEvent::Heartbeat,
            _ => HeadlessEvent::Change,
        }
    }
}

/// When to print for one run: on the first judgement, when the verdict changes, when any
/// criterion's met flag changes (or a criterion appears or goes away) or the monitors not
/// judged change, and otherwise a heartbeat every `heartbeat`. Keep one per run.
#[derive(Debug, Clone, PartialEq)]
pub struct HeadlessState {
    heartbeat: Duration,
    last_print: Option<Instant>,
    verdict: Option<Verdict>,
    met: Vec<(String, String, bool)>,
    /// Monitors not judged (round-off only) at the last call.
    not_judged: Vec<String>,
}

impl Default for HeadlessState {
    fn default() -> Self {
        HeadlessState::new(HeadlessState::DEFAULT_HEARTBEAT)
    }
}

impl HeadlessState {
    /// Default heartbeat: one line a minute keeps a quiet run visibly alive in a log
    /// without flooding it.
    pub const DEFAULT_HEARTBEAT: Duration = Duration::from_secs(60);

    pub fn new(heartbeat: Duration) -> HeadlessState {
        HeadlessState {
            heartbeat,
            last_print: None,
            verdict: None,
            met: Vec::new(),
            not_judged: Vec::new(),
        }
    }

    /// Whether to print a status line for `j` now, and why. Calling it records the print.
    pub fn should_print(&mut self, j: &Judgement, now: Instant) -> Option<PrintReason> {
        let mut met: Vec<(String, String, bool)> =
            j.criteria.iter().map(|c| (c.name.clone(), c.series.clone(), c.met)).collect();
        met.sort();
        let not_judged: Vec<String> =
            evidence::round_off_monitors(j).into_iter().map(str::to_string).collect();
        let reason = match (self.verdict, self.last_print) {
            (None, _) | (_, None) => Some(PrintReason::First),
            (Some(v), _) if v != j.verdict => Some(PrintReason::Verdict),
            _ if met != self.met || not_judged != self.not_judged => Some(PrintReason::Criteria),
            (_, Some(t)) if now.saturating_duration_since(t) >= self.heartbeat => {
                Some(PrintReason::Heartbeat)
            }
            _ => None,
        };
        self.verdict = Some(j.verdict);
        self.met = met;
        self.not_judged = not_judged;
        if reason.is_some() {
            self.last_print = Some(now);
        }
        reason
    }

    /// Action audit entries are always printed; other findings are not (they are in the
    /// status lines' causes).
    pub fn should_print_finding(&self, f: &Finding) -> Option<HeadlessEvent> {
        (f.kind == FindingKind::Action).then_some(HeadlessEvent::Action)
    }
}

/// The plain status line of a run.
pub fn status_line(
    run: &str,
    j: &Judgement,
    last_growth_age: Option<Duration>,
    now: SystemTime,
) -> String {
    status_line_read(run, j, None, last_growth_age, now)
}

/// [`status_line`] that also says how far the log was read when the judgement lags behind
/// it (`it 1450 (read to 1462)`): the judge is throttled with many runs, but the watcher is
/// not stuck.
pub fn status_line_read(
    run: &str,
    j: &Judgement,
    read_iteration: Option<i64>,
    last_growth_age: Option<Duration>,
    now: SystemTime,
) -> String {
    let mut head = format!("{} {} {}", format_utc(now), run, j.verdict);
    if let (Some(s), true) = (j.since, j.verdict != Verdict::Converging) {
        head.push_str(&format!(" since it {s}"));
    }
    let it = match read_iteration {
        Some(r) if r > j.iterations => format!("it {} (read to {r})", j.iterations),
        _ => format!("it {}", j.iterations),
    };
    let mut parts = vec![head, it];
    if let Some(age) = last_growth_age {
        parts.push(format!("grew {} ago", fmt_age(age)));
    }
    if !j.criteria.is_empty() {
        let met = j.criteria.iter().filter(|c| c.met).count();
        let total = j.criteria.len();
        if met == total {
            parts.push(format!("all {total} criteria met"));
        } else {
            parts.push(format!("{met}/{total} criteria met"));
            let open: Vec<&CriterionResult> = j.criteria.iter().filter(|c| !c.met).collect();
            let mut shown: Vec<String> =
                open.iter().take(3).map(|c| criterion_text(j, c)).collect();
            if open.len() > 3 {
                shown.push(format!("+{} more", open.len() - 3));
            }
            parts.push(format!("open: {}", shown.join(", ")));
        }
    }
    if let Some(eta) = eta_residual(j).and_then(|r| evidence::eta_words(r, "-")) {
        parts.push(format!("eta {eta}"));
    }
    let round_off = evidence::round_off_monitors(j);
    if !round_off.is_empty() {
        parts.push(format!("{} {}", round_off.join(", "), evidence::ROUND_OFF_WORDS));
    }
    if !matches!(j.verdict, Verdict::Converging | Verdict::Converged) {
        if let Some(f) = j.causes.iter().find_map(|&i| j.findings.get(i)) {
            parts.push(format!("why: {}", shorten(&words::without_backticks(&f.detail), 200)));
        }
    }
    clean(&parts.join(" | "))
}

/// The plain line of an action audit entry.
pub fn action_line(run: &str, f: &Finding, now: SystemTime) -> String {
    clean(&format!("{} {} action | {}", format_utc(now), run, f.detail))
}

#[derive(Serialize)]
struct JsonCriterion<'a> {
    name: &'a str,
    series: &'a str,
    value: Option<f64>,
    threshold: Option<f64>,
    comparison: Comparison,
    unit: &'a str,
    met: bool,
    /// Monitor criteria: the window the value was computed over, in iterations.
    window: Option<usize>,
}

#[derive(Serialize)]
struct JsonCause<'a> {
    kind: &'static str,
    series: Option<&'a str>,
    detail: &'a str,
}

#[derive(Serialize)]
struct JsonStatus<'a> {
    time: String,
    event: &'static str,
    run: &'a str,
    verdict: Verdict,
    since: Option<i64>,
    iteration: i64,
    grew_s_ago: Option<f64>,
    criteria: Vec<JsonCriterion<'a>>,
    causes: Vec<JsonCause<'a>>,
    eta_iterations: Option<f64>,
    read_iteration: Option<i64>,
    eta_range: Option<[f64; 2]>,
    not_judged: Vec<&'a str>,
}

#[derive(Serialize)]
struct JsonAction<'a> {
    time: String,
    event: &'static str,
    run: &'a str,
    iteration: i64,
    status: &'a str,
    detail: &'a str,
}

/// The status of a run as one JSON object (no trailing newline).
pub fn json_line(
    run: &str,
    j: &Judgement,
    last_growth_age: Option<Duration>,
    now: SystemTime,
    event: HeadlessEvent,
) -> String {
    json_line_read(run, j, None, last_growth_age, now, event)
}

/// [`json_line`] with the last iteration read (`read_iteration`, `null` when unknown).
pub fn json_line_read(
    run: &str,
    j: &Judgement,
    read_iteration: Option<i64>,
    last_growth_age: Option<Duration>,
    now: SystemTime,
    event: HeadlessEvent,
) -> String {
    let finite = |v: f64| v.is_finite().then_some(v);
    let line = JsonStatus {
        time: format_utc(now),
        event: event.as_str(),
        run,
        verdict: j.verdict,
        since: j.since,
        iteration: j.iterations,
        grew_s_ago: last_growth_age.map(|d| (d.as_secs_f64() * 10.0).round() / 10.0),
        criteria: j
            .criteria
            .iter()
            .map(|c| JsonCriterion {
                name: &c.name,
                series: &c.series,
                value: finite(c.value),
                threshold: finite(c.threshold),
                comparison: c.comparison,
                unit: &c.unit,
                met: c.met,
                window: c.window,
            })
            .collect(),
        causes: j
            .causes
            .iter()
            .filter_map(|&i| j.findings.get(i))
            .map(|f| JsonCause {
                kind: f.kind.as_str(),
                series: f.series.as_deref(),
                detail: &f.detail,
            })
            .collect(),
        eta_iterations: eta_residual(j).and_then(|r| r.eta_iterations).map(f64::round),
        read_iteration,
        eta_range: eta_residual(j).and_then(|r| r.eta_range).map(|(a, b)| [a.round(), b.round()]),
        not_judged: evidence::round_off_monitors(j),
    };
    to_json(&line)
}

/// An action audit entry as one JSON object (`event` = `action`).
pub fn json_action_line(run: &str, f: &Finding, now: SystemTime) -> String {
    to_json(&JsonAction {
        time: format_utc(now),
        event: HeadlessEvent::Action.as_str(),
        run,
        iteration: f.last,
        status: &f.statistic,
        detail: &f.detail,
    })
}

fn to_json<T: Serialize>(v: &T) -> String {
    // Serialising plain structs of strings, numbers and options into a String cannot fail.
    serde_json::to_string(v).unwrap_or_else(|e| format!("{{\"error\":\"{e}\"}}"))
}

/// The residual the run waits for (the slowest to reach its target), while converging.
fn eta_residual(j: &Judgement) -> Option<&ResidualSummary> {
    if j.verdict != Verdict::Converging {
        return None;
    }
    evidence::slowest_residual(j)
}

/// `p drop 2.1 dec (need >= 3)`; a monitor criterion also says its window and, when it is
/// not the mean, its reference: `Fy drift 2.1 % (need <= 0.1; window 312 it, relative to
/// 0.0183 (mean near zero))`.
fn criterion_text(j: &Judgement, c: &CriterionResult) -> String {
    let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
    let cmp = match c.comparison {
        Comparison::AtLeast => ">=",
        Comparison::AtMost => "<=",
    };
    let basis = evidence::criterion_basis(j, c).map(|b| format!("; {b}")).unwrap_or_default();
    format!(
        "{} {} {}{unit} (need {cmp} {}{basis})",
        c.series,
        c.name,
        fmt_num(c.value),
        fmt_num(c.threshold)
    )
}

/// Three significant digits, scientific outside [1e-3, 1e5); `n/a` for NaN.
pub fn fmt_num(v: f64) -> String {
    if v.is_nan() {
        return "n/a".into();
    }
    if v.is_infinite() {
        return if v > 0.0 { "inf".into() } else { "-inf".into() };
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if !(1e-3..1e5).contains(&a) {
        return format!("{v:.2e}");
    }
    let decimals = (2 - a.log10().floor() as i32).clamp(0, 5) as usize;
    let s = format!("{v:.decimals$}");
    if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

/// `4 s`, `3 min`, `2.5 h`.
fn fmt_age(d: Duration) -> String {
    let s = d.as_secs();
    if s < 120 {
        format!("{s} s")
    } else if s < 7200 {
        format!("{} min", s / 60)
    } else {
        format!("{:.1} h", d.as_secs_f64() / 3600.0)
    }
}

fn shorten(s: &str, max_chars: usize) -> String {
    if s.chars().count() <= max_chars {
        s.to_string()
    } else {
        let mut t: String = s.chars().take(max_chars - 1).collect();
        t.push('…');
        t
    }
}

/// One line safe for a terminal: tabs expanded to the next multiple of 8 columns, newlines
/// and carriage returns as a space, other C0 controls and DEL as `^X`, C1 controls as
/// `\u{..}`.
pub fn clean(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    let mut col = 0usize;
    for c in s.chars() {
        match c {
            '\t' => {
                let n = 8 - col % 8;
                out.extend(std::iter::repeat_n(' ', n));
                col += n;
            }
            '\n' | '\r' => {
                out.push(' ');
                col += 1;
            }
            '\x7f' => {
                out.push_str("^?");
                col += 2;
            }
            c if (c as u32) < 0x20 => {
                out.push('^');
                out.push(char::from(b'@' + c as u8));
                col += 2;
            }
            c if c.is_control() => {
                let e = format!("\\u{{{:x}}}", c as u32);
                col += e.len();
                out.push_str(&e);
            }
            c => {
                out.push(c);
                col += 1;
            }
        }
    }
    out
}

#[cfg(test)]
mod tests;
