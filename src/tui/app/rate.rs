//! Pacing of the live panels: the iteration rate from recent growth and how often a run may
//! be re-judged.

use std::collections::VecDeque;
use std::time::{Duration, SystemTime};

/// The iteration rate is measured over at most this much recent growth.
const RATE_WINDOW: Duration = Duration::from_secs(300);
/// ... and needs at least this span of samples.
const RATE_MIN_SPAN: Duration = Duration::from_secs(5);

/// Iteration rate from recent growth samples.
#[derive(Debug, Clone, Default)]
pub(crate) struct RateMeter {
    samples: VecDeque<(SystemTime, i64)>,
}

impl RateMeter {
    pub(crate) fn push(&mut self, t: SystemTime, it: i64) {
        if self.samples.back().is_some_and(|&(bt, bi)| it < bi || t < bt) {
            self.samples.clear();
        }
        while self
            .samples
            .front()
            .is_some_and(|&(ft, _)| t.duration_since(ft).is_ok_and(|d| d > RATE_WINDOW))
        {
            self.samples.pop_front();
        }
        self.samples.push_back((t, it));
    }

    /// Iterations per minute; `None` until samples span a few seconds, or when the newest
    /// sample is older than the window.
    pub(crate) fn per_min(&self, now: SystemTime) -> Option<f64> {
        let (&(t0, i0), &(t1, i1)) = (self.samples.front()?, self.samples.back()?);
        let span = t1.duration_since(t0).ok()?;
        if span < RATE_MIN_SPAN || now.duration_since(t1).is_ok_and(|d| d > RATE_WINDOW) {
            return None;
        }
        Some((i1 - i0) as f64 / span.as_secs_f64() * 60.0)
    }
}

/// Least time between two judgements of one run: the refresh interval, stretched so that
/// judging all `active` runs takes at most about 5 % of one core (each judgement costing
/// `cost`). One run is judged every refresh; 200 runs of 20 ms each about once a minute.
pub fn judge_gap(
    refresh: std::time::Duration,
    cost: std::time::Duration,
    active: usize,
) -> std::time::Duration {
    const SHARE: u32 = 20;
    refresh.max(cost * SHARE * active.max(1) as u32)
}

#[cfg(test)]
mod budget_tests {
    use super::judge_gap;
    use std::time::Duration;

    #[test]
    fn judging_many_runs_is_spread_out() {
        let refresh = Duration::from_secs(1);
        // One run: the refresh interval decides.
        assert_eq!(judge_gap(refresh, Duration::from_millis(20), 1), refresh);
        // 200 runs of 20 ms: 20 × 200 × 20 ms = 80 s between judgements of one run.
        assert_eq!(judge_gap(refresh, Duration::from_millis(20), 200), Duration::from_secs(80));
        assert_eq!(judge_gap(refresh, Duration::ZERO, 0), refresh);
    }
}
