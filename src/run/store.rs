//! The run store: columnar series per source, segments at restarts, line counts and events.
//!
//! A source's records share one iteration index (`Vec<i64>`); each series keeps its values
//! in a `Vec<f64>` and, only when it does not have exactly one value per record since it
//! first appeared, a parallel `Vec<u32>` of record positions. The common dense case thus
//! costs 8 bytes per value plus 8 bytes per record shared by every series of the source.
//!
//! The store only applies what parsers and followers report; it never reads files.

use std::borrow::Cow;
use std::collections::HashMap;
use std::path::PathBuf;

use serde::Serialize;

use crate::judge::{RunInput, SeriesInput};
use crate::record::{Event, LineStats, Output, RecordRef, SeriesId, SeriesInfo, Sink, Skip};

mod append;
#[cfg(test)]
mod history_tests;
mod names;
mod open;
mod reread;
mod series;
#[cfg(test)]
mod tests;

pub use names::{SeriesName, fit_name, same_quantity, source_tags};
use series::Placement;
pub use series::Series;

/// How many skip reasons a source keeps (the count is kept in full in [`LineStats`]).
pub const MAX_SKIP_REASONS: usize = 20;
/// How many events a source keeps (oldest dropped first, counted in `events_dropped`).
pub const MAX_EVENTS: usize = 10_000;

/// An entry of [`SourceStore::ids`] for an id no announcement has mapped.
const NO_SERIES: u32 = u32::MAX;

/// Why a new segment began.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "reason", rename_all = "snake_case")]
pub enum SegmentReason {
    /// The first segment.
    Start,
    /// The iteration number went backwards (or repeated): the solver restarted.
    IterationBack { from: i64, to: i64 },
    /// The file was truncated or rewritten in place and is read again from its start.
    Truncated,
    /// The file was replaced by a new one under the same name.
    Replaced,
    /// The next file of a restart glob (`run.log.2` after `run.log.1`).
    NewFile { path: PathBuf },
    /// The solver said it resumed (an event rule named `resumed`, on `line`): a solver
    /// resumed from the checkpoint it wrote last numbers on from there, so the iteration
    /// numbers alone do not show the restart, and its kick would read as part of the run.
    Notice { line: u64 },
}

/// A range of records between two restarts.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Segment {
    /// Index of the first record of the segment.
    pub first_record: usize,
    #[serde(flatten)]
    pub reason: SegmentReason,
}

/// Everything read from one source (a file, or a glob of restart files).
#[derive(Debug, Clone, Default)]
pub struct SourceStore {
    /// The path or glob as the user gave it.
    pub label: String,
    /// Name of the parser definition in use.
    pub parser: String,
    iterations: Vec<i64>,
    times: Vec<f64>,
    has_time: bool,
    series: Vec<Series>,
    /// Parser series id → index into `series` ([`NO_SERIES`] when unknown); set by the
    /// latest announcement of the id, reset when a new parser instance starts.
    ids: Vec<u32>,
    pub segments: Vec<Segment>,
    pub events: Vec<Event>,
    pub events_dropped: u64,
    pub skips: Vec<Skip>,
    pub stats: LineStats,
    /// Line counts of parser instances that have been replaced (restart files).
    stats_base: LineStats,
    /// The solver's end-of-run mark, if seen in the current segment.
    pub ended: Option<(i64, String)>,
    /// Notes from the follower (truncated, replaced, missing, junk skipped), newest last.
    pub notes: Vec<String>,
    pending_segment: Option<SegmentReason>,
    /// The provisional last record, when one is shown (`open.rs`).
    open: Option<Box<open::Provisional>>,
    /// Where the current file's content begins, and a re-read of it (`reread.rs`).
    file: reread::FileStart,
    reread: Option<reread::Reread>,
    rewound: Option<usize>,
}

impl SourceStore {
    pub fn new(label: impl Into<String>, parser: impl Into<String>) -> Self {
        SourceStore { label: label.into(), parser: parser.into(), ..Default::default() }
    }

    /// Apply owned parser output (parsers usually write into the store directly through
    /// its [`Sink`] implementation).
    pub fn apply(&mut self, outputs: impl IntoIterator<Item = Output>) {
        for out in outputs {
            out.send_to(self);
        }
    }

    /// Set the cumulative line counts of the current parser instance.
    pub fn set_stats(&mut self, stats: LineStats) {
        self.stats = LineStats {
            lines: self.stats_base.lines + stats.lines,
            used: self.stats_base.used + stats.used,
            skipped: self.stats_base.skipped + stats.skipped,
            ignored: self.stats_base.ignored + stats.ignored,
        };
    }

