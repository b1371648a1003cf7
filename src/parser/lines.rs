//! The `lines` engine: regex rules over free-text logs, one line at a time.
//!
//! A compiled [`LinesProgram`] (built by `lines/compile.rs` from the raw definition) is shared
//! read-only by every [`LinesParser`]; the parser owns only its mutable state. For each line:
//!
//! 1. before the `start_after` marker has been seen, only event and end rules apply (a crash
//!    while reading the mesh is still reported; banner lines cannot open records);
//! 2. the first matching step rule closes the open record (emitting it) and opens a new one,
//!    taking over any values that were waiting for it (`attach = "next"`);
//! 3. every value rule is tried, then every event rule, then the end rules;
//! 4. anchors (`after = "..."`) are updated last, so an anchor line itself is not "after" it
//!    (an anchor line counts as used).
//!
//! The common path allocates nothing: prefilters reject most rules with a prefix or `memmem`
//! test, captures are read into per-rule reusable `CaptureLocations`, numbers are parsed from
//! the bytes, and series ids are found by byte lookups. Allocation happens when a record is
//! emitted, a series is first seen, or an event or skip reason is produced.

pub mod compile;

use std::sync::Arc;

use super::matcher::{Captures, Gate, Matcher, leading_ws};
use super::number::{parse_integer, parse_number};
use super::series::{FnvMap, LineUse, SeriesTable, Tally, clean_text, excerpt};
use crate::record::{Event, LineStats, Output, Record, Role, SeriesId, Severity};

/// Most values one record may hold (repeat policy `all` over a huge step-less stretch).
const MAX_RECORD_VALUES: usize = 100_000;

/// What a rule does.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    Step,
    Value,
    Event,
    End,
}

impl Kind {
    pub fn as_str(self) -> &'static str {
        match self {
            Kind::Step => "step",
            Kind::Value => "value",
            Kind::Event => "event",
            Kind::End => "end",
        }
    }
}

/// What to do when a rule gives the same series more than once in one record.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Repeat {
    First,
    Last,
    Min,
    Max,
    /// Keep every value, in order (inner iterations).
    All,
}

/// Which record a value rule's values belong to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Attach {
    /// The record open when the line is read.
    Current,
    /// The record the next step line opens (values printed before their step line).
    Next,
}

/// How one named capture group becomes a series.
#[derive(Debug, Clone)]
pub struct ValueCapture {
    /// Capture group index in the rule's regex.
    pub group: usize,
    /// Group name, for messages.
    pub label: String,
    /// Series name, or a template containing `{name}`.
    pub series: String,
    /// Does `series` contain `{name}`?
    pub uses_name: bool,
    pub role: Role,
}

/// One compiled rule.
#[derive(Debug, Clone)]
pub struct Rule {
    /// `rules[i]` plus the rule's name when it has one, for skip reasons.
    pub label: String,
    pub kind: Kind,
    pub matcher: Matcher,
    /// Index into [`LinesProgram::anchors`].
    pub after: Option<usize>,
    pub repeat: Repeat,
    pub attach: Attach,
    pub name_group: Option<usize>,
    pub iteration_group: Option<usize>,
    pub time_group: Option<usize>,
    pub message_group: Option<usize>,
    pub values: Vec<ValueCapture>,
    pub severity: Severity,
    /// Event rule name (`Event::rule`).
    pub event_name: String,
}

/// A validated `lines` definition, ready to run.
#[derive(Debug, Clone)]
pub struct LinesProgram {
    pub start_after: Option<Matcher>,
    pub rules: Vec<Rule>,
    pub steps: Vec<usize>,
    pub values: Vec<usize>,
    pub events: Vec<usize>,
    pub ends: Vec<usize>,
    pub anchors: Vec<Matcher>,
    pub dispatch: Dispatch,
}

/// Which rules a line can match at all, from its first bytes: one table lookup per line
/// instead of one prefilter test per rule. Bit `r` of a mask stands for rule `r`; rules past
/// the 64th are not indexed and always tried.
#[derive(Debug, Clone)]
pub struct Dispatch {
    /// By the line's first byte (index 256: empty line).
    col0: Box<[u64; 257]>,
    /// By the first byte after the leading blanks (index 256: none).
    after_blanks: Box<[u64; 257]>,
    /// Rules with no usable gate.
    always: u64,
}

