//! What a night chart draws, computed here once with the engine's own models: the target's and the Moon's
//! altitude through the night, the twilight spans bounded by the almanac's crossing times, and the meridian
//! crossing. Charts only draw it.

use super::almanac::NightAlmanac;
use super::plan::{Event, Track};
use crate::astro::tables::SkyTables;
use crate::constants::{
    ASTRONOMICAL_TWILIGHT_ALT_DEG, CIVIL_TWILIGHT_ALT_DEG, NAUTICAL_TWILIGHT_ALT_DEG,
    SUNRISE_ALT_DEG,
};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;

/// Sampling step of the curves, days (5 minutes: smooth at chart scale; crossings are exact elsewhere).
const SAMPLE_STEP_DAYS: f64 = 5.0 / 1440.0;

/// The sky's state by the Sun's altitude.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SkyBand {
    /// Sun above the sunrise/sunset altitude.
    Day,
    /// Between sunset and -6 deg.
    Civil,
    /// Between -6 and -12 deg.
    Nautical,
    /// Between -12 and -18 deg.
    Astronomical,
    /// Below -18 deg.
    Night,
}

impl SkyBand {
    /// The band of a Sun altitude, from the almanac's levels ([`crate::constants`]).
    pub fn of_sun_alt(alt_deg: f64) -> SkyBand {
        if alt_deg >= SUNRISE_ALT_DEG {
            SkyBand::Day
        } else if alt_deg >= CIVIL_TWILIGHT_ALT_DEG {
            SkyBand::Civil
        } else if alt_deg >= NAUTICAL_TWILIGHT_ALT_DEG {
            SkyBand::Nautical
        } else if alt_deg >= ASTRONOMICAL_TWILIGHT_ALT_DEG {
            SkyBand::Astronomical
        } else {
            SkyBand::Night
        }
    }

    /// Lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            SkyBand::Day => "day",
            SkyBand::Civil => "civil",
            SkyBand::Nautical => "nautical",
            SkyBand::Astronomical => "astronomical",
            SkyBand::Night => "night",
        }
    }
}

/// A span of one sky band, UTC JD.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TwilightSpan {
    /// Start, UTC JD.
    pub start_utc: f64,
    /// End, UTC JD.
    pub end_utc: f64,
    /// The band.
    pub band: SkyBand,
}

/// One sample of the curves.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TrackSample {
    /// Instant, UTC JD.
    pub utc: f64,
    /// Target geometric altitude, deg.
    pub target_alt_deg: f64,
    /// Target azimuth, deg (north 0, east 90).
    pub target_az_deg: f64,
    /// Topocentric Moon altitude, deg.
    pub moon_alt_deg: f64,
}

/// Everything a night chart draws besides the events themselves.
#[derive(Debug, Clone, PartialEq)]
pub struct NightTrack {
    /// First instant of the time axis, UTC JD.
    pub start_utc: f64,
    /// Last instant of the time axis, UTC JD.
    pub end_utc: f64,
    /// Curves, every 5 minutes from start to end (both included).
    pub samples: Vec<TrackSample>,
    /// Sky bands in time order, their edges at the almanac's crossing times.
    pub twilight: Vec<TwilightSpan>,
    /// Upper meridian crossing inside the axis: (UTC JD, altitude deg).
    pub meridian: Option<(f64, f64)>,
}

/// The time axis of a night chart: one hour before sunset to one hour after sunrise (the whole noon-to-noon
/// window when the Sun does not set or rise), widened to include every planned block, inside the window.
pub fn night_range(almanac: &NightAlmanac, events: &[Event]) -> (f64, f64) {
    let w = almanac.window;
    let mut start = almanac.sun.dusk.map(|t| t - 1.0 / 24.0).unwrap_or(w.start);
    let mut end = almanac.sun.dawn.map(|t| t + 1.0 / 24.0).unwrap_or(w.end);
    for e in events {
        start = start.min(e.full_block_start_utc - 0.25 / 24.0);
        end = end.max(e.full_block_end_utc + 0.25 / 24.0);
    }
    (start.max(w.start), end.min(w.end))
}

/// The sky bands between `start` and `end`: cut at every twilight crossing of the almanac, each piece's band
/// read from the Sun's altitude at its middle.
fn twilight_spans(
    site: &Site,
    almanac: &NightAlmanac,
    tables: &SkyTables,
    start: f64,
    end: f64,
) -> Vec<TwilightSpan> {
    let mut cuts: Vec<f64> = [
        &almanac.sun,
        &almanac.civil,
        &almanac.nautical,
        &almanac.astronomical,
    ]
    .iter()
    .flat_map(|l| [l.dusk, l.dawn])
    .flatten()
    .filter(|&t| t > start && t < end)
    .collect();
    cuts.push(start);
    cuts.push(end);
    cuts.sort_by(f64::total_cmp);
    cuts.dedup();
    let mut spans: Vec<TwilightSpan> = Vec::new();
    for w in cuts.windows(2) {
        let band = SkyBand::of_sun_alt(tables.sun_alt_deg(0.5 * (w[0] + w[1]), &site.observer));
        match spans.last_mut() {
            Some(last) if last.band == band => last.end_utc = w[1],
            _ => spans.push(TwilightSpan {
                start_utc: w[0],
                end_utc: w[1],
                band,
            }),
        }
    }
    spans
}

/// The night track of `target` at `site` for the night of `almanac`, with the axis widened for `events`.
pub fn night_track(
    site: &Site,
    target: &Target,
    almanac: &NightAlmanac,
    events: &[Event],
) -> NightTrack {
    let (start, end) = night_range(almanac, events);
    let tables = SkyTables::new(start - 1.0, end + 1.0);
    let mid = 0.5 * (start + end);
    let track = Track::new(&target.icrs_at(mid), mid, site, &tables);
    let n = (((end - start) / SAMPLE_STEP_DAYS).ceil() as usize).max(2);
    let samples = (0..=n)
        .map(|i| {
            let t = start + (end - start) * i as f64 / n as f64;
            let (alt, az) = track.alt_az_deg(t);
            let moon_alt = tables.sun_moon(t, &site.observer).moon_alt_deg;
            TrackSample {
                utc: t,
                target_alt_deg: alt,
                target_az_deg: az,
                moon_alt_deg: moon_alt,
            }
        })
        .collect();
    let meridian = track
        .culminations(start, end)
        .0
        .first()
        .map(|&t| (t, track.alt_deg(t)));
    NightTrack {
        start_utc: start,
        end_utc: end,
        samples,
        twilight: twilight_spans(site, almanac, &tables, start, end),
        meridian,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bands_follow_the_almanac_levels() {
        assert_eq!(SkyBand::of_sun_alt(5.0), SkyBand::Day);
        assert_eq!(SkyBand::of_sun_alt(-3.0), SkyBand::Civil);
        assert_eq!(SkyBand::of_sun_alt(-6.5), SkyBand::Nautical);
        assert_eq!(SkyBand::of_sun_alt(-17.9), SkyBand::Astronomical);
        assert_eq!(SkyBand::of_sun_alt(-30.0), SkyBand::Night);
    }
}
