//! Unit tests of the headless lines: exact status lines, JSON keys, sanitising,
//! when to print.

use std::time::UNIX_EPOCH;

use super::*;

#[test]
fn numbers() {
    assert_eq!(fmt_num(2.1), "2.1");
    assert_eq!(fmt_num(3.0), "3");
    assert_eq!(fmt_num(0.0312), "0.0312");
    assert_eq!(fmt_num(0.03), "0.03");
    assert_eq!(fmt_num(1450.0), "1450");
    assert_eq!(fmt_num(12.345), "12.3");
    assert_eq!(fmt_num(1e-5), "1.00e-5");
    assert_eq!(fmt_num(-2.5e7), "-2.50e7");
    assert_eq!(fmt_num(f64::NAN), "n/a");
    assert_eq!(fmt_num(0.0), "0");
    assert_eq!(crate::view::evidence::eta_number(42.4), "42");
    assert_eq!(crate::view::evidence::eta_number(912.0), "910");
    assert_eq!(crate::view::evidence::eta_number(12_345.0), "12000");
}

#[test]
fn ages() {
    assert_eq!(fmt_age(Duration::from_secs(4)), "4 s");
    assert_eq!(fmt_age(Duration::from_secs(600)), "10 min");
    assert_eq!(fmt_age(Duration::from_secs(9000)), "2.5 h");
}

#[test]
fn cleaning() {
    assert_eq!(clean("a\tb"), "a       b");
    assert_eq!(clean("abcdefgh\tx"), "abcdefgh        x");
    assert_eq!(clean("x\x1b[31my\r\n"), "x^[[31my  ");
    assert_eq!(clean("\u{9b}z\x7f"), "\\u{9b}z^?");
}

/// A hand-built judgement of the invented tarn case `duct-bend-07` (demo numbers).
fn stalled() -> Judgement {
    use crate::judge::{Finding, ResidualSummary};
    let crit = |name: &str, series: &str, cmp, thr, value, unit: &str, met| CriterionResult {
        name: name.into(),
        series: series.into(),
        comparison: cmp,
        threshold: thr,
        value,
        unit: unit.into(),
        met,
        since: None,
        default: true,
        ..Default::default()
    };
    Judgement {
        verdict: Verdict::Stalled,
        since: Some(3140),
        causes: vec![1],
        findings: vec![
            Finding { kind: FindingKind::Trend, detail: "Ux falling".into(), ..Finding::default() },
            Finding {
                kind: FindingKind::Stall,
                series: Some("p".into()),
                first: 3140,
                last: 4870,
                statistic: "slope_dec_per_kit".into(),
                value: -0.02,
                detail: "p slope -0.02 dec/kit\t(95 % CI -0.05..+0.01) for 1730 it".into(),
                ..Finding::default()
            },
        ],
        criteria: vec![
            crit("drop", "Ux", Comparison::AtLeast, 3.0, 4.2, "dec", true),
            crit("drop", "p", Comparison::AtLeast, 3.0, 2.1, "dec", false),
            crit("drift", "Cd", Comparison::AtMost, 0.1, 0.04, "%", true),
            crit("band", "Cd", Comparison::AtMost, 0.5, f64::NAN, "%", false),
        ],
        residuals: vec![ResidualSummary {
            series: "p".into(),
            eta_iterations: Some(912.0),
            ..ResidualSummary::default()
        }],
        monitors: vec![],
        iterations: 4870,
    }
}

fn at() -> SystemTime {
    UNIX_EPOCH + Duration::from_secs(1_796_119_451)
}

