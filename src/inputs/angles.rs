//! Right ascension and declination text: sexagesimal (`hh:mm:ss.s`, `+dd:mm:ss`, also space-separated) or
//! decimal degrees.

/// Parse a right ascension, returning degrees 0..360.
///
/// Accepts `hh:mm:ss.s` or `hh mm ss.s` (hours, 0 <= h < 24) or a decimal number of degrees (0 <= x < 360).
/// Returns a message saying what was found and expected on failure.
pub fn parse_ra_deg(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let expected = "a right ascension as hh:mm:ss.s (0-24 h) or decimal degrees (0-360)";
    if let Some(parts) = sexagesimal_parts(t) {
        let (neg, h, m, s) = parts.map_err(|_| format!("found {t:?}, expected {expected}"))?;
        if neg
            || !(0.0..24.0).contains(&h)
            || !(0.0..60.0).contains(&m)
            || !(0.0..60.0).contains(&s)
        {
            return Err(format!("found {t:?}, expected {expected}"));
        }
        let hours = h + m / 60.0 + s / 3600.0;
        if hours >= 24.0 {
            return Err(format!("found {t:?}, expected {expected}"));
        }
        return Ok(hours * 15.0);
    }
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() && (0.0..360.0).contains(&v) => Ok(v),
        _ => Err(format!("found {t:?}, expected {expected}")),
    }
}

/// Parse a declination, returning degrees -90..90.
///
/// Accepts `+dd:mm:ss.s`, `-dd mm ss` (the sign applies to the whole value, also for `-00:30:00`) or decimal
/// degrees.
pub fn parse_dec_deg(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let expected = "a declination as +dd:mm:ss.s or decimal degrees within -90..+90";
    if let Some(parts) = sexagesimal_parts(t) {
        let (neg, d, m, s) = parts.map_err(|_| format!("found {t:?}, expected {expected}"))?;
        if !(0.0..60.0).contains(&m) || !(0.0..60.0).contains(&s) {
            return Err(format!("found {t:?}, expected {expected}"));
        }
        let v = d + m / 60.0 + s / 3600.0;
        if v > 90.0 {
            return Err(format!("found {t:?}, expected {expected}"));
        }
        return Ok(if neg { -v } else { v });
    }
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() && (-90.0..=90.0).contains(&v) => Ok(v),
        _ => Err(format!("found {t:?}, expected {expected}")),
    }
}

type Parts = Result<(bool, f64, f64, f64), ()>;

/// Split a sexagesimal value into (negative, first, minutes, seconds); `None` if the text is not sexagesimal.
fn sexagesimal_parts(t: &str) -> Option<Parts> {
    let (neg, body) = match t.strip_prefix('-') {
        Some(rest) => (true, rest),
        None => (false, t.strip_prefix('+').unwrap_or(t)),
    };
    let fields: Vec<&str> = if body.contains(':') {
        body.split(':').collect()
    } else {
        body.split_whitespace().collect()
    };
    if fields.len() < 2 {
        return None;
    }
    Some((|| {
        if fields.len() > 3 {
            return Err(());
        }
        let num = |s: &str| -> Result<f64, ()> {
            let v: f64 = s.trim().parse().map_err(|_| ())?;
            if v.is_finite() && v >= 0.0 {
                Ok(v)
            } else {
                Err(())
            }
        };
        let a = num(fields[0])?;
        let b = num(fields[1])?;
        let c = if fields.len() == 3 {
            num(fields[2])?
        } else {
            0.0
        };
        Ok((neg, a, b, c))
    })())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sexagesimal_and_decimal() {
        assert!((parse_ra_deg("12:30:00").unwrap() - 187.5).abs() < 1e-12);
        assert!((parse_ra_deg("01 00 00.0").unwrap() - 15.0).abs() < 1e-12);
        assert!((parse_ra_deg("187.5").unwrap() - 187.5).abs() < 1e-12);
        assert!((parse_dec_deg("-00:30:00").unwrap() + 0.5).abs() < 1e-12);
        assert!((parse_dec_deg("+45:15").unwrap() - 45.25).abs() < 1e-12);
        assert!((parse_dec_deg("-12.5").unwrap() + 12.5).abs() < 1e-12);
    }

    #[test]
    fn out_of_range_and_garbage() {
        for bad in [
            "24:00:00",
            "12:60:00",
            "-01:00:00",
            "360",
            "abc",
            "NaN",
            "1:2:3:4",
        ] {
            assert!(parse_ra_deg(bad).is_err(), "{bad}");
        }
        for bad in ["+91:00:00", "95", "inf", "10:61:00", ""] {
            assert!(parse_dec_deg(bad).is_err(), "{bad}");
        }
    }
}
