//! Precomputed tables for planning over many nights and targets: the Earth (daily, from VSOP87E), the
//! precession-nutation matrix and equation of the equinoxes (daily), and the Moon's geocentric apparent place
//! (every 3 hours). Everything the planner asks many times, the Sun's and Moon's altitudes and a target's
//! apparent place, is then a few dozen floating-point operations.
//!
//! Accuracy against the direct functions (checked in the unit tests): the nearest-day precession-nutation
//! matrix is within 0.1" of the exact one (nutation and precession change by < 0.2" per day); the Moon's
//! 3-hourly table, interpolated with 4-point Lagrange polynomials, is within 0.5"; the Sun from the tabulated
//! heliocentric Earth with first-order aberration is within 1" of Meeus ch. 25.

use crate::astro::barycentric::{half_evaluated_nodes, lagrange4, midpoint_6, EarthTable};
use crate::astro::frames::{
    alt_az_from_hadec, gmst_rad, mat_vec, norm, radec_from_vec, unit_from_radec, EarthOrientation,
    Mat3, Observer, Vec3,
};
use crate::astro::sky::{moon_apparent, moon_illuminated_fraction, topocentric, ApparentPlace};
use crate::astro::time::{jd_tt_from_utc, JdUtc};
use crate::constants::{AU_LIGHT_TIME_S, AU_M, SECONDS_PER_DAY};
use std::f64::consts::TAU;

/// Moon table step: 3 hours, in days.
const MOON_STEP_DAYS: f64 = 0.125;

#[derive(Debug, Clone)]
struct Frame {
    pn: Mat3,
    eqeq_rad: f64,
    tt_minus_utc_days: f64,
}

/// The Moon at a site at one instant (from [`SkyTables::moon_topo`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MoonAt {
    /// Topocentric apparent place.
    pub place: ApparentPlace,
    /// Geometric altitude, deg.
    pub alt_deg: f64,
    /// Azimuth, deg (north 0, east 90).
    pub az_deg: f64,
}

/// The Sun and the Moon at a site at one instant (from [`SkyTables::sun_moon`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SunMoonSky {
    /// Sun altitude, deg.
    pub sun_alt_deg: f64,
    /// Topocentric apparent position of the Moon, true equator and equinox of date, km (see
    /// [`SunMoonSky::moon_place`] for its right ascension and declination).
    pub moon_topo_km: Vec3,
    /// Moon geometric altitude, deg.
    pub moon_alt_deg: f64,
    /// Moon illuminated fraction, 0-1.
    pub moon_illum: f64,
}

impl SunMoonSky {
    /// The Moon's topocentric apparent place (right ascension, declination, distance).
    pub fn moon_place(&self) -> ApparentPlace {
        let (ra_rad, dec_rad) = radec_from_vec(&self.moon_topo_km);
        ApparentPlace {
            ra_rad,
            dec_rad,
            dist_km: norm(&self.moon_topo_km),
        }
    }
}

/// What one instant's Sun, Moon and target places share, looked up once (see [`SkyTables::instant`]).
#[derive(Debug, Clone, Copy)]
pub struct SkyInstant<'a> {
    t: f64,
    frame: &'a Frame,
    /// The Earth's barycentric velocity over c (annual aberration).
    beta: Vec3,
    /// The Earth's heliocentric position, au, equatorial J2000.
    helio_au: Vec3,
}

impl SkyInstant<'_> {
    /// The equation of the equinoxes of the instant's day, rad (as [`SkyTables::eqeq_rad`]).
    pub fn eqeq_rad(&self) -> f64 {
        self.frame.eqeq_rad
    }
}

/// Tables covering a span of UTC Julian Dates.
#[derive(Debug, Clone)]
pub struct SkyTables {
    /// The Earth's positions (TDB-indexed).
    pub earth: EarthTable,
    first_day_utc: f64,
    frames: Vec<Frame>,
    moon_first_utc: f64,
    /// Moon geocentric apparent place, true equator and equinox of date: unit vector times distance (km).
    moon_km: Vec<Vec3>,
}

