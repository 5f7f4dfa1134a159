//! Time scales: calendar dates, Julian Dates, UTC, TAI, TT and TDB.
//!
//! Julian Dates are carried as `f64` days; at JD 2.46e6 one unit in the last place is about 40 us, far below
//! every tolerance in dipwatch. UTC Julian Dates follow the ERFA "quasi-JD" convention: within a day the
//! fraction runs uniformly, so the instant inside a positive leap second (23:59:60) is not representable and
//! maps to the start of the next day. UT1 is taken equal to UTC (|UT1 - UTC| <= 0.9 s by IERS rule); that moves
//! a sidereal time by at most 0.9 s of time, i.e. 0.004 deg of hour angle and altitude.

use crate::constants::{
    DAYS_PER_JULIAN_CENTURY, J2000_JD, MJD_OFFSET_DAYS, SECONDS_PER_DAY, TT_MINUS_TAI_S,
};

/// A Julian Date in Coordinated Universal Time (quasi-JD, see the module notes), days.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct JdUtc(pub f64);

/// A Julian Date in Barycentric Dynamical Time, days.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct JdTdb(pub f64);

/// Julian Date of a Gregorian calendar date and time of day.
///
/// Given: `year`, `month` 1-12, `day_frac` day of month with fraction (1.5 = noon of the 1st).
/// Returns: Julian Date, days, in whatever time scale the calendar time was given in.
/// Source: Meeus, Astronomical Algorithms (2nd ed., 1998), ch. 7, eq. 7.1. Exact for the Gregorian calendar
/// (dates from 1582-10-15 on).
pub fn jd_from_calendar(year: i32, month: u32, day_frac: f64) -> f64 {
    let (y, m) = if month <= 2 {
        (year - 1, month + 12)
    } else {
        (year, month)
    };
    let a = (y as f64 / 100.0).floor();
    let b = 2.0 - a + (a / 4.0).floor();
    (365.25 * (y as f64 + 4716.0)).floor() + (30.6001 * (m as f64 + 1.0)).floor() + day_frac + b
        - 1524.5
}

/// Gregorian calendar date of a Julian Date.
///
/// Given: `jd` Julian Date, days (>= 2 299 160.5, i.e. Gregorian dates).
/// Returns: `(year, month 1-12, day of month with fraction)`.
/// Source: Meeus (1998), ch. 7, "Calculation of the calendar date from the JD".
pub fn calendar_from_jd(jd: f64) -> (i32, u32, f64) {
    let jd5 = jd + 0.5;
    let z = jd5.floor();
    let f = jd5 - z;
    let alpha = ((z - 1_867_216.25) / 36_524.25).floor();
    let a = z + 1.0 + alpha - (alpha / 4.0).floor();
    let b = a + 1524.0;
    let c = ((b - 122.1) / 365.25).floor();
    let d = (365.25 * c).floor();
    let e = ((b - d) / 30.6001).floor();
    let day = b - d - (30.6001 * e).floor() + f;
    let month = if e < 14.0 { e - 1.0 } else { e - 13.0 } as u32;
    let year = if month > 2 { c - 4716.0 } else { c - 4715.0 } as i32;
    (year, month, day)
}

/// Start of each TAI - UTC step since 1972 as (MJD of 0h UTC, TAI - UTC in s).
/// Source: IERS Bulletin C (the leap-second history it lists; latest step 2017-01-01), table typed from memory
/// and checked against erfa.dat for every date 1972-2030 (tests/reference.rs). Before 1972 UTC ran at a different rate from TAI; dipwatch rejects such dates.
pub const LEAP_SECONDS: [(f64, f64); 28] = [
    (41_317.0, 10.0), // 1972-01-01
    (41_499.0, 11.0), // 1972-07-01
    (41_683.0, 12.0), // 1973-01-01
    (42_048.0, 13.0), // 1974-01-01
    (42_413.0, 14.0), // 1975-01-01
    (42_778.0, 15.0), // 1976-01-01
    (43_144.0, 16.0), // 1977-01-01
    (43_509.0, 17.0), // 1978-01-01
    (43_874.0, 18.0), // 1979-01-01
    (44_239.0, 19.0), // 1980-01-01
    (44_786.0, 20.0), // 1981-07-01
    (45_151.0, 21.0), // 1982-07-01
    (45_516.0, 22.0), // 1983-07-01
    (46_247.0, 23.0), // 1985-07-01
    (47_161.0, 24.0), // 1988-01-01
    (47_892.0, 25.0), // 1990-01-01
    (48_257.0, 26.0), // 1991-01-01
    (48_804.0, 27.0), // 1992-07-01
    (49_169.0, 28.0), // 1993-07-01
    (49_534.0, 29.0), // 1994-07-01
    (50_083.0, 30.0), // 1996-01-01
    (50_630.0, 31.0), // 1997-07-01
    (51_179.0, 32.0), // 1999-01-01
    (53_736.0, 33.0), // 2006-01-01
    (54_832.0, 34.0), // 2009-01-01
    (56_109.0, 35.0), // 2012-07-01
    (57_204.0, 36.0), // 2015-07-01
    (57_754.0, 37.0), // 2017-01-01
];

