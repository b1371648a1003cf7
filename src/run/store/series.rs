//! One series of the store: its values and where they sit among the source's records.
//!
//! The common case is dense (one value per record since the series first appeared): the
//! values alone, 8 bytes each. A series that misses records or repeats within one is sparse
//! and also keeps the record position of every value.
//!
//! Each series also keeps its [`History`]: the running aggregates the judge would otherwise
//! compute from the whole run (peak, step drop, non-finite values, block maxima, magnitude
//! checkpoints), updated as values arrive, taken back with them ([`Series::rewind`]) and
//! rebuilt when a rewritten file cuts the store back ([`Series::truncate_records`]).

use crate::judge::history::{History, Tally};
use crate::record::Role;

/// Where the values of a series sit among the source's records.
#[derive(Debug, Clone, PartialEq)]
pub(super) enum Placement {
    /// One value per record, starting at record `first`.
    Dense { first: u32 },
    /// Explicit record position of every value.
    Sparse(Vec<u32>),
}

/// One named quantity of a source.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    pub name: String,
    pub role: Role,
    pub(super) values: Vec<f64>,
    pub(super) placement: Placement,
    pub(super) history: History,
}

impl Series {
    pub(super) fn new(name: String, role: Role) -> Self {
        Series {
            name,
            role,
            values: Vec::new(),
            placement: Placement::Dense { first: 0 },
            history: History::new(role),
        }
    }

    /// The running aggregates of the values (see [`History`]).
    pub fn history(&self) -> &History {
        &self.history
    }

    pub fn len(&self) -> usize {
        self.values.len()
    }

    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// All values in order.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    pub fn last(&self) -> Option<f64> {
        self.values.last().copied()
    }

    /// Record position of value `i`.
    pub fn record_of(&self, i: usize) -> usize {
        match &self.placement {
            Placement::Dense { first } => *first as usize + i,
            Placement::Sparse(rec) => rec[i] as usize,
        }
    }

    /// Index of the first value whose record is at or after `record`.
    pub fn first_value_at_or_after(&self, record: usize) -> usize {
        match &self.placement {
            Placement::Dense { first } => {
                record.saturating_sub(*first as usize).min(self.values.len())
            }
            Placement::Sparse(rec) => rec.partition_point(|&r| (r as usize) < record),
        }
    }

    /// Add `value` at `record`, which lies in the segment with id `segment` (the segment's
    /// first record).
    #[inline]
    pub(super) fn push(&mut self, record: u32, value: f64, segment: u64) {
        self.history.push(value, segment);
        match &mut self.placement {
            Placement::Dense { first } => {
                if self.values.is_empty() {
                    *first = record;
                } else if *first as usize + self.values.len() != record as usize {
                    let first = *first;
                    let mut rec: Vec<u32> =
                        (0..self.values.len() as u32).map(|i| first + i).collect();
                    rec.push(record);
                    self.placement = Placement::Sparse(rec);
                    self.values.push(value);
                    return;
                }
            }
            Placement::Sparse(rec) => rec.push(record),
        }
        self.values.push(value);
    }

    /// Indices of the values held at record `record` (empty when none).
    pub(super) fn values_at(&self, record: usize) -> std::ops::Range<usize> {
        match &self.placement {
            Placement::Dense { first } => {
                let f = *first as usize;
                if record >= f && record - f < self.values.len() {
                    record - f..record - f + 1
                } else {
                    0..0
                }
            }
            Placement::Sparse(rec) => {
                let a = rec.partition_point(|&r| (r as usize) < record);
                let b = rec.partition_point(|&r| (r as usize) <= record);
                a..b
            }
        }
    }

    /// Values for consecutive records from `record` on: one copy when the series is dense
    /// and continues right there, else one push each.
    /// All the records lie in the segment with id `segment`.
    pub(super) fn extend_consecutive(&mut self, record: u32, values: &[f64], segment: u64) {
        let Some((&v0, rest)) = values.split_first() else { return };
        self.push(record, v0, segment);
        match self.placement {
            Placement::Dense { first }
                if first as usize + self.values.len() == record as usize + 1 =>
            {
                self.values.extend_from_slice(rest);
                self.history.extend(rest, segment);
            }
            _ => {
                for (k, &v) in rest.iter().enumerate() {
                    self.push(record + 1 + k as u32, v, segment);
                }
            }
        }
    }

    /// How far the series reaches now, to go back to with [`Series::rewind`].
    pub(super) fn mark(&self) -> SeriesMark {
        SeriesMark {
            len: self.values.len(),
            dense_first: match &self.placement {
                Placement::Dense { first } => Some(*first),
                Placement::Sparse(_) => None,
            },
            history: self.history.mark(),
        }
    }

    /// Undo every push made since `mark` was taken (only pushes: values are never changed).
    pub(super) fn rewind(&mut self, mark: SeriesMark) {
        self.values.truncate(mark.len);
        match (&mut self.placement, mark.dense_first) {
            (Placement::Sparse(rec), None) => rec.truncate(mark.len),
            (placement, Some(first)) => *placement = Placement::Dense { first },
            (Placement::Dense { .. }, None) => {}
        }
        self.history.rewind(mark.history, &self.values);
    }

    /// With `records` records so far: when the series holds one value in each since it
    /// first appeared, make room for `total` records.
    pub(super) fn reserve_dense(&mut self, records: usize, total: usize) {
        if let Placement::Dense { first } = self.placement
            && !self.values.is_empty()
            && first as usize + self.values.len() == records
        {
            self.values.reserve_exact(total - records);
        }
    }

    /// Drop the values of records `record` and later; `segment_of(r)` is the id of the
    /// segment of record `r` (the rare path of a rewritten file: the history is rebuilt).
    pub(super) fn truncate_records(&mut self, record: usize, segment_of: impl Fn(usize) -> u64) {
        let keep = self.first_value_at_or_after(record);
        self.values.truncate(keep);
        if let Placement::Sparse(rec) = &mut self.placement {
            rec.truncate(keep);
        }
        self.history = History::rebuild(self.role, &self.values, |i| segment_of(self.record_of(i)));
    }

    /// Bytes held by this series (values plus positions), for the memory benchmark.
    pub fn heap_bytes(&self) -> usize {
        self.history.heap_bytes()
            + self.values.capacity() * 8
            + match &self.placement {
                Placement::Dense { .. } => 0,
                Placement::Sparse(r) => r.capacity() * 4,
            }
    }
}

/// What [`Series::mark`] remembers.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct SeriesMark {
    len: usize,
    /// The placement was dense, from this record.
    dense_first: Option<u32>,
    history: Tally,
}
