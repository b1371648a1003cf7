//! Reading a file in parts on several cores gives exactly the serial result.
//!
//! A large first read is cut into blocks at line boundaries; each block after the first is
//! parsed by a speculative parser and handed over with `Parser::join` (`src/run/bulk.rs`).
//! These tests cut hand-written logs of invented formats at every line boundary (and at
//! every pair of boundaries), join the parts, and compare everything the store then holds
//! with a serial read: series, roles, values, iterations, times, segments, events, skip
//! reasons, line counts and the end mark. The logs put the awkward cases at the cuts: values
//! printed before their step line (`attach = "next"`), banner lines that look like steps
//! before the `start_after` marker, a second run appended after an end mark, anchors with
//! `first`/`last` policies, `first` events, unparsable numbers, a table whose header is
//! printed again and changes width, and vectors. Finally a file larger than two blocks goes
//! through the real pipeline with small read chunks, so reads end inside lines.

use std::path::Path;
use std::sync::Arc;

use settle::follow::FollowConfig;
use settle::parser::{Definition, Origin, Parser, Registry};
use settle::record::{Batch, LineStats};
use settle::run::SourceStore;
use settle::run::config::SourceSpec;
use settle::run::ingest::SourceActivity;
use settle::run::pipeline::SourceReader;

/// Everything observable in a store, as comparable text.
fn summary(s: &SourceStore) -> String {
    let mut o = format!("records {:?}\ntimes {:?}\n", s.iterations(), s.times());
    for x in s.series() {
        o += &format!(
            "{} {:?} {:?} {:?}\n",
            x.name,
            x.role,
            x.values().iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
            s.series_iterations(x)
        );
    }
    o += &format!("segments {:?}\nevents {:?}\n", s.segments, s.events);
    o += &format!("skips {:?}\nstats {:?}\nended {:?}\n", s.skips, s.stats, s.ended);
    o
}

fn lines_of(text: &str) -> Vec<&str> {
    text.lines().collect()
}

fn block(lines: &[&str]) -> Vec<u8> {
    let mut b = Vec::new();
    for l in lines {
        b.extend_from_slice(l.as_bytes());
        b.push(b'\n');
    }
    b
}

fn serial(def: &Definition, lines: &[&str]) -> String {
    let mut store = SourceStore::new("log", "x");
    let mut p = def.parser();
    p.feed_block(&block(lines), &mut store);
    p.finish(&mut store);
    store.set_stats(p.stats());
    summary(&store)
}

/// Read `lines` cut at `cuts` (increasing line indices): the first part serially, every
/// later part by a speculative parser made after the first part, joined in order. With
/// `columns`, the parts' batches are handed over by series (as the parallel reader does),
/// else item by item. Also returns how many parts were handed over by their worker.
fn in_parts(
    def: &Definition,
    lines: &[&str],
    cuts: &[usize],
    columns: bool,
) -> (String, LineStats, usize) {
    let mut store = SourceStore::new("log", "x");
    let mut p = def.parser();
    let mut bounds = vec![0];
    bounds.extend_from_slice(cuts);
    bounds.push(lines.len());
    p.feed_block(&block(&lines[..bounds[1]]), &mut store);
    let template: Parser = p.speculative();
    let mut handed = 0;
    for w in bounds.windows(2).skip(1) {
        let part = block(&lines[w[0]..w[1]]);
        let mut worker = template.clone();
        let mut batch = Batch::new();
        worker.feed_block(&part, &mut batch);
        if columns {
            batch.build_columns();
        }
        handed += usize::from(p.join(&part, worker, &batch, &mut store));
    }
    p.finish(&mut store);
    let stats = p.stats();
    store.set_stats(stats);
    (summary(&store), stats, handed)
}

/// Cut `text` everywhere; returns how many single cuts were handed over by the worker
/// (the rest were read again in order, which is always exact but not parallel).
fn check_every_cut(def: &Definition, text: &str) -> usize {
    let lines = lines_of(text);
    let want = serial(def, &lines);
    let mut handed = 0;
    for k in 0..=lines.len() {
        let (got, stats, h) = in_parts(def, &lines, &[k], true);
        assert_eq!(got, want, "{}: cut before line {}", def.name(), k + 1);
        assert_eq!(stats.lines, lines.len() as u64);
        handed += h;
    }
    // Three parts: a worker hands over to a worker.
    for a in 0..=lines.len() {
        for b in a..=lines.len() {
            let (got, _, _) = in_parts(def, &lines, &[a, b], (a + b) % 2 == 0);
            assert_eq!(got, want, "{}: cuts before lines {} and {}", def.name(), a + 1, b + 1);
        }
    }
    handed
}

