//! The criteria in effect for each series, and the bookkeeping of criterion results.
//!
//! Defaults are common practice, not law: a residual must drop at least 3 decades
//! from its peak; a monitor must stay within 0.1 % drift and 0.5 % band over the last 500
//! iterations; an absolute residual level and a confidence-interval limit apply only when the
//! user sets them.
//!
//! Per-series overrides are looked up by exact name and by glob (`*`, `?`, [`crate::glob`]).
//! Every matching entry applies, the least specific first: globs in order of increasing
//! pattern length (ties in key order), then the exact entry, so a field set in a more
//! specific entry wins. `ignore` is taken from the most specific matching entry alone, so a
//! series with an entry of its own is judged unless that entry says `ignore`.
//!
//! `since` (first iteration from which a criterion has held continuously to the end) is exact
//! for the residual criteria (the last value of the latest segment above the level: a
//! descent of the store's block maxima, or a backward scan without them) and, for windowed
//! monitor criteria, evaluated at checkpoints every tenth of a window back from the end (at
//! most [`MAX_CHECKPOINTS`]), so its cost is bounded by a few windows; it is then the oldest
//! checkpoint of the unbroken run of held checkpoints, accurate to a tenth of a window.

use crate::glob;
use crate::record::Role;

use super::types::{Comparison, Criteria, CriterionResult, SeriesCriteria};

/// Most checkpoints looked at when dating a windowed criterion.
pub const MAX_CHECKPOINTS: usize = 50;

/// A threshold and whether it came from the built-in defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Limit {
    pub value: f64,
    pub default: bool,
}

/// Everything the judge applies to one series.
#[derive(Debug, Clone, PartialEq)]
pub struct Resolved {
    pub role: Role,
    pub ignore: bool,
    /// The configured window length (default 500).
    pub window: usize,
    /// The window was set by the user and is used exactly as given; otherwise it adapts to
    /// the run ([`super::window`]).
    pub window_explicit: bool,
    /// Reference value for a monitor's relative criteria (`scale` in `settle.toml`).
    pub scale: Option<f64>,
    /// Absolute limits that replace the relative ones of the same criterion.
    pub drift_abs: Option<Limit>,
    pub band_abs: Option<Limit>,
    pub ci_abs: Option<Limit>,
    pub drop: Limit,
    pub below: Option<Limit>,
    pub drift: Limit,
    pub band: Limit,
    pub ci: Option<Limit>,
}

impl Resolved {
    /// Window of the stall, divergence, oscillation and blow-up tests: the criteria window,
    /// at least [`super::limits::MIN_EVIDENCE_WINDOW`].
    pub fn evidence(&self) -> usize {
        self.window.max(super::limits::MIN_EVIDENCE_WINDOW)
    }
}

/// The window length in effect (at least 10 iterations).
pub fn window(criteria: &Criteria) -> usize {
    criteria.window.unwrap_or(Criteria::DEFAULT_WINDOW).max(10)
}

fn limit(series: Option<f64>, run: Option<f64>, default: f64) -> Limit {
    match series.or(run) {
        Some(v) => Limit { value: v, default: false },
        None => Limit { value: default, default: true },
    }
}

/// The matching override entries of `name`, least specific first.
fn matching<'c>(criteria: &'c Criteria, name: &str) -> Vec<&'c SeriesCriteria> {
    let mut globs: Vec<(&String, &SeriesCriteria)> = criteria
        .series
        .iter()
        .filter(|(k, _)| k.as_str() != name && glob::is_pattern(k) && glob::matches(k, name))
        .collect();
    // Stable sort keeps key order among patterns of equal length.
    globs.sort_by_key(|(k, _)| k.chars().count());
    let mut out: Vec<&SeriesCriteria> = globs.into_iter().map(|(_, v)| v).collect();
    if let Some(exact) = criteria.series.get(name) {
        out.push(exact);
    }
    out
}

