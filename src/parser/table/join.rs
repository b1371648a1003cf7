//! Reading a table in parts on several cores: a parser for a later part starts from the
//! header state the table had when the parts were cut, and hands over at the join when the
//! parts before it ended in that same state (the usual case: a table's header rarely
//! changes); otherwise the part is read again in order.

use std::collections::VecDeque;

use super::{Col, Header, TableParser, Tally, component_name};
use crate::parser::series::MAX_SERIES;
use crate::record::{Batch, Sink};

/// What a speculative parser assumed about the lines before its part.
#[derive(Debug, Clone)]
pub(super) struct Assumed {
    pub(super) header: Option<Header>,
    pub(super) candidates: VecDeque<Vec<Vec<u8>>>,
    pub(super) series: usize,
}

impl TableParser {
    /// A parser for a later part of the same file, read while this one reads the parts
    /// before it: it assumes the header state this parser has now (a table's header rarely
    /// changes) and its line numbers start again at 1.
    pub fn speculative(&self) -> TableParser {
        let mut p = self.clone();
        p.line_no = 0;
        p.tally = Tally::default();
        p.assumed = Some(Box::new(Assumed {
            header: self.header.clone(),
            candidates: self.candidates.clone(),
            series: self.series.len(),
        }));
        p
    }

    /// Continue after `part`, which `worker` (made by [`speculative`](Self::speculative))
    /// has read into `batch`; `self` has read everything before `part`. When `self` ended
    /// the preceding parts in the header state the worker assumed (same header, same pending
    /// header candidates, no vector column named differently), every row of `part` was read
    /// as a serial read would read it: the worker's output goes to `out` with its line
    /// numbers shifted and the worker continues. Otherwise `self` reads `part` itself.
    /// Returns whether the worker's reading was used (else `self` read `part`).
    pub fn join(
        &mut self,
        part: &[u8],
        mut worker: TableParser,
        batch: &Batch,
        out: &mut dyn Sink,
    ) -> bool {
        let Some(assumed) = worker.assumed.take() else {
            self.feed_block(part, out);
            return false;
        };
        let same_header = match (&self.header, &assumed.header) {
            (None, None) => true,
            (Some(a), Some(b)) => a.raw == b.raw && a.problem == b.problem,
            _ => false,
        };
        let new_series = worker.series.len() - assumed.series;
        if !same_header
            || self.candidates != assumed.candidates
            || self.series.len() + new_series > MAX_SERIES
            || !worker.adopt_vector_names(self, &assumed, out)
        {
            self.feed_block(part, out);
            return false;
        }
        out.batch(batch, self.line_no, false);
        worker.line_no += self.line_no;
        worker.tally.rebase(self.tally.stats, self.tally.reported());
        *self = worker;
        true
    }

    /// How vector columns are named (`_x` or `[0]`) is decided by the first vector seen. A
    /// column that `prev` decided after the worker's starting point must be named the same
    /// by the worker: when the worker decided too, the decisions must agree (else `false`);
    /// when it did not, it takes over `prev`'s decision.
    fn adopt_vector_names(
        &mut self,
        prev: &TableParser,
        assumed: &Assumed,
        out: &mut dyn Sink,
    ) -> bool {
        let (Some(h), Some(ph), Some(ah)) = (&mut self.header, &prev.header, &assumed.header)
        else {
            return true;
        };
        for ((col, pcol), acol) in h.cols.iter_mut().zip(&ph.cols).zip(&ah.cols) {
            let (
                Col::Value { name, role, comps, xyz, .. },
                Col::Value { comps: pcomps, xyz: pxyz, .. },
                Col::Value { comps: acomps, .. },
            ) = (col, pcol, acol)
            else {
                continue;
            };
            if !acomps.is_empty() || pcomps.is_empty() {
                continue;
            }
            if !comps.is_empty() {
                if xyz != pxyz {
                    return false;
                }
                continue;
            }
            *xyz = *pxyz;
            for k in 0..pcomps.len() {
                match self.series.intern(&component_name(name, k, *xyz), *role, out) {
                    Some(id) => comps.push(id),
                    None => return false,
                }
            }
        }
        true
    }
}
