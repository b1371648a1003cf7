//! Drafting a `lines` definition for a free-text log (the rules are in `draft.rs`).

mod events;
mod values;

use std::collections::{BTreeSet, HashMap};
use std::fmt::Write;

use super::emit::{Part, group_name, pattern, prefix_pattern, toml_key, toml_str};
use super::names::number_names;
use super::roles::{Guess, guess};
use crate::parser::number::{parse_integer, parse_number};
use crate::parser::shape::{Kind, Token, shape_of, tokens};
use events::{EventKind, event_kind, event_rules};
use values::{Records, value_rules};

/// One line of the sample, tokenised.
struct L<'a> {
    text: &'a [u8],
    toks: Vec<Token>,
    /// Shape plus token kinds: equal keys have the same token sequence.
    key: String,
}

impl L<'_> {
    fn tok(&self, i: usize) -> &[u8] {
        self.toks[i].text(self.text)
    }
    fn word(&self, i: usize) -> String {
        String::from_utf8_lossy(self.tok(i)).into_owned()
    }
    fn num(&self, i: usize) -> f64 {
        parse_number(self.tok(i)).unwrap_or(f64::NAN)
    }
    fn whole(&self, i: usize) -> bool {
        let t = self.tok(i);
        parse_integer(t).is_some()
            && !t.iter().any(|b| matches!(b, b'.' | b'e' | b'E' | b'd' | b'D'))
    }
    fn words(&self) -> Vec<String> {
        (0..self.toks.len())
            .filter(|&i| self.toks[i].kind == Kind::Word)
            .map(|i| self.word(i))
            .collect()
    }
    fn has_num(&self) -> bool {
        self.toks.iter().any(|t| t.kind == Kind::Num)
    }
}

/// Lines of one shape, in order.
struct Shape {
    lines: Vec<usize>,
}

const CLOCK_WORDS: &[&str] = &["cpu", "wall", "clock", "elapsed", "exec", "real", "runtime"];
const STEP_WORDS: &[&str] = &[
    "step",
    "iter",
    "iteration",
    "it",
    "time",
    "cycle",
    "ts",
    "timestep",
    "outer",
    "n",
    "nstep",
    "istep",
    "niter",
    "loop",
];

/// The record-opening line found in the sample.
struct Step {
    shape: usize,
    iteration: Option<usize>,
    time: Option<usize>,
    why: String,
}

/// A rule to write: one shape, or several folded on a captured name.
struct Cand {
    /// Token position of the captured name in folded shapes.
    name_pos: Option<usize>,
    lines: Vec<usize>,
}

