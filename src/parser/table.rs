//! The `table` engine: delimited columns, one record per data row.
//!
//! How a line is classified:
//!
//! * blank → ignored; a comment line (after optional blanks, one of the comment prefixes) is
//!   looked at only as a possible header (`# it res_p Cd` is a common header form);
//! * a *data row* has a number in its index column (iteration or time), or, when there is no
//!   index column, numbers in more than half of its cells;
//! * any other line with at least two cells is a *header candidate*. It becomes the header
//!   only when a data row with the same number of cells arrives, so a banner or a warning
//!   printed among the rows never replaces the real header. The current header is kept while
//!   rows fit it; a copy of it printed again later (every N lines) is recognised and counted
//!   as used, never as data;
//! * a data row whose width fits neither the header nor any candidate is skipped with the
//!   reason.
//!
//! With no header at all (`header = "none"`, or numeric rows from the first line), columns
//! are named `col1`, `col2`, … unless the definition lists `columns`.
//!
//! Most lines of a large table are plain data rows of the current header; `fast.rs` reads
//! those in one pass (cells found and numbers read in the same scan, the index read once).
//! Anything else, or any doubt, goes through the general classification below. Like the
//! `lines` engine, a parser can start in the middle of a file ([`TableParser::speculative`])
//! and hand over at the join ([`TableParser::join`]), so a large file is read on several
//! cores.

pub mod cells;
pub mod compile;
mod fast;
mod join;

use std::collections::VecDeque;
use std::sync::Arc;

use cells::{Cell, CellKind, Delimiter, components, split};

use super::number::{parse_integer, parse_number};
use super::series::{LineUse, MAX_SERIES, SeriesTable, Tally, clean_text, excerpt};
use crate::glob;
use crate::record::{LineStats, RecordRef, Role, SeriesId, Sink};

/// Header candidates remembered while waiting for a row that fits one.
const MAX_CANDIDATES: usize = 8;

/// A column given by 0-based position or by name.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Column {
    Position(usize),
    Name(String),
}

/// How vector components are named.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VectorNames {
    /// `name_x`, `name_y`, `name_z` when the column's first vector has at most three
    /// components, else `name[i]`.
    Xyz,
    /// Always `name[0]`, `name[1]`, …
    Index,
}

/// A validated `table` definition.
#[derive(Debug, Clone)]
pub struct TableProgram {
    pub delimiter: Delimiter,
    pub comments: Vec<Vec<u8>>,
    /// Look for header lines (`header = "auto"`); `false` for `header = "none"`.
    pub header_auto: bool,
    /// Fixed column names (`columns = [...]`).
    pub columns: Option<Vec<String>>,
    pub iteration: Option<Column>,
    pub time: Option<Column>,
    /// With neither `iteration` nor `time`, use the first column (a time column when named
    /// like `time*` or `t`, else the iteration).
    pub auto_index: bool,
    pub residuals: Vec<String>,
    pub ignore: Vec<String>,
    pub roles: Vec<(Vec<String>, Role)>,
    pub default_role: Role,
    pub case_sensitive: bool,
    pub vectors: VectorNames,
}

impl TableProgram {
    fn glob(&self, pattern: &str, name: &str) -> bool {
        if self.case_sensitive {
            glob::matches(pattern, name)
        } else {
            glob::matches_ignore_case(pattern, name)
        }
    }

    fn same_name(&self, a: &str, b: &str) -> bool {
        if self.case_sensitive { a == b } else { a.eq_ignore_ascii_case(b) }
    }

    /// Role of a value column, or `None` when ignored.
    fn role_of(&self, name: &str) -> Option<Role> {
        if self.ignore.iter().any(|g| self.glob(g, name)) {
            return None;
        }
        if let Some((_, role)) =
            self.roles.iter().find(|(gs, _)| gs.iter().any(|g| self.glob(g, name)))
        {
            return Some(*role);
        }
        if self.residuals.iter().any(|g| self.glob(g, name)) {
            return Some(Role::Residual);
        }
        Some(self.default_role)
    }

    /// Index column position known before any header is seen.
    fn index_position_hint(&self) -> Option<usize> {
        match (&self.iteration, &self.time) {
            (Some(Column::Position(p)), _) | (None, Some(Column::Position(p))) => Some(*p),
            (None, None) if self.auto_index => Some(0),
            _ => None,
        }
    }
}

