//! Words and number formats shared by every report format, and escaping of text that came
//! from logs.
//!
//! Every string that may hold text from a log (series names, messages, file names) passes
//! through [`xml`] (HTML and SVG) or [`md`] (Markdown) before it is written, so a log line can
//! neither inject markup nor put control characters into a report.

use crate::judge::{Comparison, CriterionResult, Finding, FindingKind, Verdict};
use crate::view::number;

/// The safety statement of every report (README, the caution at the top), in plain words.
pub const SAFETY: &str = "A convergence verdict is evidence drawn from the solver's own output \
    by statistical tests; it is not proof that the solution is correct. Iterative convergence \
    only shows that the solver settled on an answer to the equations it was given: it says \
    nothing about whether the physical model, the boundary conditions or the mesh are adequate \
    for the question being asked. Decisions about designs that can hurt people rest with \
    qualified engineers, backed by validation against experiment and by the codes and \
    standards that apply where the design will be used.";

/// Short heading of the safety statement.
pub const SAFETY_TITLE: &str = "What this report can and cannot tell you";

/// Note under the criteria table.
pub const DEFAULTS_NOTE: &str = "Thresholds marked \"default\" are the built-in values: common \
    practice, not a rule from any standard. Set your own in settle.toml.";

/// What each verdict means, for the line under the verdict.
pub fn verdict_meaning(v: Verdict) -> &'static str {
    match v {
        Verdict::Converged => "every criterion in effect holds at the end of the data",
        Verdict::Converging => {
            "not every criterion holds yet, but the residuals fall at a healthy rate and \
             nothing wrong was found"
        }
        Verdict::Stalled => "a residual has stopped falling while it is still above its target",
        Verdict::Oscillating => {
            "a significant periodic component keeps the criteria from being met"
        }
        Verdict::Diverging => {
            "the solution is blowing up: growing residuals or monitors, non-finite values or a \
             crash"
        }
        Verdict::Suspect => {
            "the residual criteria are met but a monitor still moves, or another sign of false \
             convergence was found"
        }
        Verdict::Stale => "the log stopped growing without an end-of-run mark",
    }
}

/// The verdict in capitals, as shown in the report heading.
pub fn verdict_word(v: Verdict) -> String {
    v.as_str().to_uppercase()
}

/// What `Judgement::since` means for this verdict.
pub fn since_text(v: Verdict, since: Option<i64>) -> Option<String> {
    let it = iteration(since?);
    Some(match v {
        Verdict::Converged => format!("all criteria held together from iteration {it}"),
        _ => format!("evidence from iteration {it}"),
    })
}

/// A finding kind in words.
pub fn kind_words(k: FindingKind) -> &'static str {
    match k {
        FindingKind::Stall => "stall",
        FindingKind::Divergence => "divergence",
        FindingKind::NonFinite => "non-finite value",
        FindingKind::BlowUp => "blow-up",
        FindingKind::Crash => "crash",
        FindingKind::Oscillation => "oscillation",
        FindingKind::MonitorDrift => "monitor drift",
        FindingKind::FalseConvergence => "false convergence",
        FindingKind::SolverStoppedEarly => "solver stopped early",
        FindingKind::FrozenResidual => "frozen residual",
        FindingKind::StepDrop => "drop in one step",
        FindingKind::Glitch => "one-iteration glitch",
        FindingKind::LowStart => "low start",
        FindingKind::FrequentWarnings => "frequent warnings",
        FindingKind::Trend => "trend",
        FindingKind::IterativeError => "iterative error",
        FindingKind::Restart => "restart",
        FindingKind::Stale => "stale",
        FindingKind::Action => "action",
        FindingKind::GrowingOscillation => "growing oscillation",
        FindingKind::RoundOff => "round-off only",
        FindingKind::Holding => "criteria met, holding",
    }
}

/// A criterion name in words.
pub fn criterion_words(name: &str) -> String {
    match name {
        "drop" => "residual drop from its peak".into(),
        "below" => "residual level".into(),
        "drift" => "monitor drift over the window".into(),
        "band" => "monitor band over the window".into(),
        "ci" => "95 % CI half-width of the mean".into(),
        other => other.into(),
    }
}

/// Threshold with its comparison: `≥ 3 dec`, `≤ 0.1 %`.
pub fn threshold_text(c: &CriterionResult) -> String {
    let op = match c.comparison {
        Comparison::AtLeast => "≥",
        Comparison::AtMost => "≤",
    };
    let unit = if c.unit.is_empty() { String::new() } else { format!("{NBSP}{}", c.unit) };
    format!("{op}{NBSP}{}{unit}", exact(c.threshold))
}

/// A no-break space: between a number and its unit, so a narrow table cell never puts the
/// unit on a line of its own.
pub const NBSP: char = '\u{a0}';

/// A number with its unit (`dec`, `%` or none), joined by a no-break space.
pub fn with_unit(v: f64, unit: &str) -> String {
    if unit.is_empty() || !v.is_finite() { num(v) } else { format!("{}{NBSP}{unit}", num(v)) }
}

/// A measured number for tables and sentences: three significant digits
/// ([`crate::view::number::value`], the rule every view shares), `n/a` for NaN.
pub fn num(v: f64) -> String {
    if v.is_nan() { "n/a".into() } else { number::value(v) }
}