/// The draft of a log: TOML text (without the extract summary).
pub fn draft_log(name: &str, file: &str, raw: &[&[u8]]) -> Result<String, String> {
    let ls: Vec<L> = raw
        .iter()
        .map(|text| {
            let toks = tokens(text);
            let kinds: String = toks
                .iter()
                .map(|t| match t.kind {
                    Kind::Num => 'N',
                    Kind::Word => 'W',
                    Kind::Punct => 'P',
                })
                .collect();
            let key = format!("{}\u{0}{kinds}", shape_of(text, &toks));
            L { text, toks, key }
        })
        .collect();
    let mut index: HashMap<&str, usize> = HashMap::new();
    let mut shapes: Vec<Shape> = Vec::new();
    let mut shape_of_line = Vec::with_capacity(ls.len());
    for (i, l) in ls.iter().enumerate() {
        let s = *index.entry(l.key.as_str()).or_insert_with(|| {
            shapes.push(Shape { lines: Vec::new() });
            shapes.len() - 1
        });
        shapes[s].lines.push(i);
        shape_of_line.push(s);
    }
    let Some(step) = find_step(&ls, &shapes) else {
        return Err(format!(
            "{file}: no line repeats with a rising number (an iteration or time step counter), so there is nothing to open records with; is this a log of an iterative run? (a table of numbers gets a `table` definition)"
        ));
    };
    let opens = &shapes[step.shape].lines;
    let n_records = opens.len();
    let record_of = |li: usize| opens.partition_point(|&o| o <= li).checked_sub(1);

    // Events: lines with a keyword that are not value lines recurring in most records.
    let mut event_shapes: Vec<(usize, EventKind, usize)> = Vec::new();
    for (s, sh) in shapes.iter().enumerate() {
        if s == step.shape {
            continue;
        }
        let l = &ls[sh.lines[0]];
        if let Some((kind, at)) = event_kind(l) {
            let rare = (sh.lines.len() as f64) < 0.5 * n_records as f64;
            let end_ok = kind != EventKind::End || sh.lines.len() <= 2;
            if (!l.has_num() || rare) && end_ok {
                event_shapes.push((s, kind, at));
            }
        }
    }
    let is_event: BTreeSet<usize> = event_shapes.iter().map(|e| e.0).collect();

    // Value shapes: numbers, recurring in at least two records.
    let value_shapes: Vec<usize> = (0..shapes.len())
        .filter(|&s| s != step.shape && !is_event.contains(&s))
        .filter(|&s| ls[shapes[s].lines[0]].has_num() && shapes[s].lines.len() >= 2)
        .filter(|&s| {
            let recs: BTreeSet<Option<usize>> =
                shapes[s].lines.iter().map(|&li| record_of(li)).collect();
            recs.len() >= 2
        })
        .collect();
    let cands = fold(&ls, &shapes, &value_shapes);

    let mut w = Writer::default();
    let _ = writeln!(
        w.out,
        "# Drafted by `settle parsers draft` from {file} ({} lines read).\n# Every role is a guess, marked `guess:`: check them, then `settle parsers check {name} FILE`.",
        ls.len()
    );
    let _ = writeln!(w.out, "name = {}", toml_str(name));
    let _ = writeln!(w.out, "description = {}", toml_str(&format!("drafted from {file}")));
    let _ = writeln!(w.out, "engine = \"lines\"\n");

    // Detection: the banner (first line, when it does not recur) and the step line.
    if let Some(first) = ls.iter().position(|l| !l.toks.is_empty())
        && shapes[shape_of_line[first]].lines.len() == 1
        && ls[first].toks.iter().filter(|t| t.kind == Kind::Word).count() >= 1
        && ls[first].toks.len() >= 2
    {
        let _ = writeln!(w.out, "# The first line of the log, as a banner.");
        let _ = writeln!(
            w.out,
            "[[detect]]\npattern = {}\nweight = 10\n",
            toml_str(&banner_pattern(&ls[first]))
        );
    }
    let step_rule = step_rule(&ls, &shapes, &step, &mut w);
    let _ = writeln!(w.out, "# The step line, repeated.");
    let _ = writeln!(
        w.out,
        "[[detect]]\npattern = {}\nweight = 5\nmin_lines = 2\n",
        toml_str(&step_rule.0)
    );
    w.out.push_str(&step_rule.1);

    let first_step = opens.first().copied().unwrap_or(0);
    let recs = Records { record_of: &record_of, opens };
    for c in &cands {
        value_rules(&ls, c, &recs, first_step, &mut w);
    }
    event_rules(&ls, &shapes, &event_shapes, &mut w);
    if !event_shapes.iter().any(|e| e.1 == EventKind::End) {
        let _ = writeln!(
            w.out,
            "# No end-of-run line in the sample. Add one so a finished run is told from a stopped one:\n# [[rules]]\n# kind = \"end\"\n# name = \"finished\"\n# pattern = '^the line your solver prints when it ends'\n"
        );
    }
    Ok(w.out)
}

/// The banner's start as a pattern: its tokens up to and including its second word (at
/// most twelve), so `=====  LOAM 11.0 transient` is not just a run of `=`.
fn banner_pattern(l: &L) -> String {
    let mut words = 0;
    let mut n = 0;
    for t in l.toks.iter().take(12) {
        n += 1;
        if t.kind == Kind::Word {
            words += 1;
            if words == 2 {
                break;
            }
        }
    }
    prefix_pattern(l.text, &l.toks[..n], n)
}

/// Output text plus the fixed series names given so far (kept unique).
#[derive(Default)]
struct Writer {
    out: String,
    fixed: BTreeSet<String>,
    rule_names: BTreeSet<String>,
}

impl Writer {
    fn unique_series(&mut self, name: String, prefix: &str) -> String {
        let mut n = name.clone();
        if self.fixed.contains(&n) && !prefix.is_empty() {
            n = format!("{prefix}/{name}");
        }
        let base = n.clone();
        let mut k = 2;
        while self.fixed.contains(&n) {
            n = format!("{base}_{k}");
            k += 1;
        }
        self.fixed.insert(n.clone());
        n
    }

