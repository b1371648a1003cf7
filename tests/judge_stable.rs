//! The verdict and its `since` are a function of the data only (issue 12, class 7): a run
//! judged from a store that grew line by line, as `watch` grows it, gets exactly the
//! judgement of the same lines read at once; and a monitor printed in the log and in its
//! monitor file is judged once, so the criteria do not change in number as the run grows.
//!
//! The runs are synthetic runs of our invented solver *tarn* (`settle::synth`), written as
//! the log and `forces.csv` it prints and read through the shipped `tarn` and `csv`
//! definitions.

use settle::judge::{Criteria, Judgement, judge};
use settle::parser::Registry;
use settle::record::Output;
use settle::run::{RunStore, SourceStore};
use settle::synth::{self, Options, Scenario, SynthRun};

/// The log and the monitor file of `run`, as lines.
fn files(run: &SynthRun) -> (Vec<String>, Vec<String>) {
    let mut log = Vec::new();
    synth::write_tarn_log(run, &mut log).expect("write to memory");
    let mut csv = Vec::new();
    synth::write_forces_csv(run, &mut csv).expect("write to memory");
    let lines = |b: Vec<u8>| -> Vec<String> {
        String::from_utf8(b).expect("utf-8").lines().map(str::to_string).collect()
    };
    (lines(log), lines(csv))
}

/// The iteration a `forces.csv` data row is for (`None` for comment and header lines).
fn csv_iteration(line: &str) -> Option<i64> {
    line.split(',').next()?.trim().parse().ok()
}

/// Parse `lines` with the definition `parser` into a fresh source, at once.
fn read_at_once(registry: &Registry, parser: &str, label: &str, lines: &[String]) -> SourceStore {
    let mut p = registry.get(parser).expect("shipped definition").parser();
    let mut out: Vec<Output> = Vec::new();
    for l in lines {
        p.feed(l.as_bytes(), &mut out);
    }
    let mut src = SourceStore::new(label, parser);
    src.apply(out);
    src
}

fn judged(sources: Vec<SourceStore>) -> Judgement {
    let mut store = RunStore::new("r");
    store.sources = sources;
    judge(&store.judge_input(), &Criteria::default())
}

#[test]
fn grown_line_by_line_or_read_at_once_the_judgement_is_the_same() {
    let registry = Registry::builtin();
    let cases = [
        (Scenario::Converging, 11, 600),
        (Scenario::RingDown, 4, 700),
        (Scenario::Stall, 2, 1000),
        (Scenario::SilentDivergence, 7, 1200),
    ];
    for (scenario, seed, iterations) in cases {
        let run = synth::generate_with(
            scenario,
            seed,
            &Options { iterations: Some(iterations), case: None },
        );
        let (log, csv) = files(&run);
        let tarn = registry.get("tarn").expect("tarn definition");
        let table = registry.get("csv").expect("csv definition");
        let (mut lp, mut cp) = (tarn.parser(), table.parser());
        let mut grown_log = SourceStore::new("tarn.log", "tarn");
        let mut grown_csv = SourceStore::new("forces.csv", "csv");
        let mut csv_fed = 0usize;
        let mut checkpoints = 0;
        // About a dozen judgements along the run (each one also re-reads the prefix at once).
        let stride = log.len() / 12;
        let mut criteria_count: Option<usize> = None;
        for (i, line) in log.iter().enumerate() {
            let mut out = Vec::new();
            lp.feed(line.as_bytes(), &mut out);
            grown_log.apply(out);
            // The monitor file keeps pace with the log: its rows up to the log's last step.
            let upto = grown_log.last_iteration().unwrap_or(i64::MIN);
            while csv_fed < csv.len() && csv_iteration(&csv[csv_fed]).is_none_or(|it| it <= upto) {
                let mut out = Vec::new();
                cp.feed(csv[csv_fed].as_bytes(), &mut out);
                grown_csv.apply(out);
                csv_fed += 1;
            }
            if i % stride != stride / 2 {
                continue;
            }
            checkpoints += 1;
            let grown = judged(vec![grown_log.clone(), grown_csv.clone()]);
            let at_once = judged(vec![
                read_at_once(&registry, "tarn", "tarn.log", &log[..=i]),
                read_at_once(&registry, "csv", "forces.csv", &csv[..csv_fed]),
            ]);
            // Compared as printed: a criterion not computed yet is NaN on both sides, and
            // NaN is not equal to itself.
            assert_eq!(
                format!("{grown:?}"),
                format!("{at_once:?}"),
                "{scenario} seed {seed}: grown vs at once at line {i}"
            );
            // Judged once: the log alone gives the same criteria (the file's drag, lift and
            // dp duplicate the log's), and their number does not change as the run grows.
            let log_only = judged(vec![grown_log.clone()]);
            let names = |j: &Judgement| {
                j.criteria.iter().map(|c| format!("{} {}", c.series, c.name)).collect::<Vec<_>>()
            };
            assert_eq!(names(&grown), names(&log_only), "{scenario} seed {seed} at line {i}");
            assert_eq!(grown.verdict, log_only.verdict, "{scenario} seed {seed} at line {i}");
            assert_eq!(grown.since, log_only.since, "{scenario} seed {seed} at line {i}");
            let count = grown.criteria.len();
            assert_eq!(*criteria_count.get_or_insert(count), count, "{scenario} at line {i}");
        }
        assert!(checkpoints >= 11, "{scenario}: {checkpoints} checkpoints");
        // The whole run, the parsers finished: the same final verdict and `since` both ways.
        let mut out = Vec::new();
        lp.finish(&mut out);
        grown_log.apply(out);
        let mut out = Vec::new();
        cp.finish(&mut out);
        grown_csv.apply(out);
        let grown = judged(vec![grown_log, grown_csv]);
        let mut whole = SourceStore::new("tarn.log", "tarn");
        let mut p = tarn.parser();
        let mut out = Vec::new();
        for l in &log {
            p.feed(l.as_bytes(), &mut out);
        }
        p.finish(&mut out);
        whole.apply(out);
        let at_once = judged(vec![whole, read_at_once(&registry, "csv", "forces.csv", &csv)]);
        assert_eq!((grown.verdict, grown.since), (at_once.verdict, at_once.since), "{scenario}");
        assert_eq!(grown, at_once, "{scenario} seed {seed}: the whole run");
        assert_eq!(grown.verdict, scenario.expected(), "{scenario} seed {seed}: {grown:?}");
    }
}
