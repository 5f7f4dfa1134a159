//! Civil time: UTC Julian Dates <-> calendar instants, site-local dates and the "night of" convention.
//!
//! A night runs from the site's local mean solar noon (from its longitude alone) to the next one, so the
//! whole solar night lies inside it whatever zone the site keeps: a site far from its zone's meridian (or a
//! longitude with the wrong sign) cannot split a night across two windows. It is labelled with the civil date,
//! in the site's zone, on which it begins ("night of"): the night of date D opens at the mean solar noon nearest
//! to civil noon of D in the zone's standard time. Local times come from the IANA database through `chrono-tz`,
//! and instants are converted from UTC, never from ambiguous local wall times.

use chrono::{DateTime, NaiveDate, NaiveTime, TimeZone, Utc};
use chrono_tz::{OffsetComponents, Tz};

/// Julian Date of the Unix epoch, 1970-01-01T00:00:00 UTC (common practice, no source).
pub const UNIX_EPOCH_JD: f64 = 2_440_587.5;

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

/// The 24 bytes of [`rfc3339_utc`] as three little-endian words ("YYYY-MM-", "DDThh:mm", ":ss.mmmZ"), built in
/// registers without allocating, for output loops with hundreds of thousands of timestamps: the civil date
/// from the day count by Hinnant's `civil_from_days` algorithm ("chrono-Compatible Low-Level Date Algorithms",
/// 2013). A text assembled byte by byte in memory and then copied stalls every copy on its store forwarding
/// (perf put a fifth of the rows' time on such copies). `None` for instants before 1970 or past year 9999
/// (never planned), which take the general formatter.
#[inline(always)]
pub(crate) fn rfc3339_utc_words(jd_utc: f64) -> Option<[u64; 3]> {
    let ms_f = (jd_utc - UNIX_EPOCH_JD) * 86_400_000.0;
    if !(0.0..253_402_300_799_000.0).contains(&ms_f) {
        return None;
    }
    // Round half up by truncation (no libm call); ms_f >= 0 and below 2^53, so this is `round()`. Unsigned
    // from here: division by a constant is a multiplication without sign corrections.
    let ms = (ms_f + 0.5) as i64 as u64;
    let days = (ms / 86_400_000) as i64;
    let ms_of_day = (ms % 86_400_000) as u32;
    let date = cached_date_text(days);
    let s_of_day = ms_of_day / 1000;
    let milli = ms_of_day % 1000;
    let (h, mi, sec) = (s_of_day / 3600, s_of_day / 60 % 60, s_of_day % 60);
    let pair = |v: u32| u64::from(DIGIT_PAIR_WORDS[v as usize]);
    let [d0, d1, d2, d3, d4, d5, d6, d7, d8, d9] = date;
    let first = u64::from_le_bytes([d0, d1, d2, d3, d4, d5, d6, d7]);
    let second = u64::from(d8)
        | u64::from(d9) << 8
        | u64::from(b'T') << 16
        | pair(h) << 24
        | u64::from(b':') << 40
        | pair(mi) << 48;
    let third = u64::from(b':')
        | pair(sec) << 8
        | u64::from(b'.') << 24
        | u64::from(b'0' + (milli / 100) as u8) << 32
        | pair(milli % 100) << 40
        | u64::from(b'Z') << 56;
    Some([first, second, third])
}

thread_local! {
    /// (days since 1970-01-01, its YYYY-MM-DD text) of the last even and odd days [`rfc3339_utc_words`] wrote.
    static LAST_DATES: [std::cell::Cell<(i64, [u8; 10])>; 2] = const {
        [
            std::cell::Cell::new((i64::MIN, [0; 10])),
            std::cell::Cell::new((i64::MIN, [0; 10])),
        ]
    };
}

/// [`date_text`] of `days`, from a per-thread cache: a night's times fall on two dates, one even and one odd,
/// and the text of the last of each is kept.
#[inline(always)]
pub(crate) fn cached_date_text(days: i64) -> [u8; 10] {
    LAST_DATES.with(|slots| {
        let slot = &slots[(days & 1) as usize];
        let (day, text) = slot.get();
        if day == days {
            text
        } else {
            let text = date_text(days);
            slot.set((days, text));
            text
        }
    })
}

