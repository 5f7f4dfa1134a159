//! Earth rotation and reference frames: precession, nutation, sidereal time, hour angle, alt/az, separation.
//!
//! Conventions: right ascension and hour angle in radians, 0..2pi; azimuth north 0, east +pi/2; longitude
//! east +; latitudes geodetic (WGS84). Catalogue coordinates are taken as ICRS ~ FK5 J2000 (the 23 mas frame
//! bias is ignored).

use crate::astro::time::{centuries_since_j2000, JdUtc};
use crate::constants::{
    AU_LIGHT_TIME_S, EARTH_EQUATORIAL_RADIUS_KM, J2000_JD, SECONDS_PER_DAY, WGS84_A_M, WGS84_F,
};
use std::f64::consts::{PI, TAU};

/// 3x3 rotation matrix, row-major.
pub type Mat3 = [[f64; 3]; 3];
/// Cartesian vector (unit or not, as the name says).
pub type Vec3 = [f64; 3];

const ARCSEC_RAD: f64 = PI / (180.0 * 3600.0);

/// Matrix times vector.
pub fn mat_vec(m: &Mat3, v: &Vec3) -> Vec3 {
    [
        m[0][0] * v[0] + m[0][1] * v[1] + m[0][2] * v[2],
        m[1][0] * v[0] + m[1][1] * v[1] + m[1][2] * v[2],
        m[2][0] * v[0] + m[2][1] * v[1] + m[2][2] * v[2],
    ]
}

/// Matrix product a * b.
pub fn mat_mul(a: &Mat3, b: &Mat3) -> Mat3 {
    let mut out = [[0.0; 3]; 3];
    for (i, row) in out.iter_mut().enumerate() {
        for (j, cell) in row.iter_mut().enumerate() {
            *cell = (0..3).map(|k| a[i][k] * b[k][j]).sum();
        }
    }
    out
}

/// Rotation of the coordinate frame about axis x (1), y (2) or z (3) by `angle_rad` (ERFA's Rx/Ry/Rz sense).
fn rot(axis: usize, angle_rad: f64) -> Mat3 {
    let (s, c) = angle_rad.sin_cos();
    match axis {
        1 => [[1.0, 0.0, 0.0], [0.0, c, s], [0.0, -s, c]],
        2 => [[c, 0.0, -s], [0.0, 1.0, 0.0], [s, 0.0, c]],
        _ => [[c, s, 0.0], [-s, c, 0.0], [0.0, 0.0, 1.0]],
    }
}

/// Unit vector of a direction given by right ascension and declination (radians).
pub fn unit_from_radec(ra_rad: f64, dec_rad: f64) -> Vec3 {
    let (sd, cd) = dec_rad.sin_cos();
    let (sa, ca) = ra_rad.sin_cos();
    [cd * ca, cd * sa, sd]
}

/// Right ascension 0..2pi and declination -pi/2..pi/2 (radians) of a vector of any length.
pub fn radec_from_vec(v: &Vec3) -> (f64, f64) {
    let ra = wrap_to(v[1].atan2(v[0]), TAU);
    let dec = v[2].atan2((v[0] * v[0] + v[1] * v[1]).sqrt());
    (ra, dec)
}

