//! Moving followed lines through parsers: the same code serves one-shot reads (`parse`,
//! `check`, `report`) and the live ingest thread (`watch`).
//!
//! A [`SourceReader`] owns one follower and the parser instance for its current file. It
//! picks the parser by name or, when none is named, by detection on the first bytes of the
//! file once the file exists. Complete lines go to the parser as they come; once a read has
//! brought more than a block's worth (the first read of a large file), the rest is gathered
//! into blocks parsed on every core (`bulk.rs`). Parser output goes straight to a [`Dest`]: the store itself for
//! one-shot reads, packed batches for the live loop. Nothing holds a file's worth of records.
//!
//! One-shot reads take a final line without a newline as data only when the file has been
//! quiet for [`PARTIAL_QUIET`] (a writer may be in the middle of it), or when asked to; a
//! line left out is said in the source's notes. The live loop ([`spawn_live`]) owns every
//! reader on one thread and blocks on file events or the poll tick; it never busy-waits.
//! When a `lines` log has been quiet for [`OPEN_QUIET`], it shows the record the parser still
//! holds open (closed only by the next step line), so the newest iteration is not missing.

mod live;

use std::path::PathBuf;
use std::sync::Arc;
use std::time::{Duration, Instant, SystemTime};

use thiserror::Error;

use crate::follow::{FollowConfig, FollowItem, Follower};
use crate::parser::{Parser, Registry};
use crate::record::{LineStats, Sink};
use crate::run::bulk::{BLOCK_BYTES, Pool};
use crate::run::config::{RunSpec, SourceSpec};
use crate::run::ingest::{ApplyTo, Collect, Dest, IngestItem, SourceActivity};

use crate::run::store::{RunStore, SourceStore};
pub use live::{LiveSource, spawn_live};

/// How many bytes of a file detection looks at.
const DETECT_BYTES: usize = 64 * 1024;
/// A final line without a newline is taken as data by one-shot reads only when the file has
/// not changed for this long (RELIABILITY §3: an unterminated line older than 2 s).
pub const PARTIAL_QUIET: Duration = Duration::from_secs(2);
/// A live `lines` source quiet for this long shows the record it holds open.
pub const OPEN_QUIET: Duration = Duration::from_secs(2);
/// Upper bound on polls of a one-shot read (a writer outrunning the reader).
const MAX_POLLS_TO_END: usize = 1000;
/// Parser output held before a live read hands it on (bounds the ingest thread's memory
/// during a large first read).
const LIVE_CHUNK_BYTES: usize = 8 << 20;

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

/// What a one-shot read does with a final line that has no newline.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PartialLine {
    /// Data only when the file has been quiet for this long; otherwise left out, with a note.
    IfQuiet(Duration),
    /// Always data (`--include-partial`).
    Include,
}

impl Default for PartialLine {
    fn default() -> Self {
        PartialLine::IfQuiet(PARTIAL_QUIET)
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
        out: &mut dyn Sink,
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
        out: &mut dyn Sink,
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
        parser.feed_block(&head, out);
        self.parser = Some(parser);
        self.chosen = Some(name);
        Ok(true)
    }

