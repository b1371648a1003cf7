//! How reading a file that is still being written treats its last line, a file rewritten in
//! place, and the record a `lines` log holds open. Regressions of the reliability issue
//! (items 5, 6 and "in watch, the last record of a lines log is never emitted"); invented
//! demo logs.

use std::fs::{File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::{Duration, SystemTime};

use settle::follow::FollowConfig;
use settle::parser::Registry;
use settle::run::SourceStore;
use settle::run::config::{RunSpec, SourceSpec};
use settle::run::ingest::{self, IngestItem, SourceActivity};
use settle::run::pipeline::{self, PartialLine, SourceReader};

fn spec(path: &Path, parser: &str) -> SourceSpec {
    SourceSpec { label: path.display().to_string(), path: path.into(), parser: Some(parser.into()) }
}

fn run_spec(path: &Path, parser: &str) -> RunSpec {
    settle::run::config::from_files(&[path.to_path_buf()], Some(parser))
}

/// A tarn log of `steps` steps (invented demo values).
fn tarn_log(steps: usize) -> String {
    let mut s = String::from("tarn 3.2.0 - incompressible RANS solver (k-omega SST)\n");
    for i in 1..=steps {
        s += &format!("[step {i:>6}]  cfl 5.00e-01\n");
        s += &format!("  p        res {:.4e}   lin  18 sweeps\n", 1.0 / i as f64);
        s += "  wall 0.45 s\n";
    }
    s
}

fn set_mtime(path: &Path, ago: Duration) {
    let f = File::options().write(true).open(path).expect("open");
    f.set_modified(SystemTime::now() - ago).expect("set mtime");
}

#[test]
fn a_half_written_last_line_is_left_out_of_one_shot_reads_and_said() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("history.dat");
    // The writer is in the middle of the last number: `0.3` will be `0.312`.
    std::fs::write(&path, "it res_p Cd\n1 1.0e-02 0.30\n2 5.0e-03 0.31\n3 1.2159e-05 0.3")
        .expect("write");
    let reg = Arc::new(Registry::builtin());
    let (run, _) = pipeline::read_run(&run_spec(&path, "table"), reg.clone()).expect("read");
    let src = &run.sources[0];
    assert_eq!(src.iterations(), &[1, 2], "the unfinished row is not data");
    assert_eq!(src.series_by_name("res_p").map(|s| s.values().to_vec()), Some(vec![1e-2, 5e-3]));
    let note = src.notes.iter().find(|n| n.contains("partial last line")).expect("a note");
    assert!(note.contains("16 bytes"), "{note}");
    // Only the files it was asked to read: nothing is written anywhere.
    assert_eq!(std::fs::read_dir(dir.path()).expect("list").count(), 1);

    // Asked for, or once the file has been quiet, the last line is read.
    let (run, _) =
        pipeline::read_run_with(&run_spec(&path, "table"), reg.clone(), PartialLine::Include)
            .expect("read");
    assert_eq!(run.sources[0].iterations(), &[1, 2, 3]);
    assert_eq!(run.sources[0].series_by_name("Cd").and_then(|s| s.last()), Some(0.3));
    set_mtime(&path, Duration::from_secs(5));
    let (run, _) = pipeline::read_run(&run_spec(&path, "table"), reg).expect("read");
    assert_eq!(run.sources[0].iterations(), &[1, 2, 3]);
    assert!(run.sources[0].notes.is_empty());
}

/// Apply a live read to `store`.
fn poll(reader: &mut SourceReader, store: &mut SourceStore, act: &mut SourceActivity) {
    let items = reader.read(false).expect("read");
    ingest::apply(store, act, items);
}

fn rewrite(path: &PathBuf, text: &str, cut: usize) -> File {
    // In place: same inode, truncated, then written in two pieces (the reader may look in
    // between, as it does when a writer is caught mid-write).
    let mut f = OpenOptions::new().write(true).truncate(true).open(path).expect("open");
    f.write_all(&text.as_bytes()[..cut]).expect("write");
    f.flush().expect("flush");
    f
}

