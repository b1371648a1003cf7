//! The judge's evidence beyond the verdict, worded once for every view: the window a
//! monitor's criteria were computed over, the reference a near-zero monitor is measured
//! against, monitors left unjudged because they carry only round-off, the range of an
//! estimate of iterations to target, and why a run has nothing to judge.
//!
//! The live panels, `check`, the headless lines and the report all call these functions, so
//! the same fact reads the same everywhere (a reader comparing a log line with the report
//! must not have to translate). Plain text: inline code is shown without backticks; the
//! report escapes what it needs itself.

use crate::judge::{
    CriterionResult, Judgement, MonitorSummary, NothingToJudge, Reference, ResidualSummary,
};
use crate::view::{number, words};

/// Why a run has no verdict: the judge's reason (`no data: no values were read`, `nothing
/// to judge: the 3 series read are all info or ignored (…)`), as plain text. The one wording
/// of this reason: `check`, `report`, the headless lines and the panels all use it.
pub fn no_verdict_reason(why: &NothingToJudge) -> String {
    words::without_backticks(&why.to_string())
}

/// `window 312 it`: the iterations a monitor's drift, band and CI were computed over.
pub fn window_words(iterations: usize) -> String {
    format!("window {iterations} it")
}

/// What a monitor's relative criteria are measured against when it is not its mean:
/// `relative to 0.0183 (mean near zero)` or `relative to scale 0.5 (settle.toml)`; `None`
/// for the usual |mean|.
pub fn reference_words(m: &MonitorSummary) -> Option<String> {
    match m.reference {
        Reference::Mean => None,
        Reference::NearZero => {
            Some(format!("relative to {} (mean near zero)", number::value(m.reference_value)))
        }
        Reference::Scale => {
            Some(format!("relative to scale {} (settle.toml)", number::exact(m.reference_value)))
        }
    }
}

/// Said of a monitor that carries only round-off next to its companions (the out-of-plane
/// force of a 2-D case): it is shown, never judged.
pub const ROUND_OFF_WORDS: &str = "not judged (round-off only)";

/// The monitor a criterion belongs to, if the judgement summarised one of that name.
pub fn monitor_of<'a>(j: &'a Judgement, c: &CriterionResult) -> Option<&'a MonitorSummary> {
    j.monitors.iter().find(|m| m.series == c.series)
}

/// The basis of a criterion's value beyond its number: `window 312 it` for a windowed
/// (monitor) criterion, and the reference when it is not the mean (`window 312 it,
/// relative to 0.0183 (mean near zero)`); `None` for residual criteria.
pub fn criterion_basis(j: &Judgement, c: &CriterionResult) -> Option<String> {
    let m = monitor_of(j, c);
    let window = c.window.or_else(|| m.map(|m| m.window).filter(|&w| w > 0));
    let mut parts: Vec<String> = window.map(window_words).into_iter().collect();
    if c.unit == "%"
        && let Some(r) = m.and_then(reference_words)
    {
        parts.push(r);
    }
    (!parts.is_empty()).then(|| parts.join(", "))
}

/// The monitors left unjudged because they carry only round-off, by name.
pub fn round_off_monitors(j: &Judgement) -> Vec<&str> {
    j.monitors.iter().filter(|m| m.round_off).map(|m| m.series.as_str()).collect()
}

/// The range of an estimate of iterations to target, fewest to most, rounded as the
/// estimate is (`600–1400`; `dash` is `-` for ASCII output); `None` without a range.
pub fn eta_range(r: &ResidualSummary, dash: &str) -> Option<String> {
    eta_range_text(r.eta_range?, dash)
}

/// [`eta_range`] of a bare `(fewest, most)` pair.
pub fn eta_range_text((lo, hi): (f64, f64), dash: &str) -> Option<String> {
    if !(lo.is_finite() && hi.is_finite()) || lo < 0.0 || hi < lo {
        return None;
    }
    Some(format!("{}{dash}{}", eta_number(lo), eta_number(hi)))
}

/// An estimate of iterations rounded to what it is worth: exact below 100, two significant
/// digits above (an estimate from a fitted rate is not good to the iteration).
pub fn eta_number(e: f64) -> String {
    if e < 100.0 {
        return format!("{}", e.round());
    }
    let mag = 10f64.powi(e.log10().floor() as i32 - 1);
    format!("{}", (e / mag).round() * mag)
}

/// The residual whose estimate to target is the longest (the one the run waits for), among
/// those with an estimate.
pub fn slowest_residual(j: &Judgement) -> Option<&ResidualSummary> {
    j.residuals
        .iter()
        .filter(|r| r.eta_iterations.is_some_and(|e| e.is_finite() && e >= 0.0))
        .max_by(|a, b| a.eta_iterations.unwrap_or(0.0).total_cmp(&b.eta_iterations.unwrap_or(0.0)))
}

/// `~900 it (600–1400)`: the estimate of `r` with its range when it has one.
pub fn eta_words(r: &ResidualSummary, dash: &str) -> Option<String> {
    let e = r.eta_iterations.filter(|e| e.is_finite() && *e >= 0.0)?;
    Some(match eta_range(r, dash) {
        Some(range) => format!("~{} it ({range})", eta_number(e)),
        None => format!("~{} it", eta_number(e)),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_reason_has_no_backticks() {
        let why = NothingToJudge::NothingJudged { series: 3 };
        let text = no_verdict_reason(&why);
        assert!(!text.contains('`'), "{text}");
        assert!(text.starts_with("nothing to judge: the 3 series read are all info"), "{text}");
        assert_eq!(no_verdict_reason(&NothingToJudge::NoData), "no data: no values were read");
    }

    #[test]
    fn references_and_windows() {
        let mut m = MonitorSummary { series: "Fy".into(), window: 312, ..Default::default() };
        assert_eq!(reference_words(&m), None);
        m.reference = Reference::NearZero;
        m.reference_value = 0.018_34;
        assert_eq!(reference_words(&m).as_deref(), Some("relative to 0.0183 (mean near zero)"));
        m.reference = Reference::Scale;
        m.reference_value = 0.5;
        assert_eq!(reference_words(&m).as_deref(), Some("relative to scale 0.5 (settle.toml)"));
        let j = Judgement { monitors: vec![m], ..Default::default() };
        let c = CriterionResult {
            name: "drift".into(),
            series: "Fy".into(),
            unit: "%".into(),
            window: Some(312),
            ..Default::default()
        };
        assert_eq!(
            criterion_basis(&j, &c).as_deref(),
            Some("window 312 it, relative to scale 0.5 (settle.toml)")
        );
        let res = CriterionResult { series: "p".into(), unit: "dec".into(), ..Default::default() };
        assert_eq!(criterion_basis(&j, &res), None);
    }

    #[test]
    fn eta_with_its_range() {
        let r = ResidualSummary {
            series: "p".into(),
            eta_iterations: Some(912.0),
            eta_range: Some((604.0, 1_437.0)),
            ..Default::default()
        };
        assert_eq!(eta_words(&r, "–").as_deref(), Some("~910 it (600–1400)"));
        assert_eq!(eta_words(&r, "-").as_deref(), Some("~910 it (600-1400)"));
        let bare = ResidualSummary { eta_iterations: Some(42.4), ..Default::default() };
        assert_eq!(eta_words(&bare, "–").as_deref(), Some("~42 it"));
        assert_eq!(eta_words(&ResidualSummary::default(), "–"), None);
    }
}
