//! Fault-injection tests for the file follower, on real files in temporary directories.
//!
//! Numbered tests follow the fault-injection checklist in the project's reliability notes
//! (items 1–19, the ones that need no root or VM). Intervals are shortened (20 ms polls,
//! 50 ms name checks) so each test finishes well under three seconds; every test asserts
//! the exact sequence of lines and restarts it expects.

use std::fs::{self, File, OpenOptions};
use std::io::Write;
use std::os::unix::fs::FileExt;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, mpsc};
use std::thread;
use std::time::{Duration, Instant};

use settle::follow::{
    FollowConfig, FollowItem, FollowStatus, Follower, Wake, WakeSender, Waker, WatchBackend,
};
use settle::run::SegmentReason;

/// An owned copy of a [`FollowItem`].
#[derive(Debug, Clone, PartialEq)]
enum It {
    L(Vec<u8>),
    R(SegmentReason),
    N(String),
    P(u64, u64),
}

fn l(s: &str) -> It {
    It::L(s.as_bytes().to_vec())
}

fn cfg() -> FollowConfig {
    FollowConfig {
        poll_interval: Duration::from_millis(20),
        name_check_interval: Duration::from_millis(50),
        rotated_grace: Duration::from_millis(200),
        rotated_quiet: Duration::from_millis(100),
        nul_grace: Duration::from_millis(300),
        ..FollowConfig::default()
    }
}

/// A follower plus everything it emitted.
struct H {
    f: Follower,
    items: Vec<It>,
}

impl H {
    fn new(spec: impl Into<PathBuf>, cfg: FollowConfig) -> H {
        H { f: Follower::new(spec, cfg), items: Vec::new() }
    }

    fn poll(&mut self) -> settle::follow::PollOutcome {
        let items = &mut self.items;
        self.f.poll(&mut |it| items.push(own(it)))
    }

    fn finish(&mut self) {
        let items = &mut self.items;
        self.f.finish(&mut |it| items.push(own(it)));
    }

    /// Poll every `poll_interval` until `done` holds or `limit` passes; true if it held.
    fn poll_until(&mut self, limit: Duration, done: impl Fn(&H) -> bool) -> bool {
        let start = Instant::now();
        let tick = self.f.config().poll_interval;
        loop {
            self.poll();
            if done(self) {
                return true;
            }
            if start.elapsed() > limit {
                return false;
            }
            thread::sleep(tick);
        }
    }

    /// Lines and restarts, in order (notes and progress left out).
    fn flow(&self) -> Vec<It> {
        self.items.iter().filter(|i| matches!(i, It::L(_) | It::R(_))).cloned().collect()
    }

    fn lines(&self) -> Vec<String> {
        self.items
            .iter()
            .filter_map(|i| match i {
                It::L(b) => Some(String::from_utf8_lossy(b).into_owned()),
                _ => None,
            })
            .collect()
    }

    fn notes(&self) -> Vec<String> {
        self.items
            .iter()
            .filter_map(|i| match i {
                It::N(n) => Some(n.clone()),
                _ => None,
            })
            .collect()
    }

    fn has_line(&self, s: &str) -> bool {
        self.items.contains(&l(s))
    }
}

fn own(it: FollowItem<'_>) -> It {
    match it {
        FollowItem::Line(b) => It::L(b.to_vec()),
        FollowItem::Restart(r) => It::R(r),
        FollowItem::Note(n) => It::N(n),
        FollowItem::Progress { read, total } => It::P(read, total),
    }
}

fn append(path: &Path, bytes: &[u8]) {
    let mut f = OpenOptions::new().create(true).append(true).open(path).expect("open for append");
    f.write_all(bytes).expect("append");
}

fn numbered(prefix: &str, range: std::ops::Range<usize>) -> Vec<String> {
    range.map(|i| format!("{prefix} {i}")).collect()
}

fn text_of(lines: &[String]) -> Vec<u8> {
    let mut v = Vec::new();
    for s in lines {
        v.extend_from_slice(s.as_bytes());
        v.push(b'\n');
    }
    v
}

/// Tiny xorshift64 generator: seeded, repeatable, no dependency.
struct XorShift(u64);

impl XorShift {
    fn next(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        self.0 = x;
        x
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

// ---------------------------------------------------------------------------------------
// Checklist items

/// Checklist 1: Empty file, three appends in separate writes: three lines, in order.
#[test]
fn c01_three_appends_three_lines() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    File::create(&p).expect("create");
    let mut h = H::new(&p, cfg());
    assert!(!h.poll().grew());
    for s in ["a=1", "a=2", "a=3"] {
        append(&p, format!("{s}\n").as_bytes());
        h.poll();
    }
    assert_eq!(h.flow(), [l("a=1"), l("a=2"), l("a=3")]);
    assert_eq!(h.f.stats().lines, 3);
    assert_eq!(h.f.stats().bytes_read, 12);
    assert_eq!(h.f.status(), FollowStatus::Following { path: p });
}

/// Checklist 2: `res=1.0`, a pause, then `e-3\n`: one line `res=1.0e-3`, nothing before it.
#[test]
fn c02_line_completed_after_a_pause() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"res=1.0").expect("write");
    let mut h = H::new(&p, cfg());
    let o = h.poll();
    assert_eq!(o.bytes, 7);
    assert_eq!(o.lines, 0);
    assert_eq!(h.f.partial_line(), Some(&b"res=1.0"[..]));
    thread::sleep(Duration::from_millis(300));
    h.poll();
    assert!(h.flow().is_empty());
    append(&p, b"e-3\n");
    h.poll();
    assert_eq!(h.flow(), [l("res=1.0e-3")]);
    assert_eq!(h.f.partial_line(), None);
}

