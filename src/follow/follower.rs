//! [`Follower`]: the per-source state machine that turns a path or restart glob into lines.
//!
//! Each [`Follower::poll`] does, without ever blocking on an event:
//!
//! 1. `fstat` the open file. Size below the offset is a truncation; any change of size or
//!    mtime also re-reads the stored prefix and the bytes before the offset, and a mismatch
//!    is an in-place rewrite. Both restart the parser and read again from byte 0.
//! 2. Read what grew, up to the size `fstat` reported and no further, in `read_chunk`
//!    pieces, through the line splitter. A NUL run at the very end is held back (see
//!    [`FollowConfig::nul_grace`]).
//! 3. Every `name_check_interval`, or sooner after [`Follower::hint_names`], open the path
//!    again and compare identities:
//!    * same file: keep the new descriptor if the file was idle (NFS close-to-open
//!      revalidation of a stale cached size), offset unchanged;
//!    * new inode whose bytes match what was read and at least as long: a migration, continue
//!      at the same offset without a restart;
//!    * new inode otherwise: a rotation. The old descriptor is drained for `rotated_grace`
//!      (every line the writer still puts there is read exactly once), its unterminated last
//!      line is flushed, then `Restart(Replaced)` and the new file from byte 0;
//!    * name gone: keep reading the old descriptor, report "missing", retry;
//!    * for a glob, a later file in natural order: drain the current file to its end, flush,
//!      `Restart(NewFile)` and read the next one.
//!
//! Before the first file exists the follower is `Waiting` and tries to open it at every poll.

use std::path::{Path, PathBuf};
use std::time::Instant;

use super::file::{Held, OpenError, OpenFile, mtime_of, open_path, read_at};
use super::lines::LineSplitter;
use super::spec::Spec;
use super::{FollowConfig, FollowItem, FollowStats, FollowStatus, PollOutcome};
use crate::run::SegmentReason;

/// A trailing NUL run longer than this is a hole, not a not-yet-visible append: it is
/// skipped at once instead of being held back.
const NUL_HOLD_MAX: usize = 64 * 1024;
/// Notes of one repeating kind (long lines, NUL runs, read errors) shown before they are
/// only counted in [`FollowStats`].
const NOTES_PER_KIND: u32 = 5;
/// Upper bound on state transitions within one poll: a restart file costs three (open,
/// find its successor, finish it), so one poll reads over a thousand existing restart files,
/// while a glob gaining files faster than they can be read cannot keep one poll busy forever.
const MAX_STEPS: usize = 4096;
/// Upper bound on polls in [`Follower::read_to_end`] (a writer outrunning the reader).
const MAX_POLLS_TO_END: usize = 1000;

/// Follows one log file by name, or the files of a restart glob in natural order.
#[derive(Debug)]
pub struct Follower {
    cfg: FollowConfig,
    spec: Spec,
    phase: Phase,
    io: ReadCtx,
    last_name_check: Option<Instant>,
    names_hint: bool,
    /// Restart to emit before the first line of the next file opened.
    pending_restart: Option<SegmentReason>,
    /// Next file to open (set by a glob transition).
    next_path: Option<PathBuf>,
    /// Last file opened: reopened by name after a rotation.
    last_path: Option<PathBuf>,
    /// The name of the open file is currently missing.
    missing: bool,
    /// Why the target could not be opened, while it cannot.
    unreadable: Option<(PathBuf, String)>,
    waiting_noted: bool,
    /// When a poll last consumed bytes.
    last_growth: Option<Instant>,
}

#[derive(Debug)]
enum Phase {
    /// No file open: waiting for the first, or between a rotation and the new file.
    Closed,
    /// Reading the file the name points to.
    Active(OpenFile),
    /// Reading what remains of an old file until `until`, then `reason` and `next`.
    Draining { old: OpenFile, until: Instant, reason: SegmentReason, next: Option<PathBuf> },
}

