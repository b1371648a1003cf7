//! How a [`Follower`] moves between files: the name checks that queue every file the name
//! pointed to (rotations, deletions and re-creations, later restart files of a glob), the
//! rule for when the current file is finished, the switch to the next file, and the notes
//! on what could not be read (with a line estimate). See the [`super`] module header.

use std::time::{Duration, Instant, SystemTime};

use super::super::file::{OpenError, OpenFile, open_path};
use super::super::{FollowItem, PollOutcome};
use super::{
    DEFAULT_LINE_BYTES, Follower, MAX_GLOB_QUEUE, MAX_QUEUE, MAX_RETIRED, Next, Phase,
    RETIRED_GRACES, Retired,
};
use crate::run::SegmentReason;

impl Follower {
    /// Average bytes per line read so far (for estimates of unread lines).
    pub(super) fn line_bytes(&self) -> u64 {
        let s = &self.io.stats;
        s.bytes_read.checked_div(s.lines).map_or(DEFAULT_LINE_BYTES, |b| b.max(1))
    }

    /// `1234 bytes (about 15 lines)`.
    pub(super) fn estimate(&self, bytes: u64) -> String {
        let lines = bytes.div_ceil(self.line_bytes());
        format!("{bytes} bytes (about {lines} line{})", if lines == 1 { "" } else { "s" })
    }

