//! Verdicts on small synthetic runs generated here (seeded). The histories imitate what real
//! solvers print: normalised residuals starting at 1, a start-up rise, noise in
//! log space with AR(1) autocorrelation, a floor set by the linear solver, monitors that
//! settle exponentially with correlated noise. The numbers are invented for these scenarios.

use std::borrow::Cow;

use settle::judge::{
    Criteria, FindingKind, Judgement, NothingToJudge, Reference, RunInput, SeriesCriteria,
    SeriesInput, Verdict, judge, try_judge,
};
use settle::record::{Event, Role, Severity};
use settle::synth::{self, Scenario};

#[path = "support/rng.rs"]
mod rng;
use rng::Rng;

/// A residual `10^(level(i) + noise)`, noise in decades.
fn residual(rng: &mut Rng, n: usize, noise_dec: f64, level: impl Fn(f64) -> f64) -> Vec<f64> {
    let e = rng.ar1_sd(n, 0.8, noise_dec);
    (0..n).map(|i| 10f64.powf(level(i as f64) + e[i])).collect()
}

/// A monitor `mean(i)·(1 + noise)`, relative noise.
fn monitor(rng: &mut Rng, n: usize, rel_noise: f64, mean: impl Fn(f64) -> f64) -> Vec<f64> {
    let e = rng.ar1_sd(n, 0.9, rel_noise);
    (0..n).map(|i| mean(i as f64) * (1.0 + e[i])).collect()
}

/// A converging residual level: 1 at it 0, a start-up rise of half a decade over 40 it,
/// then a fall of `rate` decades per 1000 it down to a floor at `floor` decades.
fn converging(rate: f64, floor: f64) -> impl Fn(f64) -> f64 {
    move |i| {
        let rise = 0.5 * (i / 40.0).min(1.0);
        let fall = if i > 40.0 { rate * (i - 40.0) / 1000.0 } else { 0.0 };
        (rise - fall).max(floor)
    }
}

/// A settling monitor: `target·(1 + 0.2·e^{−i/τ})`.
fn settling(target: f64, tau: f64) -> impl Fn(f64) -> f64 {
    move |i| target * (1.0 + 0.2 * (-i / tau).exp())
}

/// Name, role, iterations, values, segment starts.
type Series = (String, Role, Vec<i64>, Vec<f64>, Vec<usize>);

struct Run {
    series: Vec<Series>,
    events: Vec<Event>,
    ended: bool,
}

impl Run {
    fn new() -> Run {
        Run { series: Vec::new(), events: Vec::new(), ended: false }
    }

    fn add(mut self, name: &str, role: Role, values: Vec<f64>) -> Run {
        let its: Vec<i64> = (1..=values.len() as i64).collect();
        self.series.push((name.into(), role, its, values, vec![0]));
        self
    }

    fn add_with(
        mut self,
        name: &str,
        role: Role,
        its: Vec<i64>,
        values: Vec<f64>,
        segs: Vec<usize>,
    ) -> Run {
        self.series.push((name.into(), role, its, values, segs));
        self
    }

    fn event(mut self, severity: Severity, rule: &str, iteration: Option<i64>) -> Run {
        self.events.push(Event {
            severity,
            rule: rule.into(),
            message: format!("{rule} message"),
            line: 1,
            iteration,
        });
        self
    }

    fn ended(mut self) -> Run {
        self.ended = true;
        self
    }

    fn judge_with(&self, c: &Criteria) -> Judgement {
        judge(&self.input(), c)
    }

    fn try_judge(&self) -> Result<Judgement, NothingToJudge> {
        try_judge(&self.input(), &Criteria::default())
    }

    fn input(&self) -> RunInput<'_> {
        RunInput {
            series: self
                .series
                .iter()
                .map(|(name, role, its, vals, segs)| SeriesInput {
                    name: Cow::Borrowed(name),
                    role: *role,
                    iterations: Cow::Borrowed(its),
                    values: Cow::Borrowed(vals),
                    segment_starts: segs.clone(),
                    history: None,
                })
                .collect(),
            events: self.events.iter().map(Cow::Borrowed).collect(),
            ended: self.ended,
            ended_at: None,
        }
    }

    fn judge(&self) -> Judgement {
        self.judge_with(&Criteria::default())
    }
}

fn explain(j: &Judgement) -> String {
    let mut s = format!("verdict {} since {:?} causes {:?}\n", j.verdict, j.since, j.causes);
    for f in &j.findings {
        s += &format!(
            "  {:?} {:?} [{}..{}] {:?}: {}\n",
            f.kind, f.series, f.first, f.last, f.supports, f.detail
        );
    }
    for c in &j.criteria {
        s += &format!(
            "  crit {} {} {} thr {} met {} since {:?}\n",
            c.name, c.series, c.value, c.threshold, c.met, c.since
        );
    }
    s
}

fn has(j: &Judgement, kind: FindingKind, series: &str) -> bool {
    j.findings.iter().any(|f| f.kind == kind && f.series.as_deref() == Some(series))
}

// ------------------------------------------------------------------------ scenarios

fn clean_run(seed: u64, n: usize) -> Run {
    let mut rng = Rng(seed);
    Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("res_U", Role::Residual, residual(&mut rng, n, 0.05, converging(3.0, -6.5)))
        .add("Cd", Role::Monitor, monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0)))
}

#[test]
fn clean_convergence_is_converged() {
    for seed in 1..=4 {
        let j = clean_run(seed, 4000).judge();
        assert_eq!(j.verdict, Verdict::Converged, "seed {seed}\n{}", explain(&j));
        // res_p reaches 3 decades below its peak near it 1220 and Cd's drift falls below 0.1 %
        // near it 1500: all criteria hold together from then on (checkpoint resolution 50 it).
        let since = j.since.expect("dated");
        assert!((1400..2400).contains(&since), "{since}");
        assert!(j.criteria.iter().all(|c| c.met));
    }
}

#[test]
fn plateau_is_stalled() {
    let mut rng = Rng(10);
    let n = 3000;
    // Falls to 1e-2 by it 800, then flat (1.4 decades short of the 3-decade drop).
    let res = residual(&mut rng, n, 0.05, |i| converging(2.5, -1.6)(i));
    let run = Run::new().add("res_p", Role::Residual, res).add(
        "Cd",
        Role::Monitor,
        monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0)),
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Stalled, "{}", explain(&j));
    let f = &j.findings[j.causes[0]];
    assert_eq!(f.kind, FindingKind::Stall);
    // The plateau starts near it 880; dated within a few hundred iterations.
    assert!((600..1400).contains(&f.first), "{}", explain(&j));
}

#[test]
fn residual_limit_cycles_are_oscillating_with_their_period() {
    // (period, semi-amplitude in decades); the last one spans 3.2 decades crest to trough.
    for (period, size) in [(40.0f64, 0.4), (3.0, 0.4), (2.0, 0.4), (90.0, 0.4), (25.0, 1.6)] {
        let mut rng = Rng(20 + period as u64);
        let n = 3000;
        let res = residual(&mut rng, n, 0.03, move |i| {
            let base = converging(2.5, -2.0)(i);
            let amp = if i > 1000.0 { size } else { 0.0 };
            base + amp * (2.0 * std::f64::consts::PI * i / period).cos()
        });
        let run = Run::new().add("res_p", Role::Residual, res).add(
            "Cd",
            Role::Monitor,
            monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0)),
        );
        let j = run.judge();
        assert_eq!(j.verdict, Verdict::Oscillating, "period {period}\n{}", explain(&j));
        let f = &j.findings[j.causes[0]];
        let got = f.period.expect("period");
        assert!((got - period).abs() / period < 0.1, "period {period}: {got}");
        assert!(f.p_value.expect("p") < 0.01);
    }
}

#[test]
fn monitor_oscillation_decides_unless_inside_the_tolerance() {
    for (amp, want) in [(0.02, Verdict::Oscillating), (0.001, Verdict::Converged)] {
        let mut rng = Rng(31);
        let n = 4000;
        let cd = monitor(&mut rng, n, 1e-4, move |i| {
            settling(0.0312, 250.0)(i) * (1.0 + amp * (2.0 * std::f64::consts::PI * i / 60.0).sin())
        });
        let run = Run::new()
            .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
            .add("Cd", Role::Monitor, cd);
        let j = run.judge();
        assert_eq!(j.verdict, want, "amp {amp}\n{}", explain(&j));
        if want == Verdict::Oscillating {
            let f = &j.findings[j.causes[0]];
            assert!((f.period.expect("period") - 60.0).abs() < 6.0);
            // Amplitude in percent of the mean: 2 %.
            assert!((f.amplitude.expect("amplitude") - 2.0).abs() < 0.3, "{}", explain(&j));
        }
    }
}

#[test]
fn exponential_divergence_ending_in_nan_or_overflow_is_diverging() {
    for end in [f64::NAN, f64::INFINITY] {
        let mut rng = Rng(40);
        let n = 1800;
        let mut res = residual(&mut rng, n, 0.05, |i| {
            let base = converging(2.5, -4.0)(i);
            if i > 1500.0 { base + (i - 1500.0) / 40.0 } else { base }
        });
        res.extend([end; 3]);
        let mut cd = monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0));
        cd.extend([end; 3]);
        let run = Run::new().add("res_p", Role::Residual, res).add("Cd", Role::Monitor, cd);
        let j = run.judge();
        assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
        assert!(has(&j, FindingKind::NonFinite, "res_p"));
    }
}

#[test]
fn residuals_met_while_monitor_drifts_is_suspect() {
    let mut rng = Rng(50);
    let n = 4000;
    // +1 % per 500 iterations.
    let cd = monitor(&mut rng, n, 1e-4, |i| 0.0312 * (1.0 + 0.02 * i / 1000.0));
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("Cd", Role::Monitor, cd);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    assert!(j.causes.iter().all(|&i| j.findings[i].kind == FindingKind::FalseConvergence));
    let drift = j.criteria.iter().find(|c| c.name == "drift").expect("drift criterion");
    assert!(!drift.met && (drift.value - 1.0).abs() < 0.2, "{}", explain(&j));
}

