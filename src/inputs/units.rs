//! Units of catalogue columns, named in the column mapping (`--columns ours=theirs:unit`): a cell in the
//! catalogue's unit is turned into dipwatch's own unit before it is validated, and refined values are written back
//! in the catalogue's unit. Conversions are exact definitions (common practice, no source): 1 h of right ascension
//! = 15 deg; 1 day = 24 h = 1440 min = 86400 s; 1 percent = 10 ppt; 1 ppm = 0.001 ppt; a depth of d mmag is a
//! flux drop of 1 - 10^(-0.4 d / 1000).

/// A unit a mapped column may carry.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Unit {
    /// Right ascension in decimal hours.
    Hours,
    /// Decimal degrees (right ascension or declination).
    Deg,
    /// Sexagesimal right ascension, hh:mm:ss.
    Hms,
    /// Sexagesimal declination, dd:mm:ss.
    Dms,
    /// A Julian Date less `offset` days (0 for a full JD): rjd, mjd, jd-2450000, bjd-2457000, ...
    JdMinus(f64),
    /// A duration or error in days.
    Days,
    /// ... in hours.
    HoursTime,
    /// ... in minutes.
    Minutes,
    /// ... in seconds.
    Seconds,
    /// Depth in parts per thousand.
    Ppt,
    /// Depth in parts per million.
    Ppm,
    /// Depth in percent.
    Percent,
    /// Depth as a fraction.
    Fraction,
    /// Depth in millimagnitudes.
    Mmag,
}

/// The units accepted for each of our columns, for messages.
pub fn accepted(column: &str) -> Option<&'static str> {
    Some(match column {
        "ra" => "hours, deg or hms",
        "dec" => "deg or dms",
        "t0" => {
            "jd, rjd (JD-2400000), mjd (JD-2400000.5), or jd-N, bjd-N, hjd-N for a JD less N days"
        }
        "t0_sigma_days" | "period_days" | "period_sigma_days" | "t14_hours" => {
            "days, hours, min or s"
        }
        "depth_ppt" => "ppt, ppm, percent, fraction or mmag",
        _ => return None,
    })
}

/// The unit `text` of our column `column`, or what is accepted there.
pub fn parse_unit(column: &str, text: &str) -> Result<Unit, String> {
    let t = text.trim().to_ascii_lowercase();
    let unit = match (column, t.as_str()) {
        ("ra", "hours" | "h") => Some(Unit::Hours),
        ("ra" | "dec", "deg") => Some(Unit::Deg),
        ("ra", "hms") => Some(Unit::Hms),
        ("dec", "dms") => Some(Unit::Dms),
        ("t0", "jd") => Some(Unit::JdMinus(0.0)),
        ("t0", "rjd") => Some(Unit::JdMinus(2_400_000.0)),
        ("t0", "mjd") => Some(Unit::JdMinus(2_400_000.5)),
        ("t0", other) => ["jd-", "bjd-", "hjd-"]
            .iter()
            .find_map(|p| other.strip_prefix(p))
            .and_then(|n| n.parse::<f64>().ok())
            .filter(|n| n.is_finite() && *n >= 0.0 && *n < 2_600_000.0)
            .map(Unit::JdMinus),
        ("t0_sigma_days" | "period_days" | "period_sigma_days" | "t14_hours", u) => match u {
            "days" | "d" => Some(Unit::Days),
            "hours" | "h" => Some(Unit::HoursTime),
            "min" => Some(Unit::Minutes),
            "s" => Some(Unit::Seconds),
            _ => None,
        },
        ("depth_ppt", u) => match u {
            "ppt" => Some(Unit::Ppt),
            "ppm" => Some(Unit::Ppm),
            "percent" | "%" => Some(Unit::Percent),
            "fraction" => Some(Unit::Fraction),
            "mmag" => Some(Unit::Mmag),
            _ => None,
        },
        _ => None,
    };
    unit.ok_or_else(|| match accepted(column) {
        Some(list) => format!("found unit {text:?} for {column}, expected {list}"),
        None => format!("found unit {text:?} for {column}, which takes no unit"),
    })
}

/// Days per unit of a duration.
fn days_per(u: Unit) -> Option<f64> {
    match u {
        Unit::Days => Some(1.0),
        Unit::HoursTime => Some(1.0 / 24.0),
        Unit::Minutes => Some(1.0 / 1440.0),
        Unit::Seconds => Some(1.0 / 86_400.0),
        _ => None,
    }
}

/// The value `v` of column `column` in unit `u`, in dipwatch's own unit (degrees, JD, days; hours for
/// `t14_hours`; ppt for depth). Sexagesimal units are handled by the angle parser, not here.
pub fn to_canonical(column: &str, u: Unit, v: f64) -> f64 {
    match u {
        Unit::Hours => v * 15.0,
        Unit::JdMinus(off) => v + off,
        Unit::Ppt => v,
        Unit::Ppm => v / 1000.0,
        Unit::Percent => v * 10.0,
        Unit::Fraction => v * 1000.0,
        Unit::Mmag => 1000.0 * (1.0 - 10f64.powf(-0.4 * v / 1000.0)),
        _ => match days_per(u) {
            Some(k) if column == "t14_hours" => v * k * 24.0,
            Some(k) => v * k,
            None => v,
        },
    }
}

