//! Headless output of `settle watch --headless`: one plain status line or one JSON object
//! per line, and the rule for when to print.
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
//! 2026-12-01T10:04:11Z duct-bend-07 converging | it 1450 | grew 4 s ago | 2/4 criteria met | open: p drop 2.1 dec (need >= 3), Cd drift 0.35 % (need <= 0.1) | eta ~900 it
//! 2026-12-01T10:09:40Z duct-bend-07 stalled since it 3140 | it 4870 | grew 9 s ago | 3/4 criteria met | open: p drop 2.1 dec (need >= 3) | why: <detail of the deciding finding>
//! 2026-12-01T10:09:41Z duct-bend-07 action | ran scancel 123456: exit 0 after 0.1 s
//! ```
//!
//! JSON line keys (stable; new keys may be added at the end, none renamed or removed):
//!
//! | key | value |
//! | --- | --- |
//! | `time` | UTC, RFC 3339 to the second (`2026-12-01T10:04:11Z`) |
//! | `event` | `change` (first judgement, verdict or a criterion's met flag changed), `heartbeat`, `action`, `end` |
//! | `run` | run name |
//! | `verdict` | verdict word (absent in `action` lines) |
//! | `since` | iteration the verdict holds since, or `null` |
//! | `iteration` | last iteration seen (for `action`: iteration at which it fired) |
//! | `grew_s_ago` | seconds since the log last grew, or `null` |
//! | `criteria` | list of `{name, series, value, threshold, comparison, unit, met}`; `value` is `null` when not computable yet, `comparison` is `at_least` or `at_most` |
//! | `causes` | list of `{kind, series, detail}` of the findings that decided the verdict |
//! | `eta_iterations` | estimated iterations until the slowest residual reaches its target (converging only), or `null` |
//! | `status`, `detail` | `action` lines only: the audit statistic (`exit_code`, `dry_run`, `timeout_s`, `refused`, ...) and its sentence |

use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use serde::Serialize;

use crate::judge::{Comparison, CriterionResult, Finding, FindingKind, Judgement, Verdict};

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
/// criterion's met flag changes (or a criterion appears or goes away), and otherwise a
/// heartbeat every `heartbeat`. Keep one per run.
#[derive(Debug, Clone, PartialEq)]
pub struct HeadlessState {
    heartbeat: Duration,
    last_print: Option<Instant>,
    verdict: Option<Verdict>,
    met: Vec<(String, String, bool)>,
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
        HeadlessState { heartbeat, last_print: None, verdict: None, met: Vec::new() }
    }

    /// Whether to print a status line for `j` now, and why. Calling it records the print.
    pub fn should_print(&mut self, j: &Judgement, now: Instant) -> Option<PrintReason> {
        let mut met: Vec<(String, String, bool)> =
            j.criteria.iter().map(|c| (c.name.clone(), c.series.clone(), c.met)).collect();
        met.sort();
        let reason = match (self.verdict, self.last_print) {
            (None, _) | (_, None) => Some(PrintReason::First),
            (Some(v), _) if v != j.verdict => Some(PrintReason::Verdict),
            _ if met != self.met => Some(PrintReason::Criteria),
            (_, Some(t)) if now.saturating_duration_since(t) >= self.heartbeat => {
                Some(PrintReason::Heartbeat)
            }
            _ => None,
        };
        self.verdict = Some(j.verdict);
        self.met = met;
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
    let mut head = format!("{} {} {}", rfc3339(now), run, j.verdict);
    if let (Some(s), true) = (j.since, j.verdict != Verdict::Converging) {
        head.push_str(&format!(" since it {s}"));
    }
    let mut parts = vec![head, format!("it {}", j.iterations)];
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
            let mut shown: Vec<String> = open.iter().take(3).map(|c| criterion_text(c)).collect();
            if open.len() > 3 {
                shown.push(format!("+{} more", open.len() - 3));
            }
            parts.push(format!("open: {}", shown.join(", ")));
        }
    }
    if let Some(eta) = eta(j) {
        parts.push(format!("eta ~{} it", round_eta(eta)));
    }
    if !matches!(j.verdict, Verdict::Converging | Verdict::Converged) {
        if let Some(f) = j.causes.iter().find_map(|&i| j.findings.get(i)) {
            parts.push(format!("why: {}", shorten(&f.detail, 200)));
        }
    }
    clean(&parts.join(" | "))
}

/// The plain line of an action audit entry.
pub fn action_line(run: &str, f: &Finding, now: SystemTime) -> String {
    clean(&format!("{} {} action | {}", rfc3339(now), run, f.detail))
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
    let finite = |v: f64| v.is_finite().then_some(v);
    let line = JsonStatus {
        time: rfc3339(now),
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
        eta_iterations: eta(j).map(f64::round),
    };
    to_json(&line)
}