#[test]
fn still_converging_has_an_eta() {
    let mut rng = Rng(60);
    let n = 1200;
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.0, -8.0)))
        .add("Cd", Role::Monitor, monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0)));
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converging, "{}", explain(&j));
    let r = &j.residuals[0];
    // Level at 1200: 0.5 − 2.0·1.16 = −1.82; peak ≈ 10^0.5 → target −2.5: 0.68 dec at
    // 2 dec/kit ≈ 340 iterations.
    let eta = r.eta_iterations.expect("eta");
    assert!((200.0..500.0).contains(&eta), "{eta}\n{}", explain(&j));
    assert!((r.slope_dec_per_kit + 2.0).abs() < 0.3);
    assert!(r.slope_ci.0 < r.slope_dec_per_kit && r.slope_dec_per_kit < r.slope_ci.1);
}

#[test]
fn startup_rise_then_convergence_is_not_diverging() {
    let mut rng = Rng(70);
    let n = 3000;
    // Rises 1.7 decades over 120 it (flow developing), then converges.
    let level = |i: f64| {
        if i < 120.0 { 1.7 * i / 120.0 } else { (1.7 - 3.0 * (i - 120.0) / 1000.0).max(-6.0) }
    };
    for upto in [150usize, 400, 3000] {
        let mut rng2 = Rng(71);
        let run = Run::new()
            .add("res_p", Role::Residual, residual(&mut rng, upto, 0.05, level))
            .add("Cd", Role::Monitor, monitor(&mut rng2, upto, 1e-4, settling(0.0312, 250.0)));
        let j = run.judge();
        assert_ne!(j.verdict, Verdict::Diverging, "upto {upto}\n{}", explain(&j));
        if upto == n {
            assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
        }
    }
}

#[test]
fn restart_mid_run_judges_the_latest_segment() {
    let mut rng = Rng(80);
    let full = residual(&mut rng, 4000, 0.05, converging(2.5, -6.0));
    let cd = monitor(&mut rng, 4000, 1e-4, settling(0.0312, 250.0));
    // First segment: it 1..=2000; restart from a checkpoint at it 1500: it 1501..=4000.
    let mut its: Vec<i64> = (1..=2000).collect();
    its.extend(1501..=4000);
    let mut vals = full[..2000].to_vec();
    vals.extend_from_slice(&full[1500..]);
    let mut cvals = cd[..2000].to_vec();
    cvals.extend_from_slice(&cd[1500..]);
    let run = Run::new()
        .add_with("res_p", Role::Residual, its.clone(), vals, vec![0, 2000])
        .add_with("Cd", Role::Monitor, its, cvals, vec![0, 2000]);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    assert!(j.findings.iter().any(|f| f.kind == FindingKind::Restart));
    // The drop is from the peak of the whole run (≈ 10^0.5 near it 40).
    let r = &j.residuals[0];
    assert!(r.peak > 2.0 && r.drop_dec > 5.5, "{r:?}");
    assert!(j.since.expect("dated") > 1500);
}

#[test]
fn frozen_residual_is_suspect() {
    let mut rng = Rng(90);
    let n = 3000;
    let mut res = residual(&mut rng, n, 0.05, converging(2.5, -6.0));
    let frozen = res[2500];
    for v in &mut res[2500..] {
        *v = frozen;
    }
    let run = Run::new().add("res_p", Role::Residual, res).add(
        "Cd",
        Role::Monitor,
        monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0)),
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    let f = &j.findings[j.causes[0]];
    assert_eq!(f.kind, FindingKind::FrozenResidual);
    assert_eq!(f.first, 2501);
}

#[test]
fn crash_with_growing_monitor_and_no_end_mark_is_diverging() {
    let mut rng = Rng(100);
    let n = 2000;
    // The monitor starts to run away in the last 15 iterations (×6), then the log ends in an
    // error; residuals saturate and print nothing unusual.
    let cd = monitor(&mut rng, n, 1e-4, |i| {
        let base = settling(0.0312, 250.0)(i);
        if i > 1985.0 { base * 1.6f64.powf(i - 1985.0) } else { base }
    });
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -2.5)))
        .add("Cd", Role::Monitor, cd)
        .event(Severity::Error, "crash", Some(n as i64));
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    assert!(j.causes.iter().any(|&i| j.findings[i].kind == FindingKind::Crash));
    // The same log with an end-of-run mark is no crash.
    let ended = Run { ended: true, ..run };
    assert!(!ended.judge().findings.iter().any(|f| f.kind == FindingKind::Crash));
}

#[test]
fn crash_without_signs_does_not_decide() {
    let mut rng = Rng(101);
    let n = 1100;
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -8.0)))
        .add("Cd", Role::Monitor, monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0)))
        .event(Severity::Error, "crash", Some(n as i64));
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converging, "{}", explain(&j));
    let f = j.findings.iter().find(|f| f.kind == FindingKind::Crash).expect("crash finding");
    assert_eq!(f.supports, None);
}

#[test]
fn indicator_exploding_while_residuals_saturate_is_diverging() {
    let mut rng = Rng(110);
    let n = 2500;
    // Residuals saturate near 0.5 with noise; the continuity error grows 4 decades.
    let res = residual(&mut rng, n, 0.1, |i| if i < 200.0 { -1.0 } else { -0.3 });
    let cont =
        residual(
            &mut rng,
            n,
            0.05,
            |i| if i < 2000.0 { -3.0 } else { -3.0 + (i - 2000.0) / 120.0 },
        );
    let run = Run::new().add("res_p", Role::Residual, res).add("continuity", Role::Indicator, cont);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    assert!(j.causes.iter().any(|&i| j.findings[i].series.as_deref() == Some("continuity")));
}

#[test]
fn silent_divergence_of_a_monitor_is_diverging() {
    let mut rng = Rng(120);
    let n = 3000;
    // Residuals bounded and noisy; the monitor grows exponentially from it 2000.
    let res = residual(&mut rng, n, 0.1, |i| converging(2.5, -3.5)(i));
    let cd = monitor(&mut rng, n, 1e-4, |i| {
        0.0312 * (1.0 + if i > 2000.0 { 1e-3 * ((i - 2000.0) / 80.0).exp() } else { 0.0 })
    });
    let run = Run::new().add("res_p", Role::Residual, res).add("Cd", Role::Monitor, cd);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    assert!(has(&j, FindingKind::BlowUp, "Cd"), "{}", explain(&j));
}

#[test]
fn sweep_count_pinned_at_its_limit_is_diverging() {
    let mut rng = Rng(130);
    let n = 2000;
    let sweeps: Vec<f64> = (0..n)
        .map(|i| if i < 1900 { (8.0 + 4.0 * rng.uniform()).round() } else { 200.0 })
        .collect();
    let run = Run::new().add("res_p", Role::Residual, residual(&mut rng, n, 0.1, |_| -2.0)).add(
        "p_sweeps",
        Role::Indicator,
        sweeps,
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    assert!(has(&j, FindingKind::BlowUp, "p_sweeps"));
}

#[test]
fn a_plateau_that_falls_again_is_no_stall_while_the_run_goes_on() {
    // Synthetic: falls at 2.5 dec/kit to it 300, flat until it 1200 (a pseudo-plateau of 900
    // iterations), then falls again at the same rate, in noise of 0.05 decades. At it 1300 the
    // 1000-iteration stall window is mostly plateau and, on these seeds, its slope alone does
    // not show the fall: without the rule all three are `stalled` (checked by disabling it;
    // 100 iterations after the plateau the rule turns 6 of 15 seeds 55–69 to converging, and
    // 150 iterations after it the window's slope alone shows the fall on all 15).
    let level = |i: f64| {
        let flat = (i.min(1200.0) - 300.0).max(0.0);
        0.5 - 2.5 * (i - 40.0).max(0.0) / 1000.0 + 2.5 * flat / 1000.0
    };
    let run = |seed: u64, n: usize, noise: f64, level: &dyn Fn(f64) -> f64| {
        let mut rng = Rng(seed);
        let res = residual(&mut rng, n, noise, level);
        let cd = monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0));
        Run::new().add("res_p", Role::Residual, res).add("Cd", Role::Monitor, cd).judge()
    };
    for seed in [56, 58, 60] {
        let j = run(seed, 1300, 0.05, &level);
        assert_eq!(j.verdict, Verdict::Converging, "seed {seed}\n{}", explain(&j));
        // Still flat at the end: stalled.
        let j = run(seed, 1300, 0.05, &|i: f64| level(i.min(1200.0)));
        assert_eq!(j.verdict, Verdict::Stalled, "seed {seed}\n{}", explain(&j));
    }
    // The limit of the rule: 100 iterations after the plateau, in noise of 0.1 decades, the
    // new fall is not yet told from the plateau's wander (seed 60); 50 iterations later it is.
    assert_eq!(run(60, 1300, 0.1, &level).verdict, Verdict::Stalled);
    assert_eq!(run(60, 1350, 0.1, &level).verdict, Verdict::Converging);
}

#[test]
fn stalled_run_ending_at_its_iteration_limit_stays_stalled() {
    // Synthetic: a plateau 1.4 decades short of the drop, drag still drifting, and the
    // solver's end-of-run mark at its iteration limit. Ending claims nothing here: the run is
    // stalled, not falsely converged.
    let mut rng = Rng(12);
    let n = 3000;
    let res = residual(&mut rng, n, 0.05, |i| converging(2.5, -1.6)(i));
    let cd = monitor(&mut rng, n, 1e-4, |i| 0.0312 * (1.0 + 0.01 * i / 1000.0));
    let run = Run::new().add("res_p", Role::Residual, res).add("Cd", Role::Monitor, cd).ended();
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Stalled, "{}", explain(&j));
    assert!(!j.findings.iter().any(|f| f.kind == FindingKind::SolverStoppedEarly));
}

#[test]
fn solver_end_mark_while_monitor_drifts_is_suspect() {
    let mut rng = Rng(140);
    let n = 1500;
    // The solver stops on its own residual target (2.4 decades) while drag still drifts.
    let cd = monitor(&mut rng, n, 1e-4, |i| 0.0312 * (1.0 + 0.03 * i / 1000.0));
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.0, -8.0)))
        .add("Cd", Role::Monitor, cd)
        .ended();
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    assert!(j.causes.iter().any(|&i| j.findings[i].kind == FindingKind::SolverStoppedEarly));
}

