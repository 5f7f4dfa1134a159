//! The planner: for each site, night and transit, the observing block, what part of it can be used, and a
//! verdict with its reasons.
//!
//! For one event the block is [ingress - k sigma - baseline_before, egress + k sigma + baseline_after]. Inside
//! it, each constraint (darkness, altitude limit, horizon profile, hour-angle limits, Moon separation) gives
//! the sub-intervals where it holds, found by root finding ([`crate::astro::crossings`]); their intersection is
//! the usable time. The verdict comes from the usable run that overlaps the transit most.

use crate::astro::atmosphere::{airmass_kasten_young, airmass_kasten_young_sin};
use crate::astro::barycentric::EarthTable;
use crate::astro::crossings::{intervals_where_nonnegative, Interval, DEFAULT_STEP_DAYS};
use crate::astro::frames::GMST_RATE_PER_UT1_DAY;
use crate::astro::frames::{alt_az_from_hadec_sc, floor_fast, gmst_rad, wrap_pi, Vec3};
use crate::astro::tables::SkyTables;
use crate::astro::time::JdUtc;
use crate::engine::almanac::{dark_interval, night_window};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use chrono::NaiveDate;
use rayon::prelude::*;
use std::f64::consts::TAU;

/// Slack when comparing interval edges: 1 s in days.
const EDGE_SLACK_DAYS: f64 = 1.0 / 86_400.0;
/// An ephemeris whose timing sigma exceeds this fraction of the period no longer tells which transit is which.
pub const LOST_SIGMA_FRACTION_OF_PERIOD: f64 = 0.125;

/// Default smallest usable in-transit time, minutes. Common practice, no source: a partial transit is worth a
/// night only with enough in-transit points to measure the depth and time a contact, which for ingress and
/// egress durations of 10-30 min and cadences of 1-2 min takes about half an hour of in-transit data.
pub const DEFAULT_MIN_IN_TRANSIT_MIN: f64 = 30.0;

/// Options of a planning run.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PlanOptions {
    /// First "night of" date, inclusive.
    pub first_night: NaiveDate,
    /// Last "night of" date, inclusive.
    pub last_night: NaiveDate,
    /// Timing margin in units of the epoch's sigma added before ingress and after egress (k).
    pub sigma_k: f64,
    /// Out-of-transit baseline wanted before the (margin-widened) ingress, minutes.
    pub baseline_before_min: f64,
    /// Out-of-transit baseline wanted after the (margin-widened) egress, minutes.
    pub baseline_after_min: f64,
    /// Smallest in-transit coverage (0-1) for an event to count as observable.
    pub min_coverage: f64,
    /// Smallest usable in-transit time for an event to count as observable, minutes (capped at the transit's
    /// duration, so a whole short transit still counts). See [`DEFAULT_MIN_IN_TRANSIT_MIN`].
    pub min_in_transit_min: f64,
    /// Smallest expected transit SNR to list an event (0: no minimum); applies where the noise is known.
    pub min_snr: f64,
    /// Also list events that cannot be observed, with their reasons.
    pub include_unobservable: bool,
    /// The event kinds planned (targets are expanded into one entry per kind by
    /// [`crate::orbit::kind_views`] before planning; recorded here for the outputs' options).
    #[serde(serialize_with = "kinds_as_labels")]
    pub kinds: Vec<crate::orbit::EventKind>,
    /// Window planned around a radial-velocity extreme, hours.
    pub rv_window_hours: f64,
}

fn kinds_as_labels<S: serde::Serializer>(
    kinds: &[crate::orbit::EventKind],
    s: S,
) -> Result<S::Ok, S::Error> {
    s.collect_seq(kinds.iter().map(|k| k.label()))
}

/// What part of a transit can be observed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Ingress, egress (with their timing margins) and both baselines in usable time.
    Whole,
    /// The whole transit with margins, but less baseline than asked for on at least one side.
    WholeShortBaseline,
    /// Ingress with its margin, but not the egress.
    IngressOnly,
    /// Egress with its margin, but not the ingress.
    EgressOnly,
    /// Some in-transit time, but neither contact.
    MiddleOnly,
    /// A window kind (radial-velocity extreme, phase window): the whole window with its timing margins.
    WholeWindow,
    /// A window kind: part of the window.
    PartWindow,
    /// No usable in-transit time (for a window: none of the window).
    NotObservable,
}

impl Verdict {
    /// The verdict as printed in a table's narrow Verdict column (its legend spells them out).
    pub fn short_label(self) -> &'static str {
        match self {
            Verdict::Whole => "whole",
            Verdict::WholeShortBaseline => "whole/sb",
            Verdict::IngressOnly => "ingress",
            Verdict::EgressOnly => "egress",
            Verdict::MiddleOnly => "middle",
            Verdict::WholeWindow => "window",
            Verdict::PartWindow => "part",
            Verdict::NotObservable => "none",
        }
    }

    /// The verdict as written in every output.
    pub fn label(self) -> &'static str {
        match self {
            Verdict::Whole => "whole",
            Verdict::WholeShortBaseline => "whole-short-baseline",
            Verdict::IngressOnly => "ingress-only",
            Verdict::EgressOnly => "egress-only",
            Verdict::MiddleOnly => "middle-only",
            Verdict::WholeWindow => "whole-window",
            Verdict::PartWindow => "part-window",
            Verdict::NotObservable => "not-observable",
        }
    }
}

/// Why (part of) a block cannot be used. Machine-readable in every output.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Reason {
    /// The Sun is above the site's darkness level for part of the block.
    Daylight,
    /// The target is below the site's lowest usable altitude (or highest airmass).
    BelowAltitudeLimit,
    /// The target is above the highest altitude the mount can track through (`max_alt_deg`).
    AboveAltitudeLimit,
    /// The target is behind the site's horizon profile.
    BelowHorizonProfile,
    /// The target is outside the site's hour-angle limits.
    HourAngleLimit,
    /// The target is closer to the Moon than the site allows.
    MoonTooClose,
    /// Some transit is usable, but less than the requested minimum coverage.
    CoverageBelowMinimum,
    /// Some transit is usable, but less in-transit time than the run's minimum (`--min-in-transit`).
    InTransitBelowMinimum,
    /// The expected transit SNR is below the run's minimum (`--min-snr`).
    SnrBelowMinimum,
    /// The timing sigma exceeds 1/8 of the period: the ephemeris is lost.
    EphemerisLost,
}

impl Reason {
    /// The reason as written in every output.
    pub fn label(self) -> &'static str {
        match self {
            Reason::Daylight => "daylight",
            Reason::BelowAltitudeLimit => "below-altitude-limit",
            Reason::AboveAltitudeLimit => "above-altitude-limit",
            Reason::BelowHorizonProfile => "below-horizon-profile",
            Reason::HourAngleLimit => "hour-angle-limit",
            Reason::MoonTooClose => "moon-too-close",
            Reason::CoverageBelowMinimum => "coverage-below-minimum",
            Reason::InTransitBelowMinimum => "in-transit-below-minimum",
            Reason::SnrBelowMinimum => "snr-below-minimum",
            Reason::EphemerisLost => "ephemeris-lost",
        }
    }

    /// Every reason, in the order outputs list them.
    pub const ALL: [Reason; 10] = [
        Reason::Daylight,
        Reason::BelowAltitudeLimit,
        Reason::AboveAltitudeLimit,
        Reason::BelowHorizonProfile,
        Reason::HourAngleLimit,
        Reason::MoonTooClose,
        Reason::CoverageBelowMinimum,
        Reason::InTransitBelowMinimum,
        Reason::SnrBelowMinimum,
        Reason::EphemerisLost,
    ];

    fn bit(self) -> u16 {
        1 << self as u16
    }
}

/// The reasons of one event, as a set of bits: each reason at most once, listed in the order of
/// [`Reason::ALL`]. A plain value (no heap memory), so events are copied without allocating.
#[derive(Clone, Copy, Default, PartialEq, Eq, Hash)]
pub struct ReasonSet(u16);

impl ReasonSet {
    /// No reasons.
    pub const fn new() -> ReasonSet {
        ReasonSet(0)
    }

    /// Add `r` (no change if it is already in the set).
    pub fn insert(&mut self, r: Reason) {
        self.0 |= r.bit();
    }

    /// Whether `r` is in the set.
    pub fn contains(&self, r: &Reason) -> bool {
        self.0 & r.bit() != 0
    }

    /// Whether the set is empty.
    pub fn is_empty(&self) -> bool {
        self.0 == 0
    }

    /// The reasons in the order of [`Reason::ALL`].
    pub fn iter(self) -> impl Iterator<Item = Reason> {
        Reason::ALL.into_iter().filter(move |r| self.contains(r))
    }

    /// The reasons as a list, in the order of [`Reason::ALL`].
    pub fn to_vec(self) -> Vec<Reason> {
        self.iter().collect()
    }
}

impl FromIterator<Reason> for ReasonSet {
    fn from_iter<I: IntoIterator<Item = Reason>>(iter: I) -> ReasonSet {
        let mut set = ReasonSet::new();
        for r in iter {
            set.insert(r);
        }
        set
    }
}

impl std::fmt::Debug for ReasonSet {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_list().entries(self.iter()).finish()
    }
}

impl PartialEq<Vec<Reason>> for ReasonSet {
    fn eq(&self, other: &Vec<Reason>) -> bool {
        self.to_vec() == *other
    }
}

/// One night at one site.
#[derive(Debug, Clone, PartialEq)]
pub struct Night {
    /// Local date on which the night begins.
    pub night_of: NaiveDate,
    /// Local mean solar noon to the next, UTC JD.
    pub window: Interval,
    /// Time with the Sun below the site's darkness level, UTC JD; `None` if the Sun stays above it.
    pub dark: Option<Interval>,
}

