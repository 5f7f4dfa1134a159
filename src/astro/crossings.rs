//! Root finding for the instants a smooth function of time crosses zero, and the Sun's altitude crossings.
//!
//! The method: sample the function on a grid (plus any extra instants the caller knows to be extrema, such as
//! meridian transits), then refine every sign change by bisection to [`ROOT_TOLERANCE_DAYS`]. A grid step of
//! 10 minutes cannot miss a crossing pair unless the function stays on one side for less than the step near a
//! grazing extremum; passing the extremum instants closes that gap for altitude functions.

use crate::astro::frames::Observer;
use crate::astro::sky::sun_alt_deg;
use crate::astro::time::JdUtc;

/// Precision to which crossing instants are refined: 0.5 s, in days.
pub const ROOT_TOLERANCE_DAYS: f64 = 0.5 / 86_400.0;

/// Default sampling step for bracketing crossings: 10 minutes, in days.
pub const DEFAULT_STEP_DAYS: f64 = 10.0 / 1440.0;

/// A closed interval of UTC Julian Dates.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Interval {
    /// Start, UTC JD.
    pub start: f64,
    /// End, UTC JD.
    pub end: f64,
}

impl Interval {
    /// Length, days (0 for empty or reversed intervals).
    pub fn len_days(&self) -> f64 {
        (self.end - self.start).max(0.0)
    }

    /// Intersection with another interval, if not empty.
    pub fn intersect(&self, other: &Interval) -> Option<Interval> {
        // Plain comparisons: `f64::max` and `min` also order NaNs, which costs instructions in this frequent
        // test (interval edges are never NaN).
        let s = if other.start > self.start {
            other.start
        } else {
            self.start
        };
        let e = if other.end < self.end {
            other.end
        } else {
            self.end
        };
        (e > s).then_some(Interval { start: s, end: e })
    }
}

/// Refine a bracketed sign change of `f` between `a` (f(a) = fa) and `b` by bisection.
pub fn bisect<F: Fn(f64) -> f64>(f: &F, mut a: f64, mut fa: f64, mut b: f64) -> f64 {
    while b - a > ROOT_TOLERANCE_DAYS {
        let m = 0.5 * (a + b);
        let fm = f(m);
        if (fm >= 0.0) == (fa >= 0.0) {
            a = m;
            fa = fm;
        } else {
            b = m;
        }
    }
    0.5 * (a + b)
}

/// The sub-intervals of `[start, end]` where `f >= 0`.
///
/// Given: `f` continuous; `step_days` sampling step; `extra` instants where `f` may have an extremum
/// (ignored outside the range). Returns sorted, disjoint intervals with edges refined to 0.5 s.
pub fn intervals_where_nonnegative<F: Fn(f64) -> f64>(
    f: &F,
    start: f64,
    end: f64,
    step_days: f64,
    extra: &[f64],
) -> Vec<Interval> {
    intervals_where_nonnegative_bounded(f, start, end, step_days, extra, (f64::INFINITY, 0.0))
}

/// [`intervals_where_nonnegative`] for an `f` that changes by at most `max_rate_per_day` per day, give or take
/// `slack` (jumps between tabulated values): a sample is not evaluated when the last value evaluated is too
/// far from zero for `f` to have reached zero since, so its sign is known. Only the signs of the samples
/// decide the brackets and [`bisect`] uses only signs, so the result is the same as evaluating every sample.
pub fn intervals_where_nonnegative_bounded<F: Fn(f64) -> f64>(
    f: &F,
    start: f64,
    end: f64,
    step_days: f64,
    extra: &[f64],
    (max_rate_per_day, slack): (f64, f64),
) -> Vec<Interval> {
    if end <= start {
        return Vec::new();
    }
    let n = ((end - start) / step_days).ceil().max(1.0) as usize;
    let mut ts: Vec<f64> = (0..=n)
        .map(|i| start + (end - start) * i as f64 / n as f64)
        .collect();
    ts.extend(extra.iter().copied().filter(|&t| t > start && t < end));
    ts.sort_by(f64::total_cmp);
    let mut out = Vec::new();
    let mut prev_t = ts[0];
    let mut prev_f = f(prev_t);
    let mut open = (prev_f >= 0.0).then_some(prev_t);
    // The last sample evaluated: its value bounds the ones after it.
    let mut known = (prev_t, prev_f);
    for &t in &ts[1..] {
        let ft = if known.1.abs() > max_rate_per_day * (t - known.0) + slack {
            // The same sign as the last value evaluated (only the sign of a sample is used).
            known.1
        } else {
            let ft = f(t);
            known = (t, ft);
            ft
        };
        if (ft >= 0.0) != (prev_f >= 0.0) {
            let root = bisect(f, prev_t, prev_f, t);
            match open.take() {
                Some(s) => out.push(Interval {
                    start: s,
                    end: root,
                }),
                None => open = Some(root),
            }
        }
        prev_t = t;
        prev_f = ft;
    }
    if let Some(s) = open {
        out.push(Interval { start: s, end });
    }
    out.retain(|i| i.end > i.start);
    out
}

