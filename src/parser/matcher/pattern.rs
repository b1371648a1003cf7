//! A small backtracking matcher for the pattern shapes log definitions actually use.
//!
//! Why it exists: on a 40-byte log line the `regex` crate's capture search costs well over a
//! thousand instructions, most of it fixed per call (choosing an engine, setting up the
//! search, converting slots), which alone made the `lines` engine an order of magnitude
//! slower than a `grep` scan (README "Speed and memory"). This engine runs the common subset directly on
//! the line bytes, with no per-call setup:
//!
//! * literals (ASCII, with the usual `\.` `\[` … escapes and `\t` `\n` `\r` `\f` `\v`),
//!   `.`, `\d \D \s \S \w \W`, bracket classes with ranges and those escapes;
//! * capturing, named (`(?P<n>…)`, `(?<n>…)`) and non-capturing groups, alternation;
//! * greedy and lazy `? * + {n} {n,} {n,m}`;
//! * `^ $ \A \z` and the ASCII word boundaries `\b \B`.
//!
//! Anything else (flags such as `(?i)`, non-ASCII text, `\x..`, `\p{..}`, POSIX classes, class
//! set operations, a quantifier on something that can match empty) is not compiled here
//! ([`Pattern::compile`] returns `None`) and the `regex` crate runs that pattern as before.
//!
//! Semantics are the `regex` crate's as configured in `matcher.rs` (byte regex, Unicode off,
//! no flags): classes are ASCII, `.` is any byte but `\n`, a negated class can match any byte,
//! `$` is the end of the line. `regex` reports the leftmost-first match, whose capture groups
//! are those a backtracker finds when it tries alternatives in priority order — which is what
//! this engine is: a backtracker over the same ordered-choice program. The unit tests and a
//! property test compare it against `regex` on every construct it accepts.
//!
//! A backtracker can take exponential time on unlucky patterns, and an unanchored search
//! that scans a long run from every start position takes quadratic time, so every search
//! (over all its start positions, in both the backtracking and the forward-only mode) has one
//! step budget proportional to the line length and the program size, charged for every jump,
//! every backtrack and every byte a run scans. A search that runs out returns
//! [`Outcome::GaveUp`]; the caller then asks `regex` (linear time). The worst case is thus
//! O(line length × program size), like `regex`'s, and the answer is always the one `regex`
//! gives (`tests/parser_matcher_bounds.rs` checks the time bound on the cases that were
//! quadratic).

/// Largest program accepted (counted repetitions are unrolled).
const MAX_INSTS: usize = 2048;
/// Deepest group nesting accepted (the parser recurses per level).
const MAX_DEPTH: usize = 64;
/// Largest `{n,m}` count accepted.
const MAX_COUNT: u32 = 256;
/// "No position": a capture slot not set on the matching path.
pub const NONE: usize = usize::MAX;

/// 256-bit set of bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct ByteSet([u64; 4]);

impl ByteSet {
    fn single(b: u8) -> ByteSet {
        let mut s = ByteSet::default();
        s.add(b);
        s
    }

    fn add(&mut self, b: u8) {
        self.0[usize::from(b >> 6)] |= 1 << (b & 63);
    }

    fn add_range(&mut self, lo: u8, hi: u8) {
        for b in lo..=hi {
            self.add(b);
        }
    }

    fn union(&mut self, o: &ByteSet) {
        for (a, b) in self.0.iter_mut().zip(o.0) {
            *a |= b;
        }
    }

    fn negated(&self) -> ByteSet {
        ByteSet(self.0.map(|w| !w))
    }

    fn is_disjoint(&self, o: &ByteSet) -> bool {
        self.0.iter().zip(o.0).all(|(a, b)| a & b == 0)
    }

    /// The only member, when there is exactly one.
    fn only(&self) -> Option<u8> {
        if self.0.iter().map(|w| w.count_ones()).sum::<u32>() != 1 {
            return None;
        }
        (0..=255u8).find(|&b| self.contains(b))
    }

    pub fn single_byte(b: u8) -> ByteSet {
        ByteSet::single(b)
    }

    #[inline(always)]
    pub fn contains(&self, b: u8) -> bool {
        (self.0[usize::from(b >> 6)] >> (b & 63)) & 1 != 0
    }

    fn of(bytes: impl IntoIterator<Item = u8>) -> ByteSet {
        let mut s = ByteSet::default();
        for b in bytes {
            s.add(b);
        }
        s
    }

    /// `\d`
    fn digit() -> ByteSet {
        ByteSet::of(b'0'..=b'9')
    }

    /// `\s` without Unicode: `[\t\n\v\f\r ]`.
    fn space() -> ByteSet {
        ByteSet::of([b'\t', b'\n', 0x0b, 0x0c, b'\r', b' '])
    }

    /// `\w` without Unicode: `[0-9A-Za-z_]`.
    fn word() -> ByteSet {
        let mut s = ByteSet::of(b'0'..=b'9');
        s.add_range(b'A', b'Z');
        s.add_range(b'a', b'z');
        s.add(b'_');
        s
    }
}

/// Zero-width assertions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Look {
    Start,
    End,
    WordBoundary,
    NotWordBoundary,
}

#[inline]
fn is_word(b: u8) -> bool {
    b.is_ascii_alphanumeric() || b == b'_'
}

impl Look {
    #[inline]
    fn holds(self, hay: &[u8], pos: usize) -> bool {
        match self {
            Look::Start => pos == 0,
            Look::End => pos == hay.len(),
            Look::WordBoundary | Look::NotWordBoundary => {
                let before = pos > 0 && is_word(hay[pos - 1]);
                let after = pos < hay.len() && is_word(hay[pos]);
                (before != after) == (self == Look::WordBoundary)
            }
        }
    }
}

/// Parsed pattern.
#[derive(Debug, Clone)]
enum Node {
    Empty,
    /// One byte from the set (a literal byte is a one-member set).
    Set(ByteSet),
    Look(Look),
    Concat(Vec<Node>),
    Alt(Vec<Node>),
    Repeat {
        node: Box<Node>,
        min: u32,
        max: Option<u32>,
        greedy: bool,
    },
    Group {
        index: Option<u32>,
        node: Box<Node>,
    },
}

impl Node {
    fn nullable(&self) -> bool {
        match self {
            Node::Empty | Node::Look(_) => true,
            Node::Set(_) => false,
            Node::Concat(v) => v.iter().all(Node::nullable),
            Node::Alt(v) => v.iter().any(Node::nullable),
            Node::Repeat { node, min, .. } => *min == 0 || node.nullable(),
            Node::Group { node, .. } => node.nullable(),
        }
    }
}

/// Escaped punctuation that stands for itself (outside and inside classes).
const ESCAPABLE: &[u8] = b".+*?()|[]{}^$#&-~/ :,=!%@'\";\\";

struct SyntaxParser<'a> {
    p: &'a [u8],
    i: usize,
    groups: u32,
}

