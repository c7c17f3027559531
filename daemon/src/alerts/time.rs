//! RFC 3339 text of a unix time, for the alert outputs, without a date library.
//!
//! Days to civil dates by H. Hinnant's `civil_from_days` ("chrono-Compatible Low-Level Date
//! Algorithms", 2013), exact for the proleptic Gregorian calendar.

/// Civil date (year, month, day) of a day count since 1970-01-01.
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097; // [0, 146096]
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365; // [0, 399]
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100); // [0, 365]
    let mp = (5 * doy + 2) / 153; // [0, 11], March first
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    (if m <= 2 { y + 1 } else { y }, m, d)
}

/// `2026-12-01T10:15:00.250Z`: UTC, to the millisecond (alerts of one second are told apart).
/// A non-finite time, which no valid input carries, prints as the epoch rather than failing an
/// output.
pub(super) fn rfc3339(unix_s: f64) -> String {
    let ms_total = if unix_s.is_finite() {
        (unix_s * 1000.0).round() as i64
    } else {
        0
    };
    let secs = ms_total.div_euclid(1000);
    let ms = ms_total.rem_euclid(1000);
    let (days, rem) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
    let (y, m, d) = civil_from_days(days);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}.{ms:03}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}
