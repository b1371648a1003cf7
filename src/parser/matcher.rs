//! A compiled regex with a cheap literal test in front of it.
//!
//! Most log lines match none of a definition's rules, so the cost per line is dominated by
//! rejecting lines. Each [`Matcher`] therefore carries a [`Prefilter`]: a literal that every
//! matching line must contain, either declared in the rule (`literal = "..."`) or taken from
//! the start of the pattern. A pattern anchored at the line start (`^\[step`, or
//! `^\s+continuity` after leading blanks) is tested with a prefix comparison; other literals
//! with a `memchr::memmem` search. Only lines that pass run the regex.
//!
//! Patterns are compiled as byte regexes with Unicode classes off (`\d`, `\w`, `\s` are
//! ASCII, `.` is any byte but newline): logs are bytes, not always valid UTF-8, and ASCII
//! classes keep the automata small. `(?u)` in a pattern switches Unicode back on.
//!
//! Lines that pass the prefilter are matched by [`pattern::Pattern`], a small backtracker for
//! the pattern subset definitions use, which gives the same groups as the regex without the
//! regex's fixed cost per search; patterns outside that subset, and searches that exhaust the
//! backtracker's step budget, go to the `regex` crate. Captures land in a caller-owned
//! [`Captures`], reused line after line.

mod pattern;

use memchr::memmem;
use regex::bytes::{CaptureLocations, Regex, RegexBuilder};

pub use pattern::{ByteSet, Gate};
use pattern::{Frame, Outcome, Pattern};

/// Largest compiled regex we accept; protects against patterns that explode in size.
const SIZE_LIMIT: usize = 4 << 20;

/// The cheap test run before a regex.
#[derive(Debug, Clone)]
pub enum Prefilter {
    /// No usable literal: always run the regex.
    None,
    /// The line, after the leading blanks `lead` allows, starts with the literal.
    Prefix { lead: Lead, literal: Box<[u8]> },
    /// The line contains the literal somewhere.
    Contains(Box<memmem::Finder<'static>>),
}

/// Leading whitespace allowed before a prefix literal.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Lead {
    /// `^lit`
    None,
    /// `^\s*lit`
    Any,
    /// `^\s+lit`
    Some,
}

/// A regex plus its prefilter and, when the pattern allows, its backtracking twin.
#[derive(Debug, Clone)]
pub struct Matcher {
    pub regex: Regex,
    pub prefilter: Prefilter,
    fast: Option<Pattern>,
    /// The backtracker's condition on the end of a matching line, if it has one.
    tail: Option<pattern::Tail>,
}

/// After this many searches that exhausted the step budget, a [`Captures`] stops trying the
/// backtracker for its pattern: the pattern is one it handles badly.
const MAX_GIVE_UPS: u32 = 16;

/// Reusable capture storage for one [`Matcher`]: group spans of the last match plus the
/// scratch both engines need, so a search allocates nothing once warmed up.
#[derive(Debug, Clone)]
pub struct Captures {
    /// `2 * g` and `2 * g + 1`: start and end of group `g`, `pattern::NONE` when unset.
    slots: Vec<usize>,
    stack: Vec<Frame>,
    locs: CaptureLocations,
    give_ups: u32,
}

impl Captures {
    /// Span of group `g` in the last successful search.
    #[inline]
    pub fn get(&self, g: usize) -> Option<(usize, usize)> {
        let s = *self.slots.get(2 * g)?;
        let e = *self.slots.get(2 * g + 1)?;
        (s != pattern::NONE && e != pattern::NONE).then_some((s, e))
    }
}

/// Compile a pattern the way every definition pattern is compiled.
pub fn build_regex(pattern: &str) -> Result<Regex, String> {
    RegexBuilder::new(pattern)
        .unicode(false)
        .size_limit(SIZE_LIMIT)
        .build()
        .map_err(|e| format!("invalid regex: {}", regex_problem(&e.to_string())))
}

