//! The report writers on a hand-built run of the invented solver "tarn": HTML well-formed and
//! self-contained, one SVG path per residual series, every criterion and the provenance hashes
//! present, Markdown with its SVG files beside it, JSON with stable keys.
//!
//! The run, findings and numbers are synthetic (invented for this test). Set
//! `SETTLE_REPORT_SAMPLE_DIR` to a folder to also keep the rendered sample there (used by
//! `scripts/render-report.sh` to look at it).

use std::path::{Path, PathBuf};

use settle::judge::{Criteria, Finding, FindingKind, Judgement, MonitorSummary, Verdict};
use settle::record::{Output, Record, Role};
use settle::report::{
    Provenance, ReportError, ReportInput, json::TOP_LEVEL_KEYS, render_html, render_json,
    render_markdown, write_report,
};
use settle::run::{RunStore, SegmentReason, SourceStore};
use sha2::{Digest, Sha256};

#[path = "report_render/fixture.rs"]
mod fixture;
#[path = "report_render/markup.rs"]
mod markup;

use fixture::{Fixture, RESIDUALS, series};
use markup::check_markup;

fn section<'a>(doc: &'a str, id: &str) -> &'a str {
    let start =
        doc.find(&format!("<section id=\"{id}\">")).unwrap_or_else(|| panic!("section {id}"));
    let len = doc[start..].find("</section>").expect("section closes");
    &doc[start..start + len]
}

fn no_control_characters(doc: &str) {
    assert!(!doc.chars().any(|c| c.is_control() && c != '\n'), "raw control character in output");
}

