//! One night at one site for the `tonight` report: the almanac, every event of the night (observable or not),
//! and for targets asked for by name with no transit that night, when the next one is.

use super::almanac::{night_almanac, NightAlmanac};
use super::plan::{next_mid_after, plan, Event, PlanOptions};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;

/// Why a target asked for by name has nothing to show tonight.
#[derive(Debug, Clone, PartialEq)]
pub enum Absence {
    /// No transit during this night; the next mid-transit is at this UTC JD.
    NoTransit {
        /// Target index.
        target_index: usize,
        /// Next predicted mid-transit, UTC JD.
        next_mid_utc: f64,
    },
}

/// Everything the `tonight` report shows.
#[derive(Debug, Clone)]
pub struct Tonight<'a> {
    /// The site.
    pub site: &'a Site,
    /// Sun and Moon events of the night.
    pub almanac: NightAlmanac,
    /// The night's events, observable and not.
    pub events: Vec<Event>,
    /// Targets asked for by name (indices), whose absence is explained.
    pub asked: Vec<usize>,
    /// Asked-for targets with no transit this night.
    pub absences: Vec<Absence>,
    /// The current instant (UTC JD) when the report is for the night in progress or about to begin.
    pub now_utc: Option<f64>,
}

/// The night a person means by "tonight" at `now_utc`: the night in progress, or, once its dark time is over
/// (in the morning), the coming one. Nights run from local mean solar noon to the next.
pub fn current_or_coming_night(site: &Site, now_utc: f64) -> chrono::NaiveDate {
    let night = crate::astro::civil::night_of(now_utc, site.lon_deg, site.tz);
    let window = super::almanac::night_window(site, night);
    let tables = crate::astro::tables::SkyTables::new(window.start - 0.5, window.end + 0.5);
    let over = match super::almanac::dark_interval(site, &window, &tables) {
        Some(dark) => now_utc > dark.end,
        None => now_utc > window.start + 0.5,
    };
    if over {
        night.succ_opt().unwrap_or(night)
    } else {
        night
    }
}

/// The night of `opts.first_night` at `site` for `targets` (all of them `asked` by name when `named`), with
/// `now_utc` for the countdown.
pub fn tonight<'a>(
    site: &'a Site,
    targets: &[Target],
    opts: &PlanOptions,
    named: bool,
    now_utc: Option<f64>,
) -> Tonight<'a> {
    let result = plan(std::slice::from_ref(site), targets, opts);
    // Every telescope's events, in time order (a site with several telescopes lists each event per telescope).
    let mut events: Vec<_> = result.sites.into_iter().flat_map(|sp| sp.events).collect();
    events.sort_by(|a, b| {
        a.block_start_utc
            .total_cmp(&b.block_start_utc)
            .then(a.telescope_index.cmp(&b.telescope_index))
    });
    let almanac = night_almanac(site, opts.first_night);
    let asked: Vec<usize> = if named {
        (0..targets.len()).collect()
    } else {
        Vec::new()
    };
    let absences = asked
        .iter()
        .filter(|&&ti| !events.iter().any(|e| e.target_index == ti))
        .map(|&ti| Absence::NoTransit {
            target_index: ti,
            next_mid_utc: next_mid_after(&targets[ti], site, almanac.window.end),
        })
        .collect();
    Tonight {
        site,
        almanac,
        events,
        asked,
        absences,
        now_utc,
    }
}