/// What a read of one open file found besides lines.
enum ReadEnd {
    /// Read to the reported size (or nothing new).
    Done,
    /// Size below the offset.
    Truncated { size: u64 },
    /// Same or larger size, but the bytes already read changed.
    Rewritten,
    /// `fstat` or `pread` failed.
    Failed(std::io::Error),
}

/// The reading machinery shared by all phases (kept apart from `Phase` so a file in the
/// phase and the buffers can be borrowed together).
#[derive(Debug)]
struct ReadCtx {
    splitter: LineSplitter,
    buf: Vec<u8>,
    stats: FollowStats,
    notes_long: u32,
    notes_junk: u32,
    notes_error: u32,
}

impl Follower {
    /// Follow `spec`: a path, or a glob in its file-name component (`case/run.log*`,
    /// `case/run.log.?`). Nothing is opened until the first [`poll`](Self::poll).
    pub fn new(spec: impl Into<PathBuf>, cfg: FollowConfig) -> Follower {
        let cfg = FollowConfig {
            read_chunk: cfg.read_chunk.max(1),
            max_line_bytes: cfg.max_line_bytes.max(1),
            progress_every: cfg.progress_every.max(1),
            ..cfg
        };
        Follower {
            io: ReadCtx {
                splitter: LineSplitter::new(cfg.max_line_bytes),
                buf: Vec::new(),
                stats: FollowStats::default(),
                notes_long: 0,
                notes_junk: 0,
                notes_error: 0,
            },
            cfg,
            spec: Spec::new(spec.into()),
            phase: Phase::Closed,
            last_name_check: None,
            names_hint: false,
            pending_restart: None,
            next_path: None,
            last_path: None,
            missing: false,
            unreadable: None,
            waiting_noted: false,
            last_growth: None,
        }
    }

    /// Look at the file(s) once and hand every new item to `sink`: stat, detect truncation,
    /// rewrite, replacement and new glob files, and read all new complete lines. Never waits.
    pub fn poll(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) -> PollOutcome {
        let now = Instant::now();
        let mut out = PollOutcome::default();
        let mut names_due = self.names_hint
            || self
                .last_name_check
                .is_none_or(|t| now.duration_since(t) >= self.cfg.name_check_interval);
        for _ in 0..MAX_STEPS {
            match &mut self.phase {
                Phase::Closed => {
                    if !self.try_open(now, sink, &mut out) {
                        break;
                    }
                    // A freshly opened glob file may already have a successor.
                    names_due |= self.spec.is_glob();
                }
                Phase::Active(file) => {
                    let end = self.io.read(file, &self.cfg, now, sink, &mut out);
                    if self.after_read(end, sink, &mut out) {
                        continue;
                    }
                    if names_due {
                        names_due = false;
                        if self.check_names(now, sink) {
                            continue;
                        }
                    }
                    break;
                }
                Phase::Draining { old, until, .. } => {
                    let end = self.io.read(old, &self.cfg, now, sink, &mut out);
                    let stop = !matches!(end, ReadEnd::Done);
                    if stop {
                        if let ReadEnd::Failed(e) = &end {
                            self.io.error_note(&old.path, e, sink);
                        }
                    } else if now < *until {
                        break;
                    }
                    out.lines += self.end_drain(sink);
                }
            }
        }
        if out.bytes > 0 {
            self.last_growth = Some(now);
        }
        out
    }

    /// One-shot read (`check`, `parse`, `report`): poll until a poll finds nothing new, then
    /// [`finish`](Self::finish). Stops after a bounded number of polls if a writer keeps
    /// outrunning the reader. Returns the total of all polls.
    pub fn read_to_end(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) -> PollOutcome {
        let mut total = PollOutcome::default();
        for _ in 0..MAX_POLLS_TO_END {
            let o = self.poll(sink);
            total.bytes += o.bytes;
            total.lines += o.lines;
            total.restarted |= o.restarted;
            if !o.grew() && !o.restarted {
                break;
            }
        }
        total.lines += self.io.flush_partial(sink);
        total
    }

