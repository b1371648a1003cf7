//! Inputs and outputs of the judge: series views in, findings + criteria + verdict out.
//!
//! These types are the contract between the judge and everything around it (store, `check`,
//! the live panels, the report). They hold plain data and derive `Default` so that views and
//! tests can build them field by field.

use std::borrow::Cow;
use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::record::{Event, Role};

/// One series as the judge sees it: values against iteration numbers.
#[derive(Debug, Clone, Default)]
pub struct SeriesInput<'a> {
    pub name: Cow<'a, str>,
    pub role: Role,
    /// Iteration (steady) or time-step number (unsteady) of each value; same length as
    /// `values`. Non-decreasing within a segment.
    pub iterations: Cow<'a, [i64]>,
    pub values: Cow<'a, [f64]>,
    /// Indices into `values` where a new segment (restart) begins; always starts with 0 when
    /// the series is non-empty.
    pub segment_starts: Vec<usize>,
    /// The store's running aggregates of this series ([`super::history::History`]), so the
    /// judge need not scan the whole run; `None` (and a history that does not match the
    /// values) makes the judge scan, with the same result.
    pub history: Option<&'a super::history::History>,
}

/// Everything the judge needs about one run. Built by the run store; no file access.
#[derive(Debug, Clone, Default)]
pub struct RunInput<'a> {
    pub series: Vec<SeriesInput<'a>>,
    /// Parser events in order (warnings, errors, crash signatures, solver's own marks).
    pub events: Vec<Cow<'a, Event>>,
    /// The solver printed its end-of-run mark.
    pub ended: bool,
    /// Iteration of the end-of-run mark, when known.
    pub ended_at: Option<i64>,
}

/// The state of a run. Lowercase in JSON and on the command line.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, Default, PartialOrd, Ord,
)]
#[serde(rename_all = "lowercase")]
pub enum Verdict {
    Diverging,
    Oscillating,
    Suspect,
    Stalled,
    #[default]
    Converging,
    Converged,
    /// Live only: the log stopped growing with no end-of-run mark.
    Stale,
}

impl Verdict {
    /// Every verdict, in the documented order.
    pub const ALL: [Verdict; 7] = [
        Verdict::Converged,
        Verdict::Converging,
        Verdict::Stalled,
        Verdict::Oscillating,
        Verdict::Diverging,
        Verdict::Suspect,
        Verdict::Stale,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Converged => "converged",
            Verdict::Converging => "converging",
            Verdict::Stalled => "stalled",
            Verdict::Oscillating => "oscillating",
            Verdict::Diverging => "diverging",
            Verdict::Suspect => "suspect",
            Verdict::Stale => "stale",
        }
    }

    /// Process exit code of `settle check` and headless `watch` for this verdict.
    ///
    /// 0 for `converged` so that `settle check case && next-step` works; the others are
    /// distinct and avoid 1 (error) and 2 (usage error).
    pub fn exit_code(self) -> i32 {
        match self {
            Verdict::Converged => 0,
            Verdict::Converging => 10,
            Verdict::Stalled => 11,
            Verdict::Oscillating => 12,
            Verdict::Suspect => 13,
            Verdict::Diverging => 14,
            Verdict::Stale => 15,
        }
    }

    pub fn parse(word: &str) -> Option<Verdict> {
        Verdict::ALL.into_iter().find(|v| v.as_str() == word)
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// What a finding detected.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum FindingKind {
    /// A residual stopped falling above its target.
    #[default]
    Stall,
    /// A residual growing significantly after the start-up transient.
    Divergence,
    /// A value was NaN, infinite or an overflow field (`*****`).
    NonFinite,
    /// A monitor or indicator grew by orders of magnitude.
    BlowUp,
    /// The log ends in an error message or crash signature without an end-of-run mark.
    Crash,
    /// A significant periodic component (Fisher's g-test).
    Oscillation,
    /// A monitor still drifts or its band is too wide over the final window.
    MonitorDrift,
    /// Residual criteria met while a monitor fails stationarity.
    FalseConvergence,
    /// The solver's own end or convergence mark was reached while a monitor still drifts.
    SolverStoppedEarly,
    /// A residual repeats exactly the same value.
    FrozenResidual,
    /// A drop of many decades in one step (reset or normalisation artefact).
    StepDrop,
    /// One value a decade or more above both its neighbours (a failed solve), left out of
    /// the peak the drop is measured from (informational).
    Glitch,
    /// The drop is measured from a first value far below the later peak.
    LowStart,
    /// Warnings (for instance clipping) in most records.
    FrequentWarnings,
    /// A residual is falling: rate and estimated iterations to target (informational).
    Trend,
    /// Iterative-error estimate of a monitor (informational).
    IterativeError,
    /// A restart (new segment) was seen (informational).
    Restart,
    /// The run stopped growing (live only).
    Stale,
    /// An action ran (live only): command, exit status.
    Action,
    /// An oscillation whose amplitude grows cycle after cycle (the prelude of a blow-up).
    GrowingOscillation,
    /// A monitor that carries only round-off next to its companions (the out-of-plane force
    /// of a 2-D case): reported, not judged (informational).
    RoundOff,
    /// Every criterion holds, but a monitor's not yet for long enough to call the run
    /// `converged` (it holds the verdict at `converging`).
    Holding,
}

