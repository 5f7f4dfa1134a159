//! Barycentric and heliocentric light-time corrections: BJD_TDB, HJD_UTC and plain JD_UTC <-> UTC.
//!
//! BJD_TDB = JD_TDB + (r . n) / c, where r is the observer's position relative to the solar-system barycentre
//! and n the unit vector towards the target (Eastman, Siverd & Gaudi 2010, PASP 122, 935, eq. 1 without the
//! Shapiro and Einstein terms, which are < 0.2 ms). HJD_UTC uses the observer's position relative to the Sun's
//! centre with the UTC clock instead. The Earth's position comes from VSOP87E (Bretagnon & Francou 1988) through
//! the `vsop87` crate; measured within 8e-6 au (4 ms of light time) of ERFA's epv00.

use crate::astro::frames::{Observer, Vec3};
use crate::astro::time::{jd_tdb_from_utc, jd_utc_from_tt, tai_minus_utc_s, tdb_minus_tt_s, JdUtc};
use crate::constants::{
    AU_LIGHT_TIME_S, AU_M, OBLIQUITY_J2000_DEG, SECONDS_PER_DAY, TT_MINUS_TAI_S,
};

/// The time system a mid-transit time is quoted in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub enum TimeSystem {
    /// Barycentric Julian Date in TDB (the modern standard for transit times).
    #[serde(rename = "BJD_TDB")]
    BjdTdb,
    /// Heliocentric Julian Date on the UTC clock (older literature).
    #[serde(rename = "HJD_UTC")]
    HjdUtc,
    /// Julian Date in UTC at the observer, with no light-time correction.
    #[serde(rename = "JD_UTC")]
    JdUtc,
}

impl TimeSystem {
    /// Canonical name as written in input files.
    pub fn name(self) -> &'static str {
        match self {
            TimeSystem::BjdTdb => "BJD_TDB",
            TimeSystem::HjdUtc => "HJD_UTC",
            TimeSystem::JdUtc => "JD_UTC",
        }
    }

    /// Parse a name, case-insensitively; `None` if unknown.
    pub fn parse(text: &str) -> Option<TimeSystem> {
        match text.trim().to_ascii_uppercase().replace('-', "_").as_str() {
            "" | "BJD_TDB" | "BJD" => Some(TimeSystem::BjdTdb),
            "HJD_UTC" | "HJD" => Some(TimeSystem::HjdUtc),
            "JD_UTC" | "JD" => Some(TimeSystem::JdUtc),
            _ => None,
        }
    }
}

/// Rotate a vector from VSOP87's ecliptic-and-equinox-of-J2000 frame to the equatorial J2000 (~ICRS) frame.
fn ecliptic_j2000_to_equatorial(v: &Vec3) -> Vec3 {
    let (s, c) = OBLIQUITY_J2000_DEG.to_radians().sin_cos();
    [v[0], c * v[1] - s * v[2], s * v[1] + c * v[2]]
}

/// The Earth's barycentric and heliocentric positions, au, equatorial J2000, straight from VSOP87E.
///
/// Given: `jd_tdb`. Returns: (barycentric, heliocentric) positions. About 200 us a call: use [`EarthTable`]
/// in loops.
pub fn earth_positions_au(jd_tdb: f64) -> (Vec3, Vec3) {
    let e = vsop87::vsop87e::earth(jd_tdb);
    let s = vsop87::vsop87e::sun(jd_tdb);
    let bary = ecliptic_j2000_to_equatorial(&[e.x, e.y, e.z]);
    let helio = ecliptic_j2000_to_equatorial(&[e.x - s.x, e.y - s.y, e.z - s.z]);
    (bary, helio)
}

/// The weights of the Lagrange polynomial through six nodes at -5, -3, -1, 1, 3, 5 evaluated at 0 (the
/// midpoint of the two central ones): l_j(0) = prod over k != j of x_k / (x_k - x_j), i.e. 3, -25, 150, 150,
/// -25, 3 over 256 (derived here; checked in the unit tests: they sum to one and reproduce a quintic exactly).
const MIDPOINT_6: [f64; 6] = [
    3.0 / 256.0,
    -25.0 / 256.0,
    150.0 / 256.0,
    150.0 / 256.0,
    -25.0 / 256.0,
    3.0 / 256.0,
];