/// One transit at one site, with its geometry and verdict. Times are UTC Julian Dates.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Event {
    /// Index of the target in the input list.
    pub target_index: usize,
    /// Index of the site in the input list.
    pub site_index: usize,
    /// Index of the telescope in the site's list: each telescope of a site gets its own row, since limits and
    /// noise differ per telescope.
    pub telescope_index: usize,
    /// Epoch number n since T0.
    pub epoch: i64,
    /// Verdict.
    pub verdict: Verdict,
    /// Whether the event meets the run's criteria (verdict, minimum coverage, ephemeris not lost).
    pub observable: bool,
    /// Fraction of [ingress, egress] inside the chosen usable run, 0-1.
    pub coverage: f64,
    /// Predicted mid-transit, ingress and egress, UTC JD.
    pub mid_utc: f64,
    /// Ingress (first contact), UTC JD.
    pub ingress_utc: f64,
    /// Egress (fourth contact), UTC JD.
    pub egress_utc: f64,
    /// Start of the block as it can be observed: the theoretical block clipped to the usable run (the run
    /// itself for an observable event; the theoretical block when nothing is usable), moved inward to a whole
    /// UTC minute, UTC JD. What a person or program acts on.
    pub block_start_utc: f64,
    /// End of the block as it can be observed, UTC JD.
    pub block_end_utc: f64,
    /// Theoretical block start: ingress - k sigma - the baseline wanted before, UTC JD.
    pub full_block_start_utc: f64,
    /// Theoretical block end: egress + k sigma + the baseline wanted after, UTC JD.
    pub full_block_end_utc: f64,
    /// The usable run chosen for the verdict, UTC JD, if any.
    pub usable: Option<Interval>,
    /// Timing 1-sigma, minutes.
    pub sigma_min: f64,
    /// Usable out-of-transit baseline before ingress - k sigma, minutes.
    pub baseline_before_min: f64,
    /// Usable out-of-transit baseline after egress + k sigma, minutes.
    pub baseline_after_min: f64,
    /// Night the event belongs to.
    pub night_of: NaiveDate,
    /// Dark interval of that night, if any.
    pub night_dark: Option<Interval>,
    /// Geometric altitude of the target at ingress, mid-transit and egress, deg.
    pub alt_ingress_deg: f64,
    /// Altitude at mid-transit, deg.
    pub alt_mid_deg: f64,
    /// Altitude at egress, deg.
    pub alt_egress_deg: f64,
    /// Altitude at the (clipped) block start, deg.
    pub alt_block_start_deg: f64,
    /// Altitude at block end, deg.
    pub alt_block_end_deg: f64,
    /// Kasten-Young airmass at ingress, mid-transit and egress (infinite below -6 deg).
    pub airmass_ingress: f64,
    /// Airmass at mid-transit.
    pub airmass_mid: f64,
    /// Airmass at egress.
    pub airmass_egress: f64,
    /// Azimuth at mid-transit, deg, north 0, east 90.
    pub az_mid_deg: f64,
    /// Sun altitude at mid-transit, deg.
    pub sun_alt_mid_deg: f64,
    /// Moon altitude at mid-transit, deg (topocentric).
    pub moon_alt_mid_deg: f64,
    /// Target-Moon separation at mid-transit, deg (topocentric Moon).
    pub moon_sep_deg: f64,
    /// Moon illuminated fraction, 0-1.
    pub moon_illum: f64,
    /// Upper meridian crossing inside the block, UTC JD (a flip for German equatorial mounts).
    pub meridian_utc: Option<f64>,
    /// Why (part of) the block is unusable.
    pub reasons: ReasonSet,
    /// Expected noise and transit SNR, when the site has a photometric set-up and the target a magnitude.
    pub noise: Option<crate::engine::noise::EventNoise>,
}

impl Event {
    /// True when the usable run cuts the theoretical block's start (twilight, altitude or another limit).
    pub fn start_clipped(&self) -> bool {
        self.usable
            .is_some_and(|u| u.start > self.full_block_start_utc + 1.0 / 86_400.0)
    }

    /// True when the usable run cuts the theoretical block's end.
    pub fn end_clipped(&self) -> bool {
        self.usable
            .is_some_and(|u| u.end < self.full_block_end_utc - 1.0 / 86_400.0)
    }
}

/// Targets whose ephemeris is lost over the run, with the timing sigma at the first epoch in range.
#[derive(Debug, Clone, PartialEq)]
pub struct LostEphemeris {
    /// Target index.
    pub target_index: usize,
    /// Timing 1-sigma, minutes.
    pub sigma_min: f64,
}

/// Everything planned for one telescope at one site (a site with one telescope has one `SitePlan`).
#[derive(Debug, Clone, PartialEq)]
pub struct SitePlan {
    /// Site index in the input list.
    pub site_index: usize,
    /// Telescope index in the site's list.
    pub telescope_index: usize,
    /// The nights in range.
    pub nights: Vec<Night>,
    /// Events sorted by block start (observable ones, plus the rest if asked).
    pub events: Vec<Event>,
}

/// The result of a planning run.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// Per site and telescope, in input order (sites, then each site's telescopes).
    pub sites: Vec<SitePlan>,
    /// Targets whose ephemeris is lost in the range.
    pub lost: Vec<LostEphemeris>,
}

/// Every event (observable or not) of `target` at `site` on the night `night_of`, with the block options of
/// `opts`: what a night chart draws.
pub fn events_of_night(
    site: &Site,
    target: &Target,
    night_of: NaiveDate,
    opts: &PlanOptions,
) -> Vec<Event> {
    let one_night = PlanOptions {
        first_night: night_of,
        last_night: night_of,
        include_unobservable: true,
        ..opts.clone()
    };
    let mut p = plan(
        std::slice::from_ref(site),
        std::slice::from_ref(target),
        &one_night,
    );
    std::mem::take(&mut p.sites[0].events)
}

/// The windows (local mean solar noon to the next) of the nights `first..=last` at a site, UTC JD.
pub fn night_windows(site: &Site, first: NaiveDate, last: NaiveDate) -> Vec<(NaiveDate, Interval)> {
    first
        .iter_days()
        .take_while(|d| *d <= last)
        .map(|d| (d, night_window(site, d)))
        .collect()
}

/// The nights `first..=last` at a site with their dark intervals.
pub fn nights_at(site: &Site, first: NaiveDate, last: NaiveDate) -> Vec<Night> {
    let windows = night_windows(site, first, last);
    let (Some(a), Some(b)) = (windows.first(), windows.last()) else {
        return Vec::new();
    };
    let tables = SkyTables::new(a.1.start, b.1.end);
    nights_with(site, &windows, &tables)
}

/// The nights in `windows` at a site with their dark intervals, from precomputed tables.
pub fn nights_with(
    site: &Site,
    windows: &[(NaiveDate, Interval)],
    tables: &SkyTables,
) -> Vec<Night> {
    windows
        .par_iter()
        .map(|&(d, window)| Night {
            night_of: d,
            window,
            dark: dark_interval(site, &window, tables),
        })
        .collect()
}

/// A target's apparent place of date frozen over one block (precession, nutation and aberration change by
/// < 0.1" in a day), turned into altitude and azimuth at any instant from the sidereal time.
pub(crate) struct Track {
    /// The direction as a vector (length within 1e-4 of one), in the frame of `ra_rad`.
    dir: Vec3,
    ra_rad: f64,
    eqeq_rad: f64,
    lon_rad: f64,
    /// (sin, cos) of the declination and of the latitude, computed once for every instant asked.
    sc_dec: (f64, f64),
    sc_lat: (f64, f64),
}

impl Track {
    fn from_vec(dir: Vec3, eqeq_rad: f64, site: &Site) -> Track {
        // The declination's sine and cosine straight from the vector (z / r and hypot(x, y) / r): what
        // sin and cos of its arctangent give, to rounding, without three library calls.
        let rho = (dir[0] * dir[0] + dir[1] * dir[1]).sqrt();
        let r = (rho * rho + dir[2] * dir[2]).sqrt();
        Track {
            dir,
            ra_rad: crate::astro::frames::wrap_to(dir[1].atan2(dir[0]), TAU),
            eqeq_rad,
            lon_rad: site.observer.lon_rad,
            sc_dec: (dir[2] / r, rho / r),
            sc_lat: site.observer.sin_cos_lat(),
        }
    }

    pub(crate) fn new(icrs: &Vec3, t_ref: f64, site: &Site, tables: &SkyTables) -> Track {
        let dir = tables.apparent_vec(icrs, t_ref);
        Track::from_vec(dir, tables.eqeq_rad(t_ref), site)
    }

    /// [`Track::new`] at an instant already looked up (its frame and the Earth's velocity shared with the
    /// Sun and Moon of the same instant).
    fn at(
        icrs: &Vec3,
        at: &crate::astro::tables::SkyInstant<'_>,
        site: &Site,
        tables: &SkyTables,
    ) -> Track {
        Track::from_vec(tables.apparent_vec_at(icrs, at), at.eqeq_rad(), site)
    }

    /// The catalogue (ICRS) place as if it were the apparent one: within [`mean_place_error_deg`] of the
    /// apparent place, so it can reject a transit before the apparent place is computed.
    fn mean(icrs: &Vec3, site: &Site) -> Track {
        Track::from_vec(*icrs, 0.0, site)
    }

    /// Hour angle, rad -pi..pi (west +).
    fn ha_rad(&self, t: f64) -> f64 {
        wrap_pi(self.ha_unwrapped_rad(t))
    }

    /// Hour angle, rad, not wrapped (within -2 pi..4 pi): for its sine and cosine, which need no reduction.
    fn ha_unwrapped_rad(&self, t: f64) -> f64 {
        gmst_rad(t) + self.eqeq_rad + self.lon_rad - self.ra_rad
    }

    /// Altitude, deg.
    pub(crate) fn alt_deg(&self, t: f64) -> f64 {
        crate::astro::frames::alt_from_hadec_sc(self.ha_unwrapped_rad(t), self.sc_dec, self.sc_lat)
            .to_degrees()
    }

    /// The hour angle (unwrapped) at `t` from the one at `t_ref` by the sidereal rate: within a block, GMST's
    /// quadratic term and the day's equation of the equinoxes change it by < 1e-12 rad, below the rounding of
    /// the sidereal time itself (5e-10 deg at 3.5e6 deg since J2000). For altitudes that are printed, not for
    /// the edges of usable runs (which take [`Track::ha_rad`]).
    fn ha_from(&self, (t_ref, ha_ref): (f64, f64), t: f64) -> f64 {
        ha_ref + sidereal_turn_rad(t - t_ref)
    }

    /// (altitude deg, its sine) at hour angle `ha_rad`.
    fn alt_sin_deg_ha(&self, ha_rad: f64) -> (f64, f64) {
        let (alt, sin_alt) =
            crate::astro::frames::alt_sin_from_hadec_sc(ha_rad, self.sc_dec, self.sc_lat);
        (alt.to_degrees(), sin_alt)
    }

    /// (altitude deg, azimuth deg, sine of the altitude) at hour angle `ha_rad`.
    fn alt_az_sin_deg_ha(&self, ha_rad: f64) -> (f64, f64, f64) {
        let (alt, az, sin_alt) =
            crate::astro::frames::alt_az_sin_from_hadec_sc(ha_rad, self.sc_dec, self.sc_lat);
        (alt.to_degrees(), az.to_degrees(), sin_alt)
    }

    /// (altitude deg, azimuth deg).
    pub(crate) fn alt_az_deg(&self, t: f64) -> (f64, f64) {
        let (alt, az) = alt_az_from_hadec_sc(self.ha_unwrapped_rad(t), self.sc_dec, self.sc_lat);
        (alt.to_degrees(), az.to_degrees())
    }

