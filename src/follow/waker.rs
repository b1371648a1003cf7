//! [`Waker`]: file-system events as wake-up hints for the ingest loop.
//!
//! Events never carry data here: any wake-up only makes the loop poll its followers sooner,
//! and the poll reads to the end of each file whatever the event said. That is what makes it
//! safe to lose events, which happens all the time on clusters: writes from another NFS or
//! Lustre client produce none, a replaced file silences a watch on it, the queue overflows,
//! and the per-user watch limit is shared with editors. So:
//!
//! * only **directories** are watched (non-recursively), never the files themselves, so a
//!   rotated or recreated file keeps producing events;
//! * the handler sets flags and `try_send`s on a channel of capacity one: a stalled loop
//!   cannot make it queue without bound, and a burst of events costs one wake-up;
//! * no watcher error is fatal: creation failure, `MaxFilesWatch`, `PathNotFound`, a
//!   `Rescan`, a removed directory all become a note, and polling carries on;
//! * [`Waker::wait`] blocks in `recv_timeout` (no busy loop) and coalesces bursts over
//!   [`COALESCE`].
//!
//! The watcher sits behind [`WatchBackend`], so tests (and a `--poll` option) can replace it
//! with nothing ([`Waker::null`]) or with a backend that fails on purpose.

use std::collections::{HashMap, VecDeque};
use std::os::unix::fs::MetadataExt;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, RecvTimeoutError, SyncSender, sync_channel};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use notify::event::{EventKind, ModifyKind};
use notify::{ErrorKind, RecursiveMode, Watcher};

/// How long a wake-up waits for more events of the same burst before returning.
pub const COALESCE: Duration = Duration::from_millis(50);
/// How often watched directories are re-checked for having been removed or recreated.
const REVALIDATE_EVERY: Duration = Duration::from_secs(5);
/// Notes kept for [`Waker::take_notes`] before older ones are dropped.
const MAX_NOTES: usize = 32;

/// Why [`Waker::wait`] returned.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Wake {
    /// An event (or an explicit [`WakeSender::wake`]) arrived.
    Event,
    /// The timeout passed without one.
    Timeout,
}

/// Something that can watch directories and report to a [`WakeSender`].
pub trait WatchBackend: Send {
    /// Start watching `dir` (non-recursively).
    fn watch(&mut self, dir: &Path) -> notify::Result<()>;
    /// Stop watching `dir`.
    fn unwatch(&mut self, dir: &Path) -> notify::Result<()>;
}

impl WatchBackend for notify::RecommendedWatcher {
    fn watch(&mut self, dir: &Path) -> notify::Result<()> {
        Watcher::watch(self, dir, RecursiveMode::NonRecursive)
    }
    fn unwatch(&mut self, dir: &Path) -> notify::Result<()> {
        Watcher::unwatch(self, dir)
    }
}

/// State shared between the watcher's thread and the [`Waker`].
#[derive(Debug, Default)]
struct Shared {
    /// A directory entry changed (create, remove, rename) or events may have been lost.
    names_dirty: AtomicBool,
    /// A watched directory may have been removed: re-check the watches.
    revalidate: AtomicBool,
    notes: Mutex<VecDeque<String>>,
}

impl Shared {
    fn note(&self, text: String) {
        let mut notes = self.notes.lock().unwrap_or_else(|e| e.into_inner());
        if notes.back() == Some(&text) {
            return;
        }
        if notes.len() == MAX_NOTES {
            notes.pop_front();
        }
        notes.push_back(text);
    }
}

/// The handle a watch backend reports through; cheap to clone and `Send`. Another thread
/// can also use it to wake the loop on purpose (quit, reload).
#[derive(Debug, Clone)]
pub struct WakeSender {
    shared: Arc<Shared>,
    tx: SyncSender<()>,
}

