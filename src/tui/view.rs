//! Snapshots the renderer reads: header facts, the why, criteria rows, findings, sparklines,
//! chart points.
//!
//! Built by the app layer when data or view settings change, never while drawing, so that
//! [`crate::tui::render()`] stays a pure function of state. Every string that came from a log
//! (run, source and series names, event messages, notes) is sanitised here, and every number
//! is formatted by [`crate::view::number`], the rule every view of a run shares.
//!
//! * this module: the per-run snapshot ([`RunView`]);
//! * [`items`]: the findings and events list;
//! * [`spark`]: the leading residual and its sparkline for the overview;
//! * [`chart`]: chart points of the open run ([`DetailData`]).

pub mod chart;
pub mod items;
pub mod spark;

use std::time::SystemTime;

use crate::judge::{Comparison, CriterionResult, Finding, Judgement, Verdict};
use crate::record::Role;
use crate::run::store::SourceStore;
use crate::view::number;
use crate::view::words;

use super::LiveRun;
use super::format;
use super::sanitize::sanitized;
use super::theme::Glyphs;

pub use chart::{
    ChartLine, ChartSpec, DetailData, Marks, MonitorChart, ResidualChart, Window, Zoom,
    build_detail,
};
pub use items::MAX_ITEMS;
pub use spark::{SPARK_CELLS, sparkline};

/// What the header says about reaching the target.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Eta {
    /// Every criterion holds.
    Met,
    /// Estimated iterations still needed (slowest residual), with the range of the estimate
    /// when the judge gave one (fewest, most).
    Iterations(f64, Option<(f64, f64)>),
    /// A residual above its target is not falling.
    NotInReach,
    /// Not enough information yet.
    Unknown,
}

/// One row of the criteria checklist.
#[derive(Debug, Clone, PartialEq)]
pub struct CriterionRow {
    pub met: bool,
    pub series: String,
    /// `drop ≥ 3 dec`: the threshold exactly as set, never shortened.
    pub rule: String,
    /// `2.1 dec`
    pub value: String,
    pub default: bool,
}

/// The criterion furthest from being met, in parts, so a narrow column can shorten the
/// series name and drop the criterion's name but never cut a number.
#[derive(Debug, Clone, PartialEq)]
pub struct Worst {
    pub series: String,
    pub name: String,
    /// `0.35/0.2 %`: value, threshold and unit.
    pub numbers: String,
}

/// Importance of a list entry.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Level {
    /// A finding that caused the verdict.
    Cause,
    Error,
    Warning,
    Info,
}

/// One entry of the findings and events list.
#[derive(Debug, Clone, PartialEq)]
pub struct Item {
    pub iteration: Option<i64>,
    pub tag: String,
    pub text: String,
    pub level: Level,
}

/// A first bulk read under way.
#[derive(Debug, Clone, PartialEq)]
pub struct Progress {
    pub label: String,
    pub read: u64,
    pub total: u64,
}

/// A series that can be charted.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesRef {
    pub source: usize,
    pub index: usize,
    /// Display name, unique within the run (see [`series_names`]).
    pub name: String,
    pub role: Role,
}

/// A run that has no verdict to show: its state word (the headless watcher's, see
/// [`crate::view::headless::RunState`]) and the reason, shown in place of a verdict.
#[derive(Debug, Clone, PartialEq)]
pub struct NoVerdict {
    /// `waiting`, `reading`, `unreadable`, `no-parser`, `stale` or `nothing-to-judge`.
    pub word: &'static str,
    pub reason: String,
    /// Something is wrong and needs the user (unreadable, no parser, nothing to judge),
    /// rather than data still to come.
    pub alarm: bool,
}

