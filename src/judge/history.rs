//! What the judge needs from a series' whole history, kept up to date as values are stored,
//! so that a judge pass costs what its windows cost, not what the run's length costs.
//!
//! Every windowed test already looks at a bounded tail. What used to need the whole run:
//!
//! * the residual's peak and its first and last positive values (the drop is measured from
//!   the peak of the whole run), and the largest single-step fall after the peak, isolated
//!   glitches left out ([`super::peak`]);
//! * non-finite values: the first of the run, and the first, last and count in the latest
//!   segment;
//! * the backward scan that dates the residual criteria (`since`): the last value of the
//!   latest segment above a level, found here by descending the maxima of completed blocks
//!   of 64, 4 096, 262 144 and 16 777 216 values: at most about 2 × 64 steps per level, plus
//!   one per 16 777 216 values at the top;
//! * how many values at the end repeat the last one (a frozen residual, an indicator pinned
//!   at its maximum, or simply a sweep count that never changes);
//! * a monitor's running largest block-median magnitude ([`super::scale::Magnitude`]):
//!   checkpoints every [`MAGNITUDE_MARK_BLOCKS`] blocks let it start from a recent one.
//!
//! The store feeds [`History::push`] with every value and an opaque segment id (a value whose
//! id differs from the previous one opens a new segment of the series, as
//! `SeriesInput::segment_starts` says); taking the newest values back ([`History::rewind`])
//! and rebuilding after a rewrite ([`History::rebuild`]) keep it equal to a full scan. The
//! judge uses a history only when its length and latest segment match the series it is
//! given, and otherwise scans as before: the judgement is the same either way (the tests
//! below check it on every synthetic scenario, `run::store::history_tests` checks the store
//! keeps each history equal to a rebuild from its values).
//!
//! What is kept depends on the series' role in the store: levels, step drop and block maxima
//! for residuals, magnitude checkpoints for monitors, non-finite values and trailing repeats
//! for every role. A
//! series judged under another role (a `role` override in `settle.toml`) falls back to the
//! scan for what its history lacks.

use super::peak::Peak;
use super::series::View;
use crate::record::Role;

/// Fan-out of the block maxima: level `l` holds the maximum of each block of `64^(l+1)`
/// values.
const FAN_BITS: u32 = 6;
const LEVELS: usize = 4;

/// Blocks of 5 between two magnitude checkpoints (20 480 values or more).
pub const MAGNITUDE_MARK_BLOCKS: usize = 4096;

/// The scalar part of a [`History`]: fixed size, copied to take values back.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tally {
    /// Values folded in.
    pub len: usize,
    /// Index of the first value of the latest segment.
    pub seg: usize,
    seg_id: u64,
    /// How many values at the end equal (`==`) the last one (0 when it is NaN), and the
    /// last value's bits.
    pub tail_equal: usize,
    last_bits: u64,
    /// First non-finite value of the run, and how many there are.
    pub nf_first: Option<usize>,
    pub nf_count: usize,
    /// First and last non-finite value of the latest segment, and how many.
    pub seg_nf_first: Option<usize>,
    pub seg_nf_last: Option<usize>,
    pub seg_nf_count: usize,
    /// Residuals: the peak and the largest single-step fall after it, glitches left out
    /// ([`Peak`]), the first positive finite value's index and the last positive finite
    /// value.
    pub peak: Peak,
    pub first_pos: Option<usize>,
    pub last_pos: f64,
    /// Monitors: the block-median process of the latest segment (blocks of 5 finite
    /// non-zero |value|), its running maximum and completed blocks.
    mag_buf: [f64; 5],
    mag_k: u8,
    pub mag_best: f64,
    mag_blocks: usize,
    /// Residuals: the largest [`key`] of the block of 64 being filled.
    block_max: f64,
    levels: bool,
    magnitude: bool,
}

/// A magnitude checkpoint: after a completed block of the segment starting at `seg`, the
/// running maximum so far and the index of the next value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MagnitudeMark {
    pub seg: usize,
    pub next: usize,
    pub best: f64,
}