    fn rule_name(&mut self, want: &str) -> String {
        let base = group_name(&want.to_ascii_lowercase());
        let mut n = base.clone();
        let mut k = 2;
        while self.rule_names.contains(&n) {
            n = format!("{base}_{k}");
            k += 1;
        }
        self.rule_names.insert(n.clone());
        n
    }
}

fn find_step(ls: &[L], shapes: &[Shape]) -> Option<Step> {
    struct C {
        shape: usize,
        iteration: Option<usize>,
        time: Option<usize>,
        count: usize,
        first: usize,
        worded: bool,
    }
    let mut cands = Vec::new();
    for (s, sh) in shapes.iter().enumerate() {
        if sh.lines.len() < 3 {
            continue;
        }
        let l0 = &ls[sh.lines[0]];
        let mut iteration = None;
        let mut time = None;
        for (t, tok) in l0.toks.iter().enumerate() {
            if tok.kind != Kind::Num {
                continue;
            }
            let vals: Vec<f64> = sh.lines.iter().map(|&li| ls[li].num(t)).collect();
            let whole = sh.lines.iter().all(|&li| ls[li].whole(t));
            let rising = vals.windows(2).filter(|w| w[1] > w[0]).count();
            if (rising as f64) < 0.9 * (vals.len() - 1) as f64 {
                continue;
            }
            // A rising clock (`CPU 0.8 s`, `wall 12.1`) is not the physical time.
            let clock = (0..t).rev().find(|&i| l0.toks[i].kind == Kind::Word).is_some_and(|i| {
                let w = l0.word(i).to_ascii_lowercase();
                CLOCK_WORDS.iter().any(|c| w.contains(c))
            });
            if whole && iteration.is_none() {
                iteration = Some(t);
            } else if !whole && time.is_none() && !clock {
                time = Some(t);
            }
        }
        if iteration.is_none() && time.is_none() {
            continue;
        }
        let worded =
            l0.words().iter().any(|w| STEP_WORDS.contains(&w.to_ascii_lowercase().as_str()));
        cands.push(C {
            shape: s,
            iteration,
            time,
            count: sh.lines.len(),
            first: sh.lines[0],
            worded,
        });
    }
    let most = cands.iter().map(|c| c.count).max()?;
    cands.retain(|c| c.count * 25 >= most);
    cands.sort_by_key(|c| (!c.worded, c.iteration.is_none(), c.count, c.first));
    let c = cands.into_iter().next()?;
    let what = match (c.iteration, c.time) {
        (Some(_), Some(_)) => "an iteration number and a rising physical time",
        (Some(_), None) => "a whole number that rises (the iteration)",
        _ => "a fractional number that rises (the physical time)",
    };
    Some(Step {
        shape: c.shape,
        iteration: c.iteration,
        time: c.time,
        why: format!("{} times, with {what}", c.count),
    })
}

/// Fold value shapes that differ in one word (the variable name) into one candidate.
fn fold(ls: &[L], shapes: &[Shape], value_shapes: &[usize]) -> Vec<Cand> {
    // masked key → (word position, shapes)
    let mut groups: HashMap<String, (usize, Vec<usize>)> = HashMap::new();
    for &s in value_shapes {
        let l = &ls[shapes[s].lines[0]];
        for (p, t) in l.toks.iter().enumerate() {
            if t.kind != Kind::Word {
                continue;
            }
            let mut key = String::new();
            for (i, u) in l.toks.iter().enumerate() {
                key.push(if u.gap_before { ' ' } else { '\u{1}' });
                if i == p {
                    key.push_str("<N>");
                } else if u.kind == Kind::Num {
                    key.push('#');
                } else {
                    key.push_str(&l.word(i));
                }
                key.push('\u{2}');
            }
            groups.entry(key).or_insert_with(|| (p, Vec::new())).1.push(s);
        }
    }
    let mut order: Vec<(&String, &(usize, Vec<usize>))> =
        groups.iter().filter(|(_, (_, v))| v.len() >= 2).collect();
    order.sort_by(|a, b| b.1.1.len().cmp(&a.1.1.len()).then(a.1.0.cmp(&b.1.0)).then(a.0.cmp(b.0)));
    let mut taken: BTreeSet<usize> = BTreeSet::new();
    let mut cands = Vec::new();
    for (_, (p, members)) in order {
        let free: Vec<usize> = members.iter().copied().filter(|s| !taken.contains(s)).collect();
        if free.len() < 2 {
            continue;
        }
        taken.extend(free.iter().copied());
        cands.push((free, Some(*p)));
    }
    for &s in value_shapes {
        if !taken.contains(&s) {
            cands.push((vec![s], None));
        }
    }
    let mut out: Vec<Cand> = cands
        .into_iter()
        .map(|(shapes_in, name_pos)| {
            let mut lines: Vec<usize> =
                shapes_in.iter().flat_map(|&s| shapes[s].lines.iter().copied()).collect();
            lines.sort_unstable();
            Cand { name_pos, lines }
        })
        .collect();
    // In the order the lines first appear.
    out.sort_by_key(|c| c.lines[0]);
    out
}