/// The values of a table's nodes 0..n: `eval` (in parallel) at the even nodes and at the five nearest each
/// end; each other odd node from its six even neighbours by `mix` (given the six in order: [`midpoint_6`] of
/// each position). Half the evaluations, for a smooth series sampled finely enough for the midpoint formula.
pub(crate) fn half_evaluated_nodes<T: Copy + Default + Send>(
    n: usize,
    eval: impl Fn(usize) -> T + Sync + Send,
    mix: impl Fn([T; 6]) -> T,
) -> Vec<T> {
    use rayon::prelude::*;
    let direct = |i: usize| i % 2 == 0 || i < 5 || i + 5 >= n;
    let mut nodes: Vec<T> = (0..n)
        .into_par_iter()
        .map(|i| if direct(i) { eval(i) } else { T::default() })
        .collect();
    for i in (0..n).filter(|&i| !direct(i)) {
        // Six even nodes, already evaluated: i - 5 >= 0 and i + 5 < n for every node not evaluated.
        nodes[i] = mix(std::array::from_fn(|k| nodes[i + 2 * k - 5]));
    }
    nodes
}

/// A position at the midpoint of six equally spaced ones ([`MIDPOINT_6`]), each coordinate summed in node order.
pub(crate) fn midpoint_6(p: [Vec3; 6]) -> Vec3 {
    std::array::from_fn(|c| {
        MIDPOINT_6
            .iter()
            .zip(&p)
            .fold(0.0, |sum, (w, v)| sum + w * v[c])
    })
}

/// A daily table of the Earth's positions, interpolated with 4-point Lagrange polynomials.
///
/// The nodes are VSOP87E on even days; the odd days' nodes come from their six even neighbours ([`midpoint_6`]),
/// within 7e-9 au (1 km, 3.4 us of light time) of VSOP87E: the Earth's monthly motion about the Earth-Moon
/// barycentre (4,700 km) sets the error. Interpolation error against direct VSOP87E evaluation is below 1e-8 au
/// (5 us of light time; both checked in the unit tests), so the table adds nothing measurable to the VSOP87E
/// error.
#[derive(Debug, Clone)]
pub struct EarthTable {
    first_jd_tdb: f64,
    bary_au: Vec<Vec3>,
    helio_au: Vec<Vec3>,
    /// TDB - TT at the same nodes, s ([`tdb_minus_tt_s`]).
    tdb_minus_tt_s: Vec<f64>,
    /// For each day from node 1 on, the cubic through TDB - TT at its four nodes (k-1 .. k+2) in power form
    /// ([`cubic_through`]), made once for every mid-time converted by a [`LightTimeCurve`].
    tdb_minus_tt_cubics: Vec<[f64; 4]>,
    /// TAI - UTC, s, when it is the same over the whole table (no leap second inside it).
    tai_minus_utc_s: Option<f64>,
}

impl EarthTable {
    /// A table covering `[from_jd_tdb, to_jd_tdb]` (padded by 3 days at each end).
    pub fn new(from_jd_tdb: f64, to_jd_tdb: f64) -> EarthTable {
        let first = from_jd_tdb.floor() - 3.0;
        let n = ((to_jd_tdb.max(from_jd_tdb) - first).ceil() as usize) + 4;
        // VSOP87E at half the nodes (half the cost of the run's fixed start), the rest interpolated.
        let (bary_au, helio_au): (Vec<Vec3>, Vec<Vec3>) = half_evaluated_nodes(
            n,
            |i| earth_positions_au(first + i as f64),
            |six| (midpoint_6(six.map(|p| p.0)), midpoint_6(six.map(|p| p.1))),
        )
        .into_iter()
        .unzip();
        let tdb_minus_tt_s: Vec<f64> = (0..n).map(|i| tdb_minus_tt_s(first + i as f64)).collect();
        let tdb_minus_tt_cubics = tdb_minus_tt_s.windows(4).map(cubic_through).collect();
        // TAI - UTC only steps up: equal at both ends (a day beyond each, for the TDB - UTC offset) means
        // constant throughout.
        let (a, b) = (
            tai_minus_utc_s(JdUtc(first - 1.0)),
            tai_minus_utc_s(JdUtc(first + n as f64 + 1.0)),
        );
        EarthTable {
            first_jd_tdb: first,
            bary_au,
            helio_au,
            tdb_minus_tt_s,
            tdb_minus_tt_cubics,
            tai_minus_utc_s: (a == b).then_some(a),
        }
    }