/// The aggregates of one series (see the module header).
#[derive(Debug, Clone, PartialEq)]
pub struct History {
    tally: Tally,
    /// Residuals: `maxima[l][b]` is the largest [`key`] of block `b` of `64^(l+1)` values,
    /// completed blocks only (the descent never needs a partial one).
    maxima: Vec<Vec<f64>>,
    /// Monitors: checkpoints of the magnitude process, every [`MAGNITUDE_MARK_BLOCKS`].
    marks: Vec<MagnitudeMark>,
}

impl Default for History {
    fn default() -> Self {
        History::new(Role::Info)
    }
}

/// The value the block maxima hold: non-finite values count as +∞, since they never satisfy
/// a level.
#[inline]
fn key(x: f64) -> f64 {
    if x.is_finite() { x } else { f64::INFINITY }
}

impl History {
    /// An empty history keeping what the judge needs for a series of `role`.
    pub fn new(role: Role) -> History {
        let levels = role == Role::Residual;
        let magnitude = role == Role::Monitor;
        History {
            tally: Tally {
                len: 0,
                seg: 0,
                seg_id: 0,
                tail_equal: 0,
                last_bits: 0,
                nf_first: None,
                nf_count: 0,
                seg_nf_first: None,
                seg_nf_last: None,
                seg_nf_count: 0,
                peak: Peak::default(),
                first_pos: None,
                last_pos: 0.0,
                mag_buf: [0.0; 5],
                mag_k: 0,
                mag_best: 0.0,
                mag_blocks: 0,
                block_max: f64::NEG_INFINITY,
                levels,
                magnitude,
            },
            maxima: if levels { vec![Vec::new(); LEVELS] } else { Vec::new() },
            marks: Vec::new(),
        }
    }

    /// The history of `values` as pushed one by one, value `i` in segment `segment_of(i)`.
    pub fn rebuild(role: Role, values: &[f64], segment_of: impl Fn(usize) -> u64) -> History {
        let mut h = History::new(role);
        for (i, &x) in values.iter().enumerate() {
            h.push(x, segment_of(i));
        }
        h
    }

    pub fn len(&self) -> usize {
        self.tally.len
    }

    pub fn is_empty(&self) -> bool {
        self.tally.len == 0
    }

    pub fn tally(&self) -> &Tally {
        &self.tally
    }

    /// Whether the residual parts (levels, step drop, block maxima) are kept.
    pub fn has_levels(&self) -> bool {
        self.tally.levels
    }

    /// Whether the magnitude checkpoints are kept.
    pub fn has_magnitude(&self) -> bool {
        self.tally.magnitude
    }

    /// Fold in the next value; `segment` is the store's id of its segment.
    #[inline(always)]
    pub fn push(&mut self, x: f64, segment: u64) {
        // The common path stays small enough to inline into the store's push; the rare
        // steps (a new segment, a non-finite value, a completed block) are calls.
        let i = self.tally.len;
        if i == 0 || segment != self.tally.seg_id {
            self.new_segment(segment);
        }
        self.tally.len = i + 1;
        let t = &mut self.tally;
        if i > 0 && x == f64::from_bits(t.last_bits) {
            t.tail_equal += 1;
        } else {
            t.tail_equal = usize::from(!x.is_nan());
        }
        t.last_bits = x.to_bits();
        if !x.is_finite() {
            self.non_finite(i);
        }
        if self.tally.levels {
            let t = &mut self.tally;
            if x.is_finite() && x > 0.0 {
                t.first_pos.get_or_insert(i);
                t.last_pos = x;
            }
            t.peak.push(i, x);
            let k = key(x);
            if k > t.block_max {
                t.block_max = k;
            }
            if (i + 1) & ((1 << FAN_BITS) - 1) == 0 {
                self.block_done();
            }
        }
        if self.tally.magnitude {
            let a = x.abs();
            if a.is_finite() && a > 0.0 {
                let t = &mut self.tally;
                t.mag_buf[t.mag_k as usize] = a;
                t.mag_k += 1;
                if t.mag_k == 5 {
                    self.magnitude_block(i);
                }
            }
        }
    }

