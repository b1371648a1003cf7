//! The synthetic scenarios: determinism, variety across seeds, and the shape each label
//! promises. Thresholds are properties of the invented scenarios, not of any detector.

use settle::synth::{self, End, Options, Scenario, Step, SynthRun, write_tarn_log};

const SEEDS: std::ops::Range<u64> = 0..3;

fn short(iterations: usize) -> Options {
    Options { iterations: Some(iterations), case: None }
}

fn log_text(run: &SynthRun) -> String {
    let mut buf = Vec::new();
    write_tarn_log(run, &mut buf).expect("write to memory");
    String::from_utf8(buf).expect("ascii")
}

/// log10 of the largest finite residual of a step.
fn lead(s: &Step) -> f64 {
    s.residuals.iter().map(|r| r.1).filter(|v| v.is_finite()).fold(f64::MIN, f64::max).log10()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Median of the leading log residual over steps `a..b`.
fn lead_median(run: &SynthRun, a: usize, b: usize) -> f64 {
    median(run.steps[a..b].iter().map(lead).collect())
}

fn band_pct(values: &[f64]) -> f64 {
    let mean = values.iter().sum::<f64>() / values.len() as f64;
    let (lo, hi) = values.iter().fold((f64::MAX, f64::MIN), |(l, h), &v| (l.min(v), h.max(v)));
    (hi - lo) / mean.abs() * 100.0
}

/// The period estimate of the linearly detrended `x`: the lag of the highest
/// autocorrelation after its first zero crossing (so that the slow decay of a smooth or
/// red-noise series does not count), searched up to `max_lag`; with that autocorrelation.
fn acf_peak(x: &[f64], max_lag: usize) -> (usize, f64) {
    let n = x.len() as f64;
    let tm = (n - 1.0) / 2.0;
    let xm = x.iter().sum::<f64>() / n;
    let sxy: f64 = x.iter().enumerate().map(|(t, v)| (t as f64 - tm) * (v - xm)).sum();
    let sxx: f64 = (0..x.len()).map(|t| (t as f64 - tm).powi(2)).sum();
    let slope = sxy / sxx;
    let d: Vec<f64> = x.iter().enumerate().map(|(t, v)| v - xm - slope * (t as f64 - tm)).collect();
    let var: f64 = d.iter().map(|v| v * v).sum();
    let acf = |k: usize| d.iter().zip(&d[k..]).map(|(a, b)| a * b).sum::<f64>() / var;
    let zero = (1..max_lag).find(|&k| acf(k) < 0.0).unwrap_or(max_lag);
    (zero.max(2)..=max_lag)
        .map(|k| (k, acf(k)))
        .fold((0, f64::MIN), |best, c| if c.1 > best.1 { c } else { best })
}

#[test]
fn same_seed_same_run_different_seed_different_run() {
    for s in Scenario::all() {
        let a = synth::generate_with(*s, 17, &short(500));
        let b = synth::generate_with(*s, 17, &short(500));
        assert_eq!(log_text(&a), log_text(&b), "{s}");
        assert_eq!((a.onset, a.end, a.steps.len()), (b.onset, b.end, b.steps.len()));
        let c = synth::generate_with(*s, 18, &short(500));
        assert_ne!(log_text(&a), log_text(&c), "{s}");
    }
}

#[test]
fn lengths_vary_by_seed() {
    for s in [Scenario::Converging, Scenario::Stall, Scenario::DivergeNan, Scenario::Restart] {
        let mut lens: Vec<usize> =
            (0..5).map(|seed| synth::generate(s, seed).steps.len()).collect();
        assert!(lens.iter().all(|&n| (1000..=5300).contains(&n)), "{s}: {lens:?}");
        lens.sort();
        lens.dedup();
        assert!(lens.len() >= 4, "{s}: lengths {lens:?}");
    }
}

#[test]
fn onsets_vary_by_seed_and_only_bad_runs_have_one() {
    for s in Scenario::all() {
        let mut onsets: Vec<i64> =
            (0..6).filter_map(|seed| synth::generate_with(*s, seed, &short(800)).onset).collect();
        onsets.sort();
        onsets.dedup();
        if s.healthy() {
            assert!(onsets.is_empty(), "{s}");
        } else {
            assert!(onsets.len() >= 5, "{s}: onsets {onsets:?}");
        }
    }
}

#[test]
fn every_run_starts_normalised_and_counts_steps() {
    for s in Scenario::all() {
        for seed in SEEDS {
            let run = synth::generate_with(*s, seed, &short(600));
            let first = &run.steps[0];
            assert_eq!(first.iteration, 1);
            assert!(first.residuals.iter().all(|r| r.1 == 1.0), "{s} {seed}: {first:?}");
            assert_eq!(run.crash.is_some(), run.end == End::Crash);
            let backs = run.steps.windows(2).filter(|w| w[1].iteration != w[0].iteration + 1);
            let restarts = run.steps.iter().filter(|st| st.restart_from.is_some()).count();
            assert!(backs.count() <= restarts, "{s} {seed}: step numbers jump without a restart");
            // Six equations, four in a laminar run (no k and omega).
            let eqs = if run.header.model == "laminar" { 4 } else { 6 };
            assert!(run.steps.iter().all(|st| st.sweeps.len() == eqs && st.residuals.len() == eqs));
        }
    }
}

#[test]
fn converged_scenarios_end_low_with_settled_monitors() {
    for s in [
        Scenario::Converging,
        Scenario::StartupRise,
        Scenario::Restart,
        Scenario::PseudoPlateauThenConverge,
        Scenario::FloorConverged,
    ] {
        for seed in 0..2 {
            let run = synth::generate(s, seed);
            let n = run.steps.len();
            assert_eq!(run.end, End::Finished, "{s} {seed}");
            assert_eq!(run.solver_converged, s != Scenario::FloorConverged, "{s} {seed}");
            assert!(lead(&run.steps[n - 1]) < -4.0, "{s} {seed}: {}", lead(&run.steps[n - 1]));
            let drag: Vec<f64> = run.steps[n - 500..].iter().map(|st| st.drag).collect();
            assert!(band_pct(&drag) < 0.5, "{s} {seed}: drag band {}", band_pct(&drag));
        }
    }
}

#[test]
fn startup_rise_rises_first() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::StartupRise, seed);
        let peak = run.steps[..300].iter().map(lead).fold(f64::MIN, f64::max);
        assert!(peak > 0.5, "seed {seed}: early peak {peak}");
    }
}

