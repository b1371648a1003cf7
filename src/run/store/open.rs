//! The open record shown provisionally: a `lines` parser closes a record only when the next
//! step line arrives, so the newest record of a live log would never be seen while the
//! solver computes the next step, nor after it stopped. The ingest side sends that record
//! once the log has been quiet for a while ([`IngestItem::Open`](crate::run::ingest::IngestItem));
//! the store holds it like any record but remembers how to take it back, and takes it back
//! before anything else from that source is applied. The store thus always equals what it
//! would be without the provisional record, plus at most that one record at the end.

use super::series::SeriesMark;
use super::{SegmentReason, SourceStore};
use crate::record::RecordRef;

/// How to take the provisional record back.
#[derive(Debug, Clone, Default)]
pub(super) struct Provisional {
    records: usize,
    times: usize,
    has_time: bool,
    segments: usize,
    pending_segment: Option<SegmentReason>,
    series: Vec<(usize, SeriesMark)>,
}

impl SourceStore {
    /// Show `rec` (a parser's open record) as the last record until the source yields
    /// anything else; replaces the previous provisional record.
    pub fn show_open(&mut self, rec: RecordRef<'_>) {
        self.settle_open();
        let mut series: Vec<(usize, SeriesMark)> = Vec::new();
        for &(id, _) in rec.values {
            if let Some(&idx) = self.ids.get(id as usize)
                && idx != super::NO_SERIES
                && !series.iter().any(|(i, _)| *i == idx as usize)
            {
                let idx = idx as usize;
                series.push((idx, self.series[idx].mark()));
            }
        }
        let undo = Provisional {
            records: self.iterations.len(),
            times: self.times.len(),
            has_time: self.has_time,
            segments: self.segments.len(),
            pending_segment: self.pending_segment.clone(),
            series,
        };
        self.push_record(rec);
        self.open = Some(Box::new(undo));
    }

    /// Records that are not provisional.
    pub fn closed_records(&self) -> usize {
        self.records() - usize::from(self.open.is_some())
    }

    /// Take the provisional record back, if there is one.
    pub(super) fn settle_open(&mut self) {
        let Some(undo) = self.open.take() else { return };
        self.iterations.truncate(undo.records);
        self.times.truncate(undo.times);
        self.has_time = undo.has_time;
        if !self.has_time {
            self.times.clear();
        }
        self.segments.truncate(undo.segments);
        self.pending_segment = undo.pending_segment;
        for (idx, mark) in undo.series {
            self.series[idx].rewind(mark);
        }
    }
}