    /// A new parser instance starts: its series ids are fresh. For a new file (replacement,
    /// next restart file) the next record opens a new segment for `reason`; a file read again
    /// from its start (`Truncated`: truncation or in-place rewrite) replaces what the store
    /// holds of it (see `reread.rs`).
    pub fn restart(&mut self, reason: SegmentReason) {
        self.settle_open();
        self.ids.clear();
        self.ended = None;
        if reason == SegmentReason::Truncated {
            self.begin_reread();
            return;
        }
        self.reread = None;
        self.stats_base = self.stats;
        if !self.iterations.is_empty() {
            self.pending_segment = Some(reason);
        }
        self.begin_file();
    }

    /// Add a follower note (shown in views; not judged).
    pub fn note(&mut self, text: impl Into<String>) {
        const MAX_NOTES: usize = 100;
        if self.notes.len() >= MAX_NOTES {
            self.notes.remove(0);
        }
        self.notes.push(text.into());
    }

    fn add_series(&mut self, info: SeriesInfo) {
        let idx = match self.series.iter().position(|s| s.name == info.name) {
            Some(i) => i,
            None => {
                self.series.push(Series::new(info.name, info.role));
                self.series.len() - 1
            }
        };
        let id = info.id as usize;
        if id >= self.ids.len() {
            self.ids.resize(id + 1, NO_SERIES);
        }
        self.ids[id] = idx as u32;
    }

    fn push_event(&mut self, mut ev: Event) {
        self.settle_open();
        if ev.iteration.is_none() {
            ev.iteration = self.current_iteration();
        }
        if self.rereading() && self.reread_event(&ev) {
            return;
        }
        if is_restart_notice(&ev) && !self.iterations.is_empty() && self.pending_segment.is_none() {
            self.pending_segment = Some(SegmentReason::Notice { line: ev.line });
        }
        if self.events.len() >= MAX_EVENTS {
            self.events.remove(0);
            self.events_dropped += 1;
        }
        self.events.push(ev);
    }

    fn push_record(&mut self, rec: RecordRef<'_>) {
        self.settle_open();
        if self.rereading() && self.reread_record(&rec) {
            return;
        }
        let pos = self.push_head(rec.iteration, rec.time, rec.line);
        let segment = self.segments.last().map_or(0, |s| s.first_record as u64);
        for &(id, v) in rec.values {
            if let Some(&idx) = self.ids.get(id as usize)
                && idx != NO_SERIES
            {
                self.series[idx as usize].push(pos, v, segment);
            }
        }
    }

    /// A new record's iteration and time (its values follow): opens a segment when it
    /// must, and returns the record's position.
    fn push_head(&mut self, iteration: Option<i64>, time: Option<f64>, line: u64) -> u32 {
        let last = self.iterations.last().copied();
        // A restart notice reaches the store before the record that was open when it was
        // printed (a record closes at the next step line): that record is still the old
        // process's; the segment opens at the first record that starts after the notice.
        let waits =
            matches!(self.pending_segment, Some(SegmentReason::Notice { line: n }) if line <= n);
        let pending = if waits { None } else { self.pending_segment.take() };
        let iteration = match (iteration, last) {
            (Some(it), _) => it,
            // A new file numbers its records from 1; a restart notice within a file does not.
            (None, Some(l)) if matches!(pending, None | Some(SegmentReason::Notice { .. })) => {
                l + 1
            }
            (None, Some(_)) | (None, None) => 1,
        };
        if self.iterations.is_empty() {
            self.segments.push(Segment { first_record: 0, reason: SegmentReason::Start });
        } else if let Some(reason) = pending {
            // A notice and a step back name the same restart: the step back says more.
            let reason = match (reason, last) {
                (SegmentReason::Notice { .. }, Some(l)) if iteration <= l => {
                    SegmentReason::IterationBack { from: l, to: iteration }
                }
                (r, _) => r,
            };
            self.segments.push(Segment { first_record: self.iterations.len(), reason });
        } else if let Some(l) = last
            && iteration <= l
        {
            self.segments.push(Segment {
                first_record: self.iterations.len(),
                reason: SegmentReason::IterationBack { from: l, to: iteration },
            });
        }
        let pos = self.iterations.len() as u32;
        self.iterations.push(iteration);
        match time {
            Some(t) => {
                if !self.has_time {
                    self.times = vec![f64::NAN; self.iterations.len() - 1];
                    self.has_time = true;
                }
                self.times.push(t);
            }
            None if self.has_time => self.times.push(f64::NAN),
            None => {}
        }
        pos
    }

    /// Number of records.
    pub fn records(&self) -> usize {
        self.iterations.len()
    }

