//! Runtime helpers both engines share: the series table, skip bookkeeping and text cleaning.
//!
//! The series table gives each series name a parser-local [`SeriesId`] and announces it with
//! [`Output::Series`] the first time it is seen, so the store always learns of a series before
//! a record uses it. Name lookups from captured bytes go through a small FNV hash map keyed by
//! the raw bytes, so the common path (a name seen before) neither decodes nor allocates.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

use crate::record::{LineStats, Role, SeriesId, SeriesInfo, Sink, Skip};

/// Most series one parser will create. A `name` capture run over junk could otherwise invent
/// a new series for every distinct word of a huge file.
pub const MAX_SERIES: usize = 10_000;

/// How many skip reasons are emitted as [`Output::Skipped`]; later ones are only counted.
pub const MAX_SKIP_REPORTS: u32 = 20;

/// Longest event message or series name kept, in characters.
const MAX_TEXT: usize = 400;

/// FNV-1a: fast for the short keys (equation names) looked up on every line.
#[derive(Default, Clone, Copy)]
pub struct Fnv(u64);

impl Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        let mut h = if self.0 == 0 { 0xcbf2_9ce4_8422_2325 } else { self.0 };
        for &b in bytes {
            h ^= u64::from(b);
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
        self.0 = h;
    }
}

pub type FnvMap<K, V> = HashMap<K, V, BuildHasherDefault<Fnv>>;

/// Series names → ids, with announcement.
#[derive(Debug, Default, Clone)]
pub struct SeriesTable {
    by_name: FnvMap<String, SeriesId>,
    /// Name and role of every id, in id order.
    infos: Vec<(String, Role)>,
}

impl SeriesTable {
    /// The id of `name`, creating and announcing it (with `role`) when new. `None` once the
    /// table holds [`MAX_SERIES`] series.
    pub fn intern(&mut self, name: &str, role: Role, out: &mut dyn Sink) -> Option<SeriesId> {
        if let Some(&id) = self.by_name.get(name) {
            return Some(id);
        }
        if self.infos.len() >= MAX_SERIES {
            return None;
        }
        let id = SeriesId::try_from(self.infos.len()).ok()?;
        self.by_name.insert(name.to_string(), id);
        self.infos.push((name.to_string(), role));
        out.series(SeriesInfo { id, name: name.to_string(), role });
        Some(id)
    }

    /// Number of series created.
    pub fn len(&self) -> usize {
        self.infos.len()
    }

    /// Announce again the first `n` series (after output of another parser instance, so
    /// that a sink maps these ids to these names once more).
    pub fn announce(&self, n: usize, out: &mut dyn Sink) {
        for (id, (name, role)) in self.infos.iter().take(n).enumerate() {
            out.series(SeriesInfo { id: id as SeriesId, name: name.clone(), role: *role });
        }
    }
}

/// Line counting and the capped list of skip reasons.
#[derive(Debug, Default, Clone)]
pub struct Tally {
    pub stats: LineStats,
    reported: u32,
}

impl Tally {
    /// Count a skipped line; emit its reason while under the cap. `reason` is only called
    /// when the reason will be shown, so skipping stays cheap once the cap is reached.
    pub fn skip(&mut self, line: u64, out: &mut dyn Sink, reason: impl FnOnce() -> String) {
        self.stats.skipped += 1;
        if self.reported < MAX_SKIP_REPORTS {
            self.reported += 1;
            out.skipped(Skip { line, reason: reason() });
        }
    }

    /// Skip reasons emitted so far.
    pub fn reported(&self) -> u32 {
        self.reported
    }

    /// Continue the counts of an earlier parser instance of the same source (parts of one
    /// file parsed in parallel): `before` are its counts, `reported` its skip reports.
    pub fn rebase(&mut self, before: LineStats, reported: u32) {
        self.stats = before.plus(self.stats);
        self.reported = self.reported.saturating_add(reported).min(MAX_SKIP_REPORTS);
    }
}

/// What a line turned out to be, for [`LineStats`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum LineUse {
    Ignored,
    Used,
    Skipped,
}

impl LineUse {
    /// Combine what two rules made of the same line: a failure anywhere makes it skipped.
    pub fn and(self, other: LineUse) -> LineUse {
        self.max(other)
    }
}

/// Lossy text from log bytes, with control characters removed, trimmed and capped, for event
/// messages, end marks, skip reasons and series names.
pub fn clean_text(b: &[u8]) -> String {
    let s = String::from_utf8_lossy(b.trim_ascii());
    let mut out = String::with_capacity(s.len().min(MAX_TEXT));
    for (n, c) in s.chars().filter(|c| !c.is_control()).enumerate() {
        if n >= MAX_TEXT {
            out.push('…');
            break;
        }
        out.push(c);
    }
    out
}

/// A short quoted excerpt of bytes for a skip reason.
pub fn excerpt(b: &[u8]) -> String {
    const SHOWN: usize = 40;
    let t = clean_text(b);
    if t.chars().count() > SHOWN {
        format!("`{}…`", t.chars().take(SHOWN).collect::<String>())
    } else {
        format!("`{t}`")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::record::Output;

    #[test]
    fn interning_announces_once() {
        let mut t = SeriesTable::default();
        let mut out: Vec<Output> = Vec::new();
        assert_eq!(t.intern("p", Role::Residual, &mut out), Some(0));
        assert_eq!(t.intern("Ux", Role::Residual, &mut out), Some(1));
        assert_eq!(t.intern("p", Role::Monitor, &mut out), Some(0));
        assert_eq!(out.len(), 2);
        assert_eq!(
            out[1],
            Output::Series(SeriesInfo { id: 1, name: "Ux".into(), role: Role::Residual })
        );
    }

    #[test]
    fn skip_reports_are_capped() {
        let mut t = Tally::default();
        let mut out: Vec<Output> = Vec::new();
        for line in 1..=30 {
            t.skip(line, &mut out, || format!("bad {line}"));
        }
        assert_eq!(t.stats.skipped, 30);
        assert_eq!(out.len(), MAX_SKIP_REPORTS as usize);
    }

    #[test]
    fn text_is_cleaned() {
        assert_eq!(clean_text(b"  a\x07b\tc \xff "), "abc \u{fffd}");
        assert_eq!(excerpt(b"x"), "`x`");
        assert!(clean_text(&[b'a'; 1000]).ends_with('…'));
        assert_eq!(LineUse::Used.and(LineUse::Skipped), LineUse::Skipped);
        assert_eq!(LineUse::Ignored.and(LineUse::Used), LineUse::Used);
    }
}