    /// Queue a file to read after the others; false (noted once) when the queue is full.
    pub(super) fn enqueue(&mut self, next: Next, sink: &mut dyn FnMut(FollowItem<'_>)) -> bool {
        let open = self.queue.iter().filter(|n| n.file.is_some()).count();
        let full = if next.file.is_some() {
            open >= MAX_QUEUE
        } else {
            self.queue.len() - open >= MAX_GLOB_QUEUE
        };
        if full {
            if !self.queue_full_noted {
                self.queue_full_noted = true;
                sink(FollowItem::Note(format!(
                    "{} files are waiting to be read; {} and files after it are not queued \
                     until some are read, and may be lost if they are replaced meanwhile",
                    self.queue.len(),
                    next.path.display()
                )));
            }
            return false;
        }
        self.queue.push_back(next);
        true
    }

    /// The name check: look for later restart files (glob) and for a new file under the
    /// newest known name; queue what is new. Never changes which file is being read.
    pub(super) fn check_names(&mut self, now: Instant, sink: &mut dyn FnMut(FollowItem<'_>)) {
        self.last_name_check = Some(now);
        self.names_hint = false;
        self.check_retired(now, sink);
        if self.spec.is_glob() {
            self.check_glob(sink);
        }
        self.check_newest_name(now, sink);
    }

    /// Queue the restart files after the newest known one, in natural order (one listing of
    /// the directory per name check).
    pub(super) fn check_glob(&mut self, sink: &mut dyn FnMut(FollowItem<'_>)) {
        let Phase::Active(file) = &self.phase else {
            return;
        };
        let newest = self.queue.back().map_or(&file.path, |n| &n.path);
        let Ok(later) = self.spec.all_after(newest) else {
            return;
        };
        for next in later {
            let Phase::Active(file) = &mut self.phase else {
                return;
            };
            if self.queue.is_empty()
                && let Ok((_, meta)) = open_path(&next)
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
                file.path = next;
                self.missing = false;
                continue;
            }
            if self.queue.is_empty()
                && let Ok((f, meta)) = open_path(&file.path)
                && file.same_identity(&meta)
            {
                // Revalidate the current file once more so its last bytes are not lost to a
                // stale cached size (NFS).
                file.adopt(f, &meta);
            }
            sink(FollowItem::Note(format!("next restart file {}", next.display())));
            let reason = SegmentReason::NewFile { path: next.clone() };
            if !self.enqueue(Next { path: next, file: None, reason }, sink) {
                return;
            }
        }
    }

    /// Open the newest known name again: same file (revalidate), migration, a new file
    /// (queue it, opened now), or missing.
    pub(super) fn check_newest_name(&mut self, now: Instant, sink: &mut dyn FnMut(FollowItem<'_>)) {
        let is_current = self.queue.is_empty();
        let Phase::Active(current) = &mut self.phase else {
            return;
        };
        let newest: &mut OpenFile = match self.queue.back_mut() {
            None => current,
            Some(Next { file: Some(f), .. }) => f,
            // A restart file not opened yet: it is opened by name when its turn comes.
            Some(Next { file: None, .. }) => return,
        };
        match open_path(&newest.path) {
            Err(e) => {
                if !self.missing {
                    self.missing = true;
                    let why = match e {
                        OpenError::NotFound => String::from("is missing"),
                        other => format!("cannot be opened ({other})"),
                    };
                    sink(FollowItem::Note(format!(
                        "{} {why}; still reading the open file, retrying by name",
                        newest.path.display()
                    )));
                }
            }
            Ok((f, meta)) => {
                let was_missing = std::mem::replace(&mut self.missing, false);
                if newest.same_identity(&meta) {
                    if was_missing {
                        sink(FollowItem::Note(format!("{} is back", newest.path.display())));
                    }
                    let idle =
                        now.duration_since(newest.last_change) >= self.cfg.name_check_interval;
                    if idle || newest.broken {
                        newest.adopt(f, &meta);
                        self.io.stats.reopens += 1;
                    }
                    return;
                }
                if is_current
                    && !newest.broken
                    && newest.offset > 0
                    && newest.content_matches(&f, meta.len())
                {
                    sink(FollowItem::Note(format!(
                        "{} moved to a new inode with the same content; continuing at byte {}",
                        newest.path.display(),
                        newest.offset
                    )));
                    newest.adopt(f, &meta);
                    self.io.stats.migrations += 1;
                    return;
                }
                let path = newest.path.clone();
                sink(FollowItem::Note(format!(
                    "{} replaced by a new file; reading the rest of the old one first, then \
                     the new one from the start",
                    path.display()
                )));
                let file = OpenFile::new(f, &meta, path.clone(), now);
                let next = Next { path, file: Some(file), reason: SegmentReason::Replaced };
                if self.enqueue(next, sink) {
                    self.io.stats.replacements += 1;
                }
            }
        }
    }

    /// Whether the current file is done: read to its end and quiet long enough (see the
    /// module header), or unreadable. Only asked while another file is queued.
    pub(super) fn current_finished(&self, now: Instant) -> bool {
        let Phase::Active(file) = &self.phase else {
            return false;
        };
        if file.broken {
            return true;
        }
        let at_end = file.held.is_none() && file.seen.is_some_and(|(size, _)| size == file.offset);
        if !at_end {
            return false;
        }
        if self.one_shot {
            return true;
        }
        let quiet = now.duration_since(file.last_change);
        if quiet >= self.cfg.rotated_grace {
            return true;
        }
        let last_write = file.seen.map(|(_, (s, ns))| {
            SystemTime::UNIX_EPOCH
                + Duration::new(u64::try_from(s).unwrap_or(0), u32::try_from(ns).unwrap_or(0))
        });
        if last_write
            .and_then(|t| SystemTime::now().duration_since(t).ok())
            .is_some_and(|age| age >= self.cfg.rotated_grace)
        {
            return true;
        }
        quiet >= self.cfg.rotated_quiet && self.next_has_data()
    }

    /// The next queued file already holds data (the writer moved on to it).
    pub(super) fn next_has_data(&self) -> bool {
        match self.queue.front() {
            Some(Next { file: Some(f), .. }) => f.file.metadata().is_ok_and(|m| m.len() > 0),
            Some(Next { path, file: None, .. }) => {
                std::fs::metadata(path).is_ok_and(|m| m.len() > 0)
            }
            None => false,
        }
    }

    /// Leave the finished current file: note what could not be read of it, flush its
    /// unterminated line, keep watching it for late writes, and start the next queued file
    /// (a restart before its first line). Returns the number of lines flushed.
    pub(super) fn advance(
        &mut self,
        now: Instant,
        sink: &mut dyn FnMut(FollowItem<'_>),
        out: &mut PollOutcome,
    ) -> u64 {
        let Phase::Active(old) = std::mem::replace(&mut self.phase, Phase::Closed) else {
            return 0;
        };
        if old.broken {
            let size = old.file.metadata().map(|m| m.len()).ok().or(old.seen.map(|s| s.0));
            let rest = size.map_or(String::from("an unknown number of bytes"), |s| {
                self.estimate(s.saturating_sub(old.offset))
            });
            sink(FollowItem::Note(format!(
                "could not read the rest of {} after byte {}: {rest} not read",
                old.path.display(),
                old.offset
            )));
        }
        let flushed = self.io.flush_partial(sink);
        while let Some(next) = self.queue.pop_front() {
            let file = match next.file {
                Some(f) => f,
                None => match open_path(&next.path) {
                    Ok((f, meta)) => OpenFile::new(f, &meta, next.path.clone(), now),
                    Err(e) => {
                        sink(FollowItem::Note(format!(
                            "{} could not be opened when its turn came ({e}); skipped",
                            next.path.display()
                        )));
                        continue;
                    }
                },
            };
            self.io.stats.files += 1;
            self.io.splitter.reset();
            let replaced = next.reason == SegmentReason::Replaced;
            sink(FollowItem::Restart(next.reason));
            out.restarted = true;
            if self.retired.len() >= MAX_RETIRED {
                self.retired.remove(0);
            }
            let until = now + self.cfg.rotated_grace * RETIRED_GRACES;
            self.retired.push(Retired { file: old, next: next.path.clone(), replaced, until });
            self.phase = Phase::Active(file);
            if self.queue.is_empty() {
                self.queue_full_noted = false;
            }
            return flushed;
        }
        // Nothing left to move to (every queued file vanished): keep the old one.
        self.phase = Phase::Active(old);
        flushed
    }

    /// Files left behind that grew since: those bytes came after the follower moved on and
    /// cannot be placed in order any more; say so with an estimate. Stop watching after a
    /// while.
    pub(super) fn check_retired(&mut self, now: Instant, sink: &mut dyn FnMut(FollowItem<'_>)) {
        let per_line = self.line_bytes();
        self.retired.retain_mut(|r| {
            if let Ok(m) = r.file.file.metadata()
                && m.len() > r.file.offset
            {
                let bytes = m.len() - r.file.offset;
                let lines = bytes.div_ceil(per_line);
                let (what, next) = if r.replaced {
                    (
                        format!("the previous file named {}", r.file.path.display()),
                        "the new one".into(),
                    )
                } else {
                    (r.file.path.display().to_string(), r.next.display().to_string())
                };
                sink(FollowItem::Note(format!(
                    "{what} grew by {bytes} bytes (about {lines} lines) after settle had moved \
                     on to {next}; those lines are not read"
                )));
                r.file.offset = m.len();
            }
            now < r.until
        });
    }
}
