//! [`Batch`]: parser output kept compactly and in order, to be handed on as one piece.
//!
//! The live ingest thread sends batches to the thread that owns the store, and the parts of
//! a large file parsed on other cores come back as batches to be merged in file order. A
//! record costs one small header plus its values in one shared vector (no allocation per
//! record); consecutive records share one entry in the item list.

use super::{Event, Output, RecordRef, SeriesId, SeriesInfo, Sink, Skip};

/// One entry of the item list.
#[derive(Debug, Clone, PartialEq)]
enum Item {
    /// This many records, the next ones of `heads`.
    Records(u32),
    Series(SeriesInfo),
    Event(Event),
    End {
        line: u64,
        message: String,
    },
    Skipped(Skip),
}

/// Iteration, time, line and value count of one record.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Head {
    iteration: Option<i64>,
    time: Option<f64>,
    line: u64,
    len: u32,
}

/// Parser output in file order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Batch {
    items: Vec<Item>,
    heads: Vec<Head>,
    values: Vec<(SeriesId, f64)>,
    /// Columns of [`Batch::build_columns`] (their vectors are reused batch after batch);
    /// valid only while `columns_built`.
    columns: Vec<Column>,
    columns_built: bool,
}

/// The values of one series in a batch, in record order.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    pub id: SeriesId,
    /// Batch record index of the first value.
    pub first: u32,
    /// Batch record index of every value, or empty while the values sit in consecutive
    /// records from `first` (the common case costs no index per value).
    pub records: Vec<u32>,
    pub values: Vec<f64>,
}

impl Column {
    #[inline]
    fn push(&mut self, r: u32, v: f64) {
        if self.records.is_empty() {
            if self.values.is_empty() {
                self.first = r;
            }
            if self.first as usize + self.values.len() == r as usize {
                self.values.push(v);
                return;
            }
            self.records.extend(self.first..self.first + self.values.len() as u32);
        }
        self.records.push(r);
        self.values.push(v);
    }

    /// Whether the values sit in consecutive records from [`Column::first`].
    pub fn consecutive(&self) -> bool {
        self.records.is_empty()
    }
}

/// What [`Batch::items`] yields, in file order.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BatchItem<'a> {
    /// A record: its index in the batch, iteration, time, line (not shifted).
    Record {
        index: usize,
        iteration: Option<i64>,
        time: Option<f64>,
        line: u64,
    },
    Series(&'a SeriesInfo),
    Event(&'a Event),
    End {
        line: u64,
        message: &'a str,
    },
    Skipped(&'a Skip),
}

impl Batch {
    pub fn new() -> Batch {
        Batch::default()
    }

    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }

    /// Records held.
    pub fn records(&self) -> usize {
        self.heads.len()
    }

    /// Values held (over all records).
    pub fn values(&self) -> usize {
        self.values.len()
    }

    /// Group the values by series ([`Batch::columns`]).
    pub fn build_columns(&mut self) {
        let mut spare = std::mem::take(&mut self.columns);
        let mut cols: Vec<Column> = Vec::with_capacity(spare.len());
        // Series id → position in `cols`.
        let mut at: Vec<u32> = Vec::new();
        let mut value = 0usize;
        for (r, h) in self.heads.iter().enumerate() {
            for &(id, v) in &self.values[value..value + h.len as usize] {
                let i = id as usize;
                if i >= at.len() {
                    at.resize(i + 1, u32::MAX);
                }
                if at[i] == u32::MAX {
                    at[i] = cols.len() as u32;
                    let mut c = spare.pop().unwrap_or(Column {
                        id,
                        first: 0,
                        records: Vec::new(),
                        values: Vec::new(),
                    });
                    c.id = id;
                    c.records.clear();
                    c.values.clear();
                    cols.push(c);
                }
                cols[at[i] as usize].push(r as u32, v);
            }
            value += h.len as usize;
        }
        self.columns = cols;
        self.columns_built = true;
    }

    /// The values by series, when [`Batch::build_columns`] was called.
    pub fn columns(&self) -> Option<&[Column]> {
        self.columns_built.then_some(&self.columns[..])
    }

    /// Empty the batch, keeping its buffers for the next one.
    pub fn clear(&mut self) {
        self.items.clear();
        self.heads.clear();
        self.values.clear();
        self.columns_built = false;
    }

    /// Everything but the values, in file order.
    pub fn items(&self) -> impl Iterator<Item = BatchItem<'_>> {
        let mut head = 0usize;
        self.items.iter().flat_map(move |item| {
            let one: Vec<BatchItem<'_>> = match item {
                Item::Records(n) => {
                    let start = head;
                    head += *n as usize;
                    (start..head)
                        .map(|index| {
                            let h = self.heads[index];
                            BatchItem::Record {
                                index,
                                iteration: h.iteration,
                                time: h.time,
                                line: h.line,
                            }
                        })
                        .collect()
                }
                Item::Series(info) => vec![BatchItem::Series(info)],
                Item::Event(e) => vec![BatchItem::Event(e)],
                Item::End { line, message } => vec![BatchItem::End { line: *line, message }],
                Item::Skipped(s) => vec![BatchItem::Skipped(s)],
            };
            one
        })
    }

    /// Everything, in order, to `out`, with `line_offset` added to every line number.
    pub fn replay(&self, line_offset: u64, out: &mut dyn Sink) {
        self.replay_from(0, line_offset, out);
    }

    /// Like [`replay`](Self::replay), leaving out every item up to and including the first
    /// record (see `LinesParser::join`).
    pub fn replay_after_first_record(&self, line_offset: u64, out: &mut dyn Sink) {
        self.replay_from(1, line_offset, out);
    }

    /// Replay, skipping the first `skip_records` records and every item before them.
    pub fn replay_from<S: Sink + ?Sized>(
        &self,
        skip_records: usize,
        line_offset: u64,
        out: &mut S,
    ) {
        let (mut head, mut value) = (0usize, 0usize);
        let mut skipping = skip_records > 0;
        for item in &self.items {
            match item {
                Item::Records(n) => {
                    for _ in 0..*n {
                        let h = self.heads[head];
                        let vals = &self.values[value..value + h.len as usize];
                        head += 1;
                        value += h.len as usize;
                        if skipping {
                            skipping = head < skip_records;
                            continue;
                        }
                        out.record(RecordRef {
                            iteration: h.iteration,
                            time: h.time,
                            values: vals,
                            line: h.line + line_offset,
                        });
                    }
                }
                _ if skipping => {}
                Item::Series(info) => out.series(info.clone()),
                Item::Event(e) => {
                    out.event(Event { line: e.line + line_offset, ..e.clone() });
                }
                Item::End { line, message } => out.end_of_run(line + line_offset, message.clone()),
                Item::Skipped(s) => {
                    out.skipped(Skip { line: s.line + line_offset, reason: s.reason.clone() });
                }
            }
        }
    }

    /// Owned items, one by one.
    pub fn outputs(&self) -> Vec<Output> {
        let mut v: Vec<Output> = Vec::with_capacity(self.items.len() + self.heads.len());
        self.replay(0, &mut v);
        v
    }

    /// Bytes allocated (for bounding what is held before it is handed on).
    pub fn heap_bytes(&self) -> usize {
        let cols: usize = self.columns.iter().map(|c| 12 * c.values.capacity()).sum();
        self.items.capacity() * std::mem::size_of::<Item>()
            + self.heads.capacity() * std::mem::size_of::<Head>()
            + self.values.capacity() * std::mem::size_of::<(SeriesId, f64)>()
            + cols
    }
}