/// Checklist 3: One 10 KiB `write()` while the reader polls as fast as it can: one byte-identical line.
#[test]
fn c03_one_big_write_while_reader_spins() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    File::create(&p).expect("create");
    let line: Vec<u8> = (0..10 * 1024 - 1).map(|i| b'a' + (i % 26) as u8).collect();
    let mut payload = line.clone();
    payload.push(b'\n');
    let mut h = H::new(&p, cfg());
    let p2 = p.clone();
    let writer = thread::spawn(move || {
        thread::sleep(Duration::from_millis(20));
        let mut f = OpenOptions::new().append(true).open(&p2).expect("open");
        f.write_all(&payload).expect("write");
    });
    let start = Instant::now();
    while h.flow().is_empty() && start.elapsed() < Duration::from_secs(2) {
        h.poll();
    }
    writer.join().expect("writer thread");
    h.poll();
    assert_eq!(h.flow(), [It::L(line)]);
}

/// Checklist 4: 100 lines read, `truncate -s0`, two appends: a truncation note, a restart, and exactly
/// those two lines.
#[test]
fn c04_truncate_to_zero_then_two_appends() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let first = numbered("it", 0..100);
    fs::write(&p, text_of(&first)).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    OpenOptions::new().write(true).open(&p).expect("open").set_len(0).expect("truncate");
    append(&p, b"x 1\n");
    append(&p, b"x 2\n");
    h.poll();
    let mut want: Vec<It> = first.iter().map(|s| l(s)).collect();
    want.extend([It::R(SegmentReason::Truncated), l("x 1"), l("x 2")]);
    assert_eq!(h.flow(), want);
    assert!(h.notes().iter().any(|n| n.contains("truncated")), "{:?}", h.notes());
    assert_eq!(h.f.stats().truncations, 1);
    assert_eq!(h.f.stats().rewrites, 0);
}

/// Checklist 5: 1 KiB read, then rewritten in place with 5 KiB of other content within one tick (the
/// size grew, so only the fingerprint can tell): restart and read from byte 0.
#[test]
fn c05_in_place_rewrite_detected_by_prefix() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let old: Vec<String> = (0..64).map(|i| format!("old line {i:06}")).collect(); // 16 B each
    fs::write(&p, text_of(&old)).expect("write");
    assert_eq!(fs::metadata(&p).expect("stat").len(), 1024);
    let mut h = H::new(&p, cfg());
    h.poll();
    let new: Vec<String> = (0..320).map(|i| format!("NEW LINE {i:05}.")).collect(); // 16 B each
    // Same inode: open with truncation and write, as a `>` redirect does.
    fs::write(&p, text_of(&new)).expect("rewrite");
    assert_eq!(fs::metadata(&p).expect("stat").len(), 5120);
    h.poll();
    let mut want: Vec<It> = old.iter().map(|s| l(s)).collect();
    want.push(It::R(SegmentReason::Truncated));
    want.extend(new.iter().map(|s| l(s)));
    assert_eq!(h.flow(), want);
    assert_eq!(h.f.stats().rewrites, 1);
    assert!(h.notes().iter().any(|n| n.contains("rewritten in place")), "{:?}", h.notes());
}

/// Checklist 5b: A rewrite that keeps the size exactly (only mtime changes) is detected too.
#[test]
fn c05b_same_size_rewrite_detected() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"alpha 1\nalpha 2\n").expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    thread::sleep(Duration::from_millis(20));
    let f = OpenOptions::new().write(true).open(&p).expect("open");
    f.write_all_at(b"omega 1\nomega 2\n", 0).expect("pwrite");
    drop(f);
    h.poll();
    assert_eq!(
        h.flow(),
        [l("alpha 1"), l("alpha 2"), It::R(SegmentReason::Truncated), l("omega 1"), l("omega 2")]
    );
}

/// Checklist 6: A writer appends every 10 ms; `mv log log.1; touch log`; the old writer continues for
/// 300 ms, then a new writer starts: every old-fd line exactly once, then `Restart(Replaced)`
/// and the new file from byte 0.
#[test]
fn c06_rotation_while_old_writer_continues() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    File::create(&p).expect("create");
    let config = FollowConfig { rotated_grace: Duration::from_millis(600), ..cfg() };
    let mut h = H::new(&p, config);
    h.poll();

    let stop = Arc::new(AtomicBool::new(false));
    let (stop2, p2) = (stop.clone(), p.clone());
    let old_writer = thread::spawn(move || {
        let mut f = OpenOptions::new().append(true).open(&p2).expect("open");
        let mut n = 0usize;
        while !stop2.load(Ordering::SeqCst) {
            f.write_all(format!("old {n}\n").as_bytes()).expect("write");
            n += 1;
            thread::sleep(Duration::from_millis(10));
        }
        n
    });
    let (tx, rx) = mpsc::channel();
    let p3 = p.clone();
    let scenario = thread::spawn(move || {
        thread::sleep(Duration::from_millis(150));
        fs::rename(&p3, p3.with_extension("log.1")).expect("rename");
        File::create(&p3).expect("touch");
        thread::sleep(Duration::from_millis(300));
        stop.store(true, Ordering::SeqCst);
        let n_old = old_writer.join().expect("old writer");
        for i in 0..10 {
            append(&p3, format!("new {i}\n").as_bytes());
        }
        tx.send(n_old).expect("send");
    });
    let ok = h.poll_until(Duration::from_secs(3), |h| h.has_line("new 9"));
    scenario.join().expect("scenario");
    let n_old = rx.recv().expect("old count");
    assert!(ok, "new file not read: {:?}", h.notes());
    let mut want: Vec<It> = numbered("old", 0..n_old).iter().map(|s| l(s)).collect();
    want.push(It::R(SegmentReason::Replaced));
    want.extend(numbered("new", 0..10).iter().map(|s| l(s)));
    assert_eq!(h.flow(), want);
    assert!(n_old > 20, "the old writer wrote {n_old} lines");
    assert_eq!(h.f.stats().replacements, 1);
}

