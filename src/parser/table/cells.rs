//! Splitting one table line into cells, respecting quotes and bracketed vectors.
//!
//! A cell is a byte span of the line. Quoted cells (`"res p"`, `'res p'`, CSV `""` escapes)
//! and bracketed vectors (`(1.2e-3 4.5e-4 0)`, `[1, 2, 3]`) stay one cell even when they
//! contain the delimiter. The spans go into a caller-owned `Vec`, reused line after line, so
//! splitting does not allocate once the vector has grown to the table's width.

/// How cells are separated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Delimiter {
    /// Runs of spaces and tabs.
    Whitespace,
    /// One byte: `,`, `\t` or `;`. Blanks around cells are trimmed.
    Byte(u8),
}

/// What a cell span holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CellKind {
    Plain,
    /// Content between quotes (a doubled quote inside is an escaped quote).
    Quoted,
    /// Content between brackets: a vector of components.
    Vector,
}

/// One cell: `line[start..end]` is its content (without quotes or brackets).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Cell {
    pub start: usize,
    pub end: usize,
    pub kind: CellKind,
}

impl Cell {
    pub fn bytes<'a>(&self, line: &'a [u8]) -> &'a [u8] {
        &line[self.start..self.end]
    }
}

fn is_blank(b: u8) -> bool {
    b == b' ' || b == b'\t'
}

/// Split `line` into `out` (cleared first).
pub fn split(line: &[u8], delim: Delimiter, out: &mut Vec<Cell>) {
    out.clear();
    match delim {
        Delimiter::Whitespace => split_whitespace(line, out),
        Delimiter::Byte(d) => split_byte(line, d, out),
    }
}

fn split_whitespace(line: &[u8], out: &mut Vec<Cell>) {
    let n = line.len();
    let mut i = 0;
    loop {
        while i < n && is_blank(line[i]) {
            i += 1;
        }
        if i >= n {
            return;
        }
        let (cell, next) = match line[i] {
            q @ (b'"' | b'\'') => quoted(line, i, q),
            b'(' | b'[' => bracketed(line, i),
            _ => {
                let start = i;
                while i < n && !is_blank(line[i]) {
                    i += 1;
                }
                (Cell { start, end: i, kind: CellKind::Plain }, i)
            }
        };
        out.push(cell);
        // Anything glued to a closing quote or bracket belongs to no cell.
        i = next;
        while i < n && !is_blank(line[i]) {
            i += 1;
        }
    }
}

fn split_byte(line: &[u8], d: u8, out: &mut Vec<Cell>) {
    let n = line.len();
    let blank = |b: u8| is_blank(b) && b != d;
    let mut i = 0;
    loop {
        while i < n && blank(line[i]) {
            i += 1;
        }
        let cell = match line.get(i) {
            Some(&q) if q == b'"' || q == b'\'' => {
                let (cell, next) = quoted(line, i, q);
                i = next;
                while i < n && line[i] != d {
                    i += 1;
                }
                cell
            }
            Some(b'(' | b'[') => {
                let (cell, next) = bracketed(line, i);
                i = next;
                while i < n && line[i] != d {
                    i += 1;
                }
                cell
            }
            _ => {
                let start = i;
                while i < n && line[i] != d {
                    i += 1;
                }
                let mut end = i;
                while end > start && blank(line[end - 1]) {
                    end -= 1;
                }
                Cell { start, end, kind: CellKind::Plain }
            }
        };
        out.push(cell);
        if i >= n {
            return;
        }
        // At a delimiter. A delimiter that ends the line does not start another cell.
        i += 1;
        if line[i..].iter().all(|&b| blank(b)) {
            return;
        }
    }
}

/// A quoted cell starting at `i`; returns the cell and the index after the closing quote.
fn quoted(line: &[u8], i: usize, q: u8) -> (Cell, usize) {
    let n = line.len();
    let start = i + 1;
    let mut j = start;
    while j < n {
        if line[j] == q {
            if j + 1 < n && line[j + 1] == q {
                j += 2;
                continue;
            }
            return (Cell { start, end: j, kind: CellKind::Quoted }, j + 1);
        }
        j += 1;
    }
    // Unclosed quote: the rest of the line is the cell.
    (Cell { start, end: n, kind: CellKind::Quoted }, n)
}

