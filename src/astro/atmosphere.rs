//! Refraction, airmass and the site's horizon profile.

/// Atmospheric refraction for a true (geometric) altitude, deg (apparent = true + refraction).
///
/// Source: Saemundsson (1986), Sky & Telescope 72, 70; Meeus (1998) eq. 16.4, with Meeus's pressure and
/// temperature factor (P/1010 hPa)(283 K/T). Consistent with Bennett's formula to 0.07'; holds from the horizon
/// (about 29' at true altitude 0) to the zenith, for standard conditions; below about -1 deg true altitude
/// the result is clamped to 0 since the formula has no meaning there.
pub fn refraction_deg(true_alt_deg: f64, pressure_hpa: f64, temperature_c: f64) -> f64 {
    if true_alt_deg < -1.0 {
        return 0.0;
    }
    let h = true_alt_deg;
    let r_arcmin = 1.02 / (h + 10.3 / (h + 5.11)).to_radians().tan();
    // Meeus adds 0.0019279' so that the formula gives 0 at the zenith.
    let r_arcmin = r_arcmin + 0.001_927_9;
    let scale = (pressure_hpa / 1010.0) * (283.0 / (273.0 + temperature_c));
    (r_arcmin * scale / 60.0).max(0.0)
}

/// Airmass of the line of sight at a true (geometric, unrefracted) altitude.
///
/// Source: Kasten & Young (1989), Applied Optics 28, 4735, eq. 3: X = 1 / (sin h + 0.50572 (h + 6.07995)^-1.6364)
/// with h in degrees. Their tables are given against the true solar elevation (from memory), so dipwatch
/// passes the geometric altitude. Relative error < 0.5% against their ray-traced table above 0 deg; about 38
/// at the horizon. Returns `f64::INFINITY` for h <= -6.07995 deg where the formula breaks down.
pub fn airmass_kasten_young(true_alt_deg: f64) -> f64 {
    airmass_kasten_young_sin(true_alt_deg.to_radians().sin(), true_alt_deg)
}

/// [`airmass_kasten_young`] with the sine of the altitude given (from the direction's zenith component, where
/// it is at hand): the same formula without computing the sine again.
pub fn airmass_kasten_young_sin(sin_alt: f64, true_alt_deg: f64) -> f64 {
    let h = true_alt_deg;
    if h + 6.079_95 <= 0.0 {
        return f64::INFINITY;
    }
    let denom = sin_alt + 0.505_72 * (-1.636_4 * (h + 6.079_95).ln()).exp();
    if denom <= 0.0 {
        f64::INFINITY
    } else {
        1.0 / denom
    }
}

/// Inverse of [`airmass_kasten_young`]: the true altitude, deg, at which the airmass equals `airmass`
/// (>= 1), by bisection to 1e-9 deg.
pub fn alt_deg_for_airmass(airmass: f64) -> f64 {
    let (mut lo, mut hi) = (-6.0, 90.0);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if airmass_kasten_young(mid) > airmass {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// A site's horizon profile: the lowest usable altitude as a function of azimuth.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct HorizonProfile {
    /// (azimuth deg 0..360 north 0 east 90, lowest altitude deg), sorted by azimuth, azimuths unique.
    points: Vec<(f64, f64)>,
}

impl HorizonProfile {
    /// A profile from (azimuth deg, altitude deg) pairs in any order; azimuths are taken modulo 360.
    /// An empty list gives a flat profile at -90 deg (no restriction).
    pub fn new(pairs: &[(f64, f64)]) -> HorizonProfile {
        let mut points: Vec<(f64, f64)> = pairs
            .iter()
            .map(|&(az, alt)| (az.rem_euclid(360.0), alt))
            .collect();
        points.sort_by(|a, b| a.0.total_cmp(&b.0));
        points.dedup_by(|a, b| a.0 == b.0);
        HorizonProfile { points }
    }

    /// True if the profile has no points.
    pub fn is_empty(&self) -> bool {
        self.points.is_empty()
    }

    /// Lowest usable altitude at `az_deg`, deg: linear between neighbouring points, wrapping through 360.
    pub fn min_alt_deg(&self, az_deg: f64) -> f64 {
        let pts = &self.points;
        match pts.len() {
            0 => -90.0,
            1 => pts[0].1,
            n => {
                let az = az_deg.rem_euclid(360.0);
                let idx = pts.partition_point(|p| p.0 <= az);
                let (a, b) = if idx == 0 || idx == n {
                    // Between the last point and the first one, across north.
                    let last = pts[n - 1];
                    let first = (pts[0].0 + 360.0, pts[0].1);
                    let az = if idx == 0 { az + 360.0 } else { az };
                    return lerp(last, first, az);
                } else {
                    (pts[idx - 1], pts[idx])
                };
                lerp(a, b, az)
            }
        }
    }
}

fn lerp(a: (f64, f64), b: (f64, f64), x: f64) -> f64 {
    if (b.0 - a.0).abs() < 1e-12 {
        return a.1.max(b.1);
    }
    a.1 + (b.1 - a.1) * (x - a.0) / (b.0 - a.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn horizon_interpolates_and_wraps() {
        let p = HorizonProfile::new(&[(90.0, 10.0), (180.0, 20.0), (350.0, 0.0)]);
        assert!((p.min_alt_deg(135.0) - 15.0).abs() < 1e-12);
        // Between 350 (0 deg) and 90+360 (10 deg): at az 10, 20/100 of the way.
        assert!((p.min_alt_deg(10.0) - 2.0).abs() < 1e-12);
        assert!((p.min_alt_deg(355.0) - 0.5).abs() < 1e-12);
        assert!((p.min_alt_deg(-5.0) - 0.5).abs() < 1e-12);
        assert_eq!(HorizonProfile::new(&[]).min_alt_deg(12.0), -90.0);
    }

    #[test]
    fn airmass_inverse_round_trip() {
        for x in [1.0, 1.5, 2.0, 3.0] {
            let h = alt_deg_for_airmass(x);
            assert!((airmass_kasten_young(h) - x).abs() < 1e-9);
        }
    }

    #[test]
    fn refraction_vanishes_at_zenith_and_grows_to_horizon() {
        assert!(refraction_deg(90.0, 1010.0, 10.0).abs() < 1e-5);
        let r0 = refraction_deg(0.0, 1010.0, 10.0) * 60.0;
        assert!((28.0..30.5).contains(&r0), "{r0}");
    }
}
