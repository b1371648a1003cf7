//! What the headless watcher says about a run whose data cannot be judged (yet): no records
//! at all, or a large first read still in progress. Such a run gets a *state* line with its
//! reason, never a verdict: a verdict of no data would be made up.
//!
//! States, worst first (a run with several sources shows the worst):
//!
//! | state | meaning |
//! | --- | --- |
//! | `no-parser` | lines were read but no parser definition claims them (after 64 KiB the source stops: final) |
//! | `unreadable` | the file (or its directory) exists but cannot be read; retried |
//! | `nothing-to-judge` | records were read, but no value, or every series is `info` or ignored (the judge's reason, [`crate::view::evidence::no_verdict_reason`]) |
//! | `stale` | none of the above got better, or no record came, for the stale limit; final |
//! | `waiting` | the file does not exist yet, or it holds no record yet |
//! | `reading` | a large existing log is being read (percent done); its verdict comes when it is read |
//!
//! The reason is the follower's or the pipeline's own note (`waiting for … to appear`,
//! `cannot read …: Permission denied (os error 13); retrying`, `stopped reading: …`), so the
//! line says exactly what settle saw.

use std::time::{Duration, SystemTime};

use serde::Serialize;

use super::{HeadlessEvent, clean, fmt_age, format_utc, to_json};
use crate::follow::note;
use crate::judge::NothingToJudge;
use crate::run::ingest::SourceActivity;
use crate::run::store::RunStore;
use crate::view::evidence::no_verdict_reason;

/// First words of the note the live ingest loop gives when it stops reading a source (a file
/// no parser definition recognises within its first 64 KiB).
pub const STOPPED_NOTE: &str = "stopped reading: ";

/// What can be said of a run instead of a verdict.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum RunState {
    /// A large read is in progress: percent of the bytes read so far.
    Reading { percent: u8 },
    /// No file yet, or no record in it yet.
    Waiting,
    /// The file exists but cannot be read.
    Unreadable,
    /// Lines but no parser; `stopped`: the ingest loop gave up on the source.
    NoParser { stopped: bool },
    /// No record within the stale limit.
    Stale,
    /// Records, but no value or only `info` and ignored series: the criteria judge nothing.
    NothingToJudge,
}

impl RunState {
    /// The state word of status lines and the `state` JSON key.
    pub fn as_str(&self) -> &'static str {
        match self {
            RunState::Reading { .. } => "reading",
            RunState::Waiting => "waiting",
            RunState::Unreadable => "unreadable",
            RunState::NoParser { .. } => "no-parser",
            RunState::Stale => "stale",
            RunState::NothingToJudge => "nothing-to-judge",
        }
    }

    /// Nothing more can come: a watcher may stop (`--exit-when ended`).
    pub fn is_final(&self) -> bool {
        matches!(self, RunState::Stale | RunState::NoParser { stopped: true })
    }

    fn rank(&self) -> u8 {
        match self {
            RunState::NoParser { stopped: true } => 0,
            RunState::NoParser { stopped: false } => 1,
            RunState::Unreadable => 2,
            RunState::NothingToJudge => 3,
            RunState::Stale => 4,
            RunState::Waiting => 5,
            RunState::Reading { .. } => 6,
        }
    }
}

/// A run's state with the sentence that explains it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct StateReport {
    pub state: RunState,
    /// The reason: the source's label and its latest state note, or what was counted.
    pub detail: String,
}