#[test]
fn a_file_rewritten_in_place_replaces_its_records_and_memory_stays_flat() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("forces.csv");
    let csv = |rows: usize| {
        let mut s = String::from("step,drag,lift\n");
        for i in 1..=rows {
            s += &format!("{i},{:.5},{:.5}\n", 0.4 + 1.0 / i as f64, 0.02);
        }
        s
    };
    std::fs::write(&path, csv(200)).expect("write");
    let reg = Arc::new(Registry::builtin());
    let cfg = FollowConfig { name_check_interval: Duration::ZERO, ..FollowConfig::default() };
    let mut reader = SourceReader::new(&spec(&path, "csv"), reg, cfg).expect("reader");
    let mut store = SourceStore::new("forces.csv", "csv");
    let mut act = SourceActivity::default();
    poll(&mut reader, &mut store, &mut act);
    assert_eq!(store.records(), 200);
    let mut held = Vec::new();
    for k in 1..=40 {
        // The writer rewrites the whole history with one more row; the reader looks while
        // only part of it is there, then again when it is complete.
        let text = csv(200 + k);
        let mut f = rewrite(&path, &text, text.len() / 3 + 7 * k);
        poll(&mut reader, &mut store, &mut act);
        f.write_all(&text.as_bytes()[text.len() / 3 + 7 * k..]).expect("write");
        drop(f);
        poll(&mut reader, &mut store, &mut act);
        assert_eq!(store.records(), 200 + k, "rewrite {k}");
        assert_eq!(store.segments.len(), 1, "a rewrite is not a restart of the run");
        held.push(store.heap_bytes());
    }
    let drag = store.series_by_name("drag").expect("drag");
    assert_eq!(drag.len(), 240);
    assert_eq!(store.iterations().last(), Some(&240));
    assert_eq!(store.stats.lines, 241, "lines of the file as it is now");
    // Memory follows the data (one row per rewrite), not the number of rewrites: the last
    // rewrites hold no more than the data plus the vectors' growth room.
    let per_row = 8 * 3;
    assert!(held[39] <= 2 * 240 * per_row + 4096, "{} bytes held", held[39]);
    assert!(held[39] <= held[9] * 2, "{held:?}");

    // A rewrite that changes history replaces the records from the first difference on.
    let mut changed = csv(240);
    changed = changed.replace("\n100,", "\n100,9.99999,0.0\n101,");
    std::fs::write(&path, &changed).expect("write");
    poll(&mut reader, &mut store, &mut act);
    assert_eq!(store.records(), 241);
    let drag = store.series_by_name("drag").expect("drag");
    assert_eq!(drag.values()[99], 9.99999);
    assert_eq!(store.segments.len(), 2, "iteration 101 printed twice: a restart inside the file");
}

#[test]
fn a_quiet_lines_log_shows_its_last_record() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("tarn.log");
    std::fs::write(&path, tarn_log(340)).expect("write");
    let reg = Arc::new(Registry::builtin());
    let mut reader =
        SourceReader::new(&spec(&path, "tarn"), reg, FollowConfig::default()).expect("reader");
    reader.set_open_quiet(Duration::from_millis(50));
    let mut store = SourceStore::new("tarn.log", "tarn");
    let mut act = SourceActivity::default();
    poll(&mut reader, &mut store, &mut act);
    // Step 340 is still open: the parser closes a record at the next step line.
    assert_eq!(store.last_iteration(), Some(339));
    std::thread::sleep(Duration::from_millis(80));
    let items = reader.read(false).expect("read");
    assert!(items.iter().any(|i| matches!(i, IngestItem::Open(_))));
    ingest::apply(&mut store, &mut act, items);
    assert_eq!(store.last_iteration(), Some(340), "the quiet log shows its last step");
    assert_eq!(store.records(), 340);
    assert_eq!(store.closed_records(), 339);
    let p = store.series_by_name("p").expect("p");
    assert_eq!(p.len(), 340);
    assert_eq!(p.last(), Some(2.9412e-3), "1/340 as printed");

    // The writer goes on: the provisional record is replaced by the real one, nothing twice.
    let mut f = OpenOptions::new().append(true).open(&path).expect("open");
    f.write_all(b"  k        res 2.0000e-03   lin   2 sweeps\n[step    341]  cfl 5.00e-01\n")
        .expect("write");
    drop(f);
    poll(&mut reader, &mut store, &mut act);
    assert_eq!(store.records(), 340, "step 341 is open, 340 closed");
    assert_eq!(store.closed_records(), 340);
    assert_eq!(store.series_by_name("k").map(|k| k.values().to_vec()), Some(vec![2e-3]));
    assert_eq!(store.segments.len(), 1);
    std::thread::sleep(Duration::from_millis(80));
    poll(&mut reader, &mut store, &mut act);
    assert_eq!(store.last_iteration(), Some(341));
    assert_eq!(store.series_by_name("p").map(|p| p.len()), Some(340));
}
