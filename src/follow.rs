//! Following solver log files by name, yielding complete lines.
//!
//! This module owns everything between a file on disk and a line handed to a parser: which
//! file a path or restart glob currently means, the byte offset and identity of each open
//! file, the partial-line carry buffer, and the wake-ups that tell the ingest loop to look
//! again. It does not parse lines and does not decide what a restart means for the run store;
//! it only reports that the parser must start over ([`FollowItem::Restart`]).
//!
//! Why it is built this way: on clusters the logs live on NFS, Lustre or GPFS, where writes
//! made by the solver on another node produce no file-system events at all, and `fstat` can
//! report a stale size. So file events are only *hints* ([`Waker`]); the real mechanism is a
//! periodic `fstat` poll of the open file (default 1 s), a name check by path every few
//! seconds (which also re-opens the file, NFS close-to-open revalidation), and content
//! fingerprints to tell truncation, in-place rewrites, rotation and inode migration apart.
//! Files are read with positioned reads into a reusable buffer, never mmapped (a log
//! truncated during a mapped read raises SIGBUS), and never past the size `fstat` reported.
//!
//! Parts:
//! * [`lines`]: the carry buffer that splits bytes into lines (CR handling, NUL skipping,
//!   long-line truncation), a pure state machine;
//! * `spec`: a path or a file-name glob, natural ordering of restart files;
//! * `file`: one open file: identity, offset, fingerprint, positioned reads;
//! * `reader`: reading one open file (truncation and rewrite checks, reads up to the
//!   reported size, held NUL runs, progress, limited notes);
//! * `follower`: [`Follower`], the per-source state machine driven by [`Follower::poll`]:
//!   which file to read; its `rotation` part queues every file the name pointed to and
//!   decides when to move on;
//! * `waker`: [`Waker`], directory watches that wake the ingest loop early.
//!
//! A typical ingest loop:
//!
//! ```no_run
//! use settle::follow::{FollowConfig, FollowItem, Follower, Waker};
//!
//! let cfg = FollowConfig::default();
//! let interval = cfg.poll_interval;
//! let mut follower = Follower::new("case/run.log", cfg);
//! let mut waker = Waker::new();
//! loop {
//!     for dir in follower.watch_dirs() {
//!         waker.watch(&dir);
//!     }
//!     follower.poll(&mut |item| {
//!         if let FollowItem::Line(line) = item {
//!             // hand `line` to the parser
//!             let _ = line;
//!         }
//!     });
//!     waker.wait(interval);
//!     if waker.take_names_dirty() {
//!         follower.hint_names();
//!     }
//! #   break;
//! }
//! ```

mod file;
mod follower;
pub mod lines;
mod reader;
mod spec;
mod waker;

use std::path::PathBuf;
use std::time::Duration;

use crate::run::SegmentReason;

pub use follower::Follower;
pub use lines::{Line, LineSplitter};
pub use spec::natural_cmp;
pub use waker::{Wake, WakeSender, Waker, WatchBackend};

/// First words of the notes a follower gives about the state of its file (the headless
/// watcher tells a source's state from them while it has no records).
pub mod note {
    /// `waiting for PATH to appear`: nothing under the name yet.
    pub const WAITING: &str = "waiting for ";
    /// `cannot read PATH: ERROR; retrying`: the name exists but cannot be opened or listed.
    pub const UNREADABLE: &str = "cannot read ";
    /// `following PATH`: the file was opened after waiting or failing.
    pub const FOLLOWING: &str = "following ";
}

/// How a [`Follower`] polls and how much memory it may use.
///
/// The defaults suit a login node watching a few logs on a parallel file system: about one
/// `fstat` per second per file, one name check (`open` + `fstat` by path) every five seconds.
#[derive(Debug, Clone, PartialEq)]
pub struct FollowConfig {
    /// How often the ingest loop should call [`Follower::poll`] when no event arrives
    /// (default 1 s; 0.2–10 s is sensible). The follower itself never sleeps; the loop uses
    /// this as its [`Waker::wait`] timeout.
    pub poll_interval: Duration,
    /// How often the path is re-checked by name (rotation, deletion, migration, new restart
    /// files) and the file re-opened for NFS revalidation (default 5 s). A directory event
    /// ([`Follower::hint_names`]) brings the next check forward.
    pub name_check_interval: Duration,
    /// Longest line kept (default 64 KiB). Longer lines keep their first `max_line_bytes`
    /// bytes; the rest up to the newline is discarded and counted.
    pub max_line_bytes: usize,
    /// Size of one positioned read (default 1 MiB). The read buffer never grows beyond it.
    pub read_chunk: usize,
    /// After a file was replaced under its name (rotation, deletion and re-creation), the
    /// old open file is read until it has been quiet (no growth) for this long before the
    /// next one is read (default 10 s), so lines the writer still puts into the old file
    /// are not lost. Every file the name pointed to meanwhile is kept open and read in turn.
    pub rotated_grace: Duration,
    /// Once the next file has data, the old one only needs to be quiet for this long
    /// (default 2 s): the writer has moved on.
    pub rotated_quiet: Duration,
    /// A run of NUL bytes at the very end of the readable data is not consumed for this long
    /// (default 10 s): NFS clients have been seen to return NULs for freshly appended bytes
    /// that turn into real text a moment later. After the grace the run is skipped as junk.
    pub nul_grace: Duration,
    /// During a large read, emit [`FollowItem::Progress`] every this many bytes
    /// (default 64 MiB).
    pub progress_every: u64,
}

