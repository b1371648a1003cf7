//! Value rules of a log draft: one candidate (a shape, or shapes folded on a name) becomes
//! one or more `[[rules]]` (rules 5–9 in `draft.rs`).

use std::collections::{BTreeSet, HashMap};
use std::fmt::Write;

use super::{Cand, L, Writer, excerpt, label_of, unique_group};
use crate::parser::draft::emit::{Part, group_name, pattern, prefix_pattern, toml_key, toml_str};
use crate::parser::draft::names::{is_unit, number_names};
use crate::parser::draft::roles::{Guess, guess, guess_inner};
use crate::parser::shape::Kind;
use crate::record::Role;

/// Where the record-level facts of the sample are.
pub struct Records<'a> {
    pub record_of: &'a dyn Fn(usize) -> Option<usize>,
    /// Line index of each step line.
    pub opens: &'a [usize],
}

/// What one candidate's lines look like.
struct Facts {
    /// Token positions of the numbers.
    nums: Vec<usize>,
    /// The candidate's lines grouped by record.
    per_record: Vec<Vec<usize>>,
    /// The same variable several times in half the records.
    repeating: bool,
    /// The label line above each of the candidate's lines.
    labels: Vec<Option<usize>>,
    /// Label keys of blocks (empty unless one record holds a variable under two labels).
    blocks: Vec<String>,
}

fn var(ls: &[L], c: &Cand, li: usize) -> String {
    c.name_pos.map(|p| ls[li].word(p)).unwrap_or_default()
}

fn facts(ls: &[L], c: &Cand, recs: &Records) -> Facts {
    let rep = &ls[c.lines[0]];
    let nums = (0..rep.toks.len()).filter(|&t| rep.toks[t].kind == Kind::Num).collect();
    let mut per_record: Vec<Vec<usize>> = Vec::new();
    let mut last = None;
    for &li in &c.lines {
        let r = (recs.record_of)(li);
        if r != last || per_record.is_empty() {
            per_record.push(Vec::new());
            last = r;
        }
        if let Some(cur) = per_record.last_mut() {
            cur.push(li);
        }
    }
    let twice = |g: &Vec<usize>| {
        let mut names: Vec<String> = g.iter().map(|&li| var(ls, c, li)).collect();
        names.sort();
        names.windows(2).any(|w| w[0] == w[1])
    };
    let repeating = per_record.iter().filter(|g| twice(g)).count() * 2 >= per_record.len().max(1);
    let start_of = |li: usize| (recs.record_of)(li).map_or(0, |r| recs.opens[r]);
    let labels: Vec<Option<usize>> =
        c.lines.iter().map(|&li| label_of(ls, li, start_of(li))).collect();
    let key = |j: Option<usize>| j.map(|j| ls[j].key.clone());
    let mut blocks: Vec<String> = Vec::new();
    if repeating {
        let split = per_record.iter().any(|g| {
            let mut seen: HashMap<String, BTreeSet<Option<String>>> = HashMap::new();
            for &li in g {
                let i = c.lines.binary_search(&li).unwrap_or(0);
                seen.entry(var(ls, c, li)).or_default().insert(key(labels[i]));
            }
            seen.values().any(|s| s.len() > 1)
        });
        if split {
            for l in &labels {
                if let Some(k) = key(*l)
                    && !blocks.contains(&k)
                {
                    blocks.push(k);
                }
            }
        }
    }
    Facts { nums, per_record, repeating, labels, blocks }
}

/// Names for the numbers from a header line right above the candidate's first line in
/// four records of five, when its words match the numbers (a small table per record).
fn header_names(ls: &[L], c: &Cand, f: &Facts) -> Option<Vec<String>> {
    let mut above: HashMap<&str, usize> = HashMap::new();
    for g in &f.per_record {
        let li = g[0];
        if li > 0 && !ls[li - 1].has_num() && ls[li - 1].toks.iter().any(|t| t.kind == Kind::Word) {
            *above.entry(ls[li - 1].key.as_str()).or_default() += 1;
        }
    }
    let (key, n) = above.into_iter().max_by_key(|(_, n)| *n)?;
    if n * 5 < f.per_record.len() * 4 {
        return None;
    }
    let h = c.lines.iter().map(|&li| li - 1).find(|&j| ls[j].key == key)?;
    let words = ls[h].words();
    if c.name_pos.is_some() && words.len() == f.nums.len() + 1 {
        Some(words[1..].to_vec())
    } else if words.len() == f.nums.len() {
        Some(words)
    } else {
        None
    }
}

