//! `settle parsers check DEF FILE`: how a definition reads a file, and where it probably
//! does not do what its author meant.
//!
//! The file is read twice over, line by line. First by the definition's real parser, so
//! records, series, events, skipped lines and the lines nobody used are exactly what
//! `parse`, `check` and `watch` would get (a line counts as unused when the parser's
//! `ignored` count grows on it). Then, for a `lines` definition, each rule's pattern is
//! tried on every line in the order and scope the engine uses (step rules first and only
//! the first that matches; `start_after`; `after` anchors reset at each record), to say per
//! rule:
//!
//! * how many lines it matched (a rule that matched none is reported);
//! * which values did not read as numbers, grouped by rule and capture with an example;
//! * **two shapes under one rule**: the lines it matched, with its captures masked
//!   (`<name> res <value>`), fall into more than one shape, so the rule reads lines of
//!   another kind too;
//! * **one series several times per record**: the rule gives the same series more than once
//!   in one record while its repeat policy keeps one value. When the repeats follow
//!   different label lines (a `Total :` line under `Forces` and again under `Moments`) the
//!   rule almost certainly reads two quantities as one; an `after` anchor per label
//!   separates them.
//!
//! Everything here is a pure function of the definition and the bytes; `report_text` in
//! `check/text.rs` words it.

mod text;

use std::collections::HashMap;

use super::lines::{Kind as RuleKind, LinesProgram, Repeat};
use super::matcher::{Captures, leading_ws};
use super::number::{parse_integer, parse_number};
use super::series::clean_text;
use super::shape::{Kind as TokKind, tokens};
use super::{Definition, compile::Program};
use crate::record::{LineStats, Role, Severity, Skip};
use crate::run::SourceStore;

pub use text::{extract_summary, report_text};

/// Distinct shapes remembered per group (the rest are counted together).
const MAX_SHAPES: usize = 200;

/// A group of lines of one shape.
#[derive(Debug, Clone, PartialEq)]
pub struct ShapeCount {
    pub shape: String,
    pub count: u64,
    /// 1-based number of the first line of this shape.
    pub line: u64,
    pub example: String,
}

/// One series as read.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesSummary {
    pub name: String,
    pub role: Role,
    pub count: usize,
    pub first: f64,
    pub last: f64,
    pub non_finite: usize,
}

/// What one rule of a `lines` definition matched.
#[derive(Debug, Clone, PartialEq)]
pub struct RuleReport {
    /// `rules[3] (forces)`.
    pub label: String,
    pub kind: &'static str,
    pub matched: u64,
    /// Shapes of the matched lines with the captures masked, most frequent first.
    pub shapes: Vec<ShapeCount>,
}

/// A captured value that did not read as a number.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadFailure {
    pub rule: String,
    pub group: String,
    pub count: u64,
    pub line: u64,
    pub text: String,
}

/// A rule that gave one series several times in one record while keeping one value.
#[derive(Debug, Clone, PartialEq)]
pub struct RepeatFinding {
    pub rule: String,
    /// The series (several, comma-separated, when one line gives them together).
    pub series: String,
    pub policy: &'static str,
    /// Records in which it happened, and the most times in one record.
    pub records: u64,
    pub most: usize,
    /// The first record's occurrences: line number, label line before it, the line.
    pub example: Vec<(u64, Option<String>, String)>,
}

impl RepeatFinding {
    /// The label lines the repeats follow, when they differ (two blocks).
    pub fn labels(&self) -> Vec<&str> {
        let mut out: Vec<&str> = Vec::new();
        for (_, l, _) in &self.example {
            if let Some(l) = l.as_deref()
                && !out.contains(&l)
            {
                out.push(l);
            }
        }
        if out.len() > 1 { out } else { Vec::new() }
    }
}

/// Everything `parsers check` found.
#[derive(Debug, Clone, PartialEq)]
pub struct Examination {
    pub engine: &'static str,
    pub stats: LineStats,
    pub records: usize,
    pub iterations: Option<(i64, i64)>,
    pub times: Option<(f64, f64)>,
    pub series: Vec<SeriesSummary>,
    /// Event rule, severity, count, first message.
    pub events: Vec<(String, Severity, u64, String)>,
    pub end: Option<String>,
    pub skips: Vec<Skip>,
    /// Lines no rule used, by shape, most frequent first.
    pub unused: Vec<ShapeCount>,
    pub rules: Vec<RuleReport>,
    pub failures: Vec<ReadFailure>,
    pub repeats: Vec<RepeatFinding>,
}