/// The regex crate prints a multi-line picture (pattern, caret, `error: ...`); keep the
/// problem and the caret position, on one line.
fn regex_problem(s: &str) -> String {
    let lines: Vec<&str> = s.lines().map(str::trim_end).filter(|l| !l.is_empty()).collect();
    let problem = lines.iter().find_map(|l| l.strip_prefix("error: "));
    let caret = lines
        .iter()
        .find(|l| l.trim_start().starts_with('^') && l.trim().chars().all(|c| c == '^'));
    let pattern = lines
        .iter()
        .position(|l| Some(l) == caret)
        .and_then(|i| i.checked_sub(1))
        .map(|i| lines[i]);
    match (problem, caret, pattern) {
        (Some(p), Some(c), Some(pat)) => {
            let indent = pat.len() - pat.trim_start().len();
            let col = c.len() - c.trim_start().len();
            format!("{p} (at character {} of the pattern)", col.saturating_sub(indent) + 1)
        }
        (Some(p), _, _) => p.to_string(),
        _ => lines.join(" "),
    }
}

impl Matcher {
    /// Compile `pattern`; `literal` is a user-declared required substring.
    pub fn new(pattern: &str, literal: Option<&str>) -> Result<Matcher, String> {
        let regex = build_regex(pattern)?;
        let prefilter = match literal {
            Some(lit) if !lit.is_empty() => {
                Prefilter::Contains(Box::new(memmem::Finder::new(lit.as_bytes()).into_owned()))
            }
            Some(_) => return Err("`literal` must not be empty".to_string()),
            None => extract_prefilter(pattern),
        };
        // The backtracker must number groups as the regex does; anything else is a bug in
        // its parser, and the regex alone is then used.
        let fast = Pattern::compile(pattern).filter(|p| p.groups() == regex.captures_len());
        let tail = fast.as_ref().and_then(Pattern::tail);
        Ok(Matcher { regex, prefilter, fast, tail })
    }

    /// Fresh capture storage sized for this matcher.
    pub fn captures_storage(&self) -> Captures {
        Captures {
            slots: vec![pattern::NONE; 2 * self.regex.captures_len()],
            stack: Vec::new(),
            locs: self.regex.capture_locations(),
            give_ups: 0,
        }
    }

    /// Search `line` (no prefilter), leaving the groups of the leftmost-first match in
    /// `caps`. `caps` must come from this matcher's [`Matcher::captures_storage`].
    #[inline]
    pub fn captures(&self, line: &[u8], caps: &mut Captures) -> bool {
        if let Some(p) = &self.fast
            && caps.give_ups < MAX_GIVE_UPS
        {
            match p.search(line, &mut caps.slots, &mut caps.stack) {
                Outcome::Matched => return true,
                Outcome::NoMatch => return false,
                Outcome::GaveUp => caps.give_ups += 1,
            }
        }
        if self.regex.captures_read(&mut caps.locs, line).is_none() {
            return false;
        }
        for (g, pair) in caps.slots.chunks_exact_mut(2).enumerate() {
            let (s, e) = caps.locs.get(g).unwrap_or((pattern::NONE, pattern::NONE));
            pair[0] = s;
            pair[1] = e;
        }
        true
    }

    /// Does `line` match (prefilter first)? The groups are left in `caps`.
    #[inline]
    pub fn find(&self, line: &[u8], lead_ws: usize, caps: &mut Captures) -> bool {
        self.may_match(line, lead_ws)
            && self.tail.is_none_or(|t| t.holds(line))
            && self.captures(line, caps)
    }

    /// A necessary condition on a matching line's first bytes, for dispatching lines to rules:
    /// from the pattern when the backtracker runs it, else from a prefix prefilter.
    pub fn gate(&self) -> Gate {
        if let Some(p) = &self.fast
            && p.gate() != Gate::Any
        {
            return p.gate();
        }
        match &self.prefilter {
            Prefilter::Prefix { lead, literal } => match (lead, literal.first()) {
                (_, None) => Gate::Any,
                (Lead::None, Some(&b)) => Gate::Col0(ByteSet::single_byte(b)),
                (Lead::Any, Some(&b)) => {
                    Gate::AfterBlanks { set: ByteSet::single_byte(b), min_blanks: 0 }
                }
                (Lead::Some, Some(&b)) => {
                    Gate::AfterBlanks { set: ByteSet::single_byte(b), min_blanks: 1 }
                }
            },
            _ => Gate::Any,
        }
    }