#[test]
fn status_line_exact() {
    let j = stalled();
    assert_eq!(
        status_line("duct-bend-07", &j, Some(Duration::from_secs(9)), at()),
        "2026-12-01T10:04:11Z duct-bend-07 stalled since it 3140 | it 4870 | grew 9 s ago \
         | 2/4 criteria met | open: p drop 2.1 dec (need >= 3), Cd band n/a % (need <= 0.5) \
         | why: p slope -0.02 dec/kit        (95 % CI -0.05..+0.01) for 1730 it",
        "the tab after dec/kit is expanded to the next multiple of 8 columns"
    );
    let mut c = j.clone();
    c.verdict = Verdict::Converging;
    c.since = None;
    assert_eq!(
        status_line("duct-bend-07", &c, None, at()),
        "2026-12-01T10:04:11Z duct-bend-07 converging | it 4870 | 2/4 criteria met \
         | open: p drop 2.1 dec (need >= 3), Cd band n/a % (need <= 0.5) | eta ~910 it"
    );
    let mut d = j.clone();
    d.verdict = Verdict::Converged;
    d.since = Some(4500);
    for c in &mut d.criteria {
        c.met = true;
    }
    assert_eq!(
        status_line("duct\x1b[2J-bend", &d, Some(Duration::from_secs(600)), at()),
        "2026-12-01T10:04:11Z duct^[[2J-bend converged since it 4500 | it 4870 \
         | grew 10 min ago | all 4 criteria met"
    );
}

#[test]
fn many_open_criteria_are_summarised() {
    let mut j = stalled();
    let c = j.criteria[1].clone();
    j.criteria = (0..5).map(|i| CriterionResult { series: format!("r{i}"), ..c.clone() }).collect();
    let line = status_line("x", &j, None, at());
    assert!(line.contains("0/5 criteria met | open: r0 drop 2.1 dec (need >= 3), r1 drop"));
    assert!(line.contains("r2 drop 2.1 dec (need >= 3), +2 more | why:"), "{line}");
}

#[test]
fn a_lagging_judgement_says_how_far_the_log_was_read() {
    let j = stalled();
    let line = status_line_read("duct-bend-07", &j, Some(4882), None, at());
    assert!(line.contains(" | it 4870 (read to 4882) | "), "{line}");
    let line = status_line_read("duct-bend-07", &j, Some(4870), None, at());
    assert!(line.contains(" | it 4870 | "), "{line}");
    let v: serde_json::Value = serde_json::from_str(&json_line_read(
        "r",
        &j,
        Some(4882),
        None,
        at(),
        HeadlessEvent::Heartbeat,
    ))
    .expect("json");
    assert_eq!(v["iteration"], 4870);
    assert_eq!(v["read_iteration"], 4882);
}

#[test]
fn json_line_parses_back_with_stable_keys() {
    let j = stalled();
    let line = json_line(
        "duct-bend-07",
        &j,
        Some(Duration::from_millis(9040)),
        at(),
        HeadlessEvent::Change,
    );
    assert!(!line.contains('\n'));
    let v: serde_json::Value = serde_json::from_str(&line).expect("valid JSON");
    let keys: Vec<&str> = v.as_object().expect("object").keys().map(String::as_str).collect();
    let mut expected = vec![
        "time",
        "event",
        "run",
        "verdict",
        "since",
        "iteration",
        "grew_s_ago",
        "criteria",
        "causes",
        "eta_iterations",
        "read_iteration",
        "eta_range",
        "not_judged",
    ];
    let mut sorted = keys.clone();
    sorted.sort();
    expected.sort();
    assert_eq!(sorted, expected);
    assert_eq!(v["time"], "2026-12-01T10:04:11Z");
    assert_eq!(v["event"], "change");
    assert_eq!(v["run"], "duct-bend-07");
    assert_eq!(v["verdict"], "stalled");
    assert_eq!(v["since"], 3140);
    assert_eq!(v["iteration"], 4870);
    assert_eq!(v["grew_s_ago"], 9.0);
    assert_eq!(v["eta_iterations"], serde_json::Value::Null, "eta only while converging");
    let c = &v["criteria"][1];
    assert_eq!(c["name"], "drop");
    assert_eq!(c["series"], "p");
    assert_eq!(c["value"], 2.1);
    assert_eq!(c["threshold"], 3.0);
    assert_eq!(c["comparison"], "at_least");
    assert_eq!(c["unit"], "dec");
    assert_eq!(c["met"], false);
    assert_eq!(v["criteria"][3]["value"], serde_json::Value::Null, "NaN becomes null");
    assert_eq!(v["causes"].as_array().map(Vec::len), Some(1));
    assert_eq!(v["causes"][0]["kind"], "stall");
    assert_eq!(v["causes"][0]["series"], "p");
    assert_eq!(
        v["causes"][0]["detail"], "p slope -0.02 dec/kit\t(95 % CI -0.05..+0.01) for 1730 it",
        "JSON keeps text lossless (escaped)"
    );
    let mut c = j.clone();
    c.verdict = Verdict::Converging;
    let v: serde_json::Value =
        serde_json::from_str(&json_line("r", &c, None, at(), HeadlessEvent::Heartbeat))
            .expect("valid JSON");
    assert_eq!(v["event"], "heartbeat");
    assert_eq!(v["grew_s_ago"], serde_json::Value::Null);
    assert_eq!(v["eta_iterations"], 912.0);
    let v: serde_json::Value =
        serde_json::from_str(&json_line("r", &c, None, at(), HeadlessEvent::End)).expect("JSON");
    assert_eq!(v["event"], "end");
}

