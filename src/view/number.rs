//! Numbers for people: one rule for every view of a run (live panels, report, text lines).
//!
//! * A value that comes with an uncertainty (a confidence interval) is shown to the decimal
//!   place the uncertainty supports, and the uncertainty itself to one or two significant
//!   digits: [`with_uncertainty`], [`interval`]. The rounding rule is the one the Particle
//!   Data Group publishes in the introduction of its *Review of Particle Physics*: keep two
//!   significant digits of the uncertainty when its three leading digits are 100–354, one
//!   when they are 355–949, and round 950–999 up to 1000 keeping two. The GUM (JCGM
//!   100:2008, §7.2.6) asks for the same thing in general terms: at most two significant
//!   digits for the uncertainty, and the estimate rounded to match.
//! * Any other measured value gets three significant digits ([`value`], [`sig`]), fixed point
//!   between 10⁻³ and 10⁵ (integer digits are never replaced by zeros), scientific outside.
//! * A threshold the user (or a default) set is shown exactly as given ([`exact`]): `0.1`,
//!   not `0.100`.
//!
//! Trailing zeros are dropped from [`value`] (a compact display), but kept by
//! [`with_uncertainty`] and [`interval`], where they are significant (`0.83 ± 0.10`).
//! Non-finite values read `nan`, `inf`, `-inf`; callers that prefer `n/a` map NaN first.

/// A value with three significant digits: `0.029`, `6.92`, `439`, `19829`, `3.24e-5`.
pub fn value(v: f64) -> String {
    sig(v, 3)
}

/// `v` with `digits` significant digits (at least 1), trailing zeros dropped. Fixed point for
/// 10⁻³ ≤ |v| < 10⁵, keeping every integer digit; scientific (`1.5e-5`, `2.5e7`) outside.
pub fn sig(v: f64, digits: u32) -> String {
    if !v.is_finite() {
        return non_finite(v);
    }
    if v == 0.0 {
        return "0".into();
    }
    let digits = digits.max(1);
    let (_, exp) = split_sci(v, digits);
    if (-3..5).contains(&exp) {
        let decimals = (digits as i32 - 1 - exp).max(0) as usize;
        trim(&format!("{v:.decimals$}"))
    } else {
        sci(v, digits as usize - 1, true)
    }
}

/// A threshold as it was set: the shortest text that reads back as the same number (`0.1`,
/// `3`, `1e-5`, `2.5e6`).
pub fn exact(v: f64) -> String {
    if !v.is_finite() {
        return non_finite(v);
    }
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e6).contains(&a) { format!("{v:e}") } else { format!("{v}") }
}

/// A value and its uncertainty, rounded together (see the module notes).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Rounded {
    pub value: String,
    pub uncertainty: String,
    /// Power of ten of the last digit kept (−3 for `0.123`, 2 for `600`); `None` when there
    /// was no usable uncertainty and three significant digits were used instead.
    pub place: Option<i32>,
}

/// `v` and the half-width `u` of its confidence interval, each to the decimal place `u`
/// supports. A missing, zero or non-finite `u` gives [`value`] for both numbers.
pub fn with_uncertainty(v: f64, u: f64) -> Rounded {
    match last_place(u) {
        Some(place) if v.is_finite() => {
            let u_shown = round_to(u.abs(), place);
            Rounded {
                value: at_place(v, place),
                uncertainty: at_place(u_shown, place),
                place: Some(place),
            }
        }
        _ => Rounded { value: value(v), uncertainty: value(u), place: None },
    }
}

/// A value with its confidence interval `[lo, hi]`, all three to the place the interval's
/// half-width supports: `(-3.32, -3.35, -3.28)`.
pub fn interval(v: f64, lo: f64, hi: f64) -> (String, String, String) {
    let half = (hi - lo).abs() / 2.0;
    match last_place(half) {
        Some(place) if v.is_finite() && lo.is_finite() && hi.is_finite() => {
            (at_place(v, place), at_place(lo, place), at_place(hi, place))
        }
        _ => (value(v), value(lo), value(hi)),
    }
}

