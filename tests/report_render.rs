//! The report writers on a hand-built run of the invented solver "tarn": HTML well-formed and
//! self-contained, one SVG path per residual series, every criterion and the provenance hashes
//! present, Markdown with its SVG files beside it, JSON with stable keys.
//!
//! The run, findings and numbers are synthetic (invented for this test). Set
//! `SETTLE_REPORT_SAMPLE_DIR` to a folder to also keep the rendered sample there (used by
//! `scripts/render-report.sh` to look at it).

use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::time::{Duration, UNIX_EPOCH};

use settle::judge::{
    Comparison, Criteria, CriterionResult, Finding, FindingKind, Judgement, MonitorSummary,
    ResidualSummary, Verdict,
};
use settle::record::{Event, LineStats, Output, Record, Role, SeriesInfo, Severity};
use settle::report::{
    GridPoint, GridSize, MeshStudy, ParserProvenance, Provenance, ReportError, ReportInput,
    json::TOP_LEVEL_KEYS, render_html, render_json, render_markdown, write_report,
};
use settle::run::{RunStore, SegmentReason, SourceStore};
use sha2::{Digest, Sha256};

const RESIDUALS: [&str; 5] = ["p", "Ux", "Uy", "k", "omega"];

/// Deterministic noise in [-1, 1) (a 64-bit LCG; no statistical claim).
struct Noise(u64);
impl Noise {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
    }
}

fn series(id: u32, name: &str, role: Role) -> Output {
    Output::Series(SeriesInfo { id, name: name.into(), role })
}

/// A stalled steady run: five residuals, two monitors, one restart going back 100 iterations.
fn build_run(iterations: i64) -> RunStore {
    let mut src = SourceStore::new("cases/wing-a4/tarn.log", "tarn-lines");
    let mut out = Vec::new();
    for (i, r) in RESIDUALS.iter().enumerate() {
        out.push(series(i as u32, r, Role::Residual));
    }
    out.push(series(5, "Cd", Role::Monitor));
    out.push(series(6, "Cl", Role::Monitor));
    out.push(series(7, "continuity", Role::Indicator));
    let mut noise = Noise(7);
    let restart_at = iterations * 3 / 10;
    let push = |out: &mut Vec<Output>, it: i64, noise: &mut Noise| {
        let x = it as f64;
        let mut values = Vec::new();
        for (i, _) in RESIDUALS.iter().enumerate() {
            let rate = 1.0 + 0.3 * i as f64;
            // Falls, then flattens on a plateau (a stall for p).
            let floor = if i == 0 { -2.6 } else { -4.5 - 0.2 * i as f64 };
            let l =
                (-(x / 900.0) * rate).max(floor) + 0.05 * noise.next() + 0.3 * (-x / 40.0).exp();
            values.push((i as u32, 10f64.powf(l)));
        }
        let cd = 0.0312 + 0.004 * (-x / 700.0).exp() + 0.00002 * noise.next();
        let cl = 0.41 + 0.05 * (-x / 500.0).exp() + 0.002 * (x / 37.0).sin();
        values.push((5, cd));
        values.push((6, cl));
        values.push((7, 1e-6 * (1.0 + 0.1 * noise.next())));
        out.push(Output::Record(Record {
            iteration: Some(it),
            time: None,
            values,
            line: it as u64 * 12,
        }));
    };
    for it in 1..=restart_at {
        push(&mut out, it, &mut noise);
    }
    out.push(Output::Event(Event {
        severity: Severity::Warning,
        rule: "bounding".into(),
        message: "bounding k, min: -1.2e-9 <max> & \u{1b}[31mclipped\u{7}".into(),
        line: 4000,
        iteration: None,
    }));
    src.apply(out);
    src.set_stats(LineStats { lines: 40_000, used: 36_000, skipped: 3, ignored: 3997 });
    let mut out = Vec::new();
    for it in (restart_at - 100)..=iterations {
        push(&mut out, it, &mut noise);
    }
    out.push(Output::Event(Event {
        severity: Severity::Error,
        rule: "crash".into(),
        message: "<script>alert(1)</script> floating point exception".into(),
        line: 90_000,
        iteration: Some(iterations),
    }));
    src.apply(out);
    let mut run = RunStore::new("wing-a4 <aoa=4°> & \"flaps\"");
    run.sources.push(src);
    run
}