/// A bracketed vector starting at `i`, nesting respected.
fn bracketed(line: &[u8], i: usize) -> (Cell, usize) {
    let n = line.len();
    let mut depth = 0usize;
    let mut j = i;
    while j < n {
        match line[j] {
            b'(' | b'[' => depth += 1,
            b')' | b']' => {
                depth -= 1;
                if depth == 0 {
                    return (Cell { start: i + 1, end: j, kind: CellKind::Vector }, j + 1);
                }
            }
            _ => {}
        }
        j += 1;
    }
    (Cell { start: i + 1, end: n, kind: CellKind::Vector }, n)
}

/// The components of a vector cell's content, separated by blanks and/or commas.
pub fn components(content: &[u8]) -> impl Iterator<Item = &[u8]> {
    content.split(|&b| is_blank(b) || b == b',' || b == b';').filter(|c| !c.is_empty())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn texts(line: &str, d: Delimiter) -> Vec<(String, CellKind)> {
        let mut cells = Vec::new();
        split(line.as_bytes(), d, &mut cells);
        cells
            .iter()
            .map(|c| (String::from_utf8_lossy(c.bytes(line.as_bytes())).into_owned(), c.kind))
            .collect()
    }

    fn plain(v: &[&str]) -> Vec<(String, CellKind)> {
        v.iter().map(|s| (s.to_string(), CellKind::Plain)).collect()
    }

    #[test]
    fn whitespace_cells() {
        assert_eq!(texts("  1  2.5\t-3 ", Delimiter::Whitespace), plain(&["1", "2.5", "-3"]));
        assert_eq!(texts("", Delimiter::Whitespace), plain(&[]));
        assert_eq!(
            texts(r#"it "res p" 'Cd'"#, Delimiter::Whitespace),
            vec![
                ("it".into(), CellKind::Plain),
                ("res p".into(), CellKind::Quoted),
                ("Cd".into(), CellKind::Quoted)
            ]
        );
        assert_eq!(
            texts("3 (1.2e-3 4.5e-4 0) 7", Delimiter::Whitespace),
            vec![
                ("3".into(), CellKind::Plain),
                ("1.2e-3 4.5e-4 0".into(), CellKind::Vector),
                ("7".into(), CellKind::Plain)
            ]
        );
    }

    #[test]
    fn delimited_cells() {
        let comma = Delimiter::Byte(b',');
        assert_eq!(texts("1, 2 ,3", comma), plain(&["1", "2", "3"]));
        assert_eq!(texts("1,,3", comma), plain(&["1", "", "3"]));
        // A trailing delimiter does not add an empty last cell.
        assert_eq!(texts("1,2,3,", comma), plain(&["1", "2", "3"]));
        assert_eq!(
            texts(r#""a,b",c"#, comma),
            vec![("a,b".into(), CellKind::Quoted), ("c".into(), CellKind::Plain)]
        );
        assert_eq!(
            texts("1,(1,2,3),4", comma),
            vec![
                ("1".into(), CellKind::Plain),
                ("1,2,3".into(), CellKind::Vector),
                ("4".into(), CellKind::Plain)
            ]
        );
        assert_eq!(texts("a\t b\t\tc", Delimiter::Byte(b'\t')), plain(&["a", "b", "", "c"]));
        assert_eq!(texts("x;y", Delimiter::Byte(b';')), plain(&["x", "y"]));
    }

    #[test]
    fn broken_quotes_and_brackets_do_not_panic() {
        assert_eq!(texts("\"abc", Delimiter::Whitespace), vec![("abc".into(), CellKind::Quoted)]);
        assert_eq!(texts("(1 2", Delimiter::Whitespace), vec![("1 2".into(), CellKind::Vector)]);
        assert_eq!(texts("1 )", Delimiter::Whitespace), plain(&["1", ")"]));
        assert_eq!(texts(",", Delimiter::Byte(b',')), plain(&[""]));
    }

    #[test]
    fn vector_components() {
        let c: Vec<&[u8]> = components(b" 1.2e-3 4.5e-4,0 ").collect();
        assert_eq!(c, vec![&b"1.2e-3"[..], b"4.5e-4", b"0"]);
    }
}
