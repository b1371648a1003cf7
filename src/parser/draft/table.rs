//! Drafting a `table` definition for a delimited monitor file (rules in `draft.rs`).

use std::fmt::Write;

use super::emit::{prefix_pattern, toml_str};
use super::roles::{Guess, guess};
use crate::parser::number::{parse_integer, parse_number};
use crate::parser::shape::tokens;
use crate::parser::table::cells::{Cell, CellKind, Delimiter, components, split};
use crate::parser::table::{header_cell, header_names};
use crate::parser::{Definition, Origin};
use crate::record::Role;

/// How the lines of a file split as a table.
pub struct TableShape {
    pub delimiter: Delimiter,
    pub word: &'static str,
    pub comments: Vec<String>,
}

const COMMENT_PREFIXES: &[&str] = &["#", "%", "//", "!"];

fn comment_of(line: &[u8]) -> Option<&'static str> {
    let t = line.trim_ascii_start();
    COMMENT_PREFIXES.iter().copied().find(|p| t.starts_with(p.as_bytes()))
}

fn numeric(cell: &Cell, line: &[u8]) -> bool {
    match cell.kind {
        CellKind::Vector => components(cell.bytes(line)).any(|c| parse_number(c).is_some()),
        _ => parse_number(cell.bytes(line)).is_some(),
    }
}