/// The Moon's apparent geocentric position of date at UTC JD `t`, km: a node of the Moon table.
fn moon_node_km(t: f64) -> Vec3 {
    let eo = EarthOrientation::at(JdUtc(t));
    let m = moon_apparent(eo.jd_tt, &eo.nutation);
    let u = unit_from_radec(m.ra_rad, m.dec_rad);
    [u[0] * m.dist_km, u[1] * m.dist_km, u[2] * m.dist_km]
}

impl SkyTables {
    /// Tables for `[start_utc, end_utc]` (padded by 2 days).
    pub fn new(start_utc: f64, end_utc: f64) -> SkyTables {
        let first_day_utc = start_utc.floor() - 2.0;
        let n_days = ((end_utc - first_day_utc).ceil() as usize) + 3;
        use rayon::prelude::*;
        let frames = (0..n_days)
            .into_par_iter()
            .map(|i| {
                let eo = EarthOrientation::at(JdUtc(first_day_utc + i as f64));
                Frame {
                    pn: eo.pn,
                    eqeq_rad: eo.nutation.equation_of_equinoxes_rad(),
                    tt_minus_utc_days: eo.jd_tt - (first_day_utc + i as f64),
                }
            })
            .collect();
        let moon_first_utc = first_day_utc;
        let n_moon = ((end_utc + 2.0 - moon_first_utc) / MOON_STEP_DAYS).ceil() as usize + 4;
        // The lunar series at every other node (6 h apart), the nodes between from their six neighbours, within
        // 5 m of the series (tested); lookups between nodes then interpolate as before (4 points).
        let moon_km = half_evaluated_nodes(
            n_moon,
            |i| moon_node_km(moon_first_utc + i as f64 * MOON_STEP_DAYS),
            midpoint_6,
        );
        let tdb0 = jd_tt_from_utc(JdUtc(first_day_utc));
        SkyTables {
            earth: EarthTable::new(tdb0, tdb0 + n_days as f64),
            first_day_utc,
            frames,
            moon_first_utc,
            moon_km,
        }
    }

    fn frame(&self, t: f64) -> &Frame {
        // The nearest day: rounding half up by truncation (no library call; negative offsets, which truncate
        // towards zero, clamp to 0 either way), clamped in integers.
        let nearest = (t - self.first_day_utc + 0.5) as i64;
        let i = nearest.clamp(0, self.frames.len() as i64 - 1) as usize;
        &self.frames[i]
    }

    /// TDB Julian Date of a UTC instant (TDB - TT, < 2 ms, neglected here: 3e-11 au of Earth motion).
    fn tdb(&self, t: f64) -> f64 {
        t + self.frame(t).tt_minus_utc_days
    }

    /// Greenwich apparent sidereal time, rad 0..2pi (UT1 = UTC).
    pub fn gast_rad(&self, t: f64) -> f64 {
        crate::astro::frames::wrap_to(gmst_rad(t) + self.frame(t).eqeq_rad, TAU)
    }

    /// The equation of the equinoxes (apparent minus mean sidereal time) on the day nearest `t`, rad.
    pub fn eqeq_rad(&self, t: f64) -> f64 {
        self.frame(t).eqeq_rad
    }

    /// Local apparent sidereal time at east longitude `lon_rad`, rad 0..2pi.
    pub fn last_rad(&self, t: f64, lon_rad: f64) -> f64 {
        crate::astro::frames::wrap_to(self.gast_rad(t) + lon_rad, TAU)
    }

    /// Apparent right ascension and declination of date (rad) of a catalogue direction at `t`, with annual
    /// aberration.
    pub fn apparent_radec(&self, icrs: &Vec3, t: f64) -> (f64, f64) {
        radec_from_vec(&self.apparent_vec(icrs, t))
    }

    /// The apparent direction of date of a catalogue direction at `t` (as [`SkyTables::apparent_radec`]), as a
    /// vector of length within 1e-4 of one (aberration is not renormalised).
    pub fn apparent_vec(&self, icrs: &Vec3, t: f64) -> Vec3 {
        let v = self.earth.earth_bary_vel_au_per_day(self.tdb(t));
        apparent_from(icrs, &aberration_beta(&v), &self.frame(t).pn)
    }