/// Everything the screens show about one run, except the charts of the open run.
#[derive(Debug, Clone, PartialEq)]
pub struct RunView {
    pub name: String,
    /// The judge's verdict.
    pub judged: Verdict,
    /// The verdict shown (stale applied).
    pub verdict: Verdict,
    pub since: Option<i64>,
    pub iteration: Option<i64>,
    pub records: usize,
    /// Restarts seen (segments beyond the first, largest over sources).
    pub restarts: usize,
    pub ended: bool,
    pub rate_per_min: Option<f64>,
    pub last_growth: Option<SystemTime>,
    pub eta: Eta,
    /// Why the verdict: one sentence per cause, each shown whole (wrapped as needed).
    pub why: Vec<String>,
    /// Criteria rows, failing ones first (least met first), then the met ones.
    pub criteria: Vec<CriterionRow>,
    pub items: Vec<Item>,
    pub progress: Vec<Progress>,
    /// Sparkline levels 0..=7 of the leading residual; `None` where a cell has no data.
    pub spark: Vec<Option<u8>>,
    /// Leading residual and its last value (`p 3.2e-5`).
    pub leading: String,
    /// The criterion furthest from being met; `None` when all are met or none was judged.
    pub worst: Option<Worst>,
    pub all_met: bool,
    /// Residuals first, then monitors, indicators and info series.
    pub series: Vec<SeriesRef>,
    /// Monitors shown but not judged because they carry only round-off (sanitised names).
    pub not_judged: Vec<String>,
    /// Set when the run has no verdict (no records yet, or nothing to judge): then
    /// `verdict` is meaningless and no screen shows it.
    pub no_verdict: Option<NoVerdict>,
}

impl RunView {
    /// The word the screens show for this run and the overview counts in its title: the
    /// state of a run without a verdict (`waiting`, `unreadable`, `nothing-to-judge`, ...),
    /// else the verdict.
    pub fn state_word(&self) -> &'static str {
        match &self.no_verdict {
            Some(n) => n.word,
            None => self.verdict.as_str(),
        }
    }

    /// Attention order of the overview (see [`super::app::attention_rank`]): a run without a
    /// verdict that needs the user ranks with `stale`, one still waiting for data with
    /// `converging`.
    pub fn attention(&self) -> u8 {
        match &self.no_verdict {
            Some(n) if n.alarm => super::app::attention_rank(Verdict::Stale),
            Some(_) => super::app::attention_rank(Verdict::Converging),
            None => super::app::attention_rank(self.verdict),
        }
    }
}

/// The state of a run without a verdict, as the headless watcher words it: without records
/// the follower's and parser's reason (`waiting for … to appear`, `cannot read …`), with
/// records but nothing the criteria judge the judge's reason
/// ([`crate::view::evidence::no_verdict_reason`]).
fn no_verdict(live: &LiveRun, ascii: bool) -> Option<NoVerdict> {
    use crate::view::headless::{self, RunState};
    let records: usize = live.store.sources.iter().map(SourceStore::records).sum();
    let report = if records == 0 {
        // The panels decide `stale` themselves; here only what the sources say.
        let quiet = std::time::Duration::ZERO;
        headless::run_state(&live.store, &live.activity, quiet, std::time::Duration::MAX)?
    } else {
        headless::nothing_state(live.nothing_to_judge()?)
    };
    let alarm = matches!(
        report.state,
        RunState::Unreadable | RunState::NoParser { .. } | RunState::NothingToJudge
    );
    Some(NoVerdict {
        word: report.state.as_str(),
        reason: sanitized(&words::without_backticks(&report.detail), ascii),
        alarm,
    })
}

/// Inputs of [`build_run_view`] beyond the run itself.
pub struct ViewInputs<'a> {
    pub glyphs: &'a Glyphs,
    pub rate_per_min: Option<f64>,
    pub stale_limit: std::time::Duration,
}