impl WakeSender {
    /// Deliver one result from a watcher (what the notify handler calls).
    pub fn deliver(&self, res: notify::Result<notify::Event>) {
        match res {
            Ok(ev) => {
                if ev.need_rescan() {
                    self.shared.note(String::from(
                        "file events were lost (event queue overflow); re-checking all files",
                    ));
                    self.mark_names();
                    self.shared.revalidate.store(true, Ordering::SeqCst);
                }
                match ev.kind {
                    // Opens and closes, including our own re-opens: nothing changed.
                    EventKind::Access(_) => return,
                    EventKind::Modify(ModifyKind::Data(_) | ModifyKind::Metadata(_)) => {}
                    EventKind::Remove(_) => {
                        self.mark_names();
                        self.shared.revalidate.store(true, Ordering::SeqCst);
                    }
                    _ => self.mark_names(),
                }
                self.wake();
            }
            Err(e) => {
                // Events may have been lost: look at every file now. The watches themselves
                // are re-checked on their own schedule, so a persistent error (the watch
                // limit) does not turn into a retry storm.
                self.shared.note(describe_error(&e, None));
                self.mark_names();
                self.wake();
            }
        }
    }

    /// Wake the waiting loop now.
    pub fn wake(&self) {
        // A full channel already holds a wake-up: dropping this one loses nothing.
        let _ = self.tx.try_send(());
    }

    fn mark_names(&self) {
        self.shared.names_dirty.store(true, Ordering::SeqCst);
    }
}

/// Per watched directory: its identity when watched, and whether the watch works.
#[derive(Debug, Clone, PartialEq, Eq)]
struct DirWatch {
    id: Option<(u64, u64)>,
    ok: bool,
    /// The last failure noted, to note each distinct failure once.
    failure: Option<String>,
}

/// Wakes the ingest loop on file-system events in watched directories; see the module docs.
pub struct Waker {
    backend: Option<Box<dyn WatchBackend>>,
    sender: WakeSender,
    rx: Receiver<()>,
    dirs: HashMap<PathBuf, DirWatch>,
    local_notes: Vec<String>,
    last_validate: Instant,
}

impl std::fmt::Debug for Waker {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Waker")
            .field("events", &self.backend.is_some())
            .field("dirs", &self.dirs)
            .finish()
    }
}

impl Default for Waker {
    fn default() -> Self {
        Waker::new()
    }
}

impl Waker {
    /// A waker using the platform's recommended watcher. Never fails: if the watcher cannot
    /// start (e.g. the inotify instance limit is reached), it is poll-only and says so in a
    /// note.
    pub fn new() -> Waker {
        Waker::with_backend(|sender| {
            let w = notify::recommended_watcher(move |res| sender.deliver(res))?;
            Ok(Box::new(w))
        })
    }

    /// A poll-only waker: [`wait`](Self::wait) always sleeps the full timeout unless
    /// [`WakeSender::wake`] is called. Simulates a network file system with no events, and
    /// serves a `--poll` option.
    pub fn null() -> Waker {
        let (sender, rx) = channel();
        Waker {
            backend: None,
            sender,
            rx,
            dirs: HashMap::new(),
            local_notes: Vec::new(),
            last_validate: Instant::now(),
        }
    }

    /// A waker with a backend built by `make`, which gets the [`WakeSender`] to report to.
    /// A failing `make` gives a poll-only waker with a note.
    pub fn with_backend(
        make: impl FnOnce(WakeSender) -> notify::Result<Box<dyn WatchBackend>>,
    ) -> Waker {
        let mut w = Waker::null();
        match make(w.sender.clone()) {
            Ok(b) => w.backend = Some(b),
            Err(e) => w
                .local_notes
                .push(format!("file events unavailable ({}); polling only", describe_kind(&e))),
        }
        w
    }