fn criterion(
    name: &str,
    series: &str,
    cmp: Comparison,
    thr: f64,
    val: f64,
    unit: &str,
    met: bool,
) -> CriterionResult {
    CriterionResult {
        name: name.into(),
        series: series.into(),
        comparison: cmp,
        threshold: thr,
        value: val,
        unit: unit.into(),
        met,
        since: met.then_some(2100),
        default: name != "below",
        ..Default::default()
    }
}

fn build_judgement(iterations: i64) -> Judgement {
    let mut criteria: Vec<CriterionResult> = RESIDUALS
        .iter()
        .map(|r| {
            let drop = if *r == "p" { 2.31 } else { 4.2 };
            criterion("drop", r, Comparison::AtLeast, 3.0, drop, "dec", drop >= 3.0)
        })
        .collect();
    criteria.push(criterion("below", "p", Comparison::AtMost, 1e-4, 2.5e-3, "", false));
    criteria.push(criterion("drift", "Cd", Comparison::AtMost, 0.1, 0.04, "%", true));
    criteria.push(criterion("band", "Cd", Comparison::AtMost, 0.5, 0.21, "%", true));
    criteria.push(criterion("drift", "Cl", Comparison::AtMost, 0.1, f64::NAN, "%", false));
    criteria.push(criterion("band", "Cl", Comparison::AtMost, 0.5, 0.98, "%", false));
    let findings = vec![
        Finding {
            kind: FindingKind::Stall,
            series: Some("p".into()),
            first: 3140,
            last: iterations,
            statistic: "slope_dec_per_kit".into(),
            value: -0.02,
            threshold: Some(-0.1),
            p_value: Some(0.41),
            supports: Some(Verdict::Stalled),
            detail:
                "p has not fallen significantly for 1 730 iterations, 1.1 decades above its target"
                    .into(),
            ..Default::default()
        },
        Finding {
            kind: FindingKind::Oscillation,
            series: Some("Cl".into()),
            first: iterations - 500,
            last: iterations,
            statistic: "fisher_g".into(),
            value: 0.62,
            threshold: Some(0.13),
            p_value: Some(1e-30),
            period: Some(232.5),
            amplitude: Some(0.49),
            supports: Some(Verdict::Oscillating),
            detail: "Cl swings with a period of about 232 iterations".into(),
        },
        Finding {
            kind: FindingKind::Restart,
            first: 1400,
            last: 1400,
            statistic: "iteration_back".into(),
            value: 100.0,
            detail: "the solver restarted at iteration 1 400".into(),
            ..Default::default()
        },
    ];
    Judgement {
        verdict: Verdict::Stalled,
        since: Some(3140),
        causes: vec![0],
        findings,
        criteria,
        residuals: RESIDUALS
            .iter()
            .map(|r| ResidualSummary {
                series: (*r).into(),
                last: if *r == "p" { 2.5e-3 } else { 3e-5 },
                peak: 1.9,
                drop_dec: if *r == "p" { 2.31 } else { 4.2 },
                slope_dec_per_kit: -0.02,
                slope_ci: (-0.05, 0.01),
                eta_iterations: None,
                ..Default::default()
            })
            .collect(),
        monitors: vec![
            MonitorSummary {
                series: "Cd".into(),
                last: 0.031204,
                mean: 0.0312055,
                ci_half: 0.0000061,
                window_first: iterations - 499,
                window_last: iterations,
                transient_end: Some(1850),
                drift_pct: 0.04,
                band_pct: 0.21,
                iterative_error: Some(2.1e-6),
                extrapolated: Some(0.0312003),
                ..Default::default()
            },
            MonitorSummary {
                series: "Cl".into(),
                last: 0.4113,
                mean: 0.41002,
                ci_half: 0.0011,
                window_first: iterations - 499,
                window_last: iterations,
                transient_end: Some(1200),
                drift_pct: f64::NAN,
                band_pct: 0.98,
                iterative_error: None,
                extrapolated: None,
                ..Default::default()
            },
        ],
        iterations,
    }
}

struct Fixture {
    run: RunStore,
    judgement: Judgement,
    criteria: Criteria,
    provenance: Provenance,
    mesh: MeshStudy,
    log_sha: String,
    log_len: u64,
    _dir: tempfile::TempDir,
}