    /// The first upper meridian crossing within [start, end], UTC JD: the first of
    /// [`Track::culminations`]' upper crossings, without building the lists.
    pub(crate) fn first_upper_culmination(&self, start: f64, end: f64) -> Option<f64> {
        let day = 1.0 / GMST_RATE_PER_UT1_DAY;
        let t0 = start - self.ha_rad(start) / TAU * day;
        let mut k = -1.0;
        while t0 + k * day <= end + day {
            let t = t0 + k * day;
            if t >= start && t <= end {
                return Some(t);
            }
            k += 1.0;
        }
        None
    }

    /// Upper and lower meridian crossings within [start, end], UTC JD: (upper, lower).
    pub(crate) fn culminations(&self, start: f64, end: f64) -> (Vec<f64>, Vec<f64>) {
        let day = 1.0 / GMST_RATE_PER_UT1_DAY;
        let t0 = start - self.ha_rad(start) / TAU * day;
        let mut upper = Vec::new();
        let mut lower = Vec::new();
        let mut k = -1.0;
        while t0 + k * day <= end + day {
            for (list, off) in [(&mut upper, 0.0), (&mut lower, 0.5)] {
                let t = t0 + (k + off) * day;
                if t >= start && t <= end {
                    list.push(t);
                }
            }
            k += 1.0;
        }
        (upper, lower)
    }
}

/// The parts of `block` outside the sorted, disjoint `list`.
fn complement_within(list: &[Interval], block: &Interval) -> Vec<Interval> {
    let mut out = Vec::new();
    let mut from = block.start;
    for iv in list {
        if iv.start > from {
            out.push(Interval {
                start: from,
                end: iv.start.min(block.end),
            });
        }
        from = from.max(iv.end);
    }
    if from < block.end {
        out.push(Interval {
            start: from,
            end: block.end,
        });
    }
    out
}

/// A bound on the angle between a target's catalogue (ICRS) direction taken at `first_jd` and its apparent
/// place of date at any time up to `last_jd`, deg; the altitude computed from one differs from the other's by
/// at most this. Precession turns the sky by 50.3"/yr about the ecliptic pole (Lieske et al. 1977; 52"/yr
/// taken) since J2000, plus up to 20" of nutation, 20.5" of annual aberration and the equation of the equinoxes
/// (folded into the hour angle, up to 1.2"), the proper motion `pm_mas_per_yr` (total) over the span, and 36"
/// for safety. Common practice, no source for the rounding.
fn mean_place_error_deg(first_jd: f64, last_jd: f64, pm_mas_per_yr: f64) -> f64 {
    let years_since_j2000 = (first_jd - 2_451_545.0)
        .abs()
        .max((last_jd - 2_451_545.0).abs())
        / 365.25;
    let span_years = (last_jd - first_jd).abs() / 365.25;
    (52.0 * years_since_j2000 + 20.0 + 20.5 + 1.2 + pm_mas_per_yr / 1000.0 * span_years + 36.0)
        / 3600.0
}

/// The hour angle a fixed place gains in `dt_days` of UT1, rad (the mean sidereal rate): one expression for
/// every caller, so that the first look's per-chunk and per-transit tests round alike.
fn sidereal_turn_rad(dt_days: f64) -> f64 {
    TAU * GMST_RATE_PER_UT1_DAY * dt_days
}

/// A target's altitude limit at a site as an hour-angle limit: above `min_alt_deg` when |H| <= H0 with
/// cos H0 = (sin h - sin phi sin dec) / (cos phi cos dec) (Meeus 1998 eq. 15.1 for any altitude h), the hour
/// angle H advancing at the sidereal rate. Computed once, it answers for any stretch of time without
/// trigonometry.
#[derive(Clone, Copy)]
struct AltLimit {
    /// cos H0; <= -1 when the target never goes below the limit, >= 1 when it never reaches it.
    cos_h0: f64,
    /// H0, rad (0 when `cos_h0` is outside -1..1).
    h0_rad: f64,
}

impl AltLimit {
    fn new(track: &Track, min_alt_deg: f64) -> AltLimit {
        AltLimit::from_sin(track, min_alt_deg.to_radians().sin())
    }

    /// [`AltLimit::new`] with the sine of the altitude limit given (the same for every transit at a site).
    fn from_sin(track: &Track, sh: f64) -> AltLimit {
        let (sl, cl) = track.sc_lat;
        let (sd, cd) = track.sc_dec;
        let denom = cl * cd;
        let cos_h0 = if denom.abs() < 1e-12 {
            // At a pole, or a target at a celestial pole: the altitude does not change.
            if sl * sd >= sh {
                -2.0
            } else {
                2.0
            }
        } else {
            (sh - sl * sd) / denom
        };
        let h0_rad = if cos_h0.abs() < 1.0 {
            cos_h0.acos()
        } else {
            0.0
        };
        AltLimit { cos_h0, h0_rad }
    }

    /// The hour-angle runs [2 pi k - H0, 2 pi k + H0] met by the hour angles [ha_a, ha_b], clipped to them:
    /// called with each (start, end) pair in order.
    fn runs(&self, ha_a: f64, ha_b: f64, mut each: impl FnMut(f64, f64)) {
        let h0 = self.h0_rad;
        // floor and ceil (as -floor(-x)) by truncation: no library calls in this per-transit test.
        let k0 = floor_fast((ha_a - h0) / TAU) as i64 - 1;
        let k1 = -floor_fast(-(ha_b + h0) / TAU) as i64 + 1;
        for k in k0..=k1 {
            let a = (TAU * k as f64 - h0).max(ha_a);
            let b = (TAU * k as f64 + h0).min(ha_b);
            if b > a {
                each(a, b);
            }
        }
    }

    /// Whether the target is at or above the limit at some time in `w` (what [`alt_intervals`] being
    /// non-empty says, without building the list).
    fn met_within(&self, track: &Track, w: &Interval) -> bool {
        let ha_a = track.ha_rad(w.start);
        self.met_between(ha_a, ha_a + sidereal_turn_rad(w.end - w.start))
    }

    /// Whether the hour angles [ha_a, ha_b] (rad, any multiple of 2 pi) meet the limit.
    fn met_between(&self, ha_a: f64, ha_b: f64) -> bool {
        if self.cos_h0 <= -1.0 {
            return true;
        }
        if self.cos_h0 >= 1.0 {
            return false;
        }
        // The runs are centred on multiples of 2 pi. Shifted so that the span starts in [-pi, pi), it can meet
        // the run at 0 or, only past it, the run at 2 pi (the one at -2 pi ends before -pi): what `runs` finds,
        // without its loop (this is asked of every transit in the first look).
        let shift = TAU * floor_fast((ha_a + std::f64::consts::PI) / TAU);
        let (a, b) = (ha_a - shift, ha_b - shift);
        let h0 = self.h0_rad;
        a < b && ((a < h0 && b > -h0) || b > TAU - h0)
    }
}

/// The sub-intervals of `block` where the target is at or above `min_alt_deg`, solved exactly for the frozen
/// apparent place (see [`AltLimit`]).
fn alt_intervals(track: &Track, limit: AltLimit, block: &Interval) -> Vec<Interval> {
    // A block shorter than a sidereal day meets at most two runs.
    let mut out = Vec::with_capacity(2);
    alt_runs(track, limit, block, |iv| out.push(iv));
    out
}

/// Each sub-interval of `block` where the target is at or above the limit, in time order (what
/// [`alt_intervals`] lists).
fn alt_runs(track: &Track, limit: AltLimit, block: &Interval, mut each: impl FnMut(Interval)) {
    if limit.cos_h0 <= -1.0 {
        each(*block);
        return;
    }
    if limit.cos_h0 >= 1.0 {
        return;
    }
    let omega = TAU * GMST_RATE_PER_UT1_DAY;
    let ha_a = track.ha_rad(block.start);
    let ha_b = ha_a + omega * (block.end - block.start);
    limit.runs(ha_a, ha_b, |a, b| {
        each(Interval {
            start: block.start + (a - ha_a) / omega,
            end: block.start + (b - ha_a) / omega,
        });
    });
}

/// Intersect two sorted lists of disjoint intervals.
fn intersect_lists(a: &[Interval], b: &[Interval]) -> Vec<Interval> {
    // At most one piece per step of the merge: sized once, no regrowth.
    let mut out = Vec::with_capacity((a.len() + b.len()).saturating_sub(1));
    let (mut i, mut j) = (0, 0);
    while i < a.len() && j < b.len() {
        if let Some(x) = a[i].intersect(&b[j]) {
            out.push(x);
        }
        if a[i].end < b[j].end {
            i += 1;
        } else {
            j += 1;
        }
    }
    out
}

fn covers(list: &[Interval], whole: &Interval) -> bool {
    list.len() == 1
        && list[0].start <= whole.start + EDGE_SLACK_DAYS
        && list[0].end >= whole.end - EDGE_SLACK_DAYS
}

/// The usable parts of `block` for a target at a site on a night, and the reasons for any cut.
///
/// Given: the target, site and night; `block` (UTC JD) inside or around that night (tables are built for it).
/// Returns sorted disjoint intervals (edges to 0.5 s) where every constraint holds, and the constraints that
/// cut something. This is the root-finding path that [`usable_minutes_oracle`] checks.
pub fn usable_intervals(
    site: &Site,
    target: &Target,
    night: &Night,
    block: &Interval,
) -> (Vec<Interval>, ReasonSet) {
    let mid = 0.5 * (block.start + block.end);
    let tables = SkyTables::new(block.start - 1.0, block.end + 1.0);
    let track = Track::new(&target.icrs_at(mid), mid, site, &tables);
    let limit = AltLimit::new(&track, site.min_alt_deg);
    let (usable, reasons) = usable_intervals_on_track(&track, (site, limit), night, block, &tables);
    (usable.as_slice().to_vec(), reasons)
}

/// Usable intervals: up to two held in place (what a site with only darkness and an altitude limit gives a
/// block shorter than a day), more in a list.
enum Usable {
    /// The first `.1` intervals of the array.
    Inline([Interval; 2], usize),
    /// Any number.
    Listed(Vec<Interval>),
}

impl Usable {
    fn as_slice(&self) -> &[Interval] {
        match self {
            Usable::Inline(a, n) => &a[..*n],
            Usable::Listed(v) => v,
        }
    }
}

