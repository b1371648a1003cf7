//! The worst case of the `lines` engine's matcher is bounded (linear in the line length
//! times the pattern size), also for unanchored patterns on long lines.
//!
//! Regression for the ingest issue (item "quadratic time in the in-house matcher"): with
//! `(?P<value>\d+)x` a search from every start position scanned the digit run to its end,
//! so 100 lines of 60 KB took about a minute; `(?P<value>\S+)\s+sweeps` behaved the same on
//! long lines without blanks. These inputs are sized so that a quadratic matcher would need
//! minutes (even in an optimised build) while a linear one reads them in well under a
//! second; the assertions are on the values read, the time bound is the test's own run time.
//! Invented demo lines.

use settle::parser::{Definition, Origin};
use settle::record::{Output, Record};

fn parse(def: &str, lines: &[Vec<u8>]) -> (Vec<Record>, u64) {
    let d = Definition::from_text(def, Origin::Builtin, "bounds", "bounds").expect("valid");
    let mut p = d.parser();
    let mut out: Vec<Output> = Vec::new();
    for l in lines {
        p.feed(l, &mut out);
    }
    p.finish(&mut out);
    let records = out
        .into_iter()
        .filter_map(|o| if let Output::Record(r) = o { Some(r) } else { None })
        .collect();
    (records, p.stats().lines)
}

const LONG: usize = 60_000;

#[test]
fn an_unanchored_run_with_no_match_is_linear() {
    let def = "engine = \"lines\"\n\
               [[rules]]\nkind = \"step\"\npattern = '^step (?P<iteration>\\d+)'\n\
               [[rules]]\nkind = \"value\"\npattern = '(?P<value>\\d+)x'\nseries = \"v\"\n";
    let mut lines = Vec::new();
    for i in 1..=20u32 {
        lines.push(format!("step {i}").into_bytes());
        // A long run of digits and no `x`: no match, but every start position starts a run.
        lines.push(vec![b'7'; LONG]);
        // The same with a match at the very end, so the search must reach it.
        let mut hit = vec![b'1'; LONG];
        hit.extend_from_slice(b" 12x");
        lines.push(hit);
    }
    let (records, n) = parse(def, &lines);
    assert_eq!(n, 60);
    assert_eq!(records.len(), 20);
    assert!(records.iter().all(|r| r.values == vec![(0, 12.0)]), "{:?}", records[0].values);
}

#[test]
fn a_token_run_without_blanks_is_linear() {
    let def = "engine = \"lines\"\n\
               [[rules]]\nkind = \"step\"\npattern = '^step (?P<iteration>\\d+)'\n\
               [[rules]]\nkind = \"value\"\npattern = '(?P<value>\\S+)\\s+sweeps'\nseries = \"s\"\n";
    let mut lines = Vec::new();
    for i in 1..=10u32 {
        lines.push(format!("step {i}").into_bytes());
        lines.push(vec![b'a'; LONG]);
        let mut ok = vec![b'-'; LONG];
        ok.extend_from_slice(b" 12 sweeps");
        lines.push(ok);
    }
    let (records, _) = parse(def, &lines);
    assert_eq!(records.len(), 10);
    assert!(records.iter().all(|r| r.values == vec![(0, 12.0)]), "{:?}", records[0].values);
}