    /// Close the current parser (a restart): flush its open record.
    fn close(&mut self, out: &mut dyn Sink) -> Option<LineStats> {
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
    /// The path or glob followed.
    path: PathBuf,
    registry: Arc<Registry>,
    slot: ParserSlot,
    label: String,
    /// Complete lines not parsed yet, each ending in `\n`.
    block: Vec<u8>,
    /// The parser name last announced with [`IngestItem::Parser`].
    announced: Option<String>,
    /// Whether anything has been read yet (the first read reports the file's mtime as its
    /// growth time, so a long-dead log is seen as stale at once).
    read_before: bool,
    /// The note that the file exists but is empty has been given.
    said_empty: bool,
    partial: PartialLine,
    open_quiet: Duration,
    /// When a live read last got lines, and whether the open record was shown since.
    last_lines: Option<Instant>,
    open_shown: bool,
    /// Blocks read on other cores and handed over (see `bulk.rs`).
    parallel_blocks: u64,
    /// Threads for a bulk read (`None`: the cores the load leaves free).
    workers: Option<usize>,
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
            path: spec.path.clone(),
            registry,
            slot: ParserSlot {
                named: spec.parser.clone(),
                chosen: spec.parser.clone(),
                parser: None,
                head: Vec::new(),
            },
            label: spec.label.clone(),
            block: Vec::new(),
            announced: None,
            read_before: false,
            said_empty: false,
            partial: PartialLine::default(),
            open_quiet: OPEN_QUIET,
            last_lines: None,
            open_shown: false,
            parallel_blocks: 0,
            workers: None,
        })
    }

    /// What one-shot reads do with a final line that has no newline.
    pub fn set_partial_line(&mut self, p: PartialLine) {
        self.partial = p;
    }

    /// How long a live source must be quiet before its open record is shown.
    pub fn set_open_quiet(&mut self, d: Duration) {
        self.open_quiet = d;
    }

    /// Parse large reads with this many threads (default: the cores the load average leaves
    /// free; fewer than two keeps reads on one thread).
    pub fn set_workers(&mut self, n: usize) {
        self.workers = Some(n);
    }

    /// Blocks of lines that were parsed on another core and used as such so far.
    pub fn parallel_blocks(&self) -> u64 {
        self.parallel_blocks
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
    /// With `at_end` (one-shot reads), the open record is flushed, a final unterminated line
    /// is read as [`PartialLine`] says, and a file no definition recognises is an error.
    pub fn read(&mut self, at_end: bool) -> Result<Vec<IngestItem>, PipelineError> {
        let mut chunks = Vec::new();
        let mut last = self.read_chunked(at_end, &mut |c| chunks.extend(c))?;
        chunks.append(&mut last);
        Ok(chunks)
    }

    /// [`read`](Self::read), handing out what is ready at each progress mark of a large
    /// first read (every 64 MiB) and whenever the parsed data held reaches a few MiB, so a
    /// live view shows progress and early data instead of freezing until the whole file is
    /// read, and the ingest thread holds little. Returns the rest.
    pub fn read_chunked(
        &mut self,
        at_end: bool,
        on_chunk: &mut dyn FnMut(Vec<IngestItem>),
    ) -> Result<Vec<IngestItem>, PipelineError> {
        let mut dest = Collect::default();
        let mut hand_on = |c: &mut Collect, progress: bool| {
            if progress || c.pending_bytes() >= LIVE_CHUNK_BYTES {
                on_chunk(c.take());
            }
        };
        self.read_with(at_end, &mut dest, &mut hand_on)?;
        Ok(dest.take())
    }

    /// A one-shot read to the end of the data, straight into `store`.
    pub fn read_into(
        &mut self,
        store: &mut SourceStore,
        activity: &mut SourceActivity,
    ) -> Result<(), PipelineError> {
        let mut dest = ApplyTo { store, activity };
        self.read_with(true, &mut dest, &mut |_, _| {})
    }

    /// The read itself. `hand_on(dest, at_progress_mark)` is called after each block and at
    /// each progress mark, to pass on what `dest` holds when it wants to.
    fn read_with<D: Dest>(
        &mut self,
        at_end: bool,
        dest: &mut D,
        hand_on: &mut dyn FnMut(&mut D, bool),
    ) -> Result<(), PipelineError> {
        // Bytes left to read, when the source is one plain file (for the store's reservation).
        let size = std::fs::metadata(&self.path).map(|m| m.len()).unwrap_or(0);
        let size = size.saturating_sub(self.follower.offset());
        let SourceReader {
            follower,
            registry,
            slot,
            label,
            block,
            partial,
            parallel_blocks,
            workers,
            ..
        } = self;
        let mut grew = false;
        let mut error = None;
        std::thread::scope(|scope| {
            let mut pool = Pool::new(scope, *workers);
            // Bytes of lines fed in place in this read; past one block, lines are gathered
            // into blocks for the pool (a bulk read).
            let mut in_place = 0usize;
            let mut sink = |item: FollowItem<'_>| {
                if error.is_some() {
                    return;
                }
                match item {
                    FollowItem::Line(line) => {
                        grew = true;
                        let Some(parser) = slot.parser.as_mut() else {
                            if let Err(e) = slot.feed(registry, line, dest, label) {
                                error = Some(e);
                            }
                            return;
                        };
                        if in_place < BLOCK_BYTES || !pool.parallel() {
                            let before = in_place;
                            in_place += line.len() + 1;
                            parser.feed(line, dest);
                            if before < BLOCK_BYTES && in_place >= BLOCK_BYTES && size > 0 {
                                dest.read_fraction(in_place as f64 / size as f64);
                            }
                            if before / BLOCK_BYTES != in_place / BLOCK_BYTES {
                                hand_on(dest, false);
                            }
                            return;
                        }
                        block.extend_from_slice(line);
                        block.push(b'\n');
                        if block.len() >= BLOCK_BYTES {
                            parse_block(&mut pool, block, parser, dest);
                            hand_on(dest, false);
                        }
                    }
                    FollowItem::Restart(reason) => {
                        if let Some(parser) = slot.parser.as_mut() {
                            parse_block(&mut pool, block, parser, dest);
                            pool.drain(parser, dest);
                        }
                        let stats = slot.close(dest);
                        if let Some(s) = stats {
                            dest.item(IngestItem::Stats(s));
                        }
                        dest.item(IngestItem::Restart(reason));
                    }
                    FollowItem::Note(n) => dest.item(IngestItem::Note(n)),
                    FollowItem::Progress { read, total } => {
                        if let Some(parser) = slot.parser.as_mut() {
                            parse_block(&mut pool, block, parser, dest);
                            pool.drain(parser, dest);
                            dest.item(IngestItem::Stats(parser.stats()));
                        }
                        dest.item(IngestItem::Progress { read, total });
                        hand_on(dest, true);
                    }
                }
            };
            if at_end {
                for _ in 0..MAX_POLLS_TO_END {
                    let o = follower.poll(&mut sink);
                    if !o.grew() && !o.restarted {
                        break;
                    }
                }
                if let Some(part) = follower.partial_line() {
                    let age = follower
                        .current_path()
                        .and_then(|p| std::fs::metadata(p).and_then(|m| m.modified()).ok())
                        .and_then(|m| SystemTime::now().duration_since(m).ok());
                    match (*partial, age) {
                        (PartialLine::Include, _) => follower.finish(&mut sink),
                        (PartialLine::IfQuiet(q), Some(a)) if a >= q => follower.finish(&mut sink),
                        (PartialLine::IfQuiet(_), _) => {
                            let path = follower
                                .current_path()
                                .map_or_else(|| label.clone(), |p| p.display().to_string());
                            let age = age.map_or_else(
                                || "just now".to_string(),
                                |a| format!("{:.1} s ago", a.as_secs_f64()),
                            );
                            let n = part.len();
                            sink(FollowItem::Note(format!(
                                "{path}: left out a partial last line ({n} bytes, no newline \
                                 yet; the file changed {age}): it is read once complete, or \
                                 with --include-partial"
                            )));
                        }
                    }
                }
            } else {
                follower.poll(&mut sink);
            }
            // (`sink` is not used past here: its borrows end.)
            if let Some(parser) = slot.parser.as_mut() {
                parse_block(&mut pool, block, parser, dest);
                pool.drain(parser, dest);
            }
            *parallel_blocks += pool.handed_over;
        });
        if let Some(e) = error {
            return Err(e);
        }
        slot.decide(registry, at_end, dest, label)?;
        if at_end && let Some(p) = slot.parser.as_mut() {
            p.finish(dest);
        }
        if let Some(p) = &slot.parser {
            dest.item(IngestItem::Stats(p.stats()));
        }
        if slot.chosen.is_some() && slot.chosen != self.announced {
            self.announced = slot.chosen.clone();
            dest.item(IngestItem::Parser(slot.chosen.clone().unwrap_or_default()));
        }
        // An existing file with nothing in it yet says so once: the run then knows this
        // source has been looked at (a finished run waits for every source's first read).
        if !grew && !self.read_before && !self.said_empty && self.follower.current_path().is_some()
        {
            self.said_empty = true;
            dest.item(IngestItem::Note(format!("{} is empty so far", self.label)));
        }
        let now = Instant::now();
        if grew {
            self.last_lines = Some(now);
            self.open_shown = false;
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
            dest.item(IngestItem::Grew(at));
        } else if !at_end
            && !self.open_shown
            && self.last_lines.is_some_and(|t| now.duration_since(t) >= self.open_quiet)
            && let Some(rec) = self.slot.parser.as_ref().and_then(Parser::open_record)
        {
            self.open_shown = true;
            dest.item(IngestItem::Open(rec.to_record()));
        }
        hand_on(dest, false);
        Ok(())
    }
}

