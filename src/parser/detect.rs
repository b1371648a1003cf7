//! Choosing a parser for a file from its first bytes, with the reasons shown.
//!
//! Each definition scores the head of the file with its `[[detect]]` patterns: a pattern adds
//! its weight (which may be negative) once, when at least `min_lines` lines of the head match
//! it. The best score wins only when it is positive and strictly ahead of the runner-up; a tie
//! or a file nobody claims gives no choice, and the candidates' reasons say why, so the user
//! can name a parser instead of getting a silent guess.

use super::Definition;

/// Lines of the head examined (the head is at most ~64 KiB anyway).
const MAX_LINES: usize = 4000;

/// One definition's score for a file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Candidate {
    pub name: String,
    pub score: i64,
    /// Which patterns matched how often, in plain words.
    pub reasons: Vec<String>,
}

/// The outcome of detection: the choice (if any) and every candidate, best first.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Detection {
    pub chosen: Option<String>,
    pub candidates: Vec<Candidate>,
    /// One sentence explaining the choice or why there is none.
    pub summary: String,
}

pub fn detect(defs: &[Definition], head: &[u8]) -> Detection {
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

    let mut candidates: Vec<Candidate> = defs
        .iter()
        .map(|d| {
            let mut score = 0i64;
            let mut reasons = Vec::new();
            let rules = d.detect_rules();
            if rules.is_empty() {
                reasons.push("has no detect patterns".to_string());
            }
            for rule in rules {
                let mut count = 0usize;
                let mut first = None;
                for (i, line) in lines.iter().enumerate() {
                    let ws = super::matcher::leading_ws(line);
                    if rule.matcher.is_match(line, ws) {
                        count += 1;
                        first.get_or_insert(i + 1);
                    }
                }
                let pat = &rule.pattern;
                match first {
                    Some(first) if count >= rule.min_lines => {
                        score = score.saturating_add(rule.weight);
                        reasons.push(format!(
                            "`{pat}` matched {count} line{} (first: line {first}): {:+}",
                            plural(count),
                            rule.weight
                        ));
                    }
                    Some(_) => reasons.push(format!(
                        "`{pat}` matched {count} line{}, needs {}: +0",
                        plural(count),
                        rule.min_lines
                    )),
                    None => reasons.push(format!("`{pat}` matched no line: +0")),
                }
            }
            Candidate { name: d.name().to_string(), score, reasons }
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
                "no parser definition recognises this file ({} line{} examined); name one",
                lines.len(),
                plural(lines.len())
            ),
        ),
    };
    Detection { chosen, candidates, summary }
}

fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}