fn fixture(name: &str) -> Definition {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/parsers/valid").join(name);
    Definition::from_file(&path).unwrap_or_else(|e| panic!("{e}"))
}

fn inline(text: &str) -> Definition {
    Definition::from_text(text, Origin::Builtin, "inline", "inline").expect("valid definition")
}

#[test]
fn values_before_their_step_line_and_a_second_run_after_an_end_mark() {
    // `courant` belongs to the next record (attach = next); `clock : 19:04:44` in the banner
    // looks like a step line but comes before the start marker; a second run follows the
    // end mark with its own banner.
    let log = "clock : 19:04:44\n---- start ----\ncourant 0.5\nclock : 0.1\nresid 1.0e-02\n\
               courant 0.6\nclock : 0.2\nresid 5.0e-03\nresid oops\ncourant 0.7\nclock : 0.3\n\
               resid 2.5e-03\nrun complete: converged\nclock : 20:00:01\ncourant 9.9\n\
               ---- start ----\ncourant 0.4\nclock : 0.1\nresid 1.0e-01\ncourant 0.45\n\
               clock : 0.2\nresid 9.0e-02\n";
    let handed = check_every_cut(&fixture("before_step.toml"), log);
    // A lines part is handed over when its reader closes a record (at its second step line
    // or an end mark) and the preceding parts had passed the start marker: 13 of the 23.
    assert!(handed >= 13, "{handed} of 23 cuts handed over");
}

#[test]
fn anchors_repeat_policies_and_first_events_across_the_cut() {
    let log = "banner\nstep 1\nforces:\n  total (1.0 2.0 3.0)\nmoments:\n  total (0.1 0.2 0.3)\n\
               k bounded\nk bounded again\nstep 2\n  total (9 9 9)\nforces:\n  total (1.1 2.1 3.1)\n\
               moments:\n  total (0.4 0.5 x)\n  total (0.11 0.21 0.31)\nstep 3\nforces:\n\
               k bounded\n  total (1.2 2.2 3.2)\n  total (5 5 5)\nmoments:\n  total (0.12 0.22 nan)\n";
    let handed = check_every_cut(&fixture("vectors_and_anchors.toml"), log);
    // Cuts before lines 1 to 9 leave two step lines (9 and 16) to the second part.
    assert!(handed >= 9, "{handed} of 23 cuts handed over");
}

#[test]
fn captured_names_repeat_all_and_records_without_values() {
    let def = inline(
        "engine = \"lines\"\n\
         [[rules]]\nkind = \"step\"\npattern = '^it (?P<iteration>\\S+)'\n\
         [[rules]]\nkind = \"value\"\npattern = '^\\s+(?P<name>\\w+) (?P<value>\\S+)'\nrepeat = \"all\"\n\
         [[rules]]\nkind = \"value\"\npattern = '^dt (?P<value>\\S+)'\nseries = \"dt\"\nattach = \"next\"\nrepeat = \"min\"\n\
         [[rules]]\nkind = \"event\"\nname = \"w\"\npattern = '^warning: (?P<message>.*)'\n",
    );
    let log = "  p 1\nit 1\n  p 0.5\n  p 0.4\n  U 1e-3\ndt 0.1\ndt 0.05\nit 2\nit x\n  k 2\n\
               warning: slow\nit 4\ndt 0.2\n  p 0.3\n  new 7\nit 3\n  p inf\n  U -nan\n";
    let handed = check_every_cut(&def, log);
    assert!(handed >= 12, "{handed} of 19 cuts handed over");
}