/// Vector length.
pub fn norm(v: &Vec3) -> f64 {
    (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt()
}

/// Distance between two positions (tests compare tables with the series they interpolate).
#[cfg(test)]
pub(crate) fn distance(a: &Vec3, b: &Vec3) -> f64 {
    norm(&[a[0] - b[0], a[1] - b[1], a[2] - b[2]])
}

/// `x.floor()` by truncation to an integer: exact for |x| < 2^52 (every such double's floor is an integer
/// below 2^52, held exactly), the library call otherwise. Portable builds have no floor instruction (SSE4.1),
/// so `f64::floor` is a function call; this is a conversion and a compare.
#[inline]
pub fn floor_fast(x: f64) -> f64 {
    if x.abs() < 4_503_599_627_370_496.0 {
        let t = x as i64 as f64;
        if t > x {
            t - 1.0
        } else {
            t
        }
    } else {
        x.floor()
    }
}

/// `x` reduced to `[0, m)` with a floor instead of the (slow) `fmod` behind `rem_euclid`; equal to
/// `x.rem_euclid(m)` up to rounding in the last place.
#[inline]
pub fn wrap_to(x: f64, m: f64) -> f64 {
    let r = x - m * floor_fast(x / m);
    if r >= m || r < 0.0 {
        0.0
    } else {
        r
    }
}

/// Angular separation of two directions, radians, 0..pi.
///
/// Vincenty's formula on the sphere (atan2 of cross and dot products): accurate at all angles, unlike
/// the arccos form near 0 and pi.
pub fn separation_rad(ra1_rad: f64, dec1_rad: f64, ra2_rad: f64, dec2_rad: f64) -> f64 {
    angle_between_rad(
        &unit_from_radec(ra1_rad, dec1_rad),
        &unit_from_radec(ra2_rad, dec2_rad),
    )
}

/// The angle between two directions given as vectors of any length (not zero), rad 0..pi: atan2(|a x b|, a . b),
/// accurate at every angle (acos of the dot product loses precision near 0 and pi).
pub fn angle_between_rad(a: &Vec3, b: &Vec3) -> f64 {
    let cross = [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ];
    norm(&cross).atan2(a[0] * b[0] + a[1] * b[1] + a[2] * b[2])
}

/// Precession matrix from the mean equator and equinox of J2000.0 to those of date.
///
/// Given: `jd_tt` TT Julian Date. Returns: matrix P with v_date = P v_J2000.
/// Source: IAU 1976 precession (Lieske et al. 1977), angles zeta, z, theta as in Meeus (1998) eq. 21.3 with
/// the starting epoch J2000.0. Accuracy: a few milliarcseconds per century near J2000 against IAU 2006.
pub fn precession_matrix(jd_tt: f64) -> Mat3 {
    let t = centuries_since_j2000(jd_tt);
    let zeta = (2306.2181 * t + 0.30188 * t * t + 0.017998 * t * t * t) * ARCSEC_RAD;
    let z = (2306.2181 * t + 1.09468 * t * t + 0.018203 * t * t * t) * ARCSEC_RAD;
    let theta = (2004.3109 * t - 0.42665 * t * t - 0.041833 * t * t * t) * ARCSEC_RAD;
    mat_mul(&rot(3, -z), &mat_mul(&rot(2, theta), &rot(3, -zeta)))
}

/// Nutation and obliquity at a date.
#[derive(Debug, Clone, Copy)]
pub struct Nutation {
    /// Nutation in longitude, rad.
    pub dpsi_rad: f64,
    /// Nutation in obliquity, rad.
    pub deps_rad: f64,
    /// Mean obliquity of the ecliptic, rad.
    pub eps_mean_rad: f64,
}

impl Nutation {
    /// Nutation and mean obliquity at `jd_tt`.
    ///
    /// Source: IAU 1980 nutation series as tabulated in Meeus (1998) ch. 22 (terms >= 0.0003"), through the
    /// `astro` crate: all 63 terms of the IAU 1980 theory, not the short four-term series whose 0.5"/0.1" accuracy
    /// Meeus quotes. Accuracy: the IAU 1980 model itself, which departs from IAU 2000A by up to about 0.05" (the
    /// celestial-pole offsets it lacks; from memory); the apparent places built on it agree with ERFA's IAU 2006/2000A
    /// to the tolerances of tests/reference.rs. Mean obliquity from Laskar (1986), Meeus eq. 22.3.
    pub fn at(jd_tt: f64) -> Nutation {
        let (dpsi_rad, deps_rad) = astro::nutation::nutation(jd_tt);
        Nutation {
            dpsi_rad,
            deps_rad,
            eps_mean_rad: astro::ecliptic::mn_oblq_laskar(jd_tt),
        }
    }

    /// True obliquity, rad.
    pub fn eps_true_rad(&self) -> f64 {
        self.eps_mean_rad + self.deps_rad
    }

    /// Equation of the equinoxes (apparent minus mean sidereal time), rad. Meeus (1998) ch. 12.
    pub fn equation_of_equinoxes_rad(&self) -> f64 {
        self.dpsi_rad * self.eps_true_rad().cos()
    }

    /// Nutation matrix N: v_true_of_date = N v_mean_of_date. Explanatory Supplement (1992) eq. 3.222-3.
    pub fn matrix(&self) -> Mat3 {
        mat_mul(
            &rot(1, -self.eps_true_rad()),
            &mat_mul(&rot(3, -self.dpsi_rad), &rot(1, self.eps_mean_rad)),
        )
    }
}

/// Rate of Greenwich mean sidereal time, degrees per UT1 day: the linear coefficient of Meeus (1998) eq. 12.4.
const GMST_DEG_PER_DAY: f64 = 360.985_647_366_29;

/// Mean sidereal days per UT1 day, 1.002 737 909 35: the rate at which hour angles (from GMST/GAST) advance. It is
/// not the Earth-rotation-angle rate (1.002 737 811 91), which leaves out precession in right ascension; the two
/// differ by 8.4 ms of hour angle per day.
pub const GMST_RATE_PER_UT1_DAY: f64 = GMST_DEG_PER_DAY / 360.0;

/// Greenwich mean sidereal time, rad 0..2pi.
///
/// Given: `jd_ut1` (UT1 Julian Date; dipwatch passes UTC, see the time module). Source: Meeus (1998) eq. 12.4
/// (IAU 1982 GMST). Accuracy: 0.1 s of time over 1900-2100 against the IAU 2006 ERA-based GMST.
pub fn gmst_rad(jd_ut1: f64) -> f64 {
    let t = (jd_ut1 - J2000_JD) / 36_525.0;
    let deg = 280.460_618_37 + GMST_DEG_PER_DAY * (jd_ut1 - J2000_JD) + 0.000_387_933 * t * t
        - t * t * t / 38_710_000.0;
    wrap_to(deg.to_radians(), TAU)
}

/// Geodetic position of an observer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Observer {
    /// Geodetic latitude, rad, north +.
    pub lat_rad: f64,
    /// Longitude, rad, east +.
    pub lon_rad: f64,
    /// Height above the WGS84 ellipsoid, m.
    pub elevation_m: f64,
    /// (sin, cos) of the latitude, computed once: every altitude at the site needs them.
    sc_lat: (f64, f64),
    /// [`Observer::axis_and_plane_distances_m`], computed once.
    axis_plane_m: (f64, f64),
}