    /// The lookups of instant `t` that its target place ([`SkyTables::apparent_vec_at`]) and Sun and Moon
    /// ([`SkyTables::sun_moon_at`]) share: the day's frame, the Earth's velocity and heliocentric position
    /// from one stencil of the Earth table. The same numbers as the separate calls.
    pub fn instant(&self, t: f64) -> SkyInstant<'_> {
        let frame = self.frame(t);
        let (v, helio_au) = self
            .earth
            .bary_vel_and_helio_au(t + frame.tt_minus_utc_days);
        SkyInstant {
            t,
            frame,
            beta: aberration_beta(&v),
            helio_au,
        }
    }

    /// [`SkyTables::apparent_vec`] at an instant already looked up.
    pub fn apparent_vec_at(&self, icrs: &Vec3, at: &SkyInstant<'_>) -> Vec3 {
        apparent_from(icrs, &at.beta, &at.frame.pn)
    }

    /// Apparent geocentric place of the Sun: minus the tabulated heliocentric Earth, aberrated by the Earth's
    /// barycentric velocity, rotated to the true equator and equinox of date.
    pub fn sun(&self, t: f64) -> ApparentPlace {
        let tdb = self.tdb(t);
        let h = self.earth.earth_helio_au(tdb);
        let r = (h[0] * h[0] + h[1] * h[1] + h[2] * h[2]).sqrt();
        let u = [-h[0] / r, -h[1] / r, -h[2] / r];
        let (ra_rad, dec_rad) = self.apparent_radec(&u, t);
        ApparentPlace {
            ra_rad,
            dec_rad,
            dist_km: r * AU_M / 1000.0,
        }
    }

    /// Geometric altitude of the Sun's centre at a site, deg.
    pub fn sun_alt_deg(&self, t: f64, obs: &Observer) -> f64 {
        let s = self.sun(t);
        crate::astro::frames::alt_from_hadec(
            self.last_rad(t, obs.lon_rad) - s.ra_rad,
            s.dec_rad,
            obs.lat_rad,
        )
        .to_degrees()
    }

    /// The Sun's hour angle at a site, rad -pi..pi.
    pub fn sun_hour_angle_rad(&self, t: f64, obs: &Observer) -> f64 {
        crate::astro::frames::wrap_pi(self.last_rad(t, obs.lon_rad) - self.sun(t).ra_rad)
    }

    /// Apparent geocentric place of the Moon (interpolated).
    pub fn moon_geocentric(&self, t: f64) -> ApparentPlace {
        let v = self.moon_geocentric_km(t);
        let (ra_rad, dec_rad) = radec_from_vec(&v);
        ApparentPlace {
            ra_rad,
            dec_rad,
            dist_km: (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt(),
        }
    }

    /// The Moon's geocentric apparent position of date, km (interpolated).
    fn moon_geocentric_km(&self, t: f64) -> Vec3 {
        let x = (t - self.moon_first_utc) / MOON_STEP_DAYS;
        let v = match lagrange4(x, self.moon_km.len()) {
            Some((i, w, _)) => {
                let mut out = [0.0; 3];
                for (k, wk) in w.iter().enumerate() {
                    for (o, c) in out.iter_mut().zip(self.moon_km[i + k].iter()) {
                        *o += wk * c;
                    }
                }
                out
            }
            None => {
                let eo = EarthOrientation::at(JdUtc(t));
                let m = moon_apparent(eo.jd_tt, &eo.nutation);
                let u = unit_from_radec(m.ra_rad, m.dec_rad);
                [u[0] * m.dist_km, u[1] * m.dist_km, u[2] * m.dist_km]
            }
        };
        v
    }

    /// Topocentric place of the Moon and its altitude and azimuth at a site, at UTC JD `t`.
    pub fn moon_topo(&self, t: f64, obs: &Observer) -> MoonAt {
        let last = self.last_rad(t, obs.lon_rad);
        let topo = topocentric(&self.moon_geocentric(t), obs, last);
        let (alt, az) = alt_az_from_hadec(last - topo.ra_rad, topo.dec_rad, obs.lat_rad);
        MoonAt {
            place: topo,
            alt_deg: alt.to_degrees(),
            az_deg: az.to_degrees(),
        }
    }

    /// Illuminated fraction of the Moon, 0-1.
    pub fn moon_illum(&self, t: f64) -> f64 {
        moon_illuminated_fraction(&self.sun(t), &self.moon_geocentric(t))
    }

    /// The Sun's altitude, the Moon's topocentric place and altitude and its illuminated fraction at UTC JD `t`,
    /// computing the Sun and the Moon once.
    pub fn sun_moon(&self, t: f64, obs: &Observer) -> SunMoonSky {
        self.sun_moon_at(&self.instant(t), obs)
    }

    /// [`SkyTables::sun_moon`] at an instant already looked up.
    pub fn sun_moon_at(&self, at: &SkyInstant<'_>, obs: &Observer) -> SunMoonSky {
        let t = at.t;
        // In vectors of the true equator and equinox of date: sin(altitude) is the direction's dot product with
        // the geodetic zenith (cos phi cos LAST, cos phi sin LAST, sin phi), which is Meeus (1998) eq. 13.6
        // written as a dot product; the Moon's topocentric position is its geocentric one minus the site's
        // (as `topocentric`); the elongation for the illuminated fraction comes from the cross and dot products
        // of the geocentric directions (Meeus eq. 48.2-48.3, 48.1, as `moon_illuminated_fraction`).
        // As `last_rad`, with the instant's frame.
        let gast = crate::astro::frames::wrap_to(gmst_rad(t) + at.frame.eqeq_rad, TAU);
        let last = crate::astro::frames::wrap_to(gast + obs.lon_rad, TAU);
        let (sl, cl) = obs.sin_cos_lat();
        let (sa, ca) = last.sin_cos();
        let zenith = [cl * ca, cl * sa, sl];
        let sin_alt = |v: &Vec3, len: f64| (dot(v, &zenith) / len).clamp(-1.0, 1.0).asin();
        let h = at.helio_au;
        let sun_au = norm(&h);
        let sun = self.apparent_vec_at(&[-h[0] / sun_au, -h[1] / sun_au, -h[2] / sun_au], at);
        let sun_alt = sin_alt(&sun, norm(&sun));
        let geo = self.moon_geocentric_km(t);
        let o = obs.geocentric_m_sc((sa, ca));
        let topo = [
            geo[0] - o[0] / 1000.0,
            geo[1] - o[1] / 1000.0,
            geo[2] - o[2] / 1000.0,
        ];
        let moon_alt = sin_alt(&topo, norm(&topo));
        // The elongation psi has sin psi = |sun x moon| / n and cos psi = sun . moon / n (n = |sun| |moon|), and the
        // phase angle i = atan2(y, x) with y = R sin psi, x = r - R cos psi (R, r: Sun and Moon distances), so
        // cos i = x / sqrt(x^2 + y^2): the same fraction as the angles give, without inverse trigonometry.
        let (c, d) = (norm(&cross(&sun, &geo)), dot(&sun, &geo));
        let n = (c * c + d * d).sqrt();
        let (sun_km, moon_km) = (sun_au * AU_M / 1000.0, norm(&geo));
        let (y, x) = (sun_km * c / n, moon_km - sun_km * d / n);
        SunMoonSky {
            sun_alt_deg: sun_alt.to_degrees(),
            moon_topo_km: topo,
            moon_alt_deg: moon_alt.to_degrees(),
            moon_illum: (1.0 + x / (x * x + y * y).sqrt()) / 2.0,
        }
    }
}