    /// Watch `dir` (non-recursively). Idempotent; a directory that was removed or recreated
    /// since it was watched is watched again. Failures become notes, never errors.
    pub fn watch(&mut self, dir: &Path) {
        if self.backend.is_none() {
            return;
        }
        let revalidate = self.revalidate_if_due();
        if let Some(d) = self.dirs.get(dir)
            && (d.ok || !revalidate)
        {
            // Watched, or failed and not due for a retry yet.
            return;
        }
        let id = dir_identity(dir);
        let Some(backend) = self.backend.as_mut() else {
            return;
        };
        let result = backend.watch(dir);
        let entry =
            self.dirs.entry(dir.to_path_buf()).or_insert(DirWatch { id, ok: false, failure: None });
        entry.id = id;
        match result {
            Ok(()) => {
                if entry.failure.take().is_some() {
                    self.local_notes.push(format!("file events for {} work again", dir.display()));
                }
                entry.ok = true;
            }
            Err(e) => {
                entry.ok = false;
                // A directory that vanished between listing and watching is simply retried.
                if !matches!(e.kind, ErrorKind::PathNotFound) {
                    let text = describe_error(&e, Some(dir));
                    if entry.failure.as_ref() != Some(&text) {
                        self.local_notes.push(text.clone());
                        entry.failure = Some(text);
                    }
                }
            }
        }
    }

    /// Watch exactly `dirs`: watch the new ones, stop watching the others.
    pub fn watch_only(&mut self, dirs: &[PathBuf]) {
        let stale: Vec<PathBuf> = self.dirs.keys().filter(|d| !dirs.contains(d)).cloned().collect();
        for d in stale {
            if let Some(w) = self.dirs.remove(&d)
                && w.ok
                && let Some(b) = self.backend.as_mut()
            {
                let _ = b.unwatch(&d);
            }
        }
        for d in dirs {
            self.watch(d);
        }
    }

    /// Block until an event arrives (then wait [`COALESCE`] for the rest of its burst) or
    /// `timeout` passes.
    pub fn wait(&self, timeout: Duration) -> Wake {
        match self.rx.recv_timeout(timeout) {
            Ok(()) => {
                std::thread::sleep(COALESCE.min(timeout));
                // Drain the rest of the burst.
                while self.rx.try_recv().is_ok() {}
                Wake::Event
            }
            Err(RecvTimeoutError::Timeout | RecvTimeoutError::Disconnected) => Wake::Timeout,
        }
    }

    /// Whether a directory entry changed (or events were lost) since the last call: the
    /// caller should then [`hint_names`](super::Follower::hint_names) its followers.
    pub fn take_names_dirty(&self) -> bool {
        self.sender.shared.names_dirty.swap(false, Ordering::SeqCst)
    }

    /// Notes about the event machinery since the last call (fallbacks to polling, errors).
    pub fn take_notes(&mut self) -> Vec<String> {
        let mut out = std::mem::take(&mut self.local_notes);
        let mut shared = self.sender.shared.notes.lock().unwrap_or_else(|e| e.into_inner());
        out.extend(shared.drain(..));
        out
    }

    /// A handle other threads can use to wake [`wait`](Self::wait).
    pub fn sender(&self) -> WakeSender {
        self.sender.clone()
    }

    /// Whether events are expected for every watched directory (false when poll-only, or
    /// when some watch failed).
    pub fn events_active(&self) -> bool {
        self.backend.is_some() && self.dirs.values().all(|d| d.ok)
    }

    /// Re-check watched directories if a removal was seen or the period passed: a removed
    /// or recreated directory loses its watch. Returns whether a check ran.
    fn revalidate_if_due(&mut self) -> bool {
        let flagged = self.sender.shared.revalidate.swap(false, Ordering::SeqCst);
        if !flagged && self.last_validate.elapsed() < REVALIDATE_EVERY {
            return false;
        }
        self.last_validate = Instant::now();
        let Some(backend) = self.backend.as_mut() else {
            return true;
        };
        self.dirs.retain(|dir, w| {
            let now = dir_identity(dir);
            if w.ok && now.is_some() && now == w.id {
                return true;
            }
            if w.ok {
                let _ = backend.unwatch(dir);
            }
            // Gone: forget it. Recreated or failed: keep the entry for a retry.
            if now.is_none() {
                return false;
            }
            w.ok = false;
            true
        });
        true
    }
}