#[test]
fn one_step_drop_that_makes_the_criterion_is_suspect() {
    let mut rng = Rng(150);
    let n = 2000;
    // Slowly falling to 1e-1, then a reset makes it 1e-6 in one step.
    let res = residual(&mut rng, n, 0.03, |i| if i < 1700.0 { -(i / 1700.0) } else { -6.0 });
    let run = Run::new().add("res_p", Role::Residual, res).add(
        "Cd",
        Role::Monitor,
        monitor(&mut rng, n, 1e-5, |_| 0.0312),
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    assert!(j.causes.iter().any(|&i| j.findings[i].kind == FindingKind::StepDrop));
}

#[test]
fn clipping_warnings_in_most_iterations_are_a_finding() {
    let base = clean_run(3, 4000);
    // Clipping in the first 5 iterations only: normal.
    let mut early = Run { ..clean_run(3, 4000) };
    for it in 1..=5 {
        early = early.event(Severity::Warning, "clipping", Some(it));
    }
    assert!(!early.judge().findings.iter().any(|f| f.kind == FindingKind::FrequentWarnings));
    let mut often = base;
    for it in (1..=4000).filter(|i| i % 4 != 0) {
        often = often.event(Severity::Warning, "clipping", Some(it));
    }
    let j = often.judge();
    let f = j.findings.iter().find(|f| f.kind == FindingKind::FrequentWarnings).expect("finding");
    assert!((f.value - 0.75).abs() < 0.01);
    assert_eq!(j.verdict, Verdict::Converged, "informational only");
}

#[test]
fn per_series_overrides_change_the_outcome() {
    let run = clean_run(2, 4000);
    // Demanding 8 decades from res_p (it reaches about 6.5): no longer converged.
    let mut series = std::collections::BTreeMap::new();
    series.insert("res_p".into(), SeriesCriteria { drop: Some(8.0), ..Default::default() });
    let j = run.judge_with(&Criteria { series: series.clone(), ..Default::default() });
    assert_ne!(j.verdict, Verdict::Converged, "{}", explain(&j));
    let c = j.criteria.iter().find(|c| c.series == "res_p" && c.name == "drop").expect("drop");
    assert!(!c.met && c.threshold == 8.0 && !c.default);
    // Ignoring it again restores the verdict.
    series.insert("res_*".into(), SeriesCriteria { ignore: true, ..Default::default() });
    series.remove("res_p");
    let j = run.judge_with(&Criteria { series, ..Default::default() });
    assert_eq!(j.verdict, Verdict::Converged);
    assert!(j.criteria.iter().all(|c| c.series == "Cd"));
}

// ------------------------------------------------------------------------ degenerate inputs

#[test]
fn nothing_to_judge_is_not_a_verdict() {
    // No series, or series without values: no data.
    assert_eq!(Run::new().try_judge(), Err(NothingToJudge::NoData));
    assert_eq!(
        Run::new().add("res_p", Role::Residual, vec![]).try_judge(),
        Err(NothingToJudge::NoData)
    );
    // Values, but only `info` series: nothing judged.
    let info = Run::new().add("cfl", Role::Info, vec![5.0; 20]);
    assert_eq!(info.try_judge(), Err(NothingToJudge::NothingJudged { series: 1 }));
    // Everything ignored by the criteria: the same.
    let mut series = std::collections::BTreeMap::new();
    series.insert("*".to_string(), SeriesCriteria { ignore: true, ..Default::default() });
    let c = Criteria { series, ..Default::default() };
    let run = clean_run(1, 600);
    assert_eq!(try_judge(&run.input(), &c), Err(NothingToJudge::NothingJudged { series: 3 }));
    // `judge` keeps its signature for live callers: an empty judgement, no criteria.
    let j = Run::new().judge();
    assert_eq!(j.verdict, Verdict::Converging);
    assert!(j.findings.is_empty() && j.criteria.is_empty());
    // One value is something to judge.
    assert!(Run::new().add("res_p", Role::Residual, vec![1.0]).try_judge().is_ok());
}

#[test]
fn single_values_and_constants() {
    let j = Run::new()
        .add("res_p", Role::Residual, vec![1.0])
        .add("Cd", Role::Monitor, vec![0.03])
        .judge();
    assert_eq!(j.verdict, Verdict::Converging, "{}", explain(&j));
    assert!(j.criteria.iter().all(|c| !c.met));
    // A constant residual is frozen; a constant monitor is perfectly stationary.
    let j = Run::new()
        .add("res_p", Role::Residual, vec![0.5; 2000])
        .add("Cd", Role::Monitor, vec![0.03; 2000])
        .judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    let band = j.criteria.iter().find(|c| c.name == "band").expect("band");
    assert!(band.met && band.value == 0.0);
}

#[test]
fn all_nan_and_zero_series() {
    let j = Run::new().add("res_p", Role::Residual, vec![f64::NAN; 100]).judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    let j = Run::new().add("Cd", Role::Monitor, vec![f64::NAN; 100]).judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    // An all-zero residual prints the same value forever: frozen, and nothing to measure.
    let j = Run::new().add("res_k", Role::Residual, vec![0.0; 100]).judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    assert!(j.residuals[0].drop_dec.is_nan());
    // NaN and infinite numbers serialise (as null) rather than failing the JSON view.
    let json = serde_json::to_string(&j).expect("judgement serialises");
    assert!(json.contains("\"verdict\":\"suspect\""), "{json}");
    // A monitor that is zero throughout has zero drift and band.
    let j = Run::new().add("Cs", Role::Monitor, vec![0.0; 1000]).judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
}

#[test]
fn negative_monitor_values_use_the_magnitude_of_the_mean() {
    let mut rng = Rng(160);
    let n = 3000;
    let cl = monitor(&mut rng, n, 1e-4, |i| -settling(0.41, 250.0)(i));
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("Cl", Role::Monitor, cl);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    assert!(j.monitors[0].mean < 0.0 && j.monitors[0].band_pct > 0.0);
}

#[test]
fn info_series_are_not_judged_and_indicators_have_no_criteria() {
    let mut run = clean_run(4, 4000);
    run = run.add("wall_time", Role::Info, vec![f64::NAN; 4000]).add(
        "sweeps",
        Role::Indicator,
        vec![3.0; 4000],
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    assert!(j.criteria.iter().all(|c| c.series != "sweeps" && c.series != "wall_time"));
}

#[test]
fn a_million_points_are_judged_within_the_window() {
    let n = 1_000_000;
    let mut rng = Rng(170);
    let res = residual(&mut rng, n, 0.05, converging(0.01, -6.0));
    let cd = monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0));
    let run = Run::new().add("res_p", Role::Residual, res).add("Cd", Role::Monitor, cd);
    // Only a few O(n) scans touch the whole run (speed is measured by benchmarks, not here);
    // the windowed results must still be those of the final window.
    let j = run.judge();
    assert_eq!(j.iterations, n as i64);
    assert!(j.residuals[0].drop_dec > 5.0, "{}", explain(&j));
    assert_eq!(j.monitors[0].window_first, n as i64 - 499);
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
}

#[test]
fn extreme_iteration_numbers_do_not_panic() {
    let mut rng = Rng(180);
    let n = 800;
    for start in [i64::MIN, i64::MAX - n as i64, -1_000_000] {
        let its: Vec<i64> = (0..n as i64).map(|i| start.saturating_add(i)).collect();
        let res = residual(&mut rng, n, 0.05, converging(3.0, -6.0));
        let cd = monitor(&mut rng, n, 1e-4, settling(0.0312, 100.0));
        let run = Run::new()
            .add_with("res_p", Role::Residual, its.clone(), res, vec![0])
            .add_with("Cd", Role::Monitor, its.clone(), cd, vec![0])
            .event(Severity::Warning, "clipping", Some(its[n - 1]))
            .event(Severity::Error, "crash", Some(its[n - 1]));
        let j = run.judge();
        assert_eq!(j.iterations, its[n - 1]);
    }
    // Iterations out of order inside a segment (a broken contract) must not panic either.
    let its: Vec<i64> = (0..500).map(|i| (i * 7919) % 500).collect();
    let vals: Vec<f64> = (0..500).map(|i| 1.0 / (1.0 + i as f64)).collect();
    let j = Run::new()
        .add_with("res_p", Role::Residual, its.clone(), vals.clone(), vec![0, 9999])
        .judge();
    assert_eq!(j.residuals.len(), 1);
    let j = Run::new().add_with("Cd", Role::Monitor, its, vals, vec![3, 1, 0]).judge();
    assert_eq!(j.monitors.len(), 1);
}

#[test]
fn sparse_printing_and_inner_iterations() {
    // A log that prints every 10th iteration: windows are in iterations, not records.
    let run = clean_run(5, 40_000);
    let sparse = Run {
        series: run
            .series
            .iter()
            .map(|(n, r, its, v, s)| {
                let its: Vec<i64> = its.iter().step_by(10).map(|i| i / 10 + 1).collect();
                let its: Vec<i64> = its.iter().map(|i| i * 10).collect();
                let v: Vec<f64> = v.iter().step_by(10).copied().collect();
                (n.clone(), *r, its, v, s.clone())
            })
            .collect(),
        ..Run::new()
    };
    let j = sparse.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    // Windows are in iterations, not records: the adaptive window of the settled monitor
    // spans between half and all of its 500-iteration upper bound, and says how long it is.
    let m = &j.monitors[0];
    assert!((250..=490).contains(&(m.window_last - m.window_first)), "{m:?}");
    assert_eq!(m.window as i64, m.window_last - m.window_first + 10);

    // Inner iterations: three values per iteration number; the last of each is used.
    let mut rng = Rng(190);
    let n = 3000;
    let outer = residual(&mut rng, n, 0.05, converging(2.5, -6.0));
    let mut its = Vec::new();
    let mut vals = Vec::new();
    for (i, v) in outer.iter().enumerate() {
        for k in [100.0, 10.0, 1.0] {
            its.push(i as i64 + 1);
            vals.push(v * k);
        }
    }
    let cd = monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0));
    let run = Run::new().add_with("res_p", Role::Residual, its, vals, vec![0]).add(
        "Cd",
        Role::Monitor,
        cd,
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    assert!(!j.findings.iter().any(|f| f.kind == FindingKind::Oscillation), "{}", explain(&j));
}