    #[cold]
    fn new_segment(&mut self, segment: u64) {
        let t = &mut self.tally;
        t.seg = t.len;
        t.seg_id = segment;
        t.seg_nf_first = None;
        t.seg_nf_last = None;
        t.seg_nf_count = 0;
        t.mag_k = 0;
        t.mag_best = 0.0;
        t.mag_blocks = 0;
    }

    #[cold]
    fn non_finite(&mut self, i: usize) {
        let t = &mut self.tally;
        t.nf_first.get_or_insert(i);
        t.nf_count += 1;
        t.seg_nf_first.get_or_insert(i);
        t.seg_nf_last = Some(i);
        t.seg_nf_count += 1;
    }

    /// A block of 64 is complete; so, every 64 of those, is one of the next level.
    #[inline(never)]
    fn block_done(&mut self) {
        let m = std::mem::replace(&mut self.tally.block_max, f64::NEG_INFINITY);
        self.maxima[0].push(m);
        for l in 1..self.maxima.len() {
            let below = self.maxima[l - 1].len();
            if below & ((1 << FAN_BITS) - 1) != 0 {
                break;
            }
            let m = self.maxima[l - 1][below - (1 << FAN_BITS)..]
                .iter()
                .copied()
                .fold(f64::NEG_INFINITY, f64::max);
            self.maxima[l].push(m);
        }
    }

    /// A block of 5 magnitudes is complete (value `i` its last).
    #[inline(never)]
    fn magnitude_block(&mut self, i: usize) {
        let t = &mut self.tally;
        // Insertion sort of 5 finite positive values (where `>` orders as `total_cmp` does,
        // the order `block_medians` sorts by).
        let mut b = t.mag_buf;
        for k in 1..5 {
            let mut j = k;
            while j > 0 && b[j - 1] > b[j] {
                b.swap(j - 1, j);
                j -= 1;
            }
        }
        t.mag_best = t.mag_best.max(b[2]);
        t.mag_k = 0;
        t.mag_blocks += 1;
        if t.mag_blocks % MAGNITUDE_MARK_BLOCKS == 0 {
            self.marks.push(MagnitudeMark { seg: t.seg, next: i + 1, best: t.mag_best });
        }
    }

    /// Fold in consecutive values of one segment.
    pub fn extend(&mut self, xs: &[f64], segment: u64) {
        for &x in xs {
            self.push(x, segment);
        }
    }

    /// What [`History::rewind`] needs to take back every value pushed from now on.
    pub fn mark(&self) -> Tally {
        self.tally
    }

    /// Take back the values pushed since `mark` was taken (`values`: the series' values
    /// after taking them back).
    pub fn rewind(&mut self, mark: Tally, values: &[f64]) {
        debug_assert_eq!(mark.len, values.len());
        self.tally = mark;
        self.marks.retain(|m| m.next <= mark.len);
        for (l, level) in self.maxima.iter_mut().enumerate() {
            level.truncate(mark.len >> (FAN_BITS * (l as u32 + 1)));
        }
    }