    /// Iteration number of every record.
    pub fn iterations(&self) -> &[i64] {
        &self.iterations
    }

    /// Physical time of every record, when the format prints one (NaN where absent).
    pub fn times(&self) -> Option<&[f64]> {
        self.has_time.then_some(&self.times[..])
    }

    pub fn series(&self) -> &[Series] {
        &self.series
    }

    pub fn series_by_name(&self, name: &str) -> Option<&Series> {
        self.series.iter().find(|s| s.name == name)
    }

    pub fn last_iteration(&self) -> Option<i64> {
        self.iterations.last().copied()
    }

    /// Record `p` rebuilt from the columns, with the series' positions in [`series`](
    /// Self::series) as ids (values in series order), for printing records one by one.
    pub fn record_at(&self, p: usize) -> Option<crate::record::Record> {
        let iteration = *self.iterations.get(p)?;
        let time = self.times().map(|t| t[p]).filter(|t| !t.is_nan());
        let mut values = Vec::new();
        for (i, s) in self.series.iter().enumerate() {
            for k in s.values_at(p) {
                values.push((i as SeriesId, s.values[k]));
            }
        }
        Some(crate::record::Record { iteration: Some(iteration), time, values, line: 0 })
    }

    /// Iteration number of value `i` of `series`.
    pub fn iteration_of(&self, series: &Series, i: usize) -> i64 {
        self.iterations[series.record_of(i)]
    }

    /// Iterations of every value of `series` (borrowed when the series is dense).
    pub fn series_iterations<'a>(&'a self, series: &'a Series) -> Cow<'a, [i64]> {
        match &series.placement {
            Placement::Dense { first } => {
                let f = *first as usize;
                Cow::Borrowed(&self.iterations[f..f + series.values.len()])
            }
            Placement::Sparse(rec) => {
                Cow::Owned(rec.iter().map(|&r| self.iterations[r as usize]).collect())
            }
        }
    }

    /// Indices into the series' values at which a segment starts.
    pub fn series_segment_starts(&self, series: &Series) -> Vec<usize> {
        let mut starts = Vec::new();
        for seg in &self.segments {
            let i = series.first_value_at_or_after(seg.first_record);
            if i < series.len() && starts.last() != Some(&i) {
                starts.push(i);
            }
        }
        if !series.is_empty() && starts.first() != Some(&0) {
            starts.insert(0, 0);
        }
        starts
    }

    /// Make room for `total` records in the iteration index and in every dense series that
    /// has a value in each record so far: a one-shot read that knows the file's size can
    /// reserve once instead of growing by doubling. Growing by copying leaves the old buffers
    /// to the allocator, and a doubled buffer is up to half empty; a reservation made from
    /// the size is touched only as far as it is filled.
    pub fn reserve_records(&mut self, total: usize) {
        let have = self.iterations.len();
        if total <= have {
            return;
        }
        self.iterations.reserve_exact(total - have);
        if self.has_time {
            self.times.reserve_exact(total - have);
        }
        for s in &mut self.series {
            s.reserve_dense(have, total);
        }
    }

    /// Heap bytes held by values, positions and the iteration index.
    pub fn heap_bytes(&self) -> usize {
        self.iterations.capacity() * 8
            + self.times.capacity() * 8
            + self.series.iter().map(Series::heap_bytes).sum::<usize>()
    }
}

impl Sink for SourceStore {
    fn series(&mut self, info: SeriesInfo) {
        self.add_series(info);
    }

    fn record(&mut self, rec: RecordRef<'_>) {
        self.push_record(rec);
    }

    fn event(&mut self, ev: Event) {
        self.push_event(ev);
    }

    fn end_of_run(&mut self, _line: u64, message: String) {
        self.settle_open();
        let it = self.current_iteration().unwrap_or(0);
        self.ended = Some((it, message));
    }

    fn batch(&mut self, b: &crate::record::Batch, line_offset: u64, after_first_record: bool) {
        self.append_batch(b, line_offset, after_first_record);
    }

    fn skipped(&mut self, skip: Skip) {
        if self.rereading() && self.skips.contains(&skip) {
            return;
        }
        if self.skips.len() < MAX_SKIP_REASONS {
            self.skips.push(skip);
        }
    }
}

/// An event that says the solver resumed from a checkpoint: its rule is named `resumed` (any
/// case), the name `parsers/README.md` reserves for it. Not `restart`: that word also names
/// the writing of a restart file, which is no restart of the run.
fn is_restart_notice(ev: &Event) -> bool {
    ev.rule.eq_ignore_ascii_case("resumed")
}