impl Observer {
    /// Observer at geodetic latitude/longitude in degrees (north +, east +) and height in metres.
    pub fn from_deg(lat_deg: f64, lon_deg: f64, elevation_m: f64) -> Observer {
        let lat_rad = lat_deg.to_radians();
        Observer {
            lat_rad,
            lon_rad: lon_deg.to_radians(),
            elevation_m,
            sc_lat: (lat_rad.sin(), lat_rad.cos()),
            axis_plane_m: axis_and_plane_distances_m(lat_rad, elevation_m),
        }
    }

    /// (sin, cos) of the geodetic latitude.
    pub fn sin_cos_lat(&self) -> (f64, f64) {
        self.sc_lat
    }

    /// Distance from the Earth's axis and from the equatorial plane, m: (rho cos phi', rho sin phi') * a.
    /// Source: WGS84 ellipsoid, standard geodetic-to-geocentric conversion (Explanatory Supplement 4.22).
    pub fn axis_and_plane_distances_m(&self) -> (f64, f64) {
        self.axis_plane_m
    }

    /// Geocentric position in the true equator-and-equinox frame of date, m, given the local apparent sidereal
    /// time `last_rad`. (Polar motion, <= 15 m, is ignored.)
    pub fn geocentric_m(&self, last_rad: f64) -> Vec3 {
        self.geocentric_m_sc(last_rad.sin_cos())
    }

    /// [`Observer::geocentric_m`] with the (sin, cos) of the local apparent sidereal time given.
    pub fn geocentric_m_sc(&self, (sin_last, cos_last): (f64, f64)) -> Vec3 {
        let (r_axis, z) = self.axis_plane_m;
        [r_axis * cos_last, r_axis * sin_last, z]
    }