impl Dispatch {
    pub fn new(rules: &[Rule]) -> Dispatch {
        let mut d =
            Dispatch { col0: Box::new([0; 257]), after_blanks: Box::new([0; 257]), always: 0 };
        for (r, rule) in rules.iter().enumerate().take(64) {
            let bit = 1u64 << r;
            match rule.matcher.gate() {
                Gate::Any => d.always |= bit,
                Gate::Col0(set) => {
                    for b in 0..=255u8 {
                        if set.contains(b) {
                            d.col0[usize::from(b)] |= bit;
                        }
                    }
                }
                Gate::AfterBlanks { set, .. } => {
                    for b in 0..=255u8 {
                        if set.contains(b) {
                            d.after_blanks[usize::from(b)] |= bit;
                        }
                    }
                }
            }
        }
        d
    }

    /// The rules `line` (with `ws` leading blanks) may match.
    #[inline]
    fn candidates(&self, line: &[u8], ws: usize) -> Candidates {
        let at = |i: usize| line.get(i).map_or(256, |&b| usize::from(b));
        Candidates(self.always | self.col0[at(0)] | self.after_blanks[at(ws)])
    }
}

/// A set of rule indices from [`Dispatch::candidates`].
#[derive(Debug, Clone, Copy)]
struct Candidates(u64);

impl Candidates {
    #[inline]
    fn has(self, r: usize) -> bool {
        r >= 64 || (self.0 >> r) & 1 != 0
    }
}

/// Values gathered for one record, with the repeat policy applied as they arrive.
#[derive(Debug, Clone)]
struct Accum {
    values: Vec<(SeriesId, f64)>,
    /// Generation of this record; `slot_gen[s] == generation` means series `s` has a slot.
    generation: u64,
    slot_gen: Vec<u64>,
    slot_idx: Vec<u32>,
}

impl Accum {
    fn new() -> Accum {
        Accum { values: Vec::new(), generation: 1, slot_gen: Vec::new(), slot_idx: Vec::new() }
    }

    /// Add a value; `false` when the record is full.
    fn push(&mut self, s: SeriesId, v: f64, repeat: Repeat) -> bool {
        let si = s as usize;
        if repeat == Repeat::All {
            if self.values.len() >= MAX_RECORD_VALUES {
                return false;
            }
            self.values.push((s, v));
            return true;
        }
        if si >= self.slot_gen.len() {
            self.slot_gen.resize(si + 1, 0);
            self.slot_idx.resize(si + 1, 0);
        }
        if self.slot_gen[si] == self.generation {
            let slot = &mut self.values[self.slot_idx[si] as usize].1;
            let old = *slot;
            *slot = match repeat {
                Repeat::First | Repeat::All => old,
                Repeat::Last => v,
                // A nan among the matches wins: it is the signal, not noise.
                Repeat::Min if old.is_nan() || v.is_nan() => f64::NAN,
                Repeat::Max if old.is_nan() || v.is_nan() => f64::NAN,
                Repeat::Min => old.min(v),
                Repeat::Max => old.max(v),
            };
            return true;
        }
        if self.values.len() >= MAX_RECORD_VALUES {
            return false;
        }
        self.slot_gen[si] = self.generation;
        self.slot_idx[si] = self.values.len() as u32;
        self.values.push((s, v));
        true
    }

    /// Hand out the values and start an empty record.
    fn take(&mut self) -> Vec<(SeriesId, f64)> {
        self.generation += 1;
        let cap = self.values.len();
        std::mem::replace(&mut self.values, Vec::with_capacity(cap))
    }

    fn clear(&mut self) {
        self.generation += 1;
        self.values.clear();
    }
}

/// Mutable per-rule state.
#[derive(Debug, Clone)]
struct RuleState {
    locs: Captures,
    /// Series id of each value capture with a fixed name, once created.
    fixed: Vec<Option<SeriesId>>,
    /// Captured name bytes → row of `named_ids`: one lookup per line, however many value
    /// captures use `{name}`.
    names: FnvMap<Box<[u8]>, usize>,
    /// Row-major, one row per known name and one column per value capture: the series id of
    /// that capture for that name, once created.
    named_ids: Vec<Option<SeriesId>>,
    /// Scope in which this (event) rule last fired, for `repeat = "first"`.
    fired_scope: u64,
}