    /// Can this line match at all? `lead_ws` is the number of leading ASCII blanks of the
    /// line, computed once per line by the caller.
    #[inline]
    pub fn may_match(&self, line: &[u8], lead_ws: usize) -> bool {
        match &self.prefilter {
            Prefilter::None => true,
            Prefilter::Prefix { lead, literal } => {
                let at = if *lead == Lead::None { 0 } else { lead_ws };
                // One byte compare first: most lines fail here, without a memcmp call.
                line.get(at) == literal.first()
                    && (*lead != Lead::Some || lead_ws > 0)
                    && line[at..].starts_with(literal)
            }
            Prefilter::Contains(f) => f.find(line).is_some(),
        }
    }

    /// Prefilter, then regex.
    #[inline]
    pub fn is_match(&self, line: &[u8], lead_ws: usize) -> bool {
        self.may_match(line, lead_ws) && self.regex.is_match(line)
    }
}

/// Number of leading ASCII whitespace bytes (the `\s` set of an ASCII regex).
#[inline]
pub fn leading_ws(line: &[u8]) -> usize {
    line.iter().position(|b| !b.is_ascii_whitespace() && *b != 0x0b).unwrap_or(line.len())
}

/// Derive a prefilter from the start of a pattern, conservatively: when in doubt, none.
pub fn extract_prefilter(pattern: &str) -> Prefilter {
    if has_top_level_alternation(pattern) {
        return Prefilter::None;
    }
    let p = pattern.as_bytes();
    let (anchored, mut i) = if p.first() == Some(&b'^') { (true, 1) } else { (false, 0) };
    let mut lead = Lead::None;
    if anchored {
        for (form, l) in [
            (&b"\\s*"[..], Lead::Any),
            (b"\\s+", Lead::Some),
            (b" *", Lead::Any),
            (b" +", Lead::Some),
        ] {
            if p[i..].starts_with(form) {
                lead = l;
                i += form.len();
                break;
            }
        }
    }
    let literal = literal_run(&p[i..]);
    // After a blank-skipping lead the literal must not itself start with a blank: the regex
    // could split blanks between the two differently than our prefix test.
    if lead != Lead::None && literal.first().is_some_and(u8::is_ascii_whitespace) {
        return Prefilter::None;
    }
    // A single byte is not worth a prefix test unless anchored at column 0.
    if literal.is_empty() || (literal.len() < 2 && !(anchored && lead == Lead::None)) {
        return Prefilter::None;
    }
    if anchored {
        Prefilter::Prefix { lead, literal: literal.into_boxed_slice() }
    } else {
        Prefilter::Contains(Box::new(memmem::Finder::new(&literal).into_owned()))
    }
}

/// The literal bytes a pattern begins with (escapes resolved), stopping at the first
/// metacharacter; the last byte is dropped when a quantifier follows it.
fn literal_run(p: &[u8]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < p.len() {
        let c = p[i];
        let (byte, width) = if c == b'\\' {
            match p.get(i + 1) {
                Some(&e) if b"[](){}.*+?|^$\\/-#& ~".contains(&e) => (e, 2),
                _ => break,
            }
        } else if c.is_ascii_alphanumeric() || b" _:,;=<>@!%'\"~`/-".contains(&c) {
            (c, 1)
        } else {
            break;
        };
        // A quantifier applies to this byte alone: it is not required.
        if let Some(q) = p.get(i + width)
            && matches!(q, b'?' | b'*' | b'+' | b'{')
        {
            if *q == b'+' {
                out.push(byte);
            }
            break;
        }
        out.push(byte);
        i += width;
    }
    out
}

/// Is there a `|` outside every group and class? Then no literal is required.
fn has_top_level_alternation(pattern: &str) -> bool {
    let p = pattern.as_bytes();
    let mut depth = 0usize;
    let mut i = 0;
    while i < p.len() {
        match p[i] {
            b'\\' => i += 1,
            b'[' => {
                // Skip a class: a leading `]` (or `^]`) is literal; nested `[:alpha:]` too.
                i += 1;
                if p.get(i) == Some(&b'^') {
                    i += 1;
                }
                if p.get(i) == Some(&b']') {
                    i += 1;
                }
                let mut nest = 1;
                while i < p.len() && nest > 0 {
                    match p[i] {
                        b'\\' => i += 1,
                        b'[' => nest += 1,
                        b']' => nest -= 1,
                        _ => {}
                    }
                    i += 1;
                }
                continue;
            }
            b'(' => depth += 1,
            b')' => depth = depth.saturating_sub(1),
            b'|' if depth == 0 => return true,
            _ => {}
        }
        i += 1;
    }
    false
}

