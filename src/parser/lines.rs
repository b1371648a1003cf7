//! The `lines` engine: regex rules over free-text logs, one line at a time.
//!
//! A compiled [`LinesProgram`] (built by `lines/compile.rs` from the raw definition) is shared
//! read-only by every [`LinesParser`]; the parser owns only its mutable state (`state.rs`),
//! including the values of the open record (`accum.rs`). What one line does is described in
//! `state.rs`.
//!
//! A parser can also start in the middle of a file ([`LinesParser::speculative`]), so that the
//! parts of a large file are read on several cores. Such a parser notes where it first closed
//! a record; from that line on its state no longer depends on what came before its first
//! line, and [`LinesParser::join`] lets the parser of the preceding part read up to there and
//! hand over (see the method for why the result is the serial one).

mod accum;
pub mod compile;
mod state;

use std::sync::Arc;

use super::matcher::{Gate, Matcher, Prefilter};
use super::series::MAX_SERIES;
use crate::record::{Batch, LineStats, RecordRef, Role, Severity, Sink};
use state::State;

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
    /// Rules 0–63 of each kind (step, value, event, end), as masks.
    kinds: [u64; 4],
    /// Rules past the 64th, of each kind, in order.
    beyond: [Vec<usize>; 4],
    /// Rules 0–63 that need a literal somewhere in the line (bit, rule): searched for in a
    /// whole block at once by [`LinesParser::feed_block`].
    literal: Vec<(u64, usize)>,
}

fn kind_index(k: Kind) -> usize {
    match k {
        Kind::Step => 0,
        Kind::Value => 1,
        Kind::Event => 2,
        Kind::End => 3,
    }
}

