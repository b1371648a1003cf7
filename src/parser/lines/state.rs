//! The mutable side of a `lines` parser: what happens to one line.
//!
//! For each line:
//!
//! 1. before the `start_after` marker has been seen, only event and end rules apply (a crash
//!    while reading the mesh is still reported; banner lines cannot open records);
//! 2. the first matching step rule closes the open record (handing it to the sink) and opens
//!    a new one, taking over any values that were waiting for it (`attach = "next"`);
//! 3. every value rule is tried, then every event rule, then the end rules;
//! 4. anchors (`after = "..."`) are updated last, so an anchor line itself is not "after" it
//!    (an anchor line counts as used).
//!
//! Which rules a line can match at all comes from one table lookup on its first bytes
//! ([`Dispatch`](super::Dispatch)); only those rules run their matcher. The common path
//! allocates nothing: captures land in per-rule reusable storage, numbers are parsed from the
//! bytes, series ids are found by byte lookups, and a closed record is lent to the sink.

use super::accum::{Accum, MAX_RECORD_VALUES};
use super::{Attach, Kind, LinesProgram, Repeat};
use crate::parser::matcher::{Captures, leading_ws};
use crate::parser::number::{parse_integer, parse_number};
use crate::parser::series::{FnvMap, LineUse, MAX_SERIES, SeriesTable, Tally, clean_text, excerpt};
use crate::record::{Event, LineStats, RecordRef, SeriesId, Sink};

/// Mutable per-rule state.
#[derive(Debug, Clone)]
pub(super) struct RuleState {
    pub(super) locs: Captures,
    /// Series id of each value capture with a fixed name, once created.
    fixed: Vec<Option<SeriesId>>,
    /// Captured name bytes → row of `named_ids`: one lookup per line, however many value
    /// captures use `{name}`.
    names: FnvMap<Box<[u8]>, usize>,
    /// The name of each row, and the row tried first (names repeat in the same order record
    /// after record, so the row after the last one found is usually right).
    row_names: Vec<Box<[u8]>>,
    guess: usize,
    /// Row-major, one row per known name and one column per value capture: the series id of
    /// that capture for that name, once created.
    named_ids: Vec<Option<SeriesId>>,
    /// Scope in which this (event) rule last fired, for `repeat = "first"`.
    fired_scope: u64,
}

impl RuleState {
    pub(super) fn new(locs: Captures, values: usize) -> RuleState {
        RuleState {
            locs,
            fixed: vec![None; values],
            names: FnvMap::default(),
            row_names: Vec::new(),
            guess: 0,
            named_ids: Vec::new(),
            fired_scope: 0,
        }
    }
}

/// The record being filled.
#[derive(Debug, Clone, Copy)]
pub(super) struct OpenRecord {
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

/// Where a parser that started in the middle of a file first closed a record: from there on
/// its state no longer depends on what came before its first line (see `LinesParser::join`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Mark {
    /// Lines fed before the line that closed the record.
    pub(super) lines: u64,
    /// Line counts at that point.
    pub(super) stats: LineStats,
    /// Skip reasons reported by then.
    pub(super) reported: u32,
    /// Series created by then.
    pub(super) series: usize,
}

#[derive(Debug, Clone)]
pub(super) struct State {
    pub(super) line_no: u64,
    pub(super) tally: Tally,
    pub(super) started: bool,
    pub(super) open: Option<OpenRecord>,
    pub(super) cur: Accum,
    pub(super) pending: Accum,
    /// Incremented whenever a record opens; anchors and `first` events are per scope.
    pub(super) scope: u64,
    pub(super) anchor_seen: Vec<u64>,
    /// Capture storage for each anchor, and for the `start_after` marker.
    pub(super) anchor_caps: Vec<Captures>,
    pub(super) start_caps: Option<Captures>,
    pub(super) rules: Vec<RuleState>,
    pub(super) series: SeriesTable,
    failure: Option<Failure>,
    /// Set on the first record closed, when `track_mark` is on.
    pub(super) mark: Option<Mark>,
    pub(super) track_mark: bool,
}

impl State {
    pub(super) fn new(prog: &LinesProgram) -> State {
        State {
            line_no: 0,
            tally: Tally::default(),
            started: prog.start_after.is_none(),
            open: None,
            cur: Accum::new(),
            pending: Accum::new(),
            scope: 1,
            anchor_seen: vec![0; prog.anchors.len()],
            anchor_caps: prog.anchors.iter().map(|a| a.captures_storage()).collect(),
            start_caps: prog.start_after.as_ref().map(|m| m.captures_storage()),
            rules: prog
                .rules
                .iter()
                .map(|r| RuleState::new(r.matcher.captures_storage(), r.values.len()))
                .collect(),
            series: SeriesTable::default(),
            failure: None,
            mark: None,
            track_mark: false,
        }
    }