impl Examination {
    /// Rules that matched no line.
    pub fn never_matched(&self) -> impl Iterator<Item = &RuleReport> {
        self.rules.iter().filter(|r| r.matched == 0)
    }

    /// Step and value rules that matched no line (event and end rules wait for lines a
    /// healthy run may never print).
    pub fn reading_rules_unmatched(&self) -> impl Iterator<Item = &RuleReport> {
        self.never_matched().filter(|r| r.kind == "step" || r.kind == "value")
    }

    /// Rules whose matched lines have more than one shape.
    pub fn mixed(&self) -> impl Iterator<Item = &RuleReport> {
        self.rules.iter().filter(|r| (r.kind == "step" || r.kind == "value") && r.shapes.len() > 1)
    }

    /// Lines no rule used.
    pub fn unused_lines(&self) -> u64 {
        self.unused.iter().map(|s| s.count).sum()
    }

    /// Nothing to look at: every rule matched, every value read, no rule reads two kinds
    /// of line or one series twice per record, and no record-less file.
    pub fn clean(&self) -> bool {
        self.reading_rules_unmatched().next().is_none()
            && self.failures.is_empty()
            && self.repeats.is_empty()
            && self.mixed().next().is_none()
            && self.stats.skipped == 0
            && self.records > 0
    }
}

/// Lines of a file as the followers give them: split at `\n`, a trailing `\r` removed, no
/// empty piece after a final newline.
pub fn lines_of(text: &[u8]) -> Vec<&[u8]> {
    let mut lines: Vec<&[u8]> =
        text.split(|&b| b == b'\n').map(|l| l.strip_suffix(b"\r").unwrap_or(l)).collect();
    if lines.last().is_some_and(|l| l.is_empty()) {
        lines.pop();
    }
    lines
}

/// Shape groups with a cap on how many distinct shapes are kept.
#[derive(Default)]
struct Shapes {
    by_shape: HashMap<String, usize>,
    groups: Vec<ShapeCount>,
    other: u64,
}

impl Shapes {
    fn add(&mut self, shape: String, line_no: u64, line: &[u8]) {
        if let Some(&i) = self.by_shape.get(&shape) {
            self.groups[i].count += 1;
            return;
        }
        if self.groups.len() >= MAX_SHAPES {
            self.other += 1;
            return;
        }
        self.by_shape.insert(shape.clone(), self.groups.len());
        self.groups.push(ShapeCount { shape, count: 1, line: line_no, example: clean_text(line) });
    }

    fn sorted(mut self) -> Vec<ShapeCount> {
        self.groups.sort_by(|a, b| b.count.cmp(&a.count).then(a.line.cmp(&b.line)));
        if self.other > 0 {
            self.groups.push(ShapeCount {
                shape: "(other shapes)".into(),
                count: self.other,
                line: 0,
                example: String::new(),
            });
        }
        self.groups
    }
}

/// A line as shown in a report: tabs as blanks, control characters removed.
fn shown(line: &[u8]) -> String {
    let spaced: Vec<u8> = line.iter().map(|&b| if b == b'\t' { b' ' } else { b }).collect();
    clean_text(&spaced)
}