/// Checklist 7: A writer opened with `>` (no O_APPEND) is at 1 MiB when the file is truncated; its
/// next write lands at 1 MiB, leaving a 1 MiB NUL hole. The hole is skipped (counted, never
/// stored) and the later line is read.
#[test]
fn c07_nul_hole_after_truncation_is_skipped() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let mut writer = File::create(&p).expect("create"); // like `solver > run.log`
    let lines: Vec<String> = (0..16384).map(|i| format!("{i:063}")).collect(); // 64 B each
    writer.write_all(&text_of(&lines)).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(h.f.stats().lines, 16384);
    OpenOptions::new().write(true).open(&p).expect("open").set_len(0).expect("truncate");
    writer.write_all(b"after 1\n").expect("write");
    assert_eq!(fs::metadata(&p).expect("stat").len(), (1 << 20) + 8);
    h.poll();
    let flow = h.flow();
    assert_eq!(flow.len(), 16384 + 2);
    assert_eq!(flow[16384..], [It::R(SegmentReason::Truncated), l("after 1")]);
    let s = h.f.stats();
    assert_eq!(s.junk_bytes, 1 << 20);
    assert_eq!(s.rewrites, 1, "truncate-then-regrow is caught by the prefix check");
    assert!(h.notes().iter().any(|n| n.contains("skipped 1048576 NUL bytes")), "{:?}", h.notes());
    let cap = h.f.config().read_chunk + h.f.config().max_line_bytes + 8192;
    assert!(h.f.memory_bytes() <= cap, "memory {} > {cap}", h.f.memory_bytes());
}

/// Checklist 8: `rm log`, recreated later: status "missing" meanwhile (no exit, polls read nothing),
/// then the new file from byte 0 after a `Restart(Replaced)`.
#[test]
fn c08_deleted_then_recreated() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"one\ntwo\n").expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    fs::remove_file(&p).expect("rm");
    assert!(h.poll_until(Duration::from_secs(1), |h| matches!(
        h.f.status(),
        FollowStatus::Missing { .. }
    )));
    assert_eq!(h.f.status(), FollowStatus::Missing { path: p.clone() });
    assert!(h.notes().iter().any(|n| n.contains("is missing")), "{:?}", h.notes());
    for _ in 0..10 {
        assert_eq!(h.poll().bytes, 0);
        thread::sleep(Duration::from_millis(20));
    }
    fs::write(&p, b"fresh\n").expect("recreate");
    assert!(h.poll_until(Duration::from_secs(2), |h| h.has_line("fresh")));
    assert_eq!(h.flow(), [l("one"), l("two"), It::R(SegmentReason::Replaced), l("fresh")]);
    assert_eq!(h.f.status(), FollowStatus::Following { path: p });
}

/// Checklist 9: Following `run/out.log` before `run/` exists: the parent is watched, and the file is
/// picked up within two polls of being written.
#[test]
fn c09_directory_created_later() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run/out.log");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(h.f.status(), FollowStatus::Waiting { spec: p.clone() });
    assert_eq!(h.f.watch_dirs(), [dir.path().to_path_buf()]);
    assert_eq!(h.notes(), [format!("waiting for {} to appear", p.display())]);
    fs::create_dir(dir.path().join("run")).expect("mkdir");
    assert_eq!(h.f.watch_dirs(), [dir.path().join("run")]);
    fs::write(&p, b"x\n").expect("write");
    let mut polls = 0;
    while !h.has_line("x") && polls < 2 {
        h.poll();
        polls += 1;
    }
    assert_eq!(h.flow(), [l("x")]);
    assert_eq!(polls, 1);
    assert_eq!(h.f.status(), FollowStatus::Following { path: p });
}

/// Checklist 10: `rm -r dir; mkdir dir; echo x > dir/log`: still followed; the directory watch is
/// renewed on the new directory, so events arrive again.
#[test]
fn c10_directory_removed_and_recreated() {
    let root = tempfile::tempdir().expect("temp dir");
    let dir = root.path().join("case");
    fs::create_dir(&dir).expect("mkdir");
    let p = dir.join("log");
    fs::write(&p, b"a\n").expect("write");
    let mut h = H::new(&p, cfg());
    let mut waker = Waker::new();
    h.poll();
    for d in h.f.watch_dirs() {
        waker.watch(&d);
    }
    assert!(waker.events_active(), "{:?}", waker.take_notes());
    fs::remove_dir_all(&dir).expect("rm -r");
    fs::create_dir(&dir).expect("mkdir");
    fs::write(&p, b"x\n").expect("write");
    assert!(h.poll_until(Duration::from_secs(2), |h| h.has_line("x")));
    assert_eq!(h.flow(), [l("a"), It::R(SegmentReason::Replaced), l("x")]);
    // The removal event makes the next `watch` renew the watch on the new directory.
    waker.wait(Duration::from_millis(100));
    for d in h.f.watch_dirs() {
        waker.watch(&d);
    }
    while waker.wait(Duration::from_millis(100)) == Wake::Event {}
    append(&p, b"y\n");
    assert_eq!(waker.wait(Duration::from_secs(2)), Wake::Event);
    h.poll();
    assert!(h.has_line("y"));
}

/// Checklist 11: An append between the first read and setting up the watch is not lost: the next poll
/// reads to the end regardless of events.
#[test]
fn c11_append_before_the_watch_exists() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"a\n").expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    append(&p, b"b\n"); // the "pause" between the first read and watch()
    let mut waker = Waker::new();
    for d in h.f.watch_dirs() {
        waker.watch(&d);
    }
    assert_eq!(waker.wait(Duration::from_millis(50)), Wake::Timeout);
    h.poll();
    assert_eq!(h.flow(), [l("a"), l("b")]);
}

/// A backend that refuses every watch with the inotify watch-limit error, and also reports
/// it through the event handler as notify does when adding watches later.
struct LimitReached(WakeSender);

