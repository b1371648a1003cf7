//! Reading a large first read on every core: blocks of lines parsed in parallel, merged in
//! file order.
//!
//! The reader thread (follower + line splitting) feeds the first block's worth of lines of a
//! read to the parser in place; when a read holds more, the rest is gathered into blocks and
//! each block goes to a worker thread with a parser made by [`Parser::speculative`] from the
//! parser as it stood after that first block. Results are merged strictly in file order with
//! [`Parser::join`], which hands the sink exactly what a serial read would have (each engine
//! says why, and reads a block itself when it cannot show it). So parallelism changes only
//! the wall time, never the result; `tests/parser_parallel.rs` checks that on files cut at
//! every kind of awkward place.
//!
//! Live appends are small and never fill a second block, so they stay on one thread. On a
//! machine whose cores are busy (a shared login node), more threads would only add the
//! cost of blocks and batches: the pool uses the cores the load average leaves free (or
//! `SETTLE_THREADS`), and with fewer than two the read stays on one thread.
//! Memory stays bounded: at most [`IN_FLIGHT_PER_WORKER`] blocks per worker are queued or
//! done-but-not-merged; the reader waits for the oldest before sending more.

use std::collections::BTreeMap;
use std::sync::mpsc::{Receiver, Sender, SyncSender, channel, sync_channel};
use std::sync::{Arc, Mutex};
use std::thread::Scope;

use crate::parser::Parser;
use crate::record::{Batch, Sink};

/// Bytes of lines per block.
pub const BLOCK_BYTES: usize = 1 << 20;
/// Blocks queued or waiting to be merged, per worker.
const IN_FLIGHT_PER_WORKER: usize = 2;

/// A block sent to a worker, with an empty batch to fill (buffers reused).
struct Job {
    seq: u64,
    block: Vec<u8>,
    worker: Parser,
    batch: Batch,
}

/// A block a worker has parsed.
struct Done {
    seq: u64,
    block: Vec<u8>,
    worker: Parser,
    batch: Batch,
}

/// Worker threads for one read, started when a second block is ready.
pub struct Pool<'scope, 'env> {
    scope: &'scope Scope<'scope, 'env>,
    workers: usize,
    jobs: Option<SyncSender<Job>>,
    done_tx: Sender<Done>,
    done_rx: Receiver<Done>,
    /// The parser each worker starts from (made after the first block).
    template: Option<Parser>,
    next: u64,
    merged: u64,
    waiting: BTreeMap<u64, Done>,
    spare: Vec<Vec<u8>>,
    spare_batches: Vec<Batch>,
    /// Blocks whose parallel reading was used (the others were read again in order).
    pub handed_over: u64,
}

impl<'scope, 'env> Pool<'scope, 'env> {
    /// A pool of `workers` threads (`None`: the cores free now, see [`free_cores`]).
    pub fn new(scope: &'scope Scope<'scope, 'env>, workers: Option<usize>) -> Self {
        let (done_tx, done_rx) = channel();
        let workers = workers.unwrap_or_else(free_cores).max(1);
        Pool {
            scope,
            workers,
            jobs: None,
            done_tx,
            done_rx,
            template: None,
            next: 0,
            merged: 0,
            waiting: BTreeMap::new(),
            spare: Vec::new(),
            spare_batches: Vec::new(),
            handed_over: 0,
        }
    }

    /// Whether there are cores to parse blocks on (else a read stays on one thread).
    pub fn parallel(&self) -> bool {
        self.workers >= 2
    }

    /// An empty buffer for the next block (reused from merged ones).
    pub fn buffer(&mut self) -> Vec<u8> {
        self.spare.pop().unwrap_or_else(|| Vec::with_capacity(BLOCK_BYTES + (64 << 10)))
    }

