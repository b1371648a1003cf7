//! The hand-built run of the invented solver "tarn" the report tests render: residuals, two
//! monitors, events with hostile text, a judgement with every kind of number, provenance and a
//! three-grid study (Celik et al. 2008, case 3 values). Numbers are invented for the tests.

use std::io::Write as _;
use std::time::{Duration, UNIX_EPOCH};

use settle::judge::{
    Comparison, Criteria, CriterionResult, Finding, FindingKind, Judgement, MonitorSummary,
    ResidualSummary, Verdict,
};
use settle::record::{Event, LineStats, Output, Record, Role, SeriesInfo, Severity};
use settle::report::{GridPoint, GridSize, MeshStudy, ParserProvenance, Provenance, ReportInput};
use settle::run::{RunStore, SourceStore};
use sha2::{Digest, Sha256};

pub const RESIDUALS: [&str; 5] = ["p", "Ux", "Uy", "k", "omega"];

/// Deterministic noise in [-1, 1) (a 64-bit LCG; no statistical claim).
struct Noise(u64);
impl Noise {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
    }
}

pub fn series(id: u32, name: &str, role: Role) -> Output {
    Output::Series(SeriesInfo { id, name: name.into(), role })
}

/// A stalled steady run: five residuals, two monitors, one restart going back 100 iterations.
pub fn build_run(iterations: i64) -> RunStore {
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

pub struct Fixture {
    pub run: RunStore,
    pub judgement: Judgement,
    pub criteria: Criteria,
    pub provenance: Provenance,
    pub mesh: MeshStudy,
    pub log_sha: String,
    pub log_len: u64,
    _dir: tempfile::TempDir,
}

impl Fixture {
    pub fn new(iterations: i64) -> Fixture {
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

    pub fn input(&self) -> ReportInput<'_> {
        ReportInput {
            run: &self.run,
            judgement: &self.judgement,
            criteria: &self.criteria,
            provenance: &self.provenance,
            mesh: Some(&self.mesh),
        }
    }
}