#[derive(Debug, Clone)]
enum Col {
    Iteration,
    Time,
    Ignored,
    Value {
        name: String,
        role: Role,
        scalar: Option<SeriesId>,
        comps: Vec<SeriesId>,
        /// Components named `_x/_y/_z`; decided from the first vector seen in the column.
        xyz: bool,
        /// Component names listed by a grouped header cell (`(total_x total_y total_z)`).
        listed: Vec<String>,
    },
}

#[derive(Debug, Clone)]
struct Header {
    /// The cell bytes as printed, to recognise the header when it is printed again.
    raw: Vec<Vec<u8>>,
    cols: Vec<Col>,
    /// Position of the column that tells data rows from other lines.
    index: Option<usize>,
    /// A configured index column the header lacks; reported once, on the next row.
    problem: Option<String>,
}

/// A failure on the current row, formatted only if reported.
#[derive(Debug, Clone)]
enum Failure {
    Width { cells: usize, header: usize },
    NotANumber { column: usize, span: (usize, usize) },
    BadIteration { span: (usize, usize) },
    MissingIndex(String),
    TooManySeries,
}

/// A running `table` parser for one source.
#[derive(Debug, Clone)]
pub struct TableParser {
    prog: Arc<TableProgram>,
    line_no: u64,
    tally: Tally,
    cells: Vec<Cell>,
    header: Option<Header>,
    candidates: VecDeque<Vec<Vec<u8>>>,
    series: SeriesTable,
    /// The values of the row being read (reused; lent to the sink).
    values: Vec<(SeriesId, f64)>,
    /// For a parser made by [`TableParser::speculative`]: the header state it assumed.
    assumed: Option<Box<join::Assumed>>,
}

impl TableParser {
    pub fn new(prog: Arc<TableProgram>) -> TableParser {
        let mut p = TableParser {
            prog,
            line_no: 0,
            tally: Tally::default(),
            cells: Vec::new(),
            header: None,
            candidates: VecDeque::new(),
            series: SeriesTable::default(),
            values: Vec::new(),
            assumed: None,
        };
        if let Some(cols) = p.prog.columns.clone() {
            let raw: Vec<Vec<u8>> = cols.into_iter().map(String::into_bytes).collect();
            p.header = Some(p.build_header(raw));
        }
        p
    }

    pub fn stats(&self) -> LineStats {
        self.tally.stats
    }

    /// Table rows are complete when read; nothing is held back.
    pub fn finish(&mut self, _out: &mut dyn Sink) {}

    pub fn feed(&mut self, raw: &[u8], out: &mut dyn Sink) {
        self.line_no += 1;
        self.tally.stats.lines += 1;
        let line = raw.strip_suffix(b"\r").unwrap_or(raw);
        if self.fast_row(line, out) {
            self.tally.stats.used += 1;
            return;
        }
        let (used, failure) = self.classify(line, out);
        match used {
            LineUse::Ignored => self.tally.stats.ignored += 1,
            LineUse::Used => self.tally.stats.used += 1,
            LineUse::Skipped => {
                let failure = failure.as_ref();
                let header = self.header.as_ref();
                self.tally.skip(self.line_no, out, || describe(line, failure, header));
            }
        }
    }

    /// Feed every line of `block`: complete lines, each ending in `\n`.
    pub fn feed_block(&mut self, block: &[u8], out: &mut dyn Sink) {
        crate::follow::lines::each_line(block, |line| self.feed(line, out));
    }

    fn classify(&mut self, line: &[u8], out: &mut dyn Sink) -> (LineUse, Option<Failure>) {
        let lead = line.iter().take_while(|b| b.is_ascii_whitespace()).count();
        let body = &line[lead..];
        if body.is_empty() {
            return (LineUse::Ignored, None);
        }
        let comment = self.prog.comments.iter().find(|c| body.starts_with(c)).map(Vec::len);
        let text = match comment {
            Some(n) => &body[n..],
            None => line,
        };
        let offset = line.len() - text.len();
        split(text, self.prog.delimiter, &mut self.cells);
        // Spans are relative to `text`; shift them to the whole line.
        for c in &mut self.cells {
            c.start += offset;
            c.end += offset;
        }
        if self.cells.is_empty() {
            return (LineUse::Ignored, None);
        }
        let data = self.is_data(line);
        if data && comment.is_none() {
            return self.row(line, out);
        }
        if data || !self.prog.header_auto || self.cells.len() < 2 {
            return (LineUse::Ignored, None);
        }
        if let Some(h) = &self.header
            && h.raw.len() == self.cells.len()
            && h.raw.iter().zip(&self.cells).all(|(r, c)| *r == header_cell(c, line))
        {
            return (LineUse::Used, None);
        }
        if self.prog.columns.is_none() {
            for candidate in header_candidates(&self.cells, line) {
                if self.candidates.len() == MAX_CANDIDATES {
                    self.candidates.pop_front();
                }
                self.candidates.push_back(candidate);
            }
        }
        (LineUse::Ignored, None)
    }