impl SyntaxParser<'_> {
    fn peek(&self) -> Option<u8> {
        self.p.get(self.i).copied()
    }

    fn peek_at(&self, k: usize) -> Option<u8> {
        self.p.get(self.i + k).copied()
    }

    fn next(&mut self) -> Option<u8> {
        let c = self.peek()?;
        self.i += 1;
        Some(c)
    }

    fn alternation(&mut self, depth: usize) -> Option<Node> {
        let mut alts = vec![self.concat(depth)?];
        while self.peek() == Some(b'|') {
            self.i += 1;
            alts.push(self.concat(depth)?);
        }
        Some(if alts.len() == 1 { alts.pop()? } else { Node::Alt(alts) })
    }

    fn concat(&mut self, depth: usize) -> Option<Node> {
        let mut items = Vec::new();
        while let Some(c) = self.peek() {
            if c == b'|' || c == b')' {
                break;
            }
            let atom = self.atom(depth)?;
            items.push(self.quantified(atom)?);
        }
        Some(match items.len() {
            0 => Node::Empty,
            1 => items.pop()?,
            _ => Node::Concat(items),
        })
    }

    fn atom(&mut self, depth: usize) -> Option<Node> {
        let c = self.next()?;
        match c {
            b'(' => self.group(depth),
            b'[' => self.class().map(Node::Set),
            b'.' => Some(Node::Set(ByteSet::single(b'\n').negated())),
            b'^' => Some(Node::Look(Look::Start)),
            b'$' => Some(Node::Look(Look::End)),
            b'\\' => self.escape(),
            b'*' | b'+' | b'?' | b'{' | b'}' | b']' | b')' => None,
            c if c.is_ascii() => Some(Node::Set(ByteSet::single(c))),
            _ => None,
        }
    }

    fn group(&mut self, depth: usize) -> Option<Node> {
        if depth >= MAX_DEPTH {
            return None;
        }
        let index = if self.peek() == Some(b'?') {
            self.i += 1;
            match self.next()? {
                b':' => None,
                b'P' if self.next()? == b'<' => Some(self.group_name()?),
                b'<' => Some(self.group_name()?),
                _ => return None,
            }
        } else {
            self.groups += 1;
            Some(self.groups)
        };
        let node = self.alternation(depth + 1)?;
        if self.next()? != b')' {
            return None;
        }
        Some(Node::Group { index, node: Box::new(node) })
    }

    /// Read `name>` of a named group; the group number is its opening position.
    fn group_name(&mut self) -> Option<u32> {
        let start = self.i;
        while let Some(c) = self.peek() {
            if c == b'>' {
                break;
            }
            if !(c.is_ascii_alphanumeric() || c == b'_') {
                return None;
            }
            self.i += 1;
        }
        if self.i == start || self.next()? != b'>' {
            return None;
        }
        self.groups += 1;
        Some(self.groups)
    }

    fn escape(&mut self) -> Option<Node> {
        let c = self.next()?;
        Some(match c {
            b'b' | b'B' if self.peek() == Some(b'{') => return None,
            b'b' => Node::Look(Look::WordBoundary),
            b'B' => Node::Look(Look::NotWordBoundary),
            b'A' => Node::Look(Look::Start),
            b'z' => Node::Look(Look::End),
            _ => match class_escape(c)? {
                Item::Byte(b) => Node::Set(ByteSet::single(b)),
                Item::Set(s) => Node::Set(s),
            },
        })
    }

    fn quantified(&mut self, atom: Node) -> Option<Node> {
        let (min, max) = match self.peek() {
            Some(b'?') => (0, Some(1)),
            Some(b'*') => (0, None),
            Some(b'+') => (1, None),
            Some(b'{') => {
                self.i += 1;
                let min = self.count()?;
                let max = match self.next()? {
                    b'}' => Some(min),
                    b',' if self.peek() == Some(b'}') => {
                        self.i += 1;
                        None
                    }
                    b',' => {
                        let m = self.count()?;
                        if self.next()? != b'}' || m < min {
                            return None;
                        }
                        Some(m)
                    }
                    _ => return None,
                };
                self.i -= 1; // step back onto `}` so the common advance below consumes it
                (min, max)
            }
            _ => return Some(atom),
        };
        self.i += 1;
        let greedy = if self.peek() == Some(b'?') {
            self.i += 1;
            false
        } else {
            true
        };
        if matches!(self.peek(), Some(b'?' | b'*' | b'+' | b'{')) {
            return None; // stacked quantifiers
        }
        if matches!(atom, Node::Look(_) | Node::Empty) {
            return None;
        }
        // A loop over something that can match empty: leave its fine print to `regex`.
        if max != Some(1) && atom.nullable() {
            return None;
        }
        Some(Node::Repeat { node: Box::new(atom), min, max, greedy })
    }

    fn count(&mut self) -> Option<u32> {
        let start = self.i;
        let mut v: u32 = 0;
        while let Some(c @ b'0'..=b'9') = self.peek() {
            v = v.checked_mul(10)?.checked_add(u32::from(c - b'0'))?;
            self.i += 1;
        }
        (self.i > start && v <= MAX_COUNT).then_some(v)
    }

    /// A bracket class after its `[`.
    fn class(&mut self) -> Option<ByteSet> {
        let negate = self.peek() == Some(b'^');
        if negate {
            self.i += 1;
        }
        let mut set = ByteSet::default();
        let mut first = true;
        loop {
            let c = self.next()?;
            if c == b']' && !first {
                break;
            }
            // POSIX classes, nested classes and set operations: not here.
            if c == b'['
                || (c == b'&' && self.peek() == Some(b'&'))
                || (c == b'~' && self.peek() == Some(b'~'))
                || (c == b'-' && self.peek() == Some(b'-'))
            {
                return None;
            }
            if c == b'-' && !first && self.peek() != Some(b']') {
                return None;
            }
            let item = match c {
                b'\\' => class_escape(self.next()?)?,
                c if c.is_ascii() => Item::Byte(c),
                _ => return None,
            };
            let ranged = self.peek() == Some(b'-') && !matches!(self.peek_at(1), Some(b']') | None);
            match item {
                Item::Set(_) if ranged => return None,
                Item::Set(s) => set.union(&s),
                Item::Byte(lo) if ranged => {
                    self.i += 1;
                    let hi = match self.next()? {
                        b'\\' => match class_escape(self.next()?)? {
                            Item::Byte(b) => b,
                            Item::Set(_) => return None,
                        },
                        b'[' | b']' => return None,
                        b if b.is_ascii() => b,
                        _ => return None,
                    };
                    if hi < lo {
                        return None;
                    }
                    set.add_range(lo, hi);
                }
                Item::Byte(b) => set.add(b),
            }
            first = false;
        }
        Some(if negate { set.negated() } else { set })
    }
}

enum Item {
    Byte(u8),
    Set(ByteSet),
}

/// The escapes accepted both outside and inside classes.
fn class_escape(c: u8) -> Option<Item> {
    Some(match c {
        b'd' => Item::Set(ByteSet::digit()),
        b'D' => Item::Set(ByteSet::digit().negated()),
        b's' => Item::Set(ByteSet::space()),
        b'S' => Item::Set(ByteSet::space().negated()),
        b'w' => Item::Set(ByteSet::word()),
        b'W' => Item::Set(ByteSet::word().negated()),
        b't' => Item::Byte(b'\t'),
        b'n' => Item::Byte(b'\n'),
        b'r' => Item::Byte(b'\r'),
        b'f' => Item::Byte(0x0c),
        b'v' => Item::Byte(0x0b),
        c if ESCAPABLE.contains(&c) => Item::Byte(c),
        _ => return None,
    })
}

/// One instruction as compiled (sets inline, for analysis).
#[derive(Debug, Clone)]
enum Inst {
    Byte(u8),
    Lit(Box<[u8]>),
    Set(ByteSet),
    /// A single-byte item repeated `min..=max` times.
    Run {
        set: ByteSet,
        min: u32,
        max: u32,
        greedy: bool,
    },
    /// Try the first target, on failure the second.
    Split(u32, u32),
    Jmp(u32),
    Save(u32),
    Look(Look),
    Match,
}

/// A byte set as a lookup table: one load per byte test, no bounds check for a `u8` index.
type Table = Box<[bool; 256]>;

fn table(s: &ByteSet) -> Table {
    Box::new(std::array::from_fn(|b| s.contains(b as u8)))
}

/// One instruction as run: sets are 256-entry tables.
#[derive(Debug, Clone)]
enum Op {
    Byte(u8),
    Lit(Box<[u8]>),
    /// One byte from the set. `before`/`after`: capture slots written at the start and end
    /// of the item ([`NO_SLOT`] for none), the `Save`s around it fused in.
    Set {
        set: Table,
        before: u32,
        after: u32,
    },
    /// A single-byte item repeated `min..=max` times. `follow`: the bytes the rest of the
    /// program can start with (`None` when it can start without consuming one), so positions
    /// where the rest must fail are skipped. `possessive`: giving bytes back can never help
    /// (the rest cannot start with a byte of the set, or surely matches), so a greedy run
    /// leaves no choice behind. `before`/`after` as for `Set`.
    Run {
        set: Table,
        follow: Option<Table>,
        min: u32,
        max: u32,
        greedy: bool,
        possessive: bool,
        before: u32,
        after: u32,
    },
    Split(u32, u32),
    Jmp(u32),
    Save(u32),
    Look(Look),
    Match,
}