    /// The open record as it stands (its values so far).
    pub(super) fn open_record(&self) -> Option<RecordRef<'_>> {
        self.open.map(|o| RecordRef {
            iteration: o.iteration,
            time: o.time,
            values: self.cur.values(),
            line: o.line,
        })
    }

    /// Read one line; `absent`: rules known not to match it (their literal is not in it).
    pub(super) fn feed(
        &mut self,
        prog: &LinesProgram,
        raw: &[u8],
        absent: u64,
        out: &mut dyn Sink,
    ) {
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
        let d = &prog.dispatch;
        let cand = d.candidates(line, ws) & !absent;
        if steps_apply {
            let mut bits = cand & d.kind(Kind::Step);
            let mut beyond = d.beyond(Kind::Step).iter();
            while let Some(r) = next_rule(&mut bits, &mut beyond) {
                let u = self.step_rule(prog, r, line, ws, out);
                if u != LineUse::Ignored {
                    used = used.and(u);
                    break;
                }
            }
            let mut bits = cand & d.kind(Kind::Value);
            let mut beyond = d.beyond(Kind::Value).iter();
            while let Some(r) = next_rule(&mut bits, &mut beyond) {
                used = used.and(self.value_rule(prog, r, line, ws, out));
            }
        }
        let mut bits = cand & d.kind(Kind::Event);
        let mut beyond = d.beyond(Kind::Event).iter();
        while let Some(r) = next_rule(&mut bits, &mut beyond) {
            used = used.and(self.event_rule(prog, r, line, ws, out));
        }
        let mut bits = cand & d.kind(Kind::End);
        let mut beyond = d.beyond(Kind::End).iter();
        while let Some(r) = next_rule(&mut bits, &mut beyond) {
            if self.end_rule(prog, r, line, ws, out) {
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

    pub(super) fn close_record(&mut self, out: &mut dyn Sink) {
        if let Some(open) = self.open.take() {
            if self.track_mark && self.mark.is_none() {
                // Called while the current line is being read: it is counted in `lines` but
                // not yet in used/skipped/ignored.
                let mut stats = self.tally.stats;
                stats.lines -= 1;
                self.mark = Some(Mark {
                    lines: self.line_no - 1,
                    stats,
                    reported: self.tally.reported(),
                    series: self.series.len(),
                });
            }
            out.record(RecordRef {
                iteration: open.iteration,
                time: open.time,
                values: self.cur.values(),
                line: open.line,
            });
            self.cur.clear();
        }
    }

    fn step_rule(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        ws: usize,
        out: &mut dyn Sink,
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

    /// Whether value or event rule `r` reads `line`: its `after` anchor (if any) was seen in
    /// this record's scope, and its pattern matches (capture locations left in its `locs`).
    fn anchored_match(&mut self, prog: &LinesProgram, r: usize, line: &[u8], ws: usize) -> bool {
        let rule = &prog.rules[r];
        if rule.after.is_some_and(|a| self.anchor_seen[a] != self.scope) {
            return false;
        }
        rule.matcher.find(line, ws, &mut self.rules[r].locs)
    }

    fn value_rule(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        ws: usize,
        out: &mut dyn Sink,
    ) -> LineUse {
        if !self.anchored_match(prog, r, line, ws) {
            return LineUse::Ignored;
        }
        let rule = &prog.rules[r];
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
        out: &mut dyn Sink,
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
            let id = if vc.uses_name {
                let Some(key) = name else {
                    failure.get_or_insert(Failure::NoName { rule: r });
                    result = LineUse::Skipped;
                    continue;
                };
                let at = *row.get_or_insert_with(|| find_row(rs, key, width));
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
            // Repeat policy `first` keeps the value already held: this one is not even read.
            if rule.repeat == Repeat::First && target.has(id) {
                continue;
            }
            let Some(v) = parse_number(&line[s..e]) else {
                failure.get_or_insert(Failure::NotANumber { rule: r, capture: ci, span: (s, e) });
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
        out: &mut dyn Sink,
    ) -> LineUse {
        if !self.anchored_match(prog, r, line, ws) {
            return LineUse::Ignored;
        }
        let rule = &prog.rules[r];
        let rs = &mut self.rules[r];
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
        out.event(Event {
            severity: rule.severity,
            rule: rule.event_name.clone(),
            message: clean_text(text),
            line: self.line_no,
            iteration: self.open.and_then(|o| o.iteration),
        });
        LineUse::Used
    }

    fn end_rule(
        &mut self,
        prog: &LinesProgram,
        r: usize,
        line: &[u8],
        ws: usize,
        out: &mut dyn Sink,
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
        out.end_of_run(self.line_no, message);
        // A run appended after this one prints its banner again: wait for its marker.
        if prog.start_after.is_some() {
            self.started = false;
        }
        true
    }
}

/// The next rule to try: set bits of `bits` (rules 0–63, lowest first), then `beyond`.
#[inline]
fn next_rule(bits: &mut u64, beyond: &mut std::slice::Iter<'_, usize>) -> Option<usize> {
    if *bits != 0 {
        let r = bits.trailing_zeros() as usize;
        *bits &= *bits - 1;
        return Some(r);
    }
    beyond.next().copied()
}

/// The row of captured name `key` in the rule's id table, adding one when new; `None` once
/// junk names have filled the cache.
#[inline]
fn find_row(rs: &mut RuleState, key: &[u8], width: usize) -> Option<usize> {
    if rs.row_names.get(rs.guess).is_some_and(|k| &**k == key) {
        let at = rs.guess;
        rs.guess += 1;
        return Some(at);
    }
    if let Some(&at) = rs.names.get(key) {
        rs.guess = at + 1;
        return Some(at);
    }
    // Junk names could otherwise grow the cache without bound.
    if rs.names.len() >= 4 * MAX_SERIES {
        return None;
    }
    let at = rs.names.len();
    rs.names.insert(key.into(), at);
    rs.row_names.push(key.into());
    rs.named_ids.resize(rs.named_ids.len() + width, None);
    rs.guess = at + 1;
    Some(at)
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
            prog.rules[rule].label, MAX_SERIES
        ),
        Failure::RecordFull { rule } => {
            format!("{}: record already holds {MAX_RECORD_VALUES} values", prog.rules[rule].label)
        }
    }
}