/// `v` rounded to the digit at 10^`place` and written with exactly the digits down to that
/// place: fixed point when that stays short, scientific otherwise.
pub fn at_place(v: f64, place: i32) -> String {
    if !v.is_finite() {
        return non_finite(v);
    }
    let r = round_to(v, place);
    let a = r.abs();
    let decimals = -place;
    let fixed_ok = a < 1e6 && decimals <= 9 && (a >= 1e-3 || a == 0.0);
    if fixed_ok {
        if decimals >= 0 { format!("{r:.0$}", decimals as usize) } else { format!("{r:.0}") }
    } else {
        let exp = if r == 0.0 { place } else { split_sci(r, 12).1 };
        sci(r, (exp - place).clamp(0, 15) as usize, false)
    }
}

/// An integer with groups of three digits separated by `sep` (`4 870`; the report uses a
/// narrow no-break space).
pub fn grouped(i: i64, sep: char) -> String {
    let digits = i.unsigned_abs().to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3 * 3 + 1);
    if i < 0 {
        out.push('-');
    }
    for (k, ch) in digits.chars().enumerate() {
        if k > 0 && (digits.len() - k) % 3 == 0 {
            out.push(sep);
        }
        out.push(ch);
    }
    out
}

/// The power of ten of the last digit to keep for an uncertainty `u` (PDG rule), or `None`
/// when `u` is not a positive finite number.
fn last_place(u: f64) -> Option<i32> {
    let u = u.abs();
    if !u.is_finite() || u == 0.0 {
        return None;
    }
    // The three leading digits, read from the decimal text so that 0.119 gives 119.
    let (mantissa, exp) = split_sci(u, 6);
    let lead: u32 =
        mantissa.chars().filter(char::is_ascii_digit).take(3).collect::<String>().parse().ok()?;
    Some(match lead {
        0..=354 => exp - 1,
        355..=949 => exp,
        // 950–999 rounds up to 1000: two significant digits of the next decade.
        _ => exp,
    })
}

/// `v` rounded to a multiple of 10^`place`.
fn round_to(v: f64, place: i32) -> f64 {
    if place >= 0 {
        let m = 10f64.powi(place);
        (v / m).round() * m
    } else {
        let m = 10f64.powi(-place);
        (v * m).round() / m
    }
}

/// Mantissa text and exponent of `v` in scientific notation with `digits` significant
/// digits (after rounding, so 9.996 with 3 digits gives exponent 1).
fn split_sci(v: f64, digits: u32) -> (String, i32) {
    let s = format!("{:.*e}", digits.saturating_sub(1) as usize, v);
    match s.split_once('e') {
        Some((m, e)) => (m.to_string(), e.parse().unwrap_or(0)),
        None => (s, 0),
    }
}

/// Scientific notation with `decimals` mantissa decimals: `1.5e-5`; trailing zeros of the
/// mantissa dropped when `trim_zeros`.
fn sci(v: f64, decimals: usize, trim_zeros: bool) -> String {
    let s = format!("{v:.decimals$e}");
    match s.split_once('e') {
        Some((m, e)) if trim_zeros => format!("{}e{e}", trim(m)),
        _ => s,
    }
}

/// `s` without trailing zeros after a decimal point (`1.500` → `1.5`, `2.0` → `2`).
pub(crate) fn trim(s: &str) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s.into()
    }
}