/// A backtracking choice or an undo record.
#[derive(Debug, Clone, Copy)]
pub struct Frame {
    kind: FrameKind,
    pc: u32,
    a: usize,
    b: usize,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum FrameKind {
    /// Resume at `pc` from position `a`.
    Retry,
    /// Put `a` back into slot `pc`.
    Restore,
    /// A greedy run (instruction `pc`) now ending at `a` may give back down to `b`.
    Greedy,
    /// A lazy run (instruction `pc`) stopped at `a` after `b` items may take one more.
    Lazy,
}

/// Result of one search.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    Matched,
    NoMatch,
    /// The step budget ran out: ask `regex`.
    GaveUp,
}

/// A necessary condition on where a line's text starts, for dispatching lines to rules.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Gate {
    /// No condition known.
    Any,
    /// The line is not empty and its first byte is in the set.
    Col0(ByteSet),
    /// The line has at least `min_blanks` leading blanks (the `\s` set) and a byte from the
    /// set right after all of them.
    AfterBlanks { set: ByteSet, min_blanks: u32 },
}

/// A necessary condition on the end of a matching line, for patterns ending in `X$` or
/// `X\s*$` with `X` one byte from a set: after dropping trailing bytes of `strip`, the line's
/// last byte is in `last`. Checked before the search, it rejects most lines such a pattern
/// would otherwise scan to the end only to fail at `$`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Tail {
    last: ByteSet,
    strip: ByteSet,
}

impl Tail {
    /// Can `line` match, as far as its end tells?
    #[inline]
    pub fn holds(&self, line: &[u8]) -> bool {
        let end = line.iter().rposition(|&b| !self.strip.contains(b));
        end.is_some_and(|i| self.last.contains(line[i]))
    }
}

/// A compiled pattern.
#[derive(Debug, Clone)]
pub struct Pattern {
    ops: Vec<Op>,
    /// Capture groups including group 0 (the whole match).
    groups: usize,
    /// Every match starts at position 0.
    anchored: bool,
    /// Bytes a match can start with, unless `start_nullable`.
    start_set: ByteSet,
    start_nullable: bool,
    gate: Gate,
    /// A condition on where a matching line's text ends (patterns ending in `X\s*$`).
    tail: Option<Tail>,
    /// The program never needs to backtrack beyond "fall back to the last optional part":
    /// every run is possessive, there are no loops, and the skip branch of every choice surely
    /// matches. [`Pattern::forward`] runs it without a backtracking stack.
    forward: bool,
    /// A forward program with no choice at all: [`Pattern::straight`] runs it op after op.
    straight: bool,
}

impl Pattern {
    /// Compile `pattern`, or `None` when it uses anything outside the supported subset.
    pub fn compile(pattern: &str) -> Option<Pattern> {
        let mut sp = SyntaxParser { p: pattern.as_bytes(), i: 0, groups: 0 };
        let root = sp.alternation(0)?;
        if sp.i != sp.p.len() {
            return None;
        }
        let mut c = Compiler { insts: vec![Inst::Save(0)] };
        c.emit(&root)?;
        c.push(Inst::Save(1))?;
        c.push(Inst::Match)?;
        let insts = c.insts;
        let ops = lower(&insts)?;
        let anchored = matches!(insts.get(1), Some(Inst::Look(Look::Start)));
        let (start_set, start_nullable) = first_bytes(&insts, 1);
        let gate = gate(&insts, anchored);
        let tail = tail(&insts);
        let forward = ops.iter().all(|op| match op {
            Op::Run { possessive, .. } => *possessive,
            Op::Jmp(_) => false,
            _ => true,
        }) && insts.iter().all(|i| match i {
            Inst::Split(_, y) => surely_matches(&insts, *y as usize),
            _ => true,
        });
        let straight = forward && !ops.iter().any(|op| matches!(op, Op::Split(..)));
        Some(Pattern {
            ops,
            groups: sp.groups as usize + 1,
            anchored,
            start_set,
            start_nullable,
            gate,
            tail,
            forward,
            straight,
        })
    }

    /// The condition on the end of a matching line, when the pattern gives one.
    pub fn tail(&self) -> Option<Tail> {
        self.tail
    }

    /// Where a matching line's text must start.
    pub fn gate(&self) -> Gate {
        self.gate
    }

    /// Number of capture groups, group 0 included (as `Regex::captures_len`).
    pub fn groups(&self) -> usize {
        self.groups
    }

    /// Leftmost-first search of `hay`. On [`Outcome::Matched`], `slots` (length
    /// `2 * groups()`) holds the start and end of every group, [`NONE`] where unset.
    #[inline]
    pub fn search(&self, hay: &[u8], slots: &mut [usize], stack: &mut Vec<Frame>) -> Outcome {
        // Straight-line progress is bounded by the program length; the budget counts what can
        // repeat: jumps and backtracking.
        let mut budget = 64 + 2 * (hay.len() + 1) * self.ops.len();
        let last = if self.anchored { 0 } else { hay.len() };
        for start in 0..=last {
            if !self.start_nullable && hay.get(start).is_none_or(|&b| !self.start_set.contains(b)) {
                continue;
            }
            for s in slots.iter_mut() {
                *s = NONE;
            }
            let outcome = if self.straight {
                self.straight(hay, start, slots, &mut budget)
            } else if self.forward {
                self.forward(hay, start, slots, stack, &mut budget)
            } else {
                self.run(hay, start, slots, stack, &mut budget)
            };
            if outcome != Outcome::NoMatch {
                return outcome;
            }
        }
        Outcome::NoMatch
    }

    /// Run a [`Pattern::straight`] program from `start`: every op once, in order; the first
    /// that fails ends the attempt.
    #[inline]
    fn straight(
        &self,
        hay: &[u8],
        start: usize,
        slots: &mut [usize],
        budget: &mut usize,
    ) -> Outcome {
        let put = |slots: &mut [usize], slot: u32, pos: usize| {
            if slot != NO_SLOT
                && let Some(cell) = slots.get_mut(slot as usize)
            {
                *cell = pos;
            }
        };
        let mut pos = start;
        for op in &self.ops {
            match op {
                Op::Byte(b) => {
                    if hay.get(pos) != Some(b) {
                        return Outcome::NoMatch;
                    }
                    pos += 1;
                }
                Op::Lit(lit) => {
                    let ok = hay.len() - pos >= lit.len()
                        && hay[pos..].iter().zip(lit.iter()).all(|(a, b)| a == b);
                    if !ok {
                        return Outcome::NoMatch;
                    }
                    pos += lit.len();
                }
                Op::Set { set, before, after } => {
                    if !hay.get(pos).is_some_and(|&b| set[usize::from(b)]) {
                        return Outcome::NoMatch;
                    }
                    put(slots, *before, pos);
                    pos += 1;
                    put(slots, *after, pos);
                }
                Op::Run { set, min, max, before, after, .. } => {
                    let rest = &hay[pos..];
                    let avail = &rest[..rest.len().min(*max as usize)];
                    let n = avail.iter().position(|&b| !set[usize::from(b)]).unwrap_or(avail.len());
                    match budget.checked_sub(n) {
                        Some(b) => *budget = b,
                        None => return Outcome::GaveUp,
                    }
                    if n < *min as usize {
                        return Outcome::NoMatch;
                    }
                    put(slots, *before, pos);
                    pos += n;
                    put(slots, *after, pos);
                }
                Op::Save(s) => put(slots, *s, pos),
                Op::Look(look) => {
                    if !look.holds(hay, pos) {
                        return Outcome::NoMatch;
                    }
                }
                Op::Match => return Outcome::Matched,
                Op::Split(..) | Op::Jmp(_) => return Outcome::GaveUp,
            }
        }
        Outcome::GaveUp
    }