#[test]
fn solver_converged_mark_while_monitor_drifts_is_suspect() {
    let mut rng = Rng(200);
    let n = 1500;
    let cd = monitor(&mut rng, n, 1e-4, |i| 0.0312 * (1.0 + 0.03 * i / 1000.0));
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.0, -8.0)))
        .add("Cd", Role::Monitor, cd)
        .event(Severity::Info, "solver_converged", Some(n as i64));
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    let f = j
        .causes
        .iter()
        .map(|&i| &j.findings[i])
        .find(|f| f.kind == FindingKind::SolverStoppedEarly)
        .expect("a cause");
    assert!(f.detail.contains("solver_converged") && f.detail.contains("Cd"), "{}", f.detail);
}

#[test]
fn low_start_makes_a_met_drop_suspect_only_when_still_above_the_start() {
    let mut rng = Rng(210);
    let n = 3000;
    // Starts at 1e-6 (a nearly satisfied initial field), jumps to 1e-1 and falls 3.5
    // decades: still above where it started.
    let low = residual(&mut rng, n, 0.03, |i| {
        if i < 5.0 { -6.0 } else { (-1.0 - 3.0 * i / 1000.0).max(-4.5) }
    });
    let run = Run::new().add("res_p", Role::Residual, low).add(
        "Cd",
        Role::Monitor,
        monitor(&mut rng, n, 1e-5, |_| 0.0312),
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
    assert_eq!(j.findings[j.causes[0]].kind, FindingKind::LowStart);
    // Falling below its start as well: converged, the low start only reported.
    let mut rng = Rng(211);
    let deep = residual(&mut rng, n, 0.03, |i| {
        if i < 5.0 { -3.0 } else { (-1.0 - 3.0 * i / 1000.0).max(-6.0) }
    });
    let run = Run::new().add("res_p", Role::Residual, deep).add(
        "Cd",
        Role::Monitor,
        monitor(&mut rng, n, 1e-5, |_| 0.0312),
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    let f = j.findings.iter().find(|f| f.kind == FindingKind::LowStart).expect("reported");
    assert_eq!(f.supports, None);
}

#[test]
fn non_finite_only_during_the_start_up_does_not_decide() {
    let mut run = clean_run(6, 4000);
    // A ratio monitor undefined on the first two iterations.
    run.series[2].3[0] = f64::NAN;
    run.series[2].3[1] = f64::INFINITY;
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    let f = j.findings.iter().find(|f| f.kind == FindingKind::NonFinite).expect("reported");
    assert_eq!((f.supports, f.value, f.first), (None, 2.0, 1));
}

// ------------------------------------------------------------- real-run behaviours (issue 12)
//
// The shapes below follow the behaviours the project's design notes describe for real
// solvers (early blow-ups, short runs, near-zero monitors, ring-downs, stalls at a high
// residual, long-period cycles); every number is invented for these synthetic runs.

/// A run that falls for 60 iterations, then grows a period-3 oscillation (amplitude ×e every
/// 9 iterations) from it 70 until its monitors explode in the last 5 iterations and the log
/// ends in an error at it 141, never printing a non-finite value.
fn early_blow_up() -> Run {
    let n = 140;
    let mut rng = Rng(300);
    let cycle = |i: f64, lag: f64| {
        if i < 70.0 {
            0.0
        } else {
            ((i - 70.0) / 9.0).exp() * (2.0 * std::f64::consts::PI * i / 3.0 + lag).cos()
        }
    };
    let res = |rng: &mut Rng, amp: f64, lag: f64| {
        residual(rng, n, 0.03, move |i| {
            let level = -0.025 * i.min(60.0) + amp * cycle(i, lag);
            level.min(0.3)
        })
    };
    let p = res(&mut rng, 0.02, 0.0);
    let ux = res(&mut rng, 0.015, 0.7);
    let cd = monitor(&mut rng, n, 1e-5, |i| {
        let explode = if i > 134.0 { 10f64.powf(6.0 * (i - 134.0)) } else { 1.0 };
        0.0312 * (1.0 + 1e-3 * cycle(i, 1.1)) * explode
    });
    Run::new()
        .add("res_p", Role::Residual, p)
        .add("res_Ux", Role::Residual, ux)
        .add("Cd", Role::Monitor, cd)
        .event(Severity::Error, "crash", Some(141))
}

/// The same run cut after `upto` iterations, as a watcher sees it (no crash line yet).
fn prefix(run: &Run, upto: usize) -> Run {
    Run {
        series: run
            .series
            .iter()
            .map(|(n, r, its, v, s)| {
                (n.clone(), *r, its[..upto].to_vec(), v[..upto].to_vec(), s.clone())
            })
            .collect(),
        events: Vec::new(),
        ended: false,
    }
}

/// The first prefix of `run` from 80 iterations on that is judged `diverging`, its judgement
/// and the deciding finding's kind (a growing oscillation expected).
fn first_diverging(run: &Run, upto: usize) -> (usize, Judgement) {
    let first = (80..=upto)
        .find(|&k| prefix(run, k).judge().verdict == Verdict::Diverging)
        .expect("flagged before the crash");
    let j = prefix(run, first).judge();
    assert_eq!(j.findings[j.causes[0]].kind, FindingKind::GrowingOscillation, "{}", explain(&j));
    (first, j)
}

#[test]
fn a_growing_cycle_is_diverging_thirty_iterations_before_the_crash() {
    let run = early_blow_up();
    let (first, j) = first_diverging(&run, 140);
    // Issue target: at least 30 iterations before the crash at it 141.
    assert!(first <= 111, "first diverging at it {first}");
    let f = &j.findings[j.causes[0]];
    assert!((f.period.expect("period") - 3.0).abs() < 0.2, "{}", explain(&j));
    // Amplitude ×e every 9 iterations: ×e^{1/3} = 1.40 per cycle of 3.
    assert!((f.value - (1.0f64 / 3.0).exp()).abs() < 0.25, "{}", explain(&j));
    // No estimate of iterations to target while anything argues for divergence.
    assert!(j.residuals.iter().all(|r| r.eta_iterations.is_none() && r.eta_range.is_none()));
    assert!(!j.findings.iter().any(|f| f.detail.contains("iterations to reach")));
    // Before the cycle grew, nothing alarming.
    assert_eq!(prefix(&run, 75).judge().verdict, Verdict::Converging);
    // The complete log is diverging, its crash decided by the signs before it.
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    assert!(j.causes.iter().any(|&i| j.findings[i].kind == FindingKind::Crash));
}

/// A coupled solve of five equations and two monitors in which one instability grows as
/// in [`early_blow_up`], each series with its own share of it (`shares`, relative to the
/// pressure residual's) and its own phase; no crash line. `shares` of zero leave a series
/// to noise alone.
fn coupled_blow_up(seed: u64, shares: [f64; 6]) -> Run {
    let n = 140;
    let mut rng = Rng(seed);
    let cycle = |i: f64, lag: f64| {
        if i < 70.0 {
            0.0
        } else {
            ((i - 70.0) / 9.0).exp() * (2.0 * std::f64::consts::PI * i / 3.0 + lag).cos()
        }
    };
    let mut run = Run::new();
    for (k, name) in ["res_p", "res_Ux", "res_Uy", "res_k", "res_omega"].into_iter().enumerate() {
        let amp = 0.02 * shares[k];
        let lag = 0.6 * k as f64;
        let r = residual(&mut rng, n, 0.03, move |i| -0.025 * i.min(60.0) + amp * cycle(i, lag));
        run = run.add(name, Role::Residual, r);
    }
    let amp = 1e-3 * shares[5];
    let cd = monitor(&mut rng, n, 1e-5, move |i| 0.0312 * (1.0 + amp * cycle(i, 1.1)));
    run.add("Cd", Role::Monitor, cd)
}

#[test]
fn other_series_growing_at_the_period_corroborate_a_growing_cycle() {
    // The instability shows in every equation, most in the pressure residual; the others
    // carry half of it or so, too little for their own spectral search to find growth at
    // first. Their amplitudes at the pressure cycle's period rise over the same iterations:
    // corroboration (`judge::growth`). Measured on seeds 400–409: flagged at it 90–93, six
    // through the other series' amplitudes at the period; the rule needing two series whose
    // own search finds growth flagged these at 92–95.
    let mut through_peers = 0;
    for seed in 400..410 {
        let run = coupled_blow_up(seed, [1.0, 0.6, 0.6, 0.5, 0.5, 0.0]);
        let (first, j) = first_diverging(&run, 130);
        assert!(first <= 93, "seed {seed}: first diverging at it {first}");
        if j.findings[j.causes[0]].detail.contains("of the other series") {
            through_peers += 1;
        }
        // The same pressure cycle with the other series left to their noise is a note.
        let alone = coupled_blow_up(seed, [1.0, 0.0, 0.0, 0.0, 0.0, 0.0]);
        let j = prefix(&alone, first).judge();
        assert_ne!(j.verdict, Verdict::Diverging, "seed {seed}: {}", explain(&j));
    }
    assert!(through_peers >= 5, "{through_peers} of 10 corroborated at the period");
}

#[test]
fn a_growing_cycle_in_one_series_alone_is_only_a_note() {
    // Only res_p grows; the others keep still: no corroboration, no verdict from it.
    let mut run = early_blow_up();
    let mut rng = Rng(301);
    run.series[1].3 = residual(&mut rng, 140, 0.03, |i| -0.025 * i.min(60.0));
    run.series[2].3 = monitor(&mut rng, 140, 1e-5, |_| 0.0312);
    let j = prefix(&run, 105).judge();
    let f = j.findings.iter().find(|f| f.kind == FindingKind::GrowingOscillation);
    assert!(f.is_none_or(|f| f.supports.is_none()), "{}", explain(&j));
    assert_ne!(j.verdict, Verdict::Diverging, "{}", explain(&j));
}

#[test]
fn orders_of_magnitude_in_the_start_up_are_diverging_a_decade_or_two_is_not() {
    let mut rng = Rng(310);
    let n = 80;
    // Cd grows ×10 every 5 iterations from it 50: six decades by it 80.
    let cd = monitor(&mut rng, n, 1e-5, |i| {
        0.0312 * if i > 50.0 { 10f64.powf((i - 50.0) / 5.0) } else { 1.0 }
    });
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, |i| -0.02 * i))
        .add("Cd", Role::Monitor, cd);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    assert!(has(&j, FindingKind::BlowUp, "Cd"), "{}", explain(&j));
    // A monitor that starts near zero and ramps up to its level (a quiescent start) is not
    // a blow-up, nor is a residual rising 1.7 decades while the flow develops.
    let mut rng = Rng(311);
    let ramp = monitor(&mut rng, 150, 1e-5, |i| 0.0312 * (1.0 - (-i / 15.0).exp()) + 1e-7);
    let rise = residual(&mut rng, 150, 0.05, |i| if i < 60.0 { 1.7 * i / 60.0 } else { 1.7 });
    let run = Run::new().add("res_p", Role::Residual, rise).add("Cd", Role::Monitor, ramp);
    let j = run.judge();
    assert_ne!(j.verdict, Verdict::Diverging, "{}", explain(&j));
}