/// Does the sample read as a table? Most of its lines (three fifths of those that are not
/// blank or comments) split, with one delimiter, into the same number of cells (at least
/// two) with a number in the first.
pub fn table_shape(lines: &[&[u8]]) -> Option<TableShape> {
    let body: Vec<&[u8]> = lines
        .iter()
        .copied()
        .filter(|l| !l.trim_ascii().is_empty() && comment_of(l).is_none())
        .collect();
    let mut comments: Vec<String> = Vec::new();
    for l in lines {
        if let Some(p) = comment_of(l)
            && !comments.iter().any(|c| c == p)
        {
            comments.push(p.to_string());
        }
    }
    if comments.is_empty() {
        comments.push("#".into());
    }
    let tabs = lines.iter().any(|l| l.contains(&b'\t'));
    let mut options: Vec<(Delimiter, &'static str)> = Vec::new();
    if tabs {
        options.push((Delimiter::Byte(b'\t'), "tab"));
    }
    options.extend([
        (Delimiter::Byte(b','), "comma"),
        (Delimiter::Byte(b';'), "semicolon"),
        (Delimiter::Whitespace, "whitespace"),
    ]);
    let mut cells = Vec::new();
    for (delimiter, word) in options {
        let mut widths: Vec<usize> = Vec::new();
        for l in &body {
            split(l, delimiter, &mut cells);
            if cells.len() >= 2 && cells.first().is_some_and(|c| numeric(c, l)) {
                widths.push(cells.len());
            }
        }
        if widths.len() < 3 || (widths.len() as f64) < 0.6 * body.len() as f64 {
            continue;
        }
        let mut sorted = widths.clone();
        sorted.sort_unstable();
        let mode = sorted
            .chunk_by(|a, b| a == b)
            .max_by_key(|c| c.len())
            .map(|c| (c[0], c.len()))
            .unwrap_or((0, 0));
        if mode.0 >= 2 && mode.1 * 5 >= widths.len() * 4 {
            return Some(TableShape { delimiter, word, comments });
        }
    }
    None
}

/// The header line: the last line above the first data row that splits into cells and
/// holds no number in its first cell (comment prefix removed).
fn header(lines: &[&[u8]], shape: &TableShape) -> Option<(usize, Vec<Vec<u8>>)> {
    let mut cells = Vec::new();
    let mut last = None;
    for (i, l) in lines.iter().enumerate() {
        let t = l.trim_ascii_start();
        let body = match comment_of(l) {
            Some(p) => &t[p.len()..],
            None => t,
        };
        split(body, shape.delimiter, &mut cells);
        if cells.is_empty() {
            continue;
        }
        if comment_of(l).is_none() && numeric(&cells[0], body) {
            return last;
        }
        if cells.len() >= 2 {
            last = Some((i, cells.iter().map(|c| header_cell(c, body)).collect()));
        }
    }
    None
}

/// The draft of a delimited file.
pub fn draft_table(
    name: &str,
    file: &str,
    lines: &[&[u8]],
    shape: &TableShape,
) -> Result<String, String> {
    let head = header(lines, shape);
    let (names, listed) = match &head {
        Some((_, raw)) => header_names(raw),
        None => (Vec::new(), Vec::new()),
    };
    // The first column's numbers decide the index.
    let mut cells = Vec::new();
    let mut first: Vec<(f64, bool)> = Vec::new();
    for l in lines {
        if comment_of(l).is_some() {
            continue;
        }
        split(l, shape.delimiter, &mut cells);
        if let Some(c) = cells.first()
            && cells.len() >= 2
            && let Some(v) = parse_number(c.bytes(l))
        {
            let b = c.bytes(l);
            let whole = parse_integer(b).is_some()
                && !b.iter().any(|x| matches!(x, b'.' | b'e' | b'E' | b'd' | b'D'));
            first.push((v, whole));
        }
    }
    let rising = first.windows(2).filter(|w| w[1].0 > w[0].0).count() as f64
        >= 0.9 * first.len().saturating_sub(1) as f64;
    let whole = first.iter().all(|f| f.1);
    let col1 = names.first().cloned().unwrap_or_else(|| "col1".into());
    let index = match (rising, whole) {
        (true, true) => Some(("iteration", "whole numbers that rise (the iteration)")),
        (true, false) => Some(("time", "fractional numbers that rise (the physical time)")),
        _ => None,
    };

    let mut o = String::new();
    let _ = writeln!(
        o,
        "# Drafted by `settle parsers draft` from {file} ({} lines read).\n# Every role is a guess, marked `guess:`: check them, then `settle parsers check {name} FILE`.",
        lines.len()
    );
    let _ = writeln!(o, "name = {}", toml_str(name));
    let _ = writeln!(o, "description = {}", toml_str(&format!("drafted from {file}")));
    let _ = writeln!(o, "engine = \"table\"\n");
    if let Some((i, _)) = &head {
        let l = lines[*i];
        let _ = writeln!(
            o,
            "# The header line.\n[[detect]]\npattern = {}\nweight = 6\n",
            toml_str(&prefix_pattern(l, &tokens(l), 6))
        );
    } else {
        let _ = writeln!(
            o,
            "# No header line: columns are named col1, col2, …; name them with `columns = [...]`.\n"
        );
    }
    let _ = writeln!(o, "[table]\ndelimiter = \"{}\"", shape.word);
    let comments: Vec<String> = shape.comments.iter().map(|c| toml_str(c)).collect();
    let _ = writeln!(o, "comment = [{}]", comments.join(", "));
    match index {
        Some((key, why)) => {
            let _ = writeln!(o, "{key} = 1   # column `{col1}`: {why}");
        }
        None => {
            let _ = writeln!(
                o,
                "auto_index = false   # the first column does not rise: rows are numbered"
            );
        }
    }
    let base = o.clone();

    // Read the sample with what is known so far, then guess each column's role.
    let probe = format!("{base}residuals = []\n");
    let def = Definition::from_text(&probe, Origin::File("<draft>".into()), file, name)
        .map_err(|e| format!("drafting {file}: {e}"))?;
    let exam = crate::parser::check::examine_series(&def, lines);
    let mut residuals: Vec<(String, Guess)> = Vec::new();
    let mut other: Vec<(Role, String, Guess)> = Vec::new();
    let skip = if index.is_some() { 1 } else { 0 };
    for (c, n) in names.iter().enumerate().skip(skip) {
        // The series of this column: itself, its listed names, or its vector components.
        let key = listed.get(c).and_then(|l| l.first()).cloned().unwrap_or_else(|| n.clone());
        let values = exam
            .iter()
            .find(|(s, ..)| {
                *s == key || s.starts_with(&format!("{n}_")) || s.starts_with(&format!("{n}["))
            })
            .map(|(_, v, w)| (v.clone(), *w));
        let Some((values, whole)) = values else { continue };
        let g = guess(&key, &values, whole);
        match g.role {
            Role::Residual => residuals.push((key, g)),
            Role::Monitor => {}
            r => other.push((r, key, g)),
        }
    }
    if residuals.is_empty() {
        let _ = writeln!(o, "residuals = []   # guess: no column falls by decades");
    } else {
        let _ = writeln!(o, "residuals = [");
        for (n, g) in &residuals {
            let _ = writeln!(o, "    {},   # guess: {}", toml_str(n), g.reason);
        }
        let _ = writeln!(o, "]");
    }
    let _ = writeln!(
        o,
        "default_role = \"monitor\"   # guess: every other column is a quantity to settle"
    );
    for (role, n, g) in &other {
        let _ = writeln!(
            o,
            "\n[[table.roles]]\ncolumns = [{}]\nrole = \"{}\"   # guess: {}",
            toml_str(n),
            role.as_str(),
            g.reason
        );
    }
    Ok(o)
}