/// The state of `store`'s run when it has no verdict to show: `None` when it has records
/// and no large read is in progress (then the judge speaks).
///
/// `quiet` is how long the run has shown no growth (since the watch started, or since its
/// last growth); past `stale_limit` a run without records is [`RunState::Stale`].
pub fn run_state(
    store: &RunStore,
    activity: &[SourceActivity],
    quiet: Duration,
    stale_limit: Duration,
) -> Option<StateReport> {
    let records: usize = store.sources.iter().map(|s| s.records()).sum();
    let several = store.sources.len() > 1;
    let mut worst: Option<StateReport> = None;
    let mut reading: Option<(u64, u64)> = None;
    for (i, src) in store.sources.iter().enumerate() {
        let act = activity.get(i).copied().unwrap_or_default();
        if let Some((read, total)) = act.progress {
            let r = reading.get_or_insert((0, 0));
            r.0 += read;
            r.1 += total;
            continue;
        }
        if records > 0 {
            // Only a large read holds back the verdict of a run with records; a source
            // whose read has begun but not finished (records, no growth time) is one.
            if src.records() > 0 && act.last_growth.is_none() {
                reading.get_or_insert((0, 0));
            }
            continue;
        }
        let (state, why) = source_state(src, &act);
        let detail = if several { format!("{}: {why}", src.label) } else { why };
        if worst.as_ref().is_none_or(|w| state.rank() < w.state.rank()) {
            worst = Some(StateReport { state, detail });
        }
    }
    if let Some((read, total)) = reading {
        let percent = read.saturating_mul(100).checked_div(total).unwrap_or(0).min(99);
        let detail = if total == 0 {
            "reading the existing log".to_string()
        } else {
            format!("reading the existing log: {} of {}", bytes(read), bytes(total))
        };
        return Some(StateReport { state: RunState::Reading { percent: percent as u8 }, detail });
    }
    if records > 0 {
        return None;
    }
    let mut report = worst
        .unwrap_or(StateReport { state: RunState::Waiting, detail: "no source to read".into() });
    if quiet > stale_limit && !report.state.is_final() {
        report.detail =
            format!("no record for {} (the stale limit): {}", fmt_age(quiet), report.detail);
        report.state = RunState::Stale;
    }
    Some(report)
}

/// The state of a run with records that the judge found nothing to judge in (no value, or
/// only `info` and ignored series), with the judge's reason worded by [`no_verdict_reason`].
pub fn nothing_state(why: &NothingToJudge) -> StateReport {
    StateReport { state: RunState::NothingToJudge, detail: no_verdict_reason(why) }
}

/// One source without records: what its latest state note, its lines and its parser say.
fn source_state(src: &crate::run::store::SourceStore, act: &SourceActivity) -> (RunState, String) {
    let last_state_note = src.notes.iter().rev().find(|n| {
        n.starts_with(note::WAITING)
            || n.starts_with(note::UNREADABLE)
            || n.starts_with(note::FOLLOWING)
            || n.starts_with(STOPPED_NOTE)
    });
    if let Some(n) = last_state_note {
        if n.starts_with(STOPPED_NOTE) {
            return (RunState::NoParser { stopped: true }, n.clone());
        }
        if n.starts_with(note::UNREADABLE) {
            return (RunState::Unreadable, n.clone());
        }
    }
    let lines = src.stats.lines;
    if act.last_growth.is_some() && src.parser == "-" {
        return (
            RunState::NoParser { stopped: false },
            "lines were read, but no parser definition recognises them yet (settle gives up \
             after 64 KiB; name one with --parser)"
                .into(),
        );
    }
    if act.last_growth.is_some() || lines > 0 {
        let what = if lines > 0 { format!("{lines} lines read") } else { "lines read".into() };
        return (RunState::Waiting, format!("{what}, no record yet (parser {})", src.parser));
    }
    match last_state_note {
        Some(n) if n.starts_with(note::WAITING) => (RunState::Waiting, n.clone()),
        _ => (RunState::Waiting, "no data yet".into()),
    }
}

fn bytes(n: u64) -> String {
    const MB: f64 = 1024.0 * 1024.0;
    if n < 1024 * 1024 { format!("{} KiB", n / 1024) } else { format!("{:.1} MiB", n as f64 / MB) }
}

/// The plain line of a run's state: `TIME RUN waiting | no records | why: …`.
pub fn state_line(
    run: &str,
    s: &StateReport,
    last_growth_age: Option<Duration>,
    now: SystemTime,
) -> String {
    let mut parts = vec![format!("{} {} {}", format_utc(now), run, s.state.as_str())];
    match s.state {
        RunState::Reading { percent } => parts.push(format!("{percent} % read")),
        RunState::NothingToJudge => parts.push("no verdict".into()),
        _ => parts.push("no records".into()),
    }
    if let Some(age) = last_growth_age {
        parts.push(format!("grew {} ago", fmt_age(age)));
    }
    parts.push(format!("why: {}", crate::view::words::without_backticks(&s.detail)));
    clean(&parts.join(" | "))
}

#[derive(Serialize)]
struct JsonState<'a> {
    time: String,
    event: &'static str,
    run: &'a str,
    state: &'static str,
    detail: &'a str,
    grew_s_ago: Option<f64>,
    percent_read: Option<u8>,
}

