//! A file read again from its start (truncated, or rewritten in place) replaces what the
//! store holds of it instead of appending a copy.
//!
//! Some writers rewrite a whole history file every iteration; caught mid-write, each
//! rewrite used to become a new segment holding the file's records once more, so records
//! and memory grew without bound. Now the store remembers where the current file's content
//! begins. When the follower reports [`SegmentReason::Truncated`], the records read again
//! are compared, one by one, with those the store holds from that point: equal ones are
//! skipped (the store is unchanged, nothing is counted twice), and the first difference
//! decides:
//!
//! * a record that continues past the last one stored (a higher iteration) means the old
//!   content was moved away and the file truncated (copy-and-truncate rotation): the old
//!   records stay and the new ones follow in a new segment, as before;
//! * anything else means the file now says something else from that record on: the store
//!   drops its records (and the events read after them) from there and takes the new ones.
//!
//! A file caught half-written is thus read again as the prefix it already was, and its rest
//! continues it when it arrives. Events and skip reasons read again are matched the same way.

use super::{SegmentReason, SourceStore};
use crate::record::{Event, LineStats, RecordRef};

/// Where the current file's content begins in the store.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct FileStart {
    pub(super) records: usize,
    /// Absolute event index (counting dropped ones).
    events: u64,
    /// Line counts of earlier files.
    stats_base: LineStats,
}

/// Progress of reading a truncated or rewritten file again.
#[derive(Debug, Clone, Copy)]
pub(super) struct Reread {
    /// Next stored record to compare with.
    record: usize,
    /// Next stored event (absolute index) to compare with.
    event: u64,
    /// Line counts before the file was read again (kept when its old content stays).
    stats_before: LineStats,
}

impl SourceStore {
    /// A new file's content starts here.
    pub(super) fn begin_file(&mut self) {
        self.file = FileStart {
            records: self.iterations.len(),
            events: self.events_total(),
            stats_base: self.stats_base,
        };
    }

    /// The current file is read again from its start.
    pub(super) fn begin_reread(&mut self) {
        self.reread = Some(Reread {
            record: self.file.records,
            event: self.file.events,
            stats_before: self.stats,
        });
        self.stats_base = self.file.stats_base;
    }

    /// Events pushed so far, counting those dropped for the cap.
    pub(super) fn events_total(&self) -> u64 {
        self.events_dropped + self.events.len() as u64
    }

    /// The lowest record count the store was cut back to (a rewritten file) since the last
    /// call, so a consumer printing records as they come can say so.
    pub fn take_rewound(&mut self) -> Option<usize> {
        self.rewound.take()
    }

    /// During a re-read: whether `rec` is already stored (then it is skipped). Ends the
    /// re-read at the first record that is not, cutting the store back when the file's old
    /// content was replaced.
    pub(super) fn reread_record(&mut self, rec: &RecordRef<'_>) -> bool {
        let Some(rr) = self.reread else { return false };
        if rr.record >= self.iterations.len() {
            // Past what was stored: the file grew beyond its old content.
            self.reread = None;
            return false;
        }
        if self.same_record(rr.record, rec) {
            if let Some(r) = &mut self.reread {
                r.record += 1;
            }
            return true;
        }
        self.reread = None;
        let last = self.iterations.last().copied();
        if let (Some(it), Some(last)) = (rec.iteration, last)
            && it > last
        {
            // The old content was moved away and the file truncated: keep it, continue.
            self.stats_base = rr.stats_before;
            self.pending_segment = Some(SegmentReason::Truncated);
            self.begin_file();
            return false;
        }
        self.cut_back(rr.record, rr.event);
        false
    }

    /// During a re-read: whether `ev` (iteration filled in) is already stored.
    pub(super) fn reread_event(&mut self, ev: &Event) -> bool {
        let Some(rr) = self.reread else { return false };
        let at = rr.event.checked_sub(self.events_dropped).map(|i| i as usize);
        match at.and_then(|i| self.events.get(i)) {
            Some(old) if old == ev => {
                if let Some(r) = &mut self.reread {
                    r.event += 1;
                }
                true
            }
            Some(_) => {
                // The old events from here on belong to content that is gone.
                if let Some(i) = at {
                    self.events.truncate(i);
                }
                false
            }
            None => false,
        }
    }

    /// The iteration an event without one belongs to: the last record read so far (during a
    /// re-read, the last one matched).
    pub(super) fn current_iteration(&self) -> Option<i64> {
        match self.reread {
            Some(rr) if rr.record < self.iterations.len() => {
                rr.record.checked_sub(1).map(|p| self.iterations[p])
            }
            _ => self.iterations.last().copied(),
        }
    }

    /// Whether a re-read is in progress.
    pub(super) fn rereading(&self) -> bool {
        self.reread.is_some()
    }

    /// Drop records `record` and later, and events from absolute index `event` on.
    fn cut_back(&mut self, record: usize, event: u64) {
        self.iterations.truncate(record);
        if self.has_time {
            self.times.truncate(record);
        }
        if let Some(i) = self.segments.iter().position(|s| s.first_record >= record) {
            let removed = self.segments.split_off(i);
            // The segment this file opened is opened again by its first new record.
            if record > 0 && record == self.file.records && removed[0].first_record == record {
                self.pending_segment = Some(removed[0].reason.clone());
            }
        }
        let segments = &self.segments[..];
        for s in &mut self.series {
            s.truncate_records(record, |r| super::segment_of(segments, r).1);
        }
        if let Some(i) = event.checked_sub(self.events_dropped) {
            self.events.truncate(i as usize);
        }
        self.rewound = Some(self.rewound.map_or(record, |r| r.min(record)));
    }

    /// Is stored record `p` the same as `rec` (iteration, time and every value, in order)?
    fn same_record(&self, p: usize, rec: &RecordRef<'_>) -> bool {
        if let Some(it) = rec.iteration
            && self.iterations[p] != it
        {
            return false;
        }
        let stored_time = if self.has_time { Some(self.times[p]) } else { None };
        let same_time = match (stored_time, rec.time) {
            (None, None) => true,
            (Some(a), None) | (None, Some(a)) => a.is_nan() && rec.time.is_none(),
            (Some(a), Some(b)) => a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
        };
        if !same_time {
            return false;
        }
        // Every value of `rec` must be the next stored value of its series at `p`, and the
        // store must hold no other value at `p`.
        let mut used: Vec<(usize, usize)> = Vec::new();
        for &(id, v) in rec.values {
            let Some(&idx) = self.ids.get(id as usize).filter(|&&i| i != super::NO_SERIES) else {
                continue;
            };
            let idx = idx as usize;
            let range = self.series[idx].values_at(p);
            let k = match used.iter_mut().find(|(i, _)| *i == idx) {
                Some((_, k)) => {
                    *k += 1;
                    *k - 1
                }
                None => {
                    used.push((idx, 1));
                    0
                }
            };
            let Some(&old) =
                self.series[idx].values.get(range.start + k).filter(|_| k < range.len())
            else {
                return false;
            };
            if old.to_bits() != v.to_bits() && !(old.is_nan() && v.is_nan()) {
                return false;
            }
        }
        let held: usize = self.series.iter().map(|s| s.values_at(p).len()).sum();
        held == used.iter().map(|(_, k)| k).sum::<usize>()
    }
}