/// First UTC Julian Date the leap-second table covers (1972-01-01 0h UTC).
pub const FIRST_SUPPORTED_JD_UTC: f64 = 41_317.0 + MJD_OFFSET_DAYS;

/// TAI - UTC at a UTC instant, s.
///
/// Given: `jd_utc` (>= 1972-01-01; earlier dates get the 1972 value, callers reject them).
/// Returns: TAI - UTC, s, from [`LEAP_SECONDS`]. Dates after the table's last entry (2017-01-01) use its last
/// value, 37 s: a leap second announced later in Bulletin C must be added to the table.
pub fn tai_minus_utc_s(jd_utc: JdUtc) -> f64 {
    let mjd = jd_utc.0 - MJD_OFFSET_DAYS;
    let idx = LEAP_SECONDS.partition_point(|&(start, _)| start <= mjd);
    LEAP_SECONDS[idx.saturating_sub(1)].1
}

/// TT Julian Date of a UTC Julian Date: TT = UTC + (TAI - UTC) + 32.184 s.
pub fn jd_tt_from_utc(jd_utc: JdUtc) -> f64 {
    jd_utc.0 + (tai_minus_utc_s(jd_utc) + TT_MINUS_TAI_S) / SECONDS_PER_DAY
}

/// UTC Julian Date of a TT Julian Date (inverse of [`jd_tt_from_utc`]; exact except inside a leap second).
pub fn jd_utc_from_tt(jd_tt: f64) -> JdUtc {
    // First guess with the offset at the TT date, then re-evaluate at the resulting UTC date.
    let mut utc = jd_tt - (37.0 + TT_MINUS_TAI_S) / SECONDS_PER_DAY;
    for _ in 0..2 {
        utc = jd_tt - (tai_minus_utc_s(JdUtc(utc)) + TT_MINUS_TAI_S) / SECONDS_PER_DAY;
    }
    JdUtc(utc)
}

/// TDB - TT at the geocentre, s.
///
/// Given: `jd_tt` TT Julian Date (TT may stand in for TDB in the argument).
/// Returns: TDB - TT, s, the seven leading periodic terms of Fairhead & Bretagnon (1990) as given by Kaplan,
/// USNO Circular 179 (2005), eq. 2.6. Accuracy about 10 us over 1600-2200 (the topocentric term, <= 2 us,
/// is left out). Main term 1.657 ms annual.
pub fn tdb_minus_tt_s(jd_tt: f64) -> f64 {
    let t = (jd_tt - J2000_JD) / DAYS_PER_JULIAN_CENTURY;
    0.001_657 * (628.307_6 * t + 6.240_1).sin()
        + 0.000_022 * (575.338_5 * t + 4.297_0).sin()
        + 0.000_014 * (1_256.615_2 * t + 6.196_9).sin()
        + 0.000_005 * (606.977_7 * t + 4.021_2).sin()
        + 0.000_005 * (52.969_1 * t + 0.444_4).sin()
        + 0.000_002 * (21.329_9 * t + 5.543_1).sin()
        + 0.000_010 * t * (628.307_6 * t + 4.249_0).sin()
}

/// TDB Julian Date of a UTC Julian Date (UTC -> TAI -> TT -> TDB).
pub fn jd_tdb_from_utc(jd_utc: JdUtc) -> JdTdb {
    let tt = jd_tt_from_utc(jd_utc);
    JdTdb(tt + tdb_minus_tt_s(tt) / SECONDS_PER_DAY)
}

/// UTC Julian Date of a TDB Julian Date (inverse of [`jd_tdb_from_utc`]).
pub fn jd_utc_from_tdb(jd_tdb: JdTdb) -> JdUtc {
    // TDB - TT varies by < 1e-9 s over a 2 ms step, so one evaluation at TDB is exact enough.
    let tt = jd_tdb.0 - tdb_minus_tt_s(jd_tdb.0) / SECONDS_PER_DAY;
    jd_utc_from_tt(tt)
}

/// Julian centuries of TT since J2000.0.
pub fn centuries_since_j2000(jd_tt: f64) -> f64 {
    (jd_tt - J2000_JD) / DAYS_PER_JULIAN_CENTURY
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn calendar_round_trip() {
        for &jd in &[2_451_545.0, 2_436_116.31, 2_461_000.75, 2_500_000.123_456] {
            let (y, m, d) = calendar_from_jd(jd);
            let back = jd_from_calendar(y, m, d);
            assert!((back - jd).abs() < 1e-9, "jd {jd}: got {back}");
        }
    }

    #[test]
    fn utc_tdb_round_trip() {
        let utc = JdUtc(2_461_100.3);
        let back = jd_utc_from_tdb(jd_tdb_from_utc(utc));
        assert!((back.0 - utc.0).abs() * SECONDS_PER_DAY < 1e-5);
    }

    #[test]
    fn table_is_sorted_and_steps_by_one_second() {
        for w in LEAP_SECONDS.windows(2) {
            assert!(w[0].0 < w[1].0);
            assert_eq!(w[1].1 - w[0].1, 1.0);
        }
    }
}
