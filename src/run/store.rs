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
mod open;
mod reread;
mod series;

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
        let pos = self.push_head(rec.iteration, rec.time);
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
    fn push_head(&mut self, iteration: Option<i64>, time: Option<f64>) -> u32 {
        let last = self.iterations.last().copied();
        let iteration = match (iteration, last) {
            (Some(it), _) => it,
            (None, Some(l)) if self.pending_segment.is_none() => l + 1,
            (None, Some(_)) | (None, None) => 1,
        };
        if self.iterations.is_empty() {
            self.segments.push(Segment { first_record: 0, reason: SegmentReason::Start });
        } else if let Some(reason) = self.pending_segment.take() {
            self.segments.push(Segment { first_record: self.iterations.len(), reason });
        } else if let Some(l) = last
            && iteration <= l
        {
            self.segments.push(Segment {
                first_record: self.iterations.len(),
                reason: SegmentReason::IterationBack { from: l, to: iteration },
            });
        }
        self.pending_segment = None;
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

/// A series name cut to at most `max` characters for a narrow column, keeping what tells
/// names apart: the start of a `tag/` and the end of the name (`Forces/Pressure/z` in 12
/// characters is `Force…sure/z`, not `Forces/Pres…`). Views that cut a name show the full
/// one where there is room (the focused series' panel title).
pub fn fit_name(name: &str, max: usize) -> String {
    let n = name.chars().count();
    if n <= max {
        return name.to_string();
    }
    if max <= 1 {
        return "…".chars().take(max).collect();
    }
    let keep = max - 1;
    let head = match name.find('/') {
        Some(i) => name[..i].chars().count().min(keep / 2),
        None => keep / 2,
    };
    let tail = keep - head;
    let start: String = name.chars().take(head).collect();
    let end: String = name.chars().skip(n - tail).collect();
    format!("{start}…{end}")
}

/// How a view names one series (see [`RunStore::series_names`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SeriesName {
    /// Unique within the run: the parser's name, or `tag/name`.
    pub name: String,
    /// `(source, series)` of the earlier series this one repeats; it is not judged.
    pub duplicate_of: Option<(usize, usize)>,
}

/// How many common iterations decide whether two same-named series are one quantity.
const SAME_QUANTITY_POINTS: usize = 20;
/// Disagreements among those points that make two series different quantities (a value
/// printed with few decimals can disagree once or twice near zero).
const DIFFERENT_AFTER: usize = 3;

/// Are `a` (of source `sa`) and `b` (of `sb`) the same quantity printed twice? Same role,
/// and fewer than [`DIFFERENT_AFTER`] disagreements among the first [`SAME_QUANTITY_POINTS`]
/// iterations that both hold. A pair of values agrees when they differ by at most 1e-4 of
/// their size (numbers printed with five significant digits) or by at most 1e-3 of the
/// largest size `a` has had so far (numbers printed with fixed decimals, near zero).
///
/// The decision must not flip back and forth as the files grow. Records are appended with
/// rising iteration numbers, so the set of iterations both series hold only gains members
/// above its current largest one: its first [`SAME_QUANTITY_POINTS`] members never change
/// once there are that many. Whether a pair agrees depends only on values already written
/// (the pair and `a` before it), so it never changes either. The count of disagreements
/// can therefore only grow: the answer is "same" (also with no common iteration yet: no
/// evidence against it) until the data shows enough disagreement, then "different" for
/// good. A restart (iterations going back) is the one case that can reopen the question.
pub fn same_quantity(sa: &SourceStore, a: &Series, sb: &SourceStore, b: &Series) -> bool {
    if a.role != b.role {
        return false;
    }
    let ia = sa.series_iterations(a);
    let ib = sb.series_iterations(b);
    let (va, vb) = (a.values(), b.values());
    let (mut i, mut j, mut compared, mut disagree) = (0, 0, 0, 0);
    let mut scale = 0.0f64;
    let mut scanned = 0;
    while i < ia.len() && j < ib.len() && compared < SAME_QUANTITY_POINTS {
        match ia[i].cmp(&ib[j]) {
            std::cmp::Ordering::Less => i += 1,
            std::cmp::Ordering::Greater => j += 1,
            std::cmp::Ordering::Equal => {
                while scanned <= i {
                    if va[scanned].is_finite() {
                        scale = scale.max(va[scanned].abs());
                    }
                    scanned += 1;
                }
                let (x, y) = (va[i], vb[j]);
                let d = (x - y).abs();
                let agree = (x.is_nan() && y.is_nan())
                    || x == y
                    || d <= 1e-4 * x.abs().max(y.abs())
                    || d <= 1e-3 * scale;
                if !agree {
                    disagree += 1;
                    if disagree >= DIFFERENT_AFTER {
                        return false;
                    }
                }
                compared += 1;
                // Inner iterations: only the first value at an iteration is compared.
                let it = ia[i];
                while i < ia.len() && ia[i] == it {
                    i += 1;
                }
                while j < ib.len() && ib[j] == it {
                    j += 1;
                }
            }
        }
    }
    true
}