/// Read `text` with `def` and examine the result.
pub fn examine(def: &Definition, text: &[u8]) -> Examination {
    let lines = lines_of(text);
    let mut parser = def.parser();
    let mut store = SourceStore::new("file", def.name());
    let mut out = Vec::new();
    let mut unused = Shapes::default();
    let mut skips = Vec::new();
    for (i, line) in lines.iter().enumerate() {
        let before = parser.stats().ignored;
        parser.feed(line, &mut out);
        if parser.stats().ignored > before {
            unused.add(super::shape::shape(line), i as u64 + 1, line);
        }
        collect_skips(&out, &mut skips);
        store.apply(out.drain(..));
    }
    parser.finish(&mut out);
    collect_skips(&out, &mut skips);
    store.apply(out.drain(..));
    let stats = parser.stats();

    let series = store
        .series()
        .iter()
        .map(|s| SeriesSummary {
            name: s.name.clone(),
            role: s.role,
            count: s.len(),
            first: s.values().first().copied().unwrap_or(f64::NAN),
            last: s.last().unwrap_or(f64::NAN),
            non_finite: s.values().iter().filter(|v| !v.is_finite()).count(),
        })
        .collect();
    let mut events: Vec<(String, Severity, u64, String)> = Vec::new();
    for e in &store.events {
        match events.iter_mut().find(|(r, ..)| *r == e.rule) {
            Some(x) => x.2 += 1,
            None => events.push((e.rule.clone(), e.severity, 1, e.message.clone())),
        }
    }
    let iterations = match (store.iterations().first(), store.iterations().last()) {
        (Some(&a), Some(&b)) => Some((a, b)),
        _ => None,
    };
    let times = store.times().and_then(|t| {
        let finite: Vec<f64> = t.iter().copied().filter(|x| x.is_finite()).collect();
        Some((*finite.first()?, *finite.last()?))
    });
    let mut exam = Examination {
        engine: def.engine(),
        stats,
        records: store.records(),
        iterations,
        times,
        series,
        events,
        end: store.ended.as_ref().map(|(_, m)| m.clone()),
        skips,
        unused: unused.sorted(),
        rules: Vec::new(),
        failures: Vec::new(),
        repeats: Vec::new(),
    };
    if let Program::Lines(prog) = &def.compiled.program {
        examine_rules(prog, &lines, &mut exam);
    }
    exam
}

/// The series `def` reads from `lines`, in order of appearance, with their values and
/// whether every value is a whole number (for guessing roles).
pub fn examine_series(def: &Definition, lines: &[&[u8]]) -> Vec<(String, Vec<f64>, bool)> {
    let mut parser = def.parser();
    let mut store = SourceStore::new("sample", def.name());
    let mut out = Vec::new();
    for line in lines {
        parser.feed(line, &mut out);
        store.apply(out.drain(..));
    }
    parser.finish(&mut out);
    store.apply(out.drain(..));
    store
        .series()
        .iter()
        .map(|s| {
            let whole = s.values().iter().all(|v| v.is_finite() && v.fract() == 0.0);
            (s.name.clone(), s.values().to_vec(), whole)
        })
        .collect()
}

fn collect_skips(out: &[crate::record::Output], skips: &mut Vec<Skip>) {
    for o in out.iter() {
        if let crate::record::Output::Skipped(s) = o {
            skips.push(s.clone());
        }
    }
}

/// Per-rule bookkeeping while replaying the engine's order.
struct RuleTrack {
    matched: u64,
    shapes: Shapes,
}

/// One series given by one rule within the open record.
type RecordKey = (usize, String);
/// Occurrences within the open record: line number, label line above, the line.
type InRecord = HashMap<RecordKey, Vec<(u64, Option<String>, String)>>;