/// [`usable_intervals_on_track`] for a site whose only limits are darkness and its lowest altitude, and a block
/// shorter than 0.9 day (so its hour angles meet at most two altitude runs): the same intervals, intersections
/// and reasons, without building lists. `None` for any other site or block.
fn usable_intervals_simple(
    track: &Track,
    (site, limit): (&Site, AltLimit),
    night: &Night,
    block: &Interval,
) -> Option<(Usable, ReasonSet)> {
    let simple = site.max_alt_deg.is_none()
        && site.horizon.is_empty()
        && site.hour_angle_limits_h.is_none()
        && site.min_moon_sep_deg.is_none()
        && block.end - block.start < 0.9;
    if !simple {
        return None;
    }
    let block = *block;
    let empty = Interval {
        start: 0.0,
        end: 0.0,
    };
    let mut reasons = ReasonSet::new();
    let dark = night.dark.and_then(|d| d.intersect(&block));
    if !covers(dark.as_slice(), &block) {
        reasons.insert(Reason::Daylight);
    }
    let mut alt = [empty; 2];
    let mut n_alt = 0;
    alt_runs(track, limit, &block, |iv| {
        if n_alt < 2 {
            alt[n_alt] = iv;
        }
        n_alt += 1;
    });
    if n_alt > 2 {
        return None;
    }
    if !covers(&alt[..n_alt], &block) {
        reasons.insert(Reason::BelowAltitudeLimit);
    }
    // The dark part (at most one interval) cut by the runs, as `intersect_lists` does it.
    let mut usable = [empty; 2];
    let mut n = 0;
    if let Some(d) = dark {
        for a in &alt[..n_alt] {
            if let Some(x) = d.intersect(a) {
                usable[n] = x;
                n += 1;
            }
            if d.end < a.end {
                break;
            }
        }
    }
    Some((Usable::Inline(usable, n), reasons))
}

/// [`usable_intervals`] for a frozen track, with `limit` the site's lowest altitude as seen along it.
fn usable_intervals_on_track(
    track: &Track,
    (site, limit): (&Site, AltLimit),
    night: &Night,
    block: &Interval,
    tables: &SkyTables,
) -> (Usable, ReasonSet) {
    match usable_intervals_simple(track, (site, limit), night, block) {
        Some(simple) => simple,
        None => {
            let (list, reasons) =
                usable_intervals_listed(track, (site, limit), night, block, tables);
            (Usable::Listed(list), reasons)
        }
    }
}

/// [`usable_intervals_on_track`] for any site and block, building a list per constraint.
fn usable_intervals_listed(
    track: &Track,
    (site, limit): (&Site, AltLimit),
    night: &Night,
    block: &Interval,
    tables: &SkyTables,
) -> (Vec<Interval>, ReasonSet) {
    let block = *block;
    let step = DEFAULT_STEP_DAYS;
    let mut reasons = ReasonSet::new();
    // The dark part of the block is the first usable list: the block cut to it, which is itself.
    let mut usable = match night.dark.and_then(|d| d.intersect(&block)) {
        Some(d) => vec![d],
        None => Vec::new(),
    };
    if !covers(&usable, &block) {
        reasons.insert(Reason::Daylight);
    }
    let mut apply = |list: Vec<Interval>, reason: Reason, usable: &mut Vec<Interval>| {
        if !covers(&list, &block) {
            reasons.insert(reason);
        }
        *usable = intersect_lists(usable, &list);
    };
    let alt_ok = alt_intervals(track, limit, &block);
    apply(alt_ok, Reason::BelowAltitudeLimit, &mut usable);
    if let Some(max_alt) = site.max_alt_deg {
        let too_high = alt_intervals(track, AltLimit::new(track, max_alt), &block);
        apply(
            complement_within(&too_high, &block),
            Reason::AboveAltitudeLimit,
            &mut usable,
        );
    }
    if !site.horizon.is_empty() {
        let (upper, lower) = track.culminations(block.start, block.end);
        let extrema: Vec<f64> = upper.iter().chain(lower.iter()).copied().collect();
        let f = |t: f64| {
            let (alt, az) = track.alt_az_deg(t);
            alt - site.horizon.min_alt_deg(az)
        };
        let ok = intervals_where_nonnegative(&f, block.start, block.end, step / 2.0, &extrema);
        apply(ok, Reason::BelowHorizonProfile, &mut usable);
    }
    if let Some((east_h, west_h)) = site.hour_angle_limits_h {
        let f = |t: f64| {
            let ha_h = track.ha_rad(t).to_degrees() / 15.0;
            (ha_h - east_h).min(west_h - ha_h)
        };
        // The hour angle wraps at +-12 h (lower culmination): sample there too.
        let lower = track.culminations(block.start, block.end).1;
        let ok = intervals_where_nonnegative(&f, block.start, block.end, step, &lower);
        apply(ok, Reason::HourAngleLimit, &mut usable);
    }
    if let Some(min_sep) = site.min_moon_sep_deg {
        let f = |t: f64| {
            let m = tables.moon_topo(t, &site.observer).place;
            let moon = crate::astro::frames::unit_from_radec(m.ra_rad, m.dec_rad);
            crate::astro::frames::angle_between_rad(&track.dir, &moon).to_degrees() - min_sep
        };
        let ok = intervals_where_nonnegative(&f, block.start, block.end, step * 3.0, &[]);
        apply(ok, Reason::MoonTooClose, &mut usable);
    }
    (usable, reasons)
}

/// Evaluate one transit at one site. Pure: everything it needs is passed in.
/// One target at one site, with the options and sky tables of the run: what judging its transits needs.
struct Pairing<'a> {
    target_index: usize,
    target: &'a Target,
    site_index: usize,
    telescope_index: usize,
    /// The site as its telescope sees it (that telescope's limits and photometry).
    site: &'a Site,
    opts: &'a PlanOptions,
    tables: &'a SkyTables,
    /// The target's catalogue direction when it has no proper motion (the same at every instant, so computed
    /// once); `None` when it moves.
    icrs_fixed: Option<Vec3>,
    /// The sine of the site's lowest usable altitude (for [`AltLimit::from_sin`]).
    sin_min_alt: f64,
    /// Whether the noise can be computed: the site has a photometric set-up and the target a magnitude in its
    /// band (V when the targets file does not say).
    noise_band_ok: bool,
    /// The station's photometric set-up, prepared once for all its events (None without one).
    noise: Option<&'a crate::engine::noise::NoiseSetup>,
    /// The sidereal phase the chunk's dark time sweeps ([`dark_phase_arc`]); `None` when its nights have no
    /// dark time.
    dark_arc: Option<(f64, f64)>,
}

/// See [`Pairing::noise_band_ok`].
fn noise_band_ok(site: &Site, target: &Target) -> bool {
    let named = |b: &str| crate::engine::noise::band(b).map(|b| b.name);
    match (&site.photometry, target.mag) {
        (Some(ph), Some(_)) => named(target.mag_band.as_deref().unwrap_or("V")) == named(&ph.band),
        _ => false,
    }
}

/// One predicted transit: epoch, mid-transit at the site (UTC JD) and its timing sigma (days).
#[derive(Clone, Copy)]
struct Predicted {
    epoch: i64,
    mid_utc: f64,
    sigma_days: f64,
}

/// The usable run overlapping [ingress, egress] most (ties: the earlier), with the coverage it gives.
fn best_run(usable: &[Interval], ingress: f64, egress: f64) -> (f64, Option<Interval>) {
    let transit = Interval {
        start: ingress,
        end: egress,
    };
    let best = usable
        .iter()
        .map(|u| {
            (
                u.intersect(&transit).map(|x| x.len_days()).unwrap_or(0.0),
                *u,
            )
        })
        .filter(|(o, _)| *o > 0.0)
        .fold(None::<(f64, Interval)>, |acc, cur| match acc {
            Some(a) if a.0 >= cur.0 => Some(a),
            _ => Some(cur),
        });
    match best {
        Some((o, run)) => ((o / (egress - ingress)).clamp(0.0, 1.0), Some(run)),
        None => (0.0, None),
    }
}

/// The verdict of a usable run and its baselines before and after, minutes: a contact is seen when the run
/// holds it with its timing margin on both sides.
fn judge_run(
    run: Option<Interval>,
    ingress: f64,
    egress: f64,
    margin: f64,
    opts: &PlanOptions,
) -> (Verdict, f64, f64) {
    let Some(run) = run else {
        return (Verdict::NotObservable, 0.0, 0.0);
    };
    let lo = ingress - margin;
    let hi = egress + margin;
    let ingress_seen =
        run.start <= lo + EDGE_SLACK_DAYS && run.end >= ingress + margin - EDGE_SLACK_DAYS;
    let egress_seen =
        run.end >= hi - EDGE_SLACK_DAYS && run.start <= egress - margin + EDGE_SLACK_DAYS;
    let before = ((lo - run.start) * 1440.0).max(0.0);
    let after = ((run.end - hi) * 1440.0).max(0.0);
    let full_base = before >= opts.baseline_before_min - 1.0 / 60.0
        && after >= opts.baseline_after_min - 1.0 / 60.0;
    let v = match (ingress_seen, egress_seen) {
        (true, true) if full_base => Verdict::Whole,
        (true, true) => Verdict::WholeShortBaseline,
        (true, false) => Verdict::IngressOnly,
        (false, true) => Verdict::EgressOnly,
        (false, false) => Verdict::MiddleOnly,
    };
    (v, before, after)
}

/// Whether a judged event meets the run's criteria; adds the reasons when it does not.
fn meets_criteria(
    p: &Pairing<'_>,
    verdict: Verdict,
    coverage: f64,
    lost: bool,
    reasons: &mut ReasonSet,
) -> bool {
    if lost {
        reasons.insert(Reason::EphemerisLost);
    }
    let mut observable = verdict != Verdict::NotObservable && !lost;
    if observable && coverage < p.opts.min_coverage {
        reasons.insert(Reason::CoverageBelowMinimum);
        observable = false;
    }
    let in_transit_min = coverage * p.target.t14_hours * 60.0;
    let needed_min = p.opts.min_in_transit_min.min(p.target.t14_hours * 60.0);
    if observable && in_transit_min < needed_min - EDGE_SLACK_DAYS * 1440.0 {
        reasons.insert(Reason::InTransitBelowMinimum);
        observable = false;
    }
    observable
}

/// Quick rejection when unobservable events are not listed: no in-transit dark time with the target above the
/// altitude limit means no event to list, whatever the other constraints say.
fn cannot_be_listed(
    p: &Pairing<'_>,
    (track, limit): (&Track, AltLimit),
    night: &Night,
    ingress: f64,
    egress: f64,
) -> bool {
    if p.opts.include_unobservable {
        return false;
    }
    let transit_dark = night.dark.and_then(|d| {
        d.intersect(&Interval {
            start: ingress,
            end: egress,
        })
    });
    !matches!(transit_dark, Some(w) if limit.met_within(track, &w))
}

