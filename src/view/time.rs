//! Wall-clock times as text, one spelling for every output that stamps a time (headless
//! status lines, report provenance): RFC 3339 in UTC to the whole second, without a date
//! library (a calendar conversion of a few lines is all that is needed).

use std::time::{SystemTime, UNIX_EPOCH};

/// A time as `YYYY-MM-DDTHH:MM:SSZ` (UTC, whole seconds), without a date library.
pub fn format_utc(t: SystemTime) -> String {
    let secs: i64 = match t.duration_since(UNIX_EPOCH) {
        Ok(d) => i64::try_from(d.as_secs()).unwrap_or(i64::MAX),
        Err(e) => {
            // Before 1970: round down to the whole second.
            let d = e.duration();
            let s = i64::try_from(d.as_secs()).unwrap_or(i64::MAX);
            if d.subsec_nanos() > 0 { -s - 1 } else { -s }
        }
    };
    let days = secs.div_euclid(86_400);
    let rem = secs.rem_euclid(86_400);
    let (y, m, d) = civil_from_days(days);
    format!("{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z", rem / 3600, rem % 3600 / 60, rem % 60)
}

/// Proleptic Gregorian date of a day count since 1970-01-01.
///
/// The era-based algorithm published by Howard Hinnant ("chrono-compatible low-level date
/// algorithms"): shift to a year starting in March so the leap day is last, split into
/// 400-year eras of 146 097 days.
fn civil_from_days(days: i64) -> (i64, u32, u32) {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097); // day of era, 0..=146096
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365; // 0..=399
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100); // day of year from March 1
    let mp = (5 * doy + 2) / 153; // month from March, 0..=11
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

#[cfg(test)]
mod tests {
    use std::time::Duration;

    use super::*;

    fn at(secs: i64) -> SystemTime {
        if secs >= 0 {
            UNIX_EPOCH + Duration::from_secs(secs as u64)
        } else {
            UNIX_EPOCH - Duration::from_secs(secs.unsigned_abs())
        }
    }

    #[test]
    fn utc_formatting_matches_gnu_date() {
        // Expected strings produced with GNU `date -u -d @SECONDS +%FT%TZ`.
        assert_eq!(format_utc(at(0)), "1970-01-01T00:00:00Z");
        assert_eq!(format_utc(at(1_234_567_890)), "2009-02-13T23:31:30Z");
        assert_eq!(format_utc(at(951_782_400)), "2000-02-29T00:00:00Z");
        assert_eq!(format_utc(at(951_868_800)), "2000-03-01T00:00:00Z");
        assert_eq!(format_utc(at(4_107_542_399)), "2100-02-28T23:59:59Z");
        assert_eq!(format_utc(at(4_107_542_400)), "2100-03-01T00:00:00Z");
        assert_eq!(format_utc(at(1_796_119_451)), "2026-12-01T10:04:11Z");
        assert_eq!(format_utc(at(-1)), "1969-12-31T23:59:59Z");
        assert_eq!(format_utc(at(-86_400 * 365)), "1969-01-01T00:00:00Z");
        assert_eq!(format_utc(UNIX_EPOCH - Duration::from_millis(500)), "1969-12-31T23:59:59Z");
    }
}