/// Whole numbers counting 1, 2, 3… within each record (an inner-iteration counter).
fn is_counter(ls: &[L], c: &Cand, f: &Facts, t: usize) -> bool {
    f.repeating
        && c.lines.iter().all(|&li| ls[li].whole(t))
        && f.per_record.iter().all(|g| {
            let mut by_var: HashMap<String, Vec<f64>> = HashMap::new();
            for &li in g {
                by_var.entry(var(ls, c, li)).or_default().push(ls[li].num(t));
            }
            by_var.values().all(|v| v.windows(2).all(|w| w[1] == w[0] + 1.0))
        })
}

/// Variables of the given lines grouped by the roles guessed for their captures.
type RoleGroups = Vec<(Vec<Role>, Vec<String>, Vec<Guess>)>;

fn roles(
    ls: &[L],
    c: &Cand,
    lines: &[usize],
    groups: &[(usize, String)],
    inner: bool,
    recs: &Records,
) -> RoleGroups {
    let rep = &ls[c.lines[0]];
    let mut vars: Vec<String> = Vec::new();
    for &li in lines {
        let n = var(ls, c, li);
        if !vars.contains(&n) {
            vars.push(n);
        }
    }
    let mut out: RoleGroups = Vec::new();
    for v in &vars {
        let mine: Vec<usize> = lines.iter().copied().filter(|&li| &var(ls, c, li) == v).collect();
        let guesses: Vec<Guess> = groups
            .iter()
            .map(|(t, g)| {
                let whole = mine.iter().all(|&li| ls[li].whole(*t));
                // A line of its own is named by all its words (`converged in # inner
                // iterations`); a folded one by the variable and the capture.
                // A line with one number is about that number: all its words name it; on
                // a line with several, the capture's own name and the line's first word.
                let label = if c.name_pos.is_some() {
                    format!("{v} {g}")
                } else if groups.len() == 1 {
                    format!("{} {g}", rep.words().join(" "))
                } else {
                    format!("{} {g}", rep.words().first().cloned().unwrap_or_default())
                };
                if !inner {
                    let vals: Vec<f64> = mine.iter().map(|&li| ls[li].num(*t)).collect();
                    return guess(&label, &vals, whole);
                }
                let mut per: Vec<Vec<f64>> = Vec::new();
                let mut last = None;
                for &li in &mine {
                    let r = (recs.record_of)(li);
                    if r != last || per.is_empty() {
                        per.push(Vec::new());
                        last = r;
                    }
                    if let Some(p) = per.last_mut() {
                        p.push(ls[li].num(*t));
                    }
                }
                guess_inner(&label, &per, whole)
            })
            .collect();
        let rs: Vec<Role> = guesses.iter().map(|g| g.role).collect();
        match out.iter_mut().find(|(r, ..)| *r == rs) {
            Some((_, vs, _)) => vs.push(v.clone()),
            None => out.push((rs, vec![v.clone()], guesses)),
        }
    }
    out
}