/// The record being filled.
#[derive(Debug, Clone, Copy)]
struct OpenRecord {
    iteration: Option<i64>,
    time: Option<f64>,
    line: u64,
}

/// A failure on the current line, formatted only if it will be reported.
#[derive(Debug, Clone, Copy)]
enum Failure {
    NotANumber { rule: usize, capture: usize, span: (usize, usize) },
    BadIteration { rule: usize, span: (usize, usize) },
    BadTime { rule: usize, span: (usize, usize) },
    NoRecord { rule: usize },
    NoName { rule: usize },
    TooManySeries { rule: usize },
    RecordFull { rule: usize },
}

/// A running `lines` parser for one source.
#[derive(Debug, Clone)]
pub struct LinesParser {
    prog: Arc<LinesProgram>,
    st: State,
}

#[derive(Debug, Clone)]
struct State {
    line_no: u64,
    tally: Tally,
    started: bool,
    open: Option<OpenRecord>,
    cur: Accum,
    pending: Accum,
    /// Incremented whenever a record opens; anchors and `first` events are per scope.
    scope: u64,
    anchor_seen: Vec<u64>,
    /// Capture storage for each anchor, and for the `start_after` marker.
    anchor_caps: Vec<Captures>,
    start_caps: Option<Captures>,
    rules: Vec<RuleState>,
    series: SeriesTable,
    failure: Option<Failure>,
}

impl LinesParser {
    pub fn new(prog: Arc<LinesProgram>) -> LinesParser {
        let rules = prog
            .rules
            .iter()
            .map(|r| RuleState {
                locs: r.matcher.captures_storage(),
                fixed: vec![None; r.values.len()],
                names: FnvMap::default(),
                named_ids: Vec::new(),
                fired_scope: 0,
            })
            .collect();
        let st = State {
            line_no: 0,
            tally: Tally::default(),
            started: prog.start_after.is_none(),
            open: None,
            cur: Accum::new(),
            pending: Accum::new(),
            scope: 1,
            anchor_seen: vec![0; prog.anchors.len()],
            anchor_caps: prog.anchors.iter().map(Matcher::captures_storage).collect(),
            start_caps: prog.start_after.as_ref().map(Matcher::captures_storage),
            rules,
            series: SeriesTable::default(),
            failure: None,
        };
        LinesParser { prog, st }
    }

    pub fn feed(&mut self, line: &[u8], out: &mut Vec<Output>) {
        self.st.feed(&self.prog, line, out);
    }

    pub fn finish(&mut self, out: &mut Vec<Output>) {
        self.st.close_record(out);
        self.st.pending.clear();
    }

    pub fn stats(&self) -> LineStats {
        self.st.tally.stats
    }
}

impl State {
    fn feed(&mut self, prog: &LinesProgram, raw: &[u8], out: &mut Vec<Output>) {
        self.line_no += 1;
        self.tally.stats.lines += 1;
        let line = raw.strip_suffix(b"\r").unwrap_or(raw);
        let ws = leading_ws(line);
        self.failure = None;
        let mut used = LineUse::Ignored;

        let steps_apply = self.started;
        if !self.started
            && let Some(marker) = &prog.start_after
            && let Some(caps) = &mut self.start_caps
            && marker.find(line, ws, caps)
        {
            self.started = true;
        }
        let cand = prog.dispatch.candidates(line, ws);
        if steps_apply {
            for &r in &prog.steps {
                if !cand.has(r) {
                    continue;
                }
                let u = self.step_rule(prog, r, line, ws, out);
                if u != LineUse::Ignored {
                    used = used.and(u);
                    break;
                }
            }
            for &r in &prog.values {
                if cand.has(r) {
                    used = used.and(self.value_rule(prog, r, line, ws, out));
                }
            }
        }
        for &r in &prog.events {
            if cand.has(r) {
                used = used.and(self.event_rule(prog, r, line, ws, out));
            }
        }
        for &r in &prog.ends {
            if cand.has(r) && self.end_rule(prog, r, line, ws, out) {
                used = used.and(LineUse::Used);
                break;
            }
        }
        for (i, anchor) in prog.anchors.iter().enumerate() {
            if self.anchor_seen[i] != self.scope && anchor.find(line, ws, &mut self.anchor_caps[i])
            {
                self.anchor_seen[i] = self.scope;
                used = used.and(LineUse::Used);
            }
        }

        match used {
            LineUse::Ignored => self.tally.stats.ignored += 1,
            LineUse::Used => self.tally.stats.used += 1,
            LineUse::Skipped => {
                let failure = self.failure;
                self.tally.skip(self.line_no, out, || describe(prog, line, failure));
            }
        }
    }