/// `nan`, `inf` or `-inf`: how every view spells a value that is not finite.
pub(crate) fn non_finite(v: f64) -> String {
    if v.is_nan() {
        "nan".into()
    } else if v > 0.0 {
        "inf".into()
    } else {
        "-inf".into()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pdg_rounding_examples() {
        // Particle Data Group, Review of Particle Physics, introduction ("rounding"): 0.827 ±
        // 0.119 appears as 0.83 ± 0.12, and 0.827 ± 0.367 as 0.8 ± 0.4 (from memory).
        let r = with_uncertainty(0.827, 0.119);
        assert_eq!((r.value.as_str(), r.uncertainty.as_str()), ("0.83", "0.12"));
        let r = with_uncertainty(0.827, 0.367);
        assert_eq!((r.value.as_str(), r.uncertainty.as_str()), ("0.8", "0.4"));
        // 950–999 rounds up to 1000 with two significant digits (same source).
        let r = with_uncertainty(12.3456, 0.0987);
        assert_eq!((r.value.as_str(), r.uncertainty.as_str()), ("12.35", "0.10"));
        // Boundaries of the three-digit rule: 354 keeps two digits, 355 one.
        assert_eq!(with_uncertainty(1.0, 0.354).uncertainty, "0.35");
        assert_eq!(with_uncertainty(1.0, 0.355).uncertainty, "0.4");
    }

    #[test]
    fn the_uncertainty_sets_the_decimals() {
        // Numbers from the issue that asked for this rule: a slope with its CI, a monitor
        // mean with a tiny CI, and one with a huge CI.
        // Half-width 0.0337: leading digits 337, two significant digits, so 10⁻³.
        assert_eq!(
            interval(-3.31865, -3.3524, -3.28491),
            ("-3.319".into(), "-3.352".into(), "-3.285".into())
        );
        // Half-width 0.5: one digit.
        assert_eq!(interval(2.04, 1.5, 2.5), ("2.0".into(), "1.5".into(), "2.5".into()));
        let r = with_uncertainty(0.266274, 6.8987e-6);
        assert_eq!((r.value.as_str(), r.uncertainty.as_str()), ("0.266274", "7e-6"));
        let r = with_uncertainty(603.49, 515.35);
        assert_eq!((r.value.as_str(), r.uncertainty.as_str(), r.place), ("600", "500", Some(2)));
        let r = with_uncertainty(0.0554243, 2.3563e-7);
        assert_eq!((r.value.as_str(), r.uncertainty.as_str()), ("0.05542430", "2.4e-7"));
        // Very small values go scientific with the same last digit.
        let r = with_uncertainty(3.2e-9, 1.2e-11);
        assert_eq!((r.value.as_str(), r.uncertainty.as_str()), ("3.200e-9", "1.2e-11"));
        // No usable uncertainty: three significant digits.
        let r = with_uncertainty(0.0289755, f64::NAN);
        assert_eq!(r.value, "0.029");
        assert_eq!(with_uncertainty(5.0, 0.0).value, "5");
    }

    #[test]
    fn three_significant_digits_otherwise() {
        assert_eq!(value(0.0289755), "0.029");
        assert_eq!(value(6.9151), "6.92");
        assert_eq!(value(7.83609), "7.84");
        assert_eq!(value(439.036), "439");
        assert_eq!(value(19829.0), "19829");
        assert_eq!(value(123456.0), "1.23e5");
        assert_eq!(value(1.2159e-7), "1.22e-7");
        assert_eq!(value(9.996), "10");
        assert_eq!(value(0.0009996), "0.001");
        assert_eq!(value(-0.59), "-0.59");
        assert_eq!(value(1.0), "1");
        assert_eq!(value(0.0), "0");
        assert_eq!(value(f64::NAN), "nan");
        assert_eq!(value(f64::NEG_INFINITY), "-inf");
        assert_eq!(sig(3.24e-5, 2), "3.2e-5");
        assert_eq!(sig(0.031_214_9, 5), "0.031215");
    }

    #[test]
    fn thresholds_are_shown_as_set() {
        assert_eq!(exact(0.1), "0.1");
        assert_eq!(exact(3.0), "3");
        assert_eq!(exact(0.25), "0.25");
        assert_eq!(exact(1e-5), "1e-5");
        assert_eq!(exact(2.5e6), "2.5e6");
    }

    #[test]
    fn digits_are_grouped() {
        assert_eq!(grouped(0, ' '), "0");
        assert_eq!(grouped(4_870, ' '), "4 870");
        assert_eq!(grouped(-1_204_311, ' '), "-1 204 311");
        assert_eq!(grouped(3_140, '\u{202f}'), "3\u{202f}140");
    }
}
