//! Naming the numbers of a line from the words around them (rules in `draft.rs`).

use crate::parser::shape::{Kind, Token};

/// Words that are units when printed after a number (`0.43 s`), never names.
const UNITS: &[&str] = &[
    "s", "sec", "secs", "second", "seconds", "ms", "us", "min", "mins", "h", "hr", "hrs", "pa",
    "kpa", "mpa", "n", "m", "mm", "cm", "kg", "j", "w", "kw", "v", "a", "pct", "percent", "mb",
    "gb", "kb", "b", "bytes", "hz", "k", "degc", "degk",
];

/// Is `word` a unit?
pub fn is_unit(word: &str) -> bool {
    UNITS.contains(&word.to_ascii_lowercase().as_str())
}

fn text(line: &[u8], t: &Token) -> String {
    String::from_utf8_lossy(t.text(line)).into_owned()
}

/// A name for each number token of `line` (`None` for other tokens), from the words
/// around it; the token at `skip` (a captured variable name) is never used as a name.
///
/// * numbers inside brackets that hold only numbers are a vector: the word before the
///   opening bracket with `_x`, `_y`, `_z` (more than three: `_1`, `_2`, …);
/// * otherwise the word right after the number when it ends the line or is followed by a
///   separator (`,` `;` `)` `]` `.` `|`) and is not a unit (`5 sweeps`, `12 cells,`);
/// * otherwise the word before the number, looking back over punctuation but not past
///   another number (`drag 0.41`, `p=1e-3`, `Total : 3`);
/// * otherwise `v` and the number's position.
pub fn number_names(line: &[u8], toks: &[Token], skip: Option<usize>) -> Vec<Option<String>> {
    let mut out = vec![None; toks.len()];
    let word_at = |i: usize| -> Option<String> {
        let t = toks.get(i)?;
        (t.kind == Kind::Word && Some(i) != skip).then(|| text(line, t))
    };
    let mut k = 0;
    let mut position = 0;
    while k < toks.len() {
        if toks[k].kind != Kind::Num {
            k += 1;
            continue;
        }
        position += 1;
        // A bracketed run of numbers: `( # # # )`.
        if k > 0 && toks[k - 1].kind == Kind::Punct && matches!(toks[k - 1].text(line), b"(" | b"[")
        {
            let mut end = k;
            while end < toks.len() && toks[end].kind == Kind::Num {
                end += 1;
            }
            if end < toks.len() && matches!(toks[end].text(line), b")" | b"]") && end - k >= 2 {
                // The word before the bracket; none when that word is the captured name
                // (`Total : (…)` folded on `Total` gives `x`, `y`, `z`).
                let nearest = (0..k - 1)
                    .rev()
                    .take_while(|&i| toks[i].kind != Kind::Num)
                    .find(|&i| toks[i].kind == Kind::Word);
                let base = match nearest {
                    Some(i) if Some(i) == skip => None,
                    Some(i) => word_at(i),
                    None => Some(format!("v{position}")),
                };
                let n = end - k;
                for (c, slot) in out[k..end].iter_mut().enumerate() {
                    let comp =
                        if n <= 3 { ["x", "y", "z"][c].to_string() } else { (c + 1).to_string() };
                    *slot = Some(match &base {
                        Some(b) => format!("{b}_{comp}"),
                        None => comp,
                    });
                }
                position += n - 1;
                k = end;
                continue;
            }
        }
        // The word after, when it closes the number's phrase: the line ends, or a
        // separator follows (not `=`, `:` or `(`, which would make it the next label).
        let after = word_at(k + 1).filter(|w| {
            let next = toks.get(k + 2);
            !is_unit(w)
                && next.is_none_or(|n| {
                    n.kind == Kind::Punct
                        && matches!(n.text(line), b"," | b";" | b")" | b"]" | b"." | b"|")
                })
        });
        let before = (0..k)
            .rev()
            .take_while(|&i| toks[i].kind != Kind::Num)
            .take_while(|&i| toks[i].kind == Kind::Punct || Some(i) != skip)
            .find_map(|i| if toks[i].kind == Kind::Word { word_at(i) } else { None });
        out[k] = Some(after.or(before).unwrap_or_else(|| format!("v{position}")));
        k += 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::parser::shape::tokens;

    fn names(line: &str, skip: Option<usize>) -> Vec<String> {
        let t = tokens(line.as_bytes());
        number_names(line.as_bytes(), &t, skip).into_iter().flatten().collect()
    }

    #[test]
    fn numbers_are_named_by_their_words() {
        assert_eq!(names("  Ux  res 1.0e-3  lin 5 sweeps", Some(0)), vec!["res", "sweeps"]);
        assert_eq!(names("forces drag 0.41 lift 0.02 dp 153", None), vec!["drag", "lift", "dp"]);
        assert_eq!(names("wall 0.43 s", None), vec!["wall"]);
        assert_eq!(names("mesh : 2152154 cells, 4 zones", None), vec!["cells", "zones"]);
        assert_eq!(names("Total : (1.0 2.0 3.0)", None), vec!["Total_x", "Total_y", "Total_z"]);
        assert_eq!(names("it= 12 p=1e-3 U=2e-3", None), vec!["it", "p", "U"]);
        assert_eq!(names("RESMAX= 0.9D+00  RESAVG= 0.4D+00", None), vec!["RESMAX", "RESAVG"]);
        assert_eq!(names("it 1 r(p)=1.0D+00 r(u)=2.0D+00", None), vec!["it", "p", "u"]);
        assert_eq!(names("Pressure 0.22E-02 12 0.35E-08", Some(0)), vec!["v1", "v2", "v3"]);
        assert_eq!(names("  Total : (1 2 3)", Some(0)), vec!["x", "y", "z"]);
    }
}
