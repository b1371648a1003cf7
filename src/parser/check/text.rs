//! The words of `parsers check` and of the summary `parsers draft` prints below a draft.

use std::fmt::Write;

use super::{Examination, ShapeCount};
use crate::parser::Definition;

/// Shapes shown per list before "and N more".
const SHOWN_SHAPES: usize = 12;

fn num(v: f64) -> String {
    if v.is_nan() {
        return "nan".into();
    }
    if v.is_infinite() {
        return if v > 0.0 { "inf".into() } else { "-inf".into() };
    }
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        format!("{v:.4e}")
    } else {
        let s = format!("{v:.6}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        if s.is_empty() || s == "-" { "0".into() } else { s.to_string() }
    }
}

fn quoted(s: &str) -> String {
    const MAX: usize = 70;
    if s.chars().count() > MAX {
        format!("`{}…`", s.chars().take(MAX).collect::<String>())
    } else {
        format!("`{s}`")
    }
}

/// What the definition extracts: records, series with counts and first/last values,
/// events, the end mark, and the line shapes nobody used. Every line starts with `prefix`
/// (`"# "` below a draft, so the draft stays valid TOML).
pub fn extract_summary(exam: &Examination, prefix: &str) -> String {
    let mut o = String::new();
    let p = prefix;
    let s = &exam.stats;
    let _ = writeln!(
        o,
        "{p}{} lines: {} used, {} skipped, {} unused",
        s.lines, s.used, s.skipped, s.ignored
    );
    let range = match (exam.iterations, exam.times) {
        (Some((a, b)), Some((t0, t1))) => {
            format!(" (iterations {a}–{b}, time {}–{})", num(t0), num(t1))
        }
        (Some((a, b)), None) => format!(" (iterations {a}–{b})"),
        _ => String::new(),
    };
    let _ = writeln!(o, "{p}records: {}{range}", exam.records);
    if exam.series.is_empty() {
        let _ = writeln!(o, "{p}series: none");
    } else {
        let w = exam.series.iter().map(|x| x.name.chars().count()).max().unwrap_or(4).max(6);
        let _ = writeln!(o, "{p}series ({}):", exam.series.len());
        for x in &exam.series {
            let nf = if x.non_finite > 0 {
                format!("  ({} non-finite)", x.non_finite)
            } else {
                String::new()
            };
            let _ = writeln!(
                o,
                "{p}  {:<w$}  {:<9} {:>7} values  first {:<11} last {}{nf}",
                x.name,
                x.role.as_str(),
                x.count,
                num(x.first),
                num(x.last)
            );
        }
    }
    for (rule, sev, count, msg) in &exam.events {
        let _ =
            writeln!(o, "{p}event `{rule}` ({}): {count}×, first: {}", sev.as_str(), quoted(msg));
    }
    match &exam.end {
        Some(m) => {
            let _ = writeln!(o, "{p}end of run: {}", quoted(m));
        }
        None if exam.engine == "lines" => {
            let _ = writeln!(o, "{p}end of run: not seen");
        }
        None => {}
    }
    if !exam.unused.is_empty() {
        let _ = writeln!(
            o,
            "{p}lines no rule used: {} in {} shape{}, most frequent first:",
            exam.unused_lines(),
            exam.unused.len(),
            if exam.unused.len() == 1 { "" } else { "s" }
        );
        shapes(&mut o, p, &exam.unused);
    }
    o
}

fn shapes(o: &mut String, p: &str, list: &[ShapeCount]) {
    for sc in list.iter().take(SHOWN_SHAPES) {
        if sc.line == 0 {
            let _ = writeln!(o, "{p}  {:>6}×  {}", sc.count, sc.shape);
            continue;
        }
        if sc.count == 1 || sc.example == sc.shape.trim() {
            let _ = writeln!(o, "{p}  {:>6}×  line {}: {}", sc.count, sc.line, quoted(&sc.example));
            continue;
        }
        let _ = writeln!(
            o,
            "{p}  {:>6}×  {}   e.g. line {}: {}",
            sc.count,
            quoted(&sc.shape),
            sc.line,
            quoted(&sc.example)
        );
    }
    if list.len() > SHOWN_SHAPES {
        let rest: u64 = list[SHOWN_SHAPES..].iter().map(|s| s.count).sum();
        let _ = writeln!(o, "{p}  … and {} more shapes ({rest} lines)", list.len() - SHOWN_SHAPES);
    }
}