#[test]
fn a_sweep_count_pinned_at_its_limit_in_the_start_up_is_diverging() {
    let mut rng = Rng(320);
    let n = 60;
    let sweeps: Vec<f64> = (0..n)
        .map(|i| if i < 45 { (14.0 + 4.0 * rng.uniform()).round() } else { 1000.0 })
        .collect();
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, |i| -0.01 * i))
        .add("p_sweeps", Role::Indicator, sweeps);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    let f = j.findings.iter().find(|f| f.kind == FindingKind::BlowUp).expect("blow-up");
    assert_eq!((f.value, f.first), (15.0, 46));
}

#[test]
fn the_estimate_to_target_comes_from_the_recent_rate_with_a_range() {
    // −0.5 dec/kit for 600 iterations, then −3 dec/kit: the recent rate decides.
    let mut rng = Rng(330);
    let n = 1000;
    let level = |i: f64| if i < 600.0 { -0.0005 * i } else { -0.3 - 0.003 * (i - 600.0) };
    let run = Run::new().add("res_p", Role::Residual, residual(&mut rng, n, 0.02, level)).add(
        "Cd",
        Role::Monitor,
        monitor(&mut rng, n, 1e-5, |_| 0.0312),
    );
    let j = run.judge();
    let r = &j.residuals[0];
    // Peak ≈ 1 (10^0 ± noise): target −3; from −1.5 at it 1000 that is 1.5 decades at
    // 3 dec/kit, 500 iterations (plus two noise SDs, ~0.04 dec: ~13 it).
    let eta = r.eta_iterations.expect("falling");
    assert!((450.0..600.0).contains(&eta), "{eta}\n{}", explain(&j));
    let (lo, hi) = r.eta_range.expect("range");
    assert!(lo <= eta && eta <= hi && hi - lo > 1.0, "{lo} {hi}");
    // The recent half of the segment (500 iterations) holds the change of rate at it 600:
    // the rate of its second half (250) is extrapolated.
    assert_eq!(r.eta_window, Some(250), "{r:?}");
    // A flat, noisy residual has no estimate: its rate's interval includes zero.
    let mut rng = Rng(331);
    let flat = Run::new().add(
        "res_p",
        Role::Residual,
        residual(&mut rng, 1000, 0.1, |i| -1.0 - 0.00002 * i),
    );
    let j = flat.judge();
    assert!(j.residuals[0].eta_iterations.is_none(), "{}", explain(&j));
}

/// A short laminar-like run of 600 iterations: residuals fall 4.5 decades by it 300, Cd
/// settles as 0.3·e^{−i/60} (within 0.1 % of its final value from it 342 on).
fn short_run(n: usize) -> Run {
    let mut rng = Rng(340);
    Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.03, |i| (-0.015 * i).max(-5.0)))
        .add("res_U", Role::Residual, residual(&mut rng, n, 0.03, |i| (-0.017 * i).max(-5.5)))
        .add(
            "Cd",
            Role::Monitor,
            monitor(&mut rng, n, 1e-5, |i| 0.0312 * (1.0 + 0.3 * (-i / 60.0).exp())),
        )
}

#[test]
fn a_short_run_is_converged_soon_after_it_settles_and_never_before() {
    let run = short_run(600);
    // Settled (every criterion truly holds) from it 342: Cd within 0.1 % of its final value
    // (0.3·e^{−i/60} ≤ 1e-3); residuals 3 decades down from it ~200.
    let first = (200..=600)
        .step_by(10)
        .find(|&k| prefix(&run, k).judge().verdict == Verdict::Converged)
        .expect("converged within the run");
    assert!((342..=342 + 120).contains(&first), "first converged at {first}");
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    // The evidence states the window used: adaptive, shorter than 500 on this short run.
    let m = &j.monitors[0];
    assert!(m.window < 500 && m.window >= 50, "{m:?}");
    let drift = j.criteria.iter().find(|c| c.name == "drift").expect("drift");
    assert_eq!(drift.window, Some(m.window));
}

#[test]
fn an_explicit_window_is_honoured_as_given() {
    let run = short_run(600);
    let c = Criteria { window: Some(500), ..Default::default() };
    let j = run.judge_with(&c);
    let m = &j.monitors[0];
    assert_eq!((m.window, m.window_first, m.window_last), (500, 101, 600), "{m:?}");
    // Over it 101–600 the start-up is inside the window: drift fails, residuals met.
    assert_eq!(j.verdict, Verdict::Suspect, "{}", explain(&j));
}

#[test]
fn a_zero_mean_monitor_is_judged_against_its_own_magnitude() {
    // A side force of a symmetric body: a start-up asymmetry of 0.2 that decays, mean zero,
    // noise 2e-6 (1e-5 of its start-up magnitude).
    let mut rng = Rng(350);
    let n = 3000;
    let cs = monitor(&mut rng, n, 1.0, |_| 0.0);
    let e = rng.ar1_sd(n, 0.9, 2e-6);
    let cs: Vec<f64> =
        cs.iter().enumerate().map(|(i, _)| 0.2 * (-(i as f64) / 100.0).exp() + e[i]).collect();
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("Cs", Role::Monitor, cs);
    let j = run.judge();
    let m = &j.monitors[0];
    // Reference: a tenth of its largest magnitude (block medians of 5: about 0.19).
    assert_eq!(m.reference, Reference::NearZero, "{m:?}");
    assert!((0.015..0.021).contains(&m.reference_value), "{m:?}");
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    // Percent of its near-zero mean would be thousands of percent.
    assert!(m.band_pct < 0.5, "{m:?}");
    // A scale set in settle.toml is used instead, and said so.
    let mut series = std::collections::BTreeMap::new();
    series.insert("Cs".to_string(), SeriesCriteria { scale: Some(0.5), ..Default::default() });
    let j = run.judge_with(&Criteria { series: series.clone(), ..Default::default() });
    assert_eq!((j.monitors[0].reference, j.monitors[0].reference_value), (Reference::Scale, 0.5));
    // Absolute limits replace the relative ones: a band of 1e-9 is not met, in the unit of Cs.
    series.insert("Cs".to_string(), SeriesCriteria { band_abs: Some(1e-9), ..Default::default() });
    let j = run.judge_with(&Criteria { series, ..Default::default() });
    let band = j.criteria.iter().find(|c| c.name == "band").expect("band");
    assert!(!band.met && band.unit.is_empty() && band.threshold == 1e-9, "{band:?}");
}

#[test]
fn a_round_off_z_force_is_reported_not_judged() {
    let mut rng = Rng(360);
    let n = 3000;
    // The out-of-plane force of a 2-D case: ±1e-21 alternating (period 2).
    let fz: Vec<f64> = (0..n).map(|i| if i % 2 == 0 { 1.2e-21 } else { -0.8e-21 }).collect();
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("Fx", Role::Monitor, monitor(&mut rng, n, 1e-5, settling(0.31, 200.0)))
        .add("Fz", Role::Monitor, fz);
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    assert!(has(&j, FindingKind::RoundOff, "Fz"), "{}", explain(&j));
    assert!(j.criteria.iter().all(|c| c.series != "Fz"));
    assert!(
        !j.findings
            .iter()
            .any(|f| f.kind == FindingKind::Oscillation && f.series.as_deref() == Some("Fz"))
    );
    assert!(j.monitors.iter().any(|m| m.series == "Fz" && m.round_off));
}

#[test]
fn a_ring_down_is_settling_not_oscillating() {
    // Cd rings down: ±2 % at period 40, amplitude e^{−i/300}; residuals converge.
    let mut rng = Rng(370);
    let n = 4000;
    let cd = monitor(&mut rng, n, 1e-5, |i| {
        0.0312 * (1.0 + 0.02 * (-i / 300.0).exp() * (2.0 * std::f64::consts::PI * i / 40.0).sin())
    });
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("Cd", Role::Monitor, cd);
    for k in (400..=4000).step_by(400) {
        let j = prefix(&run, k).judge();
        assert_ne!(j.verdict, Verdict::Oscillating, "it {k}\n{}", explain(&j));
    }
    // Within 0.1 % from it ~900 (2 %·e^{−i/300} ≤ 0.1 %): converged at the end.
    assert_eq!(run.judge().verdict, Verdict::Converged);
}

#[test]
fn a_ripple_inside_the_band_never_decides() {
    // ±0.2 % at period 30, sustained: peak to peak 0.4 % is inside the 0.5 % band.
    let mut rng = Rng(380);
    let n = 3000;
    let cd = monitor(&mut rng, n, 1e-5, |i| {
        settling(0.0312, 150.0)(i) * (1.0 + 0.002 * (2.0 * std::f64::consts::PI * i / 30.0).sin())
    });
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("Cd", Role::Monitor, cd);
    for k in (300..=3000).step_by(300) {
        let j = prefix(&run, k).judge();
        assert_ne!(j.verdict, Verdict::Oscillating, "it {k}\n{}", explain(&j));
    }
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    let f = j.findings.iter().find(|f| f.kind == FindingKind::Oscillation).expect("noted");
    assert!(f.supports.is_none() && (f.period.expect("period") - 30.0).abs() < 1.0);
}

#[test]
fn a_high_residual_stall_with_a_weak_peak_is_stalled_with_the_ripple_as_a_note() {
    // Stuck near 0.9 (−0.05 decades) in broadband AR(1) noise of 0.1 decades with a weak
    // period-12 component of ±0.03 decades.
    let mut rng = Rng(390);
    let n = 3000;
    let noise = rng.ar1_sd(n, 0.7, 0.1);
    let res: Vec<f64> = (0..n)
        .map(|i| {
            let w = 0.03 * (2.0 * std::f64::consts::PI * i as f64 / 12.0).sin();
            10f64.powf(-0.05 + noise[i] + w)
        })
        .collect();
    let run = Run::new().add("res_p", Role::Residual, res).add(
        "Cd",
        Role::Monitor,
        monitor(&mut rng, n, 1e-3, |_| 0.0312),
    );
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Stalled, "{}", explain(&j));
    assert!(
        j.findings
            .iter()
            .filter(|f| f.kind == FindingKind::Oscillation)
            .all(|f| f.supports.is_none()),
        "{}",
        explain(&j)
    );
}