#[test]
fn action_lines() {
    let f = Finding {
        kind: FindingKind::Action,
        first: 4870,
        last: 4870,
        statistic: "exit_code".into(),
        detail: "ran scancel 123456: exit 0 after 0.1 s".into(),
        ..Finding::default()
    };
    assert_eq!(
        action_line("duct-bend-07", &f, at()),
        "2026-12-01T10:04:11Z duct-bend-07 action | ran scancel 123456: exit 0 after 0.1 s"
    );
    let v: serde_json::Value =
        serde_json::from_str(&json_action_line("duct-bend-07", &f, at())).expect("JSON");
    assert_eq!(v["event"], "action");
    assert_eq!(v["iteration"], 4870);
    assert_eq!(v["status"], "exit_code");
    assert_eq!(v["detail"], "ran scancel 123456: exit 0 after 0.1 s");
    let s = HeadlessState::default();
    assert_eq!(s.should_print_finding(&f), Some(HeadlessEvent::Action));
    assert_eq!(s.should_print_finding(&Finding::default()), None);
}

#[test]
fn change_detection_sequence() {
    let mut s = HeadlessState::new(Duration::from_secs(60));
    let t0 = Instant::now();
    let t = |secs: u64| t0 + Duration::from_secs(secs);
    let mut j = stalled();
    assert_eq!(s.should_print(&j, t(0)), Some(PrintReason::First));
    assert_eq!(s.should_print(&j, t(1)), None);
    j.criteria[1].value = 2.2; // a value alone is no change
    j.iterations = 4900;
    assert_eq!(s.should_print(&j, t(2)), None);
    j.criteria[1].met = true;
    assert_eq!(s.should_print(&j, t(3)), Some(PrintReason::Criteria));
    assert_eq!(s.should_print(&j, t(4)), None);
    j.verdict = Verdict::Converging;
    assert_eq!(s.should_print(&j, t(5)), Some(PrintReason::Verdict));
    assert_eq!(PrintReason::Verdict.event(), HeadlessEvent::Change);
    assert_eq!(s.should_print(&j, t(64)), None, "59 s after the last line");
    assert_eq!(s.should_print(&j, t(65)), Some(PrintReason::Heartbeat));
    assert_eq!(PrintReason::Heartbeat.event().as_str(), "heartbeat");
    assert_eq!(s.should_print(&j, t(100)), None);
    j.criteria.pop(); // a criterion going away is a change
    assert_eq!(s.should_print(&j, t(101)), Some(PrintReason::Criteria));
    // A monitor found to carry only round-off (not judged any more) is a change.
    j.monitors.push(crate::judge::MonitorSummary {
        series: "Fz".into(),
        round_off: true,
        ..Default::default()
    });
    assert_eq!(s.should_print(&j, t(102)), Some(PrintReason::Criteria));
    assert_eq!(s.should_print(&j, t(103)), None);
    assert_eq!(s.should_print(&j, t(162)), Some(PrintReason::Heartbeat));
}