    fn fail(&mut self, f: Failure) -> LineUse {
        if self.failure.is_none() {
            self.failure = Some(f);
        }
        LineUse::Skipped
    }

    fn close_record(&mut self, out: &mut Vec<Output>) {
        if let Some(open) = self.open.take() {
            out.push(Output::Record(Record {
                iteration: open.iteration,
                time: open.time,
                values: self.cur.take(),
                line: open.line,
            }));
        }
    }

    fn step_rule(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        ws: usize,
        out: &mut Vec<Output>,
    ) -> LineUse {
        let rule = &prog.rules[r];
        if !rule.matcher.find(line, ws, &mut self.rules[r].locs) {
            return LineUse::Ignored;
        }
        let mut result = LineUse::Used;
        let locs = &self.rules[r].locs;
        let mut iteration = None;
        if let Some((s, e)) = rule.iteration_group.and_then(|g| locs.get(g)) {
            iteration = parse_integer(&line[s..e]);
            if iteration.is_none() {
                self.failure.get_or_insert(Failure::BadIteration { rule: r, span: (s, e) });
                result = LineUse::Skipped;
            }
        }
        let mut time = None;
        if let Some((s, e)) = rule.time_group.and_then(|g| locs.get(g)) {
            time = parse_number(&line[s..e]);
            if time.is_none() {
                self.failure.get_or_insert(Failure::BadTime { rule: r, span: (s, e) });
                result = LineUse::Skipped;
            }
        }
        self.close_record(out);
        self.open = Some(OpenRecord { iteration, time, line: self.line_no });
        // Values printed before this step line become the new record's first values.
        std::mem::swap(&mut self.cur, &mut self.pending);
        self.pending.clear();
        self.scope += 1;
        result.and(self.take_values(prog, r, line, false, out))
    }

    fn value_rule(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        ws: usize,
        out: &mut Vec<Output>,
    ) -> LineUse {
        let rule = &prog.rules[r];
        if let Some(a) = rule.after
            && self.anchor_seen[a] != self.scope
        {
            return LineUse::Ignored;
        }
        if !rule.matcher.find(line, ws, &mut self.rules[r].locs) {
            return LineUse::Ignored;
        }
        let next = rule.attach == Attach::Next;
        if !next && self.open.is_none() {
            return self.fail(Failure::NoRecord { rule: r });
        }
        self.take_values(prog, r, line, next, out)
    }

