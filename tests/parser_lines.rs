//! `lines` engine features, each driven by a definition in tests/fixtures/parsers/valid/ and
//! a hand-written log in an invented format (invented demo numbers).

use std::path::Path;

use settle::parser::{Definition, Origin, Parser};
use settle::record::{Event, LineStats, Output, Record, Role, SeriesInfo, Skip};

#[derive(Default)]
struct Parsed {
    series: Vec<SeriesInfo>,
    records: Vec<Record>,
    events: Vec<Event>,
    ends: Vec<(u64, String)>,
    skipped: Vec<Skip>,
    stats: LineStats,
}

fn run(mut parser: Parser, text: &str) -> Parsed {
    let mut out = Vec::new();
    for line in text.lines() {
        parser.feed(line.as_bytes(), &mut out);
    }
    parser.finish(&mut out);
    let mut p = Parsed { stats: parser.stats(), ..Parsed::default() };
    for o in out {
        match o {
            Output::Series(s) => p.series.push(s),
            Output::Record(r) => {
                assert!(r.values.iter().all(|(id, _)| (*id as usize) < p.series.len()));
                p.records.push(r);
            }
            Output::Event(e) => p.events.push(e),
            Output::EndOfRun { line, message } => p.ends.push((line, message)),
            Output::Skipped(s) => p.skipped.push(s),
        }
    }
    p
}

impl Parsed {
    fn values(&self, rec: usize) -> Vec<(&str, f64)> {
        self.records[rec]
            .values
            .iter()
            .map(|(id, v)| (self.series[*id as usize].name.as_str(), *v))
            .collect()
    }
    fn names(&self) -> Vec<(&str, Role)> {
        self.series.iter().map(|s| (s.name.as_str(), s.role)).collect()
    }
}