impl FindingKind {
    pub fn as_str(self) -> &'static str {
        match self {
            FindingKind::Stall => "stall",
            FindingKind::Divergence => "divergence",
            FindingKind::NonFinite => "non_finite",
            FindingKind::BlowUp => "blow_up",
            FindingKind::Crash => "crash",
            FindingKind::Oscillation => "oscillation",
            FindingKind::MonitorDrift => "monitor_drift",
            FindingKind::FalseConvergence => "false_convergence",
            FindingKind::SolverStoppedEarly => "solver_stopped_early",
            FindingKind::FrozenResidual => "frozen_residual",
            FindingKind::StepDrop => "step_drop",
            FindingKind::Glitch => "glitch",
            FindingKind::LowStart => "low_start",
            FindingKind::FrequentWarnings => "frequent_warnings",
            FindingKind::Trend => "trend",
            FindingKind::IterativeError => "iterative_error",
            FindingKind::Restart => "restart",
            FindingKind::Stale => "stale",
            FindingKind::Action => "action",
            FindingKind::GrowingOscillation => "growing_oscillation",
            FindingKind::RoundOff => "round_off",
            FindingKind::Holding => "holding",
        }
    }
}

/// A detected condition with its evidence.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct Finding {
    pub kind: FindingKind,
    /// The series it concerns, if one.
    pub series: Option<String>,
    /// First and last iteration of the evidence window.
    pub first: i64,
    pub last: i64,
    /// Name of the statistic (`slope_dec_per_kit`, `fisher_g`, `drift_pct`, ...).
    pub statistic: String,
    pub value: f64,
    /// The threshold the statistic was compared with, when there is one.
    pub threshold: Option<f64>,
    pub p_value: Option<f64>,
    /// Period in iterations (oscillation findings).
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub period: Option<f64>,
    /// Amplitude: decades for residuals, percent of the mean for monitors (oscillation).
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub amplitude: Option<f64>,
    /// The verdict this finding argues for; `None` for informational findings.
    pub supports: Option<Verdict>,
    /// One sentence a practitioner understands.
    pub detail: String,
}

/// How a criterion compares value and threshold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Comparison {
    /// Met when value ≥ threshold (residual drop).
    #[default]
    AtLeast,
    /// Met when value ≤ threshold (residual level, drift, band, CI width).
    AtMost,
}

