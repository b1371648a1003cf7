//! Number, duration and size formatting for the live panels.
//!
//! Short, fixed-shape strings so columns line up and a changing value rewrites as few cells
//! as possible over SSH. Ages are quantised (seconds, then minutes, hours, days) and
//! [`age_next_change`] tells the live loop when a label would next change, so an idle screen
//! wakes at most once a second and usually far less.

use std::time::Duration;

use crate::view::number::{non_finite, trim};

/// An iteration number with a space every three digits (`4 870`, `1 204 311`).
pub fn iteration(it: i64) -> String {
    let digits = it.unsigned_abs().to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3 + 1);
    if it < 0 {
        out.push('-');
    }
    for (i, ch) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(' ');
        }
        out.push(ch);
    }
    out
}

/// A value in scientific notation with two significant digits (`3.2e-5`), for residuals.
pub fn sci(v: f64) -> String {
    if !v.is_finite() {
        return non_finite(v);
    }
    if v == 0.0 {
        return "0".into();
    }
    format!("{v:.1e}")
}

/// A value with about five significant digits, fixed point when that is readable
/// (`0.03121`, `412.57`), scientific otherwise (`1.2346e7`); for monitors.
pub fn value(v: f64) -> String {
    if !v.is_finite() {
        return non_finite(v);
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e6).contains(&a) {
        let decimals = (4 - a.log10().floor() as i32).clamp(0, 8) as usize;
        let s = format!("{v:.decimals$}");
        trim(&s)
    } else {
        format!("{v:.4e}")
    }
}

/// A short decimal (`2.1`, `0.04`, `12`) for criterion values and thresholds.
pub fn short(v: f64) -> String {
    if !v.is_finite() {
        return non_finite(v);
    }
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        return format!("{v:.1e}");
    }
    let s = if a >= 100.0 {
        format!("{v:.0}")
    } else if a >= 10.0 {
        format!("{v:.1}")
    } else if a >= 0.1 {
        format!("{v:.2}")
    } else {
        format!("{v:.3}")
    };
    trim(&s)
}

/// A compact age: `12s`, `4m`, `2h`, `3d`.
pub fn age(d: Duration) -> String {
    let s = d.as_secs();
    match s {
        0..60 => format!("{s}s"),
        60..3_600 => format!("{}m", s / 60),
        3_600..86_400 => format!("{}h", s / 3_600),
        _ => format!("{}d", s / 86_400),
    }
}

/// How long until [`age`] of a quantity that is `d` old now shows a different label.
pub fn age_next_change(d: Duration) -> Duration {
    let s = d.as_secs();
    let step = match s {
        0..60 => 1,
        60..3_600 => 60,
        3_600..86_400 => 3_600,
        _ => 86_400,
    };
    let next = Duration::from_secs((s / step + 1) * step);
    next.saturating_sub(d).max(Duration::from_millis(1))
}

/// A duration for ETAs: `45s`, `32 min`, `2.5 h`, `3.1 d`.
pub fn eta(d: Duration) -> String {
    let s = d.as_secs_f64();
    if s < 60.0 {
        format!("{s:.0}s")
    } else if s < 3_600.0 {
        format!("{:.0} min", s / 60.0)
    } else if s < 86_400.0 {
        format!("{:.1} h", s / 3_600.0)
    } else {
        format!("{:.1} d", s / 86_400.0)
    }
}

/// A byte count: `512 B`, `3.4 MB`, `1.2 GB` (powers of 1000).
pub fn bytes(n: u64) -> String {
    const UNITS: [&str; 5] = ["B", "kB", "MB", "GB", "TB"];
    let mut v = n as f64;
    let mut u = 0;
    while v >= 1000.0 && u + 1 < UNITS.len() {
        v /= 1000.0;
        u += 1;
    }
    if u == 0 { format!("{n} B") } else { format!("{v:.1} {}", UNITS[u]) }
}

/// An iteration rate per minute: `38 it/min`, `0.4 it/min`, `1 200 it/min`.
pub fn rate(per_min: f64) -> String {
    if !per_min.is_finite() || per_min < 0.0 {
        return "? it/min".into();
    }
    if per_min >= 10.0 {
        format!("{} it/min", iteration(per_min.round() as i64))
    } else {
        format!("{per_min:.1} it/min")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn iterations_are_grouped() {
        assert_eq!(iteration(0), "0");
        assert_eq!(iteration(870), "870");
        assert_eq!(iteration(4_870), "4 870");
        assert_eq!(iteration(1_204_311), "1 204 311");
        assert_eq!(iteration(-12_000), "-12 000");
    }

    #[test]
    fn values_keep_five_digits() {
        assert_eq!(value(0.031_214_9), "0.031215");
        assert_eq!(value(412.5712), "412.57");
        assert_eq!(value(-1.5), "-1.5");
        assert_eq!(value(12_345_678.0), "1.2346e7");
        assert_eq!(value(f64::NAN), "nan");
        assert_eq!(sci(3.24e-5), "3.2e-5");
        assert_eq!(sci(f64::NEG_INFINITY), "-inf");
        assert_eq!(short(2.1), "2.1");
        assert_eq!(short(3.0), "3");
        assert_eq!(short(0.04), "0.04");
        assert_eq!(short(1e-7), "1.0e-7");
    }

    #[test]
    fn ages_and_their_next_change() {
        assert_eq!(age(Duration::from_millis(4_300)), "4s");
        assert_eq!(age(Duration::from_secs(250)), "4m");
        assert_eq!(age(Duration::from_secs(7_300)), "2h");
        assert_eq!(age(Duration::from_secs(3 * 86_400 + 5)), "3d");
        assert_eq!(age_next_change(Duration::from_millis(4_300)), Duration::from_millis(700));
        assert_eq!(age_next_change(Duration::from_secs(250)), Duration::from_secs(50));
    }

    #[test]
    fn sizes_rates_and_etas() {
        assert_eq!(bytes(512), "512 B");
        assert_eq!(bytes(1_234_000_000), "1.2 GB");
        assert_eq!(rate(38.4), "38 it/min");
        assert_eq!(rate(0.42), "0.4 it/min");
        assert_eq!(rate(1_204.0), "1 204 it/min");
        assert_eq!(eta(Duration::from_secs(1_920)), "32 min");
        assert_eq!(eta(Duration::from_secs(9_000)), "2.5 h");
    }
}