impl WatchBackend for LimitReached {
    fn watch(&mut self, _dir: &Path) -> notify::Result<()> {
        self.0.deliver(Err(notify::Error::new(notify::ErrorKind::MaxFilesWatch)));
        Err(notify::Error::new(notify::ErrorKind::MaxFilesWatch))
    }
    fn unwatch(&mut self, _dir: &Path) -> notify::Result<()> {
        Ok(())
    }
}

/// Checklist 12: `MaxFilesWatch` injected: a warning note, poll-only, data within one tick.
#[test]
fn c12_watch_limit_falls_back_to_polling() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"a\n").expect("write");
    let mut h = H::new(&p, cfg());
    let mut waker = Waker::with_backend(|s| Ok(Box::new(LimitReached(s))));
    h.poll();
    for d in h.f.watch_dirs() {
        waker.watch(&d);
    }
    assert!(!waker.events_active());
    let notes = waker.take_notes();
    assert_eq!(notes.len(), 2, "{notes:?}");
    assert!(notes.iter().all(|n| n.contains("inotify watch limit reached")), "{notes:?}");
    // Watching again does not repeat the note.
    for d in h.f.watch_dirs() {
        waker.watch(&d);
    }
    assert!(waker.take_notes().is_empty());
    // The handler's error wakes the loop once; after that only the timeout does.
    assert_eq!(waker.wait(Duration::from_millis(20)), Wake::Event);
    append(&p, b"b\n");
    assert_eq!(waker.wait(h.f.config().poll_interval), Wake::Timeout);
    h.poll();
    assert_eq!(h.flow(), [l("a"), l("b")]);
}

/// Checklist 13: A null watcher (a network file system with no events): an append arrives by polling
/// within one tick.
#[test]
fn c13_no_events_data_by_polling_within_one_tick() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"a\n").expect("write");
    let mut h = H::new(&p, cfg());
    let mut waker = Waker::null();
    h.poll();
    for d in h.f.watch_dirs() {
        waker.watch(&d);
    }
    append(&p, b"b\n");
    let t = Instant::now();
    assert_eq!(waker.wait(h.f.config().poll_interval), Wake::Timeout);
    assert!(t.elapsed() >= h.f.config().poll_interval);
    h.poll();
    assert_eq!(h.flow(), [l("a"), l("b")]);
    assert!(waker.take_notes().is_empty());
}

/// Checklist 14 (approximated): A stale `fstat` size cannot be faked without a file-system shim, so
/// this checks the mechanism that cures it: an idle file is closed and re-opened by name
/// every name-check interval (NFS close-to-open revalidation), keeping offset and
/// fingerprint, with no duplicate and no restart.
#[test]
fn c14_idle_file_is_reopened_keeping_its_offset() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"a\n").expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    for _ in 0..3 {
        thread::sleep(Duration::from_millis(60));
        h.poll();
    }
    let s = h.f.stats();
    assert!(s.reopens >= 2, "reopens {}", s.reopens);
    assert_eq!(s.files, 1);
    assert_eq!(h.f.offset(), 2);
    append(&p, b"b\n");
    h.poll();
    assert_eq!(h.flow(), [l("a"), l("b")]);
}

/// Checklist 15: A growth whose last 100 bytes are NUL (as an NFS client may show a fresh append),
/// real bytes replacing them a little later: no garbage line.
#[test]
fn c15_trailing_nul_growth_waits_for_real_bytes() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let mut content = b"abc\nres=1".to_vec();
    content.extend([0u8; 100]);
    fs::write(&p, &content).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(h.flow(), [l("abc")]);
    assert_eq!(h.f.offset(), 9, "the NUL tail is not consumed");
    thread::sleep(Duration::from_millis(100));
    h.poll();
    assert_eq!(h.f.stats().junk_bytes, 0);
    let mut real = b"e-3\n".to_vec();
    real.extend([b'x'; 95]);
    real.push(b'\n');
    assert_eq!(real.len(), 100);
    OpenOptions::new().write(true).open(&p).expect("open").write_all_at(&real, 9).expect("pwrite");
    h.poll();
    assert_eq!(h.flow(), [l("abc"), l("res=1e-3"), It::L(vec![b'x'; 95])]);
    assert_eq!(h.f.stats().junk_bytes, 0);
    assert_eq!(h.f.stats().truncations, 0);
}

/// Checklist 15b: A NUL tail that stays NUL past the grace is skipped as junk; text after it is read.
#[test]
fn c15b_persistent_nul_tail_is_skipped_after_the_grace() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let mut content = b"abc\n".to_vec();
    content.extend([0u8; 100]);
    fs::write(&p, &content).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(h.f.offset(), 4);
    thread::sleep(Duration::from_millis(350));
    h.poll();
    assert_eq!(h.f.offset(), 104);
    assert_eq!(h.f.stats().junk_bytes, 100);
    append(&p, b"def\n");
    h.poll();
    assert_eq!(h.flow(), [l("abc"), l("def")]);
}

/// Checklist 16: The same content copied to a new inode under the same name (a Lustre migration, or
/// `cp log tmp && mv tmp log`): no restart, no duplicates, reading continues at the offset.
#[test]
fn c16_same_content_new_inode_continues() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let first = numbered("it", 0..200);
    fs::write(&p, text_of(&first)).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    let tmp = dir.path().join("run.log.tmp");
    fs::copy(&p, &tmp).expect("cp");
    fs::rename(&tmp, &p).expect("mv");
    thread::sleep(Duration::from_millis(60));
    h.poll();
    append(&p, b"it 200\n");
    h.poll();
    let want: Vec<It> = numbered("it", 0..201).iter().map(|s| l(s)).collect();
    assert_eq!(h.flow(), want);
    let s = h.f.stats();
    assert_eq!((s.migrations, s.replacements, s.truncations), (1, 0, 0));
}