impl Dispatch {
    pub fn new(rules: &[Rule]) -> Dispatch {
        let mut d = Dispatch {
            col0: Box::new([0; 257]),
            after_blanks: Box::new([0; 257]),
            always: 0,
            kinds: [0; 4],
            beyond: Default::default(),
            literal: Vec::new(),
        };
        for (r, rule) in rules.iter().enumerate() {
            let k = kind_index(rule.kind);
            if r >= 64 {
                d.beyond[k].push(r);
                continue;
            }
            let bit = 1u64 << r;
            d.kinds[k] |= bit;
            if matches!(rule.matcher.prefilter, Prefilter::Contains(_)) {
                d.literal.push((bit, r));
            }
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

    /// The rules 0–63 `line` (with `ws` leading blanks) may match.
    #[inline]
    fn candidates(&self, line: &[u8], ws: usize) -> u64 {
        let at = |i: usize| line.get(i).map_or(256, |&b| usize::from(b));
        self.always | self.col0[at(0)] | self.after_blanks[at(ws)]
    }

    /// Rules 0–63 of kind `k`.
    #[inline]
    fn kind(&self, k: Kind) -> u64 {
        self.kinds[kind_index(k)]
    }

    /// Rules past the 64th of kind `k`.
    #[inline]
    fn beyond(&self, k: Kind) -> &[usize] {
        &self.beyond[kind_index(k)]
    }
}

/// A running `lines` parser for one source.
#[derive(Debug, Clone)]
pub struct LinesParser {
    prog: Arc<LinesProgram>,
    st: State,
    /// Series the parser already knew when it was made by [`LinesParser::speculative`].
    base_series: usize,
}

impl LinesParser {
    pub fn new(prog: Arc<LinesProgram>) -> LinesParser {
        let st = State::new(&prog);
        LinesParser { prog, st, base_series: 0 }
    }

    pub fn feed(&mut self, line: &[u8], out: &mut dyn Sink) {
        self.st.feed(&self.prog, line, 0, out);
    }

    /// Feed every line of `block`: complete lines, each ending in `\n`.
    ///
    /// Rules that need a literal anywhere in the line (`literal = "..."`, or an unanchored
    /// pattern starting with one) are not tested line by line: each literal is searched for
    /// in the block, as a scanner does, and a rule is left out of every line before its next
    /// occurrence.
    pub fn feed_block(&mut self, block: &[u8], out: &mut dyn Sink) {
        let Self { prog, st, .. } = self;
        let lits = &prog.dispatch.literal;
        if lits.is_empty() {
            crate::follow::lines::each_line(block, |line| st.feed(prog, line, 0, out));
            return;
        }
        // Where each literal next occurs at or after the current line (`None`: not looked
        // for since that line began; `usize::MAX`: nowhere).
        let mut next: Vec<Option<usize>> = vec![None; lits.len()];
        let mut start = 0;
        crate::follow::lines::each_line(block, |line| {
            let end = start + line.len();
            let mut absent = 0u64;
            for (k, &(bit, r)) in lits.iter().enumerate() {
                let at = match next[k] {
                    Some(p) if p >= start => p,
                    _ => {
                        let Prefilter::Contains(f) = &prog.rules[r].matcher.prefilter else {
                            continue;
                        };
                        let p = f.find(&block[start..]).map_or(usize::MAX, |p| start + p);
                        next[k] = Some(p);
                        p
                    }
                };
                if at >= end {
                    absent |= bit;
                }
            }
            st.feed(prog, line, absent, out);
            start = end + 1;
        });
    }

    pub fn finish(&mut self, out: &mut dyn Sink) {
        self.st.close_record(out);
        self.st.pending.clear();
    }

    pub fn stats(&self) -> LineStats {
        self.st.tally.stats
    }

    /// The record still open (held until the next step line closes it), as it stands.
    pub fn open_record(&self) -> Option<RecordRef<'_>> {
        self.st.open_record()
    }

    /// A parser for a later part of the same file, to be read while this one reads the parts
    /// before it: it knows this parser's series (so their ids agree) but nothing of the open
    /// record, it assumes the `start_after` marker has been seen, and it notes where it first
    /// closes a record. Its line numbers start again at 1.
    pub fn speculative(&self) -> LinesParser {
        let mut st = State::new(&self.prog);
        st.started = true;
        st.rules = self.st.rules.clone();
        st.series = self.st.series.clone();
        st.track_mark = true;
        LinesParser { prog: self.prog.clone(), st, base_series: self.st.series.len() }
    }

    /// Continue after `part`, which `worker` (made by [`speculative`](Self::speculative)
    /// from a parser in the state `self` had before reading the parts preceding `part`) has
    /// read into `batch`; `self` has read everything before `part`. Everything `part` yields
    /// goes to `out` exactly as if `self` had read `part` itself, and `self` becomes the
    /// parser a serial read would have at the end of `part`.
    ///
    /// Why this is exact: up to the first record the worker closes, its view differs from a
    /// serial one (it did not see the record open at its first line, nor values waiting for
    /// the next step line); so `self` reads those lines itself and closes that record. From
    /// there on the two states agree: the record closed, the values waiting for the next
    /// step are the ones printed since the step that opened it (read by both), anchors and
    /// `first` events are per record, and `started` was true for both. The worker's output
    /// after that record is then the serial output, with its ids announced again and its line
    /// numbers shifted. When that cannot be shown (no marker seen yet, no record closed in the
    /// part, series near the cap) `self` simply reads the whole part.
    /// Returns whether the worker's reading was used (else `self` read `part`).
    pub fn join(
        &mut self,
        part: &[u8],
        mut worker: LinesParser,
        batch: &Batch,
        out: &mut dyn Sink,
    ) -> bool {
        let base = self.st.line_no;
        let new_series = worker.st.series.len() - worker.base_series;
        let usable = self.st.started
            && worker.st.mark.is_some()
            && self.st.series.len() + new_series <= MAX_SERIES;
        let Some(mark) = worker.st.mark.filter(|_| usable) else {
            self.feed_block(part, out);
            return false;
        };
        let mut rest = part;
        for _ in 0..mark.lines {
            let Some(nl) = crate::follow::lines::find_newline(rest) else { break };
            self.st.feed(&self.prog, &rest[..nl], 0, out);
            rest = &rest[nl + 1..];
        }
        self.st.close_record(out);
        worker.st.series.announce(mark.series, out);
        out.batch(batch, base, true);
        let after = worker.st.tally.stats.since(mark.stats);
        let reported = worker.st.tally.reported().saturating_sub(mark.reported);
        worker.st.tally = self.st.tally.clone();
        worker.st.tally.rebase(after, reported);
        worker.st.line_no += base;
        worker.st.mark = None;
        worker.st.track_mark = false;
        worker.base_series = 0;
        *self = worker;
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::parser::{Definition, Origin};
    use crate::record::{Output, Record};

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
    fn a_block_read_at_once_gives_what_its_lines_give_one_by_one() {
        // Rules that need a literal anywhere in the line are searched for block-wide; the
        // literal at the very start or end of a line, twice in one line, split over two
        // lines, and absent for a long stretch.
        let def = "engine = \"lines\"\n\
                   [[rules]]\nkind = \"step\"\npattern = '^it (?P<iteration>\\d+)'\n\
                   [[rules]]\nkind = \"value\"\npattern = '(?P<name>\\w+) res (?P<value>\\S+)'\nliteral = \" res \"\nrepeat = \"all\"\n\
                   [[rules]]\nkind = \"event\"\nname = \"w\"\npattern = 'fatal: (?P<message>.*)'\n";
        let mut log =
            String::from(" res 1\nit 1\np res 1e-3\nq res 2 k res 3\nfatal: x\nz res\n 4\n");
        for i in 2..40 {
            log += &format!("it {i}\n");
            if i % 7 == 0 {
                log += &format!("u res {i}e-4\nno literal here\n  fatal: at {i}\n");
            }
        }
        log += "v res 5\nfatal:";
        let d = Definition::from_text(def, Origin::Builtin, "unit", "unit").expect("valid");
        let by_line = parse(def, &log);
        let mut p = d.parser();
        let mut by_block = Vec::new();
        let mut block = log.clone().into_bytes();
        block.push(b'\n');
        p.feed_block(&block, &mut by_block);
        p.finish(&mut by_block);
        assert_eq!(by_block, by_line);
        assert!(by_line.iter().filter(|o| matches!(o, Output::Event(_))).count() >= 6);
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