/// A run's state as one JSON object (no `verdict` key: there is none).
pub fn json_state_line(
    run: &str,
    s: &StateReport,
    last_growth_age: Option<Duration>,
    now: SystemTime,
    event: HeadlessEvent,
) -> String {
    to_json(&JsonState {
        time: format_utc(now),
        event: event.as_str(),
        run,
        state: s.state.as_str(),
        detail: &s.detail,
        grew_s_ago: last_growth_age.map(|d| (d.as_secs_f64() * 10.0).round() / 10.0),
        percent_read: match s.state {
            RunState::Reading { percent } => Some(percent),
            _ => None,
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run::store::SourceStore;

    fn store(notes: &[&str], parser: &str) -> RunStore {
        let mut st = RunStore::new("r");
        let mut src = SourceStore::new("tarn.log", parser);
        for n in notes {
            src.note(*n);
        }
        st.sources.push(src);
        st
    }

    const LIMIT: Duration = Duration::from_secs(300);

    #[test]
    fn states_without_records() {
        let idle = [SourceActivity::default()];
        let s = store(&["waiting for /c/tarn.log to appear"], "-");
        let r = run_state(&s, &idle, Duration::from_secs(1), LIMIT).expect("a state");
        assert_eq!(r.state, RunState::Waiting);
        assert_eq!(r.detail, "waiting for /c/tarn.log to appear");
        let r = run_state(&s, &idle, Duration::from_secs(301), LIMIT).expect("a state");
        assert_eq!(r.state, RunState::Stale);
        assert_eq!(
            r.detail,
            "no record for 5 min (the stale limit): waiting for /c/tarn.log to appear"
        );
        assert!(r.state.is_final());

        let s = store(
            &[
                "waiting for /c/tarn.log to appear",
                "cannot read /c/tarn.log: Permission denied (os error 13); retrying",
            ],
            "-",
        );
        let r = run_state(&s, &idle, Duration::ZERO, LIMIT).expect("a state");
        assert_eq!(r.state, RunState::Unreadable);
        assert!(r.detail.contains("Permission denied"));

        // Unreadable, then it could be opened: no longer unreadable.
        let s = store(&["cannot read /c/tarn.log: x; retrying", "following /c/tarn.log"], "-");
        assert_eq!(
            run_state(&s, &idle, Duration::ZERO, LIMIT).expect("state").state,
            RunState::Waiting
        );

        let grew = [SourceActivity { last_growth: Some(SystemTime::now()), progress: None }];
        let s = store(&[], "-");
        let r = run_state(&s, &grew, Duration::ZERO, LIMIT).expect("a state");
        assert_eq!(r.state, RunState::NoParser { stopped: false });
        assert!(!r.state.is_final());
        let s = store(
            &[
                "stopped reading: j.txt: no parser definition recognises this file; name one with --parser",
            ],
            "-",
        );
        let r = run_state(&s, &grew, Duration::ZERO, LIMIT).expect("a state");
        assert_eq!(r.state, RunState::NoParser { stopped: true });
        assert!(r.state.is_final());
        assert!(r.detail.starts_with("stopped reading: j.txt"));
    }

    #[test]
    fn a_large_read_holds_back_the_verdict() {
        let s = store(&[], "tarn");
        let reading =
            [SourceActivity { last_growth: None, progress: Some((256 << 20, 1024 << 20)) }];
        let r = run_state(&s, &reading, Duration::ZERO, LIMIT).expect("a state");
        assert_eq!(r.state, RunState::Reading { percent: 25 });
        assert_eq!(r.detail, "reading the existing log: 256.0 MiB of 1024.0 MiB");
        let line = state_line("duct", &r, None, SystemTime::UNIX_EPOCH);
        assert_eq!(
            line,
            "1970-01-01T00:00:00Z duct reading | 25 % read | why: reading the existing log: 256.0 MiB of 1024.0 MiB"
        );
    }

    #[test]
    fn lines_show_the_state_never_a_verdict() {
        let s = StateReport {
            state: RunState::Waiting,
            detail: "waiting for a\x1b[2Jb to appear".into(),
        };
        let line = state_line("r", &s, None, SystemTime::UNIX_EPOCH);
        assert_eq!(
            line,
            "1970-01-01T00:00:00Z r waiting | no records | why: waiting for a^[[2Jb to appear"
        );
        let j: serde_json::Value = serde_json::from_str(&json_state_line(
            "r",
            &s,
            Some(Duration::from_millis(1500)),
            SystemTime::UNIX_EPOCH,
            HeadlessEvent::End,
        ))
        .expect("json");
        assert_eq!(j["state"], "waiting");
        assert_eq!(j["event"], "end");
        assert_eq!(j["grew_s_ago"], 1.5);
        assert!(j.get("verdict").is_none(), "{j}");
    }
}