#[test]
fn pseudo_plateau_hovers_before_falling() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::PseudoPlateauThenConverge, seed);
        // Somewhere in the first 1000 steps, 150 steps over which the residual level moves
        // by less than a third of a decade.
        let flat = (10..850).step_by(10).any(|a| {
            (lead_median(&run, a, a + 30) - lead_median(&run, a + 120, a + 150)).abs() < 0.33
        });
        assert!(flat, "seed {seed}");
    }
}

#[test]
fn floor_runs_sit_on_a_noisy_floor_with_zero_sweeps() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::FloorConverged, seed);
        let n = run.steps.len();
        let tail = &run.steps[n - n / 4..];
        let zero = tail.iter().filter(|st| st.sweeps.contains(&0)).count();
        assert!(zero > tail.len() / 2, "seed {seed}");
        let a = lead_median(&run, n - n / 4, n - n / 8);
        let b = lead_median(&run, n - n / 8, n);
        assert!((a - b).abs() < 0.2, "seed {seed}: floor moves {a} → {b}");
    }
}

#[test]
fn stall_levels_off_above_three_decades() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::Stall, seed);
        let n = run.steps.len();
        let late = lead_median(&run, n - 300, n);
        let earlier = lead_median(&run, n - 900, n - 600);
        assert!(late > -3.0, "seed {seed}: {late}");
        assert!((late - earlier).abs() < 0.35, "seed {seed}: {earlier} → {late}");
        assert_eq!(run.end, End::Finished);
        assert!(!run.solver_converged);
    }
}

#[test]
fn limit_cycles_are_periodic_with_periods_from_a_few_to_tens() {
    let opts = short(1200);
    let mut periods = Vec::new();
    for seed in 0..24 {
        let run = synth::generate_with(Scenario::ResidualLimitCycle, seed, &opts);
        let onset = run.onset.expect("limit cycles have an onset") as usize;
        let from = (onset + 200).max(run.steps.len() - 700);
        let p: Vec<f64> = run.steps[from..].iter().map(|st| st.residuals[3].1.log10()).collect();
        let (lag, r) = acf_peak(&p, 120);
        assert!(r > 0.4, "seed {seed}: autocorrelation {r} at lag {lag}");
        periods.push(lag);
    }
    eprintln!("estimated periods {periods:?}");
    assert!(periods.iter().any(|&p| p <= 6), "{periods:?}");
    assert!(periods.iter().any(|&p| p >= 30), "{periods:?}");
}

