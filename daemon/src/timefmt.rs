//! Calendar arithmetic for unix times, without a date library: RFC 3339 text for reports and
//! logs, and timestamps in file names.
//!
//! The conversions between days since 1970-01-01 and civil dates are H. Hinnant's
//! `days_from_civil` / `civil_from_days` algorithms ("chrono-Compatible Low-Level Date
//! Algorithms", 2013), exact for the proleptic Gregorian calendar.

/// Days since 1970-01-01 of a civil date.
pub(crate) fn days_from_civil(y: i64, m: u32, d: u32) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let m = i64::from(m);
    let doy = (153 * (if m > 2 { m - 3 } else { m + 9 }) + 2) / 5 + i64::from(d) - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// Civil date of a day count since 1970-01-01.
pub(crate) fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    (if m <= 2 { y + 1 } else { y }, m, d)
}

/// `2026-12-01T10:15:00Z` (to the second; UTC).
pub(crate) fn rfc3339(unix_s: f64) -> String {
    if !unix_s.is_finite() {
        return "-".to_string();
    }
    let secs = unix_s.floor() as i64;
    let (days, rem) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
    let (y, m, d) = civil_from_days(days);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// A UTC timestamp in a file name: `YYYYMMDDTHHMMSS` (also with `_` or `-` for `T`), as loggers
/// commonly name their captures, e.g. `tg-1_20261201T101500Z.csv`.
pub(crate) fn from_file_name(name: &str) -> Option<f64> {
    let b = name.as_bytes();
    (0..b.len().saturating_sub(14)).find_map(|i| {
        let w = &b[i..i + 15];
        let digits = |r: std::ops::Range<usize>| w[r].iter().all(u8::is_ascii_digit);
        if !(digits(0..8) && matches!(w[8], b'T' | b'_' | b'-') && digits(9..15)) {
            return None;
        }
        let num = |r: std::ops::Range<usize>| -> Option<u32> {
            std::str::from_utf8(&w[r]).ok()?.parse().ok()
        };
        let (y, mo, d) = (num(0..4)?, num(4..6)?, num(6..8)?);
        let (h, mi, s) = (num(9..11)?, num(11..13)?, num(13..15)?);
        if !(1..=12).contains(&mo) || !(1..=31).contains(&d) || h > 23 || mi > 59 || s > 60 {
            return None;
        }
        let days = days_from_civil(i64::from(y), mo, d);
        Some((days * 86_400 + i64::from(h * 3600 + mi * 60 + s)) as f64)
    })
}

/// Now, unix seconds.
pub(crate) fn now() -> f64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0.0, |d| d.as_secs_f64())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn known_dates() {
        // Checked against Python's datetime (timestamp of 2000-03-01 and 2026-12-01T10:15:00 UTC).
        assert_eq!(days_from_civil(2000, 3, 1), 11_017);
        assert_eq!(civil_from_days(11_017), (2000, 3, 1));
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        for z in [-800_000, -1, 0, 59, 60, 10_000, 20_000, 2_000_000] {
            let (y, m, d) = civil_from_days(z);
            assert_eq!(days_from_civil(y, m, d), z);
        }
        assert_eq!(rfc3339(1_796_120_100.0), "2026-12-01T10:15:00Z");
        assert_eq!(
            from_file_name("tg-1_20261201T101500Z.csv"),
            Some(1_796_120_100.0)
        );
        assert_eq!(from_file_name("run-2026-12-01.csv"), None);
    }
}