    /// Lagrange weights and first index for `jd_tdb`, or `None` outside the table.
    fn stencil(&self, jd_tdb: f64) -> Option<(usize, [f64; 4], [f64; 4])> {
        lagrange4(jd_tdb - self.first_jd_tdb, self.bary_au.len())
    }

    /// The weighted sum of rows i..i+4, each coordinate summed in node order (written out and inlined: it is
    /// asked twice for each of the run's mid-times).
    #[inline]
    fn combine(rows: &[Vec3], i: usize, w: &[f64; 4]) -> Vec3 {
        let r = &rows[i..i + 4];
        let sum = |j: usize| w[0] * r[0][j] + w[1] * r[1][j] + w[2] * r[2][j] + w[3] * r[3][j];
        [sum(0), sum(1), sum(2)]
    }

    /// Barycentric position of the Earth, au, equatorial J2000. Falls back to VSOP87E outside the table.
    pub fn earth_bary_au(&self, jd_tdb: f64) -> Vec3 {
        match self.stencil(jd_tdb) {
            Some((i, w, _)) => Self::combine(&self.bary_au, i, &w),
            None => earth_positions_au(jd_tdb).0,
        }
    }

    /// Heliocentric position of the Earth, au, equatorial J2000.
    pub fn earth_helio_au(&self, jd_tdb: f64) -> Vec3 {
        match self.stencil(jd_tdb) {
            Some((i, w, _)) => Self::combine(&self.helio_au, i, &w),
            None => earth_positions_au(jd_tdb).1,
        }
    }

    /// Barycentric velocity of the Earth, au/day, equatorial J2000 (derivative of the interpolant; good to
    /// 1e-6 au/day, i.e. 0.2" of aberration).
    pub fn earth_bary_vel_au_per_day(&self, jd_tdb: f64) -> Vec3 {
        match self.stencil(jd_tdb) {
            Some((i, _, dw)) => Self::combine(&self.bary_au, i, &dw),
            None => {
                let a = earth_positions_au(jd_tdb - 0.01).0;
                let b = earth_positions_au(jd_tdb + 0.01).0;
                [
                    (b[0] - a[0]) / 0.02,
                    (b[1] - a[1]) / 0.02,
                    (b[2] - a[2]) / 0.02,
                ]
            }
        }
    }

    /// [`EarthTable::earth_bary_vel_au_per_day`] and [`EarthTable::earth_helio_au`] of one instant from one
    /// stencil (the same numbers as the two calls).
    pub fn bary_vel_and_helio_au(&self, jd_tdb: f64) -> (Vec3, Vec3) {
        match self.stencil(jd_tdb) {
            Some((i, w, dw)) => (
                Self::combine(&self.bary_au, i, &dw),
                Self::combine(&self.helio_au, i, &w),
            ),
            None => (
                self.earth_bary_vel_au_per_day(jd_tdb),
                self.earth_helio_au(jd_tdb),
            ),
        }
    }

    /// UTC of a TDB instant, as [`jd_utc_from_tdb`] but with TDB - TT interpolated in the table (4-point
    /// Lagrange on daily nodes: within 1e-9 s of the series, whose terms have periods of a year or more) and
    /// TAI - UTC taken once when no leap second falls inside the table.
    pub fn utc_from_tdb(&self, jd_tdb: f64) -> JdUtc {
        let dt_s = match self.stencil(jd_tdb) {
            Some((i, w, _)) => (0..4).map(|k| w[k] * self.tdb_minus_tt_s[i + k]).sum(),
            None => tdb_minus_tt_s(jd_tdb),
        };
        self.utc_from_tt(jd_tdb - dt_s / SECONDS_PER_DAY)
    }

    /// UTC of a TT instant: TAI - UTC taken once when no leap second falls inside the table.
    fn utc_from_tt(&self, tt: f64) -> JdUtc {
        match self.tai_minus_utc_s {
            Some(leap_s) => JdUtc(tt - (leap_s + TT_MINUS_TAI_S) / SECONDS_PER_DAY),
            None => jd_utc_from_tt(tt),
        }
    }