/// Resolve the criteria of one series given the role its parser assigned.
pub fn resolve(criteria: &Criteria, name: &str, role: Role) -> Resolved {
    let entries = matching(criteria, name);
    let mut over = SeriesCriteria::default();
    for e in &entries {
        over.drop = e.drop.or(over.drop);
        over.below = e.below.or(over.below);
        over.drift = e.drift.or(over.drift);
        over.band = e.band.or(over.band);
        over.ci = e.ci.or(over.ci);
        over.role = e.role.or(over.role);
        over.scale = e.scale.or(over.scale);
        over.drift_abs = e.drift_abs.or(over.drift_abs);
        over.band_abs = e.band_abs.or(over.band_abs);
        over.ci_abs = e.ci_abs.or(over.ci_abs);
    }
    let ignore = entries.last().is_some_and(|e| e.ignore);
    let user = |v: Option<f64>| v.map(|value| Limit { value, default: false });
    Resolved {
        role: over.role.unwrap_or(role),
        ignore,
        window: window(criteria),
        window_explicit: criteria.window.is_some(),
        scale: over.scale.filter(|s| s.is_finite() && *s != 0.0).map(f64::abs),
        drift_abs: user(over.drift_abs),
        band_abs: user(over.band_abs),
        ci_abs: user(over.ci_abs),
        drop: limit(over.drop, criteria.residual_drop, Criteria::DEFAULT_RESIDUAL_DROP),
        below: over.below.or(criteria.residual_below).map(|v| Limit { value: v, default: false }),
        drift: limit(over.drift, criteria.drift, Criteria::DEFAULT_DRIFT_PCT),
        band: limit(over.band, criteria.band, Criteria::DEFAULT_BAND_PCT),
        ci: over.ci.or(criteria.ci).map(|v| Limit { value: v, default: false }),
    }
}

/// Build a criterion result; `met` is false whenever `value` could not be computed (NaN).
pub fn result(
    name: &str,
    series: &str,
    comparison: Comparison,
    lim: Limit,
    value: f64,
    unit: &str,
    since: Option<i64>,
) -> CriterionResult {
    let met = holds(comparison, value, lim.value);
    CriterionResult {
        name: name.into(),
        series: series.into(),
        comparison,
        threshold: lim.value,
        value,
        unit: unit.into(),
        met,
        since: if met { since } else { None },
        default: lim.default,
        window: None,
    }
}

/// Does `value` satisfy the comparison with `threshold`? NaN never does.
pub fn holds(comparison: Comparison, value: f64, threshold: f64) -> bool {
    match comparison {
        Comparison::AtLeast => value >= threshold,
        Comparison::AtMost => value <= threshold,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    #[test]
    fn defaults_and_layering() {
        let mut series = BTreeMap::new();
        series
            .insert("res_*".to_string(), SeriesCriteria { drop: Some(4.0), ..Default::default() });
        series.insert(
            "res_p".to_string(),
            SeriesCriteria { below: Some(1e-5), ..Default::default() },
        );
        series.insert("*".to_string(), SeriesCriteria { ignore: true, ..Default::default() });
        let c = Criteria { drift: Some(0.2), series, ..Default::default() };
        let p = resolve(&c, "res_p", Role::Residual);
        assert_eq!(p.drop, Limit { value: 4.0, default: false });
        assert_eq!(p.below, Some(Limit { value: 1e-5, default: false }));
        assert!(!p.ignore, "its own entry does not ignore it");
        let u = resolve(&c, "res_Ux", Role::Residual);
        assert!(!u.ignore && u.below.is_none() && u.drop.value == 4.0);
        let cd = resolve(&c, "Cd", Role::Monitor);
        assert!(cd.ignore);
        assert_eq!(cd.drift, Limit { value: 0.2, default: false });
        assert_eq!(cd.band, Limit { value: 0.5, default: true });
        assert_eq!(resolve(&Criteria::default(), "x", Role::Monitor).window, 500);
    }

    #[test]
    fn comparisons_and_nan() {
        assert!(holds(Comparison::AtMost, 0.1, 0.1) && !holds(Comparison::AtLeast, f64::NAN, 0.0));
        let r = result(
            "drop",
            "p",
            Comparison::AtLeast,
            Limit { value: 3.0, default: true },
            f64::NAN,
            "dec",
            Some(4),
        );
        assert!(!r.met && r.since.is_none() && r.default);
    }
}
