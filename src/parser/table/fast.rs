//! One pass over a plain data row: cells are found and their numbers read in the same scan.
//!
//! The general path (`table.rs`) splits a line into cells, asks whether the index cell holds
//! a number, then reads every cell again. On a large table nearly every line is a plain row
//! of the current header, so this path reads such a row directly: each cell is a number read
//! by [`number_prefix`], whose end must be a cell boundary; the index cell is read once.
//!
//! It handles a row only when the general path would certainly make a record of it with no
//! failure: a header with an index column and no pending problem, exactly one cell per
//! column, no comment prefix, no quoted or bracketed cell, no empty cell, every number in the
//! plain form, and every value column already tied to its series. For anything else it
//! returns `false` having emitted nothing, and the general path reads the line from scratch.

use super::cells::Delimiter;
use super::{Col, TableParser};
use crate::parser::number::number_prefix;
use crate::record::{RecordRef, Sink};

#[inline]
fn is_blank(b: u8) -> bool {
    b == b' ' || b == b'\t'
}

/// A plain integer at the start of `b` (optional sign, 1–18 digits), and its length.
#[inline]
fn integer_prefix(b: &[u8]) -> Option<(i64, usize)> {
    let (negative, start) = match b.first()? {
        b'-' => (true, 1),
        b'+' => (false, 1),
        _ => (false, 0),
    };
    let mut i = start;
    let mut v: i64 = 0;
    while let Some(d) = b.get(i).map(|c| c.wrapping_sub(b'0')).filter(|d| *d <= 9) {
        if i - start == 18 {
            return None;
        }
        v = v * 10 + i64::from(d);
        i += 1;
    }
    (i > start).then_some((if negative { -v } else { v }, i))
}

impl TableParser {
    /// Read `line` as a plain data row of the current header, if it is one; `true` when a
    /// record was handed to `out`.
    pub(super) fn fast_row(&mut self, line: &[u8], out: &mut dyn Sink) -> bool {
        let Some(h) = &self.header else { return false };
        if h.problem.is_some() || h.index.is_none() {
            return false;
        }
        let delim = match self.prog.delimiter {
            Delimiter::Whitespace => None,
            Delimiter::Byte(d) => Some(d),
        };
        let blank = |b: u8| is_blank(b) && Some(b) != delim;
        let n = line.len();
        let mut i = 0;
        while i < n && blank(line[i]) {
            i += 1;
        }
        let body = &line[i..];
        if self.prog.comments.iter().any(|c| body.starts_with(c)) {
            return false;
        }
        let values = &mut self.values;
        values.clear();
        let (mut iteration, mut time) = (None, None);
        let mut col = 0;
        while i < n {
            let Some(c) = h.cols.get(col) else { return false };
            let rest = &line[i..];
            let len = match c {
                Col::Iteration => match integer_prefix(rest) {
                    Some((it, len)) => {
                        iteration = Some(it);
                        len
                    }
                    None => return false,
                },
                Col::Time => match number_prefix(rest) {
                    Some((t, len)) => {
                        time = Some(t);
                        len
                    }
                    None => return false,
                },
                Col::Value { scalar: Some(id), .. } => match number_prefix(rest) {
                    Some((v, len)) => {
                        values.push((*id, v));
                        len
                    }
                    None => return false,
                },
                Col::Value { .. } => return false,
                Col::Ignored => {
                    if matches!(rest[0], b'"' | b'\'' | b'(' | b'[') || Some(rest[0]) == delim {
                        return false;
                    }
                    rest.iter().position(|&b| is_blank(b) || Some(b) == delim).unwrap_or(rest.len())
                }
            };
            i += len;
            col += 1;
            // What follows the cell must end it.
            match delim {
                None => {
                    if i < n && !is_blank(line[i]) {
                        return false;
                    }
                    while i < n && is_blank(line[i]) {
                        i += 1;
                    }
                }
                Some(d) => {
                    while i < n && blank(line[i]) {
                        i += 1;
                    }
                    if i == n {
                        break;
                    }
                    if line[i] != d {
                        return false;
                    }
                    i += 1;
                    // A delimiter that ends the line does not start another cell.
                    if line[i..].iter().all(|&b| blank(b)) {
                        break;
                    }
                    while i < n && blank(line[i]) {
                        i += 1;
                    }
                }
            }
        }
        if col != h.cols.len() {
            return false;
        }
        out.record(RecordRef { iteration, time, values, line: self.line_no });
        true
    }
}
