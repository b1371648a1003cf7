//! Run-level evidence from parser events: a crash signature at the end of the log, the
//! solver's own convergence mark, and warnings that keep coming.

use std::collections::{BTreeMap, BTreeSet};

use crate::record::{Event, Severity};

use super::limits::{FREQUENT_WARNING_MIN, FREQUENT_WARNING_SHARE};
use super::text::pct;
use super::types::{FindingKind, RunInput};
use super::{Sink, finding};

/// Is this event an error or a crash signature?
fn is_error(e: &Event) -> bool {
    e.severity == Severity::Error || e.rule.eq_ignore_ascii_case("crash")
}

/// The error event that ends the log, when there is no end-of-run mark: an error or crash
/// event at (or after) the last iteration with data, or one without an iteration that is the
/// last event of the log (or comes in a log without any data).
pub fn crash<'e>(input: &'e RunInput<'_>, last_it: Option<i64>) -> Option<&'e Event> {
    if input.ended {
        return None;
    }
    let n = input.events.len();
    input.events.iter().enumerate().rev().map(|(i, e)| (i, e.as_ref())).find_map(|(i, e)| {
        let at_end = match (e.iteration, last_it) {
            (Some(it), Some(last)) => it >= last,
            (_, None) => true,
            (None, Some(_)) => i + 1 == n,
        };
        (is_error(e) && at_end).then_some(e)
    })
}

/// The solver's own "converged" mark: an event whose rule name contains `converged`
/// (case-insensitive) and is not an error.
pub fn converged_mark<'e>(input: &'e RunInput<'_>) -> Option<&'e Event> {
    input
        .events
        .iter()
        .map(|e| e.as_ref())
        .filter(|e| !is_error(e))
        .find(|e| e.rule.to_ascii_lowercase().contains("converged"))
}

/// Warnings of one rule in most iterations of the final window (clipping in the first few
/// iterations is normal; in most of them it is a symptom worth showing). Informational.
pub fn frequent_warnings(
    input: &RunInput<'_>,
    last_it: i64,
    window: usize,
    iterations_in_window: usize,
    sink: &mut Sink,
) {
    if iterations_in_window == 0 {
        return;
    }
    let from = last_it.saturating_sub(window as i64);
    let mut by_rule: BTreeMap<&str, (BTreeSet<i64>, usize)> = BTreeMap::new();
    for e in input.events.iter().map(|e| e.as_ref()) {
        let Some(it) = e.iteration else { continue };
        if e.severity != Severity::Warning || it <= from || it > last_it {
            continue;
        }
        let entry = by_rule.entry(e.rule.as_str()).or_default();
        entry.0.insert(it);
        entry.1 += 1;
    }
    for (rule, (its, count)) in by_rule {
        let share = its.len() as f64 / iterations_in_window as f64;
        if its.len() < FREQUENT_WARNING_MIN || share < FREQUENT_WARNING_SHARE {
            continue;
        }
        let (first, last) = (*its.first().unwrap_or(&last_it), *its.last().unwrap_or(&last_it));
        let mut f = finding(FindingKind::FrequentWarnings, "", first, last, "share_of_iterations");
        f.series = None;
        f.value = share.min(1.0);
        f.threshold = Some(FREQUENT_WARNING_SHARE);
        f.detail = format!(
            "warning `{rule}` in {} of the last {} iterations ({count} times): worth a look",
            pct(100.0 * share.min(1.0)),
            iterations_in_window,
        );
        sink.findings.push(f);
    }
}