    /// Geocentric position in units of the Earth's equatorial radius (the unit of Meeus ch. 40 parallax),
    /// in the true frame of date.
    pub fn geocentric_earth_radii(&self, last_rad: f64) -> Vec3 {
        let p = self.geocentric_m(last_rad);
        let k = 1.0 / (EARTH_EQUATORIAL_RADIUS_KM * 1000.0);
        [p[0] * k, p[1] * k, p[2] * k]
    }
}

/// Distance from the Earth's axis and from the equatorial plane of a site at geodetic latitude `lat_rad` and
/// height `elevation_m` above the WGS84 ellipsoid, m (see [`Observer::axis_and_plane_distances_m`]).
fn axis_and_plane_distances_m(lat_rad: f64, elevation_m: f64) -> (f64, f64) {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let (s, c) = lat_rad.sin_cos();
    let n = WGS84_A_M / (1.0 - e2 * s * s).sqrt();
    ((n + elevation_m) * c, (n * (1.0 - e2) + elevation_m) * s)
}

/// Altitude and azimuth of a direction from its hour angle and declination.
///
/// Given: `ha_rad` hour angle (west +), `dec_rad`, `lat_rad` geodetic latitude. Returns: (altitude rad,
/// azimuth rad 0..2pi, north 0, east +pi/2). Source: Meeus (1998) eq. 13.5-13.6 with azimuth from north.
pub fn alt_az_from_hadec(ha_rad: f64, dec_rad: f64, lat_rad: f64) -> (f64, f64) {
    alt_az_from_hadec_sc(ha_rad, dec_rad.sin_cos(), lat_rad.sin_cos())
}

/// [`alt_az_from_hadec`] with the sines and cosines of declination and latitude given, as (sin, cos): for
/// loops over many instants of one direction at one site.
pub fn alt_az_from_hadec_sc(ha_rad: f64, sc_dec: (f64, f64), sc_lat: (f64, f64)) -> (f64, f64) {
    let (alt, az, _) = alt_az_sin_from_hadec_sc(ha_rad, sc_dec, sc_lat);
    (alt, az)
}

/// [`alt_az_from_hadec_sc`] and the sine of the altitude (the zenith component of the unit direction, to
/// rounding), for what needs both (the airmass).
pub fn alt_az_sin_from_hadec_sc(
    ha_rad: f64,
    (sd, cd): (f64, f64),
    (sl, cl): (f64, f64),
) -> (f64, f64, f64) {
    let (sh, ch) = ha_rad.sin_cos();
    let x = -ch * cd * sl + sd * cl;
    let y = -sh * cd;
    let z = ch * cd * cl + sd * sl;
    let alt = z.atan2((x * x + y * y).sqrt());
    let az = wrap_to(y.atan2(x), TAU);
    (alt, az, z.clamp(-1.0, 1.0))
}

/// Geometric altitude only (rad) from hour angle, declination and latitude: sin h = sin phi sin dec +
/// cos phi cos dec cos H (Meeus 1998 eq. 13.6); cheaper than [`alt_az_from_hadec`] when the azimuth is not needed.
pub fn alt_from_hadec(ha_rad: f64, dec_rad: f64, lat_rad: f64) -> f64 {
    alt_from_hadec_sc(
        ha_rad,
        (dec_rad.sin(), dec_rad.cos()),
        (lat_rad.sin(), lat_rad.cos()),
    )
}

/// [`alt_from_hadec`] with the sines and cosines of declination and latitude given, as (sin, cos).
pub fn alt_from_hadec_sc(ha_rad: f64, sc_dec: (f64, f64), sc_lat: (f64, f64)) -> f64 {
    alt_sin_from_hadec_sc(ha_rad, sc_dec, sc_lat).0
}

/// [`alt_from_hadec_sc`] and the sine of the altitude it is the arcsine of.
pub fn alt_sin_from_hadec_sc(
    ha_rad: f64,
    (sd, cd): (f64, f64),
    (sl, cl): (f64, f64),
) -> (f64, f64) {
    let s = (sl * sd + cl * cd * ha_rad.cos()).clamp(-1.0, 1.0);
    (s.asin(), s)
}