#[test]
fn a_long_period_monitor_cycle_is_oscillating() {
    // Residuals met; Cd swings with a period of 240 or 280 over 4000 iterations, its
    // fundamental ±1 % or ±0.5 % with a second harmonic of half that: five cycles do not fit
    // the 500-iteration window, the look-back over the segment finds them.
    for (period, amp) in [(240.0, 0.01), (280.0, 0.01), (280.0, 0.005)] {
        let mut rng = Rng(400);
        let n = 4000;
        let cd = monitor(&mut rng, n, 1e-5, |i| {
            let t = 2.0 * std::f64::consts::PI * i / period;
            0.0312 * (1.0 + amp * (t.sin() + 0.5 * (2.0 * t + 1.0).sin()))
        });
        let run = Run::new()
            .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
            .add("Cd", Role::Monitor, cd);
        let j = run.judge();
        assert_eq!(j.verdict, Verdict::Oscillating, "{period} {amp}\n{}", explain(&j));
        let f = &j.findings[j.causes[0]];
        assert!((f.period.expect("period") - period).abs() < 10.0, "{}", explain(&j));
        let a = f.amplitude.expect("amplitude");
        assert!((a - 100.0 * amp).abs() < 0.15 * 100.0 * amp, "{period} {amp}\n{}", explain(&j));
    }
    // The synthetic long-period scenario, seed 153 (a traced miss): lift swings ±0.7 % with
    // a jittered, non-sinusoidal cycle of period about 280. The 1000-iteration look-back
    // found it dominant but pinned at 222 iterations, the longest period it resolves (4.5
    // cycles), read at ±0.17 %: "too small against the band limit", and the run `suspect`
    // (checked: without the pinned-period rule it is). A pinned period asks the next,
    // longer look-back, which reads about 272 iterations and ±0.64 %.
    let run = synth::generate(Scenario::LongPeriodCycle, 153);
    let j = judge(&synth::to_store(&run).judge_input(), &Criteria::default());
    assert_eq!(j.verdict, Verdict::Oscillating, "{}", explain(&j));
    let f = &j.findings[j.causes[0]];
    let period = f.period.expect("period");
    assert!((250.0..300.0).contains(&period), "{}", explain(&j));
}

#[test]
fn since_does_not_move_while_the_run_grows_and_nothing_changes() {
    // Read at once or grown: the judgement is a function of the data, and once converged
    // the `since` date stays put (checkpoints on a fixed grid of iterations).
    let run = clean_run(7, 4000);
    let a = run.judge();
    let b = run.judge();
    assert_eq!(a, b);
    let sinces: Vec<Option<i64>> = (3500..=4000)
        .step_by(23)
        .map(|k| {
            let j = prefix(&run, k).judge();
            assert_eq!(j.verdict, Verdict::Converged, "it {k}\n{}", explain(&j));
            j.since
        })
        .collect();
    assert!(sinces.windows(2).all(|w| w[0] == w[1]), "{sinces:?}");
}

#[test]
fn evidence_ranges_stay_inside_the_data() {
    // A 282-iteration run whose monitor drifts while its residuals are met: no evidence range
    // starts before iteration 1, and no `since` lies after the last iteration.
    let mut rng = Rng(410);
    let n = 282;
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.03, |i| (-0.02 * i).max(-5.0)))
        .add("Cd", Role::Monitor, monitor(&mut rng, n, 1e-5, |i| 0.0312 * (1.0 + 0.05 * i / 282.0)))
        .event(Severity::Error, "crash", Some(283));
    let j = run.judge();
    assert!(j.findings.iter().all(|f| f.first >= 1 && f.first <= f.last && f.last <= 282));
    assert!(j.since.is_none_or(|s| s <= j.iterations), "{}", explain(&j));
}

#[test]
fn criterion_values_never_round_across_their_threshold() {
    use settle::judge::{Comparison, CriterionResult};
    let c = |value: f64, met: bool, cmp: Comparison, unit: &str| CriterionResult {
        value,
        met,
        comparison: cmp,
        unit: unit.into(),
        threshold: 3.0,
        ..Default::default()
    };
    assert_eq!(c(2.996, false, Comparison::AtLeast, "dec").value_text(), "2.99");
    assert_eq!(c(3.0, true, Comparison::AtLeast, "dec").value_text(), "3.00");
    assert_eq!(c(0.10004, false, Comparison::AtMost, "%").value_text(), "0.101");
    assert_eq!(c(0.0999, true, Comparison::AtMost, "%").value_text(), "0.099");
    assert_eq!(c(f64::NAN, false, Comparison::AtMost, "%").value_text(), "n/a");
}

#[test]
fn the_same_log_read_at_once_or_line_by_line_gets_the_same_judgement() {
    // A tarn log (our invented solver) through the shipped tarn definition: once in one
    // batch, once applied to the store line by line with a judgement after every 50 lines
    // (as a watcher does). The final judgements must be identical, `since` included.
    use settle::parser::Registry;
    use settle::run::{RunStore, SourceStore};
    use settle::synth::{self, Options, Scenario};
    let registry = Registry::builtin();
    let def = registry.get("tarn").expect("shipped tarn definition");
    for (scenario, seed) in [(Scenario::Converging, 3), (Scenario::CrashNoNan, 5)] {
        let run =
            synth::generate_with(scenario, seed, &Options { iterations: Some(900), case: None });
        let mut text = Vec::new();
        synth::write_tarn_log(&run, &mut text).expect("write to memory");
        let lines: Vec<&[u8]> = text.split(|&b| b == b'\n').filter(|l| !l.is_empty()).collect();

        let mut whole = def.parser();
        let mut out = Vec::new();
        for l in &lines {
            whole.feed(l, &mut out);
        }
        whole.finish(&mut out);
        let mut at_once = SourceStore::new("tarn.log", "tarn");
        at_once.apply(out);

        let mut grown_parser = def.parser();
        let mut grown = SourceStore::new("tarn.log", "tarn");
        for (i, l) in lines.iter().enumerate() {
            let mut out = Vec::new();
            grown_parser.feed(l, &mut out);
            grown.apply(out);
            if i % 50 == 0 {
                let mut store = RunStore::new("r");
                store.sources.push(grown.clone());
                let _ = judge(&store.judge_input(), &Criteria::default());
            }
        }
        let mut out = Vec::new();
        grown_parser.finish(&mut out);
        grown.apply(out);

        let judged = |src: SourceStore| {
            let mut store = RunStore::new("r");
            store.sources.push(src);
            judge(&store.judge_input(), &Criteria::default())
        };
        let (a, b) = (judged(at_once), judged(grown));
        assert_eq!(a, b, "{scenario}");
        assert_eq!(a.verdict, scenario.expected(), "{scenario}\n{}", explain(&a));
    }
}

#[test]
fn a_converging_verdict_names_the_slowest_residual_and_counts_the_others() {
    // Three residuals falling at 4, 2 and 1 decades per 1000 it, far from their 3-decade
    // drop: the run converges only when the slowest gets there, so it alone is the cause;
    // every trend stays among the findings.
    let mut rng = Rng(512);
    let n = 600;
    let run = Run::new()
        .add("Ux", Role::Residual, residual(&mut rng, n, 0.02, converging(4.0, -9.0)))
        .add("p", Role::Residual, residual(&mut rng, n, 0.02, converging(1.0, -9.0)))
        .add("k", Role::Residual, residual(&mut rng, n, 0.02, converging(2.0, -9.0)));
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Converging, "{}", explain(&j));
    assert_eq!(j.causes.len(), 1, "{}", explain(&j));
    let cause = &j.findings[j.causes[0]];
    assert_eq!(cause.series.as_deref(), Some("p"), "{}", explain(&j));
    assert!(cause.detail.contains("2 other residuals falling faster"), "{}", cause.detail);
    // The slowest by its estimate of iterations to target, which the cause states.
    let eta = |s: &str| j.residuals.iter().find(|r| r.series == s).and_then(|r| r.eta_iterations);
    let slowest = eta("p").expect("p has an estimate");
    assert!(eta("Ux").is_some_and(|e| e < slowest) && eta("k").is_some_and(|e| e < slowest));
    assert!(cause.detail.contains("iterations to reach"), "{}", cause.detail);
    let trends = j.findings.iter().filter(|f| f.kind == FindingKind::Trend).count();
    assert_eq!(trends, 3, "{}", explain(&j));
}

/// A monitor `1 + 10⁻³·e^{(i − 800)/τ}` from iteration 800 (an instability growing out of a
/// steady state to ×11 at the end), with relative AR(1) noise of 10⁻⁴; its logarithm rises
/// by about one decade, almost all of it in the last few hundred iterations.
fn unstable_monitor(rng: &mut Rng, n: usize) -> Vec<f64> {
    let tau = (n as f64 - 800.0) / (1e4f64).ln();
    monitor(rng, n, 1e-4, |i| 1.0 + if i > 800.0 { 1e-3 * ((i - 800.0) / tau).exp() } else { 0.0 })
}

#[test]
fn a_monitor_departing_exponentially_while_residuals_wander_is_diverging() {
    // The residuals fell two decades and wander there (no drop of 3, no trend): only the
    // monitor shows the instability, by the growth of its departure from its level.
    let mut rng = Rng(733);
    let n = 2000;
    let wander = |i: f64| -2.0 * (1.0 - (-i / 150.0).exp());
    let mut run = Run::new();
    for name in ["Ux", "p", "k"] {
        run = run.add(name, Role::Residual, residual(&mut rng, n, 0.05, wander));
    }
    let run = run.add("drag", Role::Monitor, unstable_monitor(&mut rng, n));
    let j = run.judge();
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    let f = &j.findings[j.causes[0]];
    assert_eq!((f.kind, f.statistic.as_str()), (FindingKind::BlowUp, "departure_growth_dec"));
    // A decade at least above the noise, dated after the growth began.
    assert!(f.value >= 1.0 && f.first > 800, "{}", explain(&j));
}