    /// Parse `block`: on a worker when there is more than one core, else here. `parser` has
    /// read everything before the blocks not yet merged; merged output goes to `out`.
    pub fn submit(&mut self, block: Vec<u8>, parser: &mut Parser, out: &mut dyn Sink) {
        if self.workers < 2 {
            parser.feed_block(&block, out);
            self.recycle(block);
            return;
        }
        let template = self.template.get_or_insert_with(|| parser.speculative());
        let batch = self.spare_batches.pop().unwrap_or_default();
        let job = Job { seq: self.next, block, worker: template.clone(), batch };
        self.next += 1;
        let jobs = match &self.jobs {
            Some(j) => j.clone(),
            None => self.start(),
        };
        // Never more than the bound in flight: merge the oldest first.
        while self.next - self.merged > (self.workers * IN_FLIGHT_PER_WORKER) as u64 {
            if !self.merge_next(parser, out, true) {
                break;
            }
        }
        if let Err(e) = jobs.send(job) {
            // The workers are gone (cannot happen while the pool lives): parse here.
            let job = e.0;
            self.drain(parser, out);
            parser.feed_block(&job.block, out);
            self.merged = job.seq + 1;
            return;
        }
        while self.merge_next(parser, out, false) {}
    }

    /// Merge every block sent so far.
    pub fn drain(&mut self, parser: &mut Parser, out: &mut dyn Sink) {
        while self.merged < self.next {
            if !self.merge_next(parser, out, true) {
                break;
            }
        }
        // The next read starts from the parser as it will then be.
        self.template = None;
    }

    fn start(&mut self) -> SyncSender<Job> {
        let (tx, rx) = sync_channel::<Job>(self.workers * IN_FLIGHT_PER_WORKER);
        let rx = Arc::new(Mutex::new(rx));
        for _ in 0..self.workers {
            let rx = rx.clone();
            let done = self.done_tx.clone();
            self.scope.spawn(move || {
                loop {
                    let job = match rx.lock() {
                        Ok(r) => r.recv(),
                        Err(_) => return,
                    };
                    let Ok(job) = job else { return };
                    let mut worker = job.worker;
                    let mut batch = job.batch;
                    worker.feed_block(&job.block, &mut batch);
                    batch.build_columns();
                    let d = Done { seq: job.seq, block: job.block, worker, batch };
                    if done.send(d).is_err() {
                        return;
                    }
                }
            });
        }
        self.jobs = Some(tx.clone());
        tx
    }

    /// Merge the next block in order if it is done (or, with `wait`, once it is). Returns
    /// whether one was merged.
    fn merge_next(&mut self, parser: &mut Parser, out: &mut dyn Sink, wait: bool) -> bool {
        if self.merged >= self.next {
            return false;
        }
        loop {
            if let Some(d) = self.waiting.remove(&self.merged) {
                self.handed_over += u64::from(parser.join(&d.block, d.worker, &d.batch, out));
                self.merged += 1;
                self.recycle(d.block);
                if self.spare_batches.len() < self.workers * IN_FLIGHT_PER_WORKER {
                    let mut b = d.batch;
                    b.clear();
                    self.spare_batches.push(b);
                }
                return true;
            }
            let got = if wait { self.done_rx.recv().ok() } else { self.done_rx.try_recv().ok() };
            match got {
                Some(d) => {
                    self.waiting.insert(d.seq, d);
                }
                None => return false,
            }
        }
    }

    fn recycle(&mut self, mut block: Vec<u8>) {
        if self.spare.len() < self.workers * IN_FLIGHT_PER_WORKER {
            block.clear();
            self.spare.push(block);
        }
    }
}

/// Threads for a bulk read: `SETTLE_THREADS` when set to a number (1 keeps every read on
/// one thread), else the cores this process may use that other processes are not using:
/// the allowed cores less the one-minute load average (rounded); at least one, at most the
/// cores this process may run on.
pub fn free_cores() -> usize {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    if let Some(n) = std::env::var("SETTLE_THREADS").ok().and_then(|v| v.trim().parse().ok()) {
        return usize::clamp(n, 1, cores);
    }
    let load = std::fs::read_to_string("/proc/loadavg")
        .ok()
        .and_then(|s| s.split_whitespace().next().and_then(|l| l.parse::<f64>().ok()));
    match load {
        Some(l) if l.is_finite() => {
            let free = (cores as f64 - l).round();
            (free.max(1.0) as usize).min(cores)
        }
        _ => cores,
    }
}

impl Drop for Pool<'_, '_> {
    fn drop(&mut self) {
        // Close the job queue so the workers end before the scope joins them.
        self.jobs = None;
    }
}