    /// Light-time delay of the observer relative to the barycentre (or the Sun) along `target`, days.
    fn delay_days(&self, jd_tdb: f64, target: &Vec3, observer_au: &Vec3, helio: bool) -> f64 {
        let r = if helio {
            self.earth_helio_au(jd_tdb)
        } else {
            self.earth_bary_au(jd_tdb)
        };
        let dot = (0..3)
            .map(|i| (r[i] + observer_au[i]) * target[i])
            .sum::<f64>();
        dot * AU_LIGHT_TIME_S / SECONDS_PER_DAY
    }

    /// The time of an event in `system`, given its UTC instant at the observer.
    ///
    /// Given: `jd_utc` at the observer; `target` ICRS unit vector; `observer` site or `None` for the
    /// geocentre (the site term is at most 21 ms). Returns the time in `system`, days.
    pub fn time_in_system(
        &self,
        system: TimeSystem,
        jd_utc: JdUtc,
        target: &Vec3,
        observer: Option<&Observer>,
    ) -> f64 {
        let obs = observer_icrs_au(jd_utc, observer);
        match system {
            TimeSystem::JdUtc => jd_utc.0,
            TimeSystem::BjdTdb => {
                let tdb = jd_tdb_from_utc(jd_utc).0;
                tdb + self.delay_days(tdb, target, &obs, false)
            }
            TimeSystem::HjdUtc => {
                let tdb = jd_tdb_from_utc(jd_utc).0;
                jd_utc.0 + self.delay_days(tdb, target, &obs, true)
            }
        }
    }

    /// The UTC instant at the observer of an event quoted as `value` in `system` (inverse of
    /// [`EarthTable::time_in_system`] by fixed-point iteration; converges to < 1 us in three steps because the
    /// delay changes by < 1e-4 s per second).
    pub fn utc_from_system(
        &self,
        system: TimeSystem,
        value: f64,
        target: &Vec3,
        observer: Option<&Observer>,
    ) -> JdUtc {
        match system {
            TimeSystem::JdUtc => JdUtc(value),
            TimeSystem::BjdTdb => {
                // The geocentric delay changes by < 1e-4 s per second: two evaluations converge to < 1 us.
                // TDB-TT is evaluated once (it changes by < 1e-9 s over the 8 min of light time).
                let d0 = self.delay_days(value, target, &[0.0; 3], false);
                let tdb_geo = value - self.delay_days(value - d0, target, &[0.0; 3], false);
                let utc_geo = self.utc_from_tdb(tdb_geo);
                let obs = observer_icrs_au(utc_geo, observer);
                let site_days = (obs[0] * target[0] + obs[1] * target[1] + obs[2] * target[2])
                    * AU_LIGHT_TIME_S
                    / SECONDS_PER_DAY;
                JdUtc(utc_geo.0 - site_days)
            }
            TimeSystem::HjdUtc => {
                let mut utc = value;
                for _ in 0..3 {
                    let obs = observer_icrs_au(JdUtc(utc), observer);
                    let tdb = jd_tdb_from_utc(JdUtc(utc)).0;
                    utc = value - self.delay_days(tdb, target, &obs, true);
                }
                JdUtc(utc)
            }
        }
    }
}

/// The Earth's light time along one fixed direction at the nodes of an [`EarthTable`], for the geocentric UTC of
/// many BJD_TDB instants of one target ([`LightTimeCurve::geocentric_utc`]): the same cubic through the same
/// four nodes as the table's Lagrange interpolation, but of one number per node (the position already projected
/// on the direction) and in power form, so that its three evaluations within a day share one set of
/// coefficients. About 180 instructions a conversion (callgrind, the catalogue job) instead of 420 (three stencils
/// of three coordinates).
#[derive(Debug, Clone)]
pub struct LightTimeCurve<'a> {
    table: &'a EarthTable,
    target: Vec3,
    /// (r . n) / c at each node, days.
    delay_days: Vec<f64>,
}

impl EarthTable {
    /// The light-time curve of the ICRS unit vector `target` over the whole table.
    pub fn light_time_curve(&self, target: &Vec3) -> LightTimeCurve<'_> {
        LightTimeCurve {
            table: self,
            target: *target,
            delay_days: self
                .bary_au
                .iter()
                .map(|r| {
                    (r[0] * target[0] + r[1] * target[1] + r[2] * target[2]) * AU_LIGHT_TIME_S
                        / SECONDS_PER_DAY
                })
                .collect(),
        }
    }
}

