//! Appending a batch parsed on another core: record heads and the other items in file
//! order, then the values a series at a time (one copy per series when it stays dense),
//! instead of one push per value. The result is the one the batch's items applied one by
//! one would give (tests compare both); a store in the middle of re-reading a rewritten
//! file, or a batch without columns, takes the items one by one.

use super::{NO_SERIES, SourceStore, segment_of};
use crate::record::{Batch, BatchItem, Event, Sink, Skip};

impl SourceStore {
    pub(super) fn append_batch(&mut self, b: &Batch, line_offset: u64, after_first: bool) {
        let skip = usize::from(after_first);
        let Some(columns) = b.columns().filter(|_| !self.rereading()) else {
            b.replay_from(skip, line_offset, self);
            return;
        };
        self.settle_open();
        // Store position of the batch's record `skip`.
        let base = self.iterations.len();
        let mut started = skip == 0;
        for item in b.items() {
            match item {
                BatchItem::Record { index, iteration, time, line } => {
                    if index < skip {
                        started = true;
                        continue;
                    }
                    self.push_head(iteration, time, line + line_offset);
                }
                _ if !started => {}
                BatchItem::Series(info) => self.series(info.clone()),
                BatchItem::Event(e) => {
                    self.event(Event { line: e.line + line_offset, ..e.clone() });
                }
                BatchItem::End { line, message } => {
                    self.end_of_run(line + line_offset, message.to_string());
                }
                BatchItem::Skipped(s) => {
                    self.skipped(Skip { line: s.line + line_offset, reason: s.reason.clone() });
                }
            }
        }
        for col in columns {
            let Some(&idx) = self.ids.get(col.id as usize).filter(|&&i| i != NO_SERIES) else {
                continue;
            };
            let at = |r: u32| (base + r as usize - skip) as u32;
            let series = &mut self.series[idx as usize];
            let segments = &self.segments[..];
            if col.consecutive() {
                // Values of skipped records come first.
                let drop = skip.saturating_sub(col.first as usize).min(col.values.len());
                let first = col.first + drop as u32;
                // One copy per segment the batch's records span (usually one).
                let (mut pos, mut rest) = (at(first) as usize, &col.values[drop..]);
                while !rest.is_empty() {
                    let (k, segment) = segment_of(segments, pos);
                    let take = segments.get(k + 1).map_or(rest.len(), |s| {
                        s.first_record.saturating_sub(pos).clamp(1, rest.len())
                    });
                    series.extend_consecutive(pos as u32, &rest[..take], segment);
                    pos += take;
                    rest = &rest[take..];
                }
            } else {
                let from = col.records.partition_point(|&r| (r as usize) < skip);
                for (&r, &v) in col.records[from..].iter().zip(&col.values[from..]) {
                    series.push(at(r), v, segment_of(segments, at(r) as usize).1);
                }
            }
        }
    }
}