impl Fixture {
    fn new(iterations: i64) -> Fixture {
        let dir = tempfile::tempdir().expect("tempdir");
        let log = dir.path().join("tarn.log");
        let mut f = std::fs::File::create(&log).expect("create log");
        for i in 0..20_000 {
            writeln!(f, "tarn it {i} p 1.0e-3 Ux 2.0e-4").expect("write log");
        }
        drop(f);
        let bytes = std::fs::read(&log).expect("read back");
        let log_sha: String = Sha256::digest(&bytes).iter().map(|b| format!("{b:02x}")).collect();
        let criteria = Criteria { residual_below: Some(1e-4), ..Default::default() };
        let mut provenance = Provenance::collect(
            vec!["settle".into(), "report".into(), "wing a4/settle.toml".into()],
            vec![ParserProvenance::new(
                "tarn-lines",
                "built-in",
                "[parser]\nname = \"tarn-lines\"\n",
            )],
            std::slice::from_ref(&log),
            &criteria,
        )
        .expect("collect provenance");
        provenance.analysed_at = UNIX_EPOCH + Duration::from_secs(1_767_225_600);
        let g = |name: &str, n: u64, v: f64| GridPoint {
            name: name.into(),
            size: GridSize::Cells(n),
            value: v,
            iterative_error: Some(2e-6),
        };
        let mesh = MeshStudy {
            monitor: "Cd".into(),
            grids: [g("coarse", 980, 6.0909), g("fine", 18000, 6.0042), g("medium", 4500, 5.9624)],
            dim: 2,
        };
        Fixture {
            run: build_run(iterations),
            judgement: build_judgement(iterations),
            criteria,
            provenance,
            mesh,
            log_sha,
            log_len: bytes.len() as u64,
            _dir: dir,
        }
    }

    fn input(&self) -> ReportInput<'_> {
        ReportInput {
            run: &self.run,
            judgement: &self.judgement,
            criteria: &self.criteria,
            provenance: &self.provenance,
            mesh: Some(&self.mesh),
        }
    }
}

const VOID: [&str; 14] = [
    "area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "param", "source",
    "track", "wbr",
];

/// A small markup checker: every element closed in order (void elements and `/>` allowed),
/// every attribute value quoted, every `&` an entity, no stray `<`. Returns the element names
/// in document order.
fn check_markup(doc: &str) -> Result<Vec<String>, String> {
    let b = doc.as_bytes();
    let mut stack: Vec<String> = Vec::new();
    let mut seen = Vec::new();
    let mut i = 0;
    let at =
        |i: usize| format!("byte {i}: …{}…", &doc[i.saturating_sub(40)..(i + 40).min(doc.len())]);
    while i < b.len() {
        match b[i] {
            b'<' => {
                if doc[i..].starts_with("<!--") {
                    i += doc[i..].find("-->").ok_or_else(|| at(i))? + 3;
                    continue;
                }
                if doc[i..].starts_with("<!DOCTYPE") || doc[i..].starts_with("<?xml") {
                    i += doc[i..].find('>').ok_or_else(|| at(i))? + 1;
                    continue;
                }
                let end = i + doc[i..].find('>').ok_or_else(|| at(i))?;
                let tag = &doc[i + 1..end];
                if let Some(name) = tag.strip_prefix('/') {
                    let open = stack
                        .pop()
                        .ok_or_else(|| format!("close {name} with nothing open, {}", at(i)))?;
                    if open != name.trim() {
                        return Err(format!("</{name}> closes <{open}>, {}", at(i)));
                    }
                } else {
                    let self_closing = tag.ends_with('/');
                    let tag = tag.trim_end_matches('/');
                    let (name, mut rest) = tag.split_once(char::is_whitespace).unwrap_or((tag, ""));
                    if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric()) {
                        return Err(format!("bad element name {name:?}, {}", at(i)));
                    }
                    // Attributes: name="value" only.
                    loop {
                        rest = rest.trim_start();
                        if rest.is_empty() {
                            break;
                        }
                        let eq = rest.find('=').ok_or_else(|| {
                            format!("attribute without value in <{name}>, {}", at(i))
                        })?;
                        let an = &rest[..eq];
                        if an.is_empty()
                            || !an
                                .chars()
                                .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == ':')
                        {
                            return Err(format!("bad attribute name {an:?}, {}", at(i)));
                        }
                        let v = &rest[eq + 1..];
                        if !v.starts_with('"') {
                            return Err(format!("unquoted attribute {an} in <{name}>, {}", at(i)));
                        }
                        let close = v[1..].find('"').ok_or_else(|| at(i))?;
                        if v[1..1 + close].contains('<') {
                            return Err(format!("'<' inside attribute {an}, {}", at(i)));
                        }
                        rest = &v[close + 2..];
                    }
                    seen.push(name.to_string());
                    if name == "style" || name == "script" {
                        let close = format!("</{name}>");
                        let body_end = end + doc[end..].find(&close).ok_or_else(|| at(i))?;
                        i = body_end + close.len();
                        continue;
                    }
                    if !self_closing && !VOID.contains(&name) {
                        stack.push(name.to_string());
                    }
                }
                i = end + 1;
            }
            b'&' => {
                let semi = doc[i..].find(';').ok_or_else(|| format!("bare &, {}", at(i)))?;
                let ent = &doc[i + 1..i + semi];
                let ok = (ent.starts_with('#')
                    && ent[1..].chars().all(|c| c.is_ascii_digit())
                    && ent.len() > 1)
                    || (!ent.is_empty()
                        && ent.len() < 8
                        && ent.chars().all(|c| c.is_ascii_alphabetic()));
                if !ok {
                    return Err(format!("bad entity &{ent};, {}", at(i)));
                }
                i += semi + 1;
            }
            b'>' => return Err(format!("stray '>', {}", at(i))),
            _ => i += 1,
        }
    }
    if let Some(open) = stack.pop() {
        return Err(format!("<{open}> never closed"));
    }
    Ok(seen)
}