/// Build the snapshot of `live` (with its `stale` flag and judgement as they are now).
pub fn build_run_view(live: &LiveRun, inp: &ViewInputs<'_>) -> RunView {
    let g = inp.glyphs;
    let ascii = g.ascii;
    let j = &live.judgement;
    let verdict = live.verdict();
    let series = chartable_series(live, ascii);
    let last_growth = live.activity.iter().filter_map(|a| a.last_growth).max();
    let progress = live
        .activity
        .iter()
        .zip(&live.store.sources)
        .filter_map(|(a, s)| {
            a.progress.map(|(read, total)| Progress {
                label: sanitized(&s.label, ascii),
                read,
                total,
            })
        })
        .collect();
    let restarts =
        live.store.sources.iter().map(|s| s.segments.len().saturating_sub(1)).max().unwrap_or(0);
    let (leading, spark) = spark::leading_residual(live, &series, ascii);
    let worst = worst_criterion(&j.criteria, ascii);
    let no_verdict = no_verdict(live, ascii);
    let why = match &no_verdict {
        Some(n) => vec![n.reason.clone()],
        None => why(live, inp),
    };
    RunView {
        name: sanitized(&live.store.name, ascii),
        judged: j.verdict,
        verdict,
        since: j.since,
        iteration: live.store.last_iteration(),
        records: live.store.sources.iter().map(SourceStore::records).sum(),
        restarts,
        ended: live.store.ended(),
        rate_per_min: inp.rate_per_min,
        last_growth,
        eta: if no_verdict.is_some() { Eta::Unknown } else { eta(j, verdict) },
        why,
        criteria: criteria_rows(&j.criteria, g),
        items: items::items(live, inp),
        progress,
        spark,
        leading,
        all_met: !j.criteria.is_empty() && worst.is_none(),
        worst,
        series,
        not_judged: crate::view::evidence::round_off_monitors(j)
            .into_iter()
            .map(|n| sanitized(n, ascii))
            .collect(),
        no_verdict,
    }
}

/// Display names of every series of a run, as `(source, index, name)`, from the store's one
/// naming rule ([`crate::run::RunStore::series_names`]), so the panels name series as the
/// judge does.
pub fn series_names(store: &crate::run::RunStore) -> Vec<(usize, usize, String)> {
    let names = store.series_names();
    let mut out = Vec::new();
    for (si, src) in store.sources.iter().enumerate() {
        for (i, _) in src.series().iter().enumerate() {
            out.push((si, i, names[si][i].name.clone()));
        }
    }
    out
}

fn chartable_series(live: &LiveRun, ascii: bool) -> Vec<SeriesRef> {
    let mut out: Vec<SeriesRef> = series_names(&live.store)
        .into_iter()
        .map(|(source, index, name)| SeriesRef {
            source,
            index,
            name: sanitized(&name, ascii),
            role: live.store.sources[source].series()[index].role,
        })
        .collect();
    let rank = |r: Role| match r {
        Role::Residual => 0,
        Role::Monitor => 1,
        Role::Indicator => 2,
        Role::Info => 3,
    };
    out.sort_by_key(|s| rank(s.role));
    out
}

fn eta(j: &Judgement, verdict: Verdict) -> Eta {
    if verdict == Verdict::Converged {
        return Eta::Met;
    }
    if j.residuals.is_empty() {
        return Eta::Unknown;
    }
    let unmet_residual = |name: &str| {
        j.criteria
            .iter()
            .any(|c| c.series == name && !c.met && (c.unit == "dec" || c.name == "below"))
    };
    let mut worst: Option<&crate::judge::ResidualSummary> = None;
    for r in &j.residuals {
        match r.eta_iterations {
            Some(e) if e.is_finite() => {
                let longer = worst.and_then(|w| w.eta_iterations).is_none_or(|w| e > w);
                worst = if longer { Some(r) } else { worst };
            }
            _ if unmet_residual(&r.series) && r.slope_dec_per_kit >= 0.0 => return Eta::NotInReach,
            _ => {}
        }
    }
    match (worst, verdict) {
        (_, Verdict::Stalled | Verdict::Diverging) => Eta::NotInReach,
        (Some(r), _) => Eta::Iterations(
            r.eta_iterations.unwrap_or(f64::NAN),
            r.eta_range.filter(|(lo, hi)| lo.is_finite() && hi.is_finite() && lo <= hi),
        ),
        (None, _) => Eta::Unknown,
    }
}