#[test]
fn monitor_oscillation_swings_monitors_while_residuals_stay_put() {
    let mut unsteady = 0;
    for seed in 0..6 {
        let run = synth::generate(Scenario::MonitorOscillation, seed);
        let n = run.steps.len();
        let lift: Vec<f64> = run.steps[n - 500..].iter().map(|st| st.lift).collect();
        assert!(band_pct(&lift) > 1.0, "seed {seed}: lift band {}", band_pct(&lift));
        let drag: Vec<f64> = run.steps[n - 600..].iter().map(|st| st.drag).collect();
        let (lag, r) = acf_peak(&drag, 200);
        assert!(r > 0.4, "seed {seed}: drag autocorrelation {r} at {lag}");
        assert!((10..=170).contains(&lag), "seed {seed}: drag period {lag}");
        let drift = lead_median(&run, n - 300, n) - lead_median(&run, n - 900, n - 600);
        assert!(drift.abs() < 0.3, "seed {seed}");
        unsteady += usize::from(run.unsteady());
        if run.unsteady() {
            assert!(run.steps.iter().all(|s| s.time.is_some() && s.dt.is_some()));
        }
    }
    let all: usize = (0..40)
        .map(|seed| synth::generate_with(Scenario::MonitorOscillation, seed, &short(200)))
        .map(|run| usize::from(run.unsteady()))
        .sum();
    assert!(all > 0 && unsteady < 6, "time-accurate variant in {all} of 40 seeds");
}

#[test]
fn diverge_nan_ends_in_nan_after_growth_and_sweep_limits() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::DivergeNan, seed);
        let last = &run.steps[run.complete_steps() - 1];
        assert!(last.residuals.iter().any(|r| r.1.is_nan()), "seed {seed}");
        assert!(last.residuals.iter().all(|r| !r.1.is_finite() || r.1 > 1.0), "seed {seed}");
        assert!(run.steps.last().expect("steps").residuals.iter().any(|r| r.1.is_nan()));
        let onset = run.onset.expect("onset") as usize;
        let first_nan = run.steps.iter().position(|s| s.residuals.iter().any(|r| r.1.is_nan()));
        let first_nan = first_nan.expect("a nan");
        assert!(first_nan > onset, "seed {seed}");
        assert!(lead(&run.steps[first_nan - 1]) > lead(&run.steps[onset]) + 2.0);
        assert!(run.steps[onset..].iter().any(|s| s.sweeps[3] == synth::SWEEP_LIMIT));
        let text = log_text(&run);
        assert!(text.contains(" res nan ") || text.contains(" res -nan "));
        assert!(!text.contains("finished after"));
        assert!(matches!(run.end, End::Crash | End::Running));
    }
}

#[test]
fn diverge_overflow_prints_asterisks() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::DivergeOverflow, seed);
        let last = run.steps.last().expect("steps");
        assert!(last.residuals.iter().all(|r| r.1 >= 1e100), "seed {seed}");
        let text = log_text(&run);
        let tail: Vec<&str> = text.lines().rev().take(40).collect();
        assert!(tail.iter().any(|l| l.contains("res **********")), "seed {seed}");
        assert!(tail.iter().any(|l| l.contains("drag **********")), "seed {seed}");
        assert!(!text.contains("nan"));
        assert_eq!(run.end, End::Running);
    }
}

#[test]
fn crash_without_nan_ends_in_a_trace_after_exploding_indicators() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::CrashNoNan, seed);
        let text = log_text(&run);
        assert!(!text.contains("nan") && !text.contains("inf") && !text.contains("***********"));
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(*lines.last().expect("lines"), "    at tarn::main (tarn.f90:31)");
        assert!(lines.iter().any(|l| l.starts_with("*** tarn fatal: ")));
        assert!(!text.contains("finished after"));
        let crash = run.crash.as_ref().expect("crash");
        assert!(crash.printed_equations < 6);
        let onset = run.onset.expect("onset") as usize;
        let end = run.complete_steps() - 1;
        let (s0, s1) = (&run.steps[onset], &run.steps[end]);
        assert!(s1.continuity > 100.0 * s0.continuity, "seed {seed}");
        assert!((s1.drag / s0.drag).abs() > 5.0, "seed {seed}");
        assert!(run.steps[onset..].iter().any(|s| s.sweeps[3] == synth::SWEEP_LIMIT));
        assert!(lead(s1) > -1.0, "residuals saturate near one");
    }
}