/// Hour angle wrapped to -pi..pi (west +).
pub fn wrap_pi(angle_rad: f64) -> f64 {
    let a = wrap_to(angle_rad + PI, TAU) - PI;
    if a <= -PI {
        a + TAU
    } else {
        a
    }
}

/// The rotation state of the Earth at one instant: everything needed to turn catalogue directions into
/// local hour angles for any site.
#[derive(Debug, Clone, Copy)]
pub struct EarthOrientation {
    /// TT Julian Date.
    pub jd_tt: f64,
    /// Precession-nutation matrix, J2000 mean -> true of date.
    pub pn: Mat3,
    /// Nutation quantities.
    pub nutation: Nutation,
    /// Greenwich apparent sidereal time, rad 0..2pi.
    pub gast_rad: f64,
}

impl EarthOrientation {
    /// Orientation at a UTC instant (UT1 = UTC).
    pub fn at(jd_utc: JdUtc) -> EarthOrientation {
        let jd_tt = crate::astro::time::jd_tt_from_utc(jd_utc);
        let nutation = Nutation::at(jd_tt);
        let pn = mat_mul(&nutation.matrix(), &precession_matrix(jd_tt));
        let gast_rad = (gmst_rad(jd_utc.0) + nutation.equation_of_equinoxes_rad()).rem_euclid(TAU);
        EarthOrientation {
            jd_tt,
            pn,
            nutation,
            gast_rad,
        }
    }

    /// Local apparent sidereal time at east longitude `lon_rad`, rad 0..2pi.
    pub fn last_rad(&self, lon_rad: f64) -> f64 {
        (self.gast_rad + lon_rad).rem_euclid(TAU)
    }

    /// Apparent right ascension and declination of date (true equator and equinox), rad, of a catalogue
    /// (ICRS/J2000) direction, with annual aberration from the Earth's barycentric velocity.
    ///
    /// Given: `icrs` unit vector; `earth_vel_au_per_day` barycentric velocity of the Earth in the ICRS frame
    /// (`None` skips aberration, up to 20.5"). Aberration to first order in v/c (Explanatory Supplement 3.252;
    /// the second-order term is < 0.001"). Light deflection by the Sun (< 0.02" beyond 45 deg of the Sun)
    /// is ignored.
    pub fn apparent_radec(&self, icrs: &Vec3, earth_vel_au_per_day: Option<&Vec3>) -> (f64, f64) {
        let mut p = *icrs;
        if let Some(v) = earth_vel_au_per_day {
            let k = AU_LIGHT_TIME_S / SECONDS_PER_DAY;
            let beta = [v[0] * k, v[1] * k, v[2] * k];
            let pdotv = p[0] * beta[0] + p[1] * beta[1] + p[2] * beta[2];
            for i in 0..3 {
                p[i] += beta[i] - p[i] * pdotv;
            }
        }
        radec_from_vec(&mat_vec(&self.pn, &p))
    }
}