fn channel() -> (WakeSender, Receiver<()>) {
    let (tx, rx) = sync_channel(1);
    (WakeSender { shared: Arc::new(Shared::default()), tx }, rx)
}

fn dir_identity(dir: &Path) -> Option<(u64, u64)> {
    std::fs::metadata(dir).ok().filter(|m| m.is_dir()).map(|m| (m.dev(), m.ino()))
}

/// A note for a watcher error, saying that polling continues.
fn describe_error(e: &notify::Error, dir: Option<&Path>) -> String {
    let what = describe_kind(e);
    match dir {
        Some(d) => format!("file events unavailable for {} ({what}); polling only", d.display()),
        None => format!("file event error ({what}); polling continues"),
    }
}

fn describe_kind(e: &notify::Error) -> String {
    match &e.kind {
        ErrorKind::MaxFilesWatch => String::from(
            "inotify watch limit reached; raise fs.inotify.max_user_watches to restore events",
        ),
        ErrorKind::PathNotFound => String::from("watched directory not found"),
        ErrorKind::Io(io) if io.raw_os_error() == Some(libc::EMFILE) => String::from(
            "too many inotify instances; raise fs.inotify.max_user_instances to restore events",
        ),
        ErrorKind::Io(io) => io.to_string(),
        ErrorKind::Generic(s) => s.clone(),
        other => format!("{other:?}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn access_events_do_not_wake_but_creates_mark_names() {
        let w = Waker::null();
        let s = w.sender();
        s.deliver(Ok(notify::Event::new(EventKind::Access(notify::event::AccessKind::Any))));
        assert_eq!(w.wait(Duration::from_millis(10)), Wake::Timeout);
        assert!(!w.take_names_dirty());
        s.deliver(Ok(notify::Event::new(EventKind::Modify(ModifyKind::Data(
            notify::event::DataChange::Any,
        )))));
        assert_eq!(w.wait(Duration::from_millis(10)), Wake::Event);
        assert!(!w.take_names_dirty());
        s.deliver(Ok(notify::Event::new(EventKind::Create(notify::event::CreateKind::File))));
        assert_eq!(w.wait(Duration::from_millis(10)), Wake::Event);
        assert!(w.take_names_dirty());
        assert!(!w.take_names_dirty());
    }

    #[test]
    fn a_burst_is_one_wake_and_the_channel_stays_bounded() {
        let w = Waker::null();
        let s = w.sender();
        for _ in 0..10_000 {
            s.wake();
        }
        assert_eq!(w.wait(Duration::from_millis(10)), Wake::Event);
        assert_eq!(w.wait(Duration::from_millis(10)), Wake::Timeout);
    }

    #[test]
    fn errors_and_rescans_become_notes() {
        let mut w = Waker::null();
        let s = w.sender();
        s.deliver(Err(notify::Error::new(ErrorKind::MaxFilesWatch)));
        s.deliver(Ok(notify::Event::new(EventKind::Other).set_flag(notify::event::Flag::Rescan)));
        let notes = w.take_notes();
        assert_eq!(notes.len(), 2, "{notes:?}");
        assert!(notes[0].contains("inotify watch limit reached"), "{notes:?}");
        assert!(notes[1].contains("event queue overflow"), "{notes:?}");
        assert!(w.take_names_dirty());
        assert!(w.take_notes().is_empty());
    }

    #[test]
    fn failing_creation_is_poll_only_with_a_note() {
        let mut w = Waker::with_backend(|_| {
            Err(notify::Error::io(std::io::Error::from_raw_os_error(libc::EMFILE)))
        });
        assert!(!w.events_active());
        let notes = w.take_notes();
        assert_eq!(notes.len(), 1);
        assert!(notes[0].contains("max_user_instances"), "{notes:?}");
        w.watch(Path::new("/"));
        assert_eq!(w.wait(Duration::from_millis(5)), Wake::Timeout);
    }
}