/// The why: one sentence per cause of the verdict (or a summary when none is recorded).
fn why(live: &LiveRun, inp: &ViewInputs<'_>) -> Vec<String> {
    let ascii = inp.glyphs.ascii;
    let j = &live.judgement;
    let mut parts: Vec<String> = Vec::new();
    if live.stale && j.verdict != Verdict::Diverging {
        parts.push(format!(
            "log has not grown for over {} and shows no end-of-run mark",
            format::age(inp.stale_limit)
        ));
    }
    for &i in &j.causes {
        if let Some(f) = j.findings.get(i) {
            parts.push(finding_text(f, ascii));
        }
    }
    if parts.is_empty() {
        let records: usize = live.store.sources.iter().map(SourceStore::records).sum();
        if records == 0 {
            parts.push(if live.activity.iter().any(|a| a.progress.is_some()) {
                "reading the existing log".into()
            } else {
                "waiting for data".into()
            });
        } else if j.verdict == Verdict::Converged {
            let since = j.since.map(|s| format!(" since it {}", format::iteration(s)));
            let all = words::count_irregular(j.criteria.len(), "criterion", "criteria");
            parts.push(format!("all {all} met{}", since.unwrap_or_default()));
        } else if let Some(r) = j
            .residuals
            .iter()
            .max_by(|a, b| a.last.partial_cmp(&b.last).unwrap_or(std::cmp::Ordering::Equal))
        {
            let (slope, _, _) = number::interval(r.slope_dec_per_kit, r.slope_ci.0, r.slope_ci.1);
            parts.push(sanitized(
                &format!(
                    "{} at {}, {slope} dec/kit, {} dec below its peak",
                    r.series,
                    number::value(r.last),
                    number::value(r.drop_dec)
                ),
                ascii,
            ));
        }
    }
    parts
}

/// The one-line text of a finding (sanitised, code spans without their backticks).
pub fn finding_text(f: &Finding, ascii: bool) -> String {
    let detail = if f.detail.is_empty() {
        format!("{} = {}", f.statistic, number::value(f.value))
    } else {
        words::without_backticks(&f.detail)
    };
    let text = match &f.series {
        Some(s) if !detail.contains(s.as_str()) => format!("{s}: {detail}"),
        _ => detail,
    };
    sanitized(&text, ascii)
}

/// A criterion's value with its unit (`6.92 dec`, `0.029 %`, `n/a`).
/// A criterion's value to three significant digits, unless rounding would make it read as
/// the other side of its threshold (an unmet drop of 2.996 dec shown as `3 dec` beside
/// `>= 3`): then the judge's own wording, rounded towards the verdict it reached.
fn value_text(c: &CriterionResult) -> String {
    let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
    if c.value.is_nan() {
        return "n/a".into();
    }
    if c.value.is_infinite() {
        return format!("{}{unit}", c.value_text());
    }
    let short = number::value(c.value);
    let shown_met = short.parse::<f64>().ok().map(|v| match c.comparison {
        Comparison::AtLeast => v >= c.threshold,
        Comparison::AtMost => v <= c.threshold,
    });
    if shown_met.is_some_and(|m| m != c.met) {
        format!("{}{unit}", c.value_text())
    } else {
        format!("{short}{unit}")
    }
}

/// Rows of the checklist: failing criteria first, least met first, then the met ones in the
/// judge's order.
fn criteria_rows(criteria: &[CriterionResult], g: &Glyphs) -> Vec<CriterionRow> {
    let mut order: Vec<&CriterionResult> = criteria.iter().collect();
    order.sort_by(|a, b| {
        a.met.cmp(&b.met).then_with(|| {
            if a.met {
                std::cmp::Ordering::Equal
            } else {
                progress_ratio(a).total_cmp(&progress_ratio(b))
            }
        })
    });
    order
        .into_iter()
        .map(|c| {
            let cmp = match c.comparison {
                Comparison::AtLeast => g.ge,
                Comparison::AtMost => g.le,
            };
            let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
            CriterionRow {
                met: c.met,
                series: sanitized(&c.series, g.ascii),
                rule: sanitized(
                    &format!("{} {cmp} {}{unit}", c.name, number::exact(c.threshold)),
                    g.ascii,
                ),
                value: sanitized(&value_text(c), g.ascii),
                default: c.default,
            }
        })
        .collect()
}

