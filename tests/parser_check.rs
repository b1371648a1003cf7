//! `settle parsers check`: on an invented log (`fixtures/drafts/formats.rs`, `brook`), a
//! definition with typical first-draft mistakes gets each mistake reported with counts and
//! examples taken from the file; the fixed definition gets a clean report.

#[path = "fixtures/drafts/formats.rs"]
mod formats;

use settle::parser::check::{examine, report_text};
use settle::parser::{Definition, Origin};

fn def(text: &str) -> Definition {
    Definition::from_text(text, Origin::File("mine.toml".into()), "mine.toml", "mine")
        .unwrap_or_else(|e| panic!("{e}"))
}

/// A first attempt at brook: the monitor rule is too loose, `Total` is read under both
/// `Forces` and `Moments` into one series, and one rule waits for a line brook never prints.
const FIRST_TRY: &str = r#"
engine = "lines"

[[rules]]
kind = "step"
pattern = '^== iteration (?P<iteration>\d+) ==$'

[[rules]]
kind = "value"
name = "monitor"
pattern = '^\s+(?P<name>\w+)\s+(?P<value>\S+)'
role = "monitor"

[[rules]]
kind = "value"
name = "total"
pattern = '^\s+Total : \((?P<x>\S+) (?P<y>\S+) (?P<z>[^)\s]+)\)$'
role = "monitor"

[[rules]]
kind = "value"
name = "courant"
pattern = '^\s+Courant number (?P<value>\S+)'
series = "cfl"
role = "info"
"#;

#[test]
fn first_draft_mistakes_are_each_reported() {
    let n = 60;
    let text = formats::brook(n);
    let d = def(FIRST_TRY);
    let exam = examine(&d, text.as_bytes());
    assert!(!exam.clean());

    // The rule that waits for a line brook never prints.
    let never: Vec<&str> = exam.reading_rules_unmatched().map(|r| r.label.as_str()).collect();
    assert_eq!(never, vec!["rules[3] (courant)"]);

    // `Total` is given twice per record, after `Forces` and after `Moments`.
    let rep = exam.repeats.iter().find(|r| r.rule == "rules[2] (total)").expect("repeat found");
    assert_eq!(rep.series, "x, y, z");
    assert_eq!(rep.most, 2);
    assert_eq!(rep.records, n as u64);
    assert_eq!(rep.policy, "last");
    assert_eq!(rep.labels(), vec!["Forces", "Moments"]);

    // The loose monitor rule reads `solve U initial …` and `mass error …` too: their
    // second word is not a number.
    let fail = exam.failures.iter().find(|f| f.rule == "rules[1] (monitor)").expect("failures");
    assert_eq!(fail.group, "value");
    // 4 solve lines + mass error + Forces/Moments lines per record do not read.
    assert!(fail.count >= 5 * n as u64, "{}", fail.count);
    assert_eq!(fail.line, 5);
    assert_eq!(fail.text, "U");
    let mixed: Vec<&str> = exam.mixed().map(|r| r.label.as_str()).collect();
    assert!(mixed.contains(&"rules[1] (monitor)"), "{mixed:?}");

    // Unused lines, most frequent shape first, with counts and a first example.
    let first = &exam.unused[0];
    assert!(exam.unused.windows(2).all(|w| w[0].count >= w[1].count));
    assert!(first.count >= n as u64, "{first:?}");
    assert_eq!(exam.unused_lines(), exam.stats.ignored);

    let text = report_text(&d, "brook.log", &exam);
    for part in [
        "✗ rules[3] (courant)",
        "never matched",
        "gives `x, y, z` 2 times in one record",
        "after `Forces`",
        "after `Moments`",
        "two quantities read as one",
        "values that did not read as numbers",
        "lines no rule used",
        "things to look at",
    ] {
        assert!(text.contains(part), "`{part}` missing in:\n{text}");
    }
}

#[test]
fn the_fixed_definition_is_clean() {
    let text = formats::brook(60);
    let hand =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/drafts/brook.toml");
    let d = Definition::from_file(&hand).unwrap();
    let exam = examine(&d, text.as_bytes());
    assert!(exam.clean(), "{exam:#?}");
    assert!(report_text(&d, "brook.log", &exam).contains("no problems found"));
    // Only the banner lines are unused.
    assert_eq!(exam.stats.ignored, 3);
}

#[test]
fn inner_iterations_kept_with_last_are_pointed_out() {
    let text = formats::ford(30);
    let d = def(r#"
engine = "lines"
[[rules]]
kind = "step"
pattern = '^Time step (?P<iteration>\d+)\s+t = (?P<time>\S+)'
[[rules]]
kind = "value"
pattern = '^\s+inner\s+\d+\s+p (?P<p>\S+)'
"#);
    let exam = examine(&d, text.as_bytes());
    let rep = exam.repeats.iter().find(|r| r.series == "p").expect("repeat");
    assert_eq!(rep.most, 5);
    assert!(rep.labels().is_empty(), "no label lines: inner iterations");
    let text = report_text(&d, "ford.log", &exam);
    assert!(text.contains("repeat = \"all\""), "{text}");
}

#[test]
fn a_table_definition_reports_skipped_rows_and_unused_lines() {
    let mut text = formats::probes(20, 1.0, 3);
    text.push_str("21,1.0,oops,3.0\nend of data\n");
    let d = def("engine = \"table\"\n[table]\ndelimiter = \"comma\"\niteration = 1\n");
    let exam = examine(&d, text.as_bytes());
    assert_eq!(exam.records, 21);
    assert_eq!(exam.stats.skipped, 1);
    assert!(exam.skips[0].reason.contains("oops"), "{:?}", exam.skips);
    assert!(exam.unused.iter().any(|u| u.example == "end of data"));
}