    fn is_data(&self, line: &[u8]) -> bool {
        let numeric = |c: &Cell| match c.kind {
            CellKind::Vector => components(c.bytes(line)).any(|v| parse_number(v).is_some()),
            _ => parse_number(c.bytes(line)).is_some(),
        };
        let index = match &self.header {
            Some(h) => h.index,
            None => self.prog.index_position_hint(),
        };
        match index {
            Some(p) => self.cells.get(p).is_some_and(|c| c.kind != CellKind::Vector && numeric(c)),
            None => 2 * self.cells.iter().filter(|c| numeric(c)).count() > self.cells.len(),
        }
    }

    fn row(&mut self, line: &[u8], out: &mut dyn Sink) -> (LineUse, Option<Failure>) {
        let width = self.cells.len();
        let mut failure = None;
        let fits = self.header.as_ref().is_some_and(|h| h.cols.len() == width);
        if !fits {
            let found = self.candidates.iter().rposition(|c| c.len() == width);
            let raw = match found {
                Some(i) => self.candidates.remove(i),
                None if self.header.is_none() => {
                    Some((1..=width).map(|i| format!("col{i}").into_bytes()).collect())
                }
                None => None,
            };
            let Some(raw) = raw else {
                let header = self.header.as_ref().map_or(0, |h| h.cols.len());
                return (LineUse::Skipped, Some(Failure::Width { cells: width, header }));
            };
            self.header = Some(self.build_header(raw));
            self.candidates.clear();
        }
        let Some(header) = self.header.as_mut() else {
            return (LineUse::Ignored, None);
        };
        if let Some(what) = header.problem.take() {
            failure = Some(Failure::MissingIndex(what));
        }

        let mut values = std::mem::take(&mut self.values);
        values.clear();
        let (mut iteration, mut time) = (None, None);
        for (ci, cell) in self.cells.iter().enumerate() {
            let bytes = cell.bytes(line);
            match &mut header.cols[ci] {
                Col::Ignored => {}
                Col::Iteration => match parse_integer(bytes) {
                    Some(it) => iteration = Some(it),
                    None => {
                        failure
                            .get_or_insert(Failure::BadIteration { span: (cell.start, cell.end) });
                    }
                },
                Col::Time => match parse_number(bytes) {
                    Some(t) => time = Some(t),
                    None => {
                        failure.get_or_insert(Failure::NotANumber {
                            column: ci,
                            span: (cell.start, cell.end),
                        });
                    }
                },
                Col::Value { name, role, scalar, comps, xyz, listed } => {
                    if cell.kind == CellKind::Vector {
                        if comps.is_empty() {
                            *xyz = self.prog.vectors == VectorNames::Xyz
                                && components(bytes).count() <= 3;
                        }
                        for (k, comp) in components(bytes).enumerate() {
                            let Some(v) = parse_number(comp) else {
                                failure.get_or_insert(Failure::NotANumber {
                                    column: ci,
                                    span: (cell.start, cell.end),
                                });
                                continue;
                            };
                            // Components before `k` may have failed to parse; name them too.
                            while comps.len() <= k {
                                let cname = listed
                                    .get(comps.len())
                                    .cloned()
                                    .unwrap_or_else(|| component_name(name, comps.len(), *xyz));
                                match self.series.intern(&cname, *role, out) {
                                    Some(id) => comps.push(id),
                                    None => break,
                                }
                            }
                            let Some(&id) = comps.get(k) else {
                                failure.get_or_insert(Failure::TooManySeries);
                                break;
                            };
                            values.push((id, v));
                        }
                        continue;
                    }
                    if bytes.trim_ascii().is_empty() {
                        continue; // an empty cell is a missing value, not an error
                    }
                    let Some(v) = parse_number(bytes) else {
                        failure.get_or_insert(Failure::NotANumber {
                            column: ci,
                            span: (cell.start, cell.end),
                        });
                        continue;
                    };
                    let id = match scalar {
                        Some(id) => *id,
                        None => match self.series.intern(name, *role, out) {
                            Some(id) => {
                                *scalar = Some(id);
                                id
                            }
                            None => {
                                failure.get_or_insert(Failure::TooManySeries);
                                continue;
                            }
                        },
                    };
                    values.push((id, v));
                }
            }
        }
        out.record(RecordRef { iteration, time, values: &values, line: self.line_no });
        self.values = values;
        match failure {
            None => (LineUse::Used, None),
            Some(f) => (LineUse::Skipped, Some(f)),
        }
    }

