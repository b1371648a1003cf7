//! Line shapes: a log line with its numbers blanked out, so lines that differ only in their
//! values group together (`  Ux res # lin # sweeps`).
//!
//! `parsers draft` finds the recurring lines of a log by their shapes, and `parsers check`
//! reports the lines no rule used grouped by shape. Both tokenise lines the same way:
//!
//! * a **number** is what settle's number reader accepts (`12`, `-1.5e-3`, Fortran `1.5D-03`
//!   and `1.5-103`, `nan`, `inf`, `*******`); a number glued to letters (`0.43s`) is the
//!   number and then a word, but a date-like run (`2026-11-03`) is one word;
//! * a **word** starts with a letter or `_` and goes on with letters, digits and `_` (bytes
//!   above ASCII count as letters);
//! * anything else that is not blank is a one-byte **punctuation** token.
//!
//! Each token remembers whether blanks came before it, so a pattern can be rebuilt from it.

use super::number::parse_number;

/// What a token is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    Num,
    Word,
    Punct,
}

/// One token of a line: `line[start..end]`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Token {
    pub kind: Kind,
    pub start: usize,
    pub end: usize,
    /// Blanks come right before it (always false for the first token).
    pub gap_before: bool,
}

impl Token {
    pub fn text<'a>(&self, line: &'a [u8]) -> &'a [u8] {
        &line[self.start..self.end]
    }
}

/// Most tokens looked at in one line; the rest of a longer line is one `…`.
pub const MAX_TOKENS: usize = 64;

fn is_blank(b: u8) -> bool {
    b == b' ' || b == b'\t' || b == b'\r' || b == 0x0b || b == 0x0c
}

fn is_word_start(b: u8) -> bool {
    b.is_ascii_alphabetic() || b == b'_' || b >= 0x80
}

fn is_word_byte(b: u8) -> bool {
    b.is_ascii_alphanumeric() || b == b'_' || b >= 0x80
}

/// Can a number start at `i`?
fn number_start(line: &[u8], i: usize) -> bool {
    let at = |k: usize| line.get(k).copied().unwrap_or(0);
    let b = at(i);
    b.is_ascii_digit()
        || ((b == b'-' || b == b'+') && (at(i + 1).is_ascii_digit() || at(i + 1) == b'.'))
        || (b == b'.' && at(i + 1).is_ascii_digit())
        || (b == b'*' && at(i + 1) == b'*')
}

/// The tokens of `line` (at most [`MAX_TOKENS`]).
pub fn tokens(line: &[u8]) -> Vec<Token> {
    let mut out = Vec::new();
    let n = line.len();
    let mut i = 0;
    let mut gap = false;
    while i < n && out.len() < MAX_TOKENS {
        let b = line[i];
        if is_blank(b) {
            gap = !out.is_empty();
            i += 1;
            continue;
        }
        let start = i;
        let kind;
        let after_word = i > 0 && is_word_byte(line[i - 1]);
        if matches!(b, b'-' | b'+') && after_word {
            // `duct-bend-07`: a sign glued to a word joins words, it starts no number.
            i += 1;
            kind = Kind::Punct;
        } else if matches!(b, b'-' | b'+') && line.get(i + 1).is_some_and(u8::is_ascii_alphabetic) {
            // `-nan`, `+inf`: a signed non-finite number, else a lone sign.
            let mut j = i + 1;
            while j < n && is_word_byte(line[j]) {
                j += 1;
            }
            if parse_number(&line[i..j]).is_some() {
                i = j;
                kind = Kind::Num;
            } else {
                i += 1;
                kind = Kind::Punct;
            }
        } else if b == b'*'
            && out.iter().all(|t: &Token| t.kind == Kind::Punct && line[t.start] == b'*')
        {
            // Asterisks opening a line (`*** fatal: …`) are a marker, not an overflow.
            i += 1;
            kind = Kind::Punct;
        } else if b == b'*' && number_start(line, i) {
            while i < n && line[i] == b'*' {
                i += 1;
            }
            kind = Kind::Num;
        } else if number_start(line, i) {
            let mut j = i + 1;
            while j < n
                && (line[j].is_ascii_alphanumeric() || matches!(line[j], b'.' | b'+' | b'-' | b'#'))
            {
                j += 1;
            }
            if parse_number(&line[i..j]).is_some() {
                i = j;
                kind = Kind::Num;
            } else if let Some(k) = glued_number(line, i, j) {
                i = k;
                kind = Kind::Num;
            } else {
                i = j;
                kind = Kind::Word;
            }
        } else if is_word_start(b) {
            while i < n && is_word_byte(line[i]) {
                i += 1;
            }
            // `nan`, `inf`, `Infinity` are numbers where values are printed.
            kind = if parse_number(&line[start..i]).is_some() { Kind::Num } else { Kind::Word };
        } else {
            i += 1;
            kind = Kind::Punct;
        }
        out.push(Token { kind, start, end: i, gap_before: gap });
        gap = false;
    }
    out
}

