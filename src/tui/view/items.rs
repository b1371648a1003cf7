//! The findings and events list of a run page: the causes of the verdict pinned first, then
//! other findings, action audit entries and the parsers' events, newest first, one entry per
//! event rule.

use crate::judge::Finding;
use crate::record::Severity;

use super::{Item, Level, ViewInputs, finding_text};
use crate::tui::LiveRun;
use crate::tui::format;
use crate::tui::sanitize::sanitized;
use crate::view::words::without_backticks;

/// How many findings and events the list keeps.
pub const MAX_ITEMS: usize = 300;
/// How many of each source's newest events are considered for the list.
const EVENTS_PER_SOURCE: usize = 200;

/// The list of `live`, causes first.
pub fn items(live: &LiveRun, inp: &ViewInputs<'_>) -> Vec<Item> {
    let ascii = inp.glyphs.ascii;
    let j = &live.judgement;
    let mut pinned = Vec::new();
    if live.stale {
        pinned.push(Item {
            iteration: live.store.last_iteration(),
            tag: "stale".into(),
            text: format!(
                "no growth for over {}, no end-of-run mark",
                format::age(inp.stale_limit)
            ),
            level: Level::Cause,
        });
    }
    for &i in &j.causes {
        if let Some(f) = j.findings.get(i) {
            pinned.push(finding_item(f, Level::Cause, ascii));
        }
    }
    for src in &live.store.sources {
        if let Some(n) = src.notes.last() {
            pinned.push(Item {
                iteration: None,
                tag: "note".into(),
                text: sanitized(&format!("{}: {}", src.label, without_backticks(n)), ascii),
                level: Level::Warning,
            });
        }
        if let Some((it, msg)) = &src.ended {
            pinned.push(Item {
                iteration: Some(*it),
                tag: "end".into(),
                text: sanitized(msg, ascii),
                level: Level::Info,
            });
        }
    }
    let mut rest: Vec<Item> = Vec::new();
    for (i, f) in j.findings.iter().enumerate() {
        if !j.causes.contains(&i) {
            let level = if f.supports.is_some() { Level::Warning } else { Level::Info };
            rest.push(finding_item(f, level, ascii));
        }
    }
    for f in &live.extra_findings {
        rest.push(finding_item(f, Level::Info, ascii));
    }
    for src in &live.store.sources {
        // One entry per event rule (its newest message, how often, since when), so a
        // clipping notice printed every iteration does not push everything else away.
        let start = src.events.len().saturating_sub(EVENTS_PER_SOURCE * 50);
        let mut groups: Vec<(&str, usize, Option<i64>, &crate::record::Event)> = Vec::new();
        for ev in &src.events[start..] {
            match groups.iter_mut().find(|g| g.0 == ev.rule) {
                Some(g) => {
                    g.1 += 1;
                    g.3 = ev;
                }
                None => groups.push((&ev.rule, 1, ev.iteration, ev)),
            }
        }
        for (rule, count, first, ev) in groups {
            let text = if count > 1 {
                let since = first
                    .map(|f| format!(", first at it {}", format::iteration(f)))
                    .unwrap_or_default();
                let times = if ascii { "x" } else { "×" };
                format!("{} ({times}{count}{since})", ev.message)
            } else {
                ev.message.clone()
            };
            rest.push(Item {
                iteration: ev.iteration,
                tag: sanitized(rule, ascii),
                text: sanitized(&text, ascii),
                level: match ev.severity {
                    Severity::Error => Level::Error,
                    Severity::Warning => Level::Warning,
                    Severity::Info => Level::Info,
                },
            });
        }
    }
    // Newest first; stable, so entries of one iteration keep their order of arrival reversed
    // only by iteration.
    rest.sort_by_key(|i| std::cmp::Reverse(i.iteration));
    pinned.extend(rest);
    pinned.truncate(MAX_ITEMS);
    pinned
}

fn finding_item(f: &Finding, level: Level, ascii: bool) -> Item {
    Item {
        iteration: Some(f.last),
        tag: f.kind.as_str().to_string(),
        text: finding_text(f, ascii),
        level,
    }
}
