//! When an action fires: the hold count and the once-per-transition latch (pure state).
//!
//! * **Hold.** The verdict must be in the action's `on` set for `hold` consecutive *judged
//!   records*. The judgement that first shows the verdict counts as one record (we cannot
//!   know where inside its batch the change happened); each later judgement adds the number
//!   of records it saw beyond the previous one. A judgement with no new records adds
//!   nothing, so re-judging the same data never fires anything. Records that were ingested
//!   but not judged yet never count: the caller passes the record count the judgement saw,
//!   and marks a judgement older than the data as pending.
//! * **Final data waives the hold.** When no further records can come (the solver's
//!   end-of-run mark, a log stale past the stale limit, `check` at end of file, or the
//!   verdict `stale` itself) the hold could never be reached, so the verdict in hand
//!   counts. This is what lets an action cancel a job that hung right after a crash.
//! * **Latch.** An action fires at most once while the verdict stays in its `on` set. It
//!   re-arms only when a judgement shows a verdict outside the set; coming back then needs
//!   the full hold again, so a flapping verdict cannot fire on every flap.
//! * **Pending.** While a large read is in progress (the first read of an existing log, a
//!   re-read from the start), or when records arrived that the judgement has not seen,
//!   judgements neither count nor fire nor re-arm (RELIABILITY §6: never fire while
//!   re-reading a rotated file).
//! * A record count going backwards (the store was rebuilt) restarts the hold at one.

/// Hold and latch state of one action.
#[derive(Debug, Clone, PartialEq)]
pub struct Latch {
    hold: u64,
    streak: u64,
    last_records: u64,
    inside: bool,
    armed: bool,
}

impl Latch {
    pub fn new(hold: u64) -> Latch {
        Latch { hold: hold.max(1), streak: 0, last_records: 0, inside: false, armed: true }
    }

    /// Feed one judgement; true when the action fires now.
    pub fn step(
        &mut self,
        inside: bool,
        records_seen: u64,
        data_final: bool,
        pending: bool,
    ) -> bool {
        if pending {
            self.last_records = records_seen;
            return false;
        }
        if !inside {
            self.inside = false;
            self.streak = 0;
            self.armed = true;
            self.last_records = records_seen;
            return false;
        }
        if !self.inside {
            self.inside = true;
            self.streak = 1;
        } else if records_seen > self.last_records {
            self.streak = self.streak.saturating_add(records_seen - self.last_records);
        } else if records_seen < self.last_records {
            self.streak = 1;
        }
        self.last_records = records_seen;
        if self.armed && (self.streak >= self.hold || data_final) {
            self.armed = false;
            return true;
        }
        false
    }

    /// Consecutive records the verdict has held so far (0 outside the `on` set).
    pub fn streak(&self) -> u64 {
        self.streak
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fires_after_hold_records_once_and_rearms_after_leaving() {
        let mut l = Latch::new(3);
        let seq = [
            (true, 1, false),  // streak 1
            (true, 2, false),  // 2
            (true, 3, true),   // 3: fire
            (true, 4, false),  // latched
            (true, 50, false), // latched
            (false, 51, false),
            (true, 52, false),
            (true, 53, false),
            (true, 54, true), // re-armed, held 3 again
        ];
        for (i, (inside, rec, fire)) in seq.into_iter().enumerate() {
            assert_eq!(l.step(inside, rec, false, false), fire, "step {i}");
        }
    }

    #[test]
    fn rejudging_without_new_records_does_not_count() {
        let mut l = Latch::new(3);
        assert!(!l.step(true, 10, false, false));
        for _ in 0..20 {
            assert!(!l.step(true, 10, false, false));
        }
        assert_eq!(l.streak(), 1);
        assert!(l.step(true, 12, false, false));
    }

    #[test]
    fn batches_count_their_records() {
        let mut l = Latch::new(3);
        assert!(!l.step(true, 100, false, false));
        assert!(l.step(true, 200, false, false));
    }

    #[test]
    fn final_data_waives_the_hold() {
        let mut l = Latch::new(3);
        assert!(!l.step(true, 7, false, false));
        assert!(l.step(true, 7, true, false));
        assert!(!l.step(true, 7, true, false), "still latched");
    }

    #[test]
    fn pending_freezes_everything() {
        let mut l = Latch::new(2);
        assert!(!l.step(true, 1, false, false));
        // Records during the re-read neither count nor fire, and leaving does not re-arm.
        assert!(!l.step(true, 40, true, true));
        assert!(!l.step(false, 41, false, true));
        assert_eq!(l.streak(), 1);
        assert!(l.step(true, 42, false, false));
    }

    #[test]
    fn records_going_back_restart_the_hold() {
        let mut l = Latch::new(3);
        assert!(!l.step(true, 10, false, false));
        assert!(!l.step(true, 11, false, false));
        assert!(!l.step(true, 2, false, false));
        assert_eq!(l.streak(), 1);
        assert!(!l.step(true, 3, false, false));
        assert!(l.step(true, 4, false, false));
    }

    #[test]
    fn hold_of_one_fires_on_first_sight() {
        let mut l = Latch::new(1);
        assert!(l.step(true, 1, false, false));
    }
}
