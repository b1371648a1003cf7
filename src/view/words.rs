//! Small pieces of wording shared by every view: counted nouns and the inline code that judge
//! texts mark with backticks.
//!
//! The judge writes one sentence per finding and marks names taken from a log (an event
//! rule, a file) as `` `code` ``. Each view decides how to show such a span (HTML `<code>`,
//! a Markdown code span, plain text in the terminal) through [`code_spans`]; no view shows the
//! backticks themselves.

/// `1 finding`, `2 findings`, `0 findings`.
pub fn count(n: usize, singular: &str) -> String {
    if n == 1 { format!("1 {singular}") } else { format!("{n} {singular}s") }
}

/// `n` and the right form of a noun with an irregular plural (`1 criterion`, `3 criteria`).
pub fn count_irregular(n: usize, singular: &str, plural: &str) -> String {
    if n == 1 { format!("1 {singular}") } else { format!("{n} {plural}") }
}

/// A piece of text: plain, or an inline code span (without its backticks).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Piece<'a> {
    Text(&'a str),
    Code(&'a str),
}

/// Split `s` into plain text and `` `code` `` spans. A backtick without a partner is kept as
/// text, so nothing is lost from a sentence that happens to contain one.
pub fn code_spans(s: &str) -> Vec<Piece<'_>> {
    let mut out = Vec::new();
    let mut rest = s;
    while let Some(open) = rest.find('`') {
        let after = &rest[open + 1..];
        let Some(close) = after.find('`') else { break };
        if open > 0 {
            out.push(Piece::Text(&rest[..open]));
        }
        out.push(Piece::Code(&after[..close]));
        rest = &after[close + 1..];
    }
    if !rest.is_empty() {
        out.push(Piece::Text(rest));
    }
    out
}

/// `s` with its code spans shown as plain text (the terminal view).
pub fn without_backticks(s: &str) -> String {
    code_spans(s)
        .into_iter()
        .map(|p| match p {
            Piece::Text(t) | Piece::Code(t) => t,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counted_nouns() {
        assert_eq!(count(1, "finding"), "1 finding");
        assert_eq!(count(0, "finding"), "0 findings");
        assert_eq!(count(14, "finding"), "14 findings");
        assert_eq!(count_irregular(1, "criterion", "criteria"), "1 criterion");
        assert_eq!(count_irregular(12, "criterion", "criteria"), "12 criteria");
    }

    #[test]
    fn code_spans_lose_their_backticks() {
        let s = "the log ends in an error at it 520 (`stack_trace`: tarn::sst) with no mark";
        assert_eq!(
            code_spans(s),
            vec![
                Piece::Text("the log ends in an error at it 520 ("),
                Piece::Code("stack_trace"),
                Piece::Text(": tarn::sst) with no mark"),
            ]
        );
        assert_eq!(
            without_backticks(s),
            "the log ends in an error at it 520 (stack_trace: tarn::sst) with no mark"
        );
        // An odd backtick stays.
        assert_eq!(without_backticks("a `b` c ` d"), "a b c ` d");
        assert_eq!(code_spans("`x`"), vec![Piece::Code("x")]);
        assert!(code_spans("").is_empty());
    }
}