/// The judge's new evidence in the lines: the window and the near-zero reference of an
/// open monitor criterion, a round-off monitor named as not judged, the ETA with its range,
/// and a why without the judge's backticks (demo numbers of the invented tarn case).
#[test]
fn evidence_in_the_lines() {
    use crate::judge::{MonitorSummary, Reference};
    let mut j = stalled();
    j.criteria[3] = CriterionResult {
        name: "band".into(),
        series: "Fy".into(),
        comparison: Comparison::AtMost,
        threshold: 0.5,
        value: 2.4,
        unit: "%".into(),
        window: Some(312),
        ..Default::default()
    };
    j.monitors = vec![
        MonitorSummary {
            series: "Fy".into(),
            window: 312,
            reference: Reference::NearZero,
            reference_value: 0.018_34,
            ..Default::default()
        },
        MonitorSummary { series: "Fz".into(), round_off: true, ..Default::default() },
    ];
    j.residuals[0].eta_range = Some((604.0, 1_437.0));
    j.findings[1].detail = "the log ends in an error (`stack_trace`: tarn::sst)".into();
    let line = status_line("duct-bend-07", &j, None, at());
    assert!(
        line.contains(
            "Fy band 2.4 % (need <= 0.5; window 312 it, relative to 0.0183 (mean near zero))"
        ),
        "{line}"
    );
    assert!(line.contains(" | Fz not judged (round-off only) | "), "{line}");
    assert!(line.ends_with("| why: the log ends in an error (stack_trace: tarn::sst)"), "{line}");
    assert!(!line.contains('`'), "{line}");
    let mut c = j.clone();
    c.verdict = Verdict::Converging;
    let line = status_line("duct-bend-07", &c, None, at());
    assert!(line.contains(" | eta ~910 it (600-1400) | "), "{line}");
    let v: serde_json::Value =
        serde_json::from_str(&json_line("r", &c, None, at(), HeadlessEvent::Change)).expect("JSON");
    assert_eq!(v["eta_range"], serde_json::json!([604.0, 1437.0]));
    assert_eq!(v["not_judged"], serde_json::json!(["Fz"]));
    assert_eq!(v["criteria"][3]["window"], 312);
    assert_eq!(v["criteria"][0]["window"], serde_json::Value::Null);
}

/// A run with records but nothing to judge gets a state line with the judge's reason in
/// the shared wording (no backticks), never a verdict.
#[test]
fn nothing_to_judge_is_a_state_not_a_verdict() {
    use crate::judge::NothingToJudge;
    let st = nothing_state(&NothingToJudge::NothingJudged { series: 3 });
    assert_eq!(st.state, RunState::NothingToJudge);
    assert!(!st.state.is_final());
    let line = state_line("duct-bend-07", &st, None, at());
    assert_eq!(
        line,
        "2026-12-01T10:04:11Z duct-bend-07 nothing-to-judge | no verdict | why: nothing to \
         judge: the 3 series read are all info or ignored (set a role or remove ignore)"
    );
    let v: serde_json::Value =
        serde_json::from_str(&json_state_line("r", &st, None, at(), HeadlessEvent::End))
            .expect("JSON");
    assert_eq!(v["state"], "nothing-to-judge");
    assert!(v.get("verdict").is_none(), "{v}");
    let st = nothing_state(&NothingToJudge::NoData);
    assert_eq!(st.detail, "no data: no values were read");
}