/// The power-form coefficients (c0, c1, c2, c3) of the cubic through `f` at u = -1, 0, 1, 2: the Lagrange
/// basis of [`lagrange4`] multiplied out (Abramowitz & Stegun 25.2.13).
#[inline(always)]
fn cubic_through(f: &[f64]) -> [f64; 4] {
    let (a, b, c, d) = (f[0], f[1], f[2], f[3]);
    [
        b,
        -a / 3.0 - b / 2.0 + c - d / 6.0,
        a / 2.0 - b + c / 2.0,
        (d - a) / 6.0 + (b - c) / 2.0,
    ]
}

#[inline(always)]
fn horner(c: &[f64; 4], u: f64) -> f64 {
    ((c[3] * u + c[2]) * u + c[1]) * u + c[0]
}

impl LightTimeCurve<'_> {
    /// The geocentric UTC of an event quoted as `value` in `system`: [`LightTimeCurve::geocentric_utc`] for
    /// BJD_TDB, the table's general conversion for the others.
    pub fn geocentric_utc_of(&self, system: TimeSystem, value: f64) -> JdUtc {
        match system {
            TimeSystem::BjdTdb => self.geocentric_utc(value),
            _ => self
                .table
                .utc_from_system(system, value, &self.target, None),
        }
    }

    /// The geocentric UTC of `bjd_tdb`: [`EarthTable::utc_from_system`] with [`TimeSystem::BjdTdb`] and no
    /// observer, step for step (the same instants are rounded the same way), with the light time and TDB - TT
    /// from one cell's cubics. The cubics are the table's to rounding (1e-18 d, against 4.7e-10 d between
    /// neighbouring Julian Dates), so the result is the same double but in about one case in 10^8. An instant
    /// whose steps leave the day of `bjd_tdb` (the light time can move it across a node), or outside the
    /// table, takes the general conversion.
    pub fn geocentric_utc(&self, bjd_tdb: f64) -> JdUtc {
        let table = self.table;
        let general = || table.utc_from_system(TimeSystem::BjdTdb, bjd_tdb, &self.target, None);
        let first = table.first_jd_tdb;
        let x = bjd_tdb - first;
        let fl = crate::astro::frames::floor_fast(x);
        let i = fl as isize - 1;
        let (Some(delays), Some(tdb_tt)) = (
            usize::try_from(i)
                .ok()
                .and_then(|i| self.delay_days.get(i..i + 4)),
            usize::try_from(i)
                .ok()
                .and_then(|i| table.tdb_minus_tt_cubics.get(i)),
        ) else {
            return general();
        };
        let light = cubic_through(delays);
        // As `utc_from_system`: the delay at the quoted time, then at the time it gives.
        let d0 = horner(&light, x - fl);
        let x1 = (bjd_tdb - d0) - first;
        if crate::astro::frames::floor_fast(x1) != fl {
            return general();
        }
        let tdb_geo = bjd_tdb - horner(&light, x1 - fl);
        // As `utc_from_tdb`.
        let x2 = tdb_geo - first;
        if crate::astro::frames::floor_fast(x2) != fl {
            return general();
        }
        let dt_s = horner(tdb_tt, x2 - fl);
        table.utc_from_tt(tdb_geo - dt_s / SECONDS_PER_DAY)
    }
}

/// 4-point Lagrange interpolation on a unit-spaced grid of `len` nodes at 0, 1, 2, ...: for position `x`,
/// the first node index and the weights (and their derivatives per unit of `x`) of nodes floor(x)-1 ..
/// floor(x)+2; `None` when the stencil leaves the grid. Abramowitz & Stegun 25.2.13.
pub fn lagrange4(x: f64, len: usize) -> Option<(usize, [f64; 4], [f64; 4])> {
    let fl = crate::astro::frames::floor_fast(x);
    let i = fl as isize - 1;
    if i < 0 || i as usize + 3 >= len {
        return None;
    }
    let u = x - fl;
    let w = [
        -u * (u - 1.0) * (u - 2.0) / 6.0,
        (u + 1.0) * (u - 1.0) * (u - 2.0) / 2.0,
        -(u + 1.0) * u * (u - 2.0) / 2.0,
        (u + 1.0) * u * (u - 1.0) / 6.0,
    ];
    let dw = [
        -(3.0 * u * u - 6.0 * u + 2.0) / 6.0,
        (3.0 * u * u - 4.0 * u - 1.0) / 2.0,
        -(3.0 * u * u - 2.0 * u - 2.0) / 2.0,
        (3.0 * u * u - 1.0) / 6.0,
    ];
    Some((i as usize, w, dw))
}

