//! The live ingest thread: it owns every source reader, wakes on file events or the poll
//! tick (never a busy loop), and sends what each read brought as batches over a channel to
//! the thread that owns the stores.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::Sender;
use std::thread::JoinHandle;
use std::time::Duration;

use super::SourceReader;
use crate::follow::Waker;
use crate::run::ingest::{IngestBatch, IngestItem};

/// One source of the live loop, with the run and source index its batches carry.
pub struct LiveSource {
    pub run: usize,
    pub source: usize,
    pub reader: SourceReader,
}

/// Start the ingest thread: it owns every follower, wakes on file events or the poll tick
/// (never a busy loop), and sends each non-empty batch through `tx` wrapped by `wrap`.
///
/// The thread ends when `shutdown` is set or the receiver is gone. A panic inside it is
/// caught and reported through `on_panic`, so the UI can restore the terminal and exit.
pub fn spawn_live<M: Send + 'static>(
    mut sources: Vec<LiveSource>,
    poll: Duration,
    tx: Sender<M>,
    wrap: fn(IngestBatch) -> M,
    on_panic: fn(String) -> M,
    shutdown: Arc<AtomicBool>,
) -> std::io::Result<JoinHandle<()>> {
    std::thread::Builder::new().name("settle-ingest".into()).spawn(move || {
        let panic_tx = tx.clone();
        let result = std::panic::catch_unwind(std::panic::AssertUnwindSafe(move || {
            live_loop(&mut sources, poll, &tx, wrap, &shutdown)
        }));
        if let Err(p) = result {
            let msg = p
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_else(|| "ingest thread panicked".into());
            let _ = panic_tx.send(on_panic(msg));
        }
    })
}

fn live_loop<M>(
    sources: &mut [LiveSource],
    poll: Duration,
    tx: &Sender<M>,
    wrap: fn(IngestBatch) -> M,
    shutdown: &AtomicBool,
) {
    let mut waker = Waker::new();
    let mut failed = vec![false; sources.len()];
    while !shutdown.load(Ordering::Relaxed) {
        let names_dirty = waker.take_names_dirty();
        for (i, s) in sources.iter_mut().enumerate() {
            if names_dirty {
                s.reader.follower_mut().hint_names();
            }
            for dir in s.reader.follower().watch_dirs() {
                waker.watch(&dir);
            }
            if failed[i] {
                continue;
            }
            let (run, source) = (s.run, s.source);
            let mut closed = false;
            let mut send_chunk = |items: Vec<IngestItem>| {
                closed |= tx.send(wrap(IngestBatch { run, source, items })).is_err();
            };
            let read = s.reader.read_chunked(false, &mut send_chunk);
            if closed {
                return;
            }
            let items = match read {
                Ok(items) => items,
                Err(e) => {
                    failed[i] = true;
                    vec![IngestItem::Note(format!("stopped reading: {e}"))]
                }
            };
            let mut items = items;
            let notes: Vec<IngestItem> =
                waker.take_notes().into_iter().map(IngestItem::Note).collect();
            items.extend(notes);
            if items.iter().all(|it| matches!(it, IngestItem::Stats(_))) {
                continue;
            }
            let batch = IngestBatch { run: s.run, source: s.source, items };
            if tx.send(wrap(batch)).is_err() {
                return;
            }
        }
        waker.wait(poll);
    }
}