/// A threshold as it was set (`0.1`, `3`, `1e-5`).
pub fn exact(v: f64) -> String {
    if v.is_nan() { "n/a".into() } else { number::exact(v) }
}

/// `mean ± half-width` to the precision the interval supports (`0.266274 ± 7e-6`).
pub fn plus_minus(v: f64, half: f64) -> String {
    let r = number::with_uncertainty(v, half);
    if v.is_nan() { "n/a".into() } else { format!("{}{NBSP}±{NBSP}{}", r.value, r.uncertainty) }
}

/// An iteration number with thin groups of three digits (`12 480`).
pub fn iteration(i: i64) -> String {
    number::grouped(i, '\u{202f}')
}

/// An iteration range `a–b`.
pub fn range(first: i64, last: i64) -> String {
    if first == last {
        iteration(first)
    } else {
        format!("{}–{}", iteration(first), iteration(last))
    }
}

/// The evidence of a finding in one line: statistic, value, threshold, p-value, period,
/// amplitude. `amplitude_unit` is `dec` for residuals and `%` for monitors.
pub fn evidence(f: &Finding, amplitude_unit: &str) -> String {
    let mut parts = Vec::new();
    let stat = if f.statistic.is_empty() { "value" } else { f.statistic.as_str() };
    match f.threshold {
        Some(t) => parts.push(format!("{stat} = {} (threshold {})", num(f.value), num(t))),
        None => parts.push(format!("{stat} = {}", num(f.value))),
    }
    if let Some(p) = f.p_value {
        parts.push(format!("p = {}", p_value(p)));
    }
    if let Some(t) = f.period {
        parts.push(format!("period {} it", num(t)));
    }
    if let Some(a) = f.amplitude {
        parts.push(format!("amplitude {}", with_unit(a, amplitude_unit)));
    }
    parts.push(format!("iterations {}", range(f.first, f.last)));
    parts.join("; ")
}

/// A p-value: tiny ones as `< 1e-12` rather than a misleading `0`.
pub fn p_value(p: f64) -> String {
    if p < 1e-12 { "< 1e-12".into() } else { num(p) }
}

/// A file size in bytes with a readable unit beside it.
pub fn bytes(n: u64) -> String {
    const UNITS: [&str; 4] = ["KiB", "MiB", "GiB", "TiB"];
    if n < 1024 {
        return format!("{n} B");
    }
    let mut v = n as f64;
    let mut unit = "B";
    for u in UNITS {
        if v < 1024.0 {
            break;
        }
        v /= 1024.0;
        unit = u;
    }
    format!("{n} B ({v:.1} {unit})")
}

/// Replace control characters (and the XML non-characters U+FFFE/U+FFFF) by a space or
/// U+FFFD so that no raw control byte from a log reaches a report.
pub fn clean(s: &str) -> impl Iterator<Item = char> + '_ {
    s.chars().map(|c| match c {
        '\u{fffe}' | '\u{ffff}' => '\u{fffd}',
        c if c.is_control() => ' ',
        c => c,
    })
}

/// Escape text for HTML and SVG (element content and quoted attribute values).
pub fn xml(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 8);
    for c in clean(s) {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// Escape text for a Markdown paragraph or table cell: punctuation that Markdown (or HTML
/// inside Markdown) would interpret is backslash-escaped.
pub fn md(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 8);
    for c in clean(s) {
        match c {
            '\\' | '`' | '*' | '_' | '[' | ']' | '<' | '>' | '|' | '~' | '&' | '#' | '!' | '$' => {
                out.push('\\');
                out.push(c);
            }
            c => out.push(c),
        }
    }
    out
}

/// A name made safe for a file name: ASCII letters, digits, `-` and `_`, at most 40 chars.
pub fn slug(s: &str) -> String {
    let mut out: String = s
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() || c == '-' || c == '_' { c } else { '-' })
        .take(40)
        .collect();
    if out.is_empty() {
        out.push_str("series");
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_compact_and_honest() {
        assert_eq!(num(0.031214567), "0.0312");
        assert_eq!(num(1.5e-5), "1.5e-5");
        assert_eq!(num(-2.0e7), "-2e7");
        assert_eq!(num(3.0), "3");
        assert_eq!(num(12345.7), "12346");
        assert_eq!(num(f64::NAN), "n/a");
        assert_eq!(num(0.001), "0.001");
        assert_eq!(exact(0.1), "0.1");
        assert_eq!(plus_minus(0.266274, 6.8987e-6), "0.266274\u{a0}±\u{a0}7e-6");
        assert_eq!(with_unit(6.9151, "dec"), "6.92\u{a0}dec");
        assert_eq!(p_value(0.0), "< 1e-12");
    }

    #[test]
    fn iterations_group_digits() {
        assert_eq!(iteration(3140), "3\u{202f}140");
        assert_eq!(iteration(999), "999");
        assert_eq!(iteration(-1_234_567), "-1\u{202f}234\u{202f}567");
    }

    #[test]
    fn escaping_removes_markup_and_control_characters() {
        assert_eq!(xml("a<b>&\"c'\u{1b}[31m\u{7}"), "a&lt;b&gt;&amp;&quot;c&#39; [31m ");
        assert_eq!(md("res_p|x*<y>\n"), "res\\_p\\|x\\*\\<y\\> ");
        assert_eq!(slug("Cd (wing)/total"), "Cd--wing--total");
    }
}
