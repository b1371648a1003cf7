//! Moving followed lines through parsers into batches: the same code serves one-shot reads
//! (`parse`, `check`, `report`) and the live ingest thread (`watch`).
//!
//! A [`SourceReader`] owns one follower and the parser instance for its current file. It
//! picks the parser by name or, when none is named, by detection on the first bytes of the
//! file once the file exists. The live loop ([`spawn_live`]) owns every reader on one thread
//! and blocks on file events or the poll tick; it never busy-waits.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::Sender;
use std::thread::JoinHandle;
use std::time::{Duration, SystemTime};

use thiserror::Error;

use crate::follow::{FollowConfig, FollowItem, Follower, Waker};
use crate::parser::{Parser, Registry};
use crate::record::Output;
use crate::run::config::{RunSpec, SourceSpec};
use crate::run::ingest::{IngestBatch, IngestItem, SourceActivity, apply};
use crate::run::store::{RunStore, SourceStore};

/// How many bytes of a file detection looks at.
const DETECT_BYTES: usize = 64 * 1024;

/// Errors that stop a source before it starts.
#[derive(Debug, Error)]
pub enum PipelineError {
    #[error("{source_path}: unknown parser `{name}`{hint}")]
    UnknownParser { source_path: String, name: String, hint: String },
    #[error(
        "{path}: no parser definition recognises this file ({detail}); name one with --parser NAME, or draft one with `settle parsers draft FILE`"
    )]
    NotRecognised { path: PathBuf, detail: String },
    /// The named or detected definition does not compile.
    #[error("{source_path}: {message}")]
    Definition { source_path: String, message: String },
    #[error("{path}: file not found")]
    Missing { path: PathBuf },
}

/// `: did you mean `x`?` for a typo, and where the names are listed.
fn unknown_hint(registry: &Registry, name: &str) -> String {
    match registry.closest(name) {
        Some(c) => format!(": did you mean `{c}`? (see `settle parsers list`)"),
        None => " (see `settle parsers list`)".to_string(),
    }
}

/// The parser of a source's current file, chosen by name or by detection on its first lines.
///
/// Detection looks at the head of the file; instead of re-reading the file, the first lines
/// are kept (up to [`DETECT_BYTES`]) until a definition claims them, then replayed.
struct ParserSlot {
    named: Option<String>,
    chosen: Option<String>,
    parser: Option<Parser>,
    head: Vec<u8>,
}

impl ParserSlot {
    fn feed(
        &mut self,
        registry: &Registry,
        line: &[u8],
        out: &mut Vec<Output>,
        path: &str,
    ) -> Result<(), PipelineError> {
        if let Some(p) = self.parser.as_mut() {
            p.feed(line, out);
            return Ok(());
        }
        self.head.extend_from_slice(line);
        self.head.push(b'\n');
        if self.head.len() >= DETECT_BYTES || self.named.is_some() {
            self.decide(registry, true, out, path)?;
        }
        Ok(())
    }

    /// Choose the parser from the kept head; with `force`, failing to choose is an error.
    fn decide(
        &mut self,
        registry: &Registry,
        force: bool,
        out: &mut Vec<Output>,
        path: &str,
    ) -> Result<bool, PipelineError> {
        if self.parser.is_some() {
            return Ok(true);
        }
        if self.head.is_empty() && self.named.is_none() {
            return Ok(false);
        }
        let name = match &self.named {
            Some(n) => n.clone(),
            None => {
                let det = registry.detect(&self.head);
                match det.chosen {
                    Some(n) => n,
                    None if !force => return Ok(false),
                    None => {
                        let detail = det.why_none();
                        return Err(PipelineError::NotRecognised { path: path.into(), detail });
                    }
                }
            }
        };
        let def = registry.definition(&name).map_err(|e| match e {
            crate::parser::RegistryError::Unknown { .. } => PipelineError::UnknownParser {
                source_path: path.to_string(),
                name: name.clone(),
                hint: unknown_hint(registry, &name),
            },
            e => {
                PipelineError::Definition { source_path: path.to_string(), message: e.to_string() }
            }
        })?;
        let mut parser = def.parser();
        let head = std::mem::take(&mut self.head);
        let kept = head.strip_suffix(b"\n").unwrap_or(&head);
        if !head.is_empty() {
            for line in kept.split(|&b| b == b'\n') {
                parser.feed(line, out);
            }
        }
        self.parser = Some(parser);
        self.chosen = Some(name);
        Ok(true)
    }