/// Index of the segment holding `record`, and its id for [`Series`]' history (its first
/// record).
fn segment_of(segments: &[Segment], record: usize) -> (usize, u64) {
    let k = segments.partition_point(|s| s.first_record <= record).saturating_sub(1);
    (k, segments.get(k).map_or(0, |s| s.first_record as u64))
}

/// One run: its sources.
#[derive(Debug, Clone, Default)]
pub struct RunStore {
    pub name: String,
    pub sources: Vec<SourceStore>,
}

impl RunStore {
    pub fn new(name: impl Into<String>) -> Self {
        RunStore { name: name.into(), sources: Vec::new() }
    }

    /// Last iteration over all sources.
    pub fn last_iteration(&self) -> Option<i64> {
        self.sources.iter().filter_map(SourceStore::last_iteration).max()
    }

    /// True when a source has printed the solver's end-of-run mark (monitor files such as
    /// a force CSV have no end mark of their own; the residual log's mark ends the run).
    pub fn ended(&self) -> bool {
        self.sources.iter().any(|s| s.ended.is_some())
    }

    /// The name every view shows for each series: `names[source][series]`.
    ///
    /// This is the one naming function of settle; the judge input, the panels, the status
    /// lines and the reports all take their series names from it, so a series has one name
    /// everywhere. The rules:
    ///
    /// * a name used by one source only stays as the parser gave it (`Ux`, `drag`);
    /// * a later source's series with the same name (ASCII case aside) and role whose values
    ///   agree at the first iterations both sources hold ([`same_quantity`]) is the same
    ///   quantity printed
    ///   twice (a monitor in the log and in its monitor file): it is marked as a duplicate of
    ///   the earlier one, judged once (as the earlier one), and named `tag/name`;
    /// * a name that several sources use for different quantities is `tag/name` in every
    ///   source that uses it (`probe_p/1`, `probe_k/1`), where the tag is the part of the
    ///   file name that differs between the run's files ([`source_tags`]).
    pub fn series_names(&self) -> Vec<Vec<SeriesName>> {
        let labels: Vec<&str> = self.sources.iter().map(|s| s.label.as_str()).collect();
        let tags = source_tags(&labels);
        let mut names: Vec<Vec<SeriesName>> = self
            .sources
            .iter()
            .map(|src| {
                src.series
                    .iter()
                    .map(|s| SeriesName { name: s.name.clone(), duplicate_of: None })
                    .collect()
            })
            .collect();
        // Plain name (without regard to ASCII case: `Lift` in the log is `lift` in the
        // monitor file) → the distinct (non-duplicate) series using it, in source order.
        let mut distinct: HashMap<String, Vec<(usize, usize)>> = HashMap::new();
        for (si, src) in self.sources.iter().enumerate() {
            for (i, s) in src.series.iter().enumerate() {
                let users = distinct.entry(s.name.to_ascii_lowercase()).or_default();
                let earlier = users.iter().copied().find(|&(sj, j)| {
                    sj != si
                        && same_quantity(&self.sources[sj], &self.sources[sj].series[j], src, s)
                });
                match earlier {
                    Some(first) => {
                        names[si][i] = SeriesName {
                            name: format!("{}/{}", tags[si], s.name),
                            duplicate_of: Some(first),
                        };
                    }
                    None => users.push((si, i)),
                }
            }
        }
        for users in distinct.values().filter(|u| u.len() > 1) {
            for &(si, i) in users {
                let plain = &self.sources[si].series[i].name;
                names[si][i].name = format!("{}/{plain}", tags[si]);
            }
        }
        names
    }

    /// A borrowed view of every series and event for the judge, named by
    /// [`RunStore::series_names`]; a series that duplicates an earlier one is left out, so
    /// a monitor printed in the log and in a monitor file is judged once.
    pub fn judge_input(&self) -> RunInput<'_> {
        let mut input = RunInput::default();
        let names = self.series_names();
        for (src, src_names) in self.sources.iter().zip(names) {
            for (s, n) in src.series.iter().zip(src_names) {
                if n.duplicate_of.is_some() {
                    continue;
                }
                let name: Cow<'_, str> =
                    if n.name == s.name { Cow::Borrowed(&s.name) } else { Cow::Owned(n.name) };
                input.series.push(SeriesInput {
                    name,
                    role: s.role,
                    iterations: src.series_iterations(s),
                    values: Cow::Borrowed(s.values()),
                    segment_starts: src.series_segment_starts(s),
                    history: Some(s.history()),
                });
            }
            input.events.extend(src.events.iter().map(Cow::Borrowed));
        }
        input.ended = self.ended();
        input.ended_at = self.sources.iter().filter_map(|s| s.ended.as_ref().map(|e| e.0)).max();
        input
    }
}