/// Light-time of the observer's geocentric position along `target`, days (at most 21 ms): the amount by which
/// a site sees a transit earlier than the geocentre.
pub fn observer_delay_days(jd_utc: JdUtc, target: &Vec3, observer: &Observer) -> f64 {
    let o = observer_icrs_au(jd_utc, Some(observer));
    (o[0] * target[0] + o[1] * target[1] + o[2] * target[2]) * AU_LIGHT_TIME_S / SECONDS_PER_DAY
}

/// The observer's geocentric position in the ICRS frame, au (zero for `None`).
fn observer_icrs_au(jd_utc: JdUtc, observer: Option<&Observer>) -> Vec3 {
    let Some(obs) = observer else {
        return [0.0; 3];
    };
    // Rotated with the mean sidereal time only: leaving out precession since J2000 (50.3"/yr, so 0.5 deg in 2036
    // and 0.7 deg in 2050) and nutation (< 20") turns this <= 21 ms term by at most 0.7 deg through 2050, which
    // moves it by < 0.3 ms, and keeps the conversion cheap in loops.
    // The angle is not reduced: sine and cosine take any angle (`rem_euclid` was a library call per transit).
    let p = obs.geocentric_m(crate::astro::frames::gmst_rad(jd_utc.0) + obs.lon_rad);
    [p[0] / AU_M, p[1] / AU_M, p[2] / AU_M]
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The six-point midpoint weights sum to one and give a quintic's value at the midpoint exactly.
    #[test]
    fn midpoint_weights_reproduce_a_quintic() {
        assert_eq!(MIDPOINT_6.iter().sum::<f64>(), 1.0);
        let q = |x: f64| {
            0.3 - 1.7 * x + 0.25 * x.powi(2) + 0.04 * x.powi(3) - 0.002 * x.powi(4)
                + 1e-4 * x.powi(5)
        };
        let at = [-5.0, -3.0, -1.0, 1.0, 3.0, 5.0].map(|x| [q(x), 2.0 * q(x), 0.0]);
        assert!((midpoint_6(at)[0] - q(0.0)).abs() < 1e-14);
        assert!((midpoint_6(at)[1] - 2.0 * q(0.0)).abs() < 1e-14);
    }

    /// The odd nodes made from their even neighbours stay within 1e-8 au of VSOP87E (bary- and heliocentric;
    /// 6.7e-9 au at worst over 2027), and so does the table between nodes (9.4e-9 au at worst; 5.4e-9 au with
    /// every node from VSOP87E).
    #[test]
    fn odd_nodes_match_direct_evaluation() {
        let table = EarthTable::new(2_461_000.0, 2_461_370.0);
        let mut worst = 0.0f64;
        for i in (5..table.bary_au.len() - 5).filter(|i| i % 2 == 1) {
            let (bary, helio) = earth_positions_au(table.first_jd_tdb + i as f64);
            for (a, b) in [(table.bary_au[i], bary), (table.helio_au[i], helio)] {
                let d = crate::astro::frames::distance(&a, &b);
                worst = worst.max(d);
            }
        }
        assert!(worst < 1e-8, "worst odd node off by {worst} au");
        assert!(worst > 1e-11, "odd nodes not interpolated? {worst} au");
        // Between the nodes, over the year.
        let mut between = 0.0f64;
        for k in 0..3000 {
            let jd = 2_461_002.0 + k as f64 * 0.1213;
            let (a, b) = (table.earth_bary_au(jd), earth_positions_au(jd).0);
            let d = crate::astro::frames::distance(&a, &b);
            between = between.max(d);
        }
        assert!(between < 1e-8, "table off by {between} au between nodes");
    }

    #[test]
    fn table_interpolation_matches_direct_evaluation() {
        // Tolerance 1e-8 au = 5 us of light time: far below the 1e-5 au budget of VSOP87E itself.
        const TOL_AU: f64 = 1e-8;
        let table = EarthTable::new(2_461_000.0, 2_461_040.0);
        for k in 0..40 {
            let jd = 2_461_000.0 + k as f64 * 0.987_3;
            let a = table.earth_bary_au(jd);
            let b = earth_positions_au(jd).0;
            let d = crate::astro::frames::distance(&a, &b);
            assert!(d < TOL_AU, "jd {jd}: table off by {d} au");
        }
    }

    /// The light-time curve's geocentric UTC against the table's general conversion it stands in for: the
    /// same double in all but a handful of 200,000 instants (rounding of the cubic's two forms, 1e-18 d), and
    /// never more than one step of the Julian Date (4.7e-10 d = 40 us) apart; over a span without a leap second
    /// and one holding the 2016-12-31 leap second (IERS Bulletin C 52), in many directions, with instants on
    /// and next to the nodes (where the light time moves the steps into the neighbouring day).
    #[test]
    fn light_time_curve_matches_the_general_conversion() {
        for (from, to) in [(2_461_000.0, 2_461_400.0), (2_457_700.0, 2_457_800.0)] {
            let table = EarthTable::new(from - 1.0, to + 1.0);
            let mut differ = 0;
            let mut total = 0;
            for k in 0..20 {
                let (ra, dec) = (f64::from(k) * 1.37, (f64::from(k) * 0.77).sin() * 1.5);
                let n = [dec.cos() * ra.cos(), dec.cos() * ra.sin(), dec.sin()];
                let curve = table.light_time_curve(&n);
                for j in 0..5000 {
                    let bjd = from
                        + (to - from) * f64::from(j) / 4999.0
                        + if j % 7 == 0 {
                            0.0
                        } else {
                            f64::from(j % 13) * 1e-3
                        };
                    let fast = curve.geocentric_utc(bjd).0;
                    let general = table.utc_from_system(TimeSystem::BjdTdb, bjd, &n, None).0;
                    assert!(
                        (fast - general).abs() <= 4.7e-10,
                        "{bjd}: {fast} vs {general}"
                    );
                    differ += usize::from(fast != general);
                    total += 1;
                }
            }
            assert!(differ * 10_000 < total, "{differ} of {total} differ");
        }
        // Outside the table: the general conversion (which falls back to VSOP87E).
        let table = EarthTable::new(2_461_000.0, 2_461_010.0);
        let n = [0.6, 0.0, 0.8];
        let curve = table.light_time_curve(&n);
        for bjd in [2_460_900.3, 2_461_100.7] {
            assert_eq!(
                curve.geocentric_utc(bjd).0,
                table.utc_from_system(TimeSystem::BjdTdb, bjd, &n, None).0
            );
        }
    }

    /// The table's TDB -> UTC against the direct one ([`crate::astro::time::jd_utc_from_tdb`]), on a span
    /// without a leap second and on one holding the 2016-12-31 leap second (IERS Bulletin C 52).
    #[test]
    fn table_utc_from_tdb_matches_the_direct_conversion() {
        for (from, to) in [(2_461_000.0, 2_461_400.0), (2_457_700.0, 2_457_800.0)] {
            let table = EarthTable::new(from, to);
            for k in 0..400 {
                let tdb = from + (to - from) * f64::from(k) / 399.0;
                let direct = crate::astro::time::jd_utc_from_tdb(crate::astro::time::JdTdb(tdb)).0;
                let fast = table.utc_from_tdb(tdb).0;
                assert!(
                    (fast - direct).abs() * SECONDS_PER_DAY < 1e-6,
                    "{tdb}: {fast} vs {direct}"
                );
            }
        }
    }

    #[test]
    fn bjd_round_trip() {
        let table = EarthTable::new(2_461_000.0, 2_461_010.0);
        let target = crate::astro::frames::unit_from_radec(1.0, 0.3);
        let obs = Observer::from_deg(-30.0, 70.0, 2000.0);
        for sys in [TimeSystem::BjdTdb, TimeSystem::HjdUtc, TimeSystem::JdUtc] {
            let utc = JdUtc(2_461_004.321);
            let t = table.time_in_system(sys, utc, &target, Some(&obs));
            let back = table.utc_from_system(sys, t, &target, Some(&obs));
            assert!((back.0 - utc.0).abs() * SECONDS_PER_DAY < 1e-4, "{sys:?}");
        }
    }
}