    /// Close the current parser (a restart): flush its open record.
    fn close(&mut self, out: &mut Vec<Output>) -> Option<crate::record::LineStats> {
        let stats = self.parser.as_mut().map(|p| {
            p.finish(out);
            p.stats()
        });
        self.parser = None;
        self.head.clear();
        if self.named.is_none() {
            self.chosen = None;
        }
        stats
    }
}

/// One source: its follower and the parser of its current file.
pub struct SourceReader {
    follower: Follower,
    registry: Arc<Registry>,
    slot: ParserSlot,
    label: String,
    out: Vec<Output>,
    /// The parser name last announced with [`IngestItem::Parser`].
    announced: Option<String>,
    /// Whether anything has been read yet (the first read reports the file's mtime as its
    /// growth time, so a long-dead log is seen as stale at once).
    read_before: bool,
    /// The note that the file exists but is empty has been given.
    said_empty: bool,
}

impl SourceReader {
    /// A reader for `spec`; fails only when a named parser does not exist.
    pub fn new(
        spec: &SourceSpec,
        registry: Arc<Registry>,
        cfg: FollowConfig,
    ) -> Result<SourceReader, PipelineError> {
        if let Some(name) = &spec.parser
            && !registry.contains(name)
        {
            return Err(PipelineError::UnknownParser {
                source_path: spec.label.clone(),
                name: name.clone(),
                hint: unknown_hint(&registry, name),
            });
        }
        Ok(SourceReader {
            follower: Follower::new(spec.path.clone(), cfg),
            registry,
            slot: ParserSlot {
                named: spec.parser.clone(),
                chosen: spec.parser.clone(),
                parser: None,
                head: Vec::new(),
            },
            label: spec.label.clone(),
            out: Vec::new(),
            announced: None,
            read_before: false,
            said_empty: false,
        })
    }

    /// The source's label (path as the user wrote it).
    pub fn label(&self) -> &str {
        &self.label
    }

    /// Name of the parser in use, once known.
    pub fn parser_name(&self) -> Option<&str> {
        self.slot.chosen.as_deref()
    }

    /// The follower's view of its files.
    pub fn follower(&self) -> &Follower {
        &self.follower
    }

    pub fn follower_mut(&mut self) -> &mut Follower {
        &mut self.follower
    }

    /// Read what is new; returns the items to apply (empty when nothing changed).
    ///
    /// With `at_end` (one-shot reads), the final unterminated line is used, the open record
    /// is flushed and a file no definition recognises is an error.
    pub fn read(&mut self, at_end: bool) -> Result<Vec<IngestItem>, PipelineError> {
        let mut chunks = Vec::new();
        let mut last = self.read_chunked(at_end, &mut |c| chunks.extend(c))?;
        chunks.append(&mut last);
        Ok(chunks)
    }

    /// [`read`](Self::read), handing out what is ready at each progress mark of a large
    /// first read (every 64 MiB), so a live view shows progress and early data instead of
    /// freezing until the whole file is read. Returns the rest.
    pub fn read_chunked(
        &mut self,
        at_end: bool,
        on_chunk: &mut dyn FnMut(Vec<IngestItem>),
    ) -> Result<Vec<IngestItem>, PipelineError> {
        let SourceReader { follower, registry, slot, label, out, .. } = self;
        let mut items = Vec::new();
        let mut grew = false;
        let mut error = None;
        let mut sink = |item: FollowItem<'_>| {
            if error.is_some() {
                return;
            }
            match item {
                FollowItem::Line(line) => {
                    grew = true;
                    if let Err(e) = slot.feed(registry, line, out, label) {
                        error = Some(e);
                    }
                }
                FollowItem::Restart(reason) => {
                    let stats = slot.close(out);
                    items.extend(out.drain(..).map(IngestItem::Output));
                    if let Some(s) = stats {
                        items.push(IngestItem::Stats(s));
                    }
                    items.push(IngestItem::Restart(reason));
                }
                FollowItem::Note(n) => items.push(IngestItem::Note(n)),
                FollowItem::Progress { read, total } => {
                    items.extend(out.drain(..).map(IngestItem::Output));
                    if let Some(p) = &slot.parser {
                        items.push(IngestItem::Stats(p.stats()));
                    }
                    items.push(IngestItem::Progress { read, total });
                    on_chunk(std::mem::take(&mut items));
                }
            }
        };
        if at_end {
            follower.read_to_end(&mut sink);
        } else {
            follower.poll(&mut sink);
        }
        if let Some(e) = error {
            return Err(e);
        }
        slot.decide(registry, at_end, out, label)?;
        if at_end && let Some(p) = slot.parser.as_mut() {
            p.finish(out);
        }
        items.extend(out.drain(..).map(IngestItem::Output));
        if let Some(p) = &slot.parser {
            items.push(IngestItem::Stats(p.stats()));
        }
        if slot.chosen.is_some() && slot.chosen != self.announced {
            self.announced = slot.chosen.clone();
            items.insert(0, IngestItem::Parser(slot.chosen.clone().unwrap_or_default()));
        }
        // An existing file with nothing in it yet says so once: the run then knows this
        // source has been looked at (a finished run waits for every source's first read).
        if !grew && !self.read_before && !self.said_empty && self.follower.current_path().is_some()
        {
            self.said_empty = true;
            items.push(IngestItem::Note(format!("{} is empty so far", self.label)));
        }
        if grew {
            let now = SystemTime::now();
            let at = if self.read_before {
                now
            } else {
                self.follower
                    .current_path()
                    .and_then(|p| std::fs::metadata(p).and_then(|m| m.modified()).ok())
                    .map_or(now, |m| m.min(now))
            };
            self.read_before = true;
            items.push(IngestItem::Grew(at));
        }
        Ok(items)
    }
}

