//! Reading one open file: `fstat`, truncation and rewrite checks, positioned reads up to
//! the reported size through the line splitter, NUL runs held back at the end, progress
//! marks of large reads, and the notes of repeating kinds (long lines, NUL runs, read
//! errors) limited to a few each. The [`super::follower::Follower`] decides which file to
//! read; this only reads it.

use std::path::Path;
use std::time::Instant;

use super::file::{Held, OpenFile, mtime_of, read_at};
use super::lines::LineSplitter;
use super::{FollowConfig, FollowItem, FollowStats, PollOutcome};

/// A trailing NUL run longer than this is a hole, not a not-yet-visible append: it is
/// skipped at once instead of being held back.
const NUL_HOLD_MAX: usize = 64 * 1024;
/// Notes of one repeating kind (long lines, NUL runs, read errors) shown before they are
/// only counted in [`FollowStats`].
pub(super) const NOTES_PER_KIND: u32 = 5;

/// What a read of one open file found besides lines.
pub(super) enum ReadEnd {
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
pub(super) struct ReadCtx {
    pub(super) splitter: LineSplitter,
    pub(super) buf: Vec<u8>,
    pub(super) stats: FollowStats,
    pub(super) notes_long: u32,
    pub(super) notes_junk: u32,
    pub(super) notes_error: u32,
}

impl ReadCtx {
    /// `fstat` `file` and read whatever grew, handing lines to `sink`.
    pub(super) fn read(
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
        if changed && (file.seen.is_some() || seen != file.at_open) {
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
    pub(super) fn flush_partial(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) -> u64 {
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

    pub(super) fn error_note(
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
pub(super) fn limited_note(
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
