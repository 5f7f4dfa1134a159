//! Sun and Moon: apparent geocentric places, the Moon's topocentric place and illuminated fraction, and the
//! altitude of either at a site.

use crate::astro::frames::{
    alt_az_from_hadec, norm, radec_from_vec, unit_from_radec, wrap_pi, EarthOrientation, Nutation,
    Observer,
};
use crate::astro::time::JdUtc;
use crate::constants::{AU_M, EARTH_EQUATORIAL_RADIUS_KM};
use std::f64::consts::TAU;

/// An apparent place: right ascension and declination of date (true equator and equinox), rad, and distance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ApparentPlace {
    /// Right ascension, rad 0..2pi.
    pub ra_rad: f64,
    /// Declination, rad.
    pub dec_rad: f64,
    /// Distance from the geocentre (or from the observer for topocentric places), km.
    pub dist_km: f64,
}

fn ecliptic_to_equatorial(lon_rad: f64, lat_rad: f64, eps_rad: f64) -> (f64, f64) {
    let (sl, cl) = lon_rad.sin_cos();
    let (sb, cb) = lat_rad.sin_cos();
    let (se, ce) = eps_rad.sin_cos();
    let ra = (sl * ce - (sb / cb) * se).atan2(cl).rem_euclid(TAU);
    let dec = (sb * ce + cb * se * sl).asin();
    (ra, dec)
}

/// Latitude from the `astro` crate, which may come back wrapped to 0..2pi, brought to -pi..pi.
fn unwrap_lat(lat_rad: f64) -> f64 {
    wrap_pi(lat_rad)
}

/// Apparent geocentric place of the Sun.
///
/// Given: `jd_tt`, `nutation` at that date. Source: Meeus (1998) ch. 25, "higher accuracy": VSOP87 heliocentric
/// Earth (through the `astro` crate), conversion to FK5 (-0.09033"), nutation in longitude and the aberration
/// -20.4898"/R. Accuracy: about 1" against ERFA (checked in tests/reference.rs at 0.01 deg).
pub fn sun_apparent(jd_tt: f64, nutation: &Nutation) -> ApparentPlace {
    let (ecl, r_au) = astro::sun::geocent_ecl_pos(jd_tt);
    let lat = unwrap_lat(ecl.lat);
    let (lon_fk5, lat_fk5) = astro::sun::ecl_coords_to_FK5(jd_tt, ecl.long, lat);
    let aberration_rad = (-20.4898 / r_au / 3600.0_f64).to_radians();
    let lon_app = lon_fk5 + nutation.dpsi_rad + aberration_rad;
    let (ra_rad, dec_rad) = ecliptic_to_equatorial(lon_app, lat_fk5, nutation.eps_true_rad());
    ApparentPlace {
        ra_rad,
        dec_rad,
        dist_km: r_au * AU_M / 1000.0,
    }
}

/// Apparent geocentric place of the Moon.
///
/// Given: `jd_tt`, `nutation` at that date. Source: Meeus (1998) ch. 47 (truncated ELP-2000/82, through the
/// `astro` crate) plus nutation in longitude. Accuracy: 10" in longitude, 4" in latitude (Meeus).
pub fn moon_apparent(jd_tt: f64, nutation: &Nutation) -> ApparentPlace {
    let (ecl, dist_km) = astro::lunar::geocent_ecl_pos(jd_tt);
    let lat = unwrap_lat(ecl.lat);
    let (ra_rad, dec_rad) =
        ecliptic_to_equatorial(ecl.long + nutation.dpsi_rad, lat, nutation.eps_true_rad());
    ApparentPlace {
        ra_rad,
        dec_rad,
        dist_km,
    }
}

/// Topocentric place of a nearby body seen from `observer` at local apparent sidereal time `last_rad`.
///
/// Rigorous vector subtraction of the observer's geocentric position (equivalent to Meeus 1998 eq. 40.2-40.3).
/// The Moon's parallax reaches 1 deg; ignoring it is the classic error this function exists to prevent.
pub fn topocentric(geo: &ApparentPlace, observer: &Observer, last_rad: f64) -> ApparentPlace {
    let u = unit_from_radec(geo.ra_rad, geo.dec_rad);
    let r = geo.dist_km / EARTH_EQUATORIAL_RADIUS_KM;
    let o = observer.geocentric_earth_radii(last_rad);
    let v = [u[0] * r - o[0], u[1] * r - o[1], u[2] * r - o[2]];
    let (ra_rad, dec_rad) = radec_from_vec(&v);
    ApparentPlace {
        ra_rad,
        dec_rad,
        dist_km: norm(&v) * EARTH_EQUATORIAL_RADIUS_KM,
    }
}