    /// Run a [`Pattern::forward`] program from `start`: one pass, no choice stack. A choice
    /// `Split(x, y)` remembers `y` as the fallback and journals the slot writes made after it;
    /// a failure undoes them and resumes at `y`. An older fallback is never needed again: `y`
    /// surely matches, so the backtracker would never return past it either. `journal` is the
    /// backtracker's stack, borrowed as scratch.
    fn forward(
        &self,
        hay: &[u8],
        start: usize,
        slots: &mut [usize],
        journal: &mut Vec<Frame>,
        budget: &mut usize,
    ) -> Outcome {
        let ops = &self.ops[..];
        let mut pc = 0usize;
        let mut pos = start;
        // Fallback: resume at `fb_pc` (when not `usize::MAX`) from `fb_pos`.
        let mut fb_pc = usize::MAX;
        let mut fb_pos = 0;
        let mut fallbacks = 0usize;
        journal.clear();
        loop {
            let fb = fb_pc != usize::MAX;
            let ok = match ops.get(pc) {
                Some(Op::Byte(b)) => {
                    let ok = hay.get(pos) == Some(b);
                    pos += usize::from(ok);
                    ok
                }
                Some(Op::Lit(lit)) => {
                    let ok = hay.len() - pos >= lit.len()
                        && hay[pos..].iter().zip(lit.iter()).all(|(a, b)| a == b);
                    if ok {
                        pos += lit.len();
                    }
                    ok
                }
                Some(Op::Set { set, before, after }) => {
                    let ok = hay.get(pos).is_some_and(|&b| set[usize::from(b)]);
                    if ok {
                        write(slots, journal, fb, *before, pos);
                        pos += 1;
                        write(slots, journal, fb, *after, pos);
                    }
                    ok
                }
                Some(Op::Run { set, min, max, before, after, .. }) => {
                    let rest = &hay[pos..];
                    let avail = &rest[..rest.len().min(*max as usize)];
                    let n = avail.iter().position(|&b| !set[usize::from(b)]).unwrap_or(avail.len());
                    // Runs are what a search from every start position can repeat: charge
                    // the bytes they scan to the search's budget.
                    match budget.checked_sub(n) {
                        Some(b) => *budget = b,
                        None => return Outcome::GaveUp,
                    }
                    let ok = n >= *min as usize;
                    if ok {
                        write(slots, journal, fb, *before, pos);
                        pos += n;
                        write(slots, journal, fb, *after, pos);
                    }
                    ok
                }
                Some(Op::Split(x, y)) => {
                    fb_pc = *y as usize;
                    fb_pos = pos;
                    journal.clear();
                    pc = *x as usize;
                    continue;
                }
                Some(Op::Save(s)) => {
                    write(slots, journal, fb, *s, pos);
                    true
                }
                Some(Op::Look(look)) => look.holds(hay, pos),
                Some(Op::Match) => return Outcome::Matched,
                Some(Op::Jmp(_)) | None => return Outcome::GaveUp,
            };
            if ok {
                pc += 1;
                continue;
            }
            if !fb {
                return Outcome::NoMatch;
            }
            fallbacks += 1;
            if fallbacks > ops.len() {
                return Outcome::GaveUp;
            }
            while let Some(f) = journal.pop() {
                if let Some(cell) = slots.get_mut(f.pc as usize) {
                    *cell = f.a;
                }
            }
            pc = fb_pc;
            pos = fb_pos;
            fb_pc = usize::MAX;
        }
    }

    fn run(
        &self,
        hay: &[u8],
        start: usize,
        slots: &mut [usize],
        stack: &mut Vec<Frame>,
        budget: &mut usize,
    ) -> Outcome {
        stack.clear();
        let ops = &self.ops[..];
        let len = hay.len();
        let mut pc = 0usize;
        let mut pos = start;
        loop {
            let Some(op) = ops.get(pc) else { return Outcome::GaveUp };
            let ok = match op {
                Op::Byte(b) => {
                    let ok = hay.get(pos) == Some(b);
                    pos += usize::from(ok);
                    ok
                }
                Op::Lit(lit) => {
                    // Literals are short: a byte loop beats a `memcmp` call.
                    let ok = hay.len() - pos >= lit.len()
                        && hay[pos..].iter().zip(lit.iter()).all(|(a, b)| a == b);
                    if ok {
                        pos += lit.len();
                    }
                    ok
                }
                Op::Set { set, before, after } => {
                    save(stack, slots, *before, pos);
                    let ok = hay.get(pos).is_some_and(|&b| set[usize::from(b)]);
                    if ok {
                        pos += 1;
                        save(stack, slots, *after, pos);
                    }
                    ok
                }
                Op::Run { set, min, max, greedy, possessive, before, after, .. } => {
                    save(stack, slots, *before, pos);
                    let t = &**set;
                    let (min, max) = (*min as usize, *max as usize);
                    let rest = &hay[pos..];
                    if *greedy {
                        let avail = &rest[..rest.len().min(max)];
                        let n =
                            avail.iter().position(|&b| !t[usize::from(b)]).unwrap_or(avail.len());
                        match budget.checked_sub(n) {
                            Some(b) => *budget = b,
                            None => return Outcome::GaveUp,
                        }
                        if n < min {
                            false
                        } else {
                            if !*possessive && n > min {
                                stack.push(Frame {
                                    kind: FrameKind::Greedy,
                                    pc: pc as u32,
                                    a: pos + n,
                                    b: pos + min,
                                });
                            }
                            pos += n;
                            save(stack, slots, *after, pos);
                            true
                        }
                    } else {
                        let ok =
                            rest.len() >= min && rest[..min].iter().all(|&b| t[usize::from(b)]);
                        if ok {
                            pos += min;
                            if min < max {
                                stack.push(Frame {
                                    kind: FrameKind::Lazy,
                                    pc: pc as u32,
                                    a: pos,
                                    b: min,
                                });
                            }
                            save(stack, slots, *after, pos);
                        }
                        ok
                    }
                }
                Op::Split(x, y) => {
                    stack.push(Frame { kind: FrameKind::Retry, pc: *y, a: pos, b: 0 });
                    pc = *x as usize;
                    continue;
                }
                Op::Jmp(x) => {
                    if *budget == 0 {
                        return Outcome::GaveUp;
                    }
                    *budget -= 1;
                    pc = *x as usize;
                    continue;
                }
                Op::Save(s) => {
                    save(stack, slots, *s, pos);
                    true
                }
                Op::Look(look) => look.holds(hay, pos),
                Op::Match => return Outcome::Matched,
            };
            if ok {
                pc += 1;
                continue;
            }
            // Backtrack to the most recent choice, undoing slot writes on the way.
            loop {
                let Some(f) = stack.pop() else { return Outcome::NoMatch };
                if f.kind == FrameKind::Restore {
                    if let Some(cell) = slots.get_mut(f.pc as usize) {
                        *cell = f.a;
                    }
                    continue;
                }
                if *budget == 0 {
                    return Outcome::GaveUp;
                }
                *budget -= 1;
                if f.kind == FrameKind::Retry {
                    pc = f.pc as usize;
                    pos = f.a;
                    break;
                }
                let Some(Op::Run { set, follow, max, after, .. }) = ops.get(f.pc as usize) else {
                    return Outcome::GaveUp;
                };
                let follow = follow.as_deref();
                let fails_at = |at: usize| {
                    follow.is_some_and(|t| hay.get(at).is_none_or(|&b| !t[usize::from(b)]))
                };
                if f.kind == FrameKind::Greedy {
                    // Give back one byte at a time, skipping ends where the rest must fail.
                    let mut at = f.a - 1;
                    while at > f.b && fails_at(at) {
                        at -= 1;
                    }
                    match budget.checked_sub(f.a - at) {
                        Some(b) => *budget = b,
                        None => return Outcome::GaveUp,
                    }
                    if fails_at(at) {
                        continue;
                    }
                    if at > f.b {
                        stack.push(Frame { a: at, ..f });
                    }
                    pc = f.pc as usize + 1;
                    pos = at;
                    save(stack, slots, *after, pos);
                    break;
                }
                // Lazy: take one more byte, and more while the rest must fail.
                let t = &**set;
                let (max, mut at, mut count) = (*max as usize, f.a, f.b);
                let mut resumed = false;
                while count < max && at < len && t[usize::from(hay[at])] {
                    at += 1;
                    count += 1;
                    if !fails_at(at) {
                        resumed = true;
                        break;
                    }
                }
                match budget.checked_sub(at - f.a) {
                    Some(b) => *budget = b,
                    None => return Outcome::GaveUp,
                }
                if resumed {
                    if count < max {
                        stack.push(Frame { a: at, b: count, ..f });
                    }
                    pc = f.pc as usize + 1;
                    pos = at;
                    save(stack, slots, *after, pos);
                    break;
                }
            }
        }
    }
}