/// Read every source of `spec` to the end of its data, once (`parse`, `check`, `report`).
///
/// Returns the store and, per source, the parser name that was used.
pub fn read_run(
    spec: &RunSpec,
    registry: Arc<Registry>,
) -> Result<(RunStore, Vec<String>), PipelineError> {
    let mut run = RunStore::new(spec.name.clone());
    let mut parsers = Vec::new();
    for s in &spec.sources {
        if !crate::glob::is_pattern(&s.path.to_string_lossy()) && !s.path.exists() {
            return Err(PipelineError::Missing { path: s.path.clone() });
        }
        let mut reader = SourceReader::new(s, registry.clone(), FollowConfig::default())?;
        let items = reader.read(true)?;
        let name = reader.parser_name().unwrap_or("-").to_string();
        let mut store = SourceStore::new(s.label.clone(), name.clone());
        let mut activity = SourceActivity::default();
        apply(&mut store, &mut activity, items);
        run.sources.push(store);
        parsers.push(name);
    }
    Ok((run, parsers))
}

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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run::config::SourceSpec;

    fn csv(dir: &std::path::Path, rows: usize) -> PathBuf {
        let mut text = String::from("iteration,res_p,Cd\n");
        for i in 1..=rows {
            text.push_str(&format!("{i},{:.4e},{:.5}\n", 1.0 / i as f64, 0.3));
        }
        let p = dir.join("h.csv");
        std::fs::write(&p, text).unwrap();
        p
    }

    fn spec(path: PathBuf, parser: Option<&str>) -> SourceSpec {
        SourceSpec { label: path.display().to_string(), path, parser: parser.map(str::to_string) }
    }

    #[test]
    fn large_first_reads_come_in_chunks_with_progress() {
        let dir = tempfile::tempdir().unwrap();
        let path = csv(dir.path(), 5000);
        let cfg = FollowConfig {
            progress_every: 16 * 1024,
            read_chunk: 8 * 1024,
            ..FollowConfig::default()
        };
        let reg = Arc::new(Registry::builtin());
        let mut reader = SourceReader::new(&spec(path, None), reg, cfg).unwrap();
        let mut chunks: Vec<Vec<IngestItem>> = Vec::new();
        let rest = reader.read_chunked(true, &mut |c| chunks.push(c)).unwrap();
        assert!(chunks.len() >= 3, "{} chunks", chunks.len());
        assert!(chunks.iter().all(|c| matches!(c.last(), Some(IngestItem::Progress { .. }))));
        let records = chunks
            .iter()
            .flatten()
            .chain(rest.iter())
            .filter(|i| matches!(i, IngestItem::Output(Output::Record(_))))
            .count();
        assert_eq!(records, 5000, "every row once, across chunks");
        assert!(rest.iter().any(|i| matches!(i, IngestItem::Parser(n) if n == "csv")));
    }

    #[test]
    fn named_parser_must_exist_and_unknown_files_are_errors() {
        let dir = tempfile::tempdir().unwrap();
        let path = csv(dir.path(), 3);
        let reg = Arc::new(Registry::builtin());
        let err =
            SourceReader::new(&spec(path, Some("nosuch")), reg.clone(), FollowConfig::default());
        assert!(matches!(err, Err(PipelineError::UnknownParser { .. })));
        let junk = dir.path().join("j.txt");
        std::fs::write(&junk, "hello\nworld\n").unwrap();
        let mut r = SourceReader::new(&spec(junk, None), reg, FollowConfig::default()).unwrap();
        // Live reads wait for more lines; the one-shot read says nobody claims the file.
        assert!(r.read(false).is_ok());
        assert!(matches!(r.read(true), Err(PipelineError::NotRecognised { .. })));
    }
}
