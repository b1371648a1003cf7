//! One open log file: its identity, how far it was read, and what the read part looked like.
//!
//! The identity (device + inode) tells "same file" from "a new file under the same name";
//! the stored first bytes (up to [`PREFIX_LEN`]) and the bytes just before the read offset
//! (up to [`TAIL_LEN`]) tell an in-place rewrite from an append, and an inode migration
//! (Lustre `lfs migrate`, a copy moved over the name) from a real replacement. The bytes
//! themselves are kept rather than a hash: 4 KiB per file is cheap and comparisons are exact.
//! A NUL byte in the stored bytes matches anything, because NULs that a client read for a
//! freshly appended region can later turn into the real text.
//!
//! Reads are positioned (`pread`), so no seek position can go stale, and nothing is mapped.

use std::fs::{File, Metadata, OpenOptions};
use std::io;
use std::os::unix::fs::{FileExt, MetadataExt, OpenOptionsExt};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// How many leading bytes are kept as the prefix fingerprint.
pub(crate) const PREFIX_LEN: usize = 4096;
/// How many bytes before the read offset are kept as the tail fingerprint.
pub(crate) const TAIL_LEN: usize = 256;

/// Why a path could not be opened for following.
#[derive(Debug)]
pub(crate) enum OpenError {
    /// Nothing under that name (or a missing directory on the way).
    NotFound,
    /// The name exists but is a directory, FIFO, socket or device.
    NotRegular,
    /// Any other error (permissions, I/O).
    Io(io::Error),
}

impl std::fmt::Display for OpenError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            OpenError::NotFound => write!(f, "no such file"),
            OpenError::NotRegular => write!(f, "not a regular file"),
            OpenError::Io(e) => write!(f, "{e}"),
        }
    }
}

/// Open `path` read-only and `fstat` the result. `O_NONBLOCK` keeps a FIFO put in place of
/// the log from blocking the ingest thread; it changes nothing for regular files. The
/// identity is taken from the opened descriptor, not from a separate `stat` of the name, so
/// a rename between the two cannot mix up files.
pub(crate) fn open_path(path: &Path) -> Result<(File, Metadata), OpenError> {
    let file = OpenOptions::new().read(true).custom_flags(libc::O_NONBLOCK).open(path).map_err(
        |e| match e.kind() {
            io::ErrorKind::NotFound | io::ErrorKind::NotADirectory => OpenError::NotFound,
            _ => OpenError::Io(e),
        },
    )?;
    let meta = file.metadata().map_err(OpenError::Io)?;
    if !meta.is_file() {
        return Err(OpenError::NotRegular);
    }
    Ok((file, meta))
}

/// Modification time with nanoseconds, as `(seconds, nanoseconds)`.
pub(crate) fn mtime_of(meta: &Metadata) -> (i64, i64) {
    (meta.mtime(), meta.mtime_nsec())
}

/// A run of NUL bytes at the end of the readable data, not consumed yet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Held {
    /// Where the run starts (equal to the read offset).
    pub offset: u64,
    /// When it was first seen there.
    pub since: Instant,
}

/// One open file being read.
#[derive(Debug)]
pub(crate) struct OpenFile {
    pub file: File,
    pub path: PathBuf,
    pub dev: u64,
    pub ino: u64,
    /// Bytes consumed (handed to the line splitter, including skipped NULs).
    pub offset: u64,
    /// Size and mtime at the last read, `None` before the first.
    pub seen: Option<(u64, (i64, i64))>,
    /// When size or mtime last changed (or the file was opened).
    pub last_change: Instant,
    /// Size and mtime when the file was opened: a first read that finds them unchanged is
    /// not a change (a file opened at a rotation and read later keeps its quiet time).
    pub at_open: (u64, (i64, i64)),
    /// The first consumed bytes, up to [`PREFIX_LEN`].
    pub prefix: Vec<u8>,
    /// The last consumed bytes, up to [`TAIL_LEN`], ending at `offset`.
    pub tail: Vec<u8>,
    /// A trailing NUL run held back from consumption.
    pub held: Option<Held>,
    /// A read or `fstat` failed; the descriptor is not used until a re-open by name.
    pub broken: bool,
}

impl OpenFile {
    /// A file opened at `path`, to be read from its start.
    pub(crate) fn new(file: File, meta: &Metadata, path: PathBuf, now: Instant) -> OpenFile {
        OpenFile {
            file,
            path,
            dev: meta.dev(),
            ino: meta.ino(),
            offset: 0,
            seen: None,
            last_change: now,
            at_open: (meta.len(), mtime_of(meta)),
            prefix: Vec::new(),
            tail: Vec::new(),
            held: None,
            broken: false,
        }
    }

    /// Whether `meta` describes this same file (device and inode).
    pub(crate) fn same_identity(&self, meta: &Metadata) -> bool {
        self.dev == meta.dev() && self.ino == meta.ino()
    }

