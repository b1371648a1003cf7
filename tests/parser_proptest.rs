//! No input makes a parser panic: arbitrary bytes, and near-miss variations of real lines,
//! through every shipped definition (both engines), and arbitrary bytes through
//! `parse_number`. Also checks the line accounting invariant on every input.

use proptest::prelude::*;
use settle::parser::{Registry, parse_number};
use settle::record::Output;

/// Pieces of real lines, so generated input reaches deep into the rules, not only the
/// "nothing matched" path.
const FRAGMENTS: &[&str] = &[
    "[step ",
    "]  cfl ",
    "  time ",
    " dt ",
    "  Ux       res ",
    "   lin ",
    " sweeps",
    "  continuity  imbalance ",
    "  forces   drag ",
    " lift ",
    " dp ",
    "  notice: ",
    "warning: ",
    "*** tarn fatal: ",
    "    at ",
    "tarn: finished after ",
    " steps",
    "tarn: residual targets reached",
    "restarting from checkpoint at step ",
    "----------------",
    "tarn 3.2.0 - x",
    "1.5e-3",
    "-nan",
    "*****",
    "1.5-103",
    "1.2.3",
    "inf",
    ",",
    ";",
    "\t",
    " ",
    "\"",
    "'",
    "(",
    ")",
    "[",
    "]",
    "#",
    "%",
    "res_p",
    "Time",
    "step",
    "\r",
    "\u{00e9}",
    "\u{0000}",
];

fn line_strategy() -> impl Strategy<Value = Vec<u8>> {
    prop_oneof![
        proptest::collection::vec(any::<u8>(), 0..80),
        proptest::collection::vec(
            prop_oneof![
                proptest::sample::select(FRAGMENTS).prop_map(|s| s.as_bytes().to_vec()),
                (0u32..100_000).prop_map(|n| n.to_string().into_bytes()),
                any::<u8>().prop_map(|b| vec![b]),
            ],
            0..12,
        )
        .prop_map(|parts| parts.concat()),
    ]
    .prop_map(|mut l| {
        l.retain(|&b| b != b'\n');
        l
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn shipped_parsers_never_panic(lines in proptest::collection::vec(line_strategy(), 0..60)) {
        let reg = Registry::builtin();
        for def in reg.definitions() {
            let mut parser = def.parser();
            let mut out = Vec::new();
            for l in &lines {
                parser.feed(l, &mut out);
            }
            parser.finish(&mut out);
            let s = parser.stats();
            prop_assert_eq!(s.lines, lines.len() as u64);
            prop_assert_eq!(s.used + s.skipped + s.ignored, s.lines, "{}", def.name());
            let mut announced = 0usize;
            for o in &out {
                match o {
                    Output::Series(info) => {
                        prop_assert_eq!(info.id as usize, announced);
                        announced += 1;
                    }
                    Output::Record(r) => {
                        prop_assert!(r.values.iter().all(|(id, _)| (*id as usize) < announced));
                        prop_assert!(r.line >= 1 && r.line <= s.lines);
                    }
                    _ => {}
                }
            }
        }
        // Detection must not panic on the same bytes either.
        let head: Vec<u8> = lines.join(&b'\n');
        let d = reg.detect(&head);
        prop_assert_eq!(d.candidates.len(), reg.definitions().len());
    }

    #[test]
    fn parse_number_never_panics(bytes in proptest::collection::vec(any::<u8>(), 0..40)) {
        let _ = parse_number(&bytes);
    }

    #[test]
    fn parse_number_agrees_with_the_standard_parser(v in any::<f64>(), digits in 0usize..18) {
        // Reference: Rust's correctly rounded `str::parse::<f64>`, on the forms Rust prints
        // (shortest round trip, fixed significant digits in both exponent cases, plain).
        for text in [format!("{v:e}"), format!("{v:.digits$E}"), format!("{v:.digits$e}"), format!("{v}")] {
            let got = parse_number(text.as_bytes());
            let want: f64 = text.parse().unwrap_or(f64::NAN);
            prop_assert!(got.is_some(), "{}", text);
            let got = got.unwrap_or_default();
            prop_assert!(got == want || (got.is_nan() && want.is_nan()), "{} -> {} (std {})", text, got, want);
        }
    }

    #[test]
    fn fortran_d_exponent_equals_e_exponent(m in 0u32..10_000_000, e in -300i32..300) {
        let e_form = format!("0.{m:07}E{e:+03}");
        let d_form = e_form.replace('E', "D");
        prop_assert_eq!(parse_number(d_form.as_bytes()), parse_number(e_form.as_bytes()));
        prop_assert!(parse_number(e_form.as_bytes()).is_some());
    }
}
