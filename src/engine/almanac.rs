//! The almanac of one night at a site: sunset and sunrise, the three twilights, hours of darkness at the site's
//! level, Moon rise and set, and the Moon's illuminated fraction.

use crate::astro::civil::night_start_jd;
use crate::astro::crossings::{
    intervals_where_nonnegative, sun_crossings_with, Interval, SunCrossing,
};
use crate::astro::frames::EarthOrientation;
use crate::astro::sky::{alt_az, moon_apparent, topocentric};
use crate::astro::tables::SkyTables;
use crate::astro::time::JdUtc;
use crate::constants::{
    ASTRONOMICAL_TWILIGHT_ALT_DEG, CIVIL_TWILIGHT_ALT_DEG, NAUTICAL_TWILIGHT_ALT_DEG,
    SUNRISE_ALT_DEG,
};
use crate::inputs::sites::Site;
use chrono::NaiveDate;

/// Topocentric altitude of the Moon's centre at rise and set, deg: the almanac's -34' of refraction and -15.5'
/// of mean semidiameter (Meeus 1998 ch. 15 uses h0 = 0.7275 pi - 34' for the geocentric altitude, which is the
/// same thing once parallax is applied). The semidiameter varies by +-1', i.e. a few seconds of time.
pub const MOONRISE_TOPO_ALT_DEG: f64 = -(34.0 + 15.5) / 60.0;

/// One Sun altitude level's evening and morning crossings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LevelCrossings {
    /// Sun altitude, deg.
    pub alt_deg: f64,
    /// Descending crossing (dusk, or sunset), UTC JD; `None` if it does not happen in the window.
    pub dusk: Option<f64>,
    /// Ascending crossing (dawn, or sunrise), UTC JD.
    pub dawn: Option<f64>,
    /// What the Sun does at this level in the window.
    pub state: SunCrossing,
}

/// The almanac of one night at one site. All instants are UTC Julian Dates.
#[derive(Debug, Clone, PartialEq)]
pub struct NightAlmanac {
    /// Local date on which the night begins.
    pub night_of: NaiveDate,
    /// Local mean solar noon to the next one (see [`night_window`]).
    pub window: Interval,
    /// Sunset and sunrise (Sun centre at -0.833 deg).
    pub sun: LevelCrossings,
    /// Civil twilight (-6 deg).
    pub civil: LevelCrossings,
    /// Nautical twilight (-12 deg).
    pub nautical: LevelCrossings,
    /// Astronomical twilight (-18 deg).
    pub astronomical: LevelCrossings,
    /// The dark interval at the site's darkness level, if any.
    pub dark: Option<Interval>,
    /// Hours of darkness at the site's level.
    pub dark_hours: f64,
    /// First moonrise in the window.
    pub moonrise: Option<f64>,
    /// First moonset in the window.
    pub moonset: Option<f64>,
    /// Moon illuminated fraction at the middle of the window (about local midnight), 0-1.
    pub moon_illum: f64,
    /// Plain-language notes for events that do not happen (polar day or night, Moon up or down all night).
    pub notes: Vec<String>,
}

fn level(site: &Site, alt_deg: f64, window: &Interval, tables: &SkyTables) -> LevelCrossings {
    let obs = site.observer;
    let state = sun_crossings_with(
        &|t| tables.sun_alt_deg(t, &obs),
        &|t| tables.sun_hour_angle_rad(t, &obs),
        alt_deg,
        window.start,
        window.end,
    );
    let (dusk, dawn) = match state {
        SunCrossing::Crosses { down, up } => (down, up),
        _ => (None, None),
    };
    LevelCrossings {
        alt_deg,
        dusk,
        dawn,
        state,
    }
}

/// Topocentric altitude of the Moon's centre, deg.
pub fn moon_alt_deg(jd_utc: f64, site: &Site) -> f64 {
    let eo = EarthOrientation::at(JdUtc(jd_utc));
    let last = eo.last_rad(site.observer.lon_rad);
    let topo = topocentric(&moon_apparent(eo.jd_tt, &eo.nutation), &site.observer, last);
    alt_az(&topo, &site.observer, last).0.to_degrees()
}