    /// Take over a new descriptor for this file (re-open or migration), keeping the offset.
    pub(crate) fn adopt(&mut self, file: File, meta: &Metadata) {
        self.file = file;
        self.dev = meta.dev();
        self.ino = meta.ino();
        self.broken = false;
    }

    /// Forget everything read: the file is read again from its start.
    pub(crate) fn rewind(&mut self) {
        self.offset = 0;
        self.seen = None;
        self.prefix.clear();
        self.tail.clear();
        self.held = None;
    }

    /// Record that `bytes` (raw file bytes at `offset`) were consumed.
    pub(crate) fn consumed(&mut self, bytes: &[u8]) {
        if self.prefix.len() < PREFIX_LEN && self.offset == self.prefix.len() as u64 {
            let take = bytes.len().min(PREFIX_LEN - self.prefix.len());
            self.prefix.extend_from_slice(&bytes[..take]);
        }
        if bytes.len() >= TAIL_LEN {
            self.tail.clear();
            self.tail.extend_from_slice(&bytes[bytes.len() - TAIL_LEN..]);
        } else {
            let keep = (TAIL_LEN - bytes.len()).min(self.tail.len());
            self.tail.drain(..self.tail.len() - keep);
            self.tail.extend_from_slice(bytes);
        }
        self.offset += bytes.len() as u64;
    }

    /// Whether `other` (of size `other_size`) holds the bytes this file was read as: the
    /// same prefix and the same bytes just before the offset. I/O errors count as "no".
    pub(crate) fn content_matches(&self, other: &File, other_size: u64) -> bool {
        if other_size < self.offset {
            return false;
        }
        let tail_at = self.offset - self.tail.len() as u64;
        region_matches(other, 0, &self.prefix) && region_matches(other, tail_at, &self.tail)
    }
}

/// Whether `file` holds `expected` at `at`; a NUL in `expected` matches any byte.
fn region_matches(file: &File, at: u64, expected: &[u8]) -> bool {
    if expected.is_empty() {
        return true;
    }
    let mut now = vec![0u8; expected.len()];
    if file.read_exact_at(&mut now, at).is_err() {
        return false;
    }
    expected.iter().zip(&now).all(|(e, n)| *e == 0 || e == n)
}

/// Positioned read that retries on `EINTR`.
pub(crate) fn read_at(file: &File, buf: &mut [u8], at: u64) -> io::Result<usize> {
    loop {
        match file.read_at(buf, at) {
            Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
            r => return r,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn open(dir: &Path, name: &str, content: &[u8]) -> OpenFile {
        let p = dir.join(name);
        std::fs::write(&p, content).expect("write");
        let (f, m) = open_path(&p).expect("open");
        OpenFile::new(f, &m, p, Instant::now())
    }

    #[test]
    fn fingerprint_tracks_prefix_and_tail() {
        let dir = tempfile::tempdir().expect("temp dir");
        let mut f = open(dir.path(), "a", b"");
        let data: Vec<u8> = (0..10_000u32).map(|i| b'a' + (i % 26) as u8).collect();
        f.consumed(&data[..100]);
        f.consumed(&data[100..5000]);
        f.consumed(&data[5000..5010]);
        assert_eq!(f.offset, 5010);
        assert_eq!(f.prefix, &data[..PREFIX_LEN]);
        assert_eq!(f.tail, &data[5010 - TAIL_LEN..5010]);
        let copy = dir.path().join("b");
        std::fs::write(&copy, &data).expect("write");
        let (c, m) = open_path(&copy).expect("open");
        assert!(f.content_matches(&c, m.len()));
        let mut other = data.clone();
        other[5005] = b'#';
        std::fs::write(&copy, &other).expect("write");
        let (c, m) = open_path(&copy).expect("open");
        assert!(!f.content_matches(&c, m.len()), "a changed tail byte must not match");
        std::fs::write(&copy, &data[..5000]).expect("write");
        let (c, m) = open_path(&copy).expect("open");
        assert!(!f.content_matches(&c, m.len()), "a shorter file must not match");
    }

    #[test]
    fn stored_nul_matches_anything() {
        let dir = tempfile::tempdir().expect("temp dir");
        let mut f = open(dir.path(), "a", b"");
        f.consumed(b"ab\0\0ef");
        let p = dir.path().join("b");
        let mut w = std::fs::File::create(&p).expect("create");
        w.write_all(b"abcdef").expect("write");
        let (c, m) = open_path(&p).expect("open");
        assert!(f.content_matches(&c, m.len()));
    }

    #[test]
    fn open_refuses_directories_and_reports_missing() {
        let dir = tempfile::tempdir().expect("temp dir");
        assert!(matches!(open_path(dir.path()), Err(OpenError::NotRegular)));
        assert!(matches!(open_path(&dir.path().join("nope")), Err(OpenError::NotFound)));
        assert!(matches!(open_path(&dir.path().join("nope/deeper")), Err(OpenError::NotFound)));
    }
}