#[test]
fn silent_divergence_keeps_residuals_bounded_while_a_monitor_grows() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::SilentDivergence, seed);
        let onset = run.onset.expect("onset") as usize;
        let n = run.steps.len();
        assert!(run.steps[onset..].iter().all(|s| lead(s) < 0.0 && lead(s).is_finite()));
        let growth = |f: fn(&Step) -> f64| (f(&run.steps[n - 1]) / f(&run.steps[onset])).abs();
        let g = growth(|s| s.drag).max(growth(|s| s.lift)).max(growth(|s| s.dp));
        assert!(g > 5.0, "seed {seed}: growth {g}");
        let drift = lead_median(&run, n - 300, n) - lead_median(&run, onset, onset + 300);
        assert!(drift.abs() < 0.5, "seed {seed}: residual drift {drift}");
    }
}

#[test]
fn false_convergence_meets_residuals_while_drag_drifts() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::FalseConvergence, seed);
        let n = run.steps.len();
        let onset = run.onset.expect("onset");
        assert!(onset < run.last_iteration());
        assert!(lead(&run.steps[n - 1]) < -3.0);
        let (a, b) = (run.steps[n - 500].drag, run.steps[n - 1].drag);
        let drift = ((b - a) / b).abs() * 100.0;
        assert!(drift > 0.2, "seed {seed}: drag drift {drift} %");
        assert!(run.header.relaxation[1] <= 0.1, "heavy under-relaxation of p");
    }
}

#[test]
fn still_converging_is_live_and_falling() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::StillConverging, seed);
        let n = run.steps.len();
        assert_eq!(run.end, End::Running);
        let late = lead_median(&run, n - 100, n);
        assert!(late > -2.9 && late < -1.0, "seed {seed}: {late}");
        assert!(late < lead_median(&run, n / 2 - 50, n / 2 + 50) - 0.3);
        assert!(!log_text(&run).contains("tarn: "));
    }
}

#[test]
fn restart_has_a_restart_line_and_continues() {
    let mut went_back = 0;
    for seed in 0..8 {
        let run = synth::generate(Scenario::Restart, seed);
        let i = run.steps.iter().position(|s| s.restart_from.is_some()).expect("restart");
        let from = run.steps[i].restart_from.expect("restart");
        assert_eq!(run.steps[i].iteration, from + 1);
        assert!(run.steps[i - 1].iteration >= from);
        went_back += usize::from(run.steps[i - 1].iteration > from);
        let text = log_text(&run);
        assert!(text.contains(&format!("restarting from checkpoint at step {from}\n[step ")));
    }
    assert!(went_back >= 3, "the checkpoint is earlier than the kill in {went_back} of 8");
}

#[test]
fn frozen_residual_repeats_exactly_with_zero_sweeps() {
    for seed in SEEDS {
        let run = synth::generate(Scenario::FrozenResidual, seed);
        let onset = run.onset.expect("onset") as usize - 1;
        let tail = &run.steps[onset..];
        let frozen: Vec<usize> = (0..6)
            .filter(|&e| tail.iter().all(|s| s.residuals[e].1 == tail[0].residuals[e].1))
            .collect();
        assert_eq!(frozen.len(), 1, "seed {seed}");
        let e = frozen[0];
        assert!(tail.iter().all(|s| s.sweeps[e] == 0));
        assert!(tail.len() > 300);
        assert!(run.steps[onset - 1].residuals[e].1 != tail[0].residuals[e].1);
    }
}

#[test]
fn clipping_notices_come_mostly_early() {
    for s in [Scenario::Converging, Scenario::Stall, Scenario::FalseConvergence] {
        for seed in SEEDS {
            let run = synth::generate(s, seed);
            let n = run.steps.len();
            let early = run.steps[..n / 10].iter().filter(|st| !st.notices.is_empty()).count();
            let late = run.steps[n / 2..].iter().filter(|st| !st.notices.is_empty()).count();
            assert!(early > 0, "{s} {seed}");
            assert!(late < n / 50, "{s} {seed}: {late} late notices");
        }
    }
}