/// The inverse of [`to_canonical`], for writing refined values back (t0 and the day-valued columns).
pub fn from_canonical(column: &str, u: Unit, v: f64) -> f64 {
    match u {
        Unit::Hours => v / 15.0,
        Unit::JdMinus(off) => v - off,
        Unit::Ppm => v * 1000.0,
        Unit::Percent => v / 10.0,
        Unit::Fraction => v / 1000.0,
        Unit::Mmag => -2500.0 * (1.0 - v / 1000.0).log10(),
        Unit::Ppt | Unit::Deg | Unit::Hms | Unit::Dms => v,
        _ => match days_per(u) {
            Some(k) if column == "t14_hours" => v / 24.0 / k,
            Some(k) => v / k,
            None => v,
        },
    }
}

/// A hint naming the likely unit of a depth outside 0..1000 ppt, for messages.
pub fn depth_hint(ppt: f64) -> Option<String> {
    (ppt > 1000.0 && ppt <= 1e6).then(|| {
        format!(
            "; likely unit: ppm ({} ppt), map it with depth_ppt=THEIRS:ppm",
            ppt / 1000.0
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_conversions() {
        // Definitions (common practice, no source); equal to the last bit of a double.
        let close = |a: f64, b: f64| (a - b).abs() <= 4.0 * f64::EPSILON * b.abs();
        assert_eq!(to_canonical("ra", Unit::Hours, 1.0), 15.0);
        assert!(close(to_canonical("ra", Unit::Hours, 3.239583), 48.593745));
        assert_eq!(to_canonical("depth_ppt", Unit::Percent, 1.0), 10.0);
        assert_eq!(to_canonical("depth_ppt", Unit::Ppm, 17_300.0), 17.3);
        assert!(close(
            to_canonical("depth_ppt", Unit::Fraction, 0.0118),
            11.8
        ));
        let mmag = to_canonical("depth_ppt", Unit::Mmag, 10.0);
        assert!((mmag - 1000.0 * (1.0 - 10f64.powf(-0.004))).abs() < 1e-12);
        // By hand: 1 - exp(-0.004 ln 10) = 1 - exp(-0.009 210 34) = 0.009 168 06.
        assert!((mmag - 9.168_06).abs() < 1e-5, "{mmag}");
        assert!(close(
            to_canonical("t0", Unit::JdMinus(2_457_000.0), 3_712.382_15),
            2_460_712.382_15
        ));
        assert_eq!(
            to_canonical("t0", Unit::JdMinus(2_400_000.5), 60_712.0),
            2_460_712.5
        );
        assert!(close(to_canonical("t14_hours", Unit::Minutes, 156.6), 2.61));
        assert_eq!(to_canonical("t14_hours", Unit::Days, 0.5), 12.0);
        assert!(close(
            to_canonical("t0_sigma_days", Unit::Minutes, 1.44),
            0.001
        ));
        assert!(close(
            to_canonical("period_sigma_days", Unit::Seconds, 86.4),
            0.001
        ));
        assert_eq!(to_canonical("period_days", Unit::HoursTime, 36.0), 1.5);
    }

    #[test]
    fn round_trips() {
        for (c, u, v) in [
            ("t0", Unit::JdMinus(2_457_000.0), 3_712.382_15),
            ("t0_sigma_days", Unit::Minutes, 0.6048),
            ("period_sigma_days", Unit::Seconds, 0.181_44),
            ("t14_hours", Unit::Minutes, 156.6),
            ("depth_ppt", Unit::Mmag, 12.5),
            ("depth_ppt", Unit::Ppm, 11_800.0),
        ] {
            let back = from_canonical(c, u, to_canonical(c, u, v));
            assert!(
                (back - v).abs() < 1e-9 * v.abs().max(1.0),
                "{c} {u:?} {v} -> {back}"
            );
        }
    }

    #[test]
    fn units_by_column() {
        assert_eq!(parse_unit("ra", "hours"), Ok(Unit::Hours));
        assert_eq!(
            parse_unit("t0", "BJD-2457000"),
            Ok(Unit::JdMinus(2_457_000.0))
        );
        assert_eq!(parse_unit("t0", "mjd"), Ok(Unit::JdMinus(2_400_000.5)));
        assert_eq!(parse_unit("t14_hours", "min"), Ok(Unit::Minutes));
        assert!(parse_unit("ra", "min")
            .unwrap_err()
            .contains("expected hours, deg or hms"));
        assert!(parse_unit("name", "deg")
            .unwrap_err()
            .contains("takes no unit"));
        assert!(depth_hint(17_300.0).unwrap().contains("ppm (17.3 ppt)"));
    }
}