/// The result of one user-facing rule.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct CriterionResult {
    /// `drop`, `below`, `drift`, `band` or `ci`.
    pub name: String,
    pub series: String,
    pub comparison: Comparison,
    pub threshold: f64,
    /// Value at the end of the data (NaN when it could not be computed yet).
    pub value: f64,
    /// Unit of value and threshold: `dec`, `%` or empty (absolute).
    pub unit: String,
    pub met: bool,
    /// First iteration from which the criterion has held continuously up to the end.
    pub since: Option<i64>,
    /// True when the threshold comes from the built-in defaults (common practice).
    pub default: bool,
    /// Monitor criteria: the window actually used, in iterations (adaptive by default, see
    /// [`MonitorSummary::window`]).
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub window: Option<usize>,
}

impl CriterionResult {
    /// The value as text, rounded so that the text never looks like it meets a threshold the
    /// value misses (2.996 decades of a 3-decade drop shows as `2.99`, not `3`); `n/a` when it
    /// could not be computed.
    pub fn value_text(&self) -> String {
        if self.value.is_nan() {
            return "n/a".into();
        }
        if self.value.is_infinite() {
            return if self.value > 0.0 { "+inf".into() } else { "-inf".into() };
        }
        let decimals = match self.unit.as_str() {
            "dec" => 2,
            "%" => 3,
            _ => return super::text::num(self.value),
        };
        let scale = 10f64.powi(decimals);
        // Round towards "not met" when unmet, towards "met" when met.
        let toward_up = matches!(
            (self.comparison, self.met),
            (Comparison::AtLeast, true) | (Comparison::AtMost, false)
        );
        let v = self.value * scale;
        let r = if toward_up { v.ceil() } else { v.floor() };
        format!("{:.*}", decimals as usize, r / scale)
    }
}

/// Which reference a monitor's drift, band and CI are relative to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Reference {
    /// |mean| over the window (the usual case).
    #[default]
    Mean,
    /// The mean is near zero against the monitor's own magnitude: a tenth of its largest
    /// magnitude in the latest segment ([`super::limits::NEAR_ZERO_SHARE`]).
    NearZero,
    /// The `scale` set for the series in `settle.toml`.
    Scale,
}

/// Per-residual numbers shown in views and reports.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct ResidualSummary {
    pub series: String,
    pub last: f64,
    pub peak: f64,
    /// Decades of drop from the peak to the last value (log10(peak/last)).
    pub drop_dec: f64,
    /// Trend over the window, decades per 1000 iterations (negative = falling).
    pub slope_dec_per_kit: f64,
    /// 95 % confidence interval of the slope.
    pub slope_ci: (f64, f64),
    /// Estimated iterations still needed to reach the target, from the recent rate; `None`
    /// when the residual is not significantly falling or anything argues for divergence.
    pub eta_iterations: Option<f64>,
    /// Range of that estimate from the 95 % interval of the recent rate (fewest, most).
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub eta_range: Option<(f64, f64)>,
    /// Iterations of recent history the rate and the estimate come from.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub eta_window: Option<usize>,
}

/// Per-monitor numbers over the final window.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct MonitorSummary {
    pub series: String,
    pub last: f64,
    pub mean: f64,
    /// Half-width of the 95 % confidence interval of the mean (autocorrelation-aware).
    pub ci_half: f64,
    pub window_first: i64,
    pub window_last: i64,
    /// Iteration where the start-up transient removed by MSER-5 ends.
    pub transient_end: Option<i64>,
    /// Regression slope × window length relative to |mean|, percent.
    pub drift_pct: f64,
    /// (max − min) / |mean| over the window, percent.
    pub band_pct: f64,
    /// Iterative-error estimate (ratio of successive differences), absolute.
    pub iterative_error: Option<f64>,
    /// Extrapolated converged value, when the history converges geometrically.
    pub extrapolated: Option<f64>,
    /// Iterations of the window drift, band and CI were computed over (`window_last −
    /// window_first + 1` for one value per iteration): by default the part of the configured
    /// window after the start-up transient, see the README.
    #[serde(default)]
    pub window: usize,
    /// What drift, band and CI are relative to, and its value (absolute).
    #[serde(default)]
    pub reference: Reference,
    #[serde(default)]
    pub reference_value: f64,
    /// The monitor carries only round-off next to its companions and is not judged.
    #[serde(default)]
    pub round_off: bool,
}

