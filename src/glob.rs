//! Minimal glob matching (`*` any run, `?` one character) for series names, table column
//! names and restart-file names. No character classes: names in solver logs do not need them.

/// Does `text` match `pattern`? `*` matches any run of characters, `?` exactly one.
pub fn matches(pattern: &str, text: &str) -> bool {
    matches_chars(&pattern.chars().collect::<Vec<_>>(), &text.chars().collect::<Vec<_>>())
}

/// Case-insensitive [`matches`] (ASCII and Unicode simple lowercase).
pub fn matches_ignore_case(pattern: &str, text: &str) -> bool {
    matches(&pattern.to_lowercase(), &text.to_lowercase())
}

/// True when the pattern contains a wildcard.
pub fn is_pattern(s: &str) -> bool {
    s.contains(['*', '?'])
}

fn matches_chars(p: &[char], t: &[char]) -> bool {
    // Iterative matcher with single-star backtracking: linear in practice, no recursion.
    let (mut pi, mut ti) = (0, 0);
    let mut star: Option<(usize, usize)> = None;
    while ti < t.len() {
        if pi < p.len() && (p[pi] == '?' || p[pi] == t[ti]) {
            pi += 1;
            ti += 1;
        } else if pi < p.len() && p[pi] == '*' {
            star = Some((pi, ti));
            pi += 1;
        } else if let Some((sp, st)) = star {
            pi = sp + 1;
            ti = st + 1;
            star = Some((sp, st + 1));
        } else {
            return false;
        }
    }
    p[pi..].iter().all(|&c| c == '*')
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wildcards() {
        assert!(matches("res*", "res_p"));
        assert!(matches("*", ""));
        assert!(matches("run.log.?", "run.log.1"));
        assert!(!matches("run.log.?", "run.log.10"));
        assert!(matches("a*b*c", "axxbyyc"));
        assert!(!matches("a*b*c", "axxbyy"));
        assert!(matches("Cd", "Cd"));
        assert!(!matches("Cd", "Cdx"));
        assert!(matches_ignore_case("RES*", "Residual_Ux"));
        assert!(is_pattern("p*") && !is_pattern("p"));
    }
}