/// Apply proper motion to catalogue coordinates.
///
/// Given: `ra_deg`, `dec_deg` at `epoch_jd`; `pm_ra_cosdec_mas_per_yr` (mu_alpha* = mu_alpha cos dec) and
/// `pm_dec_mas_per_yr`; `target_jd`. Returns (ra_deg, dec_deg) at the target date. The star moves along a straight
/// line in space at constant velocity with no radial velocity and no parallax: the unit vector p gains
/// t (mu_alpha* e_alpha + mu_delta e_delta) and is renormalised (the space-motion model of Kaplan et al. 1989,
/// AJ 97, 1197, with the radial terms dropped; from memory). Unlike linear motion in (alpha, delta) this holds at
/// the celestial poles too. Checked against ERFA `eraPmsafe` (tests/reference.rs) to < 1 mas over +-100 years for
/// |mu| < 2"/yr, including stars within 1 deg of a pole; radial velocity and parallax are ignored.
pub fn apply_proper_motion(
    ra_deg: f64,
    dec_deg: f64,
    pm_ra_cosdec_mas_per_yr: f64,
    pm_dec_mas_per_yr: f64,
    epoch_jd: f64,
    target_jd: f64,
) -> (f64, f64) {
    if pm_ra_cosdec_mas_per_yr == 0.0 && pm_dec_mas_per_yr == 0.0 {
        return (ra_deg, dec_deg);
    }
    let years = (target_jd - epoch_jd) / 365.25;
    let mas = (1.0 / 3.6e6_f64).to_radians();
    let (sa, ca) = ra_deg.to_radians().sin_cos();
    let (sd, cd) = dec_deg.to_radians().sin_cos();
    let p = [cd * ca, cd * sa, sd];
    let e_alpha = [-sa, ca, 0.0];
    let e_delta = [-sd * ca, -sd * sa, cd];
    let (ma, md) = (
        pm_ra_cosdec_mas_per_yr * mas * years,
        pm_dec_mas_per_yr * mas * years,
    );
    let moved: Vec3 = std::array::from_fn(|i| p[i] + ma * e_alpha[i] + md * e_delta[i]);
    let (ra, dec) = radec_from_vec(&moved);
    (ra.to_degrees().rem_euclid(360.0), dec.to_degrees())
}

#[cfg(test)]
mod tests {
    use super::*;

    proptest::proptest! {
        /// The truncating floor is the library's, signed zeros aside, small and large.
        #[test]
        fn floor_fast_is_floor(x in proptest::num::f64::NORMAL | proptest::num::f64::ZERO, small in -1e7f64..1e7) {
            for v in [x, small, small.trunc(), -small.trunc()] {
                proptest::prop_assert_eq!(floor_fast(v), v.floor(), "{}", v);
            }
        }
    }

    /// The sines handed out with the altitudes (for the airmass) are the sines of those altitudes.
    #[test]
    fn altitude_sines_are_the_sines_of_the_altitudes() {
        for k in 0..2000 {
            let ha = f64::from(k) * 0.0137 - 10.0;
            let dec = (f64::from(k) * 0.71).sin() * 1.5;
            let lat = (f64::from(k) * 0.39).cos() * 1.4;
            let (sc_dec, sc_lat) = (dec.sin_cos(), lat.sin_cos());
            let (alt, az, s) = alt_az_sin_from_hadec_sc(ha, sc_dec, sc_lat);
            assert!((s - alt.sin()).abs() < 1e-15, "{ha} {dec} {lat}");
            assert_eq!((alt, az), alt_az_from_hadec_sc(ha, sc_dec, sc_lat));
            let (alt, s) = alt_sin_from_hadec_sc(ha, sc_dec, sc_lat);
            assert!((s - alt.sin()).abs() < 1e-15, "{ha} {dec} {lat}");
        }
    }

    #[test]
    fn precession_is_a_rotation() {
        let p = precession_matrix(2_470_000.0);
        let v = mat_vec(&p, &[0.3, -0.4, 0.866_025_403_784_438_6]);
        assert!((norm(&v) - 1.0).abs() < 1e-12);
    }

    #[test]
    fn zenith_and_pole() {
        let lat = 0.7;
        let (alt, _) = alt_az_from_hadec(0.0, lat, lat);
        assert!((alt - PI / 2.0).abs() < 1e-12);
        let (alt, az) = alt_az_from_hadec(1.0, PI / 2.0, lat);
        assert!((alt - lat).abs() < 1e-12 && az.min(TAU - az) < 1e-9);
        // Due east at rising for an equatorial star seen from the equator.
        let (alt, az) = alt_az_from_hadec(-PI / 2.0, 0.0, 0.0);
        assert!(alt.abs() < 1e-12 && (az - PI / 2.0).abs() < 1e-12);
    }

    #[test]
    fn separation_of_orthogonal_directions() {
        assert!((separation_rad(0.0, 0.0, PI / 2.0, 0.0) - PI / 2.0).abs() < 1e-12);
        assert!(separation_rad(1.0, 0.5, 1.0, 0.5).abs() < 1e-12);
    }
}