/// Write the rules of one candidate.
pub fn value_rules(ls: &[L], c: &Cand, recs: &Records, first_step: usize, w: &mut Writer) {
    let rep = &ls[c.lines[0]];
    let f = facts(ls, c, recs);
    let from_header = header_names(ls, c, &f);
    let names = number_names(rep.text, &rep.toks, c.name_pos);
    let mut used: BTreeSet<String> = BTreeSet::new();
    let mut groups: Vec<(usize, String)> = Vec::new();
    for (k, &t) in f.nums.iter().enumerate() {
        if is_counter(ls, c, &f, t) {
            continue;
        }
        let want = from_header
            .as_ref()
            .and_then(|h| h.get(k).cloned())
            .or_else(|| names[t].clone())
            .unwrap_or_else(|| format!("v{}", k + 1));
        groups.push((t, unique_group(&want, &mut used)));
    }
    if groups.is_empty() {
        return;
    }
    let n_records = recs.opens.len();
    let attach_next = c.lines[0] < first_step && c.lines.len() + 1 >= n_records;
    let key = |j: Option<usize>| j.map(|j| ls[j].key.clone());
    // Each block: its label line and the candidate's lines under it.
    let blocks: Vec<(Option<usize>, Vec<usize>)> = if f.blocks.is_empty() {
        // A generic line (no words of its own) under a steady label: limit it to that label.
        let own_words =
            rep.toks.iter().enumerate().any(|(i, t)| {
                t.kind == Kind::Word && Some(i) != c.name_pos && !is_unit(&rep.word(i))
            });
        let first = f.labels[0];
        let steady = first.is_some()
            && f.labels.iter().filter(|l| key(**l) == key(first)).count() * 10
                >= f.labels.len() * 9;
        vec![(if !own_words && steady { first } else { None }, c.lines.clone())]
    } else {
        f.blocks
            .iter()
            .map(|k| {
                let label = f.labels.iter().copied().flatten().find(|&j| &ls[j].key == k);
                let lines = c
                    .lines
                    .iter()
                    .zip(&f.labels)
                    .filter(|(_, l)| key(**l).as_ref() == Some(k))
                    .map(|(&li, _)| li)
                    .collect();
                (label, lines)
            })
            .collect()
    };
    let in_blocks = !f.blocks.is_empty();
    for (label, lines) in &blocks {
        let label_word = label.map(|j| {
            let l = &ls[j];
            (0..l.toks.len())
                .find(|&i| l.toks[i].kind == Kind::Word)
                .map(|i| group_name(&l.word(i)))
                .unwrap_or_default()
        });
        let inner = f.repeating && !in_blocks;
        let by_roles = roles(ls, c, lines, &groups, inner, recs);
        for (rs, vs, guesses) in &by_roles {
            let spec = RuleSpec {
                c,
                rep,
                groups: &groups,
                roles: rs,
                vars: vs,
                guesses,
                split: by_roles.len() > 1,
                label: *label,
                label_word: label_word.as_deref(),
                block: in_blocks,
                inner,
                attach_next,
                lines: lines.len(),
            };
            write_rule(ls, &spec, w);
        }
    }
}

/// Everything one written rule needs.
struct RuleSpec<'a> {
    c: &'a Cand,
    rep: &'a L<'a>,
    groups: &'a [(usize, String)],
    roles: &'a [Role],
    vars: &'a [String],
    guesses: &'a [Guess],
    /// The variables of the candidate are split over several rules by role.
    split: bool,
    label: Option<usize>,
    label_word: Option<&'a str>,
    block: bool,
    inner: bool,
    attach_next: bool,
    lines: usize,
}

