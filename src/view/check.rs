//! What `settle check` prints: the verdict first, then the criteria table, the findings and
//! the ETA. The JSON form is the stable schema documented in the README. Pure functions.

use std::fmt::Write;

use serde_json::{Value, json};

use crate::judge::{Comparison, CriterionResult, Judgement, NothingToJudge, Verdict};
use crate::run::RunStore;
use crate::view::evidence::{self, no_verdict_reason};
use crate::view::parse::{clean, jnum, num};
use crate::view::words::without_backticks;

/// Log text made safe for one terminal line, with the judge's inline code shown without its
/// backticks.
fn plain(s: &str) -> String {
    clean(&without_backticks(s))
}

fn criterion_value(c: &CriterionResult) -> String {
    // Rounded so that it never reads as meeting a threshold it misses (or the reverse).
    let v = c.value_text();
    match c.unit.as_str() {
        _ if c.value.is_nan() => v,
        "%" => format!("{v} %"),
        "dec" => format!("{v} dec"),
        _ => v,
    }
}

fn criterion_threshold(c: &CriterionResult) -> String {
    let op = match c.comparison {
        Comparison::AtLeast => "≥",
        Comparison::AtMost => "≤",
    };
    let t = match c.unit.as_str() {
        "%" => format!("{} %", num(c.threshold)),
        "dec" => format!("{} dec", num(c.threshold)),
        _ => num(c.threshold),
    };
    format!("{op} {t}")
}

/// Why a run read by `check` or `report` has no verdict, source by source (an error
/// message, not a verdict: a run with nothing to judge is never `converging`).
pub fn no_verdict(run: &RunStore, why: &NothingToJudge) -> String {
    let mut o = format!("{}: no verdict: {}", run.name, no_verdict_reason(why));
    for src in &run.sources {
        let what = if src.parser == "-" || src.stats.lines == 0 {
            "the file is empty, so no parser recognised it".to_string()
        } else if src.records() == 0 {
            format!(
                "parser {} found no record in its {} lines ({} skipped): is it the right parser?",
                src.parser, src.stats.lines, src.stats.skipped
            )
        } else {
            format!("{} records by parser {}", src.records(), src.parser)
        };
        let _ = write!(o, "\n  {}: {}", clean(&src.label), plain(&what));
    }
    o
}

/// The human report of one judged run.
pub fn text(run: &RunStore, j: &Judgement) -> String {
    let mut o = String::new();
    let since = match (j.verdict, j.since) {
        (Verdict::Converged, Some(it)) => format!(" (all criteria held since iteration {it})"),
        (_, Some(it)) => format!(" (since iteration {it})"),
        _ => String::new(),
    };
    let _ = writeln!(
        o,
        "{}: {} at iteration {}{since}",
        run.name,
        j.verdict.as_str().to_uppercase(),
        j.iterations
    );
    for &i in &j.causes {
        if let Some(f) = j.findings.get(i) {
            let _ = writeln!(o, "  why: {}", plain(&f.detail));
        }
    }
    if !j.criteria.is_empty() {
        let _ = writeln!(o, "\ncriteria");
        let w = j.criteria.iter().map(|c| c.series.chars().count()).max().unwrap_or(6).max(6);
        for c in &j.criteria {
            let mark = if c.met { "[met]" } else { "[not met]" };
            let held = match (c.met, c.since) {
                (true, Some(it)) => format!("since it {it}"),
                _ => String::new(),
            };
            let basis =
                evidence::criterion_basis(j, c).map(|b| format!(" [{b}]")).unwrap_or_default();
            let line = format!(
                "  {mark:<9} {:<w$}  {:<5} {:>12}  {:<14} {held}{}{basis}",
                c.series,
                c.name,
                criterion_value(c),
                criterion_threshold(c),
                if c.default { " (default)" } else { "" }
            );
            let _ = writeln!(o, "{}", line.trim_end());
        }
    }
    let shown: Vec<_> = j
        .findings
        .iter()
        .enumerate()
        .filter(|(i, f)| f.supports.is_some() || j.causes.contains(i))
        .collect();
    if !shown.is_empty() {
        let _ = writeln!(o, "\nfindings");
        for (_, f) in shown {
            let p = f.p_value.map(|p| format!(", p = {p:.2e}")).unwrap_or_default();
            let _ = writeln!(
                o,
                "  {:<20} it {}–{}: {}{p}",
                f.kind.as_str(),
                f.first,
                f.last,
                plain(&f.detail)
            );
        }
    }
    let etas: Vec<String> = j
        .residuals
        .iter()
        .filter_map(|r| evidence::eta_words(r, "–").map(|e| format!("{} {e}", r.series)))
        .collect();
    if j.verdict == Verdict::Converging && !etas.is_empty() {
        let _ = writeln!(o, "\nestimated iterations to target: {}", etas.join(", "));
    }
    let round_off = evidence::round_off_monitors(j);
    if !round_off.is_empty() {
        let _ = writeln!(o, "\n{} {}", round_off.join(", "), evidence::ROUND_OFF_WORDS);
    }
    let mut notes: Vec<String> = j
        .findings
        .iter()
        .filter(|f| f.supports.is_none())
        .map(|f| format!("  {}: {}", f.kind.as_str(), plain(&f.detail)))
        .collect();
    // What reading the files said (a partial last line left out, junk skipped).
    for src in &run.sources {
        notes.extend(src.notes.iter().map(|n| format!("  {}: {}", clean(&src.label), plain(n))));
    }
    if !notes.is_empty() {
        let _ = writeln!(o, "\nnotes");
        for n in notes.iter().take(12) {
            let _ = writeln!(o, "{n}");
        }
    }
    o
}

/// The stable JSON object of `settle check --json` (schema in the README).
pub fn json(run: &RunStore, parsers: &[String], j: &Judgement) -> Value {
    let series: Vec<Value> = run
        .sources
        .iter()
        .flat_map(|src| {
            src.series().iter().map(move |s| {
                json!({
                    "name": s.name,
                    "role": s.role.as_str(),
                    "source": src.label,
                    "records": s.len(),
                    "last": s.last().map(jnum),
                })
            })
        })
        .collect();
    let sources: Vec<Value> = run
        .sources
        .iter()
        .zip(parsers)
        .map(|(s, p)| json!({"path": s.label, "parser": p, "records": s.records(), "ended": s.ended.is_some(), "notes": s.notes}))
        .collect();
    json!({
        "settle": env!("CARGO_PKG_VERSION"),
        "run": run.name,
        "verdict": j.verdict.as_str(),
        "exit_code": j.verdict.exit_code(),
        "since": j.since,
        "iterations": j.iterations,
        "criteria": j.criteria,
        "findings": j.findings,
        "causes": j.causes,
        "residuals": j.residuals,
        "monitors": j.monitors,
        "series": series,
        "sources": sources,
    })
}