/// The expected noise of an event (None without a photometric set-up at the site or a magnitude for the target):
/// at the airmass of mid-transit, with the usable in-transit time (coverage x T14) and baselines (minutes).
/// `at` is the instant and, when already known there, the target's altitude (deg) and airmass.
fn expected_noise(
    p: &Pairing<'_>,
    track: &Track,
    ((jd_utc, known), moon): ((f64, Option<(f64, f64)>), crate::engine::noise::MoonSky),
    coverage: f64,
    baseline_min: f64,
) -> Option<crate::engine::noise::EventNoise> {
    if !p.noise_band_ok {
        return None;
    }
    let setup = p.noise?;
    let mag = p.target.mag?;
    let (alt_deg, airmass) = known.unwrap_or_else(|| {
        let alt_deg = track.alt_deg(jd_utc);
        (alt_deg, airmass_kasten_young(alt_deg))
    });
    if !airmass.is_finite() {
        return None;
    }
    Some(setup.event_noise(
        (mag, p.target.depth_ppt),
        &crate::engine::noise::EventSky {
            airmass,
            target_alt_deg: alt_deg,
            moon: Some(moon),
        },
        (coverage * p.target.t14_hours * 3600.0, baseline_min * 60.0),
    ))
}

/// The planned block: [ingress - margin - baseline before, egress + margin + baseline after]; a window (RV
/// extreme, phase window) has no out-of-event baseline.
fn planned_block(p: &Pairing<'_>, ingress: f64, egress: f64, margin: f64) -> Interval {
    let (before, after) = if p.target.kind.is_window() {
        (0.0, 0.0)
    } else {
        (p.opts.baseline_before_min, p.opts.baseline_after_min)
    };
    Interval {
        start: ingress - margin - before / 1440.0,
        end: egress + margin + after / 1440.0,
    }
}

/// A transit's verdict and baselines as the event's kind reads them: a window is seen whole (with its margins)
/// or in part, and has no baseline.
fn for_kind(p: &Pairing<'_>, (verdict, before, after): (Verdict, f64, f64)) -> (Verdict, f64, f64) {
    if !p.target.kind.is_window() {
        return (verdict, before, after);
    }
    let v = match verdict {
        Verdict::Whole | Verdict::WholeShortBaseline => Verdict::WholeWindow,
        Verdict::NotObservable => Verdict::NotObservable,
        _ => Verdict::PartWindow,
    };
    (v, 0.0, 0.0)
}

/// Judge one transit at one site. Pure: everything it needs is passed in.
fn evaluate(p: &Pairing<'_>, t: Predicted, night: &Night) -> Option<Event> {
    let (site, opts, tables) = (p.site, p.opts, p.tables);
    let half = p.target.half_duration_days();
    let (ingress, egress) = (t.mid_utc - half, t.mid_utc + half);
    let margin = opts.sigma_k * t.sigma_days;
    let block = planned_block(p, ingress, egress, margin);
    let icrs = p.icrs_fixed.unwrap_or_else(|| p.target.icrs_at(t.mid_utc));
    // The mid-time's frame and Earth, shared by the target's place and the Sun and Moon below.
    let at_mid = tables.instant(t.mid_utc);
    let track = Track::at(&icrs, &at_mid, site, tables);
    let limit = AltLimit::from_sin(&track, p.sin_min_alt);
    if cannot_be_listed(p, (&track, limit), night, ingress, egress) {
        return None;
    }
    let (usable, mut reasons) =
        usable_intervals_on_track(&track, (site, limit), night, &block, tables);
    let lost = t.sigma_days > LOST_SIGMA_FRACTION_OF_PERIOD * p.target.ephemeris.period_days;
    let (coverage, run) = best_run(usable.as_slice(), ingress, egress);
    let (verdict, before_min, after_min) =
        for_kind(p, judge_run(run, ingress, egress, margin, opts));
    let mut observable = meets_criteria(p, verdict, coverage, lost, &mut reasons);
    if !observable && !opts.include_unobservable {
        return None;
    }
    let sky = tables.sun_moon_at(&at_mid, &site.observer);
    let moon_sep =
        crate::astro::frames::angle_between_rad(&track.dir, &sky.moon_topo_km).to_degrees();
    // The expected noise, with the Moon's light at mid-transit (only for events that can be listed).
    let moon_sky = crate::engine::noise::MoonSky {
        illum: sky.moon_illum,
        sep_deg: moon_sep,
        alt_deg: sky.moon_alt_deg,
    };
    // A window's star is judged where it is observed: the middle of the usable run (a long window's centre may
    // be in daylight or below the horizon).
    // The mid-transit altitude and airmass, listed with the event, serve the noise too.
    // The printed altitudes from the mid-time's hour angle (one sidereal time for the five instants).
    let mid_ha = (t.mid_utc, track.ha_unwrapped_rad(t.mid_utc));
    let (alt_mid, az_mid, sin_alt_mid) = track.alt_az_sin_deg_ha(mid_ha.1);
    let airmass_mid = airmass_kasten_young_sin(sin_alt_mid, alt_mid);
    let noise_at = match run {
        Some(r) if p.target.kind.is_window() => (0.5 * (r.start + r.end), None),
        _ => (t.mid_utc, Some((alt_mid, airmass_mid))),
    };
    let noise = expected_noise(
        p,
        &track,
        (noise_at, moon_sky),
        coverage,
        before_min + after_min,
    );
    if observable
        && opts.min_snr > 0.0
        && noise.and_then(|n| n.snr).is_some_and(|x| x < opts.min_snr)
    {
        reasons.insert(Reason::SnrBelowMinimum);
        observable = false;
    }
    if !observable && !opts.include_unobservable {
        // Not listed: skip the geometry.
        return None;
    }

    // What can be acted on: the block clipped to the usable run, its edges moved inward to whole minutes so
    // that no printed start or end (HH:MM, calendar seconds, countdown) lies outside what is possible.
    let acted = inward_to_minutes(run.unwrap_or(block));
    let (alt_in, sin_alt_in) = track.alt_sin_deg_ha(track.ha_from(mid_ha, ingress));
    let (alt_eg, sin_alt_eg) = track.alt_sin_deg_ha(track.ha_from(mid_ha, egress));
    let (sun_alt, moon_alt, moon_illum) = (sky.sun_alt_deg, sky.moon_alt_deg, sky.moon_illum);
    Some(Event {
        target_index: p.target_index,
        site_index: p.site_index,
        telescope_index: p.telescope_index,
        epoch: t.epoch,
        verdict,
        observable,
        coverage,
        mid_utc: t.mid_utc,
        ingress_utc: ingress,
        egress_utc: egress,
        block_start_utc: acted.start,
        block_end_utc: acted.end,
        full_block_start_utc: block.start,
        full_block_end_utc: block.end,
        usable: run,
        sigma_min: t.sigma_days * 1440.0,
        baseline_before_min: before_min,
        baseline_after_min: after_min,
        night_of: night.night_of,
        night_dark: night.dark,
        alt_ingress_deg: alt_in,
        alt_mid_deg: alt_mid,
        alt_egress_deg: alt_eg,
        alt_block_start_deg: track.alt_sin_deg_ha(track.ha_from(mid_ha, acted.start)).0,
        alt_block_end_deg: track.alt_sin_deg_ha(track.ha_from(mid_ha, acted.end)).0,
        airmass_ingress: airmass_kasten_young_sin(sin_alt_in, alt_in),
        airmass_mid,
        airmass_egress: airmass_kasten_young_sin(sin_alt_eg, alt_eg),
        az_mid_deg: az_mid,
        sun_alt_mid_deg: sun_alt,
        moon_alt_mid_deg: moon_alt,
        moon_sep_deg: moon_sep,
        moon_illum,
        meridian_utc: track.first_upper_culmination(block.start, block.end),
        reasons,
        noise,
    })
}

/// Plan every transit of `targets` at `sites` over the nights in `opts`.
///
/// Returns, per site and telescope, the nights and the events (observable ones; all of them with
/// `opts.include_unobservable`), sorted by block start, plus the targets whose ephemeris is lost.
pub fn plan(sites: &[Site], targets: &[Target], opts: &PlanOptions) -> Plan {
    let planner = Planner::new(sites, targets, opts);
    let mut site_plans = Vec::new();
    let mut lost = std::collections::BTreeMap::new();
    for k in 0..planner.station_count() {
        let (sp, site_lost) = planner.station_plan(k, opts.first_night, opts.last_night);
        for (ti, sigma) in site_lost {
            lost.entry(ti).or_insert(sigma);
        }
        site_plans.push(sp);
    }
    Plan {
        sites: site_plans,
        lost: lost
            .into_iter()
            .map(|(target_index, sigma_min)| LostEphemeris {
                target_index,
                sigma_min,
            })
            .collect(),
    }
}

/// A planning run's shared state: the inputs and one set of [`SkyTables`] covering every site's nights, so
/// the run can be done site by site and in chunks of nights (streaming output keeps memory bounded).
pub struct Planner<'a> {
    /// (site index, telescope index, the site as that telescope sees it), sites in order, then telescopes.
    stations: Vec<(usize, usize, Site)>,
    targets: &'a [Target],
    opts: &'a PlanOptions,
    tables: Option<SkyTables>,
    /// Per target: the geocentric UTC JDs of its mid-transits over the whole range, computed once for all sites.
    mids: Vec<MidTimes>,
    /// Per target: [`Target::icrs_fixed`], computed once for every chunk and site.
    fixed_places: Vec<Option<Vec3>>,
    /// Per site: its nights over the whole range with their dark intervals, computed once for all its telescopes
    /// and chunks (and for the JSON head's nights without darkness).
    nights: Vec<Vec<Night>>,
    /// Event lists kept from one telescope-chunk to the next: per target (where each target's events are
    /// collected), and whole chunks handed back by the caller ([`Planner::recycle`]). Memory the allocator
    /// would otherwise return to the system after every chunk and take back, page by page, zeroed, for the
    /// next (5% of the catalogue job's time went to those page faults).
    spare: std::sync::Mutex<Spare>,
}

/// See [`Planner`]'s `spare`.
#[derive(Default)]
struct Spare {
    per_target: Vec<Vec<Event>>,
    chunks: Vec<Vec<Event>>,
}