fn write_rule(ls: &[L], s: &RuleSpec, w: &mut Writer) {
    let (c, rep, groups) = (s.c, s.rep, s.groups);
    let folded = c.name_pos.is_some();
    // The capture that becomes the series `{name}` (or the line's own name) itself.
    let main = if folded {
        s.roles.iter().position(|r| *r == Role::Residual).or((groups.len() == 1).then_some(0))
    } else {
        (groups.len() == 1).then_some(0)
    };
    let mut parts: Vec<Part> = Vec::new();
    for (t, tok) in rep.toks.iter().enumerate() {
        if Some(t) == c.name_pos {
            parts.push(Part::Name(s.split.then(|| s.vars.to_vec())));
        } else if tok.kind == Kind::Num {
            match groups.iter().position(|(gt, _)| *gt == t) {
                Some(k) if Some(k) == main => parts.push(Part::Capture("value".into())),
                Some(k) => parts.push(Part::Capture(groups[k].1.clone())),
                None => parts.push(Part::Skip),
            }
        } else {
            parts.push(Part::Literal);
        }
    }
    let pat = pattern(rep.text, &rep.toks, &parts, true);
    let base = match (s.label_word, folded) {
        (Some(lw), _) if s.block => format!("{lw}_{}", rep_word(rep, c.name_pos)),
        (_, true) if s.split => s.vars.first().cloned().unwrap_or_default(),
        _ => rep_word(rep, c.name_pos),
    };
    let rule_name = w.rule_name(&base);
    let what = if folded {
        let shown: Vec<String> = s.vars.iter().take(8).cloned().collect();
        format!(
            "{} name{} share this line shape ({}): one rule, the name captured",
            s.vars.len(),
            if s.vars.len() == 1 { "" } else { "s" },
            shown.join(", ")
        )
    } else {
        "a line with numbers, repeated".to_string()
    };
    let o = &mut w.out;
    let _ = writeln!(o, "# {what}; {} lines.", s.lines);
    let _ = writeln!(o, "# e.g. {}", excerpt(rep.text));
    let _ = writeln!(
        o,
        "[[rules]]\nkind = \"value\"\nname = \"{rule_name}\"\npattern = {}",
        toml_str(&pat)
    );
    if pat.starts_with("^\\s*(?P<name>")
        && let Some(lit) = literal_word(rep, c.name_pos)
    {
        let _ = writeln!(o, "literal = {}", toml_str(&lit));
    }
    if let Some(j) = s.label {
        let lp = prefix_pattern(ls[j].text, &ls[j].toks, 6);
        let _ = writeln!(o, "after = {}   # the label line above these values", toml_str(&lp));
    }
    if s.block {
        let _ = writeln!(
            o,
            "repeat = \"first\"   # the same line follows other labels later in the record"
        );
    } else if s.inner {
        let _ = writeln!(
            o,
            "repeat = \"all\"   # printed several times per record (inner iterations): keep every value"
        );
    }
    if s.attach_next {
        let _ = writeln!(o, "attach = \"next\"   # printed before the step line it belongs to");
    }
    let prefix = match (s.label_word, s.block) {
        (Some(lw), true) => format!("{lw}/"),
        _ => String::new(),
    };
    let label = line_label(rep);
    for (k, (_, g)) in groups.iter().enumerate() {
        let gs = &s.guesses[k];
        if Some(k) == main {
            let series = if folded {
                format!("{prefix}{{name}}")
            } else {
                let lw = label.clone().unwrap_or_else(|| g.clone());
                w.unique_series(format!("{prefix}{lw}"), "")
            };
            if series != "{name}" {
                let _ = writeln!(w.out, "series = {}", toml_str(&series));
            }
            let _ = writeln!(w.out, "role = \"{}\"   # guess: {}", gs.role.as_str(), gs.reason);
            continue;
        }
        let series = if folded {
            format!("{prefix}{{name}}/{g}")
        } else {
            let generic =
                ["mean", "max", "min", "avg", "total", "sum", "rms", "value", "x", "y", "z"]
                    .iter()
                    .any(|x| g.eq_ignore_ascii_case(x));
            let base = match label.as_ref().filter(|_| generic) {
                Some(lw) => format!("{lw}/{g}"),
                None => g.clone(),
            };
            w.unique_series(format!("{prefix}{base}"), &label.clone().unwrap_or_default())
        };
        let extra =
            if series != *g { format!("series = {}, ", toml_str(&series)) } else { String::new() };
        let _ = writeln!(
            w.out,
            "captures.{} = {{ {extra}role = \"{}\" }}   # guess: {}",
            toml_key(g),
            gs.role.as_str(),
            gs.reason
        );
    }
    w.out.push('\n');
}

/// The first word of a line, as a series label (`continuity`, `wall`).
fn line_label(l: &L) -> Option<String> {
    (0..l.toks.len())
        .find(|&i| l.toks[i].kind == Kind::Word)
        .map(|i| l.word(i))
        .filter(|w| !is_unit(w))
}

/// A word naming a rule: the first word that is not the captured name.
fn rep_word(l: &L, name_pos: Option<usize>) -> String {
    (0..l.toks.len())
        .find(|&i| l.toks[i].kind == Kind::Word && Some(i) != name_pos)
        .map(|i| l.word(i))
        .unwrap_or_else(|| if name_pos.is_some() { "variable".into() } else { "value".into() })
}

/// A literal every line of the rule contains, for a pattern that starts with the name:
/// the longest fixed word.
fn literal_word(l: &L, name_pos: Option<usize>) -> Option<String> {
    (0..l.toks.len())
        .filter(|&i| l.toks[i].kind == Kind::Word && Some(i) != name_pos)
        .map(|i| l.word(i))
        .max_by_key(String::len)
        .filter(|w| w.len() >= 2)
}