#[cfg(test)]
mod tests {
    use super::*;

    fn prefix(p: &str) -> Option<(Lead, String)> {
        match extract_prefilter(p) {
            Prefilter::Prefix { lead, literal } => {
                Some((lead, String::from_utf8_lossy(&literal).into_owned()))
            }
            _ => None,
        }
    }

    fn contains(p: &str) -> bool {
        matches!(extract_prefilter(p), Prefilter::Contains(_))
    }

    #[test]
    fn extracts_anchored_prefixes() {
        assert_eq!(prefix(r"^\[step\s+(?P<iteration>\d+)\]"), Some((Lead::None, "[step".into())));
        assert_eq!(prefix(r"^\s+continuity\s+"), Some((Lead::Some, "continuity".into())));
        assert_eq!(prefix(r"^\s*notice:\s*(?P<message>.*)"), Some((Lead::Any, "notice:".into())));
        assert_eq!(prefix(r"^tarn: finished"), Some((Lead::None, "tarn: finished".into())));
        assert_eq!(prefix(r"^\*\*\* tarn fatal"), Some((Lead::None, "*** tarn fatal".into())));
        // A quantified last byte is not required.
        assert_eq!(prefix(r"^abcd?e"), Some((Lead::None, "abc".into())));
        assert_eq!(prefix(r"^ab+c"), Some((Lead::None, "ab".into())));
    }

    #[test]
    fn refuses_when_unsure() {
        assert!(prefix(r"^abc|def").is_none());
        assert!(!contains(r"^abc|def"));
        assert!(prefix(r"^(?i)tarn").is_none());
        assert!(prefix(r"^\d+").is_none());
        assert!(prefix(r"^.*x").is_none());
        assert!(matches!(extract_prefilter(r"^\s+\w+\s+res"), Prefilter::None));
        // `|` inside a group or class does not count.
        assert!(prefix(r"^ab(c|d)").is_some());
        assert!(prefix(r"^ab[|]").is_some());
        assert!(contains(r"tarn fatal: (?P<message>.*)"));
    }

    #[test]
    fn prefilter_agrees_with_regex() {
        let cases = [
            (r"^\[step\s+\d+\]", "[step   12]  cfl 1", true),
            (r"^\[step\s+\d+\]", " [step 12]", false),
            (r"^\s+continuity\s+imbalance", "  continuity  imbalance 1", true),
            (r"^\s+continuity\s+imbalance", "continuity imbalance 1", false),
            (r"^\s*notice:", "notice: x", true),
            (r"^\s*notice:", "\t notice: x", true),
            (r"fatal: (?P<m>.*)", "*** tarn fatal: x", true),
            (r"fatal: (?P<m>.*)", "*** tarn fatal x", false),
        ];
        for (pat, line, expect) in cases {
            let m = Matcher::new(pat, None).expect("test pattern compiles");
            let ws = leading_ws(line.as_bytes());
            assert_eq!(m.may_match(line.as_bytes(), ws), expect, "{pat} on {line:?}");
            assert_eq!(m.is_match(line.as_bytes(), ws), expect, "{pat} on {line:?}");
        }
    }

    #[test]
    fn declared_literal_is_used() {
        let m = Matcher::new(r"^\s+(?P<name>\w+)\s+res\s+", Some(" res ")).expect("compiles");
        assert!(!m.may_match(b"  p   lin 3", 2));
        assert!(m.may_match(b"  p res 1", 2));
        assert!(Matcher::new("a", Some("")).is_err());
    }

    #[test]
    fn bad_regex_is_reported() {
        let e = Matcher::new("(unclosed", None).expect_err("must fail");
        assert!(e.starts_with("invalid regex"), "{e}");
    }
}