/// Checklist 17: A 50 MiB line with no newline, then `\nok\n`: memory stays under the line cap plus
/// the read chunk; the line comes out cut to its first 64 KiB, then `ok`; one long line
/// counted and one note.
#[test]
fn c17_fifty_mib_line_memory_stays_bounded() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    File::create(&p).expect("create");
    let mut h = H::new(&p, cfg());
    let block = vec![b'x'; 1 << 20];
    let cap = h.f.config().max_line_bytes + h.f.config().read_chunk + 8192;
    let mut f = OpenOptions::new().append(true).open(&p).expect("open");
    for _ in 0..50 {
        f.write_all(&block).expect("write");
        h.poll();
        assert!(h.f.memory_bytes() <= cap, "memory {} > {cap}", h.f.memory_bytes());
    }
    assert!(h.flow().is_empty());
    f.write_all(b"\nok\n").expect("write");
    h.poll();
    assert_eq!(h.flow(), [It::L(vec![b'x'; 64 * 1024]), l("ok")]);
    assert_eq!(h.f.stats().long_lines, 1);
    let long: Vec<String> =
        h.notes().into_iter().filter(|n| n.contains("long line truncated")).collect();
    assert_eq!(long.len(), 1, "{long:?}");
    assert!(h.f.memory_bytes() <= cap);
}

/// Checklist 18: All bytes 0x00–0xFF, escape sequences, tabs and bare CRs: no panic, bytes pass
/// through (NUL skipped, text before a bare CR dropped). Escapes and tabs are the renderer's
/// business (it maps controls to `^X` and expands tabs); the follower keeps them.
#[test]
fn c18_every_byte_value_passes_through() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let mut content: Vec<u8> = (0u8..=255).collect();
    content.push(b'\n');
    content.extend_from_slice(b"\x1b[31mred\x1b[0m\tcol\t2\n10%\r50%\r100%\n\xff\xfe bad utf8\r\n");
    fs::write(&p, &content).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(
        h.flow(),
        [
            It::L((1u8..=9).collect()),
            It::L((14u8..=255).collect()),
            It::L(b"\x1b[31mred\x1b[0m\tcol\t2".to_vec()),
            l("100%"),
            It::L(b"\xff\xfe bad utf8".to_vec()),
        ]
    );
    assert_eq!(h.f.stats().junk_bytes, 1);
}

/// Checklist 19: Two appends 100 ms apart with the same mtime (set explicitly, as a file system with
/// one-second timestamps would show), polling only: both seen, because size is compared too.
#[test]
fn c19_two_appends_with_identical_mtime() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let stamp = std::time::SystemTime::UNIX_EPOCH + Duration::from_secs(1_700_000_000);
    let f = File::create(&p).expect("create");
    f.set_modified(stamp).expect("set mtime");
    let mut h = H::new(&p, cfg());
    let waker = Waker::null();
    h.poll();
    for s in ["first", "second"] {
        let mut f = OpenOptions::new().append(true).open(&p).expect("open");
        f.write_all(format!("{s}\n").as_bytes()).expect("write");
        f.set_modified(stamp).expect("set mtime");
        waker.wait(Duration::from_millis(100));
        h.poll();
    }
    assert_eq!(h.flow(), [l("first"), l("second")]);
}

// ---------------------------------------------------------------------------------------
// Further scenarios

/// A writer thread appends 3000 lines as one byte stream cut into random chunk sizes (1–300
/// bytes, seeded xorshift), splitting lines anywhere, while the reader polls with a tiny read
/// chunk: every complete line is seen exactly once, in order.
#[test]
fn random_chunks_every_line_once_in_order() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    File::create(&p).expect("create");
    let mut rng = XorShift(0x9E37_79B9_7F4A_7C15);
    let lines: Vec<String> = (0..3000)
        .map(|i| {
            let pad = rng.below(40) as usize;
            let cr = if rng.below(5) == 0 { "\r" } else { "" };
            format!("iter {i} res={:.3e} {}{cr}", 1.0 / (i + 1) as f64, "#".repeat(pad))
        })
        .collect();
    let stream = text_of(&lines);
    let want: Vec<It> = lines.iter().map(|s| l(s.trim_end_matches('\r'))).collect();
    let config = FollowConfig { read_chunk: 97, ..cfg() };
    let mut h = H::new(&p, config);
    let p2 = p.clone();
    let writer = thread::spawn(move || {
        let mut f = OpenOptions::new().append(true).open(&p2).expect("open");
        let mut rng = XorShift(42);
        let mut at = 0;
        while at < stream.len() {
            let n = (1 + rng.below(300) as usize).min(stream.len() - at);
            f.write_all(&stream[at..at + n]).expect("write");
            at += n;
            if rng.below(20) == 0 {
                thread::sleep(Duration::from_millis(1));
            }
        }
    });
    let start = Instant::now();
    while h.flow().len() < want.len() && start.elapsed() < Duration::from_secs(2) {
        h.poll();
        thread::sleep(Duration::from_micros(200));
    }
    writer.join().expect("writer");
    h.poll();
    assert_eq!(h.flow(), want);
}

/// Truncation while lines are pending: the partial line of the old content is dropped.
#[test]
fn truncation_drops_the_old_partial_line() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"done 1\nhalf a li").expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    fs::write(&p, b"re 1\n").expect("truncate and write");
    h.poll();
    assert_eq!(h.flow(), [l("done 1"), It::R(SegmentReason::Truncated), l("re 1")]);
}

/// Rename and recreate: the old file's unterminated last line is flushed when its grace
/// ends, before the restart.
#[test]
fn rename_and_recreate_flushes_the_old_partial_line() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"a 1\na 2 partial").expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    fs::rename(&p, dir.path().join("run.log.old")).expect("mv");
    fs::write(&p, b"b 1\n").expect("create");
    assert!(h.poll_until(Duration::from_secs(1), |h| matches!(
        h.f.status(),
        FollowStatus::Draining { .. }
    )));
    assert!(h.poll_until(Duration::from_secs(2), |h| h.has_line("b 1")));
    assert_eq!(h.flow(), [l("a 1"), l("a 2 partial"), It::R(SegmentReason::Replaced), l("b 1")]);
}

