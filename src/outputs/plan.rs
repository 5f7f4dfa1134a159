//! `plan` outputs: the terminal table, CSV and JSON.

use super::columns::{csv_header, event_json, into_text, push_event_csv_rows, EventRow};
use super::{hhmm, round};
use crate::engine::plan::{Event, Plan, PlanOptions, Reason, SitePlan, Verdict};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use comfy_table::{Cell, CellAlignment};

/// The JSON objects of every event of the plan, site by site.
fn event_objects(plan: &Plan, sites: &[Site], targets: &[Target]) -> Vec<serde_json::Value> {
    plan.sites
        .iter()
        .flat_map(|sp| sp.events.iter())
        .map(|e| serde_json::Value::Object(event_json(&EventRow::of(e, sites, targets))))
        .collect()
}

/// CSV: a header and one line per event, the JSON fields as columns (`reasons` joined with `;`).
pub fn plan_csv(plan: &Plan, sites: &[Site], targets: &[Target]) -> String {
    let mut out = csv_header().into_bytes();
    for sp in &plan.sites {
        push_event_csv_rows(&sp.events, (sites, targets), None, &mut out);
    }
    into_text(out)
}

/// JSON: `{"options": ..., "sites": [...], "events": [...], "lost_ephemerides": [...]}`.
pub fn plan_json(plan: &Plan, sites: &[Site], targets: &[Target], opts: &PlanOptions) -> String {
    // One entry per site (its telescopes share its nights): the first telescope's plan carries them.
    let site_info: Vec<serde_json::Value> = plan
        .sites
        .iter()
        .filter(|sp| sp.telescope_index == 0)
        .map(|sp| site_json(&sites[sp.site_index], &sp.nights))
        .collect();
    let doc = serde_json::json!({
        "options": opts,
        "sites": site_info,
        "events": event_objects(plan, sites, targets),
        "lost_ephemerides": lost_json(&plan.lost, targets),
    });
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
}

/// The `sites` entry of one site in the plan's JSON.
pub fn site_json(s: &Site, nights: &[crate::engine::plan::Night]) -> serde_json::Value {
    serde_json::json!({
        "name": s.name,
        "timezone": s.tz.name(),
        "darkness": s.darkness_label,
        "darkness_sun_alt_deg": s.darkness_alt_deg,
        "min_alt_deg": round(s.min_alt_deg, 3),
        "telescopes": s.telescopes.iter().map(|t| t.name.as_str()).collect::<Vec<_>>(),
        "nights_without_darkness": nights.iter().filter(|n| n.dark.is_none()).map(|n| n.night_of.to_string()).collect::<Vec<_>>(),
    })
}

/// The `lost_ephemerides` of the plan's JSON.
pub fn lost_json(
    lost: &[crate::engine::plan::LostEphemeris],
    targets: &[Target],
) -> serde_json::Value {
    lost.iter()
        .map(|l| serde_json::json!({"target": targets[l.target_index].name, "sigma_min": round(l.sigma_min, 1)}))
        .collect()
}

/// Compress a sorted list of dates into "a to b (n nights)" runs.
fn date_runs(dates: &[chrono::NaiveDate]) -> Vec<String> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < dates.len() {
        let mut j = i;
        while j + 1 < dates.len() && dates[j].succ_opt() == Some(dates[j + 1]) {
            j += 1;
        }
        out.push(if i == j {
            dates[i].to_string()
        } else {
            format!("{} to {} ({} nights)", dates[i], dates[j], j - i + 1)
        });
        i = j + 1;
    }
    out
}

/// Short table notes for each reason; the legend under the table spells them out.
fn reason_note(r: Reason) -> &'static str {
    match r {
        Reason::Daylight => "sun",
        Reason::BelowAltitudeLimit => "low",
        Reason::AboveAltitudeLimit => "high",
        Reason::BelowHorizonProfile => "hor",
        Reason::HourAngleLimit => "HA",
        Reason::MoonTooClose => "moon",
        Reason::CoverageBelowMinimum => "cov",
        Reason::InTransitBelowMinimum => "short",
        Reason::SnrBelowMinimum => "snr",
        Reason::EphemerisLost => "lost",
    }
}

const LEGEND: &str = "\
Moon: its distance from the target and its lit fraction. Notes: flip HH:MM = meridian crossing inside the block
  (equatorial mounts flip); limits that cut the block: sun = twilight or daylight, low = below the altitude limit,
  high = above the mount's highest altitude, hor = behind the horizon profile, HA = outside the hour-angle limits,
  moon = too close to the Moon, cov = under the minimum coverage, short = less in-transit time than the minimum,
  snr = expected SNR under the minimum, lost = ephemeris lost.
Block = the time that can be observed; ~ beside an edge: a limit clips the planned block there. Coverage is
  rounded down.";

