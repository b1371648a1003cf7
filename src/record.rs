//! The vocabulary shared by parsers, the store and the views: what one parsed line can yield.
//!
//! Parsers produce [`Output`] items; the run store consumes them. Keeping these types in one
//! small module lets the parser engines and the store evolve separately without importing
//! each other.

use serde::{Deserialize, Serialize};

/// How the judge treats a series (DESIGN §4).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    /// Judged for drop, trend, stall and divergence.
    #[default]
    Residual,
    /// A quantity of interest (drag, pressure drop): judged for stationarity and blow-up.
    Monitor,
    /// A health number (continuity error, right-hand-side norm, sweep count): judged only
    /// for blow-up.
    Indicator,
    /// Shown, never judged.
    Info,
}

impl Role {
    /// The lowercase word used in parser definitions, JSON and the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            Role::Residual => "residual",
            Role::Monitor => "monitor",
            Role::Indicator => "indicator",
            Role::Info => "info",
        }
    }
}

/// Severity of a parser event.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize, Default,
)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    #[default]
    Info,
    Warning,
    /// An error message or crash signature printed by the solver.
    Error,
}

impl Severity {
    pub fn as_str(self) -> &'static str {
        match self {
            Severity::Info => "info",
            Severity::Warning => "warning",
            Severity::Error => "error",
        }
    }
}

/// Index of a series inside one parser (and so inside one source of the store).
pub type SeriesId = u32;

/// A series a parser has started to produce. Announced once, before its first value.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SeriesInfo {
    pub id: SeriesId,
    pub name: String,
    pub role: Role,
}

/// The values of one iteration (steady) or one time step (unsteady).
///
/// `values` may hold the same series more than once (repeat policy `all`: inner iterations);
/// the store keeps every value in order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Record {
    /// Iteration or time-step number as printed; `None` when the format has none (the store
    /// then numbers records itself).
    pub iteration: Option<i64>,
    /// Physical time, for unsteady runs.
    pub time: Option<f64>,
    pub values: Vec<(SeriesId, f64)>,
    /// 1-based line number (within the current file) of the line that opened the record.
    pub line: u64,
}

/// A message the parser recognised (warning, error, crash signature, solver's own
/// convergence mark).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Event {
    pub severity: Severity,
    /// Name of the event rule that matched (e.g. `clipping`, `crash`).
    pub rule: String,
    /// The captured message, or the whole line (lossily decoded, control characters removed).
    pub message: String,
    /// 1-based line number within the current file.
    pub line: u64,
    /// Iteration of the record open when the event was seen, if any.
    pub iteration: Option<i64>,
}

/// Why a line was not used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Skip {
    pub line: u64,
    pub reason: String,
}

/// One item produced by a parser while reading lines.
#[derive(Debug, Clone, PartialEq)]
pub enum Output {
    /// A new series; comes before the first record that uses `info.id`.
    Series(SeriesInfo),
    /// A complete record.
    Record(Record),
    Event(Event),
    /// The solver's end-of-run mark (normal end).
    EndOfRun {
        line: u64,
        message: String,
    },
    /// A line that looked relevant (matched a rule, or sat in a table) but could not be used,
    /// with the reason. Parsers emit the first few of these; all are counted in
    /// [`LineStats::skipped`].
    Skipped(Skip),
}

/// Cumulative line counts of one parser (one source).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct LineStats {
    /// Complete lines fed to the parser.
    pub lines: u64,
    /// Lines that contributed a record, value, event or end mark.
    pub used: u64,
    /// Lines that looked relevant but could not be used (see [`Output::Skipped`]).
    pub skipped: u64,
    /// Lines no rule was interested in (banner text, blank lines).
    pub ignored: u64,
}