fn fixture(name: &str) -> Definition {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/parsers/valid").join(name);
    Definition::from_file(&path).unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn repeat_policies_over_inner_sweeps() {
    let log = "\
== outer 3 ==
 sweep 1: p=1.0e-01 u=2.0e-01
 sweep 2: p=5.0e-02 u=9.0e-02
 sweep 3: p=2.0e-02 u=4.0e-01
== outer 4 ==
 sweep 1: p=nan u=3.0e-01
 sweep 2: p=1.0e-02 u=nan
";
    let p = run(fixture("inner_sweeps.toml").parser(), log);
    assert_eq!(p.records.len(), 2);
    // Slots keep the position of a series' first value; min/max/last update in place, and
    // `all` appends every sweep.
    assert_eq!(
        p.values(0),
        vec![
            ("p", 0.1),
            ("p_inner", 0.1),
            ("u_min", 0.09),
            ("u_max", 0.4),
            ("u_last", 0.4),
            ("p_inner", 0.05),
            ("p_inner", 0.02),
        ]
    );
    // In record 2 a nan wins min and max (a nan is evidence), `first` keeps the nan, and
    // `all` keeps every value.
    let r2 = p.values(1);
    assert!(r2.iter().find(|(n, _)| *n == "p").is_some_and(|(_, v)| v.is_nan()));
    assert!(r2.iter().find(|(n, _)| *n == "u_min").is_some_and(|(_, v)| v.is_nan()));
    assert!(r2.iter().find(|(n, _)| *n == "u_max").is_some_and(|(_, v)| v.is_nan()));
    assert!(r2.iter().find(|(n, _)| *n == "u_last").is_some_and(|(_, v)| v.is_nan()));
    let inner: Vec<f64> = r2.iter().filter(|(n, _)| *n == "p_inner").map(|(_, v)| *v).collect();
    assert_eq!(inner.len(), 2);
    assert!(inner[0].is_nan() && inner[1] == 0.01);
}

#[test]
fn several_values_per_line_and_anchors() {
    let log = "\
step 4
  total (9.0 9.0 9.0)
forces:
  total (1.0 2.0 3.0)
moments:
  total (0.1 0.2 0.3)
  bounded k in 3 cells
  bounded k in 5 cells
step 5
forces:
  total (1.5 2.5 3.5)
";
    let p = run(fixture("vectors_and_anchors.toml").parser(), log);
    assert_eq!(
        p.names(),
        vec![
            ("fx", Role::Monitor),
            ("fy", Role::Monitor),
            ("fz", Role::Monitor),
            ("mx", Role::Monitor),
            ("my", Role::Monitor),
            ("mz", Role::Info),
        ]
    );
    // The `total` before any anchor is not read; under `forces:` the first one wins, the
    // moment rule only starts after `moments:`.
    assert_eq!(
        p.values(0),
        vec![("fx", 1.0), ("fy", 2.0), ("fz", 3.0), ("mx", 0.1), ("my", 0.2), ("mz", 0.3)]
    );
    // Anchors reset with each record: record 5 has forces only.
    assert_eq!(p.values(1), vec![("fx", 1.5), ("fy", 2.5), ("fz", 3.5)]);
    // `repeat = "first"` on an event: once per record.
    assert_eq!(p.events.len(), 1);
    assert_eq!(p.events[0].message, "bounded k in 3 cells");
    assert_eq!(p.events[0].iteration, Some(4));
    assert_eq!(p.stats.ignored, 1, "only the unanchored total is unused");
}

#[test]
fn captured_names_give_one_series_per_row_and_column() {
    let log = "\
cycle 7
  Pressure  0.22E-02  12  0.35E-08  0.10E+00
  Energy    0.15D-03   4  0.11-103  0.20E+00
cycle 8
  Pressure  0.20E-02  11  0.30E-08  0.90E-01
";
    let p = run(fixture("name_table.toml").parser(), log);
    assert_eq!(
        p.names(),
        vec![
            ("Pressure/rhs", Role::Indicator),
            ("Pressure/sweeps", Role::Indicator),
            ("Pressure/drift", Role::Info),
            ("Pressure/residual", Role::Residual),
            ("Energy/rhs", Role::Indicator),
            ("Energy/sweeps", Role::Indicator),
            ("Energy/drift", Role::Info),
            ("Energy/residual", Role::Residual),
        ]
    );
    assert_eq!(
        p.values(0),
        vec![
            ("Pressure/rhs", 0.22e-2),
            ("Pressure/sweeps", 12.0),
            ("Pressure/drift", 0.35e-8),
            ("Pressure/residual", 0.1),
            ("Energy/rhs", 0.15e-3),
            ("Energy/sweeps", 4.0),
            ("Energy/drift", 0.11e-103),
            ("Energy/residual", 0.2),
        ]
    );
    assert_eq!(p.values(1)[3], ("Pressure/residual", 0.09));
}

#[test]
fn values_before_their_step_line_and_banner_lookalikes() {
    let log = "\
clock : 19:04:44
---- start ----
courant 0.5
clock : 0.1
resid 1.0e-02
courant 0.6
clock : 0.2
resid 5.0e-03
courant 0.7
run complete: 2 steps
";
    let p = run(fixture("before_step.toml").parser(), log);
    assert_eq!(p.records.len(), 2, "the banner clock line opens no record");
    assert_eq!(p.records[0].time, Some(0.1));
    assert_eq!(p.records[0].iteration, None);
    assert_eq!(p.values(0), vec![("courant", 0.5), ("resid", 0.01)]);
    assert_eq!(p.values(1), vec![("courant", 0.6), ("resid", 0.005)]);
    assert_eq!(p.ends, vec![(10, "2 steps".to_string())]);
    assert_eq!(p.stats, LineStats { lines: 10, used: 8, skipped: 0, ignored: 2 });
    assert!(p.skipped.is_empty());
}

#[test]
fn value_before_any_record_is_skipped() {
    let p = run(fixture("before_step.toml").parser(), "---- start ----\nresid 1.0\nclock : 1\n");
    assert_eq!(p.stats.skipped, 1);
    assert!(p.skipped[0].reason.contains("no record open"), "{}", p.skipped[0].reason);
    assert_eq!(p.records.len(), 1);
    assert!(p.records[0].values.is_empty());
}

#[test]
fn step_rule_values_and_default_name() {
    let def = fixture("minimal.toml");
    assert_eq!(def.name(), "minimal");
    assert_eq!(def.engine(), "lines");
    assert!(matches!(def.origin(), Origin::File(p) if p.ends_with("minimal.toml")));
    assert!(def.source_text().contains("kind = \"step\""));
    let p = run(def.parser(), "it 1 res 1.0\nit 2 res 0.5\nit x res 0.1\nit 3 res ***\n");
    assert_eq!(p.names(), vec![("res", Role::Residual)]);
    assert_eq!(p.records.len(), 3);
    assert_eq!(p.values(1), vec![("res", 0.5)]);
    assert_eq!(p.records[2].iteration, Some(3));
    assert_eq!(p.values(2), vec![("res", f64::INFINITY)]);
    assert_eq!(p.stats.ignored, 1, "`it x` does not match `\\d+`");
}

#[test]
fn unparsable_iteration_opens_a_numberless_record() {
    let def = Definition::from_text(
        "engine = \"lines\"\n[[rules]]\nkind = \"step\"\npattern = '^Iter (?P<iteration>\\S+)'\n\
         [[rules]]\nkind = \"value\"\npattern = '^r (?P<value>\\S+)'\nseries = \"r\"\n",
        Origin::Builtin,
        "inline",
        "inline",
    )
    .expect("valid definition");
    let p = run(def.parser(), "Iter 1\nr 1\nIter *****\nr 2\n");
    assert_eq!(p.records.len(), 2);
    assert_eq!(p.records[1].iteration, None);
    assert_eq!(p.values(1), vec![("r", 2.0)]);
    assert_eq!(p.stats.skipped, 1);
    assert!(
        p.skipped[0].reason.contains("iteration `*****` is not an integer"),
        "{}",
        p.skipped[0].reason
    );
}

#[test]
fn skip_reports_stop_at_twenty_but_counting_goes_on() {
    let mut log = String::from("it 1 res 1\n");
    for _ in 0..50 {
        log.push_str("it 2 res nope\n");
    }
    let p = run(fixture("minimal.toml").parser(), &log);
    assert_eq!(p.stats.skipped, 50);
    assert_eq!(p.skipped.len(), 20);
    assert_eq!(p.skipped[0].line, 2);
}
