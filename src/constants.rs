//! Physical and conventional constants, each with its unit and source.
//!
//! The values were typed from memory of the named sources; each one that matters to a result is exercised by a
//! check against ERFA or a published example in tests/reference.rs.

/// Julian Date of the J2000.0 epoch (2000-01-01 12:00 TT), days. IAU 1976 system; Meeus (1998) ch. 21.
pub const J2000_JD: f64 = 2_451_545.0;
/// Days per Julian century. IAU definition of the Julian year (365.25 d).
pub const DAYS_PER_JULIAN_CENTURY: f64 = 36_525.0;
/// Seconds per day (SI day of 86 400 s), s.
pub const SECONDS_PER_DAY: f64 = 86_400.0;
/// Offset of Modified Julian Date: MJD = JD - 2 400 000.5, days. IAU Resolution B1 (1997).
pub const MJD_OFFSET_DAYS: f64 = 2_400_000.5;
/// TT - TAI, s. Exact by definition (IAU 1991 Resolution A4; IERS Conventions 2010 ch. 10).
pub const TT_MINUS_TAI_S: f64 = 32.184;
/// Astronomical unit, m. IAU 2012 Resolution B2.
pub const AU_M: f64 = 149_597_870_700.0;
/// Speed of light in vacuum, m/s. SI definition (CGPM 1983).
pub const C_M_PER_S: f64 = 299_792_458.0;
/// Light time for one astronomical unit, s (AU_M / C_M_PER_S = 499.004 783 836 s).
pub const AU_LIGHT_TIME_S: f64 = AU_M / C_M_PER_S;
/// Obliquity of the ecliptic at J2000.0 used by the VSOP87 frame, deg (23 deg 26' 21.448").
/// Lieske et al. (1977) / IAU 1976, as used by Bretagnon & Francou (1988) for VSOP87.
pub const OBLIQUITY_J2000_DEG: f64 = 23.439_291_1;
/// WGS84 equatorial radius, m. NIMA TR8350.2 (2000).
pub const WGS84_A_M: f64 = 6_378_137.0;
/// WGS84 flattening (dimensionless). NIMA TR8350.2 (2000).
pub const WGS84_F: f64 = 1.0 / 298.257_223_563;
/// Earth's equatorial radius used for lunar parallax, km (IAU 1976 value used by Meeus ch. 40).
pub const EARTH_EQUATORIAL_RADIUS_KM: f64 = 6_378.14;
/// Sun altitude of the almanac sunrise/sunset, deg: 34' refraction plus 16' semidiameter.
/// Meeus (1998) ch. 15, h0 = -0.8333 deg.
pub const SUNRISE_ALT_DEG: f64 = -0.833_3;
/// Sun altitude ending civil twilight, deg. Explanatory Supplement (1992) 9.33; common practice.
pub const CIVIL_TWILIGHT_ALT_DEG: f64 = -6.0;
/// Sun altitude ending nautical twilight, deg. Explanatory Supplement (1992) 9.33.
pub const NAUTICAL_TWILIGHT_ALT_DEG: f64 = -12.0;
/// Sun altitude ending astronomical twilight, deg. Explanatory Supplement (1992) 9.33.
pub const ASTRONOMICAL_TWILIGHT_ALT_DEG: f64 = -18.0;