#[test]
fn markup_checker_catches_mistakes() {
    assert!(check_markup("<p><b>x</b></p>").is_ok());
    assert!(check_markup("<p><b>x</p></b>").is_err());
    assert!(check_markup("<p class=x>y</p>").is_err());
    assert!(check_markup("<p>a & b</p>").is_err());
    assert!(check_markup("<p>unclosed").is_err());
    assert!(check_markup("<br><svg><line x1=\"0\"/></svg>").is_ok());
}

/// The part of `doc` from the element with `id="section"` to its closing tag.
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
    // Safety wording (DESIGN §9).
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
    assert!(rows[0].contains("≥ 3 dec") && rows[0].contains("2.31 dec"));
    assert!(rows[5].contains("≤ 1e-4") && rows[5].contains("0.0025"));
    assert!(rows[8].contains("n/a"), "a NaN value shows as n/a");
    assert!(rows[1].contains("it 2\u{202f}100"), "held since");

    // Residual plot: one path per residual series, targets dashed, restart marked.
    let res = section(&html, "residuals");
    assert_eq!(res.matches("<path").count(), RESIDUALS.len());
    assert!(res.contains("stroke-dasharray=\"5 4\""), "threshold lines dashed");
    assert!(res.contains("p ≤ 1e-4"), "below target labelled");
    assert!(res.contains(">p, Ux, Uy, k, omega ≥ 3 dec<"), "equal drop targets share a label");
    assert!(res.contains(">restart<"));

    // Monitors: a plot each with window, mean and CI; numbers in the table.
    let mon = section(&html, "monitors");
    assert_eq!(mon.matches("<svg class=\"plot\"").count(), 2);
    assert!(mon.contains("fill-opacity=\"0.25\""), "final window shaded");
    assert!(mon.contains("95 % CI of the mean"));
    assert!(mon.contains("0.0312055 ± 6.1e-6"));
    assert!(mon.contains("it 1\u{202f}850"), "transient end");
    assert!(mon.contains("2.1e-6") && mon.contains("0.0312003"), "iterative error, extrapolated");

    // Findings with evidence.
    let fnd = section(&html, "findings");
    assert!(fnd.contains("stall (deciding)"));
    assert!(fnd.contains("&lt; 1e-12"), "tiny p-value");
    assert!(
        fnd.contains("232.5 it") && fnd.contains("0.49 %"),
        "period, amplitude in % for a monitor"
    );

    // Grid convergence (Celik et al. 2008 case 3 values, oscillatory).
    let gci = section(&html, "grid-convergence");
    assert!(gci.contains("1.50769"), "apparent order");
    assert!(gci.contains("oscillatory"));
    assert!(gci.contains("18000 cells"));

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
