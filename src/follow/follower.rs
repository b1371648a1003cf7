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
//!    again and compare identities (device + inode) with the newest file known:
//!    * same file: keep the new descriptor if the file was idle (NFS close-to-open
//!      revalidation of a stale cached size), offset unchanged;
//!    * new inode whose bytes match what was read and at least as long: a migration, continue
//!      at the same offset without a restart;
//!    * new inode otherwise: a rotation, a deletion and re-creation. The new file is opened
//!      at once and queued: its descriptor keeps it readable whatever happens to the name
//!      next, so rotations faster than the old file is drained lose no file;
//!    * name gone: keep reading the open file, report "missing", retry;
//!    * for a glob, later files in natural order are queued by name.
//! 4. Move to the next queued file only when the current one is read to its end and has
//!    been quiet for `rotated_grace`, or for `rotated_quiet` once the next file has data, or
//!    when its last write (mtime) is older than `rotated_grace` (restart files that were
//!    finished long ago): flush its unterminated line, `Restart(Replaced)` or
//!    `Restart(NewFile)`, then the next file from byte 0. Every identity the name pointed
//!    to is read in order, as `tail -F` does, without its gaps.
//! 5. A file left behind is watched for a while: bytes written to it after the follower
//!    moved on cannot be placed in order any more and are reported in a note with a line
//!    estimate, as is the unread rest of a file that could not be read to its end.
//!
//! Before the first file exists the follower is `Waiting` and tries to open it at every poll.

use std::collections::VecDeque;
use std::path::{Path, PathBuf};
use std::time::Instant;

use super::file::{OpenError, OpenFile, open_path};
use super::lines::LineSplitter;
use super::reader::{ReadCtx, ReadEnd};
use super::spec::Spec;
use super::{FollowConfig, FollowItem, FollowStats, FollowStatus, PollOutcome, note};
use crate::run::SegmentReason;

mod rotation;

/// Upper bound on state transitions within one poll: a restart file costs a few (open,
/// find its successor, finish it), so one poll reads over a thousand existing restart files,
/// while a glob gaining files faster than they can be read cannot keep one poll busy forever.
const MAX_STEPS: usize = 4096;
/// Upper bound on polls in [`Follower::read_to_end`] (a writer outrunning the reader).
const MAX_POLLS_TO_END: usize = 1000;
/// Most replaced files waiting to be read (each holds a descriptor).
const MAX_QUEUE: usize = 64;
/// Most restart files of a glob waiting to be read (names only).
const MAX_GLOB_QUEUE: usize = 4096;
/// Most finished files watched for late writes, and for how many rotation graces.
const MAX_RETIRED: usize = 8;
const RETIRED_GRACES: u32 = 6;
/// Bytes per line assumed for an estimate before any line was read.
const DEFAULT_LINE_BYTES: u64 = 80;

/// Follows one log file by name, or the files of a restart glob in natural order.
#[derive(Debug)]
pub struct Follower {
    cfg: FollowConfig,
    spec: Spec,
    phase: Phase,
    /// Files to read after the current one, oldest first.
    queue: VecDeque<Next>,
    /// Files read to their end and left behind, watched for late writes.
    retired: Vec<Retired>,
    io: ReadCtx,
    last_name_check: Option<Instant>,
    names_hint: bool,
    /// The name of the newest known file is currently missing.
    missing: bool,
    /// Why the target could not be opened, while it cannot.
    unreadable: Option<(PathBuf, String)>,
    waiting_noted: bool,
    /// The queue was full when another file turned up (noted once).
    queue_full_noted: bool,
    /// When a poll last consumed bytes.
    last_growth: Option<Instant>,
    /// A one-shot read ([`Follower::read_to_end`]): files are finished at their end.
    one_shot: bool,
}

#[derive(Debug)]
enum Phase {
    /// No file open yet: waiting for the first.
    Closed,
    /// Reading this file (the name's current file, or an older one still being drained).
    Active(OpenFile),
}

/// A file to read after the current one.
#[derive(Debug)]
struct Next {
    path: PathBuf,
    /// Opened when the name was seen pointing to it (a replacement): the descriptor keeps
    /// the file readable after the name moves on. `None` for a later restart file of a glob,
    /// opened by name when its turn comes.
    file: Option<OpenFile>,
    reason: SegmentReason,
}