    /// Resolve names, index columns and roles for a new header.
    fn build_header(&self, raw: Vec<Vec<u8>>) -> Header {
        let prog = &self.prog;
        let (names, listed) = header_names(&raw);
        let find = |c: &Column| -> Option<usize> {
            match c {
                Column::Position(p) => (*p < names.len()).then_some(*p),
                Column::Name(n) => names.iter().position(|m| prog.same_name(m, n)),
            }
        };
        let mut iter_col = prog.iteration.as_ref().and_then(find);
        let mut time_col = prog.time.as_ref().and_then(find);
        if prog.iteration.is_none() && prog.time.is_none() && prog.auto_index && !names.is_empty() {
            let first = &names[0];
            if prog.glob("time*", first) || prog.same_name(first, "t") {
                time_col = Some(0);
            } else {
                iter_col = Some(0);
            }
        }
        let cols = names
            .iter()
            .enumerate()
            .map(|(i, n)| {
                if Some(i) == iter_col {
                    Col::Iteration
                } else if Some(i) == time_col {
                    Col::Time
                } else {
                    match grouped_role(prog, n, &listed[i]) {
                        None => Col::Ignored,
                        Some(role) => Col::Value {
                            name: n.clone(),
                            role,
                            scalar: None,
                            comps: Vec::new(),
                            xyz: false,
                            listed: listed[i].clone(),
                        },
                    }
                }
            })
            .collect();
        let index = iter_col.or(time_col);
        let mut header = Header { raw, cols, index, problem: None };
        header.problem = missing_index(prog, &header);
        header
    }
}

/// The configured index column that the header lacks, if any.
fn missing_index(prog: &TableProgram, h: &Header) -> Option<String> {
    let has = |want: &Col| {
        h.cols.iter().any(|c| std::mem::discriminant(c) == std::mem::discriminant(want))
    };
    let shown = |c: &Column| match c {
        Column::Position(p) => format!("column {}", p + 1),
        Column::Name(n) => format!("column `{n}`"),
    };
    if let Some(c) = &prog.iteration
        && !has(&Col::Iteration)
    {
        return Some(format!("iteration {}", shown(c)));
    }
    if let Some(c) = &prog.time
        && !has(&Col::Time)
    {
        return Some(format!("time {}", shown(c)));
    }
    None
}

/// A header cell as printed: a bracketed cell keeps its brackets, so a grouped header
/// cell `(total_x total_y total_z)` can be told from a plain name.
pub(in crate::parser) fn header_cell(c: &Cell, line: &[u8]) -> Vec<u8> {
    let bytes = c.bytes(line);
    if c.kind != CellKind::Vector {
        return bytes.to_vec();
    }
    let mut v = Vec::with_capacity(bytes.len() + 2);
    v.push(b'(');
    v.extend_from_slice(bytes);
    v.push(b')');
    v
}

/// The header candidates one non-data line gives: its cells as printed and, when some cells
/// group names in brackets, also the flat list of every name, so data rows that print
/// such a group as one vector cell and rows that print its components as separate cells
/// both find their header.
fn header_candidates(cells: &[Cell], line: &[u8]) -> Vec<Vec<Vec<u8>>> {
    let printed: Vec<Vec<u8>> = cells.iter().map(|c| header_cell(c, line)).collect();
    if !cells.iter().any(|c| c.kind == CellKind::Vector) {
        return vec![printed];
    }
    let mut flat = Vec::new();
    for c in cells {
        if c.kind == CellKind::Vector {
            flat.extend(components(c.bytes(line)).map(<[u8]>::to_vec));
        } else {
            flat.push(c.bytes(line).to_vec());
        }
    }
    vec![flat, printed]
}