impl<'a> Planner<'a> {
    /// Prepare a run: computes the tables for the whole range of `opts`.
    pub fn new(sites: &'a [Site], targets: &'a [Target], opts: &'a PlanOptions) -> Planner<'a> {
        Planner::with_tables(sites, targets, opts, Planner::sky_tables(sites, opts))
    }

    /// The nights' span of a run: from the first night window's start to the last one's end over all sites
    /// (None without sites or nights).
    fn span(sites: &[Site], opts: &PlanOptions) -> Option<(f64, f64)> {
        sites
            .iter()
            .filter_map(|s| {
                let w = night_windows(s, opts.first_night, opts.last_night);
                Some((w.first()?.1.start, w.last()?.1.end))
            })
            .fold(None, |acc: Option<(f64, f64)>, (a, b)| {
                Some(acc.map_or((a, b), |(x, y)| (x.min(a), y.max(b))))
            })
    }

    /// The sky tables a run of `sites` and `opts` plans with: they need no targets, so a caller can build them
    /// while the targets are read (then [`Planner::with_tables`]).
    pub fn sky_tables(sites: &[Site], opts: &PlanOptions) -> Option<SkyTables> {
        Planner::span(sites, opts).map(|(a, b)| SkyTables::new(a - 1.0, b + 1.0))
    }

    /// [`Planner::new`] with the run's [`Planner::sky_tables`] already built.
    pub fn with_tables(
        sites: &'a [Site],
        targets: &'a [Target],
        opts: &'a PlanOptions,
        tables: Option<SkyTables>,
    ) -> Planner<'a> {
        let span = Planner::span(sites, opts);
        let mids = match (&tables, span) {
            (Some(tables), Some((a, b))) => targets
                .par_iter()
                .map(|t| {
                    let icrs = t.icrs_at(0.5 * (a + b));
                    let eph = &t.ephemeris;
                    // Light time and TT-UTC are < 0.01 d: widen the range by 0.02 d in the target's system.
                    // One light-time curve per target converts all its mid-times (a fifth of the work of
                    // the general conversion for BJD_TDB).
                    let curve = tables.earth.light_time_curve(&icrs);
                    let epochs = eph.epochs_between(a - 0.02, b + 0.02);
                    MidTimes {
                        first_epoch: *epochs.start(),
                        utc: epochs
                            .map(|n| curve.geocentric_utc_of(eph.system, eph.mid_time(n)).0)
                            .collect(),
                    }
                })
                .collect(),
            _ => Vec::new(),
        };
        let nights = sites
            .iter()
            .map(|s| match &tables {
                Some(tables) => nights_with(
                    s,
                    &night_windows(s, opts.first_night, opts.last_night),
                    tables,
                ),
                None => Vec::new(),
            })
            .collect();
        let stations = sites
            .iter()
            .enumerate()
            .flat_map(|(si, s)| {
                s.telescopes
                    .iter()
                    .enumerate()
                    .map(move |(ti, t)| (si, ti, s.for_telescope(t)))
            })
            .collect();
        Planner {
            stations,
            targets,
            opts,
            tables,
            mids,
            fixed_places: targets.iter().map(Target::icrs_fixed).collect(),
            nights,
            spare: std::sync::Mutex::new(Spare::default()),
        }
    }

    /// Hand back the events of a [`SitePlan`] once they are written: their memory serves a later chunk.
    pub fn recycle(&self, mut events: Vec<Event>) {
        events.clear();
        if let Ok(mut spare) = self.spare.lock() {
            // The chunks in flight (one planned, one being written) and one more.
            if spare.chunks.len() < 3 {
                spare.chunks.push(events);
            }
        }
    }

    /// The nights of site `site_index` over the run's whole range, with their dark intervals (the nights every
    /// telescope-chunk of that site is planned on).
    pub fn site_nights(&self, site_index: usize) -> &[Night] {
        self.nights.get(site_index).map_or(&[], Vec::as_slice)
    }

    /// The nights of site `si` (`site`) from `first` to `last`: the run's, when the dates are inside the run
    /// (the usual case), else computed.
    fn nights_between(
        &self,
        (si, site): (usize, &Site),
        first: NaiveDate,
        last: NaiveDate,
    ) -> Vec<Night> {
        let in_run = self.opts.first_night <= first && last <= self.opts.last_night;
        match &self.tables {
            Some(_) if in_run => {
                let skip = (first - self.opts.first_night).num_days() as usize;
                let take = ((last - first).num_days() + 1).max(0) as usize;
                self.site_nights(si)
                    .iter()
                    .skip(skip)
                    .take(take)
                    .cloned()
                    .collect()
            }
            Some(tables) => nights_with(site, &night_windows(site, first, last), tables),
            None => Vec::new(),
        }
    }

    /// How many (site, telescope) pairs the run plans for: every telescope of every site.
    pub fn station_count(&self) -> usize {
        self.stations.len()
    }

    /// The plan of station `k` (the k-th telescope in site order, see [`Planner::station_count`]) for the
    /// nights `first..=last` (within the run's range), and the targets whose ephemeris is lost there, with
    /// their sigma in minutes.
    pub fn station_plan(
        &self,
        k: usize,
        first: NaiveDate,
        last: NaiveDate,
    ) -> (SitePlan, Vec<(usize, f64)>) {
        let (si, tel, site) = (self.stations[k].0, self.stations[k].1, &self.stations[k].2);
        let nights = self.nights_between((si, site), first, last);
        let (Some(tables), false) = (&self.tables, nights.is_empty()) else {
            return (
                SitePlan {
                    site_index: si,
                    telescope_index: tel,
                    nights: Vec::new(),
                    events: Vec::new(),
                },
                Vec::new(),
            );
        };
        let range = Interval {
            start: nights[0].window.start,
            end: nights[nights.len() - 1].window.end,
        };
        // The per-target lists and a chunk's list from earlier chunks (planning is one chunk at a time: the
        // lock is only ever waited on by the writer handing back a chunk).
        let (mut per_target, mut events) = match self.spare.lock() {
            Ok(mut spare) => (
                std::mem::take(&mut spare.per_target),
                spare.chunks.pop().unwrap_or_default(),
            ),
            Err(_) => (Vec::new(), Vec::new()),
        };
        per_target.resize_with(self.targets.len(), Vec::new);
        let noise = site
            .photometry
            .as_ref()
            .and_then(|ph| crate::engine::noise::NoiseSetup::new(ph, site.elevation_m));
        let sin_min_alt = site.min_alt_deg.to_radians().sin();
        let dark_arc = dark_phase_arc(&nights, range.start);
        let lost_per_target: Vec<Option<f64>> = self
            .targets
            .par_iter()
            .zip(per_target.par_iter_mut())
            .enumerate()
            .map(|(ti, (target, list))| {
                let pairing = Pairing {
                    target_index: ti,
                    target,
                    site_index: si,
                    telescope_index: tel,
                    site,
                    opts: self.opts,
                    tables,
                    icrs_fixed: self.fixed_places[ti],
                    sin_min_alt,
                    noise_band_ok: noise_band_ok(site, target),
                    noise: noise.as_ref(),
                    dark_arc,
                };
                list.clear();
                events_of_target(&pairing, &self.mids[ti], &nights, &range, list)
            })
            .collect();
        let lost: Vec<(usize, f64)> = lost_per_target
            .iter()
            .enumerate()
            .filter_map(|(ti, sigma)| sigma.map(|s| (ti, s)))
            .collect();
        // Sorted by (block start, target, epoch), which is unique, so the unstable sort is deterministic. The
        // small keys are sorted and the (368-byte) events copied once into place in parallel: moving them
        // through a sort, or one by one into a single list, cost more and ran partly serially.
        let mut keys: Vec<u128> = per_target
            .iter()
            .enumerate()
            .flat_map(|(ti, evs)| {
                evs.iter()
                    .enumerate()
                    .map(move |(pos, e)| order_key(e.block_start_utc, ti, pos))
            })
            .collect();
        keys.par_sort_unstable();
        events.clear();
        events.par_extend(keys.par_iter().map(|&key| {
            let (ti, pos) = key_place(key);
            per_target[ti][pos]
        }));
        release_empty(&mut per_target);
        if let Ok(mut spare) = self.spare.lock() {
            spare.per_target = per_target;
        }
        (
            SitePlan {
                site_index: si,
                telescope_index: tel,
                nights,
                events,
            },
            lost,
        )
    }
}

/// A target's mid-transits over a run, geocentric UTC JD, for the consecutive epochs from `first_epoch` (half
/// the memory of (epoch, time) pairs: 14 MB for the catalogue benchmark's 1.75 M transits).
#[derive(Debug, Default)]
struct MidTimes {
    first_epoch: i64,
    utc: Vec<f64>,
}

impl MidTimes {
    /// The first epoch and the mid-times within `range` (widened by 0.001 d each side), for a `period_days`
    /// period. The epochs are consecutive, so the first one in range is near (start - first mid) / P.
    fn within(&self, range: &Interval, period_days: f64) -> (i64, &[f64]) {
        let from = range.start - 0.001;
        let guess = self
            .utc
            .first()
            .map_or(0.0, |&t0| ((from - t0) / period_days).ceil().max(0.0));
        let first = partition_point_near(&self.utc, guess as usize, |&t| t < from);
        let in_range = &self.utc[first..];
        let to = range.end + 0.001;
        let count_guess = ((to - from) / period_days).max(0.0) as usize;
        let in_range = &in_range[..partition_point_near(in_range, count_guess, |&t| t < to)];
        (self.first_epoch + first as i64, in_range)
    }
}