// ------------------------------------------------------------------ issue 12 scenarios

#[test]
fn early_blow_up_grows_a_period_three_cycle_and_crashes_without_nan() {
    for seed in 0..4 {
        let run = synth::generate(Scenario::EarlyBlowUp, seed);
        let n = run.steps.len();
        let onset = run.onset.expect("onset") as usize;
        // "from about iteration 70 to a crash at about 141".
        assert!((60..=90).contains(&onset) && (110..=175).contains(&n), "seed {seed}: {onset} {n}");
        assert_eq!(run.end, End::Crash);
        let text = log_text(&run);
        assert!(!text.contains("nan") && !text.contains("inf") && !text.contains("***********"));
        // Residuals fell before the cycle: the leading one at least half a decade down at it 60.
        assert!(lead_median(&run, 55, 65) < -0.5, "seed {seed}");
        // A period-3 cycle in the drag between onset + 15 and the excursion.
        let drag: Vec<f64> = run.steps[onset + 15..n - 14].iter().map(|s| s.drag).collect();
        let (lag, r) = acf_peak(&drag, 12);
        assert!(lag == 3 || lag == 6 || lag == 9, "seed {seed}: lag {lag} r {r}");
        // Its amplitude grows: the drag's swing over the last 9 steps before the excursion is
        // well above the swing over the first 9 after the onset.
        let swing = |a: usize, b: usize| {
            band_pct(&run.steps[a..b].iter().map(|s| s.drag).collect::<Vec<_>>())
        };
        assert!(swing(n - 23, n - 14) > 5.0 * swing(onset + 1, onset + 10), "seed {seed}");
        // The explosion: monitors beyond 1e30, continuity ten decades up, sweeps pinned.
        let last = &run.steps[run.complete_steps() - 1];
        let monitors = [last.drag, last.lift, last.dp].iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let cont0 = run.steps[onset].continuity;
        assert!(monitors > 1e30 && last.continuity > 1e10 * cont0, "seed {seed}: {last:?}");
        assert!(run.steps[n - 5..n - 1].iter().all(|s| s.sweeps[3] == synth::SWEEP_LIMIT));
    }
}

#[test]
fn short_laminar_runs_are_short_laminar_and_settle_in_their_first_two_thirds() {
    let mut lens = Vec::new();
    for seed in 0..6 {
        let run = synth::generate(Scenario::ShortLaminar, seed);
        let n = run.steps.len();
        lens.push(n);
        assert!((300..=600).contains(&n), "seed {seed}: {n}");
        assert_eq!(run.header.model, "laminar");
        assert!(run.steps.iter().all(|s| s.residuals.len() == 4 && s.notices.is_empty()));
        assert!(!log_text(&run).contains("  k "));
        let settled = run.truth.settled.expect("a converged run has a settling step");
        assert!(settled < n * 4 / 5, "seed {seed}: settled {settled} of {n}");
        assert_eq!(run.end, End::Finished);
    }
    lens.dedup();
    assert!(lens.len() >= 4, "{lens:?}");
}

#[test]
fn near_zero_monitors_have_a_zero_mean_lift_and_a_round_off_side_force() {
    for seed in 0..3 {
        let run = synth::generate(Scenario::NearZeroMonitors, seed);
        let n = run.steps.len();
        let start = run.steps[..20].iter().map(|s| s.lift.abs()).fold(0.0, f64::max);
        let end = run.steps[n - 200..].iter().map(|s| s.lift.abs()).fold(0.0, f64::max);
        assert!(end < 1e-3 * start, "seed {seed}: lift {start} → {end}");
        let side: Vec<f64> = run.steps.iter().map(|s| s.side.expect("side force")).collect();
        assert!(side.iter().all(|v| v.abs() < 1e-19), "seed {seed}");
        assert!(side.iter().any(|v| *v != 0.0));
        let mut csv = Vec::new();
        synth::write_forces_csv(&run, &mut csv).expect("write to memory");
        let csv = String::from_utf8(csv).expect("ascii");
        assert!(csv.lines().nth(1) == Some("step,drag,lift,dp,side"), "seed {seed}");
        assert!(run.truth.settled.is_some());
    }
    // Other scenarios keep the four columns.
    let run = synth::generate_with(Scenario::Converging, 1, &short(300));
    assert!(run.steps.iter().all(|s| s.side.is_none()));
}