/// Write `pos` into capture slot `slot` (unless [`NO_SLOT`]) for [`Pattern::forward`],
/// journalling the old value while a fallback is active.
#[inline(always)]
fn write(slots: &mut [usize], journal: &mut Vec<Frame>, fb: bool, slot: u32, pos: usize) {
    if slot == NO_SLOT {
        return;
    }
    if let Some(cell) = slots.get_mut(slot as usize) {
        if fb {
            journal.push(Frame { kind: FrameKind::Restore, pc: slot, a: *cell, b: 0 });
        }
        *cell = pos;
    }
}

/// "No capture slot" in a fused `Set` or `Run`.
const NO_SLOT: u32 = u32::MAX;

/// Write `pos` into capture slot `slot` (unless [`NO_SLOT`]), recording the old value when a
/// choice below could make the backtracker return here.
#[inline(always)]
fn save(stack: &mut Vec<Frame>, slots: &mut [usize], slot: u32, pos: usize) {
    if slot == NO_SLOT {
        return;
    }
    let Some(cell) = slots.get_mut(slot as usize) else { return };
    if !stack.is_empty() {
        stack.push(Frame { kind: FrameKind::Restore, pc: slot, a: *cell, b: 0 });
    }
    *cell = pos;
}

/// Turn the analysed program into runnable ops: sets become tables, runs learn what may
/// follow them, and a `Save` right before or after a `Set` or `Run` is fused into it (one
/// dispatch instead of two) unless a jump lands between them.
fn lower(insts: &[Inst]) -> Option<Vec<Op>> {
    let mut target = vec![false; insts.len() + 1];
    for i in insts {
        match i {
            Inst::Split(x, y) => {
                target[*x as usize] = true;
                target[*y as usize] = true;
            }
            Inst::Jmp(x) => target[*x as usize] = true,
            _ => {}
        }
    }
    let fusable = |pc: usize| matches!(insts.get(pc), Some(Inst::Set(_) | Inst::Run { .. }));
    let mut new_pc = vec![0u32; insts.len() + 1];
    let mut ops = Vec::with_capacity(insts.len());
    let mut pc = 0;
    while pc < insts.len() {
        new_pc[pc] = u32::try_from(ops.len()).ok()?;
        let mut before = NO_SLOT;
        if let Inst::Save(s) = insts[pc]
            && fusable(pc + 1)
            && !target[pc + 1]
        {
            before = s;
            pc += 1;
            new_pc[pc] = u32::try_from(ops.len()).ok()?;
        }
        let mut after = NO_SLOT;
        if fusable(pc)
            && let Some(Inst::Save(s)) = insts.get(pc + 1)
            && !target[pc + 1]
        {
            after = *s;
            new_pc[pc + 1] = u32::try_from(ops.len()).ok()?;
        }
        ops.push(match &insts[pc] {
            Inst::Byte(b) => Op::Byte(*b),
            Inst::Lit(l) => Op::Lit(l.clone()),
            Inst::Set(s) => Op::Set { set: table(s), before, after },
            Inst::Run { set, min, max, greedy } => {
                let (follow, nullable) = first_bytes(insts, pc + 1);
                // After giving bytes back the search is not at the end of the line, so `$`
                // cannot let the rest match without consuming one of them.
                let (follow_mid, nullable_mid) = first_bytes_inside(insts, pc + 1);
                Op::Run {
                    set: table(set),
                    follow: (!nullable).then(|| table(&follow)),
                    min: *min,
                    max: *max,
                    greedy: *greedy,
                    possessive: *greedy
                        && ((!nullable_mid && set.is_disjoint(&follow_mid))
                            || surely_matches(insts, pc + 1)),
                    before,
                    after,
                }
            }
            Inst::Split(x, y) => Op::Split(*x, *y),
            Inst::Jmp(x) => Op::Jmp(*x),
            Inst::Save(s) => Op::Save(*s),
            Inst::Look(l) => Op::Look(*l),
            Inst::Match => Op::Match,
        });
        pc += if after == NO_SLOT { 1 } else { 2 };
    }
    for op in &mut ops {
        match op {
            Op::Split(x, y) => {
                *x = new_pc[*x as usize];
                *y = new_pc[*y as usize];
            }
            Op::Jmp(x) => *x = new_pc[*x as usize],
            _ => {}
        }
    }
    Some(ops)
}

/// The [`Gate`] of an anchored program: either `^` then a byte from a set, or `^\s+` / `^\s*`
/// consuming every leading blank (what follows cannot be a blank) then a byte from a set.
fn gate(insts: &[Inst], anchored: bool) -> Gate {
    if !anchored {
        return Gate::Any;
    }
    if let Some(Inst::Run { set, min, max: u32::MAX, greedy: true }) = insts.get(2)
        && *set == ByteSet::space()
    {
        let (follow, nullable) = first_bytes(insts, 3);
        if !nullable && follow.is_disjoint(set) {
            return Gate::AfterBlanks { set: follow, min_blanks: *min };
        }
        return Gate::Any;
    }
    let (first, nullable) = first_bytes(insts, 2);
    if nullable { Gate::Any } else { Gate::Col0(first) }
}

/// The [`Tail`] of a program `... X (\s*)? $ Save(1) Match` where `X` is a `Byte`, a `Set` or
/// a `Run` with `min >= 1`, and no jump lands after `X` (so every path to `Match` passes
/// through `X` and then `$`). `None` for anything else.
fn tail(insts: &[Inst]) -> Option<Tail> {
    let end = insts.iter().rposition(|i| matches!(i, Inst::Look(Look::End)))?;
    // After `$`: only the closing saves and `Match`.
    if !insts[end + 1..].iter().all(|i| matches!(i, Inst::Save(_) | Inst::Match)) {
        return None;
    }
    let mut pc = end;
    let mut strip = ByteSet::default();
    let last = loop {
        pc = pc.checked_sub(1)?;
        match &insts[pc] {
            Inst::Save(_) => {}
            Inst::Run { set, min: 0, .. } if strip == ByteSet::default() => strip = *set,
            Inst::Run { set, min, .. } if *min >= 1 => break *set,
            Inst::Set(set) => break *set,
            Inst::Byte(b) => break ByteSet::single(*b),
            _ => return None,
        }
    };
    if !last.is_disjoint(&strip) {
        return None;
    }
    let lands_inside = insts.iter().any(|i| match i {
        Inst::Split(x, y) => (*x as usize) > pc || (*y as usize) > pc,
        Inst::Jmp(x) => (*x as usize) > pc,
        _ => false,
    });
    (!lands_inside).then_some(Tail { last, strip })
}