/// The events of one target at one site over the nights, appended to `events`; returns, if its ephemeris is
/// lost in the range, the timing sigma (minutes) of its first transit in the range that is lost (in daylight or
/// not, so the figure does not depend on the filters below or on `include_unobservable`). Transits whose block misses the night's dark
/// time are dropped before any geometry unless the options ask for unobservable events.
fn events_of_target(
    p: &Pairing<'_>,
    mids: &MidTimes,
    nights: &[Night],
    range: &Interval,
    events: &mut Vec<Event>,
) -> Option<f64> {
    let (target, site, opts) = (p.target, p.site, p.opts);
    let icrs = p.icrs_fixed.unwrap_or_else(|| target.icrs_at(range.start));
    // The first look: the catalogue place, with the altitude limit loosened by the bound on its error, rejects
    // transits that stay low without the apparent place (see `mean_place_error_deg`).
    let mean = Track::mean(&icrs, site);
    let pm_mas_per_yr = target
        .pm_ra_cosdec_mas_per_yr
        .hypot(target.pm_dec_mas_per_yr);
    let loose = AltLimit::new(
        &mean,
        site.min_alt_deg - mean_place_error_deg(range.start, range.end, pm_mas_per_yr),
    );
    // The catalogue place's hour angle over the chunk as a straight line from its start: GMST's quadratic term
    // moves it by < 1e-8 deg over a year, far inside the 36" of safety in the loosened limit.
    let ha_start = mean.ha_rad(range.start);
    let ha_at = |t: f64| ha_start + sidereal_turn_rad(t - range.start);
    let eph = &target.ephemeris;
    let half = target.half_duration_days();
    let mut lost_sigma = None;
    let lost_limit_days = LOST_SIGMA_FRACTION_OF_PERIOD * eph.period_days;
    let (first_epoch, in_range) = mids.within(range, eph.period_days);
    // The epochs of `in_range`, in order.
    let epochs = first_epoch..first_epoch + in_range.len() as i64;
    // The timing sigma is the square root of a quadratic in the epoch, so it peaks at an end of the range:
    // when neither end is lost, no transit in between is, and the per-transit check is skipped.
    let may_be_lost = !epochs.is_empty()
        && (eph.sigma_days(epochs.start) > lost_limit_days
            || eph.sigma_days(epochs.end - 1) > lost_limit_days);
    // Whether the catalogue place meets the loosened limit at any hour angle the chunk's dark time sweeps: the
    // first look below asks the same of each transit's part of one night's dark time, so where this fails,
    // every transit fails.
    let meets_in_dark = p
        .dark_arc
        .is_some_and(|(lo, hi)| loose.met_between(ha_start + lo, ha_start + hi));
    if !opts.include_unobservable && (loose.cos_h0 >= 1.0 || !meets_in_dark) {
        // The target never reaches even the loosened limit at this site (a third of the catalogue's
        // target-site pairs, for a limit of 30 deg), or only while the chunk's nights are light: the first
        // look below would reject every transit. Only the lost ephemeris is still to say.
        if may_be_lost {
            lost_sigma = epochs
                .map(|n| eph.sigma_days(n))
                .find(|&sigma| sigma > lost_limit_days)
                .map(|sigma| sigma * 1440.0);
        }
        return lost_sigma;
    }
    for (i, &geo) in in_range.iter().enumerate() {
        let n = first_epoch + i as i64;
        // Lost or not is said of the first transit in the range, whether or not it falls in the dark.
        if may_be_lost && lost_sigma.is_none() {
            let sigma = eph.sigma_days(n);
            if sigma > lost_limit_days {
                lost_sigma = Some(sigma * 1440.0);
            }
        }
        if !opts.include_unobservable {
            // Cheap first look with the geocentric time (the site term is <= 21 ms; 1 s of margin): skip
            // transits whose in-transit part misses the dark time of the neighbouring nights, or meets it only
            // with the catalogue place below the loosened altitude limit.
            let k = night_after(nights, geo);
            let m = 1.0 / 86_400.0;
            let transit = Interval {
                start: geo - half - m,
                end: geo + half + m,
            };
            let may_list = nights[k.saturating_sub(2)..(k + 1).min(nights.len())]
                .iter()
                .any(|nt| {
                    nt.dark
                        .and_then(|d| d.intersect(&transit))
                        .is_some_and(|w| loose.met_between(ha_at(w.start), ha_at(w.end)))
                });
            if !may_list {
                continue;
            }
        }
        let mid = if eph.system == crate::astro::barycentric::TimeSystem::JdUtc {
            geo
        } else {
            geo - crate::astro::barycentric::observer_delay_days(JdUtc(geo), &icrs, &site.observer)
        };
        // The night whose solar-noon-to-noon window holds the mid-transit.
        let k = night_after(nights, mid);
        if k == 0 || mid >= nights[k - 1].window.end {
            continue;
        }
        let night = &nights[k - 1];
        let sigma = eph.sigma_days(n);
        let is_lost = sigma > lost_limit_days;
        if !opts.include_unobservable {
            if is_lost {
                continue;
            }
            // Reject daytime transits before any geometry: the in-transit part must meet the dark time.
            let touches_dark = night
                .dark
                .is_some_and(|d| mid + half > d.start && mid - half < d.end);
            if !touches_dark {
                continue;
            }
        }
        let predicted = Predicted {
            epoch: n,
            mid_utc: mid,
            sigma_days: sigma,
        };
        if let Some(ev) = evaluate(p, predicted, night) {
            events.push(ev);
        }
    }
    lost_sigma
}

/// The sidereal phase swept by the dark time of `nights`: an arc `(lo, hi)`, rad, such that for every dark
/// instant t, [`sidereal_turn_rad`]`(t - start)` (the hour angle a fixed place gains from `start`, as the
/// first look of [`events_of_target`] computes it) lies in [lo, hi] modulo 2 pi. Each night's dark interval is
/// one arc; the arcs of a chunk of nights drift by about 4 minutes of hour angle a night, and `(lo, hi)` spans
/// them all (with the gaps between them; 2 pi or more when they go round). Widened by 1e-9 rad for the
/// roundings of either computation. `None` when no night has dark time.
fn dark_phase_arc(nights: &[Night], start: f64) -> Option<(f64, f64)> {
    let phase = |t: f64| sidereal_turn_rad(t - start);
    let mut arc: Option<(f64, f64)> = None;
    let mut reference = None;
    for d in nights.iter().filter_map(|n| n.dark) {
        let (a, b) = (phase(d.start), phase(d.end));
        // Each night's arc moved by whole turns next to the first night's.
        let first = *reference.get_or_insert(a);
        let turns = ((a - first) / TAU).round() * TAU;
        let (a, b) = (a - turns, b - turns);
        arc = Some(arc.map_or((a, b), |(lo, hi): (f64, f64)| (lo.min(a), hi.max(b))));
    }
    arc.map(|(lo, hi)| (lo - 1e-9, hi + 1e-9))
}

/// Give the memory of the lists left empty back (to the allocator, for the lists that grow): otherwise every
/// target keeps the room of its busiest chunk at any site (peak memory of the catalogue job 135 -> 117 MiB).
fn release_empty(lists: &mut [Vec<Event>]) {
    for list in lists
        .iter_mut()
        .filter(|l| l.is_empty() && l.capacity() > 0)
    {
        *list = Vec::new();
    }
}

/// The sort key of an event: its block start, then its target, then its place in the target's list (the lists
/// are in epoch order, so this is the epoch's order), as one integer whose order is that of the triple: the
/// start's bits mapped so that unsigned order is `f64::total_cmp`'s, then 32 bits each for the target and the
/// place (a catalogue has far fewer than 2^32 targets, a target far fewer events in a chunk). Half the size of
/// a tuple, and compared without a floating-point comparison.
fn order_key(block_start_utc: f64, target: usize, pos: usize) -> u128 {
    let bits = block_start_utc.to_bits();
    let ordered = if bits >> 63 == 1 {
        !bits
    } else {
        bits | 1 << 63
    };
    (u128::from(ordered) << 64)
        | ((target as u128 & 0xFFFF_FFFF) << 32)
        | (pos as u128 & 0xFFFF_FFFF)
}

/// The (target, place in its list) of an [`order_key`].
fn key_place(key: u128) -> (usize, usize) {
    (
        ((key >> 32) & 0xFFFF_FFFF) as usize,
        (key & 0xFFFF_FFFF) as usize,
    )
}

/// `s.partition_point(pred)` for a predicate true then false along `s`, found by stepping from `guess`: a few
/// comparisons of neighbouring entries when the guess is close, instead of a binary search whose every step
/// can miss the cache.
fn partition_point_near<T>(s: &[T], guess: usize, pred: impl Fn(&T) -> bool) -> usize {
    let mut i = guess.min(s.len());
    while i > 0 && !pred(&s[i - 1]) {
        i -= 1;
    }
    while i < s.len() && pred(&s[i]) {
        i += 1;
    }
    i
}

/// The index of the first night whose window starts after `t` (UTC JD): the windows run from one local mean
/// solar noon to the next, a day apart, so the index is guessed from the first window's start.
fn night_after(nights: &[Night], t: f64) -> usize {
    // floor(d) + 1 for d > 0, else 0: one truncating conversion (asked of every site-transit).
    let guess = nights.first().map_or(0, |n| {
        let d = t - n.window.start;
        if d > 0.0 {
            d as usize + 1
        } else {
            0
        }
    });
    partition_point_near(nights, guess, |nt| nt.window.start <= t)
}

/// The first predicted mid-transit of `target` after `jd_utc` as seen from `site`, UTC JD.
pub fn next_mid_after(target: &Target, site: &Site, jd_utc: f64) -> f64 {
    let eph = &target.ephemeris;
    let earth = EarthTable::new(jd_utc - 1.0, jd_utc + eph.period_days + 1.0);
    let icrs = target.icrs_at(jd_utc);
    let mut n = ((jd_utc - 0.02 - eph.t0) / eph.period_days).floor() as i64;
    loop {
        let t = earth
            .utc_from_system(eph.system, eph.mid_time(n), &icrs, Some(&site.observer))
            .0;
        if t > jd_utc {
            return t;
        }
        n += 1;
    }
}

/// `iv` with its start rounded up and its end rounded down to whole UTC minutes (unchanged if that would
/// empty it). Printed times truncate to the minute, so an edge on a whole minute prints exactly.
pub fn inward_to_minutes(iv: Interval) -> Interval {
    const PER_DAY: f64 = 1440.0;
    let rel = |jd: f64| (jd - crate::astro::civil::UNIX_EPOCH_JD) * PER_DAY;
    // 1e-6 min (60 us) absorbs binary noise so an edge already on a minute stays there.
    let start = (rel(iv.start) - 1e-6).ceil() / PER_DAY + crate::astro::civil::UNIX_EPOCH_JD;
    let end = (rel(iv.end) + 1e-6).floor() / PER_DAY + crate::astro::civil::UNIX_EPOCH_JD;
    if start < end {
        Interval { start, end }
    } else {
        iv
    }
}

/// Test support: a plain event to modify in unit tests of the output modules.
#[cfg(test)]
pub(crate) mod tests_support {
    use super::*;

    pub(crate) fn sample_event() -> Event {
        Event {
            target_index: 0,
            site_index: 0,
            telescope_index: 0,
            epoch: 1,
            verdict: Verdict::Whole,
            observable: true,
            coverage: 1.0,
            mid_utc: 2_461_000.6,
            ingress_utc: 2_461_000.55,
            egress_utc: 2_461_000.65,
            block_start_utc: 2_461_000.5,
            block_end_utc: 2_461_000.7,
            full_block_start_utc: 2_461_000.5,
            full_block_end_utc: 2_461_000.7,
            usable: None,
            sigma_min: 1.0,
            baseline_before_min: 30.0,
            baseline_after_min: 30.0,
            night_of: NaiveDate::from_ymd_opt(2025, 1, 1).expect("date"),
            night_dark: None,
            alt_ingress_deg: 40.0,
            alt_mid_deg: 45.0,
            alt_egress_deg: 50.0,
            alt_block_start_deg: 38.0,
            alt_block_end_deg: 52.0,
            airmass_ingress: 1.5,
            airmass_mid: 1.4,
            airmass_egress: 1.3,
            az_mid_deg: 180.0,
            sun_alt_mid_deg: -30.0,
            moon_alt_mid_deg: -10.0,
            moon_sep_deg: 90.0,
            moon_illum: 0.5,
            meridian_utc: None,
            reasons: ReasonSet::new(),
            noise: None,
        }
    }
}