/// A short, readable tag for each source of a run: the part of its file name that differs
/// between the run's files.
///
/// File names (without the last extension) are split into words at `_`, `-`, `.` and
/// blanks; the words all names share at the start and at the end are dropped; a tag
/// shorter than three characters takes back the neighbouring dropped words until it is
/// not (`b1_probe_p.csv`, `b1_probe_k.csv` → `probe_p`, `probe_k`); an empty tag is the
/// whole stem. When two tags are still equal (`history.dat`, `history.csv`) the file
/// names are used, and when those are equal too, the labels as given.
pub fn source_tags(labels: &[&str]) -> Vec<String> {
    let files: Vec<&str> = labels.iter().map(|l| l.rsplit('/').next().unwrap_or(l)).collect();
    let stems: Vec<&str> = files
        .iter()
        .map(|f| match f.rfind('.') {
            Some(i) if i > 0 => &f[..i],
            _ => f,
        })
        .collect();
    // Each word with its byte range in the stem, so a tag keeps the stem's own separators.
    let spans: Vec<Vec<(usize, usize)>> = stems
        .iter()
        .map(|s| {
            let mut out = Vec::new();
            let mut start = None;
            for (i, c) in s.char_indices().chain(std::iter::once((s.len(), '_'))) {
                let sep = matches!(c, '_' | '-' | '.' | ' ');
                match (sep, start) {
                    (true, Some(st)) => {
                        out.push((st, i));
                        start = None;
                    }
                    (false, None) => start = Some(i),
                    _ => {}
                }
            }
            out
        })
        .collect();
    let words: Vec<Vec<&str>> = spans
        .iter()
        .zip(&stems)
        .map(|(sp, s)| sp.iter().map(|&(a, b)| &s[a..b]).collect())
        .collect();
    let shortest = words.iter().map(Vec::len).min().unwrap_or(0);
    let (prefix, suffix) = if words.len() < 2 {
        (0, 0)
    } else {
        let same_at = |k: usize, from_end: bool| {
            let pick = |w: &[&str]| -> String {
                if from_end { w[w.len() - 1 - k].to_string() } else { w[k].to_string() }
            };
            words.iter().all(|w| pick(w) == pick(&words[0]))
        };
        let p = (0..shortest).take_while(|&k| same_at(k, false)).count();
        let s = (0..shortest - p).take_while(|&k| same_at(k, true)).count();
        (p, s)
    };
    let mut tags: Vec<String> = words
        .iter()
        .zip(&stems)
        .zip(&spans)
        .map(|((w, stem), sp)| {
            let (mut a, mut b) = (prefix, w.len() - suffix);
            let tag = |a: usize, b: usize| {
                if a < b { stem[sp[a].0..sp[b - 1].1].to_string() } else { String::new() }
            };
            while tag(a, b).chars().count() < 3 && (a > 0 || b < w.len()) {
                if a > 0 {
                    a -= 1;
                } else {
                    b += 1;
                }
            }
            let t = tag(a, b);
            if t.is_empty() { stem.to_string() } else { t }
        })
        .collect();
    let clash = |tags: &[String]| tags.iter().enumerate().any(|(i, t)| tags[..i].contains(t));
    if clash(&tags) {
        tags = files.iter().map(|f| f.to_string()).collect();
    }
    if clash(&tags) {
        tags = labels.iter().map(|l| l.to_string()).collect();
    }
    tags
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::{Record, Role};

    fn info(id: u32, name: &str) -> Output {
        Output::Series(SeriesInfo { id, name: name.into(), role: Role::Residual })
    }

    fn rec(it: i64, values: &[(u32, f64)]) -> Output {
        Output::Record(Record {
            iteration: Some(it),
            values: values.to_vec(),
            ..Default::default()
        })
    }

    #[test]
    fn dense_series_stay_dense_and_borrow_iterations() {
        let mut s = SourceStore::new("log", "demo");
        s.apply([info(0, "p"), rec(1, &[(0, 1.0)]), rec(2, &[(0, 0.5)]), rec(3, &[(0, 0.25)])]);
        let p = s.series_by_name("p").unwrap();
        assert_eq!(p.values(), &[1.0, 0.5, 0.25]);
        assert!(matches!(s.series_iterations(p), Cow::Borrowed(&[1, 2, 3])));
        assert_eq!(s.segments.len(), 1);
    }

    #[test]
    fn gaps_and_repeats_switch_to_sparse() {
        let mut s = SourceStore::new("log", "demo");
        s.apply([info(0, "p"), info(1, "cd")]);
        s.apply([rec(1, &[(0, 1.0)]), rec(2, &[(0, 0.5), (1, 3.0)]), rec(3, &[(0, 0.2)])]);
        s.apply([rec(4, &[(0, 0.1), (1, 2.0), (1, 2.5)])]);
        let cd = s.series_by_name("cd").unwrap();
        assert_eq!(cd.values(), &[3.0, 2.0, 2.5]);
        assert_eq!(&*s.series_iterations(cd), &[2, 4, 4]);
    }

    #[test]
    fn iteration_going_back_opens_a_segment() {
        let mut s = SourceStore::new("log", "demo");
        s.apply([info(0, "p"), rec(1, &[(0, 1.0)]), rec(2, &[(0, 0.5)]), rec(2, &[(0, 0.4)])]);
        s.apply([rec(3, &[(0, 0.3)])]);
        assert_eq!(s.segments.len(), 2);
        assert_eq!(s.segments[1].first_record, 2);
        assert_eq!(s.segments[1].reason, SegmentReason::IterationBack { from: 2, to: 2 });
        let p = s.series_by_name("p").unwrap();
        assert_eq!(s.series_segment_starts(p), vec![0, 2]);
    }

    #[test]
    fn restart_maps_new_ids_to_existing_names() {
        let mut s = SourceStore::new("run.log.*", "demo");
        s.apply([info(0, "p"), rec(1, &[(0, 1.0)])]);
        s.set_stats(LineStats { lines: 5, used: 1, skipped: 0, ignored: 4 });
        s.restart(SegmentReason::NewFile { path: "run.log.2".into() });
        s.apply([info(7, "p"), rec(2, &[(7, 0.5)])]);
        s.set_stats(LineStats { lines: 2, used: 1, skipped: 0, ignored: 1 });
        assert_eq!(s.series().len(), 1);
        assert_eq!(s.series()[0].values(), &[1.0, 0.5]);
        assert_eq!(s.segments.len(), 2);
        assert_eq!(s.stats.lines, 7);
    }

    #[test]
    fn dense_series_cost_about_eight_bytes_per_value() {
        // README "Speed and memory": at most about 10 bytes per value. 12 series × 50 000 records, dense.
        let mut s = SourceStore::new("log", "t");
        s.apply((0..12).map(|i| info(i, &format!("s{i}"))));
        for it in 1..=50_000 {
            let values: Vec<(u32, f64)> = (0..12).map(|i| (i, it as f64)).collect();
            s.apply([rec(it, &values)]);
        }
        let values = 12 * 50_000;
        let used = values * 8 + s.records() * 8;
        assert!(used as f64 / values as f64 <= 9.0);
        // Capacity may run ahead of length by the growth factor of `Vec` (at most 2×).
        let held = s.heap_bytes() as f64 / values as f64;
        assert!(held <= 18.0, "{held} bytes per value held");
        assert!(s.series().iter().all(|x| matches!(x.placement, Placement::Dense { .. })));
    }

    #[test]
    fn records_without_iteration_are_numbered() {
        let mut s = SourceStore::new("log", "t");
        s.apply([info(0, "p")]);
        for v in [1.0, 2.0, 3.0] {
            s.apply([Output::Record(Record { values: vec![(0, v)], ..Default::default() })]);
        }
        assert_eq!(s.iterations(), &[1, 2, 3]);
    }

    #[test]
    fn judge_input_names_duplicates_by_source() {
        let mut run = RunStore::new("r");
        let three = |v: f64| [rec(1, &[(0, v)]), rec(2, &[(0, v)]), rec(3, &[(0, v)])];
        let mut a = SourceStore::new("a.log", "x");
        a.apply([info(0, "p")]);
        a.apply(three(1.0));
        let mut b = SourceStore::new("b.log", "x");
        b.apply([info(0, "p")]);
        b.apply(three(2.0));
        let mut c = SourceStore::new("c.csv", "x");
        c.apply([info(0, "p")]);
        c.apply(three(1.00001));
        run.sources = vec![a, b, c];
        let input = run.judge_input();
        let names: Vec<&str> = input.series.iter().map(|s| &*s.name).collect();
        // c.csv repeats a.log's p to printed precision: judged once. a.log and b.log hold
        // different quantities called p: both are named by their file.
        assert_eq!(names, vec!["a/p", "b/p"]);
        let all = run.series_names();
        assert_eq!(all[2][0], SeriesName { name: "c/p".into(), duplicate_of: Some((0, 0)) });
    }

    #[test]
    fn tags_are_the_part_of_the_file_names_that_differs() {
        assert_eq!(source_tags(&["b1_probe_p.csv", "b1_probe_k.csv"]), vec!["probe_p", "probe_k"]);
        assert_eq!(
            source_tags(&["case/b1.log", "case/b1_probe_p.csv", "case/b1_probe_k.csv"]),
            vec!["b1", "probe_p", "probe_k"]
        );
        assert_eq!(source_tags(&["tarn.log", "forces.csv"]), vec!["tarn", "forces"]);
        assert_eq!(source_tags(&["p_probe.csv", "k_probe.csv"]), vec!["p_probe", "k_probe"]);
        assert_eq!(
            source_tags(&["plain/history.dat", "plain/history.csv"]),
            vec!["history.dat", "history.csv"]
        );
        assert_eq!(source_tags(&["a/run.log", "b/run.log"]), vec!["a/run.log", "b/run.log"]);
        assert_eq!(source_tags(&["run.log.*"]), vec!["run.log"]);
    }

    fn source(label: &str, names: &[&str], rows: &[(i64, Vec<f64>)]) -> SourceStore {
        let mut s = SourceStore::new(label, "t");
        s.apply(names.iter().enumerate().map(|(i, n)| {
            Output::Series(SeriesInfo { id: i as u32, name: n.to_string(), role: Role::Monitor })
        }));
        for (it, vals) in rows {
            let v: Vec<(u32, f64)> = vals.iter().enumerate().map(|(i, &x)| (i as u32, x)).collect();
            s.apply([rec(*it, &v)]);
        }
        s
    }

    #[test]
    fn names_are_cut_in_the_middle() {
        assert_eq!(fit_name("Forces/Pressure/z", 12), "Force…sure/z");
        assert_eq!(fit_name("probe_p/1", 9), "probe_p/1");
        assert_eq!(fit_name("probe_p/12", 8), "pro…p/12");
        assert_eq!(fit_name("omega/sweeps", 6), "om…eps");
        assert_eq!(fit_name("abc", 1), "…");
        assert_eq!(fit_name("Forces/Pressure/z", 12).chars().count(), 12);
    }

    #[test]
    fn probe_files_with_the_same_column_names_are_named_by_file() {
        let rows_p: Vec<(i64, Vec<f64>)> =
            (1..=5).map(|i| (i, vec![100.0 + i as f64, 7.0])).collect();
        let rows_k: Vec<(i64, Vec<f64>)> =
            (1..=5).map(|i| (i, vec![0.1 * i as f64, 0.3])).collect();
        let mut run = RunStore::new("b1");
        run.sources = vec![
            source("b1_probe_p.csv", &["1", "2"], &rows_p),
            source("b1_probe_k.csv", &["1", "2"], &rows_k),
        ];
        let input = run.judge_input();
        let names: Vec<&str> = input.series.iter().map(|s| &*s.name).collect();
        assert_eq!(names, vec!["probe_p/1", "probe_p/2", "probe_k/1", "probe_k/2"]);
    }

    /// The series the judge sees, by name, after the two sources hold `na` and `nb` rows.
    fn judged(a: &[(i64, Vec<f64>)], na: usize, b: &[(i64, Vec<f64>)], nb: usize) -> Vec<String> {
        let mut run = RunStore::new("r");
        run.sources = vec![
            source("tarn.log", &["drag", "lift"], &a[..na]),
            source("forces.csv", &["drag", "lift"], &b[..nb]),
        ];
        run.judge_input().series.iter().map(|s| s.name.to_string()).collect()
    }

    #[test]
    fn the_same_monitor_in_two_files_is_judged_once_at_every_length() {
        // The log and the monitor file print drag and lift (the file with fewer digits);
        // they grow in turns, either one ahead by up to 30 rows. The set of judged series
        // must be the same at every moment and equal to reading both files at once.
        let log: Vec<(i64, Vec<f64>)> = (1..=200)
            .map(|i| (i, vec![0.4 + 0.1 / i as f64, 0.02 * (i as f64 * 0.3).sin()]))
            .collect();
        let csv: Vec<(i64, Vec<f64>)> = log
            .iter()
            .map(|(i, v)| (*i, v.iter().map(|x| (x * 1e5).round() / 1e5).collect()))
            .collect();
        let at_once = judged(&log, 200, &csv, 200);
        assert_eq!(at_once, vec!["drag", "lift"]);
        for n in 1..=200 {
            for lag in [0usize, 1, 7, 30] {
                assert_eq!(judged(&log, n, &csv, n.saturating_sub(lag)), at_once, "{n} {lag}");
                assert_eq!(judged(&log, n.saturating_sub(lag), &csv, n), at_once, "{n} {lag}");
            }
        }
    }

    #[test]
    fn a_monitor_spelled_with_other_case_in_its_file_is_judged_once() {
        let log: Vec<(i64, Vec<f64>)> = (1..=50).map(|i| (i, vec![0.4 + 0.1 / i as f64])).collect();
        let mut run = RunStore::new("r");
        run.sources =
            vec![source("loam.log", &["Lift"], &log), source("monitor.out", &["lift"], &log)];
        let names: Vec<String> =
            run.judge_input().series.iter().map(|s| s.name.to_string()).collect();
        assert_eq!(names, vec!["Lift"]);
    }

    #[test]
    fn different_quantities_with_one_name_stay_apart_once_seen() {
        // drag in the log is a force, in the file a coefficient: they disagree from the
        // first common iteration on, and the decision never returns to "same".
        let log: Vec<(i64, Vec<f64>)> = (1..=100).map(|i| (i, vec![41.0, 2.0])).collect();
        let csv: Vec<(i64, Vec<f64>)> = (1..=100).map(|i| (i, vec![0.41, 2.0])).collect();
        // Before three common iterations disagree there is no evidence against "same".
        assert_eq!(judged(&log, 2, &csv, 2), vec!["drag", "lift"]);
        let want = vec!["tarn/drag", "lift", "forces/drag"];
        for n in 3..=100 {
            assert_eq!(judged(&log, n, &csv, n), want, "{n}");
            assert_eq!(judged(&log, n, &csv, 3.max(n / 2)), want, "{n}");
        }
    }
}