/// The full `parsers check DEF FILE` report.
pub fn report_text(def: &Definition, file: &str, exam: &Examination) -> String {
    let mut o = String::new();
    let from = match def.origin() {
        crate::parser::Origin::Builtin => "built in".to_string(),
        crate::parser::Origin::File(p) => p.display().to_string(),
    };
    let _ = writeln!(
        o,
        "definition `{}` ({}, {from}) is valid; reading {file}:",
        def.name(),
        def.engine()
    );
    o.push_str(&extract_summary(exam, "  "));
    let mut problems = 0;
    if exam.records == 0 {
        problems += 1;
        let _ = writeln!(
            o,
            "\nno records: {}",
            if exam.engine == "lines" {
                "no step rule matched a line (see the rules below)"
            } else {
                "no data row was found (a row needs a number in its index column)"
            }
        );
    }
    if !exam.rules.is_empty() {
        let _ = writeln!(o, "\nrules:");
        for r in &exam.rules {
            let reads = r.kind == "step" || r.kind == "value";
            let (mark, note) = match (r.matched, reads) {
                (0, true) => ("✗", "  — never matched"),
                (0, false) => ("·", "  — not seen in this file (normal unless the file shows it)"),
                _ => ("✓", ""),
            };
            let _ = writeln!(
                o,
                "  {mark} {:<28} {:<5} {:>7} line{}{note}",
                r.label,
                r.kind,
                r.matched,
                if r.matched == 1 { "" } else { "s" }
            );
        }
        problems += exam.reading_rules_unmatched().count();
    }
    if !exam.skips.is_empty() || exam.stats.skipped > 0 {
        let _ = writeln!(o, "\nlines that matched but could not be used: {}", exam.stats.skipped);
        const SHOWN: usize = 5;
        for s in exam.skips.iter().take(SHOWN) {
            let _ = writeln!(o, "  line {}: {}", s.line, s.reason);
        }
        if exam.stats.skipped > SHOWN as u64 {
            let _ = writeln!(
                o,
                "  … {} more{}",
                exam.stats.skipped - SHOWN as u64,
                if exam.failures.is_empty() { "" } else { " (grouped by rule below)" }
            );
        }
    }
    if !exam.failures.is_empty() {
        problems += exam.failures.len();
        let _ = writeln!(o, "\nvalues that did not read as numbers:");
        for f in &exam.failures {
            let _ = writeln!(
                o,
                "  {} capture `{}`: {} line{}, first line {}: {}",
                f.rule,
                f.group,
                f.count,
                if f.count == 1 { "" } else { "s" },
                f.line,
                quoted(&f.text)
            );
        }
    }
    let mixed: Vec<_> = exam.mixed().collect();
    if !mixed.is_empty() || !exam.repeats.is_empty() {
        let _ = writeln!(o, "\nrules that probably match lines they were not meant for:");
    }
    for r in &mixed {
        problems += 1;
        let _ = writeln!(
            o,
            "  {} matches {} kinds of line (captures shown as <group>):",
            r.label,
            r.shapes.len()
        );
        shapes(&mut o, "  ", &r.shapes);
        let _ = writeln!(
            o,
            "    if only the first kind is meant, anchor the pattern (`^...$`) or spell out the words around the values"
        );
    }
    for f in &exam.repeats {
        problems += 1;
        let labels = f.labels();
        let lines: Vec<String> = f
            .example
            .iter()
            .map(|(l, label, _)| match label {
                Some(lb) if !labels.is_empty() => format!("line {l} after {}", quoted(lb)),
                _ => format!("line {l}"),
            })
            .collect();
        let _ = writeln!(
            o,
            "  {} gives `{}` {} times in one record ({}), in {} record{}; repeat = \"{}\" keeps one of them",
            f.rule,
            f.series,
            f.most,
            lines.join(", "),
            f.records,
            if f.records == 1 { "" } else { "s" },
            f.policy
        );
        if let Some((_, _, example)) = f.example.first() {
            let _ = writeln!(o, "    e.g. {}", quoted(example));
        }
        if labels.is_empty() {
            let _ = writeln!(
                o,
                "    inner iterations? use repeat = \"all\" to keep every value; otherwise limit the rule with `after`"
            );
        } else {
            let _ = writeln!(
                o,
                "    two quantities read as one: write one rule per block, each with `after` set to its label line ({}) and its own series names",
                labels.iter().map(|l| quoted(l)).collect::<Vec<_>>().join(", ")
            );
        }
    }
    if problems == 0 {
        let _ = writeln!(o, "\nno problems found");
    } else {
        let _ =
            writeln!(o, "\n{problems} thing{} to look at", if problems == 1 { "" } else { "s" });
    }
    o
}