/// A restart glob gains a file: the current file is finished (its last lines and its
/// unterminated line), then `Restart(NewFile)` before the new file's lines.
#[test]
fn glob_gaining_a_file() {
    let dir = tempfile::tempdir().expect("temp dir");
    let one = dir.path().join("run.log.1");
    fs::write(&one, b"a 1\n").expect("write");
    let mut h = H::new(dir.path().join("run.log.*"), cfg());
    h.poll();
    assert_eq!(h.f.current_path(), Some(one.as_path()));
    append(&one, b"a 2\na 3 unterminated");
    let two = dir.path().join("run.log.2");
    fs::write(&two, b"b 1\n").expect("write");
    assert!(h.poll_until(Duration::from_secs(1), |h| h.has_line("b 1")));
    assert_eq!(
        h.flow(),
        [
            l("a 1"),
            l("a 2"),
            l("a 3 unterminated"),
            It::R(SegmentReason::NewFile { path: two.clone() }),
            l("b 1")
        ]
    );
    assert_eq!(h.f.current_path(), Some(two.as_path()));
    assert_eq!(h.f.stats().files, 2);
}

/// Existing restart files are read in natural order (`.2` before `.10`) in one poll when
/// their last writes are older than the rotation grace (a watch started on a run that
/// restarted before), and at once by a one-shot read whatever their age.
#[test]
fn glob_existing_files_in_natural_order() {
    let dir = tempfile::tempdir().expect("temp dir");
    let old = std::time::SystemTime::now() - Duration::from_secs(3600);
    for n in ["10", "2", "1"] {
        let p = dir.path().join(format!("run.log.{n}"));
        fs::write(&p, format!("from {n}\n")).expect("write");
        File::options().write(true).open(&p).expect("open").set_modified(old).expect("mtime");
    }
    fs::write(dir.path().join("other.log"), b"not me\n").expect("write");
    let mut h = H::new(dir.path().join("run.log.*"), cfg());
    h.poll();
    h.finish();
    let path = |n: &str| dir.path().join(format!("run.log.{n}"));
    let want = [
        l("from 1"),
        It::R(SegmentReason::NewFile { path: path("2") }),
        l("from 2"),
        It::R(SegmentReason::NewFile { path: path("10") }),
        l("from 10"),
    ];
    assert_eq!(h.flow(), want);
    // Freshly written files: a live poll waits for them to go quiet; a one-shot read does not.
    for n in ["10", "2", "1"] {
        fs::write(dir.path().join(format!("run.log.{n}")), format!("from {n}\n")).expect("write");
    }
    let mut h = H::new(dir.path().join("run.log.*"), cfg());
    h.poll();
    assert_eq!(h.flow(), [l("from 1")]);
    let mut h = H::new(dir.path().join("run.log.*"), cfg());
    let items = &mut h.items;
    h.f.read_to_end(&mut |it| items.push(own(it)));
    let path = |n: &str| dir.path().join(format!("run.log.{n}"));
    assert_eq!(
        h.flow(),
        [
            l("from 1"),
            It::R(SegmentReason::NewFile { path: path("2") }),
            l("from 2"),
            It::R(SegmentReason::NewFile { path: path("10") }),
            l("from 10"),
        ]
    );
}

/// Binary junk in the middle of a log: NUL runs skipped and noted once, other bytes passed
/// through, the lines around it intact.
#[test]
fn binary_junk_in_the_middle() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let mut content = b"before\n".to_vec();
    content.extend([0u8; 1000]);
    content.extend([0xff, 0xfe, 0x01]);
    content.extend([0u8; 10]);
    content.extend(b"\nafter\n");
    fs::write(&p, &content).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(h.flow(), [l("before"), It::L(vec![0xff, 0xfe, 0x01]), l("after")]);
    assert_eq!(h.f.stats().junk_bytes, 1010);
    let junk: Vec<String> = h.notes().into_iter().filter(|n| n.contains("NUL bytes")).collect();
    assert_eq!(junk.len(), 1, "{junk:?}");
}

/// A 10 MB line with a newline, then a normal line.
#[test]
fn ten_megabyte_line() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let mut content = vec![b'y'; 10_000_000];
    content.extend(b"\nnext\n");
    fs::write(&p, &content).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(h.flow(), [It::L(vec![b'y'; 64 * 1024]), l("next")]);
    assert_eq!(h.f.stats().long_lines, 1);
    assert_eq!(h.f.stats().bytes_read, 10_000_006);
}

/// A large read reports progress at the configured step, with the final position last.
#[test]
fn progress_during_a_large_read() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let lines: Vec<String> = (0..16384).map(|i| format!("{i:063}")).collect();
    fs::write(&p, text_of(&lines)).expect("write");
    let config = FollowConfig { read_chunk: 256 * 1024, progress_every: 300 * 1024, ..cfg() };
    let mut h = H::new(&p, config);
    h.poll();
    let progress: Vec<It> = h.items.iter().filter(|i| matches!(i, It::P(..))).cloned().collect();
    assert_eq!(progress, [It::P(512 * 1024, 1 << 20), It::P(1 << 20, 1 << 20)]);
    assert_eq!(h.f.stats().lines, 16384);
}

/// `finish` hands out the unterminated last line for one-shot reads.
#[test]
fn finish_emits_the_final_unterminated_line() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"a\nb").expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(h.flow(), [l("a")]);
    h.finish();
    assert_eq!(h.flow(), [l("a"), l("b")]);
    assert_eq!(h.lines(), ["a", "b"]);
}

