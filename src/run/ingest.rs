//! What the ingest side (followers + parsers) hands to the owner of the store.
//!
//! One-shot reads (`check`, `parse`, `report`) stream parser output straight into the
//! store's columns ([`ApplyTo`]): nothing holds a file's worth of records. The live watcher
//! runs followers and parsers on one ingest thread and sends [`IngestBatch`]es over a channel
//! ([`Collect`] gathers them, with parser output packed in a [`Batch`]); applying a batch is
//! then the only way data enters the store on the other side.

use std::time::SystemTime;

use crate::record::{Batch, Event, LineStats, Output, Record, RecordRef, SeriesInfo, Sink, Skip};
use crate::run::store::{SegmentReason, SourceStore};

/// One thing the ingest side learned about a source.
#[derive(Debug, Clone, PartialEq)]
pub enum IngestItem {
    /// One parser output.
    Output(Output),
    /// Parser output, packed, in order.
    Parsed(Batch),
    /// The record the parser holds open (a `lines` log waits for the next step line before
    /// it closes a record), shown provisionally after the source has been quiet for a while;
    /// replaced by whatever the source yields next.
    Open(Record),
    /// A new parser instance started (truncation, replacement, next restart file).
    Restart(SegmentReason),
    /// A follower note for the user (file missing, truncated, junk skipped, watcher fell
    /// back to polling, partial last line left out).
    Note(String),
    /// Cumulative line counts of the current parser instance.
    Stats(LineStats),
    /// The source grew (new complete lines were read) at this time.
    Grew(SystemTime),
    /// Progress of the first bulk read of a large file.
    Progress { read: u64, total: u64 },
    /// The parser definition chosen for the source (by name or by detection).
    Parser(String),
}

/// A batch of items for one source of one run.
#[derive(Debug, Clone, PartialEq)]
pub struct IngestBatch {
    pub run: usize,
    pub source: usize,
    pub items: Vec<IngestItem>,
}

/// Per-source facts that are not data: growth time and bulk-read progress.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SourceActivity {
    pub last_growth: Option<SystemTime>,
    pub progress: Option<(u64, u64)>,
}

/// Apply `items` to `store`, updating `activity`.
pub fn apply(store: &mut SourceStore, activity: &mut SourceActivity, items: Vec<IngestItem>) {
    for item in items {
        apply_one(store, activity, item);
    }
}

fn apply_one(store: &mut SourceStore, activity: &mut SourceActivity, item: IngestItem) {
    match item {
        IngestItem::Output(o) => o.send_to(store),
        IngestItem::Parsed(b) => store.batch(&b, 0, false),
        IngestItem::Open(r) => store.show_open(r.as_ref()),
        IngestItem::Restart(reason) => store.restart(reason),
        IngestItem::Note(n) => store.note(n),
        IngestItem::Stats(s) => store.set_stats(s),
        IngestItem::Grew(t) => activity.last_growth = Some(t),
        IngestItem::Progress { read, total } => {
            activity.progress = (read < total).then_some((read, total));
        }
        IngestItem::Parser(name) => store.parser = name,
    }
}

/// Where a source reader puts what it learns: parser output through [`Sink`], everything
/// else as items, in file order.
pub trait Dest: Sink {
    /// Anything but parser output.
    fn item(&mut self, item: IngestItem);

    /// `fraction` of the file has been read: a store may make room for the rest at once.
    fn read_fraction(&mut self, _fraction: f64) {}
}

/// Straight into a store (one-shot reads).
pub struct ApplyTo<'a> {
    pub store: &'a mut SourceStore,
    pub activity: &'a mut SourceActivity,
}

impl Sink for ApplyTo<'_> {
    fn series(&mut self, info: SeriesInfo) {
        self.store.series(info);
    }
    fn record(&mut self, rec: RecordRef<'_>) {
        self.store.record(rec);
    }
    fn event(&mut self, ev: Event) {
        self.store.event(ev);
    }
    fn end_of_run(&mut self, line: u64, message: String) {
        self.store.end_of_run(line, message);
    }
    fn skipped(&mut self, skip: Skip) {
        self.store.skipped(skip);
    }
    fn batch(&mut self, b: &Batch, line_offset: u64, after_first_record: bool) {
        self.store.batch(b, line_offset, after_first_record);
    }
}

impl Dest for ApplyTo<'_> {
    fn item(&mut self, item: IngestItem) {
        apply_one(self.store, self.activity, item);
    }

    fn read_fraction(&mut self, fraction: f64) {
        if fraction > 0.0 && fraction < 1.0 {
            // 2 % more than the records so far extrapolate to: untouched room costs nothing.
            let total = self.store.records() as f64 / fraction * 1.02;
            self.store.reserve_records(total.min(1e10) as usize);
        }
    }
}

/// Items gathered for sending (the live ingest thread), parser output packed into batches.
#[derive(Debug, Default)]
pub struct Collect {
    items: Vec<IngestItem>,
    batch: Batch,
}

impl Collect {
    /// Everything gathered so far.
    pub fn take(&mut self) -> Vec<IngestItem> {
        self.seal();
        std::mem::take(&mut self.items)
    }

    /// Heap bytes of the parser output not yet taken.
    pub fn pending_bytes(&self) -> usize {
        self.batch.heap_bytes()
    }

    fn seal(&mut self) {
        if !self.batch.is_empty() {
            self.items.push(IngestItem::Parsed(std::mem::take(&mut self.batch)));
        }
    }
}

impl Sink for Collect {
    fn series(&mut self, info: SeriesInfo) {
        self.batch.series(info);
    }
    fn record(&mut self, rec: RecordRef<'_>) {
        self.batch.record(rec);
    }
    fn event(&mut self, ev: Event) {
        self.batch.event(ev);
    }
    fn end_of_run(&mut self, line: u64, message: String) {
        self.batch.end_of_run(line, message);
    }
    fn skipped(&mut self, skip: Skip) {
        self.batch.skipped(skip);
    }
}

impl Dest for Collect {
    fn item(&mut self, item: IngestItem) {
        self.seal();
        self.items.push(item);
    }
}