/// When the Sun crosses an altitude during one night.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SunCrossing {
    /// The Sun goes below the altitude at `down` and comes back above it at `up` (UTC JD). Either may be
    /// `None` if it happens outside the searched window (the Sun was already below at its start, or still
    /// below at its end).
    Crosses {
        /// Descending crossing, UTC JD.
        down: Option<f64>,
        /// Ascending crossing, UTC JD.
        up: Option<f64>,
    },
    /// The Sun stays above the altitude throughout (polar day at this level).
    AlwaysAbove,
    /// The Sun stays below the altitude throughout (polar night at this level).
    AlwaysBelow,
}

/// The Sun's crossings of `alt_deg` in the window `[start, end]` (UTC JD), normally local noon to the next
/// local noon, with the direct (unpropagated) Sun of [`crate::astro::sky`].
///
/// Returns the edges of the longest run with the Sun below the level, or the polar cases explicitly. Accuracy:
/// 0.5 s of root finding on top of the Sun's altitude error (about 1", i.e. < 1 s of time away from the poles).
pub fn sun_crossings(observer: &Observer, alt_deg: f64, start: f64, end: f64) -> SunCrossing {
    use crate::astro::frames::{wrap_pi, EarthOrientation};
    use crate::astro::sky::sun_apparent;
    let ha = |t: f64| {
        let eo = EarthOrientation::at(JdUtc(t));
        let sun = sun_apparent(eo.jd_tt, &eo.nutation);
        wrap_pi(eo.last_rad(observer.lon_rad) - sun.ra_rad)
    };
    sun_crossings_with(
        &|t| sun_alt_deg(JdUtc(t), observer),
        &ha,
        alt_deg,
        start,
        end,
    )
}

/// A bound on how fast the Sun's geometric altitude changes, deg/day: cos(lat) cos(dec) times the hour angle's
/// rate (360.99 deg/day less the Sun's right-ascension motion, 0.9-1.1 deg/day), plus its declination's (at most
/// 0.4 deg/day), is below 362 deg/day anywhere; 400 leaves a tenth of room.
const SUN_ALT_RATE_BOUND_DEG_PER_DAY: f64 = 400.0;

/// What the Sun's tabulated altitude can jump by between neighbouring instants, deg: the tables take a day's
/// frame (precession-nutation, equation of the equinoxes) for the instants nearest to it, and the frames of
/// consecutive days differ by about 2e-5 deg. 1e-3 deg (3.6") is fifty times that.
const SUN_ALT_SLACK_DEG: f64 = 1e-3;

/// [`sun_crossings`] for any model of the Sun: `sun_alt_deg(t)` its altitude and `sun_ha_rad(t)` its hour
/// angle (-pi..pi) at UTC JD `t`. Samples every 20 minutes plus the instants of local apparent midnight and
/// noon (the altitude extrema), found from the hour angle, so a grazing Sun near the poles is not missed.
pub fn sun_crossings_with(
    sun_alt_deg: &dyn Fn(f64) -> f64,
    sun_ha_rad: &dyn Fn(f64) -> f64,
    alt_deg: f64,
    start: f64,
    end: f64,
) -> SunCrossing {
    let f = |t: f64| alt_deg - sun_alt_deg(t);
    let extrema = transit_instants(sun_ha_rad, start, end);
    let below = intervals_where_nonnegative_bounded(
        &f,
        start,
        end,
        20.0 / 1440.0,
        &extrema,
        (SUN_ALT_RATE_BOUND_DEG_PER_DAY, SUN_ALT_SLACK_DEG),
    );
    if below.is_empty() {
        return SunCrossing::AlwaysAbove;
    }
    if below.len() == 1 && below[0].start <= start && below[0].end >= end {
        return SunCrossing::AlwaysBelow;
    }
    // The longest run below the level (the earlier of equals). A window that does not hold the solar night in
    // one piece has a run at each end; joining the first descent to the last ascent would call the day between
    // them dark.
    let run = below
        .iter()
        .copied()
        .reduce(|a, b| if b.len_days() > a.len_days() { b } else { a })
        .expect("not empty");
    SunCrossing::Crosses {
        down: (run.start > start).then_some(run.start),
        up: (run.end < end).then_some(run.end),
    }
}

impl SunCrossing {
    /// The span of `window` with the Sun below the level throughout: the run between `down` and `up` (the
    /// window's edge where one is missing), the whole window for polar night, `None` for polar day.
    pub fn below_interval(&self, window: &Interval) -> Option<Interval> {
        match *self {
            SunCrossing::AlwaysAbove => None,
            SunCrossing::AlwaysBelow => Some(*window),
            SunCrossing::Crosses { down, up } => Some(Interval {
                start: down.unwrap_or(window.start),
                end: up.unwrap_or(window.end),
            }),
        }
    }
}