#[cfg(test)]
mod mean_place_tests {
    use super::*;
    use crate::astro::frames::separation_rad;

    /// The quick rejection is safe only if the catalogue place is never farther from the apparent place than
    /// the bound: checked against the apparent place (itself checked against ERFA in tests/reference.rs) for
    /// directions spread over the sky, at dates from 2000 to 2060.
    #[test]
    fn catalogue_place_stays_within_the_bound_of_the_apparent_place() {
        for year in [2000.0, 2014.0, 2027.0, 2043.0, 2060.0] {
            let jd0 = 2_451_545.0 + (year - 2000.0) * 365.25;
            let tables = SkyTables::new(jd0, jd0 + 366.0);
            let bound = mean_place_error_deg(jd0, jd0 + 366.0, 0.0);
            let mut worst = 0.0_f64;
            for k in 0..400 {
                // A spiral of directions from pole to pole, and dates through the year (aberration's cycle).
                let z = -0.999 + 1.998 * f64::from(k) / 399.0;
                let ra = f64::from(k) * 2.399_963;
                let dec = z.asin();
                let icrs = crate::astro::frames::unit_from_radec(ra, dec);
                let jd = jd0 + 0.5 + f64::from(k % 73) * 5.0;
                let (ra_app, dec_app) = tables.apparent_radec(&icrs, jd);
                let (ra_cat, dec_cat) = crate::astro::frames::radec_from_vec(&icrs);
                worst = worst.max(separation_rad(ra_app, dec_app, ra_cat, dec_cat).to_degrees());
            }
            assert!(worst < bound, "{year}: {worst} deg vs bound {bound}");
            // Not wastefully loose either: within 0.2 deg of the largest offset seen.
            assert!(bound - worst < 0.2, "{year}: {worst} deg vs bound {bound}");
        }
    }
}

#[cfg(test)]
mod index_tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// The packed sort key orders events as (block start by `total_cmp`, target, place) does, and gives
        /// back the target and the place.
        #[test]
        fn order_key_orders_as_the_triple(
            a in prop_oneof![2_461_000.0f64..2_461_400.0, -1.0e3f64..1.0e3, Just(0.0), Just(-0.0)],
            b in prop_oneof![2_461_000.0f64..2_461_400.0, -1.0e3f64..1.0e3, Just(0.0), Just(-0.0)],
            same in any::<bool>(),
            ta in 0usize..20_000,
            tb in 0usize..20_000,
            pa in 0usize..300,
            pb in 0usize..300,
        ) {
            let b = if same { a } else { b };
            let expected = a.total_cmp(&b).then(ta.cmp(&tb)).then(pa.cmp(&pb));
            prop_assert_eq!(order_key(a, ta, pa).cmp(&order_key(b, tb, pb)), expected);
            prop_assert_eq!(key_place(order_key(a, ta, pa)), (ta, pa));
        }

        /// The chunk-wide test of the first look is safe: whenever the loosened limit is met in some stretch of
        /// one night's dark time (what the first look asks of a transit), it is met on the chunk's dark arc
        /// too, for nights of any darkness, any limit and any starting hour angle.
        #[test]
        fn dark_arc_meets_whatever_a_stretch_of_dark_time_meets(
            first_noon in 2_461_000.0f64..2_461_400.0,
            nights in proptest::collection::vec((0.0f64..0.5, 0.0f64..0.45, 0.0f64..1.0), 1..64),
            h0 in 0.0f64..std::f64::consts::PI,
            ha_start in -20.0f64..20.0,
            pick in (0usize..64, 0.0f64..1.0, 0.0f64..1.0),
        ) {
            // Night k's window runs from noon to noon; its dark time, when it has any, starts `dusk` days after
            // the window and lasts `length` days (a fifth of the nights light throughout).
            let nights: Vec<Night> = nights
                .iter()
                .enumerate()
                .map(|(k, &(dusk, length, light))| {
                    let noon = first_noon + k as f64;
                    let start = noon + 0.02 + dusk;
                    Night {
                        night_of: NaiveDate::from_ymd_opt(2027, 1, 1).expect("date"),
                        window: Interval { start: noon, end: noon + 1.0 },
                        dark: (light > 0.2).then_some(Interval { start, end: start + length }),
                    }
                })
                .collect();
            let start = nights[0].window.start;
            let limit = AltLimit { cos_h0: h0.cos(), h0_rad: h0 };
            let arc = dark_phase_arc(&nights, start);
            prop_assert_eq!(arc.is_some(), nights.iter().any(|n| n.dark.is_some()));
            let (k, a, b) = pick;
            if let Some(d) = nights[k % nights.len()].dark {
                let (lo, hi) = arc.expect("dark time");
                let (ta, tb) = (d.start + a.min(b) * (d.end - d.start), d.start + a.max(b) * (d.end - d.start));
                let ha_at = |t: f64| ha_start + sidereal_turn_rad(t - start);
                if limit.met_between(ha_at(ta), ha_at(tb)) {
                    prop_assert!(limit.met_between(ha_start + lo, ha_start + hi));
                }
            }
        }

        /// Stepping from any guess finds what the binary search finds, on sorted lists with repeats.
        #[test]
        fn partition_point_near_matches_the_binary_search(
            mut values in proptest::collection::vec(-50i32..50, 0..40),
            t in -60i32..60,
            guess in 0usize..80,
        ) {
            values.sort_unstable();
            let expected = values.partition_point(|&v| v <= t);
            prop_assert_eq!(partition_point_near(&values, guess, |&v| v <= t), expected);
        }

        /// The first upper culmination found without lists is the first of the list.
        #[test]
        fn first_upper_culmination_is_the_first_of_the_list(
            ra in 0.0f64..std::f64::consts::TAU,
            dec in -1.5f64..1.5,
            lat in -1.5f64..1.5,
            lon in -std::f64::consts::PI..std::f64::consts::PI,
            start in 2_461_000.0f64..2_461_400.0,
            len in 0.0f64..3.0,
        ) {
            let track = Track {
                dir: crate::astro::frames::unit_from_radec(ra, dec),
                ra_rad: ra,
                eqeq_rad: 0.0,
                lon_rad: lon,
                sc_dec: (dec.sin(), dec.cos()),
                sc_lat: (lat.sin(), lat.cos()),
            };
            let (upper, _) = track.culminations(start, start + len);
            prop_assert_eq!(track.first_upper_culmination(start, start + len), upper.first().copied());
        }

        /// The closed-form test of an hour-angle span against the altitude limit agrees with the runs found
        /// by the loop, for spans up to two days long starting anywhere in ten turns.
        #[test]
        fn met_between_agrees_with_the_runs(
            cos_h0 in -1.2f64..1.2,
            ha_a in -60.0f64..60.0,
            len in 0.0f64..13.0,
        ) {
            let limit = AltLimit {
                cos_h0,
                h0_rad: if cos_h0.abs() < 1.0 { cos_h0.acos() } else { 0.0 },
            };
            let mut by_runs = cos_h0 <= -1.0;
            if cos_h0.abs() < 1.0 {
                limit.runs(ha_a, ha_a + len, |_, _| by_runs = true);
            }
            prop_assert_eq!(limit.met_between(ha_a, ha_a + len), by_runs);
        }

        /// The in-place path for simple sites gives the intervals and reasons of the general one, for any
        /// direction, site latitude, dark interval and block.
        #[test]
        fn simple_usable_intervals_match_the_lists(
            ra in 0.0f64..std::f64::consts::TAU,
            dec in -1.5f64..1.5,
            lat in -1.4f64..1.4,
            min_alt in -5.0f64..80.0,
            start in 2_461_000.0f64..2_461_001.0,
            len in 0.01f64..0.89,
            dark_from in -0.5f64..0.5,
            dark_len in 0.0f64..0.8,
            has_dark in proptest::bool::ANY,
        ) {
            let tables = SkyTables::new(2_460_998.0, 2_461_003.0);
            let text = format!(
                "[[site]]\nname = \"P\"\nlatitude_deg = {}\nlongitude_deg = 10.0\nelevation_m = 0\ntimezone = \"UTC\"\nmin_alt_deg = {min_alt}\n",
                lat.to_degrees()
            );
            let site = &crate::inputs::sites::parse_sites("p.toml", &text).expect("site")[0];
            let icrs = crate::astro::frames::unit_from_radec(ra, dec);
            let track = Track::new(&icrs, start + len / 2.0, site, &tables);
            let limit = AltLimit::new(&track, site.min_alt_deg);
            let block = Interval { start, end: start + len };
            let night = Night {
                night_of: NaiveDate::from_ymd_opt(2026, 1, 1).expect("date"),
                window: Interval { start: start - 0.5, end: start + 0.5 },
                dark: has_dark.then_some(Interval { start: start + dark_from, end: start + dark_from + dark_len }),
            };
            let (simple, r1) = usable_intervals_simple(&track, (site, limit), &night, &block).expect("simple site");
            let (listed, r2) = usable_intervals_listed(&track, (site, limit), &night, &block, &tables);
            prop_assert_eq!(simple.as_slice(), listed.as_slice());
            prop_assert_eq!(r1, r2);
        }

        /// The night of an instant by its index guess, for windows a day apart starting at any time of day.
        #[test]
        fn night_after_matches_the_binary_search(
            start in 2_461_000.0f64..2_461_001.0,
            n in 0usize..40,
            dt in -3.0f64..45.0,
        ) {
            let nights: Vec<Night> = (0..n)
                .map(|k| Night {
                    night_of: NaiveDate::from_ymd_opt(2026, 1, 1).expect("date") + chrono::Duration::days(k as i64),
                    window: Interval { start: start + k as f64, end: start + k as f64 + 1.0 },
                    dark: None,
                })
                .collect();
            let t = start + dt;
            let expected = nights.partition_point(|nt| nt.window.start <= t);
            prop_assert_eq!(night_after(&nights, t), expected);
        }

        /// A reason set lists what a list did after `sort` and `dedup` (how events kept their reasons before
        /// they became bits), whatever the order and repeats of the insertions.
        #[test]
        fn reason_set_lists_as_the_sorted_deduplicated_list(picks in prop::collection::vec(0usize..10, 0..14)) {
            let inserted: Vec<Reason> = picks.iter().map(|&i| Reason::ALL[i]).collect();
            let set: ReasonSet = inserted.iter().copied().collect();
            let mut list = inserted.clone();
            list.sort();
            list.dedup();
            prop_assert_eq!(set.is_empty(), list.is_empty());
            for r in Reason::ALL {
                prop_assert_eq!(set.contains(&r), list.contains(&r));
            }
            prop_assert_eq!(set.to_vec(), list);
        }
    }
}