/// Parse the lines gathered into `block` (those after the first block's worth of a read) on
/// the pool.
fn parse_block(
    pool: &mut Pool<'_, '_>,
    block: &mut Vec<u8>,
    parser: &mut Parser,
    out: &mut dyn Sink,
) {
    if block.is_empty() {
        return;
    }
    let full = std::mem::replace(block, pool.buffer());
    pool.submit(full, parser, out);
}

/// Read every source of `spec` to the end of its data, once (`parse`, `check`, `report`).
///
/// Returns the store and, per source, the parser name that was used.
pub fn read_run(
    spec: &RunSpec,
    registry: Arc<Registry>,
) -> Result<(RunStore, Vec<String>), PipelineError> {
    read_run_with(spec, registry, PartialLine::default())
}

/// [`read_run`] with a policy for final lines without a newline.
pub fn read_run_with(
    spec: &RunSpec,
    registry: Arc<Registry>,
    partial: PartialLine,
) -> Result<(RunStore, Vec<String>), PipelineError> {
    let mut run = RunStore::new(spec.name.clone());
    let mut parsers = Vec::new();
    for s in &spec.sources {
        if !crate::glob::is_pattern(&s.path.to_string_lossy()) && !s.path.exists() {
            return Err(PipelineError::Missing { path: s.path.clone() });
        }
        let mut reader = SourceReader::new(s, registry.clone(), FollowConfig::default())?;
        reader.set_partial_line(partial);
        let mut store = SourceStore::new(s.label.clone(), "-");
        let mut activity = SourceActivity::default();
        reader.read_into(&mut store, &mut activity)?;
        let name = reader.parser_name().unwrap_or("-").to_string();
        store.parser = name.clone();
        run.sources.push(store);
        parsers.push(name);
    }
    Ok((run, parsers))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::Output;
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

    fn records(items: &[IngestItem]) -> usize {
        items
            .iter()
            .map(|i| match i {
                IngestItem::Output(Output::Record(_)) => 1,
                IngestItem::Parsed(b) => b.records(),
                _ => 0,
            })
            .sum()
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
        let all: Vec<IngestItem> = chunks.iter().flatten().chain(rest.iter()).cloned().collect();
        assert_eq!(records(&all), 5000, "every row once, across chunks");
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