/// The step rule's pattern and its TOML.
fn step_rule(ls: &[L], shapes: &[Shape], step: &Step, w: &mut Writer) -> (String, String) {
    let lines = &shapes[step.shape].lines;
    let l0 = &ls[lines[0]];
    let names = number_names(l0.text, &l0.toks, None);
    let mut parts = Vec::new();
    let mut caps: Vec<(String, Guess)> = Vec::new();
    let mut used: BTreeSet<String> =
        ["iteration", "time", "name", "message", "value"].iter().map(|s| s.to_string()).collect();
    for (t, tok) in l0.toks.iter().enumerate() {
        if tok.kind != Kind::Num {
            parts.push(Part::Literal);
        } else if Some(t) == step.iteration {
            parts.push(Part::Capture("iteration".into()));
        } else if Some(t) == step.time {
            parts.push(Part::Capture("time".into()));
        } else {
            let g = unique_group(&names[t].clone().unwrap_or_else(|| format!("v{t}")), &mut used);
            let vals: Vec<f64> = lines.iter().map(|&li| ls[li].num(t)).collect();
            let whole = lines.iter().all(|&li| ls[li].whole(t));
            // The step line's words name its one extra number (`Time/iter: 0.5 s`).
            let extra = l0.toks.iter().filter(|t| t.kind == Kind::Num).count()
                - usize::from(step.iteration.is_some())
                - usize::from(step.time.is_some());
            let label =
                if extra == 1 { format!("{} {g}", l0.words().join(" ")) } else { g.clone() };
            caps.push((g.clone(), guess(&label, &vals, whole)));
            parts.push(Part::Capture(g));
        }
    }
    let pat = pattern(l0.text, &l0.toks, &parts, false);
    let mut o = String::new();
    let _ = writeln!(o, "# Opens a record: seen {}.", step.why);
    let _ = writeln!(o, "# e.g. {}", excerpt(l0.text));
    let _ = writeln!(
        o,
        "[[rules]]\nkind = \"step\"\nname = \"{}\"\npattern = {}",
        w.rule_name("step"),
        toml_str(&pat)
    );
    for (g, gs) in &caps {
        let series = w.unique_series(g.clone(), "");
        let extra =
            if &series != g { format!("series = {}, ", toml_str(&series)) } else { String::new() };
        let _ = writeln!(
            o,
            "captures.{} = {{ {extra}role = \"{}\" }}   # guess: {}",
            toml_key(g),
            gs.role.as_str(),
            gs.reason
        );
    }
    o.push('\n');
    (pat, o)
}

fn unique_group(want: &str, used: &mut BTreeSet<String>) -> String {
    let base = group_name(want);
    let base = if ["iteration", "time", "name", "message", "value"].contains(&base.as_str()) {
        format!("{base}_v")
    } else {
        base
    };
    let mut g = base.clone();
    let mut k = 2;
    while used.contains(&g) {
        g = format!("{base}_{k}");
        k += 1;
    }
    used.insert(g.clone());
    g
}

fn excerpt(b: &[u8]) -> String {
    let s = crate::parser::series::clean_text(b);
    if s.chars().count() > 90 {
        format!("{}…", s.chars().take(90).collect::<String>())
    } else {
        s
    }
}

/// The label of a line: the nearest line above it in the same record that has words and
/// no numbers (and is not the step line), within 40 lines.
fn label_of(ls: &[L], li: usize, record_start: usize) -> Option<usize> {
    (record_start + 1..li).rev().take(40).find(|&j| {
        let l = &ls[j];
        !l.has_num() && l.toks.iter().any(|t| t.kind == Kind::Word)
    })
}
