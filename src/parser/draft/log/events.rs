//! Event and end rules of a log draft (rule 3 in `draft.rs`).

use std::fmt::Write;

use super::{L, Shape, Writer, excerpt};
use crate::parser::draft::emit::{prefix_pattern, toml_str};
use crate::parser::shape::Kind;

/// What kind of message an event line is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum EventKind {
    Error,
    Warning,
    End,
    Info,
}

const ERROR_WORDS: &[&str] = &[
    "error",
    "errors",
    "fatal",
    "abort",
    "aborted",
    "aborting",
    "exception",
    "segmentation",
    "sigsegv",
    "sigfpe",
    "traceback",
    "panic",
    "crash",
    "crashed",
];
const WARNING_WORDS: &[&str] = &["warning", "warnings", "warn", "notice", "caution"];
const END_WORDS: &[&str] = &[
    "finished",
    "completed",
    "complete",
    "terminated",
    "termination",
    "stopped",
    "exit",
    "exited",
    "exiting",
    "end",
    "ended",
];
const INFO_WORDS: &[&str] = &["converged", "reached", "restart", "restarting", "resumed"];
/// `reached` is the solver's own convergence mark only with one of these (`residual
/// targets reached`, not `maximum number of iterations reached`).
const TARGET_WORDS: &[&str] =
    &["target", "targets", "tolerance", "tolerances", "convergence", "criteria", "criterion"];

pub fn event_kind(l: &L) -> Option<(EventKind, usize)> {
    let mut best: Option<(EventKind, usize)> = None;
    for (i, t) in l.toks.iter().enumerate() {
        if t.kind != Kind::Word {
            continue;
        }
        let w = l.word(i).to_ascii_lowercase();
        let kind = if ERROR_WORDS.contains(&w.as_str()) {
            EventKind::Error
        } else if WARNING_WORDS.contains(&w.as_str()) {
            EventKind::Warning
        } else if END_WORDS.contains(&w.as_str()) {
            // `end` alone, or `end of run`: not `end` inside a sentence about something else.
            if w.starts_with("end") && l.words().len() > 3 {
                continue;
            }
            EventKind::End
        } else if INFO_WORDS.contains(&w.as_str()) {
            if w == "reached"
                && !l
                    .words()
                    .iter()
                    .any(|x| TARGET_WORDS.contains(&x.to_ascii_lowercase().as_str()))
            {
                continue;
            }
            EventKind::Info
        } else {
            continue;
        };
        if best.is_none_or(|(k, _)| kind < k) {
            best = Some((kind, i));
        }
    }
    best
}

pub fn event_rules(
    ls: &[L],
    shapes: &[Shape],
    events: &[(usize, EventKind, usize)],
    w: &mut Writer,
) {
    // One rule per distinct start (the words up to and including the keyword).
    let mut done: Vec<String> = Vec::new();
    let mut error_pattern: Option<String> = None;
    let mut error_lines: Vec<usize> = Vec::new();
    for &(s, kind, at) in events {
        let l = &ls[shapes[s].lines[0]];
        let anchored = l.toks[..at].iter().all(|t| t.kind != Kind::Num);
        let start = if anchored {
            let mut p = prefix_pattern(l.text, &l.toks[..=at], at + 1);
            // A `:` right after the keyword belongs to the start.
            if l.toks.get(at + 1).is_some_and(|t| t.kind == Kind::Punct && l.tok(at + 1) == b":") {
                p.push_str("\\s*:");
            }
            p
        } else {
            format!("\\b{}\\b", regex::escape(&l.word(at)))
        };
        if done.contains(&start) {
            if kind == EventKind::Error {
                error_lines.extend(shapes[s].lines.iter().copied());
            }
            continue;
        }
        done.push(start.clone());
        let keyword = l.word(at).to_ascii_lowercase();
        let count: usize = events
            .iter()
            .filter(|e| {
                let m = &ls[shapes[e.0].lines[0]];
                m.word(e.2).eq_ignore_ascii_case(&keyword)
            })
            .map(|e| shapes[e.0].lines.len())
            .sum();
        let o = &mut w.out;
        let _ = writeln!(
            o,
            "# e.g. {} ({} line{} like it)",
            excerpt(l.text),
            count,
            if count == 1 { "" } else { "s" }
        );
        match kind {
            EventKind::End => {
                let name = w.rule_name("finished");
                let _ = writeln!(
                    w.out,
                    "[[rules]]\nkind = \"end\"\nname = \"{name}\"\npattern = {}\n",
                    toml_str(&start)
                );
            }
            _ => {
                let (severity, base) = match kind {
                    EventKind::Error => (
                        "error",
                        if keyword == "fatal" { "crash".to_string() } else { keyword.clone() },
                    ),
                    EventKind::Warning => ("warning", keyword.clone()),
                    _ => (
                        "info",
                        if matches!(keyword.as_str(), "converged" | "reached") {
                            "solver_converged".into()
                        } else if matches!(keyword.as_str(), "restarting" | "resumed") {
                            // The name that opens a segment (`restart` alone may be the
                            // writing of a restart file, and keeps its own name).
                            "resumed".into()
                        } else {
                            keyword.clone()
                        },
                    ),
                };
                let name = w.rule_name(&base);
                // With nothing after the keyword the whole line is the message.
                let rest = l.toks.iter().skip(at + 1).any(|t| t.kind != Kind::Punct);
                let pat = if rest { format!("{start}\\s*(?P<message>.*)") } else { start.clone() };
                let _ = writeln!(
                    w.out,
                    "[[rules]]\nkind = \"event\"\nname = \"{name}\"\npattern = {}\nseverity = \"{severity}\"\n",
                    toml_str(&pat)
                );
                if kind == EventKind::Error {
                    error_pattern.get_or_insert(start.clone());
                    error_lines.extend(shapes[s].lines.iter().copied());
                }
            }
        }
    }
    // A stack trace: the lines right after an error line that no other rule reads.
    if let (Some(err), Some(&last_err)) = (error_pattern, error_lines.iter().max()) {
        let next = ls.get(last_err + 1).filter(|l| !l.toks.is_empty());
        if let Some(l) = next {
            let first = l.toks[0];
            let lead = String::from_utf8_lossy(first.text(l.text)).into_owned();
            if first.kind != Kind::Num && !lead.is_empty() {
                let pat = format!("^\\s*{}\\s*(?P<message>\\S.*)", regex::escape(&lead));
                let name = w.rule_name("stack_trace");
                let _ = writeln!(
                    w.out,
                    "# The first line after the error, where it happened (e.g. {}).\n[[rules]]\nkind = \"event\"\nname = \"{name}\"\npattern = {}\nafter = {}\nrepeat = \"first\"\nseverity = \"error\"\n",
                    excerpt(l.text),
                    toml_str(&pat),
                    toml_str(&err)
                );
            }
        }
    }
}
