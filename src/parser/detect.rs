//! Choosing a parser for a file from its first bytes, with the reasons shown.
//!
//! Each definition scores the head of the file with its `[[detect]]` patterns: a pattern adds
//! its weight (which may be negative) once, when at least `min_lines` lines of the head match
//! it. The best score wins only when it is positive and strictly ahead of the runner-up; a tie
//! or a file nobody claims gives no choice, and the candidates' reasons say why, so the user
//! can name a parser instead of getting a silent guess.
//!
//! Only the `[[detect]]` patterns are compiled for this (see [`super::Entry`]); a definition
//! whose patterns do not compile takes no part and says why in its reasons.

use super::Entry;
use super::series::excerpt;

/// Lines of the head examined (the head is at most ~64 KiB anyway).
const MAX_LINES: usize = 4000;

/// What one `[[detect]]` pattern found in the head.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PatternHit {
    pub pattern: String,
    pub weight: i64,
    pub min_lines: usize,
    /// Lines of the head it matched.
    pub count: usize,
    /// 1-based number of the first matching line.
    pub first: Option<usize>,
}

impl PatternHit {
    /// Did it add its weight?
    pub fn counted(&self) -> bool {
        self.first.is_some() && self.count >= self.min_lines
    }
}

/// One definition's score for a file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Candidate {
    pub name: String,
    pub score: i64,
    /// Which patterns matched how often, in plain words.
    pub reasons: Vec<String>,
    /// The same, per pattern, for messages that quote the file rather than the patterns.
    pub hits: Vec<PatternHit>,
    /// Why the definition took no part (its detect patterns do not compile).
    pub problem: Option<String>,
}

/// The outcome of detection: the choice (if any) and every candidate, best first.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Detection {
    pub chosen: Option<String>,
    pub candidates: Vec<Candidate>,
    /// One sentence explaining the choice or why there is none.
    pub summary: String,
    /// The lines examined (without their line ends), kept for [`Detection::explain`].
    head_lines: Vec<String>,
}

impl Detection {
    /// Why no definition was chosen, in words a user can act on: the lines examined (or
    /// the tie), then [`Detection::explain`].
    pub fn why_none(&self) -> String {
        let n = self.head_lines.len();
        let lead = match self.candidates.as_slice() {
            [a, b, ..] if a.score > 0 && a.score == b.score => self.summary.clone(),
            _ => format!("{n} line{} examined", plural(n)),
        };
        format!("{lead}; {}", self.explain())
    }

    /// The best candidates and which lines of the file they matched, quoted from the file
    /// rather than the patterns (for the message when nobody claims a file).
    pub fn explain(&self) -> String {
        let mut o = String::new();
        let shown: Vec<&Candidate> = self
            .candidates
            .iter()
            .filter(|c| c.problem.is_none())
            .filter(|c| c.hits.iter().any(|h| h.first.is_some()) || c.score > 0)
            .take(3)
            .collect();
        if shown.is_empty() {
            o.push_str("no definition's detect patterns matched any line");
        } else {
            o.push_str("best candidates: ");
            let parts: Vec<String> = shown.iter().map(|c| self.describe(c)).collect();
            o.push_str(&parts.join("; "));
        }
        for c in self.candidates.iter().filter(|c| c.problem.is_some()) {
            o.push_str(&format!(
                "; `{}` was not tried: {}",
                c.name,
                c.problem.as_deref().unwrap_or_default()
            ));
        }
        o
    }

