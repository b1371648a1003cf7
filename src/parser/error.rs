//! Errors in parser definitions, worded for the person who wrote the file.
//!
//! Every message names the file, the TOML key path (`rules[2].pattern`) and the problem, and
//! gives a line and column whenever the key can be found in the text. Locating keys uses the
//! TOML crate's spanned document tree, parsed only when an error has to be reported, so
//! loading valid definitions pays nothing for it.

use std::ops::Range;
use std::path::PathBuf;

use toml::Spanned;
use toml::de::{DeTable, DeValue};

/// A parser definition that could not be read, parsed or validated.
#[derive(Debug, thiserror::Error)]
pub enum DefinitionError {
    /// The file or folder could not be read.
    #[error("{file}: cannot read parser definitions: {source}", file = .path.display())]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// The text is not valid TOML.
    #[error("{file}:{line}:{column}: TOML syntax error: {message}")]
    Syntax { file: String, line: usize, column: usize, message: String },
    /// Valid TOML, but not a valid definition: unknown key, wrong type, bad regex, a rule that
    /// cannot work.
    #[error("{}{key}: {message}", place(.file, *.line, *.column))]
    Invalid {
        file: String,
        key: String,
        line: Option<usize>,
        column: Option<usize>,
        message: String,
    },
}

fn place(file: &str, line: Option<usize>, column: Option<usize>) -> String {
    match (line, column) {
        (Some(l), Some(c)) => format!("{file}:{l}:{c}: "),
        (Some(l), None) => format!("{file}:{l}: "),
        _ => format!("{file}: "),
    }
}

/// A validation problem found while compiling, before it is placed in the file.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// Key path such as `rules[2].pattern` (empty for the whole document).
    pub key: String,
    pub message: String,
}

impl Problem {
    pub fn new(key: impl Into<String>, message: impl Into<String>) -> Problem {
        Problem { key: key.into(), message: message.into() }
    }
}

/// 1-based line and column of byte `offset` in `text`.
pub fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    let before = &text.as_bytes()[..offset];
    let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
    let line_start = before.iter().rposition(|&b| b == b'\n').map_or(0, |p| p + 1);
    let column = String::from_utf8_lossy(&before[line_start..]).chars().count() + 1;
    (line, column)
}

/// Turn a `toml` deserialisation error into a [`DefinitionError`]: a syntax error when the
/// document does not parse at all, otherwise a data error placed at its key.
pub fn from_toml_error(file: &str, text: &str, err: &toml::de::Error) -> DefinitionError {
    let message = crate::words::expected_in_words(err.message());
    match DeTable::parse(text) {
        Err(syntax) => {
            let offset = syntax.span().map_or(0, |s| s.start);
            let (line, column) = line_column(text, offset);
            DefinitionError::Syntax {
                file: file.to_string(),
                line,
                column,
                message: syntax.message().trim().to_string(),
            }
        }
        Ok(doc) => {
            let span = err.span();
            let key = span.as_ref().map(|s| key_at(doc.get_ref(), s)).unwrap_or_default();
            let (line, column) = match &span {
                Some(s) => {
                    let (l, c) = line_column(text, s.start);
                    (Some(l), Some(c))
                }
                None => (None, None),
            };
            DefinitionError::Invalid {
                file: file.to_string(),
                key: shown(&key),
                line,
                column,
                message,
            }
        }
    }
}

/// Place a compile-time [`Problem`] in the file: find its key's line when possible.
pub fn from_problem(file: &str, text: &str, problem: Problem) -> DefinitionError {
    let (line, column) = match DeTable::parse(text) {
        // A key that is missing (the problem is its absence) is placed at its parent.
        Ok(doc) => std::iter::successors(Some(problem.key.as_str()), |k| {
            k.rfind(['.', '[']).map(|i| &k[..i])
        })
        .find_map(|k| span_of(doc.get_ref(), k))
        .map_or((None, None), |span| {
            let (l, c) = line_column(text, span.start);
            (Some(l), Some(c))
        }),
        Err(_) => (None, None),
    };
    DefinitionError::Invalid {
        file: file.to_string(),
        key: shown(&problem.key),
        line,
        column,
        message: problem.message,
    }
}

fn shown(key: &str) -> String {
    if key.is_empty() { "(top level)".to_string() } else { key.to_string() }
}

/// The deepest key path whose key or value span contains `span.start`.
fn key_at(table: &DeTable<'_>, span: &Range<usize>) -> String {
    let mut path = String::new();
    descend_table(table, span.start, &mut path);
    path
}