/// `0.43s`: the longest prefix of `line[i..j]` that reads as a number, when what follows it
/// is a letter (a unit glued to the value). `None` for date-like runs (`2026-11-03`).
fn glued_number(line: &[u8], i: usize, j: usize) -> Option<usize> {
    (i + 1..j).rev().find(|&k| {
        line[k].is_ascii_alphabetic()
            && !matches!(line[k], b'e' | b'E' | b'd' | b'D')
            && parse_number(&line[i..k]).is_some()
    })
}

/// The shape of a line: leading blanks as two spaces, numbers as `#`, words and
/// punctuation as printed, blanks between tokens as one space.
pub fn shape(line: &[u8]) -> String {
    shape_of(line, &tokens(line))
}

/// [`shape`] from tokens already computed.
pub fn shape_of(line: &[u8], toks: &[Token]) -> String {
    let mut s = String::new();
    if line.first().is_some_and(|&b| is_blank(b)) {
        s.push_str("  ");
    }
    for t in toks {
        if t.gap_before {
            s.push(' ');
        }
        match t.kind {
            Kind::Num => s.push('#'),
            _ => s.push_str(&String::from_utf8_lossy(t.text(line))),
        }
    }
    if toks.len() >= MAX_TOKENS {
        s.push_str(" …");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn kinds(line: &str) -> Vec<(Kind, String)> {
        tokens(line.as_bytes())
            .iter()
            .map(|t| (t.kind, String::from_utf8_lossy(t.text(line.as_bytes())).into_owned()))
            .collect()
    }

    #[test]
    fn numbers_as_solvers_print_them() {
        assert_eq!(shape(b"  Ux       res 1.0000e+00   lin   5 sweeps"), "  Ux res # lin # sweeps");
        assert_eq!(shape(b"p 1.5D-03 k 1.5-103 w -nan x ******* y +.5"), "p # k # w # x # y #");
        assert_eq!(shape(b"[step      1]  cfl 2.00e+00"), "[step #] cfl #");
        assert_eq!(shape(b"it=12, res:3e-4"), "it=#, res:#");
        assert_eq!(shape(b"Total : (1.0 2.0 3.0)"), "Total : (# # #)");
        assert_eq!(shape(b"*** fatal: x"), "*** fatal: x");
    }

    #[test]
    fn units_dates_and_words() {
        assert_eq!(
            kinds("wall 0.43s"),
            vec![(Kind::Word, "wall".into()), (Kind::Num, "0.43".into()), (Kind::Word, "s".into())]
        );
        assert_eq!(kinds("2026-11-03")[0], (Kind::Word, "2026-11-03".into()));
        assert_eq!(shape(b"started : 2026-03-25 10:03:28"), "started : 2026-03-25 #:#:#");
        assert_eq!(kinds("k-omega")[1], (Kind::Punct, "-".into()));
        assert_eq!(shape(b""), "");
    }
}
