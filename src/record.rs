//! The vocabulary shared by parsers, the store and the views: what one parsed line can yield.
//!
//! Parsers hand what they read to a [`Sink`]: the run store itself (one-shot reads stream
//! straight into its columns), a compact batch (the live ingest thread), or a `Vec` of owned
//! [`Output`] items (tests, `parse --follow`). Keeping these types in one small module lets
//! the parser engines and the store evolve separately without importing each other.

mod batch;

use serde::{Deserialize, Serialize};

pub use batch::{Batch, BatchItem, Column};

/// How the judge treats a series (README "Verdicts and exit codes").
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

/// A record as a parser hands it to a [`Sink`]: borrowed, so closing a record allocates
/// nothing (the values live in the parser's reusable buffer until the sink has copied them).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RecordRef<'a> {
    pub iteration: Option<i64>,
    pub time: Option<f64>,
    pub values: &'a [(SeriesId, f64)],
    /// 1-based line number of the line that opened the record.
    pub line: u64,
}

impl RecordRef<'_> {
    /// An owned copy.
    pub fn to_record(&self) -> Record {
        Record {
            iteration: self.iteration,
            time: self.time,
            values: self.values.to_vec(),
            line: self.line,
        }
    }
}

impl Record {
    /// A borrowed view.
    pub fn as_ref(&self) -> RecordRef<'_> {
        RecordRef {
            iteration: self.iteration,
            time: self.time,
            values: &self.values,
            line: self.line,
        }
    }
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

/// Where parsers put what they read, in file order.
///
/// A series is announced ([`Sink::series`]) before the first record that uses its id. Ids
/// belong to one parser instance; a sink that receives the output of several instances
/// (restarts, parts of a file parsed in parallel) maps them by the announcement that came
/// last, and every instance announces each id it uses before using it.
pub trait Sink {
    fn series(&mut self, info: SeriesInfo);
    fn record(&mut self, rec: RecordRef<'_>);
    fn event(&mut self, ev: Event);
    /// The solver's end-of-run mark.
    fn end_of_run(&mut self, line: u64, message: String);
    fn skipped(&mut self, skip: Skip);

    /// All of `b` (from its second record on, and nothing before that, with
    /// `after_first_record`), with `line_offset` added to its line numbers. A store takes the
    /// values a series at a time; other sinks get the items one by one.
    fn batch(&mut self, b: &Batch, line_offset: u64, after_first_record: bool) {
        b.replay_from(usize::from(after_first_record), line_offset, self);
    }
}

impl Sink for Vec<Output> {
    fn series(&mut self, info: SeriesInfo) {
        self.push(Output::Series(info));
    }
    fn record(&mut self, rec: RecordRef<'_>) {
        self.push(Output::Record(rec.to_record()));
    }
    fn event(&mut self, ev: Event) {
        self.push(Output::Event(ev));
    }
    fn end_of_run(&mut self, line: u64, message: String) {
        self.push(Output::EndOfRun { line, message });
    }
    fn skipped(&mut self, skip: Skip) {
        self.push(Output::Skipped(skip));
    }
}

impl Output {
    /// Hand this item to a sink.
    pub fn send_to(self, sink: &mut dyn Sink) {
        match self {
            Output::Series(info) => sink.series(info),
            Output::Record(r) => sink.record(r.as_ref()),
            Output::Event(e) => sink.event(e),
            Output::EndOfRun { line, message } => sink.end_of_run(line, message),
            Output::Skipped(s) => sink.skipped(s),
        }
    }
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

impl LineStats {
    /// The counts of `self` and `other` together.
    pub fn plus(self, other: LineStats) -> LineStats {
        LineStats {
            lines: self.lines + other.lines,
            used: self.used + other.used,
            skipped: self.skipped + other.skipped,
            ignored: self.ignored + other.ignored,
        }
    }

    /// The counts of `self` beyond `base` (`base` counted before `self`, by the same parser).
    pub fn since(self, base: LineStats) -> LineStats {
        LineStats {
            lines: self.lines.saturating_sub(base.lines),
            used: self.used.saturating_sub(base.used),
            skipped: self.skipped.saturating_sub(base.skipped),
            ignored: self.ignored.saturating_sub(base.ignored),
        }
    }
}
