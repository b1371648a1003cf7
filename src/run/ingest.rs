//! What the ingest side (followers + parsers) sends to the owner of the store.
//!
//! The live watcher runs followers and parsers on one ingest thread and sends
//! [`IngestBatch`]es over a channel; `check`, `parse` and `report` produce the same batches
//! in-line. Applying a batch is the only way data enters a [`SourceStore`].

use std::time::SystemTime;

use crate::record::{LineStats, Output};
use crate::run::store::{SegmentReason, SourceStore};

/// One thing the ingest side learned about a source.
#[derive(Debug, Clone, PartialEq)]
pub enum IngestItem {
    /// Parser output.
    Output(Output),
    /// A new parser instance started (truncation, replacement, next restart file).
    Restart(SegmentReason),
    /// A follower note for the user (file missing, truncated, junk skipped, watcher fell
    /// back to polling).
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
        match item {
            IngestItem::Output(o) => store.apply([o]),
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
}