/// Column names of a header, and for each column the component names a bracketed cell
/// lists (`(total_x total_y total_z)` → `total_x`, `total_y`, `total_z`; empty for plain
/// cells). Empty names become `colN`; repeated names get `_2`, `_3`.
pub(in crate::parser) fn header_names(raw: &[Vec<u8>]) -> (Vec<String>, Vec<Vec<String>>) {
    let mut names: Vec<String> = Vec::with_capacity(raw.len());
    let mut listed = Vec::with_capacity(raw.len());
    for (i, r) in raw.iter().enumerate() {
        let inner = match (r.first(), r.last()) {
            (Some(b'('), Some(b')')) | (Some(b'['), Some(b']')) if r.len() >= 2 => {
                Some(&r[1..r.len() - 1])
            }
            _ => None,
        };
        let parts: Vec<String> = inner
            .map(|b| components(b).map(clean_text).filter(|n| !n.is_empty()).collect())
            .unwrap_or_default();
        let mut n = if parts.is_empty() {
            clean_text(inner.unwrap_or(r)).replace("\"\"", "\"")
        } else {
            parts.join(" ")
        };
        if n.is_empty() {
            n = format!("col{}", i + 1);
        }
        let base = n.clone();
        let mut k = 2;
        while names.iter().any(|m| m == &n) {
            n = format!("{base}_{k}");
            k += 1;
        }
        names.push(n);
        listed.push(parts);
    }
    (names, listed)
}

/// The role of a column; a grouped column takes the role its first listed name is given by
/// `ignore`, `roles` or `residuals` (so definitions can name the components), else the
/// role of its whole name.
fn grouped_role(prog: &TableProgram, name: &str, listed: &[String]) -> Option<Role> {
    for part in listed {
        if prog.ignore.iter().any(|g| prog.glob(g, part)) {
            return None;
        }
        if let Some((_, role)) =
            prog.roles.iter().find(|(gs, _)| gs.iter().any(|g| prog.glob(g, part)))
        {
            return Some(*role);
        }
        if prog.residuals.iter().any(|g| prog.glob(g, part)) {
            return Some(Role::Residual);
        }
    }
    prog.role_of(name)
}

fn component_name(base: &str, k: usize, xyz: bool) -> String {
    if xyz && k < 3 { format!("{base}_{}", ["x", "y", "z"][k]) } else { format!("{base}[{k}]") }
}