#[test]
fn a_short_run_whose_monitors_depart_exponentially_is_diverging() {
    // The synthetic silent-divergence scenario cut to 300, 450 and 600 iterations (the run
    // length is an option of the generator; its instability sets in at 30-50 % of the run):
    // the monitors' departures grow ×2-3 every 40 iterations over the run's last half while
    // the residuals wander. The departure's look-back was one whole evidence window (500)
    // after a 200-iteration start-up, which a run shorter than 650 iterations never had:
    // these six were `converging`, `stalled` or `suspect` before. A segment shorter than
    // 1000 iterations has a fifth of it for its start-up, and the first look-back takes what
    // the run has after it.
    use settle::synth::Options;
    for (n, seed) in [(300, 22u64), (300, 24), (450, 11), (600, 4), (600, 8), (600, 9)] {
        let opts = Options { iterations: Some(n), case: None };
        let run = synth::generate_with(Scenario::SilentDivergence, seed, &opts);
        let j = judge(&synth::to_store(&run).judge_input(), &Criteria::default());
        assert_eq!(j.verdict, Verdict::Diverging, "n {n} seed {seed}\n{}", explain(&j));
        let f = &j.findings[j.causes[0]];
        assert_eq!(f.statistic, "departure_growth_dec", "n {n} seed {seed}\n{}", explain(&j));
        // Dated after the start-up: the growth, not the start-up, decided.
        let startup = (n as i64 / 5).min(200);
        assert!(f.first >= startup && f.value >= 1.0, "n {n} seed {seed}\n{}", explain(&j));
    }
}

#[test]
fn a_log_written_every_few_iterations_is_judged_as_the_run() {
    // Synthetic runs as a log written every 5 or 10 iterations shows them (long runs are often
    // printed so). Each of these was misjudged when windows were counted in iterations only:
    // a window cut to 50 iterations of a log printed every 5 held 10 values, under the 20 its
    // statistics then asked for, and half of a 350-iteration run printed every 10 holds 17,
    // so the monitors were never judged (`converging` for a false convergence or a converged
    // run); and a departure's block medians of 10 values spanned 100 iterations, too coarse
    // to see a rise over 380 (`stalled`, `suspect`); a stall window of 500 iterations
    // printed every 20 held 25 values, under the 30 a stall is read from (`converging`,
    // `suspect`). A window now holds at least ten values however far apart (its drift and
    // band need no more), a stall window 30, and a departure block ten iterations' worth.
    let cases: [(Scenario, i64, &[u64], Verdict); 5] = [
        (Scenario::FalseConvergence, 5, &[2, 10, 12, 17], Verdict::Suspect),
        (Scenario::SilentDivergence, 10, &[4, 6, 11, 18, 19], Verdict::Diverging),
        (Scenario::ShortLaminar, 10, &[0, 2, 6, 7, 10], Verdict::Converged),
        (Scenario::Stall, 20, &[0, 1, 2, 3], Verdict::Stalled),
        (Scenario::HighResidualStall, 20, &[0, 1, 2, 3], Verdict::Stalled),
    ];
    for (scenario, every, seeds, expected) in cases {
        for &seed in seeds {
            let run = synth::generate(scenario, seed);
            let store = synth::to_store(&run);
            let input = synth::sparse_input(store.judge_input(), every, true);
            let drag = input.series.iter().find(|s| s.name == "drag").expect("drag");
            assert!(drag.values.len() <= run.steps.len() / every as usize + 2);
            let j = judge(&input, &Criteria::default());
            let name = scenario.name();
            assert_eq!(j.verdict, expected, "{name} every {every} seed {seed}\n{}", explain(&j));
            // The monitors were judged: a drift is reported for each.
            assert!(j.monitors.iter().all(|m| m.drift_pct.is_finite()), "{name} seed {seed}");
        }
    }
}

#[test]
fn a_departing_monitor_while_the_residuals_fall_is_a_note_and_an_approach_is_nothing() {
    // The same monitor while every residual still falls towards its target at 1 dec/kit:
    // the iteration contracts, the departure is noted, not deciding.
    let mut rng = Rng(734);
    let n = 2000;
    let mut run = Run::new();
    for name in ["Ux", "p", "k"] {
        run = run.add(name, Role::Residual, residual(&mut rng, n, 0.05, converging(1.0, -9.0)));
    }
    let j = run.add("drag", Role::Monitor, unstable_monitor(&mut rng, n)).judge();
    let dep: Vec<_> = j.findings.iter().filter(|f| f.statistic == "departure_growth_dec").collect();
    assert_eq!(dep.len(), 1, "{}", explain(&j));
    assert_eq!(dep[0].supports, None, "{}", explain(&j));
    assert!(dep[0].detail.contains("residuals fall meanwhile"), "{}", dep[0].detail);
    // A monitor moving to a new level (+30 % with a decay time of 200 iterations from
    // iteration 800) while the residuals wander: its departure rises ever more slowly.
    let mut rng = Rng(735);
    let wander = |i: f64| -2.0 * (1.0 - (-i / 150.0).exp());
    let mut run = Run::new();
    for name in ["Ux", "p", "k"] {
        run = run.add(name, Role::Residual, residual(&mut rng, n, 0.05, wander));
    }
    let approach = monitor(&mut rng, n, 1e-4, |i| {
        1.0 + if i > 800.0 { 0.3 * (1.0 - (-(i - 800.0) / 200.0).exp()) } else { 0.0 }
    });
    let j = run.add("drag", Role::Monitor, approach).judge();
    assert!(j.findings.iter().all(|f| f.statistic != "departure_growth_dec"), "{}", explain(&j));
    assert_ne!(j.verdict, Verdict::Diverging, "{}", explain(&j));
}

#[test]
fn a_monitor_leaving_its_plateau_at_a_kink_is_not_diverging() {
    // A monitor drifts slowly off its plateau (+2 %, decay time 150 iterations, from it 420)
    // and leaves it at a kink for a new level (+30 %, decay time 350, from it 700), judged
    // 130 and 160 iterations after the kink while the residuals stand still. Its departure
    // from the plateau rose, paused and rose again: the thirds' medians alone read that as
    // acceleration (both were `diverging` before this rule); since the kink the
    // log-departure rises ever more slowly, which an exponential never does.
    for (seed, n) in [(737u64, 830usize), (738, 860)] {
        let mut rng = Rng(seed);
        let flat = |i: f64| -2.0 * (1.0 - (-i / 50.0).exp());
        let mut run = Run::new();
        for name in ["Ux", "p", "k"] {
            run = run.add(name, Role::Residual, residual(&mut rng, n, 0.05, flat));
        }
        let kinked = monitor(&mut rng, n, 1e-3, |i| {
            let drift = if i > 420.0 { 0.02 * (1.0 - (-(i - 420.0) / 150.0).exp()) } else { 0.0 };
            1.0 + drift + if i > 700.0 { 0.3 * (1.0 - (-(i - 700.0) / 350.0).exp()) } else { 0.0 }
        });
        let j = run.add("drag", Role::Monitor, kinked).judge();
        let departs = j.findings.iter().any(|f| f.statistic == "departure_growth_dec");
        assert!(!departs, "n {n}\n{}", explain(&j));
        assert_ne!(j.verdict, Verdict::Diverging, "n {n}\n{}", explain(&j));
    }
    // The synthetic pseudo-plateau scenario, dev seed 1: dp drifts off its plateau level
    // (1660 → 1687 over it 377-627), leaves it at a kink near it 630 for its final level
    // (about 2160), and at it 752 and 771 was `diverging` before this rule.
    for (k, j) in synth_prefixes(Scenario::PseudoPlateauThenConverge, 1, &[752, 771]) {
        assert_eq!(j.verdict, Verdict::Converging, "it {k}\n{}", explain(&j));
    }
}

/// The judgements of the first `ks` steps of the synthetic run of `scenario` for `seed`, as a
/// watcher sees them (no end-of-run line), with the default criteria.
fn synth_prefixes(scenario: Scenario, seed: u64, ks: &[usize]) -> Vec<(usize, Judgement)> {
    let run = synth::generate(scenario, seed);
    let store = synth::to_store(&run);
    let full = store.judge_input();
    ks.iter()
        .map(|&k| (k, judge(&synth::prefix_input(&full, &run, k), &Criteria::default())))
        .collect()
}

/// Falling residuals and one monitor `1 + a·e^{(i−100)/τ}·sin(2πi/3)` from iteration 100 with
/// `a = a0`, growing ×`per_cycle` every cycle, over `n` iterations.
fn one_growing_cycle(seed: u64, n: usize, a0: f64, per_cycle: f64) -> Judgement {
    let mut rng = Rng(seed);
    let mut run = Run::new();
    for name in ["Ux", "p"] {
        run = run.add(name, Role::Residual, residual(&mut rng, n, 0.02, converging(4.0, -9.0)));
    }
    let rate = per_cycle.ln() / 3.0;
    let cycle = monitor(&mut rng, n, 1e-6, |i| {
        let a = if i > 100.0 { a0 * (rate * (i - 100.0)).exp() } else { 0.0 };
        1.0 + a * (2.0 * std::f64::consts::PI * i / 3.0).sin()
    });
    run.add("lift", Role::Monitor, cycle).judge()
}

#[test]
fn a_cycle_grown_a_hundredfold_decides_alone_a_smaller_growth_of_one_series_is_a_note() {
    // ×1.4 per cycle from 10⁻⁸ (±0.7 % at the end): out of the 10⁻⁶ noise about ×200 over
    // the last 50 iterations, material, one series only.
    let j = one_growing_cycle(901, 220, 1e-8, 1.4);
    assert_eq!(j.verdict, Verdict::Diverging, "{}", explain(&j));
    let f = &j.findings[j.causes[0]];
    assert_eq!(f.kind, FindingKind::GrowingOscillation, "{}", explain(&j));
    assert!((f.value - 1.4).abs() < 0.1, "growth per cycle {}", f.value);
    assert!(f.detail.contains("grown a hundredfold"), "{}", f.detail);
    // ×1.08 per cycle from 10⁻⁴ (±0.4 % at the end): some twentyfold over the windows it
    // is looked for in; alone it is a note.
    let j = one_growing_cycle(902, 240, 1e-4, 1.08);
    let growing: Vec<_> =
        j.findings.iter().filter(|f| f.kind == FindingKind::GrowingOscillation).collect();
    assert!(!growing.is_empty(), "{}", explain(&j));
    assert!(growing.iter().all(|f| f.supports.is_none()), "{}", explain(&j));
    assert_ne!(j.verdict, Verdict::Diverging, "{}", explain(&j));
}