#[test]
fn ring_down_decays_from_a_few_percent() {
    for seed in 0..3 {
        let run = synth::generate(Scenario::RingDown, seed);
        let n = run.steps.len();
        // Some monitor swings by percent early on and by less than 0.1 % at the end.
        let swing = |f: fn(&Step) -> f64, a: usize, b: usize| {
            band_pct(&run.steps[a..b].iter().map(f).collect::<Vec<_>>())
        };
        let fs: [fn(&Step) -> f64; 3] = [|s| s.drag, |s| s.lift, |s| s.dp];
        let rings = fs.iter().any(|f| swing(*f, 100, 250) > 0.8 && swing(*f, n - 200, n) < 0.1);
        assert!(rings, "seed {seed}");
        assert!(run.truth.settled.is_some_and(|s| s < n));
    }
}

#[test]
fn high_residual_stall_stays_near_its_start() {
    for seed in 0..3 {
        let run = synth::generate(Scenario::HighResidualStall, seed);
        let n = run.steps.len();
        let late = lead_median(&run, n - 500, n);
        // About 0.9 of the start (−0.05 decades), give or take the wander.
        assert!((-0.5..0.2).contains(&late), "seed {seed}: {late}");
        assert_eq!(run.expected(), settle::judge::Verdict::Stalled);
    }
}

#[test]
fn long_period_cycle_has_a_period_of_a_few_hundred_over_thousands() {
    for seed in 0..3 {
        let run = synth::generate(Scenario::LongPeriodCycle, seed);
        let n = run.steps.len();
        assert!((3400..=4600).contains(&n), "seed {seed}: {n}");
        let best = [|s: &Step| s.drag, |s: &Step| s.lift, |s: &Step| s.dp]
            .iter()
            .map(|f| {
                let x: Vec<f64> = run.steps[n - 1500..].iter().map(f).collect();
                acf_peak(&x, 400)
            })
            .fold((0, f64::MIN), |a, b| if b.1 > a.1 { b } else { a });
        assert!((190..=310).contains(&best.0) && best.1 > 0.5, "seed {seed}: {best:?}");
        // Residuals meet the 3-decade drop (the cycle keeps the run from converging).
        assert!(run.truth.residuals_met.is_some_and(|m| m < n));
    }
}

#[test]
fn floor_zero_sweeps_reports_zero_sweeps_on_the_floor() {
    for seed in 0..3 {
        let run = synth::generate(Scenario::FloorZeroSweeps, seed);
        let n = run.steps.len();
        assert!((500..=1200).contains(&n), "seed {seed}: {n}");
        let tail = &run.steps[n - n / 4..];
        let zero = tail.iter().filter(|s| s.sweeps.iter().all(|&w| w == 0)).count();
        assert!(zero > tail.len() / 2, "seed {seed}: {zero} of {}", tail.len());
        assert!(run.truth.settled.is_some());
    }
}

#[test]
fn truth_dates_come_from_the_model_and_the_printed_residuals() {
    // The residual dating is a fact of the printed values: from that step on every residual
    // is 3 decades below its running peak, and the step before it is not.
    let run = synth::generate(Scenario::Converging, 3);
    let met = run.truth.residuals_met.expect("converges");
    let mut peak = [0.0f64; 6];
    let mut ok = Vec::new();
    for s in &run.steps {
        let mut all = true;
        for (e, (_, v)) in s.residuals.iter().enumerate() {
            peak[e] = peak[e].max(*v);
            all &= *v <= peak[e] * 1e-3;
        }
        ok.push(all);
    }
    assert!(ok[met..].iter().all(|m| *m) && !ok[met - 1]);
    // Settled no earlier than the residuals, and only for runs labelled converged.
    assert!(run.truth.settled.is_some_and(|s| s >= met));
    assert!(synth::generate(Scenario::Stall, 3).truth.settled.is_none());
    // A live run stopped early is dated on its continuation: beyond its last step.
    let live = synth::generate(Scenario::StillConverging, 3);
    assert!(live.truth.residuals_met.is_some_and(|m| m >= live.steps.len()));
}