    /// Read the value captures of rule `r` (whose captures are in its `locs`).
    fn take_values(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        next: bool,
        out: &mut Vec<Output>,
    ) -> LineUse {
        let rule = &prog.rules[r];
        let mut result = LineUse::Used;
        let State { rules, series, cur, pending, failure, .. } = self;
        let rs = &mut rules[r];
        let target = if next { pending } else { cur };
        let name = rule.name_group.and_then(|g| rs.locs.get(g)).map(|(s, e)| &line[s..e]);
        let width = rule.values.len();
        // The row of `name` in `named_ids`, found on first need (`None`: not cached).
        let mut row: Option<Option<usize>> = None;
        for (ci, vc) in rule.values.iter().enumerate() {
            let Some((s, e)) = rs.locs.get(vc.group) else { continue };
            let Some(v) = parse_number(&line[s..e]) else {
                failure.get_or_insert(Failure::NotANumber { rule: r, capture: ci, span: (s, e) });
                result = LineUse::Skipped;
                continue;
            };
            let id = if vc.uses_name {
                let Some(key) = name else {
                    failure.get_or_insert(Failure::NoName { rule: r });
                    result = LineUse::Skipped;
                    continue;
                };
                let at = *row.get_or_insert_with(|| {
                    if let Some(&at) = rs.names.get(key) {
                        return Some(at);
                    }
                    // Junk names could otherwise grow the cache without bound.
                    if rs.names.len() >= 4 * super::series::MAX_SERIES {
                        return None;
                    }
                    let at = rs.names.len();
                    rs.names.insert(key.into(), at);
                    rs.named_ids.resize(rs.named_ids.len() + width, None);
                    Some(at)
                });
                let cell = at.map(|at| at * width + ci);
                match cell.and_then(|c| rs.named_ids.get(c).copied().flatten()) {
                    Some(id) => Some(id),
                    None => {
                        let cleaned = clean_text(key);
                        if cleaned.is_empty() {
                            failure.get_or_insert(Failure::NoName { rule: r });
                            result = LineUse::Skipped;
                            continue;
                        }
                        let id =
                            series.intern(&vc.series.replace("{name}", &cleaned), vc.role, out);
                        if let Some(c) = cell.and_then(|c| rs.named_ids.get_mut(c)) {
                            *c = id;
                        }
                        id
                    }
                }
            } else {
                match rs.fixed[ci] {
                    Some(id) => Some(id),
                    None => {
                        let id = series.intern(&vc.series, vc.role, out);
                        rs.fixed[ci] = id;
                        id
                    }
                }
            };
            let Some(id) = id else {
                failure.get_or_insert(Failure::TooManySeries { rule: r });
                result = LineUse::Skipped;
                continue;
            };
            if !target.push(id, v, rule.repeat) {
                failure.get_or_insert(Failure::RecordFull { rule: r });
                result = LineUse::Skipped;
            }
        }
        result
    }

    fn event_rule(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        ws: usize,
        out: &mut Vec<Output>,
    ) -> LineUse {
        let rule = &prog.rules[r];
        if let Some(a) = rule.after
            && self.anchor_seen[a] != self.scope
        {
            return LineUse::Ignored;
        }
        let rs = &mut self.rules[r];
        if !rule.matcher.find(line, ws, &mut rs.locs) {
            return LineUse::Ignored;
        }
        if rule.repeat == Repeat::First {
            if rs.fired_scope == self.scope {
                return LineUse::Used;
            }
            rs.fired_scope = self.scope;
        }
        let text = match rule.message_group.and_then(|g| rs.locs.get(g)) {
            Some((s, e)) => &line[s..e],
            None => line,
        };
        out.push(Output::Event(Event {
            severity: rule.severity,
            rule: rule.event_name.clone(),
            message: clean_text(text),
            line: self.line_no,
            iteration: self.open.and_then(|o| o.iteration),
        }));
        LineUse::Used
    }

    fn end_rule(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        ws: usize,
        out: &mut Vec<Output>,
    ) -> bool {
        let rule = &prog.rules[r];
        if !rule.matcher.find(line, ws, &mut self.rules[r].locs) {
            return false;
        }
        let text = match rule.message_group.and_then(|g| self.rules[r].locs.get(g)) {
            Some((s, e)) => &line[s..e],
            None => line,
        };
        let message = clean_text(text);
        self.close_record(out);
        self.pending.clear();
        out.push(Output::EndOfRun { line: self.line_no, message });
        // A run appended after this one prints its banner again: wait for its marker.
        if prog.start_after.is_some() {
            self.started = false;
        }
        true
    }
}

