//! The peak a residual's drop is measured from, and the largest single-step fall after it,
//! with isolated glitches left out.
//!
//! A solver now and then prints one absurd residual (a linear solve that failed for one
//! iteration, a value written while a field was being rebuilt) and is back on its trend at
//! the next iteration. Taken at face value, a glitch above the run's start would become the
//! peak: the drop would be measured from the glitch, which meets the drop criterion early by
//! as much as the glitch stands above the start, or, when its fall back spans many decades
//! ([`super::limits::STEP_DROP_DEC`]), reads as a reset or a broken normalisation for the
//! rest of the run. A glitch is one positive value at least
//! [`super::limits::GLITCH_DEC`] (a decade) above both the value before it and the value
//! after it, the value before being the last one that was not a glitch itself: a recovery
//! that falls a decade or more per step (10, then 0.1, then back on the trend) is a chain of
//! glitches. It is known only once the value after it arrives; until then it counts, because
//! the newest value of a live run may be the first of a blow-up.
//!
//! One pass, O(1) per value: the store folds values in as they arrive
//! ([`super::history`]); the judge runs the same fold over a series without a history.

/// `10^GLITCH_DEC` and `10^STEP_DROP_DEC`, for a fold that runs on every stored value.
const GLITCH_RATIO: f64 = 10.0;
const STEP_DROP_RATIO: f64 = 1000.0;

/// What the fold has found so far.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Peak {
    /// The largest positive finite value that is not a glitch (first index of it).
    pub value: f64,
    pub idx: usize,
    /// The largest ratio `previous / value` between consecutive positive finite values after
    /// the peak, a glitch skipped (1 when none is larger), and the index of the later value.
    pub step_ratio: f64,
    pub step_idx: usize,
    /// Glitches left out so far that rose above the peak before them or fell back by a step
    /// drop (the ones that would have changed the drop), and the largest of them: its index
    /// and its height in decades above the higher of its two neighbours.
    pub glitches: usize,
    pub largest: Option<(usize, f64)>,
    /// The last positive finite value and the one before it (after glitches are skipped),
    /// while no non-positive or non-finite value has broken the sequence.
    prev: Option<f64>,
    prev2: Option<f64>,
    /// `value`, `idx`, `step_ratio`, `step_idx` before `prev` was folded in: restored when
    /// `prev` turns out to be a glitch.
    before: (f64, usize, f64, usize),
}

impl Default for Peak {
    fn default() -> Self {
        Peak {
            value: f64::NEG_INFINITY,
            idx: 0,
            step_ratio: 1.0,
            step_idx: 0,
            glitches: 0,
            largest: None,
            prev: None,
            prev2: None,
            before: (f64::NEG_INFINITY, 0, 1.0, 0),
        }
    }
}

impl Peak {
    /// Fold in value `x` at index `i`.
    #[inline]
    pub fn push(&mut self, i: usize, x: f64) {
        if !(x.is_finite() && x > 0.0) {
            self.prev = None;
            self.prev2 = None;
            return;
        }
        let mut from = self.prev;
        if let (Some(p), Some(q)) = (self.prev, self.prev2)
            && p >= q * GLITCH_RATIO
            && p >= x * GLITCH_RATIO
        {
            // Only a glitch that rose above the peak before it, or whose fall back reads as a
            // reset, changed anything: those are the ones worth a note.
            let mattered = p > self.before.0 || p >= x * STEP_DROP_RATIO;
            (self.value, self.idx, self.step_ratio, self.step_idx) = self.before;
            from = Some(q);
            if mattered {
                let height = (p / q.max(x)).log10();
                self.glitches += 1;
                if self.largest.is_none_or(|(_, h)| height > h) {
                    self.largest = Some((i - 1, height));
                }
            }
        }
        self.before = (self.value, self.idx, self.step_ratio, self.step_idx);
        if x > self.value {
            (self.value, self.idx, self.step_ratio, self.step_idx) = (x, i, 1.0, 0);
        } else if let Some(p) = from {
            let r = p / x;
            if r > self.step_ratio {
                (self.step_ratio, self.step_idx) = (r, i);
            }
        }
        self.prev2 = from;
        self.prev = Some(x);
    }