/// A directory where the log should be: unreadable status with the reason, then followed
/// once a real file replaces it.
#[test]
fn a_directory_under_the_name_is_unreadable() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::create_dir(&p).expect("mkdir");
    let mut h = H::new(&p, cfg());
    h.poll();
    assert_eq!(
        h.f.status(),
        FollowStatus::Unreadable { path: p.clone(), error: String::from("not a regular file") }
    );
    h.poll();
    assert_eq!(h.notes().len(), 1, "{:?}", h.notes());
    fs::remove_dir(&p).expect("rmdir");
    fs::write(&p, b"ok\n").expect("write");
    h.poll();
    assert_eq!(h.flow(), [l("ok")]);
}

/// Real events: a write in a watched directory wakes `wait` well before its timeout.
#[test]
fn waker_wakes_on_a_write() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    fs::write(&p, b"").expect("write");
    let mut waker = Waker::new();
    waker.watch(dir.path());
    assert!(waker.events_active(), "{:?}", waker.take_notes());
    let p2 = p.clone();
    let writer = thread::spawn(move || {
        thread::sleep(Duration::from_millis(50));
        append(&p2, b"x\n");
    });
    let t = Instant::now();
    assert_eq!(waker.wait(Duration::from_secs(2)), Wake::Event);
    assert!(t.elapsed() < Duration::from_secs(1));
    writer.join().expect("writer");
    assert!(!waker.take_names_dirty(), "a data write is not a name change");
    fs::write(dir.path().join("run.log.2"), b"").expect("create");
    assert_eq!(waker.wait(Duration::from_secs(2)), Wake::Event);
    assert!(waker.take_names_dirty());
}

/// A one-shot read of many restart files (more than one name check queues): all of them,
/// in natural order, with a restart before each later file and the final unterminated line
/// flushed.
#[test]
fn read_to_end_over_many_restart_files() {
    let dir = tempfile::tempdir().expect("temp dir");
    for n in 1..=200 {
        fs::write(dir.path().join(format!("run.log.{n}")), format!("part {n}\nend {n}"))
            .expect("write");
    }
    let mut h = H::new(dir.path().join("run.log.*"), cfg());
    let items = &mut h.items;
    let total = h.f.read_to_end(&mut |it| items.push(own(it)));
    let mut want = Vec::new();
    for n in 1..=200 {
        if n > 1 {
            let path = dir.path().join(format!("run.log.{n}"));
            want.push(It::R(SegmentReason::NewFile { path }));
        }
        want.push(l(&format!("part {n}")));
        want.push(l(&format!("end {n}")));
    }
    assert_eq!(h.flow(), want);
    assert_eq!(total.lines, 400);
    assert_eq!(h.f.stats().files, 200);
}

// ---------------------------------------------------------------------------------------
// Rotation harnesses: files rotated or re-created faster than the old one is drained
// (`tail -F` follows every one of these by name; the follower must lose and double nothing).
// Times are scaled to a 1 s rotation grace (10 s by default): "3 rotations within 3 s"
// becomes 3 within 0.3 s, "6 s apart" becomes 0.6 s apart.

/// How the writer moves to a new file.
#[derive(Clone, Copy, PartialEq)]
enum Rotation {
    /// `mv log log.N`, then a new `log` (the writer reopens it).
    Rename,
    /// `rm log`, then a new `log` at once.
    Delete,
}

/// What a harness counted.
#[derive(Debug)]
struct Tally {
    written: usize,
    lost: usize,
    doubled: usize,
    out_of_order: usize,
    notes: Vec<String>,
}

/// A writer puts `per_file` numbered lines into `log` over about `file_time`, then rotates,
/// `files` times in all; a follower polls meanwhile (name checks every 50 ms, as directory
/// events bring them forward in `watch`). Returns what was lost, doubled or out of order.
fn rotation_harness(files: usize, per_file: usize, file_time: Duration, how: Rotation) -> Tally {
    let dir = tempfile::tempdir().expect("temp dir");
    let log = dir.path().join("run.log");
    File::create(&log).expect("create");
    let config = FollowConfig { rotated_grace: Duration::from_secs(1), ..cfg() };
    let mut h = H::new(&log, config);
    h.poll();
    let done = Arc::new(AtomicBool::new(false));
    let (flag, path) = (done.clone(), log.clone());
    let writer = thread::spawn(move || {
        let bursts = 10;
        for f in 0..files {
            let mut w = OpenOptions::new().create(true).append(true).open(&path).expect("open");
            for b in 0..bursts {
                let mut text = String::new();
                for i in b * per_file / bursts..(b + 1) * per_file / bursts {
                    text.push_str(&format!("f{f} {i}\n"));
                }
                w.write_all(text.as_bytes()).expect("write");
                thread::sleep(file_time / bursts as u32);
            }
            drop(w);
            if f + 1 < files {
                match how {
                    Rotation::Rename => {
                        fs::rename(&path, path.with_extension(format!("log.{}", f + 1)))
                            .expect("mv")
                    }
                    Rotation::Delete => fs::remove_file(&path).expect("rm"),
                }
            }
        }
        flag.store(true, Ordering::SeqCst);
    });
    let want: Vec<String> =
        (0..files).flat_map(|f| (0..per_file).map(move |i| format!("f{f} {i}"))).collect();
    let start = Instant::now();
    while start.elapsed() < Duration::from_secs(20) {
        h.poll();
        if done.load(Ordering::SeqCst) && h.lines().len() >= want.len() {
            break;
        }
        thread::sleep(Duration::from_millis(20));
    }
    writer.join().expect("writer");
    // A little longer, in case anything is still to come (it must not: nothing doubles).
    for _ in 0..5 {
        h.poll();
        thread::sleep(Duration::from_millis(20));
    }
    tally(&want, &h.lines(), h.notes())
}