    /// End of data (one-shot `check`/`parse`): hand out the final unterminated line, if any.
    /// Reads nothing; call [`poll`](Self::poll) first.
    pub fn finish(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) {
        self.io.flush_partial(sink);
    }

    /// Bring the next name check forward to the next poll (call it after a directory event:
    /// a file was created, removed or renamed).
    pub fn hint_names(&mut self) {
        self.names_hint = true;
    }

    /// Directories whose events should wake this follower: the spec's directory, or its
    /// nearest existing ancestor while it does not exist yet.
    pub fn watch_dirs(&self) -> Vec<PathBuf> {
        vec![self.spec.watch_dir()]
    }

    /// What the follower is doing now.
    pub fn status(&self) -> FollowStatus {
        match &self.phase {
            Phase::Active(f) if self.missing => FollowStatus::Missing { path: f.path.clone() },
            Phase::Active(f) => FollowStatus::Following { path: f.path.clone() },
            Phase::Draining { old, .. } => FollowStatus::Draining { path: old.path.clone() },
            Phase::Closed => match (&self.unreadable, &self.last_path) {
                (Some((path, error)), _) => {
                    FollowStatus::Unreadable { path: path.clone(), error: error.clone() }
                }
                (None, Some(path)) => FollowStatus::Missing { path: path.clone() },
                (None, None) => FollowStatus::Waiting { spec: self.spec.original().to_owned() },
            },
        }
    }

    /// Counters since creation.
    pub fn stats(&self) -> FollowStats {
        let mut s = self.io.stats.clone();
        s.junk_bytes = self.io.splitter.junk_bytes();
        s.long_lines = self.io.splitter.long_lines();
        s
    }

    /// The file whose lines are being handed out (the old one while draining), if any.
    pub fn current_path(&self) -> Option<&Path> {
        match &self.phase {
            Phase::Active(f) => Some(&f.path),
            Phase::Draining { old, .. } => Some(&old.path),
            Phase::Closed => None,
        }
    }

    /// The unterminated last line read so far, for showing as pending (never parse it: the
    /// writer may not have finished it).
    pub fn partial_line(&self) -> Option<&[u8]> {
        self.io.splitter.has_partial().then(|| self.io.splitter.partial())
    }

    /// When a poll last read new bytes. With [`partial_line`](Self::partial_line) this lets
    /// a view show an unterminated line as pending once it has been quiet for a while.
    pub fn last_growth(&self) -> Option<Instant> {
        self.last_growth
    }

    /// Byte offset reached in the current file.
    pub fn offset(&self) -> u64 {
        match &self.phase {
            Phase::Active(f) => f.offset,
            Phase::Draining { old, .. } => old.offset,
            Phase::Closed => 0,
        }
    }

    /// Bytes of heap the follower holds for reading (read buffer, carry, fingerprints):
    /// bounded by `read_chunk + max_line_bytes` plus a few KiB whatever the input.
    pub fn memory_bytes(&self) -> usize {
        let fp = match &self.phase {
            Phase::Active(f) | Phase::Draining { old: f, .. } => {
                f.prefix.capacity() + f.tail.capacity()
            }
            Phase::Closed => 0,
        };
        self.io.buf.capacity() + self.io.splitter.capacity() + fp
    }

    /// The configuration in use (after clamping zero sizes to 1).
    pub fn config(&self) -> &FollowConfig {
        &self.cfg
    }