fn examine_rules(prog: &LinesProgram, lines: &[&[u8]], exam: &mut Examination) {
    let mut caps: Vec<Captures> = prog.rules.iter().map(|r| r.matcher.captures_storage()).collect();
    let mut anchor_caps: Vec<Captures> =
        prog.anchors.iter().map(|a| a.captures_storage()).collect();
    let mut start_caps = prog.start_after.as_ref().map(|m| m.captures_storage());
    let mut anchor_seen = vec![0u64; prog.anchors.len()];
    let mut scope = 1u64;
    let mut started = prog.start_after.is_none();
    let mut track: Vec<RuleTrack> =
        prog.rules.iter().map(|_| RuleTrack { matched: 0, shapes: Shapes::default() }).collect();
    let mut failures: Vec<ReadFailure> = Vec::new();
    let mut in_record: InRecord = HashMap::new();
    let mut repeats: Vec<RepeatFinding> = Vec::new();
    let mut label: Option<String> = None;

    let close = |in_record: &mut InRecord, repeats: &mut Vec<RepeatFinding>| {
        let mut keys: Vec<&RecordKey> = in_record.keys().collect();
        keys.sort();
        for key in keys {
            let hits = &in_record[key];
            let rule = &prog.rules[key.0];
            // `all` keeps every value; `first` after an anchor is how a block is read
            // (the lines of later blocks come after the anchor too): both are meant.
            let anchored_first = rule.repeat == Repeat::First && rule.after.is_some();
            if hits.len() < 2 || rule.repeat == Repeat::All || anchored_first {
                continue;
            }
            match repeats.iter_mut().find(|f| f.rule == rule.label && f.series == key.1) {
                Some(f) => {
                    f.records += 1;
                    f.most = f.most.max(hits.len());
                }
                None => repeats.push(RepeatFinding {
                    rule: rule.label.clone(),
                    series: key.1.clone(),
                    policy: repeat_word(rule.repeat),
                    records: 1,
                    most: hits.len(),
                    example: hits.clone(),
                }),
            }
        }
        in_record.clear();
    };

    for (li, line) in lines.iter().enumerate() {
        let line_no = li as u64 + 1;
        let ws = leading_ws(line);
        let steps_apply = started;
        if !started
            && let (Some(m), Some(c)) = (&prog.start_after, &mut start_caps)
            && m.find(line, ws, c)
        {
            started = true;
        }
        let mut valued = false;
        let hit = |r: usize, caps: &Captures, track: &mut Vec<RuleTrack>| {
            track[r].matched += 1;
            let spans = capture_spans(prog, r, caps);
            track[r].shapes.add(masked_shape(line, &spans), line_no, line);
        };
        if steps_apply {
            for &r in &prog.steps {
                if prog.rules[r].matcher.find(line, ws, &mut caps[r]) {
                    hit(r, &caps[r], &mut track);
                    close(&mut in_record, &mut repeats);
                    scope += 1;
                    read_values(prog, r, line, line_no, &caps[r], &mut failures, None);
                    break;
                }
            }
            for &r in &prog.values {
                let rule = &prog.rules[r];
                if rule.after.is_some_and(|a| anchor_seen[a] != scope) {
                    continue;
                }
                if rule.matcher.find(line, ws, &mut caps[r]) {
                    hit(r, &caps[r], &mut track);
                    valued = true;
                    let mut given = Vec::new();
                    read_values(prog, r, line, line_no, &caps[r], &mut failures, Some(&mut given));
                    for name in given {
                        in_record.entry((r, name)).or_default().push((
                            line_no,
                            label.clone(),
                            shown(line),
                        ));
                    }
                }
            }
        }
        for &r in &prog.events {
            let rule = &prog.rules[r];
            if rule.after.is_some_and(|a| anchor_seen[a] != scope) {
                continue;
            }
            if rule.matcher.find(line, ws, &mut caps[r]) {
                hit(r, &caps[r], &mut track);
            }
        }
        for &r in &prog.ends {
            if prog.rules[r].matcher.find(line, ws, &mut caps[r]) {
                hit(r, &caps[r], &mut track);
                close(&mut in_record, &mut repeats);
                break;
            }
        }
        for (i, anchor) in prog.anchors.iter().enumerate() {
            if anchor_seen[i] != scope && anchor.find(line, ws, &mut anchor_caps[i]) {
                anchor_seen[i] = scope;
            }
        }
        // A line without numbers that no value rule read is a label for the lines below it.
        if !valued {
            let toks = tokens(line);
            if toks.iter().any(|t| t.kind == TokKind::Word)
                && toks.iter().all(|t| t.kind != TokKind::Num)
            {
                label = Some(clean_text(line));
            }
        }
    }
    close(&mut in_record, &mut repeats);
    // One finding per rule and occurrence lines: the captures of one line (`x`, `y`, `z`)
    // repeat together.
    let mut merged: Vec<RepeatFinding> = Vec::new();
    for f in repeats {
        let lines = |f: &RepeatFinding| f.example.iter().map(|e| e.0).collect::<Vec<u64>>();
        match merged.iter_mut().find(|m| m.rule == f.rule && lines(m) == lines(&f)) {
            Some(m) => {
                m.series.push_str(", ");
                m.series.push_str(&f.series);
            }
            None => merged.push(f),
        }
    }
    let repeats = merged;
    exam.rules = prog
        .rules
        .iter()
        .zip(track)
        .map(|(rule, t)| RuleReport {
            label: rule.label.clone(),
            kind: rule.kind.as_str(),
            matched: t.matched,
            shapes: t.shapes.sorted(),
        })
        .collect();
    exam.failures = failures;
    exam.repeats = repeats;
}