/// The window of the night of `date` at `site`: from the local mean solar noon that opens it to the next one,
/// UTC JD (see [`crate::astro::civil::night_start_jd`]). The solar night always lies inside one such window.
pub fn night_window(site: &Site, date: NaiveDate) -> Interval {
    Interval {
        start: night_start_jd(date, site.lon_deg, site.tz),
        end: night_start_jd(date.succ_opt().unwrap_or(date), site.lon_deg, site.tz),
    }
}

/// The dark interval of a night: the run of `window` with the Sun below the site's darkness level throughout
/// (the longest, should the Sun graze the level near a window edge), `None` if it never gets that dark.
pub fn dark_interval(site: &Site, window: &Interval, tables: &SkyTables) -> Option<Interval> {
    level(site, site.darkness_alt_deg, window, tables)
        .state
        .below_interval(window)
}

/// The Moon's illuminated fraction at local mean solar midnight (the middle of the night window) of every night
/// `first..=last` at `site` (Meeus 1998 eq. 48.1-48.3 through [`crate::astro::sky::sun_moon_at`]).
pub fn moon_by_night(site: &Site, first: NaiveDate, last: NaiveDate) -> Vec<(NaiveDate, f64)> {
    first
        .iter_days()
        .take_while(|d| *d <= last)
        .map(|d| {
            let mid = night_window(site, d).start + 0.5;
            (
                d,
                crate::astro::sky::sun_moon_at(JdUtc(mid), &site.observer).moon_illum,
            )
        })
        .collect()
}

/// The almanac for the night that begins on `night_of` at `site`.
pub fn night_almanac(site: &Site, night_of: NaiveDate) -> NightAlmanac {
    let window = night_window(site, night_of);
    let tables = SkyTables::new(window.start - 0.5, window.end + 0.5);
    let sun = level(site, SUNRISE_ALT_DEG, &window, &tables);
    let civil = level(site, CIVIL_TWILIGHT_ALT_DEG, &window, &tables);
    let nautical = level(site, NAUTICAL_TWILIGHT_ALT_DEG, &window, &tables);
    let astronomical = level(site, ASTRONOMICAL_TWILIGHT_ALT_DEG, &window, &tables);
    let site_level = [&sun, &civil, &nautical, &astronomical]
        .into_iter()
        .find(|l| l.alt_deg == site.darkness_alt_deg)
        .copied()
        .unwrap_or_else(|| level(site, site.darkness_alt_deg, &window, &tables));
    let dark = site_level.state.below_interval(&window);
    let mut notes = Vec::new();
    for (name, l) in [
        ("sunset/sunrise", &sun),
        ("civil twilight", &civil),
        ("nautical twilight", &nautical),
        ("astronomical twilight", &astronomical),
    ] {
        match l.state {
            SunCrossing::AlwaysAbove => notes.push(format!(
                "{name}: the Sun stays above {} deg all night (midnight Sun or bright night), no {name}",
                l.alt_deg
            )),
            SunCrossing::AlwaysBelow => notes.push(format!(
                "{name}: the Sun stays below {} deg all day (polar night), no {name}",
                l.alt_deg
            )),
            SunCrossing::Crosses { .. } => {}
        }
    }
    let f = |t: f64| tables.moon_topo(t, &site.observer).alt_deg - MOONRISE_TOPO_ALT_DEG;
    let up = intervals_where_nonnegative(&f, window.start, window.end, 20.0 / 1440.0, &[]);
    let moonrise = up.iter().map(|i| i.start).find(|&t| t > window.start);
    let moonset = up.iter().map(|i| i.end).find(|&t| t < window.end);
    if up.is_empty() {
        notes.push(
            "the Moon stays below the horizon from noon to noon: no moonrise or moonset".into(),
        );
    } else if moonrise.is_none() && moonset.is_none() {
        notes.push(
            "the Moon stays above the horizon from noon to noon: no moonrise or moonset".into(),
        );
    } else if moonrise.is_none() {
        notes.push(
            "no moonrise between this noon and the next (the Moon's day is longer than ours)"
                .into(),
        );
    } else if moonset.is_none() {
        notes.push(
            "no moonset between this noon and the next (the Moon's day is longer than ours)".into(),
        );
    }
    let moon_illum = tables.moon_illum(0.5 * (window.start + window.end));
    NightAlmanac {
        night_of,
        window,
        sun,
        civil,
        nautical,
        astronomical,
        dark,
        dark_hours: dark.map(|d| d.len_days() * 24.0).unwrap_or(0.0),
        moonrise,
        moonset,
        moon_illum,
        notes,
    }
}