fn descend_table(table: &DeTable<'_>, at: usize, path: &mut String) {
    for (key, value) in table.iter() {
        let ks = key.span();
        let vs = value.span();
        if ks.contains(&at) || vs.contains(&at) || (vs.start <= at && at <= vs.end && vs.is_empty())
        {
            if !path.is_empty() {
                path.push('.');
            }
            path.push_str(key.get_ref());
            descend_value(value, at, path);
            return;
        }
    }
    // Tables declared with `[[rules]]` headers have spans that do not always cover their
    // keys; fall back to the nearest key that starts before the offset.
    let mut best: Option<(&Spanned<_>, &Spanned<DeValue<'_>>)> = None;
    for (key, value) in table.iter() {
        if key.span().start <= at && best.is_none_or(|(k, _)| k.span().start < key.span().start) {
            best = Some((key, value));
        }
    }
    if let Some((key, value)) = best {
        if !path.is_empty() {
            path.push('.');
        }
        path.push_str(key.get_ref());
        descend_value(value, at, path);
    }
}

fn descend_value(value: &Spanned<DeValue<'_>>, at: usize, path: &mut String) {
    match value.get_ref() {
        DeValue::Table(t) => descend_table(t, at, path),
        DeValue::Array(items) => {
            // The last element starting at or before the offset holds it.
            let mut chosen = None;
            for (i, item) in items.iter().enumerate() {
                if item.span().start <= at || table_starts_before(item, at) {
                    chosen = Some((i, item));
                }
            }
            if let Some((i, item)) = chosen {
                path.push_str(&format!("[{i}]"));
                if let DeValue::Table(t) = item.get_ref() {
                    descend_table(t, at, path);
                }
            }
        }
        _ => {}
    }
}

fn table_starts_before(item: &Spanned<DeValue<'_>>, at: usize) -> bool {
    match item.get_ref() {
        DeValue::Table(t) => t.iter().any(|(k, _)| k.span().start <= at),
        _ => false,
    }
}

/// Span of the value (or key) at a path such as `rules[2].pattern` or `table.delimiter`.
fn span_of(root: &DeTable<'_>, path: &str) -> Option<Range<usize>> {
    if path.is_empty() {
        return None;
    }
    let mut table = root;
    let mut last: Option<Range<usize>> = None;
    let segments: Vec<&str> = path.split('.').collect();
    for (n, seg) in segments.iter().enumerate() {
        let (name, index) = match seg.find('[') {
            Some(open) => {
                let idx = seg[open + 1..].trim_end_matches(']').parse::<usize>().ok()?;
                (&seg[..open], Some(idx))
            }
            None => (*seg, None),
        };
        let (key, value) = table.iter().find(|(k, _)| k.get_ref() == name)?;
        last = Some(key.span());
        let mut value = value;
        if let Some(i) = index {
            let DeValue::Array(items) = value.get_ref() else { return last };
            value = items.get(i)?;
            // An array-of-tables element's own span is not always useful; keep the key's
            // span unless the element has a real one.
            if !value.span().is_empty() {
                last = Some(value.span());
            }
        }
        let is_last = n + 1 == segments.len();
        if is_last {
            return Some(if value.span().is_empty() { key.span() } else { value.span() });
        }
        match value.get_ref() {
            DeValue::Table(t) => table = t,
            _ => return last,
        }
    }
    last
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_and_column_are_one_based() {
        let text = "a = 1\nbb = 2\n";
        assert_eq!(line_column(text, 0), (1, 1));
        assert_eq!(line_column(text, 6), (2, 1));
        assert_eq!(line_column(text, 9), (2, 4));
    }

    #[test]
    fn finds_spans_of_nested_keys() {
        let text = "engine = \"lines\"\n[[rules]]\nkind = \"step\"\npattern = \"a\"\n\n[[rules]]\nkind = \"value\"\npattern = \"(b\"\n";
        let doc = DeTable::parse(text).expect("test document is valid TOML");
        let span = span_of(doc.get_ref(), "rules[1].pattern").expect("key exists");
        assert_eq!(line_column(text, span.start).0, 8);
        let span = span_of(doc.get_ref(), "rules[0].kind").expect("key exists");
        assert_eq!(line_column(text, span.start).0, 3);
        assert_eq!(key_at(doc.get_ref(), &(span.start..span.start + 1)), "rules[0].kind");
        let off = text.find("(b").expect("present");
        assert_eq!(key_at(doc.get_ref(), &(off..off + 1)), "rules[1].pattern");
    }
}