/// Does the program surely match from `pc`, at any position? True when `Match` is reachable
/// without consuming a byte and without passing an assertion: the backtracker then finds a
/// match before it would ever return to a choice made earlier, so a greedy run just before
/// `pc` never needs to give bytes back.
fn surely_matches(insts: &[Inst], pc: usize) -> bool {
    let mut seen = vec![false; insts.len()];
    let mut todo = vec![pc];
    while let Some(pc) = todo.pop() {
        if pc >= insts.len() || seen[pc] {
            continue;
        }
        seen[pc] = true;
        match &insts[pc] {
            Inst::Match => return true,
            Inst::Run { min: 0, .. } | Inst::Save(_) => todo.push(pc + 1),
            Inst::Split(x, y) => {
                todo.push(*x as usize);
                todo.push(*y as usize);
            }
            Inst::Jmp(x) => todo.push(*x as usize),
            _ => {}
        }
    }
    false
}

/// The bytes a match can consume first from `pc`, and whether it can reach the end without
/// consuming any (assertions count as passable: this is an over-approximation).
fn first_bytes(insts: &[Inst], pc: usize) -> (ByteSet, bool) {
    first_bytes_with(insts, pc, true)
}

/// [`first_bytes`] at a position known not to be the end of the line: `$` (and `\z`) cannot
/// be passed there.
fn first_bytes_inside(insts: &[Inst], pc: usize) -> (ByteSet, bool) {
    first_bytes_with(insts, pc, false)
}

fn first_bytes_with(insts: &[Inst], pc: usize, end_passable: bool) -> (ByteSet, bool) {
    let mut set = ByteSet::default();
    let mut nullable = false;
    let mut seen = vec![false; insts.len()];
    let mut todo = vec![pc];
    while let Some(pc) = todo.pop() {
        if pc >= insts.len() || seen[pc] {
            continue;
        }
        seen[pc] = true;
        match &insts[pc] {
            Inst::Byte(b) => set.add(*b),
            Inst::Lit(l) => set.union(&ByteSet::of(l.first().copied())),
            Inst::Set(s) => set.union(s),
            Inst::Run { set: s, min, .. } => {
                set.union(s);
                if *min == 0 {
                    todo.push(pc + 1);
                }
            }
            Inst::Split(x, y) => {
                todo.push(*x as usize);
                todo.push(*y as usize);
            }
            Inst::Jmp(x) => todo.push(*x as usize),
            Inst::Look(Look::End) if !end_passable => {}
            Inst::Save(_) | Inst::Look(_) => todo.push(pc + 1),
            Inst::Match => nullable = true,
        }
    }
    (set, nullable)
}

struct Compiler {
    insts: Vec<Inst>,
}

impl Compiler {
    fn push(&mut self, i: Inst) -> Option<u32> {
        if self.insts.len() >= MAX_INSTS {
            return None;
        }
        self.insts.push(i);
        u32::try_from(self.insts.len() - 1).ok()
    }

    fn here(&self) -> u32 {
        self.insts.len() as u32
    }

    fn patch_split_second(&mut self, at: u32, target: u32) {
        if let Some(Inst::Split(_, y)) = self.insts.get_mut(at as usize) {
            *y = target;
        }
    }

    fn emit(&mut self, n: &Node) -> Option<()> {
        match n {
            Node::Empty => {}
            Node::Set(s) => {
                self.push(match s.only() {
                    Some(b) => Inst::Byte(b),
                    None => Inst::Set(*s),
                })?;
            }
            Node::Look(l) => {
                self.push(Inst::Look(*l))?;
            }
            Node::Concat(items) => {
                let mut i = 0;
                while i < items.len() {
                    // Runs of literal bytes become one `Lit`.
                    let mut lit = Vec::new();
                    while let Some(Node::Set(s)) = items.get(i) {
                        let Some(b) = s.only() else { break };
                        lit.push(b);
                        i += 1;
                    }
                    match lit.len() {
                        0 => {
                            self.emit(&items[i])?;
                            i += 1;
                        }
                        1 => {
                            self.push(Inst::Byte(lit[0]))?;
                        }
                        _ => {
                            self.push(Inst::Lit(lit.into_boxed_slice()))?;
                        }
                    }
                }
            }
            Node::Alt(alts) => {
                let mut exits = Vec::new();
                for (k, alt) in alts.iter().enumerate() {
                    if k + 1 < alts.len() {
                        let split = self.push(Inst::Split(0, 0))?;
                        let body = self.here();
                        if let Some(Inst::Split(x, _)) = self.insts.get_mut(split as usize) {
                            *x = body;
                        }
                        self.emit(alt)?;
                        exits.push(self.push(Inst::Jmp(0))?);
                        let next = self.here();
                        self.patch_split_second(split, next);
                    } else {
                        self.emit(alt)?;
                    }
                }
                let end = self.here();
                for j in exits {
                    if let Some(Inst::Jmp(x)) = self.insts.get_mut(j as usize) {
                        *x = end;
                    }
                }
            }
            Node::Group { index, node } => match index {
                Some(g) => {
                    self.push(Inst::Save(2 * g))?;
                    self.emit(node)?;
                    self.push(Inst::Save(2 * g + 1))?;
                }
                None => self.emit(node)?,
            },
            Node::Repeat { node, min, max, greedy } => {
                if let Node::Set(set) = **node {
                    self.push(Inst::Run {
                        set,
                        min: *min,
                        max: max.unwrap_or(u32::MAX),
                        greedy: *greedy,
                    })?;
                    return Some(());
                }
                for _ in 0..*min {
                    self.emit(node)?;
                }
                match max {
                    None => {
                        let top = self.push(Inst::Split(0, 0))?;
                        let body = self.here();
                        self.emit(node)?;
                        self.push(Inst::Jmp(top))?;
                        let exit = self.here();
                        self.insts[top as usize] =
                            if *greedy { Inst::Split(body, exit) } else { Inst::Split(exit, body) };
                    }
                    Some(max) => {
                        let mut splits = Vec::new();
                        for _ in *min..*max {
                            splits.push(self.push(Inst::Split(0, 0))?);
                            self.emit(node)?;
                        }
                        let exit = self.here();
                        for s in splits {
                            let body = s + 1;
                            self.insts[s as usize] = if *greedy {
                                Inst::Split(body, exit)
                            } else {
                                Inst::Split(exit, body)
                            };
                        }
                    }
                }
            }
        }
        Some(())
    }
}

#[cfg(test)]
mod tests {
    //! The reference for every check here is the `regex` crate itself, built exactly as
    //! definition patterns are built (`matcher::build_regex`).

    use super::*;
    use crate::parser::matcher::build_regex;
    use proptest::prelude::*;

    type Groups = Vec<Option<(usize, usize)>>;

    fn by_regex(pat: &str, hay: &[u8]) -> Option<Groups> {
        let re = build_regex(pat).expect("test pattern is a valid regex");
        let mut locs = re.capture_locations();
        re.captures_read(&mut locs, hay)?;
        Some((0..locs.len()).map(|g| locs.get(g)).collect())
    }

    /// `Err(())` when the backtracker gave up.
    fn by_pattern(p: &Pattern, hay: &[u8]) -> Result<Option<Groups>, ()> {
        let mut slots = vec![NONE; 2 * p.groups()];
        let mut stack = Vec::new();
        match p.search(hay, &mut slots, &mut stack) {
            Outcome::GaveUp => Err(()),
            Outcome::NoMatch => Ok(None),
            Outcome::Matched => Ok(Some(
                slots
                    .chunks_exact(2)
                    .map(|s| (s[0] != NONE && s[1] != NONE).then_some((s[0], s[1])))
                    .collect(),
            )),
        }
    }

    fn agree(pat: &str, hays: &[&[u8]]) {
        let p = Pattern::compile(pat).unwrap_or_else(|| panic!("{pat} should compile"));
        let re = build_regex(pat).expect("valid regex");
        assert_eq!(p.groups(), re.captures_len(), "{pat}");
        for hay in hays {
            let want = by_regex(pat, hay);
            let got = by_pattern(&p, hay).unwrap_or_else(|_| panic!("{pat} gave up"));
            assert_eq!(got, want, "{pat} on {:?}", String::from_utf8_lossy(hay));
        }
    }