/// How far a criterion is from being met: 1 or more when met, towards 0 when far off.
pub(crate) fn progress_ratio(c: &CriterionResult) -> f64 {
    if !c.value.is_finite() {
        return 0.0;
    }
    let r = match c.comparison {
        Comparison::AtLeast => c.value / c.threshold,
        Comparison::AtMost => c.threshold / c.value,
    };
    if r.is_finite() {
        r.max(0.0)
    } else if c.met {
        1.0
    } else {
        0.0
    }
}

fn worst_criterion(criteria: &[CriterionResult], ascii: bool) -> Option<Worst> {
    let c = criteria
        .iter()
        .filter(|c| !c.met)
        .min_by(|a, b| progress_ratio(a).total_cmp(&progress_ratio(b)))?;
    let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
    let value = if c.value.is_nan() { "n/a".into() } else { number::value(c.value) };
    Some(Worst {
        series: sanitized(&c.series, ascii),
        name: sanitized(&c.name, ascii),
        numbers: sanitized(&format!("{value}/{}{unit}", number::exact(c.threshold)), ascii),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(series: &str, cmp: Comparison, threshold: f64, value: f64, met: bool) -> CriterionResult {
        CriterionResult {
            name: "x".into(),
            series: series.into(),
            comparison: cmp,
            threshold,
            value,
            met,
            ..Default::default()
        }
    }

    #[test]
    fn the_worst_criterion_is_the_least_met() {
        let list = vec![
            c("a", Comparison::AtLeast, 3.0, 2.7, false),
            c("b", Comparison::AtMost, 0.1, 0.5, false),
            c("c", Comparison::AtLeast, 3.0, 4.0, true),
        ];
        let w = worst_criterion(&list, false).expect("one unmet");
        assert_eq!((w.series.as_str(), w.numbers.as_str()), ("b", "0.5/0.1"));
        assert_eq!(worst_criterion(&list[2..], false), None);
        let nan = vec![c("n", Comparison::AtMost, 0.1, f64::NAN, false), list[0].clone()];
        assert_eq!(worst_criterion(&nan, false).map(|w| w.numbers), Some("n/a/0.1".into()));
    }

    #[test]
    fn failing_criteria_come_first() {
        let list = vec![
            c("met1", Comparison::AtLeast, 3.0, 4.0, true),
            c("far", Comparison::AtMost, 0.1, 0.5, false),
            c("met2", Comparison::AtMost, 0.1, 0.01, true),
            c("near", Comparison::AtLeast, 3.0, 2.7, false),
        ];
        let rows = criteria_rows(&list, &Glyphs::unicode(true));
        let names: Vec<&str> = rows.iter().map(|r| r.series.as_str()).collect();
        assert_eq!(names, ["far", "near", "met1", "met2"]);
        assert_eq!(rows[0].rule, "x ≤ 0.1");
        assert_eq!(rows[0].value, "0.5");
    }

    #[test]
    fn rounding_never_shows_a_value_on_the_other_side_of_its_threshold() {
        let mut unmet = c("Uy", Comparison::AtLeast, 3.0, 2.9996, false);
        unmet.unit = "dec".into();
        assert_eq!(value_text(&unmet), "2.99 dec", "three digits would read 3 dec, met");
        let mut met = c("drag", Comparison::AtMost, 0.1, 0.10004, true);
        met.value = 0.09996;
        met.unit = "%".into();
        assert_eq!(value_text(&met), "0.1 %", "three digits agree with the verdict here");
        let mut over = c("drag", Comparison::AtMost, 0.1, 0.10004, false);
        over.unit = "%".into();
        assert_eq!(value_text(&over), "0.101 %");
        let plain = c("Ux", Comparison::AtLeast, 3.0, 3.4567, true);
        assert_eq!(value_text(&plain), "3.46");
    }
}
