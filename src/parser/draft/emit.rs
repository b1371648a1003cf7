//! Writing a draft: TOML strings, regexes rebuilt from line tokens, capture names.

use crate::parser::shape::{Kind, Token};

/// A TOML string: a literal string (`'...'`, no escapes: regexes stay readable) when the
/// text allows it, else a basic string with escapes.
pub fn toml_str(s: &str) -> String {
    if !s.contains('\'') && !s.chars().any(char::is_control) {
        return format!("'{s}'");
    }
    let mut o = String::from("\"");
    for c in s.chars() {
        match c {
            '"' => o.push_str("\\\""),
            '\\' => o.push_str("\\\\"),
            '\n' => o.push_str("\\n"),
            '\t' => o.push_str("\\t"),
            c if c.is_control() => o.push_str(&format!("\\u{:04X}", c as u32)),
            c => o.push(c),
        }
    }
    o.push('"');
    o
}

/// A TOML bare key when possible, else a quoted one.
pub fn toml_key(s: &str) -> String {
    if !s.is_empty() && s.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-') {
        s.to_string()
    } else {
        toml_str(s)
    }
}

/// A regex group name from a word: ASCII letters, digits and `_`, not starting with a digit.
pub fn group_name(word: &str) -> String {
    let mut g: String =
        word.chars().map(|c| if c.is_ascii_alphanumeric() { c } else { '_' }).collect();
    g = g.trim_matches('_').to_string();
    if g.is_empty() {
        g = "v".into();
    }
    if g.starts_with(|c: char| c.is_ascii_digit()) {
        g.insert(0, 'v');
    }
    g
}

/// What one token becomes in a rebuilt pattern.
#[derive(Debug, Clone, PartialEq)]
pub enum Part {
    /// The token as printed (escaped).
    Literal,
    /// A number to read into this named group.
    Capture(String),
    /// A number that is not read.
    Skip,
    /// The `name` group: any word, or one of these words.
    Name(Option<Vec<String>>),
    /// The line ends here (a step pattern stops after its last capture).
    Stop,
}

/// The regex of a line's tokens: `^` and optional leading blanks, each token escaped or
/// captured, blanks between tokens as `\s+` (between two words or numbers) or `\s*` (next
/// to punctuation), and `\s*$` at the end when `to_end`.
pub fn pattern(line: &[u8], toks: &[Token], parts: &[Part], to_end: bool) -> String {
    let mut p = String::from("^\\s*");
    let mut prev: Option<&Token> = None;
    for (k, (t, part)) in toks.iter().zip(parts).enumerate() {
        if *part == Part::Stop {
            return p;
        }
        if let Some(pt) = prev {
            let punct = pt.kind == Kind::Punct || t.kind == Kind::Punct;
            if punct {
                p.push_str("\\s*");
            } else if t.gap_before {
                p.push_str("\\s+");
            }
        }
        let text = String::from_utf8_lossy(t.text(line));
        match part {
            Part::Literal => p.push_str(&regex::escape(&text)),
            Part::Capture(g) => {
                let next = toks.get(k + 1);
                let class = match next {
                    None => "\\S+",
                    Some(n) if n.gap_before => "\\S+",
                    Some(n) if n.kind == Kind::Word => "[-+]?[0-9.]+(?:[eEdD][-+]?[0-9]+)?",
                    Some(_) => "[^\\s,;:=()\\[\\]{}<>|/]+",
                };
                p.push_str(&format!("(?P<{g}>{class})"));
            }
            Part::Skip => {
                let next = toks.get(k + 1);
                p.push_str(match next {
                    None => "\\S+",
                    Some(n) if n.gap_before => "\\S+",
                    _ => "[^\\s,;:=()\\[\\]{}<>|/]+",
                });
            }
            Part::Name(None) => p.push_str("(?P<name>[A-Za-z_][A-Za-z0-9_]*)"),
            Part::Name(Some(words)) => {
                let alts: Vec<String> = words.iter().map(|w| regex::escape(w)).collect();
                p.push_str(&format!("(?P<name>{})", alts.join("|")));
            }
            Part::Stop => {}
        }
        prev = Some(t);
    }
    if to_end {
        p.push_str("\\s*$");
    }
    p
}

/// The words of a line before its first number, as a pattern (a banner, a label, the
/// start of a warning): digits inside words become `\S+`, so a version number changes
/// nothing.
pub fn prefix_pattern(line: &[u8], toks: &[Token], max_tokens: usize) -> String {
    let mut p = String::from("^\\s*");
    let mut prev: Option<&Token> = None;
    for t in toks.iter().take(max_tokens) {
        if t.kind == Kind::Num {
            break;
        }
        if let Some(pt) = prev {
            if pt.kind == Kind::Punct || t.kind == Kind::Punct {
                p.push_str("\\s*");
            } else {
                p.push_str("\\s+");
            }
        }
        let text = String::from_utf8_lossy(t.text(line));
        if text.chars().any(|c| c.is_ascii_digit()) {
            p.push_str("\\S+");
        } else {
            p.push_str(&regex::escape(&text));
        }
        prev = Some(t);
    }
    p
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::parser::shape::tokens;

    #[test]
    fn strings_and_keys() {
        assert_eq!(toml_str(r"^\s+x"), r"'^\s+x'");
        assert_eq!(toml_str("it's"), "\"it's\"");
        assert_eq!(toml_key("Ux"), "Ux");
        assert_eq!(toml_key("a b"), "'a b'");
        assert_eq!(group_name("p/sweeps"), "p_sweeps");
        assert_eq!(group_name("1"), "v1");
    }

    #[test]
    fn patterns_from_tokens() {
        let line = b"  Ux  res 1.0e-3  lin 5 sweeps";
        let t = tokens(line);
        let parts = vec![
            Part::Name(None),
            Part::Literal,
            Part::Capture("value".into()),
            Part::Literal,
            Part::Capture("sweeps".into()),
            Part::Literal,
        ];
        let p = pattern(line, &t, &parts, true);
        assert_eq!(
            p,
            r"^\s*(?P<name>[A-Za-z_][A-Za-z0-9_]*)\s+res\s+(?P<value>\S+)\s+lin\s+(?P<sweeps>\S+)\s+sweeps\s*$"
        );
        let re = regex::Regex::new(&p).unwrap();
        assert!(re.is_match("  omega res 2.2e-05 lin 12 sweeps"));
        let line = b"[step 12] cfl 2.0e+00";
        let t = tokens(line);
        let parts = vec![
            Part::Literal,
            Part::Literal,
            Part::Capture("iteration".into()),
            Part::Literal,
            Part::Literal,
            Part::Capture("cfl".into()),
        ];
        let p = pattern(line, &t, &parts, false);
        assert_eq!(
            p,
            r"^\s*\[\s*step\s+(?P<iteration>[^\s,;:=()\[\]{}<>|/]+)\s*\]\s*cfl\s+(?P<cfl>\S+)"
        );
        assert_eq!(
            prefix_pattern(
                b"tarn 3.1.4 - incompressible RANS",
                &tokens(b"tarn 3.1.4 - incompressible RANS"),
                4
            ),
            r"^\s*tarn\s+\S+\s*\-\s*incompressible"
        );
    }
}
