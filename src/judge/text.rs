//! Number formatting for the one-sentence `detail` of findings.
//!
//! Details are read by people deciding about a run, so numbers are short: three significant
//! digits, plain notation in the everyday range and `1.2e-5` style outside it.

/// A value with three significant digits.
pub fn num(v: f64) -> String {
    if v.is_nan() {
        return "n/a".into();
    }
    if v.is_infinite() {
        return if v > 0.0 { "+inf".into() } else { "-inf".into() };
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        let digits = (2 - a.log10().floor() as i32).max(0) as usize;
        let s = format!("{v:.digits$}");
        trim_zeros(&s)
    } else {
        let s = format!("{v:.2e}");
        // "1.20e-5" → "1.2e-5"
        match s.split_once('e') {
            Some((m, e)) => format!("{}e{}", trim_zeros(m), e),
            None => s,
        }
    }
}

/// A percentage such as `0.08 %` (two significant digits below 10 %).
pub fn pct(v: f64) -> String {
    if !v.is_finite() {
        return format!("{} %", num(v));
    }
    let a = v.abs();
    let s = if a == 0.0 {
        "0".to_string()
    } else if a < 10.0 {
        let digits = (1 - a.log10().floor() as i32).max(0) as usize;
        trim_zeros(&format!("{v:.digits$}"))
    } else {
        format!("{v:.0}")
    };
    format!("{s} %")
}

/// A signed percentage (`+0.8 %`).
pub fn signed_pct(v: f64) -> String {
    if v > 0.0 { format!("+{}", pct(v)) } else { pct(v) }
}

/// Decades with two decimals (`2.10 dec` → `2.1`).
pub fn dec(v: f64) -> String {
    if !v.is_finite() {
        return num(v);
    }
    trim_zeros(&format!("{v:.2}"))
}

/// A whole number of iterations.
pub fn its(v: f64) -> String {
    if !v.is_finite() {
        return num(v);
    }
    format!("{:.0}", v.round())
}

fn trim_zeros(s: &str) -> String {
    if s.contains('.') {
        let t = s.trim_end_matches('0').trim_end_matches('.');
        if t.is_empty() || t == "-" { "0".into() } else { t.to_string() }
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats() {
        assert_eq!(num(0.031214), "0.0312");
        assert_eq!(num(12.345), "12.3");
        assert_eq!(num(1.2e-5), "1.2e-5");
        assert_eq!(num(-3.0), "-3");
        assert_eq!(num(123456.0), "1.23e5");
        assert_eq!(pct(0.0812), "0.081 %");
        assert_eq!(pct(0.8), "0.8 %");
        assert_eq!(signed_pct(0.8), "+0.8 %");
        assert_eq!(pct(42.4), "42 %");
        assert_eq!(dec(2.104), "2.1");
        assert_eq!(its(1700.4), "1700");
    }
}
