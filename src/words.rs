//! Configuration errors in the words of the person who wrote the file.
//!
//! serde and the TOML reader describe a wrong value in Rust's vocabulary (`invalid type:
//! string "x", expected f64`). Users of settle write TOML, not Rust: this module rewords such
//! messages (`expected a number, found the text "x"`) for parser definitions and run configs
//! alike, so both say what was expected the same way.

/// Reword a serde/TOML value message; messages of other shapes come back unchanged.
pub fn expected_in_words(message: &str) -> String {
    let m = message.trim();
    for prefix in ["invalid type: ", "invalid value: "] {
        if let Some(rest) = m.strip_prefix(prefix)
            && let Some((found, expected)) = rest.rsplit_once(", expected ")
        {
            return format!("expected {}, found {}", expectation(expected), found_words(found));
        }
    }
    match m.rsplit_once("expected ") {
        Some((head, expected)) if rust_type(expected).is_some() => {
            format!("{head}expected {}", expectation(expected))
        }
        _ => m.to_string(),
    }
}

/// A Rust type name as a user would say it, or `None` for anything else.
fn rust_type(t: &str) -> Option<&'static str> {
    Some(match t.trim() {
        "f64" | "f32" => "a number",
        "i64" | "i32" | "i16" | "i8" | "isize" => "a whole number",
        "u64" | "u32" | "u16" | "u8" | "usize" => "a whole number, 0 or more",
        "a boolean" | "bool" => "true or false",
        "a string" | "String" | "a borrowed string" => "text in quotes",
        "a sequence" => "a list in brackets ([...])",
        "a map" => "a table",
        "a character" => "one character in quotes",
        _ => return None,
    })
}

fn expectation(expected: &str) -> String {
    let e = expected.trim();
    if let Some(words) = rust_type(e) {
        return words.to_string();
    }
    if let Some(name) = e.strip_prefix("struct ") {
        return format!("a table ({name})");
    }
    e.to_string()
}

fn found_words(found: &str) -> String {
    let f = found.trim();
    let strip = |s: &str| s.trim_matches('`').to_string();
    if let Some(v) = f.strip_prefix("string ") {
        return format!("the text {v}");
    }
    if let Some(v) = f.strip_prefix("integer ") {
        return format!("the whole number {}", strip(v));
    }
    if let Some(v) = f.strip_prefix("floating point ") {
        return format!("the number {}", strip(v));
    }
    if let Some(v) = f.strip_prefix("boolean ") {
        return format!("the value {}", strip(v));
    }
    match f {
        "sequence" => "a list".to_string(),
        "map" => "a table".to_string(),
        other => other.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rust_vocabulary_becomes_plain_words() {
        assert_eq!(
            expected_in_words(r#"invalid type: string "heavy", expected i64"#),
            r#"expected a whole number, found the text "heavy""#
        );
        assert_eq!(
            expected_in_words(r#"invalid type: string "x", expected f64"#),
            r#"expected a number, found the text "x""#
        );
        assert_eq!(
            expected_in_words("invalid value: integer `-3`, expected usize"),
            "expected a whole number, 0 or more, found the whole number -3"
        );
        assert_eq!(
            expected_in_words(r#"invalid type: string "yes", expected a boolean"#),
            r#"expected true or false, found the text "yes""#
        );
        assert_eq!(
            expected_in_words("invalid type: integer `3`, expected a string"),
            "expected text in quotes, found the whole number 3"
        );
        assert_eq!(
            expected_in_words("invalid type: floating point `2.5`, expected usize"),
            "expected a whole number, 0 or more, found the number 2.5"
        );
        // Other messages are left alone.
        assert_eq!(expected_in_words("unknown field `colour`"), "unknown field `colour`");
    }
}
