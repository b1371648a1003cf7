//! What `settle parse` prints: per source, the parser, line counts, records, segments,
//! series with their role and range, events and the first skip reasons. Pure functions of
//! the store.

use std::fmt::Write;

use serde_json::{Value, json};

use crate::record::Severity;
use crate::run::RunStore;
use crate::run::store::{SegmentReason, SourceStore};

/// Format a value the way logs print them: 4 significant digits, scientific when small or
/// large, and the words `nan`, `inf`, `-inf` for non-finite values.
pub fn num(v: f64) -> String {
    if v.is_nan() {
        "nan".into()
    } else if v.is_infinite() {
        if v > 0.0 { "inf".into() } else { "-inf".into() }
    } else if v == 0.0 {
        "0".into()
    } else if (1e-3..1e5).contains(&v.abs()) {
        let s = format!("{v:.6}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        // Keep about 6 significant digits.
        let digits = s.chars().filter(char::is_ascii_digit).count();
        if digits > 7 { format!("{v:.4e}") } else { s.to_string() }
    } else {
        format!("{v:.4e}")
    }
}

fn segment_text(reason: &SegmentReason) -> String {
    match reason {
        SegmentReason::Start => "start".into(),
        SegmentReason::IterationBack { from, to } => format!("restart: iteration {from} → {to}"),
        SegmentReason::Truncated => "file truncated or rewritten: read again from its start".into(),
        SegmentReason::Replaced => "file replaced by a new one".into(),
        SegmentReason::NewFile { path } => format!("next restart file {}", path.display()),
        SegmentReason::Notice { line } => format!("restart: resumed, notice on line {line}"),
    }
}

/// Min, max and the count of non-finite values of a slice.
fn range(values: &[f64]) -> (f64, f64, usize) {
    let mut min = f64::INFINITY;
    let mut max = f64::NEG_INFINITY;
    let mut bad = 0;
    for &v in values {
        if v.is_finite() {
            min = min.min(v);
            max = max.max(v);
        } else {
            bad += 1;
        }
    }
    if min > max { (f64::NAN, f64::NAN, bad) } else { (min, max, bad) }
}

/// Human summary of one source.
pub fn source_text(src: &SourceStore) -> String {
    let mut o = String::new();
    let st = src.stats;
    let _ = writeln!(o, "{}  (parser {})", src.label, src.parser);
    let _ = writeln!(
        o,
        "  lines {}: used {}, skipped {}, ignored {}",
        st.lines, st.used, st.skipped, st.ignored
    );
    let its = src.iterations();
    match (its.first(), its.last()) {
        (Some(a), Some(b)) => {
            let _ = writeln!(o, "  records {} (iterations {a} … {b})", src.records());
        }
        _ => {
            let _ = writeln!(o, "  records 0");
        }
    }
    if src.segments.len() > 1 {
        let _ = writeln!(o, "  segments {}:", src.segments.len());
        for seg in &src.segments {
            let it = its.get(seg.first_record).copied().unwrap_or(0);
            let _ = writeln!(o, "    from iteration {it}: {}", segment_text(&seg.reason));
        }
    }
    if !src.series().is_empty() {
        let w = src.series().iter().map(|s| s.name.chars().count()).max().unwrap_or(6).max(6);
        let _ = writeln!(
            o,
            "  {:<w$}  {:<9}  {:>7}  {:>11}  {:>11}  {:>11}  {:>11}",
            "series", "role", "values", "first", "last", "min", "max"
        );
        for s in src.series() {
            let v = s.values();
            let (min, max, bad) = range(v);
            let _ = write!(
                o,
                "  {:<w$}  {:<9}  {:>7}  {:>11}  {:>11}  {:>11}  {:>11}",
                s.name,
                s.role.as_str(),
                v.len(),
                v.first().map(|&x| num(x)).unwrap_or_default(),
                v.last().map(|&x| num(x)).unwrap_or_default(),
                num(min),
                num(max),
            );
            if bad > 0 {
                let _ = write!(o, "  ({bad} non-finite)");
            }
            o.push('\n');
        }
    }
    if !src.events.is_empty() {
        let count = |sev| src.events.iter().filter(|e| e.severity == sev).count();
        let _ = writeln!(
            o,
            "  events {}: {} error, {} warning, {} info",
            src.events.len() as u64 + src.events_dropped,
            count(Severity::Error),
            count(Severity::Warning),
            count(Severity::Info)
        );
        let mut shown: Vec<&str> = Vec::new();
        for e in &src.events {
            if shown.len() >= 8 || shown.contains(&e.rule.as_str()) {
                continue;
            }
            shown.push(&e.rule);
            let n = src.events.iter().filter(|x| x.rule == e.rule).count();
            let _ = writeln!(
                o,
                "    {:<7} {} ×{n}, first at line {}: {}",
                e.severity.as_str(),
                e.rule,
                e.line,
                clean(&e.message)
            );
        }
    }
    if let Some((it, msg)) = &src.ended {
        let _ = writeln!(o, "  end of run at iteration {it}: {}", clean(msg));
    }
    if !src.skips.is_empty() {
        let _ = writeln!(o, "  skipped lines (first {}):", src.skips.len().min(5));
        for s in src.skips.iter().take(5) {
            let _ = writeln!(o, "    line {}: {}", s.line, clean(&s.reason));
        }
    }
    for n in src.notes.iter().rev().take(5) {
        let _ = writeln!(o, "  note: {}", clean(&crate::view::words::without_backticks(n)));
    }
    o
}

/// Human summary of every source of a run.
pub fn run_text(run: &RunStore) -> String {
    run.sources.iter().map(source_text).collect::<Vec<_>>().join("\n")
}

/// JSON number, or null for non-finite values (JSON has no NaN).
pub fn jnum(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

/// The same facts as [`source_text`], as JSON.
pub fn source_json(src: &SourceStore) -> Value {
    let its = src.iterations();
    let series: Vec<Value> = src
        .series()
        .iter()
        .map(|s| {
            let v = s.values();
            let (min, max, bad) = range(v);
            json!({
                "name": s.name,
                "role": s.role.as_str(),
                "values": v.len(),
                "first": v.first().map(|&x| jnum(x)),
                "last": v.last().map(|&x| jnum(x)),
                "min": jnum(min),
                "max": jnum(max),
                "non_finite": bad,
            })
        })
        .collect();
    let segments: Vec<Value> = src
        .segments
        .iter()
        .map(|seg| {
            json!({
                "first_record": seg.first_record,
                "iteration": its.get(seg.first_record),
                "reason": segment_text(&seg.reason),
            })
        })
        .collect();
    json!({
        "source": src.label,
        "parser": src.parser,
        "lines": src.stats,
        "records": src.records(),
        "first_iteration": its.first(),
        "last_iteration": its.last(),
        "segments": segments,
        "series": series,
        "events": src.events,
        "events_dropped": src.events_dropped,
        "ended": src.ended.as_ref().map(|(it, m)| json!({"iteration": it, "message": m})),
        "skipped": src.skips,
        "notes": src.notes,
    })
}

/// Remove control characters from text taken from logs before printing it.
pub fn clean(s: &str) -> String {
    s.chars().map(|c| if c == '\t' { ' ' } else { c }).filter(|c| !c.is_control()).collect()
}

/// One line per record for `parse --follow`: `label it N name=value ...` or a JSON object.
pub fn record_line(
    label: &str,
    rec: &crate::record::Record,
    names: &std::collections::HashMap<u32, String>,
    as_json: bool,
) -> String {
    let name = |id: &u32| names.get(id).map(String::as_str).unwrap_or("?");
    if as_json {
        let values: serde_json::Map<String, Value> =
            rec.values.iter().map(|(id, v)| (name(id).to_string(), jnum(*v))).collect();
        let obj = json!({"source": label, "iteration": rec.iteration, "time": rec.time, "values": values});
        return format!("{obj}\n");
    }
    let mut o =
        format!("{label} it {}", rec.iteration.map(|i| i.to_string()).unwrap_or("-".into()));
    if let Some(t) = rec.time {
        let _ = write!(o, " t {}", num(t));
    }
    for (id, v) in &rec.values {
        let _ = write!(o, " {}={}", clean(name(id)), num(*v));
    }
    o.push('\n');
    o
}
