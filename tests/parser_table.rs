//! The shipped generic `table` and `csv` definitions, and table options from fixture
//! definitions, on hand-written files (invented demo numbers).

use std::path::Path;

use settle::parser::{Definition, Parser, Registry};
use settle::record::{LineStats, Output, Record, Role, SeriesInfo, Skip};

struct Parsed {
    series: Vec<SeriesInfo>,
    records: Vec<Record>,
    skipped: Vec<Skip>,
    stats: LineStats,
}

fn run(mut parser: Parser, text: &str) -> Parsed {
    let mut out = Vec::new();
    for line in text.lines() {
        parser.feed(line.as_bytes(), &mut out);
    }
    parser.finish(&mut out);
    let mut p = Parsed {
        series: Vec::new(),
        records: Vec::new(),
        skipped: Vec::new(),
        stats: parser.stats(),
    };
    for o in out {
        match o {
            Output::Series(s) => p.series.push(s),
            Output::Record(r) => {
                assert!(r.values.iter().all(|(id, _)| (*id as usize) < p.series.len()));
                p.records.push(r);
            }
            Output::Skipped(s) => p.skipped.push(s),
            other => panic!("tables give no {other:?}"),
        }
    }
    p
}

impl Parsed {
    fn names(&self) -> Vec<(&str, Role)> {
        self.series.iter().map(|s| (s.name.as_str(), s.role)).collect()
    }
    fn row(&self, i: usize) -> Vec<(&str, f64)> {
        self.records[i]
            .values
            .iter()
            .map(|(id, v)| (self.series[*id as usize].name.as_str(), *v))
            .collect()
    }
    fn iterations(&self) -> Vec<Option<i64>> {
        self.records.iter().map(|r| r.iteration).collect()
    }
}

fn builtin(name: &str) -> Parser {
    Registry::builtin().get(name).expect("shipped definition").parser()
}