/// Why a run has no verdict: there is nothing to judge.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum NothingToJudge {
    /// No series holds a single value.
    #[error("no data: no values were read")]
    NoData,
    /// Values were read, but every series is `info` or ignored by the criteria.
    #[error(
        "nothing to judge: the {series} series read are all `info` or ignored (set a role or remove `ignore`)"
    )]
    NothingJudged { series: usize },
}

/// Everything the judge says about a run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct Judgement {
    pub verdict: Verdict,
    /// For `converged`: first iteration at which all criteria held together. For other
    /// verdicts: first iteration of the evidence of the deciding finding.
    pub since: Option<i64>,
    /// Indices into `findings` of the findings that caused the verdict.
    pub causes: Vec<usize>,
    pub findings: Vec<Finding>,
    pub criteria: Vec<CriterionResult>,
    pub residuals: Vec<ResidualSummary>,
    pub monitors: Vec<MonitorSummary>,
    /// Last iteration seen.
    pub iterations: i64,
}

/// Per-series overrides of the criteria (from `settle.toml`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct SeriesCriteria {
    /// Required drop in decades from the peak (residuals).
    pub drop: Option<f64>,
    /// Absolute level the residual must be at or below.
    pub below: Option<f64>,
    /// Maximum drift over the window, percent of the mean (monitors).
    pub drift: Option<f64>,
    /// Maximum band (max − min) over the window, percent of the mean (monitors).
    pub band: Option<f64>,
    /// Maximum half-width of the 95 % CI of the mean, percent of the mean (monitors).
    pub ci: Option<f64>,
    /// Reference value drift, band and CI are relative to, instead of the mean (monitors whose
    /// mean is near zero: a side force, a probe at the reference pressure).
    pub scale: Option<f64>,
    /// Absolute limits in the monitor's own unit; each replaces the relative limit of the
    /// same criterion.
    pub drift_abs: Option<f64>,
    pub band_abs: Option<f64>,
    pub ci_abs: Option<f64>,
    /// Override the role given by the parser.
    pub role: Option<Role>,
    /// Leave this series out of the judgement.
    #[serde(default)]
    pub ignore: bool,
}

/// The criteria in effect. `None` fields take the documented defaults.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct Criteria {
    /// Required residual drop from its peak, decades (default 3: common practice).
    pub residual_drop: Option<f64>,
    /// Absolute residual target (default: none).
    pub residual_below: Option<f64>,
    /// Final window length in iterations for monitors and trends. Unset: adaptive, at most
    /// 500 (see the README); set: used exactly as given.
    pub window: Option<usize>,
    /// Maximum monitor drift over the window, percent (default 0.1).
    pub drift: Option<f64>,
    /// Maximum monitor band over the window, percent (default 0.5).
    pub band: Option<f64>,
    /// Maximum CI half-width of a monitor's mean, percent (default: not checked).
    pub ci: Option<f64>,
    /// Per-series overrides, keyed by series name (exact, or a glob with `*` and `?`).
    #[serde(default)]
    pub series: BTreeMap<String, SeriesCriteria>,
}

impl Criteria {
    pub const DEFAULT_RESIDUAL_DROP: f64 = 3.0;
    pub const DEFAULT_WINDOW: usize = 500;
    pub const DEFAULT_DRIFT_PCT: f64 = 0.1;
    pub const DEFAULT_BAND_PCT: f64 = 0.5;

    /// Layer `over` on top of `self`: every field set in `over` wins.
    pub fn merged(&self, over: &Criteria) -> Criteria {
        let mut series = self.series.clone();
        for (k, v) in &over.series {
            series.insert(k.clone(), v.clone());
        }
        Criteria {
            residual_drop: over.residual_drop.or(self.residual_drop),
            residual_below: over.residual_below.or(self.residual_below),
            window: over.window.or(self.window),
            drift: over.drift.or(self.drift),
            band: over.band.or(self.band),
            ci: over.ci.or(self.ci),
            series,
        }
    }
}