/// The terminal table: one table per site, rows grouped by night, site local time (or UTC), fits 120
/// columns.
pub fn plan_table(
    plan: &Plan,
    sites: &[Site],
    targets: &[Target],
    opts: &PlanOptions,
    utc: bool,
) -> String {
    let mut out = format!(
        "Transits for the nights of {} to {}\n  margin {} sigma; baselines {}/{} min before/after{}{}\n",
        opts.first_night,
        opts.last_night,
        opts.sigma_k,
        opts.baseline_before_min,
        opts.baseline_after_min,
        if opts.min_coverage > 0.0 { format!("; coverage >= {}", opts.min_coverage) } else { String::new() },
        if opts.min_in_transit_min > 0.0 { format!("; in transit >= {} min", opts.min_in_transit_min) } else { String::new() }
    );
    for sp in &plan.sites {
        push_site_section(&mut out, sp, &sites[sp.site_index], targets, opts, utc);
    }
    if !plan.lost.is_empty() {
        out.push_str("\nEphemeris lost (timing sigma over 1/8 of the period; transits not listed, new observations needed):\n");
        for l in &plan.lost {
            out.push_str(&format!(
                "  {}: sigma {:.0} min\n",
                targets[l.target_index].name, l.sigma_min
            ));
        }
    }
    let all = || plan.sites.iter().flat_map(|s| &s.events);
    let n_events = all().count();
    if n_events > 0 {
        out.push('\n');
        out.push_str(super::VERDICT_LEGEND);
        out.push('\n');
        out.push_str(&super::kind_legend(targets));
        out.push_str(LEGEND);
        out.push('\n');
    }
    let observable = all().filter(|e| e.observable).count();
    let whole = all()
        .filter(|e| e.observable && e.verdict == Verdict::Whole)
        .count();
    out.push_str(&format!(
        "\n{observable} observable events ({whole} whole with both baselines){}.\n",
        if opts.include_unobservable {
            format!(", {} listed in all", n_events)
        } else {
            String::new()
        }
    ));
    out
}

/// One site's part of the table: its heading, the events by night, nights without darkness, or why nothing is
/// listed.
fn push_site_section(
    out: &mut String,
    sp: &SitePlan,
    site: &Site,
    targets: &[Target],
    opts: &PlanOptions,
    utc: bool,
) {
    let view = site.for_telescope(&site.telescopes[sp.telescope_index]);
    out.push_str(&format!(
        "\n{}  {:+.3} {:+.3}  times {}\n  dark when the Sun is below {} deg; target above {:.1} deg{}\n",
        site.station_label(sp.telescope_index),
        site.lat_deg,
        site.lon_deg,
        super::clock_label(sp.nights.iter().map(|n| n.window), site, utc),
        site.darkness_alt_deg,
        view.min_alt_deg,
        view.photometry.as_ref().map_or(String::new(), |p| format!(
            "; photometry {:.2} m in {}",
            p.aperture_m, p.band
        )),
    ));
    if !sp.events.is_empty() {
        out.push_str(&events_table(&sp.events, site, targets, utc));
        out.push('\n');
    }
    let no_dark: Vec<chrono::NaiveDate> = sp
        .nights
        .iter()
        .filter(|n| n.dark.is_none())
        .map(|n| n.night_of)
        .collect();
    if !no_dark.is_empty() {
        out.push_str(&format!(
            "\n  No dark time at {} (the Sun stays above {} deg) on: {}\n",
            site.name,
            site.darkness_alt_deg,
            date_runs(&no_dark).join(", ")
        ));
    }
    if sp.events.is_empty() {
        out.push_str(&format!(
            "\n  Nothing observable at {} in this range{}.\n",
            site.name,
            if opts.include_unobservable {
                ""
            } else {
                " (--include-unobservable lists every transit with its reasons)"
            }
        ));
    }
}

/// The events of one site as a table of 120 columns, rows grouped by night.
fn events_table(events: &[Event], site: &Site, targets: &[Target], utc: bool) -> String {
    let mut table = super::wide_table(&["+-sig", "Alt i/m/e", "Moon", "Notes"]);
    let mut previous_night = None;
    for e in events {
        let night_cell = if previous_night != Some(e.night_of) {
            e.night_of.format("%a %m-%d").to_string()
        } else {
            String::new()
        };
        previous_night = Some(e.night_of);
        table.add_row(event_row(e, night_cell, site, targets, utc));
    }
    super::last_column_wraps(&mut table);
    table.to_string()
}

/// The cells of one event's row.
fn event_row(
    e: &Event,
    night_cell: String,
    site: &Site,
    targets: &[Target],
    utc: bool,
) -> Vec<Cell> {
    let mut notes = Vec::new();
    if let Some(m) = e.meridian_utc {
        notes.push(format!("flip {}", hhmm(m, site, utc)));
    }
    let limits: Vec<&str> = e.reasons.iter().map(reason_note).collect();
    if !limits.is_empty() {
        notes.push(limits.join(","));
    }
    let mut cells = super::event_cells(night_cell, &targets[e.target_index].label(), e, site, utc);
    cells.extend([
        Cell::new(format!("{:.1}m", e.sigma_min)).set_alignment(CellAlignment::Right),
        Cell::new(format!(
            "{:.0}/{:.0}/{:.0}",
            e.alt_ingress_deg, e.alt_mid_deg, e.alt_egress_deg
        )),
        Cell::new(format!(
            "{:.0}\u{b0} {:.0}%",
            e.moon_sep_deg,
            e.moon_illum * 100.0
        )),
        Cell::new(notes.join(" ")),
    ]);
    cells
}