fn describe(prog: &LinesProgram, line: &[u8], failure: Option<Failure>) -> String {
    let Some(f) = failure else { return "line could not be used".to_string() };
    match f {
        Failure::NotANumber { rule, capture, span } => {
            let r = &prog.rules[rule];
            format!(
                "{}: capture `{}` is not a number: {}",
                r.label,
                r.values[capture].label,
                excerpt(&line[span.0..span.1])
            )
        }
        Failure::BadIteration { rule, span } => format!(
            "{}: iteration {} is not an integer; record opened without a number",
            prog.rules[rule].label,
            excerpt(&line[span.0..span.1])
        ),
        Failure::BadTime { rule, span } => format!(
            "{}: time {} is not a number; record opened without a time",
            prog.rules[rule].label,
            excerpt(&line[span.0..span.1])
        ),
        Failure::NoRecord { rule } => {
            format!("{}: value before the first step line (no record open)", prog.rules[rule].label)
        }
        Failure::NoName { rule } => {
            format!("{}: the `name` capture is missing or empty", prog.rules[rule].label)
        }
        Failure::TooManySeries { rule } => format!(
            "{}: more than {} series; new names are dropped",
            prog.rules[rule].label,
            super::series::MAX_SERIES
        ),
        Failure::RecordFull { rule } => {
            format!("{}: record already holds {MAX_RECORD_VALUES} values", prog.rules[rule].label)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::parser::{Definition, Origin};

    #[test]
    fn accum_applies_repeat_policies() {
        let mut a = Accum::new();
        for (v, r) in [(3.0, Repeat::First), (1.0, Repeat::First)] {
            a.push(0, v, r);
        }
        for v in [3.0, 1.0, 2.0] {
            a.push(1, v, Repeat::Min);
            a.push(2, v, Repeat::Max);
            a.push(3, v, Repeat::Last);
            a.push(4, v, Repeat::All);
        }
        assert_eq!(
            a.take(),
            vec![(0, 3.0), (1, 1.0), (2, 3.0), (3, 2.0), (4, 3.0), (4, 1.0), (4, 2.0)]
        );
        // A new record starts empty even though the slot vectors are reused.
        a.push(1, 5.0, Repeat::Min);
        a.push(1, f64::NAN, Repeat::Min);
        a.push(1, 0.0, Repeat::Min);
        let v = a.take();
        assert_eq!(v.len(), 1);
        assert!(v[0].1.is_nan(), "nan wins min");
    }

    fn parse(def: &str, log: &str) -> Vec<Output> {
        let d = Definition::from_text(def, Origin::Builtin, "unit", "unit").expect("valid");
        let mut p = d.parser();
        let mut out = Vec::new();
        for l in log.lines() {
            p.feed(l.as_bytes(), &mut out);
        }
        p.finish(&mut out);
        out
    }

    #[test]
    fn rules_without_literal_still_match_everywhere() {
        // Neither pattern starts with a literal: no prefilter, the regex decides.
        let out = parse(
            "engine = \"lines\"\n[[rules]]\nkind = \"step\"\npattern = '(?i)ITER\\s*=\\s*(?P<iteration>\\d+)'\n\
             [[rules]]\nkind = \"value\"\npattern = '\\w+:\\s*(?P<value>\\S+)'\nseries = \"r\"\nrepeat = \"all\"\n",
            "  iter = 4\nx: 1\n  y: 2\n",
        );
        let recs: Vec<&Record> = out
            .iter()
            .filter_map(|o| if let Output::Record(r) = o { Some(r) } else { None })
            .collect();
        assert_eq!(recs.len(), 1);
        assert_eq!(recs[0].iteration, Some(4));
        assert_eq!(recs[0].values, vec![(0, 1.0), (0, 2.0)]);
    }

    #[test]
    fn finish_twice_emits_once_and_events_carry_iteration() {
        let def = "engine = \"lines\"\n[[rules]]\nkind = \"step\"\npattern = '^s (?P<iteration>\\d+)'\n\
                   [[rules]]\nkind = \"event\"\nname = \"w\"\npattern = '^warn (?P<message>.*)'\n";
        let d = Definition::from_text(def, Origin::Builtin, "unit", "unit").expect("valid");
        let mut p = d.parser();
        let mut out = Vec::new();
        p.feed(b"warn early", &mut out);
        p.feed(b"s 9", &mut out);
        p.feed(b"warn  late  ", &mut out);
        p.finish(&mut out);
        p.finish(&mut out);
        let events: Vec<(&str, Option<i64>)> = out
            .iter()
            .filter_map(|o| match o {
                Output::Event(e) => Some((e.message.as_str(), e.iteration)),
                _ => None,
            })
            .collect();
        assert_eq!(events, vec![("early", None), ("late", Some(9))]);
        assert_eq!(out.iter().filter(|o| matches!(o, Output::Record(_))).count(), 1);
        assert_eq!(p.stats(), LineStats { lines: 3, used: 3, skipped: 0, ignored: 0 });
    }
}