/// YYYY-MM-DD of a day counted from 1970-01-01 (days >= 0): the proleptic Gregorian "civil from days"
/// algorithm of H. Hinnant, chrono-Compatible Low-Level Date Algorithms (2013).
fn date_text(days: i64) -> [u8; 10] {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    let mut buf = [0u8; 10];
    put_digits(&mut buf[0..4], y);
    buf[4] = b'-';
    put_two(&mut buf[5..7], m);
    buf[7] = b'-';
    put_two(&mut buf[8..10], d);
    buf
}

/// The decimal digits of `v` (0..10^len), zero-padded, into `buf`.
fn put_digits(buf: &mut [u8], mut v: i64) {
    for b in buf.iter_mut().rev() {
        *b = b'0' + (v % 10) as u8;
        v /= 10;
    }
}

/// Two decimal digits of `v` (0..100) into `buf`, from [`DIGIT_PAIRS`].
fn put_two(buf: &mut [u8], v: i64) {
    let p = v as usize * 2;
    buf[..2].copy_from_slice(&DIGIT_PAIRS[p..p + 2]);
}

/// The two-digit texts of 00 to 99, one after another: number formatting two digits per step.
pub(crate) const DIGIT_PAIRS: &[u8; 200] = b"0001020304050607080910111213141516171819\
2021222324252627282930313233343536373839\
4041424344454647484950515253545556575859\
6061626364656667686970717273747576777879\
8081828384858687888990919293949596979899";

/// [`DIGIT_PAIRS`] as little-endian words (the first digit in the low byte), for text built in registers.
pub(crate) const DIGIT_PAIR_WORDS: [u16; 100] = {
    let mut words = [0u16; 100];
    let mut k = 0;
    while k < 100 {
        words[k] = DIGIT_PAIRS[2 * k] as u16 | (DIGIT_PAIRS[2 * k + 1] as u16) << 8;
        k += 1;
    }
    words
};

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

/// Julian Date of 1970-01-01T12:00:00Z: JD day numbers start at noon UT.
const UNIX_NOON_JD: f64 = 2_440_588.0;

/// The zone's standard (no daylight saving) offset from UTC on `date`, hours east +.
pub fn standard_offset_hours(date: NaiveDate, tz: Tz) -> f64 {
    let noon = date.and_time(NaiveTime::from_hms_opt(12, 0, 0).expect("valid time"));
    let offset = tz.offset_from_utc_datetime(&noon);
    offset.base_utc_offset().num_seconds() as f64 / 3600.0
}

/// Hours from the zone's standard time to the site's mean solar time (longitude / 15), wrapped to -12..12:
/// positive when the Sun culminates before 12:00 standard time. A few tens of minutes is normal; several hours
/// means a distant zone or a longitude with the wrong sign.
pub fn solar_minus_zone_hours(lon_deg: f64, date: NaiveDate, tz: Tz) -> f64 {
    let d = lon_deg / 15.0 - standard_offset_hours(date, tz);
    (d + 12.0).rem_euclid(24.0) - 12.0
}

/// UTC Julian Date of the local mean solar noon that opens the night of `date` at longitude `lon_deg`
/// (east +) in zone `tz`: the mean solar noon (12 h - longitude / 15 h UT) nearest to civil noon of `date` in
/// the zone's standard time. Consecutive dates give consecutive solar noons, exactly one mean solar day apart
/// (unless the zone's standard offset itself changes by law).
pub fn night_start_jd(date: NaiveDate, lon_deg: f64, tz: Tz) -> f64 {
    let day = date.signed_duration_since(NaiveDate::default()).num_days() as f64;
    let shift = (lon_deg / 360.0 - standard_offset_hours(date, tz) / 24.0).round();
    UNIX_NOON_JD + day + shift - lon_deg / 360.0
}

