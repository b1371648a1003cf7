//! The series' running aggregates ([`History`]) equal a full scan of the stored values after
//! every way the store changes: records one by one and in batches, restarts (new files,
//! iterations going back), a provisional open record taken back, and files rewritten in
//! place (the store cut back and refilled).

use super::*;
use crate::judge::history::History;
use crate::record::{Batch, Record, Role};
use crate::synth::rng::Rng;

/// Every series' history equals the one rebuilt from its values and segments.
fn assert_matches_a_scan(src: &SourceStore, what: &str) {
    for s in src.series() {
        let rebuilt =
            History::rebuild(s.role, s.values(), |i| segment_of(&src.segments, s.record_of(i)).1);
        assert_eq!(s.history(), &rebuilt, "{}: {what}", s.name);
        // The latest segment agrees with the one the judge locates.
        let starts = src.series_segment_starts(s);
        if let Some(&last) = starts.last() {
            assert_eq!(s.history().tally().seg, last, "{}: {what}", s.name);
        }
    }
}

fn announce(src: &mut impl Sink) {
    let names = [
        ("p", Role::Residual),
        ("k", Role::Residual),
        ("drag", Role::Monitor),
        ("sw", Role::Indicator),
    ];
    for (id, (name, role)) in names.into_iter().enumerate() {
        src.series(SeriesInfo { id: id as u32, name: name.into(), role });
    }
}

/// A record at `it`: residuals with NaN, zeros and negatives now and then, a monitor, an
/// indicator missing from some records and repeated in others (a sparse series).
fn record(rng: &mut Rng, it: i64) -> Record {
    let mut values = Vec::new();
    for id in 0..2u32 {
        let x = match rng.uniform() {
            u if u < 0.01 => f64::NAN,
            u if u < 0.02 => 0.0,
            u if u < 0.025 => -1e-3,
            u if u < 0.03 => f64::INFINITY,
            _ => 10f64.powf(-(it as f64) / 3_000.0 + 0.5 * rng.normal()),
        };
        values.push((id, x));
    }
    values.push((2, 0.4 + 0.01 * rng.normal()));
    for _ in 0..rng.int_range(0, 2) {
        values.push((3, rng.int_range(1, 4) as f64));
    }
    Record { iteration: Some(it), values, ..Default::default() }
}

#[test]
fn aggregates_equal_a_full_scan_after_appends_restarts_rewinds_and_rewrites() {
    let mut rng = Rng::new(2026);
    let mut src = SourceStore::new("tarn.log", "tarn");
    announce(&mut src);
    let mut it = 0i64;
    for round in 0..60 {
        match round % 6 {
            // Records one by one.
            0 => {
                for _ in 0..rng.int_range(1, 400) {
                    it += 1;
                    src.apply([Output::Record(record(&mut rng, it))]);
                }
            }
            // A batch parsed on another core, with columns, sometimes going back in
            // iterations inside it (a restart within the batch).
            1 => {
                let mut b = Batch::new();
                let back = rng.chance(0.5);
                for k in 0..rng.int_range(1, 5_000) {
                    it = if back && k == 100 { (it - 50).max(1) } else { it + 1 };
                    Output::Record(record(&mut rng, it)).send_to(&mut b);
                }
                b.build_columns();
                Sink::batch(&mut src, &b, 0, false);
            }
            // The next restart file.
            2 => {
                src.restart(SegmentReason::NewFile { path: format!("tarn.log.{round}").into() });
                announce(&mut src);
                it = (it - rng.int_range(0, 100)).max(0);
            }
            // A provisional open record, then the real one.
            3 => {
                let open = record(&mut rng, it + 1);
                src.show_open(open.as_ref());
                assert_matches_a_scan(&src, "open record shown");
                let back = if rng.chance(0.3) { (it - 10).max(1) } else { it + 1 };
                src.show_open(record(&mut rng, back).as_ref());
                it += 1;
                src.apply([Output::Record(record(&mut rng, it))]);
            }
            // The current file rewritten in place: read again from its start, the same for
            // a while, then different (the store is cut back and takes the new records).
            4 => {
                let first = src.file.records;
                let stored = src.records() - first;
                let keep = rng.int_range(0, stored as i64 - 1) as usize;
                // record_at numbers series by position, which is what `announce` gives.
                let same: Vec<Record> =
                    (first..first + keep).filter_map(|p| src.record_at(p)).collect();
                let mut changed = src.record_at(first + keep).expect("a stored record");
                changed.values.retain(|v| v.0 != 0);
                changed.values.push((0, 1234.5));
                src.restart(SegmentReason::Truncated);
                announce(&mut src);
                src.apply(same.into_iter().map(Output::Record));
                src.apply([Output::Record(changed)]);
                assert_eq!(src.take_rewound(), Some(first + keep), "cut back at the change");
                it = src.last_iteration().unwrap_or(0);
                for _ in 0..rng.int_range(1, 300) {
                    it += 1;
                    src.apply([Output::Record(record(&mut rng, it))]);
                }
            }
            // A larger dense batch, so that the upper block maxima and checkpoints fill.
            _ => {
                let mut b = Batch::new();
                for _ in 0..30_000 {
                    it += 1;
                    Output::Record(record(&mut rng, it)).send_to(&mut b);
                }
                b.build_columns();
                Sink::batch(&mut src, &b, 0, false);
            }
        }
        assert_matches_a_scan(&src, &format!("round {round}"));
    }
    assert!(src.segments.len() > 10, "{} segments", src.segments.len());
}
