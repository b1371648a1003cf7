//! What a monitor's drift, band and confidence interval are relative to, and which monitors
//! carry nothing but round-off.
//!
//! "Percent of the mean" means nothing when the mean is near zero: a side force of a
//! symmetric body, a probe at the reference pressure. The reference is, in order:
//!
//! * the `scale` set for the series in `settle.toml` ([`Reference::Scale`]);
//! * otherwise `max(|mean|, κ·M)`, where `M` is the monitor's own largest magnitude in the
//!   latest segment up to the end iteration (block medians of 5 values, so a single spike
//!   does not count) and `κ` is [`NEAR_ZERO_SHARE`]: the mean while it is not small against
//!   what the quantity was during the run ([`Reference::Mean`]), a tenth of that magnitude
//!   when it is ([`Reference::NearZero`]). The two meet continuously.
//!
//! A monitor whose largest magnitude is at most [`ROUNDOFF_SHARE`] of its companions' (the
//! run's other monitors) carries only round-off — the out-of-plane force of a 2-D case at
//! 1e-21 — and is reported, not judged.

use super::limits::NEAR_ZERO_SHARE;
use super::series::{View, block_medians};
use super::types::Reference;

/// A monitor is round-off only when its largest magnitude is at most this share of the
/// largest of its companions (ours: double precision carries about 16 digits and a sum of
/// cell contributions that cancels leaves about 1e-16–1e-13 of its terms; 1e-12 leaves room
/// for monitors in different units).
pub const ROUNDOFF_SHARE: f64 = 1e-12;

/// The running largest block-median magnitude of a monitor's latest segment: one O(n) pass,
/// then a binary search per end iteration. With the store's checkpoints
/// ([`super::history`]) the pass starts at the latest checkpoint before the earliest
/// iteration asked about ([`Magnitude::from_iteration`]).
#[derive(Debug, Clone, Default)]
pub struct Magnitude {
    /// Iteration of the last value of each block of 5, and the largest block median so far.
    ends: Vec<i64>,
    running_max: Vec<f64>,
    /// The running maximum before the first block of `ends`, valid from iteration `covered`.
    before: f64,
    covered: i64,
}

impl Magnitude {
    pub fn new(v: &View<'_>) -> Magnitude {
        Magnitude::scan(v, v.seg, 0.0, i64::MIN)
    }

    /// The magnitude for `at(t)` with `t >= from` only: starts from the store's latest
    /// checkpoint before `from` when the view has one, else scans the whole segment.
    pub fn from_iteration(v: &View<'_>, from: i64) -> Magnitude {
        let Some(h) = v.history.filter(|h| h.tally().seg == v.seg) else {
            return Magnitude::new(v);
        };
        let start = v.seg + v.its[v.seg..].partition_point(|&i| i < from);
        match h.magnitude_mark(start) {
            Some(m) if m.next > v.seg => Magnitude::scan(v, m.next, m.best, v.its[m.next - 1]),
            _ => Magnitude::new(v),
        }
    }

    fn scan(v: &View<'_>, from: usize, before: f64, covered: i64) -> Magnitude {
        let meds = block_medians(&v.vals[from..], from, f64::abs);
        let mut m = Magnitude { before, covered, ..Default::default() };
        let mut best = before;
        for (i, med) in meds {
            best = best.max(med);
            m.ends.push(v.its[i]);
            m.running_max.push(best);
        }
        m
    }

    /// Largest block-median magnitude among blocks ending at or before `t` (0 when none).
    pub fn at(&self, t: i64) -> f64 {
        let k = self.ends.partition_point(|&e| e <= t);
        debug_assert!(t >= self.covered, "magnitude asked before its first checkpoint");
        if k == 0 { self.before } else { self.running_max[k - 1] }
    }

    /// Largest magnitude of the whole segment.
    pub fn max(&self) -> f64 {
        self.running_max.last().copied().unwrap_or(self.before)
    }
}

/// The reference of a monitor's relative criteria and what it is.
pub fn reference(mean: f64, magnitude: f64, scale: Option<f64>) -> (Reference, f64) {
    if let Some(s) = scale {
        return (Reference::Scale, s);
    }
    let floor = NEAR_ZERO_SHARE * magnitude;
    if mean.abs() >= floor || !floor.is_finite() {
        (Reference::Mean, mean.abs())
    } else {
        (Reference::NearZero, floor)
    }
}

/// A few words saying which reference was used (for finding details).
pub fn describe(kind: Reference, value: f64) -> String {
    match kind {
        Reference::Mean => "of the mean".to_string(),
        Reference::NearZero => format!(
            "of {} (a tenth of its largest magnitude: the mean is near zero)",
            super::text::num(value)
        ),
        Reference::Scale => format!("of its scale {}", super::text::num(value)),
    }
}

/// Is a monitor of largest magnitude `own` round-off only next to companions whose largest
/// magnitude is `companions`?
pub fn round_off(own: f64, companions: f64) -> bool {
    companions.is_finite() && companions > 0.0 && own <= ROUNDOFF_SHARE * companions
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::judge::types::SeriesInput;
    use std::borrow::Cow;

    #[test]
    fn running_magnitude_ignores_single_spikes() {
        let mut vals = vec![0.5; 30];
        vals[3] = 100.0; // one spike in the first block
        for v in vals.iter_mut().skip(20) {
            *v = -2.0; // a sustained excursion from it 21
        }
        let its: Vec<i64> = (1..=30).collect();
        let s = SeriesInput {
            name: Cow::Borrowed("m"),
            iterations: Cow::Owned(its),
            values: Cow::Owned(vals),
            segment_starts: vec![0],
            ..Default::default()
        };
        let v = View::new(&s).expect("non-empty");
        let m = Magnitude::new(&v);
        assert_eq!(m.at(4), 0.0);
        assert_eq!(m.at(5), 0.5);
        assert_eq!(m.at(20), 0.5);
        assert_eq!(m.at(25), 2.0);
        assert_eq!(m.max(), 2.0);
    }

    #[test]
    fn reference_is_continuous_and_says_which() {
        assert_eq!(reference(0.03, 0.06, None), (Reference::Mean, 0.03));
        assert_eq!(reference(-0.03, 0.06, None), (Reference::Mean, 0.03));
        let (k, v) = reference(1e-6, 0.2, None);
        assert_eq!(k, Reference::NearZero);
        assert!((v - 0.02).abs() < 1e-15);
        // At the boundary both readings agree.
        let (_, a) = reference(0.02, 0.2, None);
        assert!((a - 0.02).abs() < 1e-15);
        assert_eq!(reference(1e-6, 0.2, Some(0.5)), (Reference::Scale, 0.5));
        assert!(round_off(1e-21, 0.3) && !round_off(1e-3, 0.3) && !round_off(0.0, 0.0));
    }
}