fn fixture(name: &str) -> Definition {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/parsers/valid").join(name);
    Definition::from_file(&path).unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn zero_config_whitespace_table() {
    let text = "\
# convergence history of case duct-bend-07
Iter   Res_p      res_U      Cd        Cl
1      1.0e+00    1.0e+00    0.4123    0.0211
2      5.0e-01    4.0e-01    0.4100    0.0215
";
    let p = run(builtin("table"), text);
    assert_eq!(
        p.names(),
        vec![
            ("Res_p", Role::Residual),
            ("res_U", Role::Residual),
            ("Cd", Role::Monitor),
            ("Cl", Role::Monitor)
        ]
    );
    assert_eq!(p.iterations(), vec![Some(1), Some(2)]);
    assert_eq!(p.row(1), vec![("Res_p", 0.5), ("res_U", 0.4), ("Cd", 0.41), ("Cl", 0.0215)]);
    assert_eq!(p.records[1].line, 4);
    // Comment and header lines: ignored (the header is only known once a row fits it).
    assert_eq!(p.stats, LineStats { lines: 4, used: 2, skipped: 0, ignored: 2 });
}

#[test]
fn reprinted_header_comments_and_banner_are_not_data() {
    let text = "\
mysolver run started
  it  res_p  res_k  dp
   1  1.0    1.0    150.0
   2  0.5    0.7    151.0
warning: something happened here
  it  res_p  res_k  dp
   3  0.25   0.5    152.0
# a comment 4 5 6 7
   4  0.125  0.3    nan
";
    let p = run(builtin("table"), text);
    assert_eq!(p.iterations(), vec![Some(1), Some(2), Some(3), Some(4)]);
    assert_eq!(p.series.len(), 3, "the re-printed header makes no new series");
    assert_eq!(p.row(2), vec![("res_p", 0.25), ("res_k", 0.5), ("dp", 152.0)]);
    assert!(p.row(3)[2].1.is_nan());
    // banner, first header, warning, comment: ignored; re-printed header: used.
    assert_eq!(p.stats, LineStats { lines: 9, used: 5, skipped: 0, ignored: 4 });
}

#[test]
fn quoted_names_and_vectors_in_whitespace_table() {
    let text = "\
\"iteration\" \"res p\"  \"U probe\"           'force'
1            1.0e-1   (1.2e-3 4.5e-4 0)  (1 2 3 4)
2            5.0e-2   (1.1e-3 4.0e-4 0)  (1 2 3 5)
";
    let p = run(builtin("table"), text);
    assert_eq!(
        p.names(),
        vec![
            ("res p", Role::Residual),
            ("U probe_x", Role::Monitor),
            ("U probe_y", Role::Monitor),
            ("U probe_z", Role::Monitor),
            ("force[0]", Role::Monitor),
            ("force[1]", Role::Monitor),
            ("force[2]", Role::Monitor),
            ("force[3]", Role::Monitor),
        ]
    );
    assert_eq!(
        p.row(1),
        vec![
            ("res p", 5e-2),
            ("U probe_x", 1.1e-3),
            ("U probe_y", 4e-4),
            ("U probe_z", 0.0),
            ("force[0]", 1.0),
            ("force[1]", 2.0),
            ("force[2]", 3.0),
            ("force[3]", 5.0),
        ]
    );
}

#[test]
fn tarn_force_monitor_csv() {
    // The forces.csv file tarn writes beside its log (TARN_FORMAT.md).
    let text = "\
# tarn force monitor, case duct-bend-07
step,drag,lift,dp
1,4.1230e-01,2.1100e-02,1.5320e+02
2,4.1000e-01,2.1500e-02,1.5100e+02
";
    let p = run(builtin("csv"), text);
    assert_eq!(
        p.names(),
        vec![("drag", Role::Monitor), ("lift", Role::Monitor), ("dp", Role::Monitor)]
    );
    assert_eq!(p.iterations(), vec![Some(1), Some(2)]);
    assert_eq!(p.row(0), vec![("drag", 0.4123), ("lift", 0.0211), ("dp", 153.2)]);
    assert_eq!(p.stats.used, 2);
}

#[test]
fn csv_with_quotes_reprinted_header_empty_cells_and_bad_rows() {
    let text = "\
\"Time\",\"res,p\",\"Cd\"
0.001,1.0,0.30
0.002,,0.31
\"Time\",\"res,p\",\"Cd\"
0.003,0.5,abc
0.004,0.4
0.005,0.25,0.32,
";
    let p = run(builtin("csv"), text);
    // First column named `Time`: the index is the time, not an iteration.
    assert_eq!(p.names(), vec![("res,p", Role::Residual), ("Cd", Role::Monitor)]);
    let times: Vec<Option<f64>> = p.records.iter().map(|r| r.time).collect();
    assert_eq!(times, vec![Some(0.001), Some(0.002), Some(0.003), Some(0.005)]);
    assert!(p.records.iter().all(|r| r.iteration.is_none()));
    // An empty cell is a missing value, not an error.
    assert_eq!(p.row(1), vec![("Cd", 0.31)]);
    // A bad cell keeps the rest of the row, and the line is reported.
    assert_eq!(p.row(2), vec![("res,p", 0.5)]);
    // A trailing comma does not add a column.
    assert_eq!(p.row(3), vec![("res,p", 0.25), ("Cd", 0.32)]);
    assert_eq!(p.stats, LineStats { lines: 7, used: 4, skipped: 2, ignored: 1 });
    assert_eq!(p.skipped[0].line, 5);
    assert!(
        p.skipped[0].reason.contains("column `Cd`: not a number: `abc`"),
        "{}",
        p.skipped[0].reason
    );
    assert_eq!(p.skipped[1].line, 6);
    assert!(p.skipped[1].reason.contains("2 cells, the header has 3"), "{}", p.skipped[1].reason);
}

#[test]
fn headerless_numeric_file_gets_generated_names() {
    let p = run(builtin("table"), "1 0.5 3\n2 0.25 4\n");
    assert_eq!(p.names(), vec![("col2", Role::Monitor), ("col3", Role::Monitor)]);
    assert_eq!(p.iterations(), vec![Some(1), Some(2)]);
}

#[test]
fn header_in_a_comment_line() {
    let p =
        run(builtin("table"), "# it  res_p  Cd\n# written by a script\n1 0.5 0.3\n2 0.4 0.31\n");
    assert_eq!(p.names(), vec![("res_p", Role::Residual), ("Cd", Role::Monitor)]);
    assert_eq!(p.row(1), vec![("res_p", 0.4), ("Cd", 0.31)]);
}

#[test]
fn configured_table_options() {
    // semicolon table: iteration by name, time by position, ignore, roles, index vectors.
    let p = run(
        fixture("table_options.toml").parser(),
        "\
% monitor export
wall;Step;t;RES_mass;cfl;Force;note
1.5;10;0.1;1e-3;0.5;(1 2);a
1.6;11;0.2;5e-4;0.6;(3 4);b
",
    );
    assert_eq!(
        p.names(),
        vec![
            ("RES_mass", Role::Indicator),
            ("cfl", Role::Info),
            ("Force[0]", Role::Monitor),
            ("Force[1]", Role::Monitor)
        ]
    );
    assert_eq!(p.iterations(), vec![Some(10), Some(11)]);
    assert_eq!(p.records[1].time, Some(0.2));
    assert_eq!(
        p.row(1),
        vec![("RES_mass", 5e-4), ("cfl", 0.6), ("Force[0]", 3.0), ("Force[1]", 4.0)]
    );
    assert_eq!(p.stats.skipped, 0);
}

#[test]
fn fixed_columns_without_header() {
    let p = run(fixture("table_fixed_columns.toml").parser(), "x y z\n5\t1e-2\t7\n6\t\t8\n");
    assert_eq!(p.names(), vec![("residual_rho", Role::Residual), ("mass_flow", Role::Monitor)]);
    assert_eq!(p.iterations(), vec![Some(5), Some(6)]);
    assert_eq!(p.row(1), vec![("mass_flow", 8.0)]);
    assert_eq!(p.stats.ignored, 1);
}

#[test]
fn missing_iteration_column_is_reported_once() {
    let p = run(fixture("table_named_iteration.toml").parser(), "a b\n1 2\n3 4\n");
    assert_eq!(p.records.len(), 2);
    assert!(p.records.iter().all(|r| r.iteration.is_none()));
    assert_eq!(p.stats.skipped, 1);
    assert!(
        p.skipped[0].reason.contains("iteration column `cycle` is not in the header"),
        "{}",
        p.skipped[0].reason
    );
}

#[test]
fn detection_picks_table_csv_or_nothing() {
    let reg = Registry::builtin();
    let csv = reg.detect(b"# tarn force monitor\nstep,drag,lift\n1,0.41,0.02\n2,0.40,0.021\n");
    assert_eq!(csv.chosen.as_deref(), Some("csv"), "{}", csv.summary);
    let table = reg.detect(b"it res_p Cd\n1 1.0e+00 0.41\n2 5.0D-01 (1 2 3)\n");
    assert_eq!(table.chosen.as_deref(), Some("table"), "{}", table.summary);
    let prose = reg.detect(b"Dear diary,\ntoday the mesh was fine.\n1 2\n");
    assert_eq!(prose.chosen, None);
    assert!(prose.summary.contains("no parser definition recognises"), "{}", prose.summary);
    let table_c = prose.candidates.iter().find(|c| c.name == "table").expect("listed");
    assert_eq!(table_c.score, 0);
    assert!(table_c.reasons[0].contains("matched 1 line, needs 2"), "{:?}", table_c.reasons);
    assert_eq!(prose.candidates.len(), reg.definitions().len());
    assert!(prose.candidates.iter().all(|c| !c.reasons.is_empty()));
}