#[test]
fn a_noisy_residual_that_falls_with_the_others_is_not_stalled() {
    // Synthetic: a coupled solve falling at 0.4 dec/kit after its first decade. One
    // residual's noise is slow and large (AR(1), φ = 0.98, 0.2 decades), the other two are
    // quiet. On its own the noisy residual does not show its fall over the 1000-iteration
    // stall window and is called `stalled` (asserted below, so the case is a real one); with
    // its companions falling steadily at a rate inside its interval, it is converging.
    // Without the rule (`judge::common_fall`) every one of these seeds is `stalled`.
    let level = |i: f64| -(i / 150.0).min(1.0) - 0.4 * (i - 150.0).max(0.0) / 1000.0;
    let n = 1300;
    let build = |seed: u64, noisy_level: &dyn Fn(f64) -> f64| {
        let mut rng = Rng(seed);
        let e = rng.ar1_sd(n, 0.98, 0.2);
        let noisy: Vec<f64> = (0..n).map(|i| 10f64.powf(noisy_level(i as f64) + e[i])).collect();
        let a = residual(&mut rng, n, 0.03, level);
        let b = residual(&mut rng, n, 0.03, level);
        let cd = monitor(&mut rng, n, 1e-4, settling(0.0312, 250.0));
        (noisy, a, b, cd)
    };
    // The residual `k` judged with its two companions of the same solve.
    let coupled = |k: Vec<f64>, a: Vec<f64>, b: Vec<f64>, cd: Vec<f64>| {
        Run::new()
            .add("res_k", Role::Residual, k)
            .add("res_p", Role::Residual, a)
            .add("res_Ux", Role::Residual, b)
            .add("Cd", Role::Monitor, cd)
            .judge()
    };
    let (mut checked, mut rescued) = (0, 0);
    for seed in 300..340 {
        let (noisy, a, b, cd) = build(seed, &level);
        let alone = Run::new()
            .add("res_k", Role::Residual, noisy.clone())
            .add("Cd", Role::Monitor, cd.clone())
            .judge();
        if alone.verdict != Verdict::Stalled {
            continue;
        }
        checked += 1;
        let j = coupled(noisy, a, b, cd);
        if j.verdict == Verdict::Converging {
            rescued += 1;
            assert!(j.findings.iter().any(|f| f.kind == FindingKind::Stall
                && f.supports.is_none()
                && f.detail.contains("hides the common fall")));
        }
    }
    // 32 of the 40 seeds look stalled alone; 30 of them are converging with their companions
    // (in the other two the noisy residual's interval excludes the common rate, or a
    // companion's rate is not steady over the window's latest half).
    assert!(checked >= 30, "only {checked} seeds where the noisy residual alone looks stalled");
    assert!(rescued * 10 >= checked * 8, "{rescued} of {checked} converging with companions");

    // The same residual really flat from it 250 while the others go on falling: stalled
    // (its interval excludes the common rate).
    let flat = |i: f64| level(i.min(250.0));
    let (_, a, b, cd) = build(301, &flat);
    let quiet = residual(&mut Rng(9), n, 0.03, flat);
    let j = coupled(quiet, a, b, cd);
    assert_eq!(j.verdict, Verdict::Stalled, "{}", explain(&j));
}

#[test]
fn a_finished_run_is_judged_on_its_stall_window_not_on_the_wander_at_its_end() {
    // Synthetic: a plateau 1.5 decades short of the drop from it 300 whose level wanders,
    // as a stalled residual's does: up 0.3 decades over it 2200–2500, level, then down 0.4
    // over the last 300 iterations; noise AR(1), φ = 0.8, 0.05 decades; the solver's
    // end-of-run mark at its iteration limit. Over the evidence window (500) the fall is
    // significant; over the 1000-iteration stall window it is not. The run is over, so it is
    // judged whole: `stalled`, not "stopped while still converging" (`suspect`, as it was
    // when the evidence window's fall decided).
    let n = 3000;
    let wander = |i: f64| {
        let up = 0.3 * ((i - 2200.0) / 300.0).clamp(0.0, 1.0);
        let down = 0.4 * ((i - 2700.0) / 300.0).clamp(0.0, 1.0);
        up - down
    };
    for seed in 700..710 {
        let mut rng = Rng(seed);
        let res = residual(&mut rng, n, 0.05, |i| -1.5 * (i / 300.0).min(1.0) + wander(i));
        let cd = monitor(&mut rng, n, 1e-4, |i| 0.0312 * (1.0 + 0.004 * i / 1000.0));
        let run = Run::new().add("res_p", Role::Residual, res).add("Cd", Role::Monitor, cd);
        let j = run.ended().judge();
        assert_eq!(j.verdict, Verdict::Stalled, "seed {seed}\n{}", explain(&j));
        // The fall of the evidence window is still reported, and the stall spans the window.
        assert!(j.findings.iter().any(|f| f.kind == FindingKind::Trend), "{}", explain(&j));
        let f = &j.findings[j.causes[0]];
        assert!(f.kind == FindingKind::Stall && f.last - f.first >= 790, "{}", explain(&j));
    }
}

#[test]
fn a_finished_plateau_that_wandered_back_down_is_stalled_and_a_new_low_is_not() {
    // The synthetic stall scenario, seeds 8001 and 8014 (traced misses of the accuracy
    // bench): a plateau of slow red-noise wander (AR(1), φ ≥ 0.985, common to every
    // residual) that dips over the last 500 iterations of a finished run. The dip reads as
    // a significant fall of 0.35–0.9 dec/kit over the evidence window and of 0.3–0.4 over
    // the 1000-iteration stall window, so the window's slope alone said "still on its way"
    // and the run was `suspect` (checked: without the rule both are). Each ends no lower than
    // a residual already was earlier on its plateau: `stalled`, the rule named.
    for seed in [8001, 8014] {
        let run = synth::generate(Scenario::Stall, seed);
        let j = judge(&synth::to_store(&run).judge_input(), &Criteria::default());
        assert_eq!(j.verdict, Verdict::Stalled, "seed {seed}\n{}", explain(&j));
        assert!(
            j.causes.iter().any(|&i| j.findings[i].detail.contains("no lower than it already")),
            "seed {seed}\n{}",
            explain(&j)
        );
    }
    // Synthetic: a finished run still falling steadily at 0.5 dec/kit over its last 1500
    // iterations, 1.2 decades short, in AR(1) noise of 0.05 decades: each window ends below
    // everything before it, so it is not stalled (drag drifts: stopped on its way).
    for seed in 720..730 {
        let mut rng = Rng(seed);
        let n = 3000;
        let res = residual(&mut rng, n, 0.05, |i| {
            -(i / 300.0).min(1.0) - 0.5 * (i - 1500.0).max(0.0) / 1000.0
        });
        let cd = monitor(&mut rng, n, 1e-4, |i| 0.0312 * (1.0 + 0.004 * i / 1000.0));
        let run = Run::new().add("res_p", Role::Residual, res).add("Cd", Role::Monitor, cd);
        let j = run.ended().judge();
        assert_eq!(j.verdict, Verdict::Suspect, "seed {seed}\n{}", explain(&j));
    }
}

#[test]
fn a_monitor_still_on_its_way_to_a_new_level_is_not_oscillating() {
    // The synthetic pseudo-plateau scenario, seed 10001 (a miss of the 10000 bench set: two
    // healthy prefixes `oscillating`). Drag falls onto a plateau about 30 % above its final
    // value, swells there by 5 %, and from about it 870 leaves it for its final level
    // (e-folding about 280 iterations) while every residual falls at 1.3-1.5 dec/kit. At
    // it 1250 and 1270 the last 500 iterations are still that approach (MSER-5 finds its
    // minimum at the end of its search there); the 1000-iteration look-back holds the
    // plateau, the swell and the kink, which less their quadratic trend read as a dominant
    // "cycle" of period 191 iterations and ±0.56 % (checked: before this rule both prefixes
    // were `oscillating`). A look-back longer than the evidence window is asked only once the
    // monitor has left its transient within the evidence window.
    for (k, j) in synth_prefixes(Scenario::PseudoPlateauThenConverge, 10001, &[1250, 1270]) {
        assert_eq!(j.verdict, Verdict::Converging, "it {k}\n{}", explain(&j));
        let cycles = j.findings.iter().filter(|f| f.supports == Some(Verdict::Oscillating));
        assert_eq!(cycles.count(), 0, "it {k}\n{}", explain(&j));
    }
}

#[test]
fn a_converged_call_is_taken_back_when_a_monitor_creeps_again() {
    // Converged by it 2500 (Cd settles with a decay time of 250 iterations), then Cd creeps
    // by 0.1 % every 250 iterations. A held drift is kept on its best estimate of the change
    // still to come, which a creep raises as much as the cautious projection: the call is
    // taken back before the creep has moved Cd by the drift limit.
    let n = 3200;
    let mut rng = Rng(41);
    let creep = |i: f64| 1.0 + 1e-3 * ((i - 2500.0) / 250.0).max(0.0);
    let cd = monitor(&mut rng, n, 1e-4, |i| settling(0.0312, 250.0)(i) * creep(i));
    let run = Run::new()
        .add("res_p", Role::Residual, residual(&mut rng, n, 0.05, converging(2.5, -6.0)))
        .add("res_U", Role::Residual, residual(&mut rng, n, 0.05, converging(3.0, -6.5)))
        .add("Cd", Role::Monitor, cd);
    let j = prefix(&run, 2500).judge();
    assert_eq!(j.verdict, Verdict::Converged, "{}", explain(&j));
    let back = (2500..=n)
        .step_by(10)
        .find(|&k| prefix(&run, k).judge().verdict != Verdict::Converged)
        .expect("taken back");
    assert!(back <= 2750, "still converged at {back}");
    let j = prefix(&run, back).judge();
    assert!(has(&j, FindingKind::FalseConvergence, "Cd"), "{back}\n{}", explain(&j));
}