fn tally(want: &[String], got: &[String], notes: Vec<String>) -> Tally {
    use std::collections::HashMap;
    let mut seen: HashMap<&str, usize> = HashMap::new();
    for g in got {
        *seen.entry(g.as_str()).or_default() += 1;
    }
    let lost = want.iter().filter(|w| !seen.contains_key(w.as_str())).count();
    let doubled = seen.values().map(|&n| n.saturating_sub(1)).sum();
    let rank: HashMap<&str, usize> =
        want.iter().enumerate().map(|(i, w)| (w.as_str(), i)).collect();
    let order: Vec<usize> = got.iter().filter_map(|g| rank.get(g.as_str()).copied()).collect();
    let out_of_order = order.windows(2).filter(|w| w[1] < w[0]).count();
    Tally { written: want.len(), lost, doubled, out_of_order, notes }
}

fn assert_clean(name: &str, t: &Tally) {
    eprintln!(
        "{name}: {} lines written, {} lost, {} doubled, {} out of order",
        t.written, t.lost, t.doubled, t.out_of_order
    );
    assert!(
        t.lost == 0 && t.doubled == 0 && t.out_of_order == 0,
        "{name}: {t:?}; notes:\n{}",
        t.notes.join("\n")
    );
}

/// Three rotations within 0.3 s (the issue's "3 within 3 s" at a tenth of the grace).
#[test]
fn rotations_faster_than_the_grace_lose_nothing() {
    let t = rotation_harness(4, 2000, Duration::from_millis(100), Rotation::Rename);
    assert_clean("3 rotations within 0.3 s", &t);
}

/// Rotations 0.6 s apart (the issue's "6 s apart" with a 10 s grace).
#[test]
fn rotations_inside_the_grace_lose_nothing() {
    let t = rotation_harness(4, 800, Duration::from_millis(600), Rotation::Rename);
    assert_clean("rotations 0.6 s apart", &t);
}

/// Delete and re-create with no gap, eight times.
#[test]
fn delete_and_recreate_without_a_gap_loses_nothing() {
    let t = rotation_harness(8, 1000, Duration::from_millis(150), Rotation::Delete);
    assert_clean("delete and re-create, no gap", &t);
}

/// A restart glob: `run.log.2` appears (with its first lines) while `run.log.1` is still
/// being finished; 100 lines are appended to `run.log.1` 160 ms later (several name checks
/// after `run.log.2` was seen, within the rotation quiet time). All of them are read,
/// before the restart into `run.log.2`.
#[test]
fn glob_lines_appended_after_the_next_file_appeared_are_kept() {
    let dir = tempfile::tempdir().expect("temp dir");
    let one = dir.path().join("run.log.1");
    let two = dir.path().join("run.log.2");
    let first: Vec<String> = numbered("one", 0..100);
    fs::write(&one, text_of(&first)).expect("write");
    let config = FollowConfig {
        rotated_grace: Duration::from_secs(1),
        rotated_quiet: Duration::from_millis(500),
        ..cfg()
    };
    let mut h = H::new(dir.path().join("run.log.*"), config);
    h.poll();
    fs::write(&two, text_of(&numbered("two", 0..50))).expect("write");
    // Several name checks see `run.log.2` before the late lines come.
    for _ in 0..8 {
        h.poll();
        thread::sleep(Duration::from_millis(20));
    }
    append(&one, &text_of(&numbered("one", 100..200)));
    assert!(h.poll_until(Duration::from_secs(3), |h| h.has_line("two 49")));
    append(&two, &text_of(&numbered("two", 50..100)));
    assert!(h.poll_until(Duration::from_secs(3), |h| h.has_line("two 99")));
    let mut want: Vec<It> = numbered("one", 0..200).iter().map(|s| l(s)).collect();
    want.push(It::R(SegmentReason::NewFile { path: two.clone() }));
    want.extend(numbered("two", 0..100).iter().map(|s| l(s)));
    let t =
        tally(&[numbered("one", 0..200), numbered("two", 0..100)].concat(), &h.lines(), h.notes());
    assert_clean("glob, lines appended after the next file appeared", &t);
    assert!(h.flow() == want, "the restart must come after every line of run.log.1");
}

/// Lines written to a rotated file after the follower moved on (both writers active, the
/// old one after a pause longer than the quiet time) cannot be placed in order any more:
/// they are not read, and a note says so with a line estimate.
#[test]
fn late_lines_in_a_left_file_are_noted_with_an_estimate() {
    let dir = tempfile::tempdir().expect("temp dir");
    let p = dir.path().join("run.log");
    let mut old = OpenOptions::new().create(true).append(true).open(&p).expect("open");
    old.write_all(&text_of(&numbered("old", 0..10))).expect("write");
    let mut h = H::new(&p, cfg());
    h.poll();
    fs::rename(&p, dir.path().join("run.log.1")).expect("mv");
    fs::write(&p, text_of(&numbered("new", 0..5))).expect("new file");
    assert!(h.poll_until(Duration::from_secs(2), |h| h.has_line("new 4")));
    // The old writer wakes up: 20 lines of 7 bytes (140 bytes; the estimate uses the 6
    // bytes per line read so far: 24 lines).
    old.write_all(&text_of(&numbered("old", 10..30))).expect("write");
    assert!(h.poll_until(Duration::from_secs(2), |h| {
        h.notes().iter().any(|n| n.contains("after settle had moved on"))
    }));
    let note = h.notes().into_iter().find(|n| n.contains("after settle had moved on")).unwrap();
    assert!(
        note.starts_with(&format!("the previous file named {} grew by 140 bytes", p.display())),
        "{note}"
    );
    assert!(note.contains("(about 24 lines) after settle had moved on to the new one"), "{note}");
    assert!(note.contains("those lines are not read"), "{note}");
    let mut want: Vec<It> = numbered("old", 0..10).iter().map(|s| l(s)).collect();
    want.push(It::R(SegmentReason::Replaced));
    want.extend(numbered("new", 0..5).iter().map(|s| l(s)));
    assert_eq!(h.flow(), want);
}