/// The Earth's velocity (au/day) over the speed of light.
fn aberration_beta(v: &Vec3) -> Vec3 {
    let k = AU_LIGHT_TIME_S / SECONDS_PER_DAY;
    [v[0] * k, v[1] * k, v[2] * k]
}

/// A catalogue direction with first-order annual aberration (`beta`: the Earth's velocity over c), rotated by
/// the precession-nutation matrix `pn` to the true equator and equinox of date.
fn apparent_from(icrs: &Vec3, beta: &Vec3, pn: &Mat3) -> Vec3 {
    let pdotv = icrs[0] * beta[0] + icrs[1] * beta[1] + icrs[2] * beta[2];
    let p = [
        icrs[0] + beta[0] - icrs[0] * pdotv,
        icrs[1] + beta[1] - icrs[1] * pdotv,
        icrs[2] + beta[2] - icrs[2] * pdotv,
    ];
    mat_vec(pn, &p)
}

fn dot(a: &Vec3, b: &Vec3) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

fn cross(a: &Vec3, b: &Vec3) -> Vec3 {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::astro::sky::{sun_moon_at, target_alt_az_deg};

    /// The Moon table's nodes between the evaluated ones (6 h apart) stay within 5 m of the lunar series
    /// (0.003" as seen from the Earth; 0.4 m at worst over these two months), and are interpolated at all.
    #[test]
    fn interpolated_moon_nodes_match_the_series() {
        let tables = SkyTables::new(2_461_000.0, 2_461_060.0);
        let n = tables.moon_km.len();
        let mut worst = 0.0f64;
        for i in (5..n - 5).filter(|i| i % 2 == 1) {
            let direct = moon_node_km(tables.moon_first_utc + i as f64 * MOON_STEP_DAYS);
            let v = tables.moon_km[i];
            let d = crate::astro::frames::distance(&v, &direct);
            worst = worst.max(d);
        }
        assert!(
            worst < 0.005,
            "worst interpolated Moon node off by {worst} km"
        );
        assert!(worst > 1e-6, "Moon nodes not interpolated? {worst} km");
    }

    #[test]
    fn tables_agree_with_the_direct_functions() {
        // Tolerances: 0.001 deg (3.6") for Sun, Moon and target altitudes; 0.0005 for the illuminated fraction.
        const TOL_DEG: f64 = 0.001;
        let tables = SkyTables::new(2_461_400.0, 2_461_440.0);
        let obs = Observer::from_deg(-29.3, -70.7, 2400.0);
        let icrs = unit_from_radec(2.1, -0.4);
        for k in 0..60 {
            let t = 2_461_400.0 + k as f64 * 0.6543;
            let direct = sun_moon_at(JdUtc(t), &obs);
            assert!(
                (tables.sun_alt_deg(t, &obs) - direct.sun_alt_deg).abs() < TOL_DEG,
                "Sun at {t}"
            );
            let m = tables.moon_topo(t, &obs);
            let (malt, maz) = (m.alt_deg, m.az_deg);
            assert!(
                (malt - direct.moon_alt_deg).abs() < TOL_DEG,
                "Moon alt at {t}: {malt} vs {}",
                direct.moon_alt_deg
            );
            assert!(
                ((maz - direct.moon_az_deg + 540.0) % 360.0 - 180.0).abs()
                    * malt.to_radians().cos()
                    < 0.002
            );
            assert!((tables.moon_illum(t) - direct.moon_illum).abs() < 5e-4);
            // The vector form used for listed events: the same Sun, Moon and illuminated fraction.
            let both = tables.sun_moon(t, &obs);
            assert!(
                (both.sun_alt_deg - direct.sun_alt_deg).abs() < TOL_DEG,
                "Sun at {t}"
            );
            assert!(
                (both.moon_alt_deg - direct.moon_alt_deg).abs() < TOL_DEG,
                "Moon at {t}"
            );
            assert!(
                (both.moon_illum - direct.moon_illum).abs() < 5e-4,
                "illumination at {t}"
            );
            let moon = both.moon_place();
            let sep = crate::astro::frames::separation_rad(
                moon.ra_rad,
                moon.dec_rad,
                m.place.ra_rad,
                m.place.dec_rad,
            );
            assert!(sep.to_degrees() < 1e-6, "Moon place at {t}");
            assert!(
                (moon.dist_km - m.place.dist_km).abs() < 1e-6,
                "Moon distance at {t}"
            );
            let (alt, _) = target_alt_az_deg(&icrs, JdUtc(t), &obs, &tables.earth);
            let (ra, dec) = tables.apparent_radec(&icrs, t);
            let alt2 = alt_az_from_hadec(tables.last_rad(t, obs.lon_rad) - ra, dec, obs.lat_rad)
                .0
                .to_degrees();
            assert!((alt - alt2).abs() < TOL_DEG, "target at {t}");
        }
    }
}