    /// The fold over `vals`.
    pub fn of(vals: &[f64]) -> Peak {
        let mut p = Peak::default();
        for (i, &x) in vals.iter().enumerate() {
            p.push(i, x);
        }
        p
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::judge::limits::{GLITCH_DEC, STEP_DROP_DEC};

    #[test]
    fn the_ratios_are_the_limits_decades() {
        assert_eq!(GLITCH_RATIO, 10f64.powf(GLITCH_DEC));
        assert_eq!(STEP_DROP_RATIO, 10f64.powf(STEP_DROP_DEC));
    }

    /// A fall of 1 decade per 100 values from 1, one value every iteration.
    fn falling(n: usize) -> Vec<f64> {
        (0..n).map(|i| 10f64.powf(-(i as f64) / 100.0)).collect()
    }

    #[test]
    fn a_glitch_is_neither_the_peak_nor_a_step_drop() {
        // At index 250 (2.5 decades down) one value of 10 (3.5 decades above the start's
        // 1 and 6 above its neighbours), then back on the trend.
        let mut v = falling(400);
        v[250] = 10.0;
        let p = Peak::of(&v);
        assert_eq!((p.value, p.idx), (1.0, 0));
        // 10 against the neighbours' 10^−2.49 and 10^−2.51: 3.49 decades above the higher.
        assert_eq!(p.glitches, 1);
        let (at, height) = p.largest.expect("one glitch");
        assert_eq!(at, 250);
        assert!((height - 3.49).abs() < 1e-9, "{height}");
        // The largest step fall is the trend's own, over the two steps from the value before
        // the glitch to the one after it: 0.02 decades.
        assert!((p.step_ratio.log10() - 0.02).abs() < 1e-9, "{p:?}");
        assert_eq!(p.step_idx, 251);
        // While the glitch is the newest value it counts: it may start a blow-up.
        let live = Peak::of(&v[..251]);
        assert_eq!((live.value, live.idx), (10.0, 250));
    }

    #[test]
    fn a_rise_that_stays_or_falls_in_two_steps_is_no_glitch() {
        // Stays up: a new level, the peak.
        let mut up = falling(400);
        for x in &mut up[250..] {
            *x *= 1e4;
        }
        assert_eq!(Peak::of(&up).idx, 250);
        // Up for two values: the peak, and the fall back a step drop of 4 decades.
        let mut two = falling(400);
        two[250] *= 1e6;
        two[251] *= 1e6;
        let p = Peak::of(&two);
        assert_eq!(p.idx, 250);
        assert_eq!(p.step_idx, 252);
        assert!((p.step_ratio.log10() - 6.01).abs() < 1e-9, "{p:?}");
        // A reset: a fall of 4 decades in one step that stays down is a step drop.
        let mut reset = falling(400);
        for x in &mut reset[250..] {
            *x *= 1e-4;
        }
        let p = Peak::of(&reset);
        assert_eq!((p.idx, p.step_idx), (0, 250));
        assert!((p.step_ratio.log10() - 4.01).abs() < 1e-9, "{p:?}");
    }

    #[test]
    fn a_glitch_is_a_decade_above_both_neighbours() {
        // Synthetic seed 17618 of `residual-glitches`, in small: 1.2 decades down, one value
        // of 30 (2.7 decades above its neighbours, 1.5 above the start). Taken as the peak it
        // met the 3-decade drop 1.5 decades early.
        let mut v = falling(400);
        v[120] = 30.0;
        let p = Peak::of(&v);
        assert_eq!((p.value, p.idx, p.glitches), (1.0, 0, 1));
        // 0.9 decades above both neighbours (and above the start): counts as it is.
        let mut small = falling(400);
        small[50] = 10f64.powf(0.4);
        assert_eq!(Peak::of(&small).idx, 50);
        // A period-2 cycle of ±0.6 decades below the start: its highs are glitches by the
        // rule, but none rose above the peak or fell back by a step drop, so none is noted.
        let cycle: Vec<f64> =
            (0..400).map(|i| 10f64.powf(-2.0 + if i % 2 == 0 { 0.6 } else { -0.6 })).collect();
        let mut started = vec![1.0];
        started.extend(cycle);
        let p = Peak::of(&started);
        assert_eq!((p.value, p.idx, p.glitches), (1.0, 0, 0));
    }

    #[test]
    fn a_recovery_that_falls_a_decade_a_step_is_a_chain_of_glitches() {
        // 10, then 0.1, then back on the trend (10^−2.52): each value a decade above the
        // value before the excursion and the one after it, so both are left out.
        let mut v = falling(400);
        v[250] = 10.0;
        v[251] = 0.1;
        let p = Peak::of(&v);
        assert_eq!((p.value, p.idx), (1.0, 0));
        assert!(p.step_ratio.log10() < 0.05, "{p:?}");
    }

    #[test]
    fn a_break_in_the_values_ends_the_sequence() {
        // A NaN between: the value after the NaN does not undo the one before it.
        let mut v = falling(400);
        v[250] = 10.0;
        v[251] = f64::NAN;
        assert_eq!(Peak::of(&v).idx, 250);
    }
}