#[test]
fn tables_with_reprinted_and_changing_headers_and_vectors() {
    let reg = Registry::builtin();
    let table = reg.get("table").expect("shipped");
    let log = "# history\nit res_p U Cd\n1 1.0 (1 2 3) 0.3\n2 0.5 (1 2 3) 0.31\nwarn: low mem\n\
               it res_p U Cd\n3 0.25 (1 2 3) 0.32\n4 x (1 2) 0.33\nit res_p U Cd extra\n\
               5 0.1 (1 2 3) 0.34 9\n6 0.05 (1 2 3 4) 0.35 8\n7 0.02 (1 2 3) 0.36\n";
    // A part whose header state differs from the one assumed is read again in order.
    let handed = check_every_cut(table, log);
    assert!(handed >= 13, "{handed} of 14 cuts handed over");
    let csv = reg.get("csv").expect("shipped");
    let log = "iteration,res_p,Cd\n1,1.0e-1,0.3\n2,5.0e-2,0.31\n3,,0.32\n4,2.5e-2,0.33,\n\
               iteration,res_p,Cd\n5,1.2e-2,x\n6,6.0e-3,0.35\n";
    let handed = check_every_cut(csv, log);
    assert_eq!(handed, 9, "every cut of the CSV is handed over");
}

#[test]
fn the_shipped_tarn_definition_on_a_synthetic_run() {
    let run = settle::synth::generate(settle::synth::Scenario::Restart, 3);
    let mut text = Vec::new();
    settle::synth::write_tarn_log(&run, &mut text).expect("write to memory");
    let text = String::from_utf8(text).expect("utf-8");
    // Cut at every line of a window around the restart and at a few places elsewhere.
    let lines = lines_of(&text);
    let reg = Registry::builtin();
    let tarn = reg.get("tarn").expect("shipped");
    let want = serial(tarn, &lines);
    let restart = lines.iter().position(|l| l.starts_with("restarting")).expect("a restart");
    let step = lines.len() / 10;
    let mut handed = 0;
    let cuts: Vec<usize> = (restart - 12..restart + 12).chain((1..10).map(|i| i * step)).collect();
    for &k in &cuts {
        let (got, _, h) = in_parts(tarn, &lines, &[k], k % 2 == 0);
        assert_eq!(got, want, "cut before line {}", k + 1);
        handed += h;
    }
    assert_eq!(handed, cuts.len(), "every cut of a tarn log is handed over");
}

#[test]
fn a_large_file_through_the_pipeline_equals_the_serial_read() {
    // Over two blocks of 1 MiB, read in 7 KiB chunks so that reads end inside lines (a step
    // line straddles a read boundary again and again); the pool joins the blocks.
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("run.log");
    let mut text = String::from("tarn 3.2.0 - incompressible RANS solver (k-omega SST)\n");
    let (mut step, mut n) = (0i64, 0u32);
    while text.len() < (5 << 20) / 2 {
        n += 1;
        step += 1;
        if n % 4000 == 0 {
            // A restart from a checkpoint: the iteration goes back.
            step -= 60;
            text += &format!("restarting from checkpoint at step {step}\n");
        }
        text += &format!("[step {step:>6}]  cfl 5.00e-01\n");
        for eq in ["Ux", "Uy", "Uz", "p", "k", "omega"] {
            text += &format!("  {eq:<8} res {:.4e}   lin   3 sweeps\n", 1.0 / f64::from(n));
        }
        text += &format!("  continuity  imbalance {:.4e}\n", 1e-6 / f64::from(n));
        if n % 100 == 0 {
            text += "  notice: k bounded below at 3 cells\n";
        }
        text += "  wall 0.45 s\n";
    }
    std::fs::write(&path, &text).expect("write log");
    let reg = Registry::builtin();
    let tarn = reg.get("tarn").expect("shipped");
    let want = serial(tarn, &lines_of(&text));

    let spec = SourceSpec { label: "log".into(), path, parser: Some("tarn".into()) };
    let cfg = FollowConfig { read_chunk: 7 * 1024, ..FollowConfig::default() };
    for workers in [1, 2, 3] {
        let mut reader =
            SourceReader::new(&spec, Arc::new(reg.clone()), cfg.clone()).expect("reader");
        reader.set_workers(workers);
        let mut store = SourceStore::new("log", "x");
        reader.read_into(&mut store, &mut SourceActivity::default()).expect("read");
        assert_eq!(summary(&store), want, "{workers} threads");
        if workers > 1 {
            assert!(reader.parallel_blocks() >= 1, "blocks after the first read in parallel");
        } else {
            assert_eq!(reader.parallel_blocks(), 0);
        }
    }
}