/// An action audit entry as one JSON object (`event` = `action`).
pub fn json_action_line(run: &str, f: &Finding, now: SystemTime) -> String {
    to_json(&JsonAction {
        time: rfc3339(now),
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

/// Iterations until the slowest residual reaches its target, while converging.
fn eta(j: &Judgement) -> Option<f64> {
    if j.verdict != Verdict::Converging {
        return None;
    }
    j.residuals
        .iter()
        .filter_map(|r| r.eta_iterations)
        .filter(|e| e.is_finite() && *e >= 0.0)
        .reduce(f64::max)
}

/// Round an estimate to what it is worth: exact below 100, two significant digits above.
fn round_eta(e: f64) -> String {
    if e < 100.0 {
        return format!("{}", e.round());
    }
    let mag = 10f64.powi(e.log10().floor() as i32 - 1);
    format!("{}", (e / mag).round() * mag)
}

/// `p drop 2.1 dec (need >= 3)`.
fn criterion_text(c: &CriterionResult) -> String {
    let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
    let cmp = match c.comparison {
        Comparison::AtLeast => ">=",
        Comparison::AtMost => "<=",
    };
    format!(
        "{} {} {}{unit} (need {cmp} {})",
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

/// UTC time as RFC 3339 to the second: `2026-12-01T10:04:11Z`.
pub fn rfc3339(t: SystemTime) -> String {
    let secs: i64 = match t.duration_since(UNIX_EPOCH) {
        Ok(d) => i64::try_from(d.as_secs()).unwrap_or(i64::MAX),
        Err(e) => -i64::try_from(e.duration().as_secs_f64().ceil() as u64).unwrap_or(i64::MAX),
    };
    let days = secs.div_euclid(86_400);
    let sod = secs.rem_euclid(86_400);
    let (y, m, d) = civil_from_days(days);
    format!("{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z", sod / 3600, sod % 3600 / 60, sod % 60)
}

/// Proleptic Gregorian date of a day count since 1970-01-01 (H. Hinnant, "chrono-Compatible
/// Low-Level Date Algorithms", `civil_from_days`).
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates() {
        // Check values: `date -u -d @SECONDS` (GNU coreutils), common practice, no source.
        assert_eq!(rfc3339(UNIX_EPOCH), "1970-01-01T00:00:00Z");
        assert_eq!(rfc3339(UNIX_EPOCH + Duration::from_secs(951_782_400)), "2000-02-29T00:00:00Z");
        assert_eq!(
            rfc3339(UNIX_EPOCH + Duration::from_secs(1_796_119_451)),
            "2026-12-01T10:04:11Z"
        );
        assert_eq!(rfc3339(UNIX_EPOCH - Duration::from_secs(1)), "1969-12-31T23:59:59Z");
        assert_eq!(
            rfc3339(UNIX_EPOCH + Duration::from_secs(4_107_542_399)),
            "2100-02-28T23:59:59Z"
        );
    }

    #[test]
    fn numbers() {
        assert_eq!(fmt_num(2.1), "2.1");
        assert_eq!(fmt_num(3.0), "3");
        assert_eq!(fmt_num(0.0312), "0.0312");
        assert_eq!(fmt_num(0.03), "0.03");
        assert_eq!(fmt_num(1450.0), "1450");
        assert_eq!(fmt_num(12.345), "12.3");
        assert_eq!(fmt_num(1e-5), "1.00e-5");
        assert_eq!(fmt_num(-2.5e7), "-2.50e7");
        assert_eq!(fmt_num(f64::NAN), "n/a");
        assert_eq!(fmt_num(0.0), "0");
        assert_eq!(round_eta(42.4), "42");
        assert_eq!(round_eta(912.0), "910");
        assert_eq!(round_eta(12_345.0), "12000");
    }

    #[test]
    fn ages() {
        assert_eq!(fmt_age(Duration::from_secs(4)), "4 s");
        assert_eq!(fmt_age(Duration::from_secs(600)), "10 min");
        assert_eq!(fmt_age(Duration::from_secs(9000)), "2.5 h");
    }

    #[test]
    fn cleaning() {
        assert_eq!(clean("a\tb"), "a       b");
        assert_eq!(clean("abcdefgh\tx"), "abcdefgh        x");
        assert_eq!(clean("x\x1b[31my\r\n"), "x^[[31my  ");
        assert_eq!(clean("\u{9b}z\x7f"), "\\u{9b}z^?");
    }

    /// A hand-built judgement of the invented tarn case `duct-bend-07` (demo numbers).
    fn stalled() -> Judgement {
        use crate::judge::{Finding, ResidualSummary};
        let crit = |name: &str, series: &str, cmp, thr, value, unit: &str, met| CriterionResult {
            name: name.into(),
            series: series.into(),
            comparison: cmp,
            threshold: thr,
            value,
            unit: unit.into(),
            met,
            since: None,
            default: true,
            ..Default::default()
        };
        Judgement {
            verdict: Verdict::Stalled,
            since: Some(3140),
            causes: vec![1],
            findings: vec![
                Finding {
                    kind: FindingKind::Trend,
                    detail: "Ux falling".into(),
                    ..Finding::default()
                },
                Finding {
                    kind: FindingKind::Stall,
                    series: Some("p".into()),
                    first: 3140,
                    last: 4870,
                    statistic: "slope_dec_per_kit".into(),
                    value: -0.02,
                    detail: "p slope -0.02 dec/kit\t(95 % CI -0.05..+0.01) for 1730 it".into(),
                    ..Finding::default()
                },
            ],
            criteria: vec![
                crit("drop", "Ux", Comparison::AtLeast, 3.0, 4.2, "dec", true),
                crit("drop", "p", Comparison::AtLeast, 3.0, 2.1, "dec", false),
                crit("drift", "Cd", Comparison::AtMost, 0.1, 0.04, "%", true),
                crit("band", "Cd", Comparison::AtMost, 0.5, f64::NAN, "%", false),
            ],
            residuals: vec![ResidualSummary {
                series: "p".into(),
                eta_iterations: Some(912.0),
                ..ResidualSummary::default()
            }],
            monitors: vec![],
            iterations: 4870,
        }
    }

    fn at() -> SystemTime {
        UNIX_EPOCH + Duration::from_secs(1_796_119_451)
    }

    #[test]
    fn status_line_exact() {
        let j = stalled();
        assert_eq!(
            status_line("duct-bend-07", &j, Some(Duration::from_secs(9)), at()),
            "2026-12-01T10:04:11Z duct-bend-07 stalled since it 3140 | it 4870 | grew 9 s ago \
             | 2/4 criteria met | open: p drop 2.1 dec (need >= 3), Cd band n/a % (need <= 0.5) \
             | why: p slope -0.02 dec/kit        (95 % CI -0.05..+0.01) for 1730 it",
            "the tab after dec/kit is expanded to the next multiple of 8 columns"
        );
        let mut c = j.clone();
        c.verdict = Verdict::Converging;
        c.since = None;
        assert_eq!(
            status_line("duct-bend-07", &c, None, at()),
            "2026-12-01T10:04:11Z duct-bend-07 converging | it 4870 | 2/4 criteria met \
             | open: p drop 2.1 dec (need >= 3), Cd band n/a % (need <= 0.5) | eta ~910 it"
        );
        let mut d = j.clone();
        d.verdict = Verdict::Converged;
        d.since = Some(4500);
        for c in &mut d.criteria {
            c.met = true;
        }
        assert_eq!(
            status_line("duct\x1b[2J-bend", &d, Some(Duration::from_secs(600)), at()),
            "2026-12-01T10:04:11Z duct^[[2J-bend converged since it 4500 | it 4870 \
             | grew 10 min ago | all 4 criteria met"
        );
    }

    #[test]
    fn many_open_criteria_are_summarised() {
        let mut j = stalled();
        let c = j.criteria[1].clone();
        j.criteria =
            (0..5).map(|i| CriterionResult { series: format!("r{i}"), ..c.clone() }).collect();
        let line = status_line("x", &j, None, at());
        assert!(line.contains("0/5 criteria met | open: r0 drop 2.1 dec (need >= 3), r1 drop"));
        assert!(line.contains("r2 drop 2.1 dec (need >= 3), +2 more | why:"), "{line}");
    }

    #[test]
    fn json_line_parses_back_with_stable_keys() {
        let j = stalled();
        let line = json_line(
            "duct-bend-07",
            &j,
            Some(Duration::from_millis(9040)),
            at(),
            HeadlessEvent::Change,
        );
        assert!(!line.contains('\n'));
        let v: serde_json::Value = serde_json::from_str(&line).expect("valid JSON");
        let keys: Vec<&str> = v.as_object().expect("object").keys().map(String::as_str).collect();
        let mut expected = vec![
            "time",
            "event",
            "run",
            "verdict",
            "since",
            "iteration",
            "grew_s_ago",
            "criteria",
            "causes",
            "eta_iterations",
        ];
        let mut sorted = keys.clone();
        sorted.sort();
        expected.sort();
        assert_eq!(sorted, expected);
        assert_eq!(v["time"], "2026-12-01T10:04:11Z");
        assert_eq!(v["event"], "change");
        assert_eq!(v["run"], "duct-bend-07");
        assert_eq!(v["verdict"], "stalled");
        assert_eq!(v["since"], 3140);
        assert_eq!(v["iteration"], 4870);
        assert_eq!(v["grew_s_ago"], 9.0);
        assert_eq!(v["eta_iterations"], serde_json::Value::Null, "eta only while converging");
        let c = &v["criteria"][1];
        assert_eq!(c["name"], "drop");
        assert_eq!(c["series"], "p");
        assert_eq!(c["value"], 2.1);
        assert_eq!(c["threshold"], 3.0);
        assert_eq!(c["comparison"], "at_least");
        assert_eq!(c["unit"], "dec");
        assert_eq!(c["met"], false);
        assert_eq!(v["criteria"][3]["value"], serde_json::Value::Null, "NaN becomes null");
        assert_eq!(v["causes"].as_array().map(Vec::len), Some(1));
        assert_eq!(v["causes"][0]["kind"], "stall");
        assert_eq!(v["causes"][0]["series"], "p");
        assert_eq!(
            v["causes"][0]["detail"], "p slope -0.02 dec/kit\t(95 % CI -0.05..+0.01) for 1730 it",
            "JSON keeps text lossless (escaped)"
        );
        let mut c = j.clone();
        c.verdict = Verdict::Converging;
        let v: serde_json::Value =
            serde_json::from_str(&json_line("r", &c, None, at(), HeadlessEvent::Heartbeat))
                .expect("valid JSON");
        assert_eq!(v["event"], "heartbeat");
        assert_eq!(v["grew_s_ago"], serde_json::Value::Null);
        assert_eq!(v["eta_iterations"], 912.0);
        let v: serde_json::Value =
            serde_json::from_str(&json_line("r", &c, None, at(), HeadlessEvent::End))
                .expect("JSON");
        assert_eq!(v["event"], "end");
    }

    #[test]
    fn action_lines() {
        let f = Finding {
            kind: FindingKind::Action,
            first: 4870,
            last: 4870,
            statistic: "exit_code".into(),
            detail: "ran scancel 123456: exit 0 after 0.1 s".into(),
            ..Finding::default()
        };
        assert_eq!(
            action_line("duct-bend-07", &f, at()),
            "2026-12-01T10:04:11Z duct-bend-07 action | ran scancel 123456: exit 0 after 0.1 s"
        );
        let v: serde_json::Value =
            serde_json::from_str(&json_action_line("duct-bend-07", &f, at())).expect("JSON");
        assert_eq!(v["event"], "action");
        assert_eq!(v["iteration"], 4870);
        assert_eq!(v["status"], "exit_code");
        assert_eq!(v["detail"], "ran scancel 123456: exit 0 after 0.1 s");
        let s = HeadlessState::default();
        assert_eq!(s.should_print_finding(&f), Some(HeadlessEvent::Action));
        assert_eq!(s.should_print_finding(&Finding::default()), None);
    }

    #[test]
    fn change_detection_sequence() {
        let mut s = HeadlessState::new(Duration::from_secs(60));
        let t0 = Instant::now();
        let t = |secs: u64| t0 + Duration::from_secs(secs);
        let mut j = stalled();
        assert_eq!(s.should_print(&j, t(0)), Some(PrintReason::First));
        assert_eq!(s.should_print(&j, t(1)), None);
        j.criteria[1].value = 2.2; // a value alone is no change
        j.iterations = 4900;
        assert_eq!(s.should_print(&j, t(2)), None);
        j.criteria[1].met = true;
        assert_eq!(s.should_print(&j, t(3)), Some(PrintReason::Criteria));
        assert_eq!(s.should_print(&j, t(4)), None);
        j.verdict = Verdict::Converging;
        assert_eq!(s.should_print(&j, t(5)), Some(PrintReason::Verdict));
        assert_eq!(PrintReason::Verdict.event(), HeadlessEvent::Change);
        assert_eq!(s.should_print(&j, t(64)), None, "59 s after the last line");
        assert_eq!(s.should_print(&j, t(65)), Some(PrintReason::Heartbeat));
        assert_eq!(PrintReason::Heartbeat.event().as_str(), "heartbeat");
        assert_eq!(s.should_print(&j, t(100)), None);
        j.criteria.pop(); // a criterion going away is a change
        assert_eq!(s.should_print(&j, t(101)), Some(PrintReason::Criteria));
        assert_eq!(s.should_print(&j, t(161)), Some(PrintReason::Heartbeat));
    }
}