#[test]
fn html_is_well_formed_self_contained_and_complete() {
    let fx = Fixture::new(4870);
    let html = render_html(&fx.input());
    keep_sample("sample.html", &html);
    let elements = check_markup(&html).unwrap_or_else(|e| panic!("markup: {e}"));
    assert!(elements.iter().any(|e| e == "svg"));

    // Self-contained: nothing fetched from elsewhere, nothing executed.
    let lower = html.to_lowercase();
    for bad in ["http", "<script", "src=", "href=", "@import", "<link", "<img", "<iframe"] {
        assert!(!lower.contains(bad), "HTML contains {bad}");
    }
    assert!(!lower.contains("url("), "HTML references an external resource with url()");
    assert!(lower.contains("@media print"));
    no_control_characters(&html);

    // Verdict and its meaning first.
    let head = &html[..html.find("<section").expect("sections")];
    assert!(head.contains("STALLED"), "verdict in the header");
    assert!(head.contains("evidence from iteration 3\u{202f}140"));
    assert!(head.contains("wing-a4 &lt;aoa=4°&gt; &amp; &quot;flaps&quot;"), "run name escaped");
    // Safety wording (README, the caution at the top).
    assert!(head.contains("not proof that the solution is correct"));
    assert!(head.contains("says nothing about whether the physical model"));
    assert!(head.contains("qualified engineers"));
    assert!(head.contains("validation against experiment"));
    assert!(head.contains("codes and standards"));

    // Why: the causing finding with its evidence.
    let why = section(&html, "why");
    assert!(why.contains("stall, p"));
    assert!(why.contains("slope_dec_per_kit = -0.02 (threshold -0.1); p = 0.41"));
    assert!(!why.contains("oscillation"), "only causes are listed under why");

    // Every criterion row, defaults marked.
    let crit = section(&html, "criteria");
    let rows: Vec<&str> = crit.split("<tr>").skip(2).collect();
    assert_eq!(rows.len(), fx.judgement.criteria.len());
    for (row, c) in rows.iter().zip(&fx.judgement.criteria) {
        assert!(row.contains(&format!("<td>{}</td>", c.series)), "{row}");
        assert!(row.contains(if c.met { "✓ met" } else { "✗ not met" }), "{row}");
        assert!(row.contains(if c.default { "default (common practice)" } else { "set by user" }));
    }
    assert!(rows[0].contains("≥\u{a0}3\u{a0}dec") && rows[0].contains("2.31\u{a0}dec"));
    assert!(rows[5].contains("≤\u{a0}1e-4") && rows[5].contains("0.0025"));
    assert!(rows[8].contains("n/a"), "a NaN value shows as n/a");
    assert!(rows[1].contains("it 2\u{202f}100"), "held since");

    // Residual plot: one path per residual series, targets dashed, restart marked.
    let res = section(&html, "residuals");
    assert_eq!(res.matches("<path").count(), RESIDUALS.len());
    assert!(res.contains("stroke-dasharray=\"5 4\""), "threshold lines dashed");
    assert!(res.contains("p ≤\u{a0}1e-4"), "below target labelled");
    assert!(
        res.contains(">p, Ux, Uy, k, omega ≥\u{a0}3\u{a0}dec<"),
        "equal drop targets share a label"
    );
    assert!(res.contains(">restart<"));

    // Monitors: a plot each with window, mean and CI; numbers in the table.
    let mon = section(&html, "monitors");
    assert_eq!(mon.matches("<svg class=\"plot\"").count(), 2);
    assert!(mon.contains("fill-opacity=\"0.25\""), "final window shaded");
    assert!(mon.contains("95 % CI of the mean"));
    // The mean to the precision its CI supports: ±6.1e-6 keeps one digit (PDG rule).
    assert!(mon.contains("0.031206\u{a0}±\u{a0}6e-6"), "mean ± CI");
    // One rule for every monitor plot: the whole history and the window zoomed, each with
    // mean, tolerance band and CI.
    assert_eq!(mon.matches(">whole history<").count(), 2);
    assert_eq!(mon.matches(">final window, zoomed (it 4\u{202f}371–4\u{202f}870)<").count(), 2);
    assert!(mon.contains("tolerance band ± 0.25 % (band criterion)"));
    assert!(mon.contains("start-up to it\u{a0}1\u{202f}850"), "transient end");
    assert!(mon.contains("2.1e-6") && mon.contains("0.0312003"), "iterative error, extrapolated");

    // Findings with evidence.
    let fnd = section(&html, "findings");
    assert!(fnd.contains("stall (deciding)"));
    // (a number word with a minus is kept on one line by a no-wrap span)
    assert!(fnd.contains("&lt; <span class=\"nw\">1e-12</span>"), "tiny p-value");
    assert!(
        fnd.contains("232 it") && fnd.contains("0.49\u{a0}%"),
        "period, amplitude in % for a monitor"
    );

    // Grid convergence (Celik et al. 2008 case 3 values, oscillatory).
    let gci = section(&html, "grid-convergence");
    // Printed as Celik et al. (2008) print case 3: p = 1.5(1), φ_ext = 6.0269.
    assert!(gci.contains("p = 1.51 "), "apparent order, three significant digits");
    assert!(gci.contains("<td class=\"num\">6.0269</td>"), "extrapolated value");
    assert!(gci.contains("6.004\u{a0}±\u{a0}0.028"), "fine value with its GCI uncertainty");
    assert!(gci.contains("oscillatory"));
    assert!(gci.contains("18\u{202f}000 cells"));

    // Log text escaped, control characters gone.
    let src = section(&html, "sources");
    assert!(src.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(src.contains("&lt;max&gt; &amp;  [31mclipped "));

    // Provenance: version, command line, parser hash, file size, mtime and content hash.
    let prov = section(&html, "provenance");
    assert!(prov.contains(env!("CARGO_PKG_VERSION")));
    assert!(prov.contains("settle report &#39;wing a4/settle.toml&#39;"));
    assert!(prov.contains("2026-01-01T00:00:00Z"));
    let parser_sha: String = Sha256::digest(b"[parser]\nname = \"tarn-lines\"\n")
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert!(prov.contains(&parser_sha));
    assert!(prov.contains(&fx.log_sha), "source file hash");
    assert!(prov.contains(&format!("{} B", fx.log_len)));
    assert!(prov.contains("tarn.log"));
    assert!(prov.contains("residual_below") && prov.contains("set by user"));
}

#[test]
fn long_runs_stay_small() {
    let fx = Fixture::new(200_000);
    let html = render_html(&fx.input());
    assert!(html.len() < 600_000, "HTML of a 200 000-iteration run is {} bytes", html.len());
    check_markup(&html).unwrap_or_else(|e| panic!("markup: {e}"));
}

#[test]
fn markdown_writes_its_svg_files_beside_it() {
    let fx = Fixture::new(4870);
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("wing a4.md");
    let written = write_report(&path, &fx.input()).expect("write markdown");
    assert_eq!(written[0], path);
    assert_eq!(written.len(), 4, "report + residual plot + two monitor plots: {written:?}");
    let md = std::fs::read_to_string(&path).expect("read md");
    keep_sample("wing a4.md", &md);
    no_control_characters(&md);
    for p in &written[1..] {
        assert_eq!(p.parent(), Some(dir.path()), "SVG beside the report");
        let name = p.file_name().and_then(|n| n.to_str()).expect("utf-8 name");
        assert!(name.starts_with("wing-a4-") && name.ends_with(".svg"), "{name}");
        assert!(md.contains(&format!("]({name})")), "markdown links {name}");
        let svg = std::fs::read_to_string(p).expect("read svg");
        keep_sample(name, &svg);
        assert!(svg.starts_with("<?xml"));
        assert!(svg.contains("xmlns=\"http://www.w3.org/2000/svg\""));
        check_markup(&svg).unwrap_or_else(|e| panic!("{name}: {e}"));
        no_control_characters(&svg);
    }
    let residual_svg = std::fs::read_to_string(&written[1]).expect("read");
    assert_eq!(residual_svg.matches("<path").count(), RESIDUALS.len());
    assert!(md.contains("**STALLED**"));
    assert!(md.contains("not proof that the solution is correct"));
    assert!(md.contains("| drift over") || md.contains("monitor drift over the window"));
    assert!(md.contains("wing-a4 \\<aoa=4°\\> \\& \"flaps\""), "run name escaped");
    assert!(md.contains("\\<script\\>alert(1)\\</script\\>"));
    assert!(md.contains(&fx.log_sha));
    // Every criterion is one table row.
    let crit = &md[md.find("## Criteria").expect("criteria")..md.find("## Residual").expect("res")];
    assert_eq!(
        crit.lines().filter(|l| l.starts_with("| ")).count(),
        1 + fx.judgement.criteria.len()
    );

    // Pure renderer: same files, chosen prefix.
    let (_, files) = render_markdown(&fx.input(), "x-");
    assert_eq!(files[0].0, "x-residuals.svg");
    assert_eq!(files[1].0, "x-monitor-1-Cd.svg");
}

#[test]
fn json_has_stable_keys_and_nulls_for_missing_numbers() {
    let fx = Fixture::new(4870);
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("report.JSON");
    write_report(&path, &fx.input()).expect("write json");
    let text = std::fs::read_to_string(&path).expect("read");
    let v: serde_json::Value = serde_json::from_str(&text).expect("valid JSON");
    let keys: Vec<&str> = v.as_object().expect("object").keys().map(String::as_str).collect();
    let mut want = TOP_LEVEL_KEYS.to_vec();
    want.sort_unstable();
    assert_eq!(keys, want);
    assert_eq!(v["format"], "settle-report");
    assert_eq!(v["format_version"], 1);
    assert_eq!(v["verdict"], "stalled");
    assert_eq!(v["since"], 3140);
    assert_eq!(v["why"][0]["kind"], "stall");
    assert_eq!(v["why"][0]["cause"], true);
    assert_eq!(v["criteria"].as_array().map(Vec::len), Some(fx.judgement.criteria.len()));
    assert_eq!(v["criteria"][8]["value"], serde_json::Value::Null, "NaN becomes null");
    assert_eq!(v["criteria"][0]["comparison"], "at_least");
    assert_eq!(v["monitors"][0]["window"][1], 4870);
    assert_eq!(v["findings"][1]["period"], 232.5);
    let series = v["series"].as_array().expect("series");
    assert_eq!(series.len(), 8);
    assert_eq!(series[0]["restarts"][0], 1361, "restart from 1 461 back to 1 361");
    assert_eq!(v["sources"][0]["errors"], 1);
    assert_eq!(v["grid_convergence"]["oscillatory"], true);
    assert_eq!(v["grid_convergence"]["grids"][0]["name"], "fine");
    assert_eq!(v["provenance"]["sources"][0]["sha256"], fx.log_sha.as_str());
    assert_eq!(v["provenance"]["sources"][0]["size"], fx.log_len);
    assert_eq!(v["provenance"]["analysed_at"], "2026-01-01T00:00:00Z");
    assert_eq!(v["provenance"]["criteria"][1]["key"], "residual_below");
    assert_eq!(v["provenance"]["criteria"][1]["default"], false);
    assert!(v["safety"].as_str().expect("safety").contains("qualified engineers"));
    // The pure function gives the same document.
    let pure = serde_json::to_string_pretty(&render_json(&fx.input())).expect("serialises");
    assert_eq!(pure + "\n", text);
}

#[test]
fn unknown_extension_is_a_clear_error() {
    let fx = Fixture::new(600);
    let err = write_report(Path::new("out/report.pdf"), &fx.input()).unwrap_err();
    assert!(matches!(err, ReportError::UnknownFormat { .. }));
    let msg = err.to_string();
    assert!(
        msg.contains("out/report.pdf") && msg.contains(".html") && msg.contains(".json"),
        "{msg}"
    );
    let err = write_report(Path::new("/nonexistent-dir/r.html"), &fx.input()).unwrap_err();
    assert!(err.to_string().contains("/nonexistent-dir/r.html"), "{err}");
}

#[test]
fn empty_run_and_default_judgement_still_render() {
    let run = RunStore::new("empty");
    let judgement = Judgement::default();
    let criteria = Criteria { drift: Some(0.2), ..Default::default() };
    let provenance = Provenance::default();
    let input = ReportInput {
        run: &run,
        judgement: &judgement,
        criteria: &criteria,
        provenance: &provenance,
        mesh: None,
    };
    let html = render_html(&input);
    check_markup(&html).unwrap_or_else(|e| panic!("{e}"));
    assert!(html.contains("no residual values were read"));
    assert!(html.contains("No monitors were read"));
    assert!(!html.contains("grid-convergence"));
    // No criteria rows recorded in the provenance: they come from the criteria themselves.
    let prov = section(&html, "provenance");
    assert!(
        prov.contains("<td>drift</td><td class=\"num\">0.2 %</td><td>set by user</td>"),
        "{prov}"
    );
    assert!(prov.contains("<td>residual_drop</td><td class=\"num\">3 dec</td><td>default"));
    let v = render_json(&input);
    assert_eq!(v["grid_convergence"], serde_json::Value::Null);
    assert_eq!(v["verdict"], "converging");
}

#[test]
fn restart_from_a_new_file_is_marked() {
    let mut src = SourceStore::new("run.log.*", "tarn-lines");
    src.apply([series(0, "p", Role::Residual)]);
    for it in 1..=50 {
        src.apply([Output::Record(Record {
            iteration: Some(it),
            values: vec![(0, 1.0 / it as f64)],
            ..Default::default()
        })]);
    }
    src.restart(SegmentReason::NewFile { path: PathBuf::from("run.log.2") });
    src.apply([series(3, "p", Role::Residual)]);
    for it in 51..=80 {
        src.apply([Output::Record(Record {
            iteration: Some(it),
            values: vec![(3, 1.0 / it as f64)],
            ..Default::default()
        })]);
    }
    let mut run = RunStore::new("r");
    run.sources.push(src);
    let j = Judgement::default();
    let c = Criteria::default();
    let p = Provenance::default();
    let html = render_html(&ReportInput {
        run: &run,
        judgement: &j,
        criteria: &c,
        provenance: &p,
        mesh: None,
    });
    let res = section(&html, "residuals");
    assert_eq!(res.matches("<path").count(), 1);
    assert_eq!(res.matches(">restart<").count(), 1);
}

/// Keep a copy of the sample for looking at it (see the module docs).
fn keep_sample(name: &str, text: &str) {
    if let Some(dir) = std::env::var_os("SETTLE_REPORT_SAMPLE_DIR") {
        let dir = PathBuf::from(dir);
        std::fs::create_dir_all(&dir).expect("create sample dir");
        std::fs::write(dir.join(name), text).expect("write sample");
    }
}

#[test]
fn hostile_values_and_names_stay_well_formed() {
    // Non-finite, zero and negative residuals; names with markup and control characters.
    let mut src = SourceStore::new("a<b>.log", "p\"q");
    src.apply([
        series(0, "res<p>&\u{1b}[0m", Role::Residual),
        series(1, "Cd\u{0}'x'", Role::Monitor),
    ]);
    let vals = [1.0, f64::NAN, 0.5, 0.0, -1.0, f64::INFINITY, 1e-300, 0.25];
    for (k, v) in vals.iter().enumerate() {
        src.apply([Output::Record(Record {
            iteration: Some(k as i64 + 1),
            values: vec![(0, *v), (1, if k == 3 { f64::NAN } else { 1.0 })],
            ..Default::default()
        })]);
    }
    let mut run = RunStore::new("r\u{7}");
    run.sources.push(src);
    let j = Judgement {
        monitors: vec![MonitorSummary {
            series: "Cd\u{0}'x'".into(),
            mean: 1.0,
            ci_half: f64::INFINITY,
            window_first: 1,
            window_last: 8,
            extrapolated: Some(1e300),
            ..Default::default()
        }],
        ..Default::default()
    };
    let c = Criteria::default();
    let p = Provenance::default();
    let input = ReportInput { run: &run, judgement: &j, criteria: &c, provenance: &p, mesh: None };
    let html = render_html(&input);
    check_markup(&html).unwrap_or_else(|e| panic!("{e}"));
    no_control_characters(&html);
    assert!(html.contains("res&lt;p&gt;&amp; [0m"));
    assert!(html.contains("non-finite value near iteration"), "NaN marked, not hidden");
    assert!(html.contains("(off scale)"), "a wild extrapolated value does not wreck the scale");
    let (md, files) = render_markdown(&input, "h-");
    no_control_characters(&md);
    for (name, svg) in &files {
        check_markup(svg).unwrap_or_else(|e| panic!("{name}: {e}"));
        no_control_characters(svg);
    }
    assert_eq!(files[1].0, "h-monitor-1-Cd--x-.svg");
    let v = render_json(&input);
    assert_eq!(v["series"][0]["last_value"], 0.25);
    assert_eq!(v["monitors"][0]["ci_half"], serde_json::Value::Null);
}

/// A diverging run that ends in a crash, with one finding: the crash sentence of the judge
/// names an event rule as `code`. No view shows the backticks; counts are singular.
#[test]
fn crash_text_plurals_and_the_monitor_table_shape() {
    let mut fx = Fixture::new(600);
    fx.judgement.verdict = Verdict::Diverging;
    fx.judgement.causes = vec![0];
    fx.judgement.findings = vec![Finding {
        kind: FindingKind::Crash,
        first: 600,
        last: 600,
        statistic: "error_at_end".into(),
        value: 1.0,
        supports: Some(Verdict::Diverging),
        detail: "the log ends in an error at it 600 (`stack_trace`: tarn::limiter) with no \
                 end-of-run mark"
            .into(),
        ..Default::default()
    }];
    let html = render_html(&fx.input());
    check_markup(&html).unwrap_or_else(|e| panic!("markup: {e}"));
    let why = section(&html, "why");
    assert!(why.contains("(<code>stack_trace</code>: tarn::limiter)"), "{why}");
    let fnd = section(&html, "findings");
    assert!(fnd.contains("<code>stack_trace</code>"));
    assert!(fnd.contains("1 finding (none informational); 1 decided the verdict."), "{fnd}");
    assert!(!html.contains('`'), "no literal backticks in the HTML");

    let (md, _) = render_markdown(&fx.input(), "r-");
    assert!(md.contains("(` stack_trace `: tarn::limiter)"), "a Markdown code span");
    assert!(md.contains("1 finding (none informational)"));

    // The monitor table: eight columns (the transient joins the window cell), so it fits
    // the page column; numbers keep their unit on the same line.
    let mon = section(&html, "monitors");
    let head = &mon[mon.find("<thead>").expect("head")..mon.find("</thead>").expect("end")];
    assert_eq!(head.matches("<th>").count(), 8, "{head}");
    assert!(mon.contains("<table class=\"monitors\">"));
    assert!(html.contains("table.monitors td.num { white-space: normal; }"));
}

/// The judge's evidence in the report's tables: the estimate to target with its range, the
/// window a monitor was judged over, a near-zero reference, a round-off monitor not judged
/// (hand-built judgement of the invented tarn case; the rendering is under test).
#[test]
fn eta_range_window_reference_and_round_off_in_the_tables() {
    use settle::judge::Reference;
    let mut fx = Fixture::new(5000);
    fx.judgement.verdict = Verdict::Converging;
    let p = fx.judgement.residuals.iter_mut().find(|r| r.series == "p").expect("p");
    p.eta_iterations = Some(912.0);
    p.eta_range = Some((604.0, 1_437.0));
    let cd = &mut fx.judgement.monitors[0];
    cd.window = 500;
    cd.reference = Reference::NearZero;
    cd.reference_value = 0.018_34;
    // Cl stands in for a round-off-only monitor.
    let cl = fx.judgement.monitors.iter_mut().find(|m| m.series == "Cl").expect("Cl");
    *cl = MonitorSummary { series: "Cl".into(), round_off: true, ..Default::default() };
    let html = render_html(&fx.input());
    check_markup(&html).unwrap_or_else(|e| panic!("markup: {e}"));
    let res = section(&html, "residuals");
    assert!(res.contains("≈ 910 (600 … 1400)"), "{res}");
    let mon = section(&html, "monitors");
    assert!(mon.contains("500\u{a0}it"), "the window's iterations: {mon}");
    assert!(mon.contains("relative to 0.0183 (mean near zero)"), "{mon}");
    assert!(mon.contains("tolerance band ± 0.25 % relative to 0.0183 (mean near zero)"), "{mon}");
    let cz = &mon[mon.find("<td>Cl</td>").expect("a Cl row")..];
    let cz = &cz[..cz.find("</tr>").expect("row end")];
    assert!(cz.contains("not judged (round-off only)"), "{cz}");
    assert!(!cz.contains("n/a"), "{cz}");
}