fn repeat_word(r: Repeat) -> &'static str {
    match r {
        Repeat::First => "first",
        Repeat::Last => "last",
        Repeat::Min => "min",
        Repeat::Max => "max",
        Repeat::All => "all",
    }
}

/// The spans of a rule's named captures in its last match, with the group names.
fn capture_spans(prog: &LinesProgram, r: usize, caps: &Captures) -> Vec<(usize, usize, String)> {
    let rule = &prog.rules[r];
    let mut spans = Vec::new();
    let mut add = |g: Option<usize>, name: &str| {
        if let Some((s, e)) = g.and_then(|g| caps.get(g)) {
            spans.push((s, e, name.to_string()));
        }
    };
    add(rule.iteration_group, "iteration");
    add(rule.time_group, "time");
    add(rule.name_group, "name");
    add(rule.message_group, "message");
    for vc in &rule.values {
        add(Some(vc.group), &vc.label);
    }
    spans.sort();
    spans
}

/// The shape of a line with each captured span shown as `<group>`.
pub fn masked_shape(line: &[u8], spans: &[(usize, usize, String)]) -> String {
    let mut s = String::new();
    if line.first().is_some_and(|b| b.is_ascii_whitespace()) {
        s.push_str("  ");
    }
    let mut shown = vec![false; spans.len()];
    for t in tokens(line) {
        let inside = spans.iter().position(|&(a, b, _)| t.start < b && t.end > a);
        if t.gap_before {
            s.push(' ');
        }
        match inside {
            Some(k) if shown[k] => {
                if t.gap_before {
                    s.pop();
                }
            }
            Some(k) => {
                shown[k] = true;
                s.push('<');
                s.push_str(&spans[k].2);
                s.push('>');
            }
            None => match t.kind {
                TokKind::Num => s.push('#'),
                _ => s.push_str(&String::from_utf8_lossy(t.text(line))),
            },
        }
    }
    s
}

/// Check that a rule's captures read; with `given`, collect the series names it gives.
fn read_values(
    prog: &LinesProgram,
    r: usize,
    line: &[u8],
    line_no: u64,
    caps: &Captures,
    failures: &mut Vec<ReadFailure>,
    mut given: Option<&mut Vec<String>>,
) {
    let rule = &prog.rules[r];
    let mut fail = |group: &str, (s, e): (usize, usize)| match failures
        .iter_mut()
        .find(|f| f.rule == rule.label && f.group == group)
    {
        Some(f) => f.count += 1,
        None => failures.push(ReadFailure {
            rule: rule.label.clone(),
            group: group.to_string(),
            count: 1,
            line: line_no,
            text: clean_text(&line[s..e]),
        }),
    };
    if rule.kind == RuleKind::Step {
        if let Some(span) = rule.iteration_group.and_then(|g| caps.get(g))
            && parse_integer(&line[span.0..span.1]).is_none()
        {
            fail("iteration", span);
        }
        if let Some(span) = rule.time_group.and_then(|g| caps.get(g))
            && parse_number(&line[span.0..span.1]).is_none()
        {
            fail("time", span);
        }
    }
    let name = rule.name_group.and_then(|g| caps.get(g)).map(|(s, e)| clean_text(&line[s..e]));
    for vc in &rule.values {
        let Some(span) = caps.get(vc.group) else { continue };
        if parse_number(&line[span.0..span.1]).is_none() {
            fail(&vc.label, span);
            continue;
        }
        if let Some(g) = given.as_deref_mut() {
            let series = match (&name, vc.uses_name) {
                (Some(n), true) => vc.series.replace("{name}", n),
                _ => vc.series.clone(),
            };
            g.push(series);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn masked_shapes_hide_captures() {
        let line = b"  Ux  res 1.0e-3  lin 5 sweeps";
        let spans = vec![(2, 4, "name".to_string()), (10, 16, "value".to_string())];
        assert_eq!(masked_shape(line, &spans), "  <name> res <value> lin # sweeps");
    }

    #[test]
    fn lines_split_like_the_follower() {
        assert_eq!(lines_of(b"a\r\nb\n"), vec![&b"a"[..], b"b"]);
        assert_eq!(lines_of(b"a\n\nb"), vec![&b"a"[..], b"", b"b"]);
        assert!(lines_of(b"").is_empty());
    }
}