/// A file read to its end and left behind, watched for bytes written after that.
#[derive(Debug)]
struct Retired {
    file: OpenFile,
    /// What the follower moved on to (for the note).
    next: PathBuf,
    /// The file was replaced under its own name (rather than followed by a restart file).
    replaced: bool,
    until: Instant,
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
            queue: VecDeque::new(),
            retired: Vec::new(),
            last_name_check: None,
            names_hint: false,
            missing: false,
            unreadable: None,
            waiting_noted: false,
            queue_full_noted: false,
            last_growth: None,
            one_shot: false,
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
                    if !self.try_open(now, sink) {
                        break;
                    }
                    // A freshly opened glob file may already have successors.
                    names_due |= self.spec.is_glob();
                }
                Phase::Active(file) => {
                    let end = self.io.read(file, &self.cfg, now, sink, &mut out);
                    if self.after_read(end, sink, &mut out) {
                        continue;
                    }
                    if names_due {
                        names_due = false;
                        self.check_names(now, sink);
                    }
                    if !self.queue.is_empty() && self.current_finished(now) {
                        out.lines += self.advance(now, sink, &mut out);
                        // A glob may have more restart files than one check queues.
                        names_due |= self.spec.is_glob() && self.queue.is_empty();
                        continue;
                    }
                    break;
                }
            }
        }
        if out.bytes > 0 {
            self.last_growth = Some(now);
        }
        out
    }

    /// One-shot read (`check`, `parse`, `report`): poll until a poll finds nothing new, then
    /// [`finish`](Self::finish). Each file is finished at its end (no waiting for a rotated
    /// file to go quiet). Stops after a bounded number of polls if a writer keeps
    /// outrunning the reader. Returns the total of all polls.
    pub fn read_to_end(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) -> PollOutcome {
        self.one_shot = true;
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
            Phase::Active(f) if !self.queue.is_empty() => {
                FollowStatus::Draining { path: f.path.clone() }
            }
            Phase::Active(f) if self.missing => FollowStatus::Missing { path: f.path.clone() },
            Phase::Active(f) => FollowStatus::Following { path: f.path.clone() },
            Phase::Closed => match &self.unreadable {
                Some((path, error)) => {
                    FollowStatus::Unreadable { path: path.clone(), error: error.clone() }
                }
                None => FollowStatus::Waiting { spec: self.spec.original().to_owned() },
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

    /// The file whose lines are being handed out (an old one while draining), if any.
    pub fn current_path(&self) -> Option<&Path> {
        match &self.phase {
            Phase::Active(f) => Some(&f.path),
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
            Phase::Closed => 0,
        }
    }

    /// Bytes of heap the follower holds for reading (read buffer, carry, fingerprints):
    /// bounded by `read_chunk + max_line_bytes` plus a few KiB per open file whatever the
    /// input.
    pub fn memory_bytes(&self) -> usize {
        let fp = |f: &OpenFile| f.prefix.capacity() + f.tail.capacity();
        let current = match &self.phase {
            Phase::Active(f) => fp(f),
            Phase::Closed => 0,
        };
        let queued: usize = self.queue.iter().filter_map(|n| n.file.as_ref()).map(fp).sum();
        let retired: usize = self.retired.iter().map(|r| fp(&r.file)).sum();
        self.io.buf.capacity() + self.io.splitter.capacity() + current + queued + retired
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

    /// Open the first file while none is open. Returns whether one was opened.
    fn try_open(&mut self, now: Instant, sink: &mut dyn FnMut(FollowItem<'_>)) -> bool {
        let target = match self.spec.matches() {
            Ok(m) => m.into_iter().next(),
            Err(e) => {
                self.set_unreadable(self.spec.original().to_owned(), e.to_string(), sink);
                return false;
            }
        };
        let Some(target) = target else {
            self.note_waiting(sink);
            return false;
        };
        match open_path(&target) {
            Ok((file, meta)) => {
                if self.waiting_noted || self.unreadable.is_some() {
                    sink(FollowItem::Note(format!("{}{}", note::FOLLOWING, target.display())));
                }
                self.waiting_noted = false;
                self.unreadable = None;
                self.missing = false;
                self.io.stats.files += 1;
                self.io.splitter.reset();
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
            let path = self.spec.original();
            sink(FollowItem::Note(format!("{}{} to appear", note::WAITING, path.display())));
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
            sink(FollowItem::Note(format!(
                "{}{}: {error}; retrying",
                note::UNREADABLE,
                path.display()
            )));
            self.unreadable = Some((path, error));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::reader::{NOTES_PER_KIND, limited_note};
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