fn describe(line: &[u8], failure: Option<&Failure>, header: Option<&Header>) -> String {
    match failure {
        None => "row could not be used".to_string(),
        Some(Failure::Width { cells, header: 0 }) => {
            format!("row has {cells} cells and no header fits it")
        }
        Some(Failure::Width { cells, header: w }) => {
            format!("row has {cells} cells, the header has {w}")
        }
        Some(Failure::NotANumber { column, span }) => {
            let name = header
                .and_then(|h| h.cols.get(*column))
                .map(|c| match c {
                    Col::Value { name, .. } => format!("column `{name}`"),
                    Col::Time => "time column".to_string(),
                    _ => format!("column {}", column + 1),
                })
                .unwrap_or_else(|| format!("column {}", column + 1));
            format!("{name}: not a number: {}", excerpt(&line[span.0..span.1]))
        }
        Some(Failure::BadIteration { span }) => {
            format!("iteration {} is not an integer", excerpt(&line[span.0..span.1]))
        }
        Some(Failure::MissingIndex(what)) => {
            format!("{what} is not in the header; records have no iteration/time from it")
        }
        Some(Failure::TooManySeries) => {
            format!("more than {MAX_SERIES} series; new columns are dropped")
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::parser::Registry;
    use crate::record::{Output, Record};

    fn rows(name: &str, text: &str) -> (Vec<Output>, LineStats) {
        let mut p = Registry::builtin().get(name).expect("shipped").parser();
        let mut out: Vec<Output> = Vec::new();
        for l in text.lines() {
            p.feed(l.as_bytes(), &mut out);
        }
        p.finish(&mut out);
        (out, p.stats())
    }

    #[test]
    fn a_warning_of_the_same_width_does_not_replace_the_header() {
        let (out, stats) = rows("table", "it res Cd\n1 1 0.3\nwarn: low mem\n2 0.5 0.31\n");
        let names: Vec<String> = out
            .iter()
            .filter_map(|o| if let Output::Series(s) = o { Some(s.name.clone()) } else { None })
            .collect();
        assert_eq!(names, vec!["res", "Cd"]);
        assert_eq!(stats, LineStats { lines: 4, used: 2, skipped: 0, ignored: 2 });
    }

    #[test]
    fn wider_rows_after_a_new_header_switch_columns() {
        // A restart that adds a column prints a new, wider header.
        let (out, stats) = rows("table", "it res\n1 1\nit res Cd\n2 0.5 0.3\n");
        let last =
            out.iter().rev().find_map(|o| if let Output::Record(r) = o { Some(r) } else { None });
        let last = last.expect("a record");
        assert_eq!(last.iteration, Some(2));
        assert_eq!(last.values, vec![(0, 0.5), (1, 0.3)]);
        assert_eq!(stats.skipped, 0);
    }

    #[test]
    fn a_bad_vector_component_keeps_the_others_in_place() {
        // Regression (found by the proptest): a first component that does not parse must not
        // shift the names of the later ones.
        let (out, stats) = rows("table", "it U\n1 (x 2 3)\n2 (4 5 6)\n");
        let names: Vec<String> = out
            .iter()
            .filter_map(|o| if let Output::Series(s) = o { Some(s.name.clone()) } else { None })
            .collect();
        assert_eq!(names, vec!["U_x", "U_y", "U_z"]);
        let recs: Vec<&Record> = out
            .iter()
            .filter_map(|o| if let Output::Record(r) = o { Some(r) } else { None })
            .collect();
        assert_eq!(recs[0].values, vec![(1, 2.0), (2, 3.0)]);
        assert_eq!(recs[1].values, vec![(0, 4.0), (1, 5.0), (2, 6.0)]);
        assert_eq!(stats.skipped, 1);
    }

    fn series_names(out: &[Output]) -> Vec<String> {
        out.iter()
            .filter_map(|o| if let Output::Series(s) = o { Some(s.name.clone()) } else { None })
            .collect()
    }

    #[test]
    fn a_header_grouping_vector_columns_gives_the_names_it_lists() {
        let text = "# Time\t(total_x total_y total_z)\t(pressure_x pressure_y)\n\
                    0.1\t(1 2 3)\t(4 5)\n\
                    0.2\t(1.5 2.5 3.5)\t(4.5 5.5)\n";
        let (out, stats) = rows("table", text);
        assert_eq!(
            series_names(&out),
            vec!["total_x", "total_y", "total_z", "pressure_x", "pressure_y"]
        );
        let last =
            out.iter().rev().find_map(|o| if let Output::Record(r) = o { Some(r) } else { None });
        assert_eq!(last.map(|r| r.time), Some(Some(0.2)));
        assert_eq!(
            last.map(|r| r.values.clone()),
            Some(vec![(0, 1.5), (1, 2.5), (2, 3.5), (3, 4.5), (4, 5.5)])
        );
        assert_eq!(stats.skipped, 0);
    }

    #[test]
    fn a_grouped_header_also_fits_rows_that_print_the_components_flat() {
        let text = "# Time (total_x total_y) (pressure_x pressure_y)\n\
                    0.1 1 2 3 4\n\
                    # Time (total_x total_y) (pressure_x pressure_y)\n\
                    0.2 5 6 7 8\n";
        let (out, stats) = rows("table", text);
        assert_eq!(series_names(&out), vec!["total_x", "total_y", "pressure_x", "pressure_y"]);
        assert_eq!(stats.skipped, 0);
        assert_eq!(stats.used, 2);
    }

    #[test]
    fn grouped_columns_take_the_role_of_their_first_listed_name() {
        let def = crate::parser::Definition::from_text(
            "engine = \"table\"\n[table]\nresiduals = [\"res_x\"]\n",
            crate::parser::Origin::Builtin,
            "t.toml",
            "t",
        )
        .unwrap();
        let mut p = def.parser();
        let mut out = Vec::new();
        for l in ["it (res_x res_y) Cd", "1 (1 2) 0.4"] {
            p.feed(l.as_bytes(), &mut out);
        }
        let roles: Vec<(String, Role)> = out
            .iter()
            .filter_map(|o| {
                if let Output::Series(s) = o { Some((s.name.clone(), s.role)) } else { None }
            })
            .collect();
        assert_eq!(
            roles,
            vec![
                ("res_x".to_string(), Role::Residual),
                ("res_y".to_string(), Role::Residual),
                ("Cd".to_string(), Role::Monitor)
            ]
        );
    }

    #[test]
    fn component_names() {
        assert_eq!(component_name("U", 0, true), "U_x");
        assert_eq!(component_name("U", 2, true), "U_z");
        assert_eq!(component_name("U", 3, true), "U[3]");
        assert_eq!(component_name("U", 0, false), "U[0]");
    }
}