    /// The last index in `from..len` whose value is not finite or above `level` (`level`
    /// finite), by descending the block maxima; `None` when every value there is at most
    /// `level`; the outer `None` when block maxima are not kept or `level` is not finite.
    pub fn last_above(&self, values: &[f64], from: usize, level: f64) -> Option<Option<usize>> {
        if !self.tally.levels || !level.is_finite() || values.len() != self.tally.len {
            return None;
        }
        let mut i = values.len();
        'walk: while i > from {
            for l in (0..self.maxima.len()).rev() {
                let size = 1usize << (FAN_BITS * (l as u32 + 1));
                if i % size == 0 && i - size >= from && self.maxima[l][i / size - 1] <= level {
                    i -= size;
                    continue 'walk;
                }
            }
            if key(values[i - 1]) > level {
                return Some(Some(i - 1));
            }
            i -= 1;
        }
        Some(None)
    }

    /// How many values at the end of `v` from index `from` on equal (`==`) the last one: from
    /// the history when `v` has one, else counted back.
    pub fn trailing_equal(v: &View<'_>, from: usize) -> usize {
        let n = v.len();
        match v.history {
            Some(h) => h.tally.tail_equal.min(n.saturating_sub(from)),
            None => {
                let x = v.vals[n - 1];
                v.vals[from.min(n)..].iter().rev().take_while(|&&y| y == x).count()
            }
        }
    }

    /// The latest magnitude checkpoint of the latest segment at or before value `index`.
    pub fn magnitude_mark(&self, index: usize) -> Option<MagnitudeMark> {
        if !self.tally.magnitude {
            return None;
        }
        let seg = self.tally.seg;
        let k = self.marks.partition_point(|m| m.seg < seg || (m.seg == seg && m.next <= index));
        self.marks[..k].last().filter(|m| m.seg == seg).copied()
    }

    /// Heap bytes held (block maxima and checkpoints).
    pub fn heap_bytes(&self) -> usize {
        self.maxima.iter().map(|l| l.capacity() * 8).sum::<usize>()
            + self.marks.capacity() * std::mem::size_of::<MagnitudeMark>()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::rng::Rng;

    /// The last index in `from..` not finite or above `level`, by a plain backward scan.
    fn scan_last_above(v: &[f64], from: usize, level: f64) -> Option<usize> {
        (from..v.len()).rev().find(|&i| !(v[i].is_finite() && v[i] <= level))
    }

    #[test]
    fn block_maxima_find_what_a_scan_finds() {
        let mut rng = Rng::new(7);
        let n = 300_000;
        let vals: Vec<f64> = (0..n)
            .map(|i| {
                if rng.chance(1e-4) {
                    f64::NAN
                } else {
                    10f64.powf(-4.0 * (i as f64 / n as f64) + 0.3 * rng.normal())
                }
            })
            .collect();
        let h = History::rebuild(Role::Residual, &vals, |_| 0);
        for level in [1e-6, 1e-4, 1e-3, 1e-2, 0.1, 1.0, 10.0, 1e9] {
            for from in [0, 1, 63, 64, 4095, 4097, 100_000, 262_144, 299_990, n] {
                assert_eq!(
                    h.last_above(&vals, from, level),
                    Some(scan_last_above(&vals, from, level)),
                    "level {level} from {from}"
                );
            }
        }
        assert_eq!(h.last_above(&vals, 0, f64::INFINITY), None);
        assert_eq!(h.last_above(&vals, 0, f64::NAN), None);
    }

    /// The judgement of `input` as given and without the store's aggregates (the judge then
    /// scans), as Debug text so that NaN fields compare equal.
    fn both_ways(input: &crate::judge::RunInput<'_>) -> (String, String) {
        let criteria = crate::judge::Criteria::default();
        let with = crate::judge::judge(input, &criteria);
        let mut bare = input.clone();
        for s in &mut bare.series {
            assert!(s.history.is_some(), "the store gives every series its history");
            s.history = None;
        }
        (format!("{with:?}"), format!("{:?}", crate::judge::judge(&bare, &criteria)))
    }

    #[test]
    fn the_judgement_is_the_same_with_and_without_the_aggregates() {
        use crate::synth::{self, Options, Scenario};
        // Every scenario at its drawn length (1 500–4 000 iterations, restarts and NaN
        // included), whole and as a watcher sees it part-way; then long runs (about 20 000
        // iterations), whose residuals use the upper levels of the block maxima.
        for (k, &sc) in Scenario::all().iter().enumerate() {
            let run = synth::generate(sc, 900 + k as u64);
            for steps in [run.steps.len() / 2, run.steps.len()] {
                let st = synth::to_store_prefix(&run, steps);
                let (with, without) = both_ways(&st.judge_input());
                assert_eq!(with, without, "{} at {steps} steps", sc.name());
            }
        }
        for (k, sc) in [Scenario::Converging, Scenario::LongPeriodCycle, Scenario::Restart]
            .into_iter()
            .enumerate()
        {
            let options = Options { iterations: Some(60_000), case: None };
            let run = synth::generate_with(sc, 77 + k as u64, &options);
            let st = synth::to_store(&run);
            let input = st.judge_input();
            let (with, without) = both_ways(&input);
            assert_eq!(with, without, "{} (long)", sc.name());
        }
    }

    #[test]
    fn a_magnitude_from_a_checkpoint_equals_the_full_pass() {
        use crate::judge::SeriesInput;
        use crate::judge::scale::Magnitude;
        use crate::judge::series::View;
        use std::borrow::Cow;
        // A monitor ramping up with noise, zeros and a NaN (skipped by the block medians),
        // restarted at value 30 000: checkpoints in both segments.
        let mut rng = Rng::new(5);
        let n = 130_000;
        let vals: Vec<f64> = (0..n)
            .map(|i| match i {
                _ if i % 7_001 == 0 => 0.0,
                77_777 => f64::NAN,
                _ => (1.0 + i as f64 * 1e-4) * (1.0 + 0.05 * rng.normal()),
            })
            .collect();
        let its: Vec<i64> =
            (0..n as i64).map(|i| if i < 30_000 { i + 1 } else { i - 9_999 }).collect();
        let h = History::rebuild(Role::Monitor, &vals, |i| u64::from(i >= 30_000));
        assert_eq!(h.marks.len(), 5, "1 checkpoint in the first segment, 4 in the second");
        let input = SeriesInput {
            name: Cow::Borrowed("drag"),
            role: Role::Monitor,
            iterations: Cow::Borrowed(&its),
            values: Cow::Borrowed(&vals),
            segment_starts: vec![0, 30_000],
            history: Some(&h),
        };
        let v = View::new(&input).expect("non-empty");
        assert!(v.history.is_some());
        let full = Magnitude::new(&v);
        let last = v.last_it();
        for from in [last - 100, last - 5_000, last - 40_000, last - 90_000, 20_001] {
            let tail = Magnitude::from_iteration(&v, from);
            assert_eq!(tail.max(), full.max());
            for t in [from, from + 1, from + 333, (from + last) / 2, last - 1, last] {
                assert_eq!(tail.at(t), full.at(t), "from {from} at {t}");
            }
        }
    }

    #[test]
    fn trailing_repeats_equal_a_count_back() {
        use crate::judge::SeriesInput;
        use crate::judge::series::View;
        use std::borrow::Cow;
        let nan = f64::NAN;
        let cases: [&[f64]; 7] = [
            &[1.0, 2.0, 2.0, 2.0],
            &[2.0, 2.0, 2.0],
            &[1.0, nan, nan],
            &[nan, 3.0],
            &[1.0, 0.0, -0.0, 0.0],
            &[5.0, f64::INFINITY, f64::INFINITY],
            &[7.0],
        ];
        for vals in cases {
            let its: Vec<i64> = (1..=vals.len() as i64).collect();
            let h = History::rebuild(Role::Indicator, vals, |_| 0);
            let mut input = SeriesInput {
                iterations: Cow::Borrowed(&its),
                values: Cow::Borrowed(vals),
                segment_starts: vec![0],
                history: Some(&h),
                ..Default::default()
            };
            let with = View::new(&input).map(|v| History::trailing_equal(&v, 0));
            let from_one = View::new(&input).map(|v| History::trailing_equal(&v, 1));
            input.history = None;
            let without = View::new(&input).map(|v| History::trailing_equal(&v, 0));
            let from_one_without = View::new(&input).map(|v| History::trailing_equal(&v, 1));
            assert_eq!(with, without, "{vals:?}");
            assert_eq!(from_one, from_one_without, "{vals:?}");
        }
    }

    #[test]
    fn rewinding_equals_never_having_pushed() {
        let mut rng = Rng::new(11);
        let vals: Vec<f64> = (0..70_000)
            .map(|i| if i % 9_999 == 0 { f64::INFINITY } else { rng.log_range(1e-3, 1e3) })
            .collect();
        for role in [Role::Residual, Role::Monitor, Role::Indicator] {
            for cut in [0, 1, 64, 65, 4096, 4100, 20_480, 20_485, 40_000, 69_999] {
                let seg = |i: usize| u64::from(i >= 30_000);
                let mut h = History::rebuild(role, &vals[..cut], seg);
                let m = h.mark();
                for (i, &x) in vals.iter().enumerate().skip(cut) {
                    h.push(x, seg(i));
                }
                h.rewind(m, &vals[..cut]);
                assert_eq!(h, History::rebuild(role, &vals[..cut], seg), "{role:?} {cut}");
            }
        }
    }
}