    fn describe(&self, c: &Candidate) -> String {
        let mut parts = Vec::new();
        for h in &c.hits {
            let Some(first) = h.first else { continue };
            let line = self.head_lines.get(first - 1).map(|l| excerpt(l.as_bytes()));
            let line = line.unwrap_or_default();
            let lines = if h.count == 1 {
                format!("line {first} {line}")
            } else {
                format!("{} lines, first line {first} {line}", h.count)
            };
            if h.counted() {
                parts.push(format!("{lines} ({:+})", h.weight));
            } else {
                parts.push(format!("{lines}, needs {} lines", h.min_lines));
            }
        }
        let unmatched = c.hits.iter().filter(|h| h.first.is_none()).count();
        if unmatched > 0 {
            parts.push(format!(
                "{unmatched} of its {} pattern{} matched nothing",
                c.hits.len(),
                plural(c.hits.len())
            ));
        }
        format!("`{}` scored {} ({})", c.name, c.score, parts.join(", "))
    }
}

pub fn detect(entries: &[Entry], head: &[u8]) -> Detection {
    let lines: Vec<&[u8]> = head
        .split(|&b| b == b'\n')
        .map(|l| l.strip_suffix(b"\r").unwrap_or(l))
        .take(MAX_LINES)
        .collect();
    // A trailing newline leaves an empty last piece that is not a line.
    let n_lines = match lines.last() {
        Some(&[]) => lines.len() - 1,
        _ => lines.len(),
    };
    let lines = &lines[..n_lines];

    let mut candidates: Vec<Candidate> = entries
        .iter()
        .map(|e| {
            let mut c = Candidate {
                name: e.name().to_string(),
                score: 0,
                reasons: Vec::new(),
                hits: Vec::new(),
                problem: None,
            };
            let rules = match e.detect_rules() {
                Ok(r) => r,
                Err(problem) => {
                    c.reasons.push(format!("cannot be used: {problem}"));
                    c.problem = Some(problem.to_string());
                    return c;
                }
            };
            if rules.is_empty() {
                c.reasons.push("has no detect patterns".to_string());
            }
            for rule in rules {
                let mut hit = PatternHit {
                    pattern: rule.pattern.clone(),
                    weight: rule.weight,
                    min_lines: rule.min_lines,
                    count: 0,
                    first: None,
                };
                for (i, line) in lines.iter().enumerate() {
                    let ws = super::matcher::leading_ws(line);
                    if rule.matcher.is_match(line, ws) {
                        hit.count += 1;
                        hit.first.get_or_insert(i + 1);
                    }
                }
                let pat = &rule.pattern;
                let count = hit.count;
                match hit.first {
                    Some(first) if hit.counted() => {
                        c.score = c.score.saturating_add(rule.weight);
                        c.reasons.push(format!(
                            "`{pat}` matched {count} line{} (first: line {first}): {:+}",
                            plural(count),
                            rule.weight
                        ));
                    }
                    Some(_) => c.reasons.push(format!(
                        "`{pat}` matched {count} line{}, needs {}: +0",
                        plural(count),
                        rule.min_lines
                    )),
                    None => c.reasons.push(format!("`{pat}` matched no line: +0")),
                }
                c.hits.push(hit);
            }
            c
        })
        .collect();
    candidates.sort_by(|a, b| b.score.cmp(&a.score).then_with(|| a.name.cmp(&b.name)));

    let (chosen, summary) = match candidates.as_slice() {
        [] => (None, "no parser definitions are loaded".to_string()),
        [best, rest @ ..] if best.score > 0 => match rest.first() {
            Some(second) if second.score == best.score => (
                None,
                format!(
                    "`{}` and `{}` both score {}: name the parser to use",
                    best.name, second.name, best.score
                ),
            ),
            Some(second) => (
                Some(best.name.clone()),
                format!(
                    "chose `{}` (score {}; next `{}` with {})",
                    best.name, best.score, second.name, second.score
                ),
            ),
            None => {
                (Some(best.name.clone()), format!("chose `{}` (score {})", best.name, best.score))
            }
        },
        _ => (
            None,
            format!(
                "no parser definition recognises this file ({} line{} examined)",
                lines.len(),
                plural(lines.len())
            ),
        ),
    };
    let head_lines = lines.iter().map(|l| String::from_utf8_lossy(l).into_owned()).collect();
    Detection { chosen, candidates, summary, head_lines }
}

fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}