/// Illuminated fraction of the Moon's disk, 0..1, from geocentric places of the Sun and Moon.
///
/// Source: Meeus (1998) eq. 48.2-48.3 (phase angle from the Sun-Moon elongation and distances) and 48.1.
/// Accuracy: 0.001 with Meeus ch. 25/47 positions.
pub fn moon_illuminated_fraction(sun: &ApparentPlace, moon: &ApparentPlace) -> f64 {
    let psi =
        crate::astro::frames::separation_rad(sun.ra_rad, sun.dec_rad, moon.ra_rad, moon.dec_rad);
    let i = (sun.dist_km * psi.sin()).atan2(moon.dist_km - sun.dist_km * psi.cos());
    (1.0 + i.cos()) / 2.0
}

/// Altitude and azimuth (rad; azimuth north 0, east +pi/2) of an apparent place of date at a site.
pub fn alt_az(place: &ApparentPlace, observer: &Observer, last_rad: f64) -> (f64, f64) {
    alt_az_from_hadec(last_rad - place.ra_rad, place.dec_rad, observer.lat_rad)
}

/// Everything about the Sun and Moon at one instant and site that the planner needs.
#[derive(Debug, Clone, Copy)]
pub struct SunMoonAt {
    /// Geometric (unrefracted) altitude of the Sun's centre, deg (geocentric place; solar parallax, 0.0024 deg,
    /// ignored).
    pub sun_alt_deg: f64,
    /// Apparent geocentric place of the Sun.
    pub sun: ApparentPlace,
    /// Topocentric place of the Moon.
    pub moon_topo: ApparentPlace,
    /// Geometric topocentric altitude of the Moon's centre, deg.
    pub moon_alt_deg: f64,
    /// Azimuth of the Moon, deg (north 0, east 90).
    pub moon_az_deg: f64,
    /// Illuminated fraction of the Moon, 0..1.
    pub moon_illum: f64,
}

/// Sun and Moon at `jd_utc` seen from `observer`.
pub fn sun_moon_at(jd_utc: JdUtc, observer: &Observer) -> SunMoonAt {
    let eo = EarthOrientation::at(jd_utc);
    let last = eo.last_rad(observer.lon_rad);
    let sun = sun_apparent(eo.jd_tt, &eo.nutation);
    let moon_geo = moon_apparent(eo.jd_tt, &eo.nutation);
    let moon_topo = topocentric(&moon_geo, observer, last);
    let (sun_alt, _) = alt_az(&sun, observer, last);
    let (moon_alt, moon_az) = alt_az(&moon_topo, observer, last);
    SunMoonAt {
        sun_alt_deg: sun_alt.to_degrees(),
        sun,
        moon_topo,
        moon_alt_deg: moon_alt.to_degrees(),
        moon_az_deg: moon_az.to_degrees(),
        moon_illum: moon_illuminated_fraction(&sun, &moon_geo),
    }
}

/// Geometric altitude of the Sun's centre at a site, deg (cheaper than [`sun_moon_at`]).
pub fn sun_alt_deg(jd_utc: JdUtc, observer: &Observer) -> f64 {
    let eo = EarthOrientation::at(jd_utc);
    let sun = sun_apparent(eo.jd_tt, &eo.nutation);
    alt_az(&sun, observer, eo.last_rad(observer.lon_rad))
        .0
        .to_degrees()
}

/// Geometric (unrefracted) altitude and azimuth of a catalogue (ICRS/J2000) direction at a site, deg.
///
/// Given: `icrs` unit vector; `jd_utc`; `observer`; `earth` a table covering the date (for the aberration
/// velocity). Precession (IAU 1976), nutation (IAU 1980), annual aberration and GAST with UT1 = UTC.
/// Accuracy: about 1" plus the <= 0.004 deg of UT1 = UTC, checked against ERFA's atco13 (tests/reference.rs).
/// Azimuth north 0, east 90.
pub fn target_alt_az_deg(
    icrs: &crate::astro::frames::Vec3,
    jd_utc: JdUtc,
    observer: &Observer,
    earth: &crate::astro::barycentric::EarthTable,
) -> (f64, f64) {
    let eo = EarthOrientation::at(jd_utc);
    let tdb = crate::astro::time::jd_tdb_from_utc(jd_utc).0;
    let vel = earth.earth_bary_vel_au_per_day(tdb);
    let (ra, dec) = eo.apparent_radec(icrs, Some(&vel));
    let (alt, az) = alt_az_from_hadec(eo.last_rad(observer.lon_rad) - ra, dec, observer.lat_rad);
    (alt.to_degrees(), az.to_degrees())
}