    #[test]
    fn shipped_tarn_patterns_compile_and_agree() {
        let lines: &[&[u8]] = &[
            b"[step      1]  cfl 5.00e+00",
            b"[step 12] time 0.25  dt 1e-3  cfl 0.8",
            b"[step -3]",
            b"[step x]",
            b"[stepper 4]  cfl 1",
            b"  Ux       res 1.2345e-01   lin   3 sweeps",
            b"  p        res 2.0e-02   lin  18 sweep",
            b"  k.eps:1-2 res nan",
            b"  omega    res 1.0   lin x",
            b"  1bad res 3",
            b"  continuity  imbalance 4.0e-03",
            b"  forces   drag 4.1e-01  lift 2.1e-02  dp 1.53e+02",
            b"  wall 0.43 s",
            b"  wall 0.43 sx",
            b"  notice: k bounded below at 3 cells",
            b"notice:",
            b"warning:   low memory  ",
            b"restarting from checkpoint at step 400",
            b"tarn: residual targets reached",
            b"*** tarn fatal: floating point exception",
            b"    at solve_p (p.f90:120)",
            b"tarn: finished after 12 steps (wall 1.0 s)",
            b"tarn 3.2.0 - incompressible RANS solver",
            b"",
            b"\xff\xfe [step 1]",
        ];
        for pat in [
            r"^\[step\s+(?P<iteration>[-+]?\d+)\](?:\s+time\s+(?P<time>\S+))?",
            r"^\[step\b.*?\scfl\s+(?P<value>\S+)",
            r"^\[step\b.*?\sdt\s+(?P<value>\S+)",
            r"^\s+(?P<name>[A-Za-z_][\w.:-]*)\s+res\s+(?P<value>\S+)(?:\s+lin\s+(?P<sweeps>\S+)\s+sweeps?)?",
            r"^\s+continuity\s+imbalance\s+(?P<value>\S+)",
            r"^\s+forces\s+drag\s+(?P<drag>\S+)\s+lift\s+(?P<lift>\S+)\s+dp\s+(?P<dp>\S+)",
            r"^\s+wall\s+(?P<value>\S+)\s+s\b",
            r"^\s*notice:\s*(?P<message>.*)",
            r"^\s*warning:\s*(?P<message>.*)",
            r"^\s*restarting from checkpoint at step\s+\d+",
            r"^tarn: residual targets reached",
            r"^\*\*\* tarn fatal:\s*(?P<message>.*)",
            r"^\s+at\s+(?P<message>\S.*)",
            r"^tarn: finished after \d+ steps",
            r"^tarn \d+\.\d+(?:\.\d+)? - ",
            r"^\s+\S+\s+res\s+\S+\s+lin\s+\d+\s+sweeps",
            r"\bu=(?P<lo>\S+)",
            r"^\s*(?P<name>[A-Z][a-z]+)\s+(?P<rhs>\S+)\s+(?P<sweeps>\d+)\s+(?P<drift>\S+)\s+(?P<residual>\S+)\s*$",
            r"^\s+total \((?P<fx>\S+) (?P<fy>\S+) (?P<fz>\S+)\)",
        ] {
            agree(pat, lines);
        }
    }

    #[test]
    fn constructs_agree() {
        let hays: &[&[u8]] = &[
            b"",
            b"a",
            b"ab",
            b"aab abb",
            b"xay ab-12_c",
            b"  a b\tc\x0bd\x0ce\r",
            b"\xffa\xfeb\n",
            b"abcabcabc",
            b"a1b22c333",
            b"(1 2 3) [4]",
            b"aaab a1a12ab x12 x1y3",
            b"b12c a123b 12b",
            b"a1y2",
            b"abd",
            b"abc",
        ];
        for pat in [
            "a|ab",
            "ab|a",
            "(a|ab)(c|bcd)?",
            "(a)|(b)",
            "(?:(a)|b)+",
            "a*?b",
            "a+?",
            "(a+?)(b*)",
            "a{2}",
            "a{1,2}?b",
            "(?:ab){1,}",
            r"(\w)\1?",
            r"\d{2,3}",
            r"[^a]+",
            r"[^\s]+$",
            r"\b\w+\b",
            r"\B\w",
            r"^$",
            r"$",
            r"\A\w+\z",
            r".+",
            r".*?\s",
            r"[]a]+",
            r"[^]a]",
            r"[-+]?\d+",
            r"[\w.:-]+",
            r"\(([^()]*)\)",
            r"\[\d\]",
            r"(?P<x>a)(?<y>b)?",
            r"x*",
            r"(?:)",
            r"a|",
            r"\t|\x20",
            // Runs followed by assertions only: bytes must be given back.
            r"a\s*\b",
            r"\w+\B",
            r"a.*\b",
            r"(?:a|b)\s+$",
            // Captures fused into runs, runs that give back, jumps onto fused positions.
            r"(a+)ab",
            r"(\d+)\d",
            r"(\w+)(\d)",
            r"x(.*?)(\d)",
            r"(a|\d+)b",
            r"(a)?(\d+)",
            r"(?:(a)|b)(\d*)c",
            r"(a*?)(a)",
            r"(a{1,3}?)(ab)",
            r"(?:(?:y|(a))\d+)+",
            // A later choice fails on every branch: an earlier one must be revisited.
            r"(?:ab|a)(?:c|bd)",
            r"(a|ab)(c|bd)?$",
            r"(?:a)?(?:ab)?c",
        ] {
            if Pattern::compile(pat).is_none() {
                // `\1` and `\x20` are not in the subset; make sure that is why.
                assert!(pat.contains(r"\1") || pat.contains(r"\x"), "{pat} should compile");
                continue;
            }
            agree(pat, hays);
        }
    }

    #[test]
    fn unsupported_syntax_is_left_to_regex() {
        for pat in [
            "(?i)abc",
            "(?i:a)b",
            r"\x41",
            r"\pL",
            "[[:alpha:]]",
            "[a-z&&[^b]]",
            "[a--b]",
            "(a*)*",
            "(?:a?)+",
            "caf\u{e9}",
            r"\<word\>",
            r"\b{start}x",
            "a{3",
            "a**",
            "(?=a)",
            r"\Q",
        ] {
            assert!(Pattern::compile(pat).is_none(), "{pat} must not compile");
        }
        // Numbering agrees with the regex crate.
        let p = Pattern::compile(r"(a)(?:b)(?P<c>c)((d))").expect("compiles");
        assert_eq!(p.groups(), 5);
    }

    #[test]
    fn exponential_searches_give_up() {
        let p = Pattern::compile("(?:a|a)+b").expect("compiles");
        let hay = vec![b'a'; 40];
        assert_eq!(by_pattern(&p, &hay), Err(()));
        // The same pattern on a short line is answered directly.
        assert_eq!(by_pattern(&p, b"aab"), Ok(Some(vec![Some((0, 3))])));
    }

    #[test]
    fn common_shapes_run_forward() {
        let forward = |pat: &str| Pattern::compile(pat).expect("compiles").forward;
        assert!(forward(r"^\[step\s+(?P<iteration>[-+]?\d+)\](?:\s+time\s+(?P<time>\S+))?"));
        assert!(forward(
            r"^\s+(?P<name>[A-Za-z_][\w.:-]*)\s+res\s+(?P<value>\S+)(?:\s+lin\s+(?P<sweeps>\S+)\s+sweeps?)?"
        ));
        assert!(forward(r"^\s+wall\s+(?P<value>\S+)\s+s\b"));
        assert!(forward(r"^\s*notice:\s*(?P<message>.*)"));
        // Lazy runs, loops, runs that may give back, choices whose other branch may fail.
        assert!(!forward(r"^\[step\b.*?\scfl\s+(?P<value>\S+)"));
        assert!(!forward(r"(?:ab)+"));
        assert!(!forward(r"\w+\d"));
        assert!(!forward(r"ab|a"));
        assert!(!forward(r"(?:a)?(?:ab)?c"));
    }