impl Default for FollowConfig {
    fn default() -> Self {
        FollowConfig {
            poll_interval: Duration::from_secs(1),
            name_check_interval: Duration::from_secs(5),
            max_line_bytes: 64 * 1024,
            read_chunk: 1024 * 1024,
            rotated_grace: Duration::from_secs(10),
            rotated_quiet: Duration::from_secs(2),
            nul_grace: Duration::from_secs(10),
            progress_every: 64 * 1024 * 1024,
        }
    }
}

/// One thing a [`Follower`] tells its consumer, in file order.
#[derive(Debug, Clone, PartialEq)]
pub enum FollowItem<'a> {
    /// One complete line, without its `\n`, trailing `\r`s, or text before a bare `\r`.
    /// Bytes, not text: invalid UTF-8 passes through unchanged.
    Line(&'a [u8]),
    /// The parser must start over: the content that follows is new (`Truncated`, `Replaced`
    /// or `NewFile { path }`). Always emitted before the first line of the new content.
    Restart(SegmentReason),
    /// A note for the user ("waiting for …", "… truncated", "… replaced", "… missing",
    /// "long line … truncated", "… NUL bytes skipped").
    Note(String),
    /// Progress of a large read: bytes of the file read so far and its size.
    Progress {
        /// Offset reached in the current file.
        read: u64,
        /// Size of the current file when the read began.
        total: u64,
    },
}

/// What a [`Follower`] is doing, for the status bar.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum FollowStatus {
    /// No matching file exists yet (or the spec's directory does not exist).
    Waiting {
        /// The path or glob being waited for.
        spec: PathBuf,
    },
    /// Reading this file.
    Following {
        /// The file being read.
        path: PathBuf,
    },
    /// The name vanished; the old file is still read while it stays open, and the name is
    /// retried at every name check.
    Missing {
        /// The path that vanished.
        path: PathBuf,
    },
    /// The name now points to a new file (or a glob has a later file); the old one is still
    /// read until it has been quiet long enough, then the next ones in turn.
    Draining {
        /// The name whose old file is being drained.
        path: PathBuf,
    },
    /// The name exists but cannot be read (permissions, not a regular file).
    Unreadable {
        /// The path that cannot be read.
        path: PathBuf,
        /// Why, as the operating system said it.
        error: String,
    },
}

/// Counters since the follower was created.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct FollowStats {
    /// Bytes consumed from files (including skipped NULs).
    pub bytes_read: u64,
    /// Complete lines emitted.
    pub lines: u64,
    /// NUL bytes skipped.
    pub junk_bytes: u64,
    /// Lines cut to `max_line_bytes`.
    pub long_lines: u64,
    /// Truncations and in-place rewrites (each a `Restart(Truncated)`).
    pub truncations: u64,
    /// Of `truncations`, those detected by a changed fingerprint rather than a smaller size.
    pub rewrites: u64,
    /// Replacements under the same name (each a `Restart(Replaced)`).
    pub replacements: u64,
    /// New inodes with the same content, continued at the same offset (no restart).
    pub migrations: u64,
    /// Files opened for reading (the first, replacements, restart-glob files).
    pub files: u64,
    /// Re-opens of the same file by name (NFS revalidation), offset kept.
    pub reopens: u64,
    /// Read or `fstat` errors on an open file.
    pub read_errors: u64,
}

/// What one [`Follower::poll`] did.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct PollOutcome {
    /// Bytes consumed in this poll.
    pub bytes: u64,
    /// Complete lines emitted in this poll.
    pub lines: u64,
    /// Whether a `Restart` was emitted in this poll.
    pub restarted: bool,
}

impl PollOutcome {
    /// Whether anything new was read.
    pub fn grew(&self) -> bool {
        self.bytes > 0
    }
}

/// The files a source spec names now, in reading order: a plain path as is, a restart glob
/// (`run.log.*`) expanded in natural order (`.2` before `.10`). For provenance and listings.
pub fn matching_files(spec: &std::path::Path) -> std::io::Result<Vec<std::path::PathBuf>> {
    spec::Spec::new(spec.to_path_buf()).matches()
}
