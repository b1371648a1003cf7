//! The values of one record while it is being read, with the repeat policy applied as they
//! arrive.
//!
//! Series ids index two small arrays (a generation stamp and a slot), so finding whether a
//! series already has a value in this record costs two array reads, and starting a new record
//! costs one increment. The buffer is reused record after record: closing a record hands its
//! values out as a slice, nothing is allocated. Each buffer's slot arrays describe its own
//! values, so two buffers can be exchanged with `std::mem::swap`.

use super::Repeat;
use crate::record::SeriesId;

/// Most values one record may hold (repeat policy `all` over a huge step-less stretch).
pub const MAX_RECORD_VALUES: usize = 100_000;

/// Values gathered for one record.
#[derive(Debug, Clone)]
pub struct Accum {
    values: Vec<(SeriesId, f64)>,
    /// Generation of this record; `slot_gen[s] == generation` means series `s` has a slot.
    generation: u64,
    slot_gen: Vec<u64>,
    slot_idx: Vec<u32>,
}

impl Accum {
    pub fn new() -> Accum {
        Accum { values: Vec::new(), generation: 1, slot_gen: Vec::new(), slot_idx: Vec::new() }
    }

    /// Whether series `s` already holds a value in this record (one that repeat policy
    /// `first` keeps, so a new one need not even be read).
    #[inline]
    pub fn has(&self, s: SeriesId) -> bool {
        self.slot_gen.get(s as usize) == Some(&self.generation)
    }

    /// Add a value; `false` when the record is full.
    #[inline]
    pub fn push(&mut self, s: SeriesId, v: f64, repeat: Repeat) -> bool {
        let si = s as usize;
        if repeat == Repeat::All {
            if self.values.len() >= MAX_RECORD_VALUES {
                return false;
            }
            self.values.push((s, v));
            return true;
        }
        if si >= self.slot_gen.len() {
            self.slot_gen.resize(si + 1, 0);
            self.slot_idx.resize(si + 1, 0);
        }
        if self.slot_gen[si] == self.generation {
            let slot = &mut self.values[self.slot_idx[si] as usize].1;
            let old = *slot;
            *slot = match repeat {
                Repeat::First | Repeat::All => old,
                Repeat::Last => v,
                // A nan among the matches wins: it is the signal, not noise.
                Repeat::Min if old.is_nan() || v.is_nan() => f64::NAN,
                Repeat::Max if old.is_nan() || v.is_nan() => f64::NAN,
                Repeat::Min => old.min(v),
                Repeat::Max => old.max(v),
            };
            return true;
        }
        if self.values.len() >= MAX_RECORD_VALUES {
            return false;
        }
        self.slot_gen[si] = self.generation;
        self.slot_idx[si] = self.values.len() as u32;
        self.values.push((s, v));
        true
    }

    /// The values gathered so far.
    pub fn values(&self) -> &[(SeriesId, f64)] {
        &self.values
    }

    /// Start an empty record (the values handed out before stay valid until the next push).
    pub fn clear(&mut self) {
        self.generation += 1;
        self.values.clear();
    }
}

impl Default for Accum {
    fn default() -> Self {
        Accum::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn take(a: &mut Accum) -> Vec<(SeriesId, f64)> {
        let v = a.values().to_vec();
        a.clear();
        v
    }

    #[test]
    fn accum_applies_repeat_policies() {
        let mut a = Accum::new();
        for (v, r) in [(3.0, Repeat::First), (1.0, Repeat::First)] {
            a.push(0, v, r);
        }
        for v in [3.0, 1.0, 2.0] {
            a.push(1, v, Repeat::Min);
            a.push(2, v, Repeat::Max);
            a.push(3, v, Repeat::Last);
            a.push(4, v, Repeat::All);
        }
        assert_eq!(
            take(&mut a),
            vec![(0, 3.0), (1, 1.0), (2, 3.0), (3, 2.0), (4, 3.0), (4, 1.0), (4, 2.0)]
        );
        // A new record starts empty even though the slot vectors are reused.
        a.push(1, 5.0, Repeat::Min);
        a.push(1, f64::NAN, Repeat::Min);
        a.push(1, 0.0, Repeat::Min);
        let v = take(&mut a);
        assert_eq!(v.len(), 1);
        assert!(v[0].1.is_nan(), "nan wins min");
        assert!(!a.has(1));
    }

    #[test]
    fn swapped_values_keep_their_slots() {
        let mut cur = Accum::new();
        let mut pending = Accum::new();
        pending.push(3, 1.0, Repeat::Last);
        cur.push(3, 9.0, Repeat::Last);
        cur.push(5, 9.0, Repeat::Last);
        // Each buffer's slots travel with its values, so a plain swap keeps both consistent.
        std::mem::swap(&mut cur, &mut pending);
        pending.clear();
        // cur now holds series 3 (from pending): a later value replaces it, series 5 is new.
        assert!(cur.has(3));
        assert!(!cur.has(5));
        cur.push(3, 2.0, Repeat::Last);
        cur.push(5, 4.0, Repeat::First);
        assert_eq!(cur.values(), &[(3, 2.0), (5, 4.0)]);
        assert!(pending.values().is_empty() && !pending.has(3));
    }
}