impl Sink for Batch {
    fn series(&mut self, info: SeriesInfo) {
        self.items.push(Item::Series(info));
    }

    fn record(&mut self, rec: RecordRef<'_>) {
        self.columns_built = false;
        self.heads.push(Head {
            iteration: rec.iteration,
            time: rec.time,
            line: rec.line,
            len: rec.values.len() as u32,
        });
        self.values.extend_from_slice(rec.values);
        match self.items.last_mut() {
            Some(Item::Records(n)) if *n < u32::MAX => *n += 1,
            _ => self.items.push(Item::Records(1)),
        }
    }

    fn event(&mut self, ev: Event) {
        self.items.push(Item::Event(ev));
    }

    fn end_of_run(&mut self, line: u64, message: String) {
        self.items.push(Item::End { line, message });
    }

    fn skipped(&mut self, skip: Skip) {
        self.items.push(Item::Skipped(skip));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::{Record, Role, Severity};

    fn sample() -> Vec<Output> {
        let rec = |it: i64, line: u64, values: Vec<(u32, f64)>| {
            Output::Record(Record { iteration: Some(it), time: None, values, line })
        };
        vec![
            Output::Series(SeriesInfo { id: 0, name: "p".into(), role: Role::Residual }),
            rec(1, 3, vec![(0, 1.0)]),
            rec(2, 5, vec![]),
            Output::Event(Event {
                severity: Severity::Warning,
                rule: "w".into(),
                message: "m".into(),
                line: 6,
                iteration: Some(2),
            }),
            rec(3, 7, vec![(0, 0.5), (0, 0.25)]),
            Output::EndOfRun { line: 8, message: "done".into() },
            Output::Skipped(Skip { line: 9, reason: "r".into() }),
        ]
    }

    #[test]
    fn a_batch_replays_what_it_was_given() {
        let mut b = Batch::new();
        for o in sample() {
            o.send_to(&mut b);
        }
        assert_eq!((b.records(), b.values()), (3, 3));
        assert_eq!(b.outputs(), sample());
    }

    #[test]
    fn replay_shifts_lines_and_can_start_after_the_first_record() {
        let mut b = Batch::new();
        for o in sample() {
            o.send_to(&mut b);
        }
        let mut shifted: Vec<Output> = Vec::new();
        b.replay(100, &mut shifted);
        let lines: Vec<u64> = shifted
            .iter()
            .filter_map(|o| match o {
                Output::Record(r) => Some(r.line),
                Output::Event(e) => Some(e.line),
                Output::EndOfRun { line, .. } => Some(*line),
                Output::Skipped(s) => Some(s.line),
                Output::Series(_) => None,
            })
            .collect();
        assert_eq!(lines, vec![103, 105, 106, 107, 108, 109]);
        let mut rest: Vec<Output> = Vec::new();
        b.replay_after_first_record(0, &mut rest);
        assert_eq!(rest, sample()[2..].to_vec());
    }
}