/// Instants of upper and lower meridian transits within `[start, end]` (UTC JD), from an hour-angle function
/// (rad, -pi..pi, increasing about 2pi a day), to 0.5 s.
pub fn transit_instants(ha: &dyn Fn(f64) -> f64, start: f64, end: f64) -> Vec<f64> {
    use crate::astro::frames::wrap_pi;
    let mut out = Vec::new();
    // The hour angle grows by ~2pi per day; step through in 1/4 day chunks and find where it passes 0 and pi.
    let mut t = start;
    while t < end {
        let t1 = (t + 0.25).min(end);
        let (h0, h1) = (ha(t), ha(t1));
        // Upper transit: ha crosses 0 from negative to positive.
        if h0 < 0.0 && h1 >= 0.0 {
            out.push(bisect(&|x| ha(x), t, h0, t1));
        }
        // Lower transit: ha wraps from +pi to -pi.
        if h0 > 0.0 && h1 < 0.0 {
            let g = |x: f64| wrap_pi(ha(x) - std::f64::consts::PI);
            out.push(bisect(&g, t, g(t), t1));
        }
        t = t1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(48))]
        /// Skipping the samples whose sign the Sun's altitude rate bound decides gives the crossings that
        /// evaluating every sample gives, to the bit: any latitude (the poles' grazing Sun included), any level,
        /// over several years of the planner's tables.
        #[test]
        fn bounded_sampling_finds_the_crossings_of_full_sampling(
            lat in -89.9f64..89.9,
            lon in -180.0f64..180.0,
            day in 0.0f64..3650.0,
            level in prop_oneof![Just(-18.0), Just(-12.0), Just(-6.0), Just(-0.833), -25.0f64..10.0],
        ) {
            let observer = Observer::from_deg(lat, lon, 0.0);
            let start = 2_460_000.5 + day.floor() - lon / 360.0;
            let tables = crate::astro::tables::SkyTables::new(start - 1.0, start + 9.0);
            for night in 0..7 {
                let (a, b) = (start + night as f64, start + night as f64 + 1.0);
                let f = |t: f64| level - tables.sun_alt_deg(t, &observer);
                let extrema = transit_instants(&|t| tables.sun_hour_angle_rad(t, &observer), a, b);
                let every = intervals_where_nonnegative(&f, a, b, 20.0 / 1440.0, &extrema);
                let bounded = intervals_where_nonnegative_bounded(
                    &f,
                    a,
                    b,
                    20.0 / 1440.0,
                    &extrema,
                    (SUN_ALT_RATE_BOUND_DEG_PER_DAY, SUN_ALT_SLACK_DEG),
                );
                prop_assert_eq!(bounded, every);
            }
        }
    }

    /// The tables' Sun altitude never changes faster than the bound the sampling relies on: sampled every
    /// minute at the equator (where it changes fastest) and at mid latitudes over a year.
    #[test]
    fn sun_altitude_rate_stays_under_the_bound() {
        let tables = crate::astro::tables::SkyTables::new(2_461_000.0, 2_461_370.0);
        let mut fastest = 0.0f64;
        for lat in [0.0, 23.4, -23.4, 45.0] {
            let observer = Observer::from_deg(lat, 10.0, 0.0);
            let mut prev = tables.sun_alt_deg(2_461_001.0, &observer);
            for i in 1..(365 * 1440 / 7) {
                let t = 2_461_001.0 + i as f64 * 7.0 / 1440.0;
                let alt = tables.sun_alt_deg(t, &observer);
                fastest = fastest.max((alt - prev).abs() / (7.0 / 1440.0));
                prev = alt;
            }
        }
        // 15.04 deg/h at most (common practice, no source): 361 deg/day.
        assert!(fastest < 362.0, "{fastest}");
        assert!(fastest > 350.0, "{fastest}");
        assert!(fastest < SUN_ALT_RATE_BOUND_DEG_PER_DAY);
    }

    #[test]
    fn intervals_of_a_sine() {
        // sin(2 pi t) >= 0 on [0, 0.5] and [1, 1.5] within [0, 1.7].
        let f = |t: f64| (std::f64::consts::TAU * t).sin();
        let iv = intervals_where_nonnegative(&f, 0.0, 1.7, 0.01, &[]);
        assert_eq!(iv.len(), 2);
        assert!((iv[0].end - 0.5).abs() < 1e-5);
        assert!((iv[1].start - 1.0).abs() < 1e-5);
        assert!((iv[1].end - 1.5).abs() < 1e-5);
    }

    #[test]
    fn grazing_extremum_is_found_with_extra_sample() {
        // A bump above zero only within 0.500 +- 0.001, invisible to a 0.1 step grid without the extremum hint.
        let f = |t: f64| 1e-6 - (t - 0.5).powi(2);
        assert!(intervals_where_nonnegative(&f, 0.0, 1.1, 0.3, &[]).is_empty());
        let iv = intervals_where_nonnegative(&f, 0.0, 1.1, 0.3, &[0.5]);
        assert_eq!(iv.len(), 1);
        assert!((iv[0].len_days() - 0.002).abs() < 1e-5);
    }
}