    #[test]
    fn possessive_runs_are_found() {
        let count = |pat: &str| {
            let p = Pattern::compile(pat).expect("compiles");
            p.ops.iter().filter(|i| matches!(i, Op::Run { possessive: true, .. })).count()
        };
        // `\s+` before `[a-z]`, `[a-z]+` before `\s`, `\s+` before `=`, `\s*` before `\S`
        // (disjoint sets), and the final `\S+` (the rest matches empty without conditions).
        assert_eq!(count(r"^\s+(?P<n>[a-z]+)\s+=\s*(?P<v>\S+)"), 5);
        // An optional tail surely matches too (and `\s+` is disjoint from `lin`).
        assert_eq!(count(r"(?P<v>\S+)(?:\s+lin)?"), 2);
        // Overlapping sets, or an assertion after the run: bytes may have to be given back.
        assert_eq!(count(r"\w+\d"), 0);
        assert_eq!(count(r"a\s*\b"), 0);
        // But `$` never holds once a byte was given back: runs before it keep what they took.
        assert_eq!(count(r"\S+$"), 1);
        assert_eq!(count(r"^\s+(?P<n>\w+)\s+(?P<v>\S+)\s+(?P<k>\d+)\s*$"), 7);
        assert!(Pattern::compile(r"^\s+x").expect("compiles").anchored);
    }

    fn atom() -> impl Strategy<Value = String> {
        prop::sample::select(vec![
            "a", "b", " ", "-", r"\d", r"\s", r"\S", r"\w", r"\W", ".", "[a-c]", "[^a ]", r"\b",
            r"\B", "^", "$", "[-+]", r"\(", "1", "ab", "a b",
        ])
        .prop_map(str::to_string)
    }

    fn pattern() -> impl Strategy<Value = String> {
        atom().prop_recursive(4, 24, 4, |inner| {
            prop_oneof![
                prop::collection::vec(inner.clone(), 1..4).prop_map(|v| v.concat()),
                prop::collection::vec(inner.clone(), 2..4).prop_map(|v| v.join("|")),
                inner.clone().prop_map(|p| format!("({p})")),
                inner.clone().prop_map(|p| format!("(?:{p})")),
                (
                    inner,
                    prop::sample::select(vec![
                        "?", "*", "+", "??", "*?", "+?", "{2}", "{1,3}", "{0,2}?", "{2,}",
                    ])
                )
                    .prop_map(|(p, q)| format!("(?:{p}){q}")),
                (
                    prop::sample::select(vec![
                        "a", "b", " ", r"\d", r"\s", r"\S", r"\w", ".", "[a-c]", "[^a ]", "[-+]",
                    ]),
                    prop::sample::select(vec![
                        "?", "*", "+", "??", "*?", "+?", "{2}", "{1,3}", "{0,2}?", "{2,}",
                    ])
                )
                    .prop_map(|(a, q)| format!("{a}{q}")),
            ]
        })
    }

    fn haystack() -> impl Strategy<Value = Vec<u8>> {
        prop::collection::vec(
            prop::sample::select(vec![
                b'a', b'b', b'c', b' ', b'\t', b'1', b'-', b'+', b'(', b'_', 0xff,
            ]),
            0..14,
        )
    }

    /// The gate's condition on `hay`.
    fn gate_holds(g: Gate, hay: &[u8]) -> bool {
        let ws = hay.iter().take_while(|b| ByteSet::space().contains(**b)).count();
        match g {
            Gate::Any => true,
            Gate::Col0(set) => hay.first().is_some_and(|&b| set.contains(b)),
            Gate::AfterBlanks { set, min_blanks } => {
                ws >= min_blanks as usize && hay.get(ws).is_some_and(|&b| set.contains(b))
            }
        }
    }

    #[test]
    fn tails() {
        let t = |p: &str| Pattern::compile(p).and_then(|p| p.tail());
        let resid = t(r"^\s+(?P<name>\w+)\s+(?P<v>\S+)\s+(?P<n>\d+)\s*$").expect("a tail");
        assert!(resid.holds(b"  Ux  1.0e-3  3  "));
        assert!(!resid.holds(b"  Total ( 1 2 3 )"));
        assert!(!resid.holds(b"   "));
        assert!(t(r"^a(b|c)$").is_none(), "a jump lands between the byte and `$`");
        assert!(t(r"a|a$").is_none(), "a branch reaches the end without `$`");
        assert!(t(r"^x.*$").is_none(), "nullable last item");
        assert!(t(r"^x\d+").is_none(), "no `$`");
        assert!(t(r"^x\s+\s*$").is_none(), "last item overlaps the stripped blanks");
        assert!(t(r"^\d+x$").is_some_and(|t| t.holds(b"12x") && !t.holds(b"12y")));
    }

    #[test]
    fn gates() {
        let g = |p: &str| Pattern::compile(p).expect("compiles").gate();
        assert_eq!(g(r"^\[step"), Gate::Col0(ByteSet::single(b'[')));
        assert_eq!(
            g(r"^\s+(?P<n>x|y)"),
            Gate::AfterBlanks { set: ByteSet::of([b'x', b'y']), min_blanks: 1 }
        );
        assert_eq!(g(r"^\s*n"), Gate::AfterBlanks { set: ByteSet::single(b'n'), min_blanks: 0 });
        // `\s+` followed by something that may be a blank, or nothing: no gate.
        assert_eq!(g(r"^\s+\S*"), Gate::Any);
        assert_eq!(g(r"^\s+.x"), Gate::Any);
        assert_eq!(g(r"^ +x"), Gate::Col0(ByteSet::single(b' ')));
        assert_eq!(g(r"x"), Gate::Any);
        assert_eq!(g(r"^a?"), Gate::Any);
        let blank_xy = g(r"^\s+(?:x|y)");
        for (hay, want) in
            [(&b"  x"[..], true), (b"\t\x0by", true), (b" z", false), (b"x", false), (b"", false)]
        {
            assert_eq!(gate_holds(blank_xy, hay), want, "{hay:?}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 2000, failure_persistence: None, ..ProptestConfig::default() })]

        #[test]
        fn gates_never_reject_a_match(pat in pattern(), lead in 0usize..3, hays in prop::collection::vec(haystack(), 1..6)) {
            let pat = format!("^{}{pat}", [r"", r"\s+", r"\s*"][lead]);
            let Ok(re) = build_regex(&pat) else { return Ok(()) };
            let Some(p) = Pattern::compile(&pat) else { return Ok(()) };
            for hay in &hays {
                if re.is_match(hay) {
                    prop_assert!(gate_holds(p.gate(), hay), "{} {:?} on {:?}", pat, p.gate(), hay);
                }
            }
        }

        #[test]
        fn tails_never_reject_a_match(pat in pattern(), end in 0usize..4, hays in prop::collection::vec(haystack(), 1..6)) {
            let pat = format!("{pat}{}", [r"$", r"\s*$", r"\d+\s*$", r"[a-c]$"][end]);
            let Ok(re) = build_regex(&pat) else { return Ok(()) };
            let Some(p) = Pattern::compile(&pat) else { return Ok(()) };
            for hay in &hays {
                if re.is_match(hay) {
                    prop_assert!(p.tail().is_none_or(|t| t.holds(hay)), "{} {:?} on {:?}", pat, p.tail(), hay);
                }
            }
        }

        #[test]
        fn random_patterns_agree_with_regex(pat in pattern(), hays in prop::collection::vec(haystack(), 1..6)) {
            let Ok(re) = build_regex(&pat) else { return Ok(()) };
            let Some(p) = Pattern::compile(&pat) else { return Ok(()) };
            prop_assert_eq!(p.groups(), re.captures_len());
            for hay in &hays {
                if let Ok(got) = by_pattern(&p, hay) {
                    prop_assert_eq!(got, by_regex(&pat, hay), "{} on {:?}", pat, hay);
                }
            }
        }
    }
}