    /// Handle a read's outcome for the active file. Returns true when the file must be read
    /// again at once (after a restart from byte 0).
    fn after_read(
        &mut self,
        end: ReadEnd,
        sink: &mut dyn FnMut(FollowItem<'_>),
        out: &mut PollOutcome,
    ) -> bool {
        let Phase::Active(file) = &mut self.phase else {
            return false;
        };
        let what = match end {
            ReadEnd::Done => return false,
            ReadEnd::Failed(e) => {
                self.io.error_note(&file.path, &e, sink);
                file.broken = true;
                return false;
            }
            ReadEnd::Truncated { size } => {
                format!(
                    "{} truncated (size {size} below the {} bytes read); reading again from the start",
                    file.path.display(),
                    file.offset
                )
            }
            ReadEnd::Rewritten => {
                self.io.stats.rewrites += 1;
                format!(
                    "{} rewritten in place (its first bytes changed); reading again from the start",
                    file.path.display()
                )
            }
        };
        self.io.stats.truncations += 1;
        file.rewind();
        self.io.splitter.reset();
        sink(FollowItem::Note(what));
        sink(FollowItem::Restart(SegmentReason::Truncated));
        out.restarted = true;
        true
    }

    /// Open the next target while no file is open. Returns whether one was opened.
    fn try_open(
        &mut self,
        now: Instant,
        sink: &mut dyn FnMut(FollowItem<'_>),
        out: &mut PollOutcome,
    ) -> bool {
        let target = match (&self.next_path, &self.last_path) {
            (Some(p), _) | (None, Some(p)) => Some(p.clone()),
            (None, None) => match self.spec.matches() {
                Ok(m) => m.into_iter().next(),
                Err(e) => {
                    self.set_unreadable(self.spec.original().to_owned(), e.to_string(), sink);
                    return false;
                }
            },
        };
        let Some(target) = target else {
            self.note_waiting(sink);
            return false;
        };
        match open_path(&target) {
            Ok((file, meta)) => {
                if self.waiting_noted || self.last_path.is_some() {
                    sink(FollowItem::Note(format!("following {}", target.display())));
                }
                self.waiting_noted = false;
                self.unreadable = None;
                self.missing = false;
                self.next_path = None;
                self.last_path = Some(target.clone());
                self.io.stats.files += 1;
                self.io.splitter.reset();
                if let Some(reason) = self.pending_restart.take() {
                    sink(FollowItem::Restart(reason));
                    out.restarted = true;
                }
                self.phase = Phase::Active(OpenFile::new(file, &meta, target, now));
                true
            }
            Err(OpenError::NotFound) => {
                self.note_waiting(sink);
                false
            }
            Err(e) => {
                self.set_unreadable(target, e.to_string(), sink);
                false
            }
        }
    }

    fn note_waiting(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) {
        if !self.waiting_noted {
            self.waiting_noted = true;
            let what = self.next_path.as_ref().or(self.last_path.as_ref());
            let path = what.map_or(self.spec.original(), |p| p.as_path());
            sink(FollowItem::Note(format!("waiting for {} to appear", path.display())));
        }
    }

    fn set_unreadable(
        &mut self,
        path: PathBuf,
        error: String,
        sink: &mut dyn FnMut(FollowItem<'_>),
    ) {
        let fresh = self.unreadable.as_ref() != Some(&(path.clone(), error.clone()));
        if fresh {
            sink(FollowItem::Note(format!("cannot read {}: {error}; retrying", path.display())));
            self.unreadable = Some((path, error));
        }
    }

    /// The name check for the active file. Returns true when the phase changed.
    fn check_names(&mut self, now: Instant, sink: &mut dyn FnMut(FollowItem<'_>)) -> bool {
        self.last_name_check = Some(now);
        self.names_hint = false;
        let Phase::Active(file) = &mut self.phase else {
            return false;
        };
        if self.spec.is_glob()
            && let Ok(Some(next)) = self.spec.next_after(&file.path)
        {
            if let Ok((_, meta)) = open_path(&next)
                && file.same_identity(&meta)
            {
                // The current file was renamed to a later name (`run.log` → `run.log.1`
                // under `run.log*`): same file, same offset, no restart.
                sink(FollowItem::Note(format!(
                    "{} renamed to {}; continuing at byte {}",
                    file.path.display(),
                    next.display(),
                    file.offset
                )));
                file.path = next.clone();
                self.last_path = Some(next);
                self.missing = false;
                return false;
            }
            // Revalidate the finished file once more so its last bytes are not lost to a
            // stale cached size, then drain it with no grace.
            if let Ok((f, meta)) = open_path(&file.path)
                && file.same_identity(&meta)
            {
                file.adopt(f, &meta);
            }
            sink(FollowItem::Note(format!("next restart file {}", next.display())));
            self.start_drain(now, SegmentReason::NewFile { path: next.clone() }, Some(next));
            return true;
        }
        match open_path(&file.path) {
            Err(e) => {
                if !self.missing {
                    self.missing = true;
                    let why = match e {
                        OpenError::NotFound => String::from("is missing"),
                        other => format!("cannot be opened ({other})"),
                    };
                    sink(FollowItem::Note(format!(
                        "{} {why}; still reading the open file, retrying by name",
                        file.path.display()
                    )));
                }
                false
            }
            Ok((f, meta)) => {
                let was_missing = std::mem::replace(&mut self.missing, false);
                if file.same_identity(&meta) {
                    if was_missing {
                        sink(FollowItem::Note(format!("{} is back", file.path.display())));
                    }
                    let idle = now.duration_since(file.last_change) >= self.cfg.name_check_interval;
                    if idle || file.broken {
                        file.adopt(f, &meta);
                        self.io.stats.reopens += 1;
                    }
                    return false;
                }
                if !file.broken && file.content_matches(&f, meta.len()) {
                    sink(FollowItem::Note(format!(
                        "{} moved to a new inode with the same content; continuing at byte {}",
                        file.path.display(),
                        file.offset
                    )));
                    file.adopt(f, &meta);
                    self.io.stats.migrations += 1;
                    return false;
                }
                self.io.stats.replacements += 1;
                let grace = if file.broken { 0.0 } else { self.cfg.rotated_grace.as_secs_f64() };
                sink(FollowItem::Note(format!(
                    "{} replaced by a new file; reading the rest of the old one for {grace:.1} s, \
                     then the new one from the start",
                    file.path.display()
                )));
                let until = if file.broken { now } else { now + self.cfg.rotated_grace };
                self.start_drain(until, SegmentReason::Replaced, None);
                true
            }
        }
    }

    fn start_drain(&mut self, until: Instant, reason: SegmentReason, next: Option<PathBuf>) {
        if let Phase::Active(old) = std::mem::replace(&mut self.phase, Phase::Closed) {
            self.phase = Phase::Draining { old, until, reason, next };
        }
    }

    /// The drained file is done: flush its unterminated line and queue the restart.
    /// Returns the number of lines flushed.
    fn end_drain(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) -> u64 {
        let mut flushed = 0;
        if let Phase::Draining { reason, next, .. } =
            std::mem::replace(&mut self.phase, Phase::Closed)
        {
            flushed = self.io.flush_partial(sink);
            self.pending_restart = Some(reason);
            if next.is_some() {
                self.next_path = next;
            }
            self.missing = false;
        }
        flushed
    }
}

impl ReadCtx {
    /// `fstat` `file` and read whatever grew, handing lines to `sink`.
    fn read(
        &mut self,
        file: &mut OpenFile,
        cfg: &FollowConfig,
        now: Instant,
        sink: &mut dyn FnMut(FollowItem<'_>),
        out: &mut PollOutcome,
    ) -> ReadEnd {
        if file.broken {
            return ReadEnd::Done;
        }
        let meta = match file.file.metadata() {
            Ok(m) => m,
            Err(e) => return ReadEnd::Failed(e),
        };
        let size = meta.len();
        let seen = (size, mtime_of(&meta));
        let changed = file.seen != Some(seen);
        if !changed && file.held.is_none() {
            return ReadEnd::Done;
        }
        if changed {
            file.last_change = now;
        }
        if size < file.offset {
            return ReadEnd::Truncated { size };
        }
        if changed && file.offset > 0 && !file.content_matches(&file.file, size) {
            return ReadEnd::Rewritten;
        }
        file.seen = Some(seen);
        let total = size;
        let (start, junk_before) = (file.offset, self.splitter.junk_bytes());
        let big = total - file.offset > cfg.progress_every;
        let mut next_progress = file.offset + cfg.progress_every;
        let mut last_progress = file.offset;
        while file.offset < size {
            let want =
                usize::try_from(size - file.offset).unwrap_or(usize::MAX).min(cfg.read_chunk);
            if self.buf.len() < want {
                // Grow to what is needed now (small logs keep a small buffer), never past
                // `read_chunk`.
                let target = want.max(self.buf.len() * 2).max(64 * 1024).min(cfg.read_chunk);
                self.buf.resize(target.max(want), 0);
            }
            let n = match read_at(&file.file, &mut self.buf[..want], file.offset) {
                Ok(0) => break,
                Ok(n) => n,
                Err(e) => return ReadEnd::Failed(e),
            };
            let chunk = &self.buf[..n];
            let mut consume = n;
            if file.offset + n as u64 == size {
                let trailing = chunk.iter().rev().take_while(|&&b| b == 0).count();
                if trailing > 0 && trailing <= NUL_HOLD_MAX {
                    let at = file.offset + (n - trailing) as u64;
                    let since = match file.held {
                        Some(h) if h.offset == at => h.since,
                        _ => now,
                    };
                    if now.duration_since(since) < cfg.nul_grace {
                        file.held = Some(Held { offset: at, since });
                        consume = n - trailing;
                    } else {
                        file.held = None;
                    }
                } else {
                    file.held = None;
                }
            } else {
                file.held = None;
            }
            let data = &chunk[..consume];
            out.lines += feed_lines(
                &mut self.splitter,
                data,
                &mut self.stats,
                &mut self.notes_long,
                &file.path,
                cfg.max_line_bytes,
                sink,
            );
            file.consumed(data);
            self.stats.bytes_read += consume as u64;
            out.bytes += consume as u64;
            if consume < n {
                break;
            }
            if big && file.offset >= next_progress {
                sink(FollowItem::Progress { read: file.offset, total });
                last_progress = file.offset;
                next_progress = file.offset + cfg.progress_every;
            }
        }
        if big && last_progress != file.offset {
            sink(FollowItem::Progress { read: file.offset, total });
        }
        let junk = self.splitter.junk_bytes() - junk_before;
        if junk > 0 {
            let path = file.path.display().to_string();
            limited_note(&mut self.notes_junk, "NUL-byte", sink, || {
                format!(
                    "{path}: skipped {junk} NUL bytes (binary junk or a hole) after byte {start}"
                )
            });
        }
        ReadEnd::Done
    }

    /// Hand out the unterminated line, if any (end of data or end of a drained file).
    /// Returns the number of lines handed out (0 or 1).
    fn flush_partial(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) -> u64 {
        let stats = &mut self.stats;
        let notes = &mut self.notes_long;
        let mut n = 0;
        self.splitter.finish(&mut |line| {
            n += 1;
            stats.lines += 1;
            sink(FollowItem::Line(line.bytes));
            if line.truncated {
                limited_note(notes, "long-line", sink, || {
                    format!(
                        "long line truncated (the final line was over {} bytes)",
                        line.bytes.len()
                    )
                });
            }
        });
        n
    }

    fn error_note(
        &mut self,
        path: &Path,
        e: &std::io::Error,
        sink: &mut dyn FnMut(FollowItem<'_>),
    ) {
        self.stats.read_errors += 1;
        limited_note(&mut self.notes_error, "read-error", sink, || {
            format!("read error on {}: {e}; re-opening at the next name check", path.display())
        });
    }
}

/// Feed `data` through the splitter, handing lines to `sink`.
/// Returns the number of lines.
fn feed_lines(
    splitter: &mut LineSplitter,
    data: &[u8],
    stats: &mut FollowStats,
    notes_long: &mut u32,
    path: &Path,
    max: usize,
    sink: &mut dyn FnMut(FollowItem<'_>),
) -> u64 {
    let mut lines = 0;
    splitter.feed(data, &mut |line| {
        lines += 1;
        stats.lines += 1;
        sink(FollowItem::Line(line.bytes));
        if line.truncated {
            let n = stats.lines;
            limited_note(notes_long, "long-line", sink, || {
                format!(
                    "{}: long line truncated (line {n} of this follower was over {max} bytes; \
                     kept its first {max}, skipped the rest)",
                    path.display()
                )
            });
        }
    });
    lines
}

/// Emit a note of a repeating kind, at most [`NOTES_PER_KIND`] times, then one saying the
/// rest are only counted.
fn limited_note(
    count: &mut u32,
    kind: &str,
    sink: &mut dyn FnMut(FollowItem<'_>),
    text: impl FnOnce() -> String,
) {
    if *count < NOTES_PER_KIND {
        sink(FollowItem::Note(text()));
    } else if *count == NOTES_PER_KIND {
        sink(FollowItem::Note(format!(
            "further {kind} notes suppressed; the follower statistics keep counting"
        )));
    }
    *count = count.saturating_add(1);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn collect(f: &mut Follower) -> Vec<String> {
        let mut out = Vec::new();
        f.poll(&mut |it| match it {
            FollowItem::Line(b) => out.push(String::from_utf8_lossy(b).into_owned()),
            FollowItem::Restart(r) => out.push(format!("restart {r:?}")),
            FollowItem::Note(_) | FollowItem::Progress { .. } => {}
        });
        out
    }

    #[test]
    fn follower_and_waker_can_move_to_the_ingest_thread() {
        fn assert_send<T: Send>() {}
        assert_send::<Follower>();
        assert_send::<super::super::Waker>();
    }

    #[test]
    fn a_glob_file_renamed_to_a_later_name_is_not_read_twice() {
        let dir = tempfile::tempdir().expect("temp dir");
        let log = dir.path().join("run.log");
        std::fs::write(&log, b"a\nb\n").expect("write");
        let cfg =
            FollowConfig { name_check_interval: std::time::Duration::ZERO, ..Default::default() };
        let mut f = Follower::new(dir.path().join("run.log*"), cfg);
        assert_eq!(collect(&mut f), ["a", "b"]);
        let moved = dir.path().join("run.log.1");
        std::fs::rename(&log, &moved).expect("mv");
        assert!(collect(&mut f).is_empty());
        assert_eq!(f.current_path(), Some(moved.as_path()));
        let mut w = std::fs::OpenOptions::new().append(true).open(&moved).expect("open");
        std::io::Write::write_all(&mut w, b"c\n").expect("write");
        assert_eq!(collect(&mut f), ["c"]);
        assert_eq!(f.stats().files, 1);
    }

    #[test]
    fn repeating_notes_are_limited() {
        let mut count = 0;
        let mut notes = Vec::new();
        for i in 0..20 {
            limited_note(
                &mut count,
                "long-line",
                &mut |it| {
                    if let FollowItem::Note(n) = it {
                        notes.push(n)
                    }
                },
                || format!("note {i}"),
            );
        }
        assert_eq!(notes.len(), NOTES_PER_KIND as usize + 1);
        assert_eq!(notes[0], "note 0");
        assert!(notes[NOTES_PER_KIND as usize].contains("further long-line notes suppressed"));
        assert_eq!(count, 20);
    }
}
