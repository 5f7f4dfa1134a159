//! Civil time: UTC Julian Dates <-> calendar instants, site-local dates and the "night of" convention.
//!
//! A night belongs to the local date on which it begins ("night of"); its window runs from local noon of that
//! date to local noon of the next. Local times come from the IANA database through `chrono-tz`; a local noon
//! always exists (no zone moves its clocks at noon), and instants are converted from UTC, never from
//! ambiguous local wall times.

use chrono::{DateTime, Duration, NaiveDate, NaiveTime, TimeZone, Utc};
use chrono_tz::Tz;

/// Julian Date of the Unix epoch 1970-01-01T00:00:00Z.
const UNIX_EPOCH_JD: f64 = 2_440_587.5;

/// The UTC instant of a UTC Julian Date, rounded to the millisecond.
pub fn datetime_from_jd(jd_utc: f64) -> DateTime<Utc> {
    let ms = ((jd_utc - UNIX_EPOCH_JD) * 86_400_000.0).round() as i64;
    DateTime::from_timestamp_millis(ms).unwrap_or(DateTime::<Utc>::MIN_UTC)
}

/// The UTC Julian Date of a UTC instant.
pub fn jd_from_datetime(t: &DateTime<Utc>) -> f64 {
    UNIX_EPOCH_JD + t.timestamp_millis() as f64 / 86_400_000.0
}

/// RFC 3339 UTC text with milliseconds, e.g. `2027-03-04T22:13:05.123Z`.
pub fn rfc3339_utc(jd_utc: f64) -> String {
    datetime_from_jd(jd_utc)
        .format("%Y-%m-%dT%H:%M:%S%.3fZ")
        .to_string()
}

/// Append RFC 3339 UTC text with milliseconds (as [`rfc3339_utc`]) to `out`, without allocating: the civil
/// date from the day count by Hinnant's `civil_from_days` algorithm ("chrono-Compatible Low-Level Date
/// Algorithms", 2013). For output loops with hundreds of thousands of timestamps.
pub fn push_rfc3339_utc(jd_utc: f64, out: &mut String) {
    let ms = ((jd_utc - UNIX_EPOCH_JD) * 86_400_000.0).round() as i64;
    let days = ms.div_euclid(86_400_000);
    let mut rem = ms.rem_euclid(86_400_000);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    let h = rem / 3_600_000;
    rem %= 3_600_000;
    let mi = rem / 60_000;
    rem %= 60_000;
    let sec = rem / 1000;
    let milli = rem % 1000;
    let mut buf = [0u8; 24];
    let put = |buf: &mut [u8], at: usize, v: i64, width: usize| {
        let mut v = v;
        for k in (0..width).rev() {
            buf[at + k] = b'0' + (v % 10) as u8;
            v /= 10;
        }
    };
    put(&mut buf, 0, y, 4);
    buf[4] = b'-';
    put(&mut buf, 5, m, 2);
    buf[7] = b'-';
    put(&mut buf, 8, d, 2);
    buf[10] = b'T';
    put(&mut buf, 11, h, 2);
    buf[13] = b':';
    put(&mut buf, 14, mi, 2);
    buf[16] = b':';
    put(&mut buf, 17, sec, 2);
    buf[19] = b'.';
    put(&mut buf, 20, milli, 3);
    buf[23] = b'Z';
    // ASCII digits and separators: each byte is one char.
    out.extend(buf.iter().map(|&b| char::from(b)));
}

/// UTC Julian Date of local noon on `date` in `tz`.
pub fn local_noon_jd(date: NaiveDate, tz: Tz) -> f64 {
    let naive = date.and_time(NaiveTime::from_hms_opt(12, 0, 0).expect("valid time"));
    let local = tz
        .from_local_datetime(&naive)
        .earliest()
        // No zone skips noon; if one ever did, fall back to interpreting the wall time as UTC + offset at 0h.
        .unwrap_or_else(|| tz.from_utc_datetime(&naive));
    jd_from_datetime(&local.with_timezone(&Utc))
}

/// The "night of" date of an instant: the local date of the preceding local noon.
pub fn night_of(jd_utc: f64, tz: Tz) -> NaiveDate {
    let local = datetime_from_jd(jd_utc).with_timezone(&tz);
    (local.naive_local() - Duration::hours(12)).date()
}

/// Local wall time of an instant as `HH:MM` in `tz`; inside the hour that a clock change repeats, the zone
/// abbreviation is added (`02:30 CEST`, then `02:30 CET`) so the two are never confused.
pub fn local_hhmm(jd_utc: f64, tz: Tz) -> String {
    let local = datetime_from_jd(jd_utc).with_timezone(&tz);
    let text = local.format("%H:%M").to_string();
    match tz.from_local_datetime(&local.naive_local()) {
        chrono::LocalResult::Ambiguous(..) => format!("{text} {}", local.format("%Z")),
        _ => text,
    }
}

/// The zone abbreviation in force at an instant (e.g. `CET`, `-03`).
pub fn zone_abbreviation(jd_utc: f64, tz: Tz) -> String {
    datetime_from_jd(jd_utc)
        .with_timezone(&tz)
        .format("%Z")
        .to_string()
}

/// Local time with offset as RFC 3339, seconds precision.
pub fn local_rfc3339(jd_utc: f64, tz: Tz) -> String {
    datetime_from_jd(jd_utc)
        .with_timezone(&tz)
        .format("%Y-%m-%dT%H:%M:%S%:z")
        .to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn jd_round_trip_and_format() {
        // JD 2451545.0 = 2000-01-01T12:00:00Z (J2000.0 epoch, in UTC here).
        assert_eq!(rfc3339_utc(2_451_545.0), "2000-01-01T12:00:00.000Z");
        let t = datetime_from_jd(2_461_000.123_456);
        assert!((jd_from_datetime(&t) - 2_461_000.123_456).abs() < 1e-8);
    }

    #[test]
    fn fast_timestamps_match_chrono() {
        for k in 0..5000 {
            let jd = 2_441_317.5 + k as f64 * 7.318_473_1;
            let mut fast = String::new();
            push_rfc3339_utc(jd, &mut fast);
            assert_eq!(fast, rfc3339_utc(jd), "jd {jd}");
        }
    }

    #[test]
    fn night_of_uses_the_evening_date() {
        let tz: Tz = "America/Santiago".parse().unwrap();
        let d = NaiveDate::from_ymd_opt(2027, 3, 10).unwrap();
        let noon = local_noon_jd(d, tz);
        assert_eq!(night_of(noon + 0.3, tz), d);
        assert_eq!(night_of(noon + 0.99, tz), d);
        assert_eq!(night_of(noon + 1.01, tz), d.succ_opt().unwrap());
    }
}