/// The "night of" date of an instant at longitude `lon_deg` in zone `tz`: the date whose night (see
/// [`night_start_jd`]) holds the instant.
pub fn night_of(jd_utc: f64, lon_deg: f64, tz: Tz) -> NaiveDate {
    let guess = datetime_from_jd(jd_utc + lon_deg / 360.0 - 0.5).date_naive();
    let mut d = guess;
    // The standard-offset shift moves the label by at most a day either way.
    for _ in 0..3 {
        if night_start_jd(d, lon_deg, tz) > jd_utc {
            d = d.pred_opt().unwrap_or(d);
        } else if night_start_jd(d.succ_opt().unwrap_or(d), lon_deg, tz) <= jd_utc {
            d = d.succ_opt().unwrap_or(d);
        } else {
            break;
        }
    }
    d
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
        let words_text = |jd: f64| -> Option<Vec<u8>> {
            Some(
                rfc3339_utc_words(jd)?
                    .iter()
                    .flat_map(|w| w.to_le_bytes())
                    .collect(),
            )
        };
        for k in 0..5000 {
            let jd = 2_441_317.5 + k as f64 * 7.318_473_1;
            assert_eq!(
                words_text(jd).as_deref(),
                Some(rfc3339_utc(jd).as_bytes()),
                "jd {jd}"
            );
        }
        // Times hopping back and forth over neighbouring days, as a night's columns do (the date cache).
        for k in 0..3000 {
            let jd = 2_461_400.2 + f64::from(k % 97) * 0.37 - f64::from(k % 5) * 1.01;
            assert_eq!(
                words_text(jd).as_deref(),
                Some(rfc3339_utc(jd).as_bytes()),
                "jd {jd}"
            );
        }
        // Before 1970 the words are not given (the writers take the general formatter).
        for jd in [2_440_000.3, 2_440_587.499_999, 2_415_020.0] {
            assert_eq!(words_text(jd), None, "jd {jd}");
        }
    }

    #[test]
    fn night_of_uses_the_evening_date() {
        let tz: Tz = "America/Santiago".parse().unwrap();
        let d = NaiveDate::from_ymd_opt(2027, 3, 10).unwrap();
        let start = night_start_jd(d, -70.4, tz);
        // Mean solar noon at 70.4 W: 12:00 + 4 h 41.6 min UT (longitude / 15).
        assert!(
            (start - (2_461_475.0 + 70.4 / 360.0)).abs() < 1e-9,
            "{start}"
        );
        assert_eq!(night_of(start + 0.3, -70.4, tz), d);
        assert_eq!(night_of(start + 0.99, -70.4, tz), d);
        assert_eq!(night_of(start + 1.01, -70.4, tz), d.succ_opt().unwrap());
    }

    #[test]
    fn nights_tile_time_for_any_zone_and_longitude() {
        // Every instant belongs to exactly one night, consecutive nights are one mean solar day apart, and the
        // label is the civil date at which the night opens (within a day for far zones).
        let zones = [
            "America/Santiago",
            "Asia/Shanghai",
            "Pacific/Kiritimati",
            "Europe/Madrid",
            "Etc/GMT+12",
        ];
        for zone in zones {
            let tz: Tz = zone.parse().unwrap();
            for lon in [-179.0, -120.5, -70.4, 0.0, 8.6, 70.4, 87.6, 150.0, 179.9] {
                let mut d = NaiveDate::from_ymd_opt(2027, 1, 1).unwrap();
                for _ in 0..400 {
                    let a = night_start_jd(d, lon, tz);
                    let next = d.succ_opt().unwrap();
                    let b = night_start_jd(next, lon, tz);
                    assert!((b - a - 1.0).abs() < 1e-9, "{zone} {lon} {d}: {a} {b}");
                    assert_eq!(night_of(a + 1e-6, lon, tz), d, "{zone} {lon}");
                    assert_eq!(night_of(b - 1e-6, lon, tz), d, "{zone} {lon}");
                    d = next;
                }
            }
        }
    }

    #[test]
    fn solar_offset_of_real_and_flipped_sites() {
        let date = NaiveDate::from_ymd_opt(2027, 6, 1).unwrap();
        let santiago: Tz = "America/Santiago".parse().unwrap();
        // 70.4 W on UTC-4: mean solar time 4.69 h behind UTC, 0.69 h behind the zone.
        assert!((solar_minus_zone_hours(-70.4, date, santiago) + 0.693).abs() < 1e-3);
        // The sign flipped: 70.4 E is 9.4 h ahead of the zone.
        assert!((solar_minus_zone_hours(70.4, date, santiago) - 8.693).abs() < 1e-3);
        // 87.6 E on UTC+8: 2.16 h behind; 8.6 W on CET: 1.57 h behind; 179 E on UTC-11 is 22.93 h ahead, which wraps to
        // 1.07 h behind.
        let shanghai: Tz = "Asia/Shanghai".parse().unwrap();
        assert!((solar_minus_zone_hours(87.6, date, shanghai) + 2.16).abs() < 1e-3);
        let madrid: Tz = "Europe/Madrid".parse().unwrap();
        assert!((solar_minus_zone_hours(-8.6, date, madrid) + 1.5733).abs() < 1e-3);
        let samoa: Tz = "Pacific/Pago_Pago".parse().unwrap();
        assert!((solar_minus_zone_hours(179.0, date, samoa) + 1.0667).abs() < 1e-3);
    }
}
