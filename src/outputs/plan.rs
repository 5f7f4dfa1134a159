//! `plan` outputs: the terminal table, CSV and JSON.

use super::{finite, floor_to, hhmm, round};
use crate::astro::civil::rfc3339_utc;
use crate::engine::plan::{Event, Plan, PlanOptions, Reason, Verdict};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use comfy_table::{Cell, CellAlignment, ContentArrangement};
use serde::Serialize;

/// One event as written to CSV and JSON. Field names and units are documented in the README.
#[derive(Debug, Clone, Serialize)]
pub struct EventRecord {
    pub target: String,
    pub site: String,
    pub epoch: i64,
    pub verdict: &'static str,
    pub observable: bool,
    pub coverage: f64,
    pub mid_utc: String,
    pub ingress_utc: String,
    pub egress_utc: String,
    pub block_start_utc: String,
    pub block_end_utc: String,
    pub full_block_start_utc: String,
    pub full_block_end_utc: String,
    pub usable_start_utc: Option<String>,
    pub usable_end_utc: Option<String>,
    pub sigma_min: f64,
    pub baseline_before_min: f64,
    pub baseline_after_min: f64,
    pub night_of: String,
    pub night_start_utc: Option<String>,
    pub night_end_utc: Option<String>,
    pub alt_ingress_deg: f64,
    pub alt_mid_deg: f64,
    pub alt_egress_deg: f64,
    pub alt_block_start_deg: f64,
    pub alt_block_end_deg: f64,
    pub airmass_ingress: Option<f64>,
    pub airmass_mid: Option<f64>,
    pub airmass_egress: Option<f64>,
    pub az_mid_deg: f64,
    pub sun_alt_mid_deg: f64,
    pub moon_alt_mid_deg: f64,
    pub moon_sep_deg: f64,
    pub moon_illum: f64,
    pub meridian_utc: Option<String>,
    pub depth_ppt: Option<f64>,
    pub priority: f64,
    pub reasons: Vec<&'static str>,
}

/// The fields of [`EventRecord`] in order: the CSV header and the JSON keys of each event.
pub const EVENT_FIELDS: &[&str] = &[
    "target",
    "site",
    "epoch",
    "verdict",
    "observable",
    "coverage",
    "mid_utc",
    "ingress_utc",
    "egress_utc",
    "block_start_utc",
    "block_end_utc",
    "full_block_start_utc",
    "full_block_end_utc",
    "usable_start_utc",
    "usable_end_utc",
    "sigma_min",
    "baseline_before_min",
    "baseline_after_min",
    "night_of",
    "night_start_utc",
    "night_end_utc",
    "alt_ingress_deg",
    "alt_mid_deg",
    "alt_egress_deg",
    "alt_block_start_deg",
    "alt_block_end_deg",
    "airmass_ingress",
    "airmass_mid",
    "airmass_egress",
    "az_mid_deg",
    "sun_alt_mid_deg",
    "moon_alt_mid_deg",
    "moon_sep_deg",
    "moon_illum",
    "meridian_utc",
    "depth_ppt",
    "priority",
    "reasons",
];

impl EventRecord {
    /// The record of `e`, with names looked up in the inputs.
    pub fn new(e: &Event, sites: &[Site], targets: &[Target]) -> EventRecord {
        let t = &targets[e.target_index];
        EventRecord {
            target: t.name.clone(),
            site: sites[e.site_index].name.clone(),
            epoch: e.epoch,
            verdict: e.verdict.label(),
            observable: e.observable,
            coverage: floor_to(e.coverage, 3),
            mid_utc: rfc3339_utc(e.mid_utc),
            ingress_utc: rfc3339_utc(e.ingress_utc),
            egress_utc: rfc3339_utc(e.egress_utc),
            block_start_utc: rfc3339_utc(e.block_start_utc),
            block_end_utc: rfc3339_utc(e.block_end_utc),
            full_block_start_utc: rfc3339_utc(e.full_block_start_utc),
            full_block_end_utc: rfc3339_utc(e.full_block_end_utc),
            usable_start_utc: e.usable.map(|u| rfc3339_utc(u.start)),
            usable_end_utc: e.usable.map(|u| rfc3339_utc(u.end)),
            sigma_min: round(e.sigma_min, 2),
            baseline_before_min: round(e.baseline_before_min, 1),
            baseline_after_min: round(e.baseline_after_min, 1),
            night_of: e.night_of.to_string(),
            night_start_utc: e.night_dark.map(|d| rfc3339_utc(d.start)),
            night_end_utc: e.night_dark.map(|d| rfc3339_utc(d.end)),
            alt_ingress_deg: round(e.alt_ingress_deg, 2),
            alt_mid_deg: round(e.alt_mid_deg, 2),
            alt_egress_deg: round(e.alt_egress_deg, 2),
            alt_block_start_deg: round(e.alt_block_start_deg, 2),
            alt_block_end_deg: round(e.alt_block_end_deg, 2),
            airmass_ingress: finite(e.airmass_ingress, 3),
            airmass_mid: finite(e.airmass_mid, 3),
            airmass_egress: finite(e.airmass_egress, 3),
            az_mid_deg: round(e.az_mid_deg, 2),
            sun_alt_mid_deg: round(e.sun_alt_mid_deg, 2),
            moon_alt_mid_deg: round(e.moon_alt_mid_deg, 2),
            moon_sep_deg: round(e.moon_sep_deg, 2),
            moon_illum: round(e.moon_illum, 3),
            meridian_utc: e.meridian_utc.map(rfc3339_utc),
            depth_ppt: t.depth_ppt,
            priority: t.priority,
            reasons: e.reasons.iter().map(|r| r.label()).collect(),
        }
    }
}

fn records(plan: &Plan, sites: &[Site], targets: &[Target]) -> Vec<EventRecord> {
    plan.sites
        .iter()
        .flat_map(|sp| sp.events.iter())
        .map(|e| EventRecord::new(e, sites, targets))
        .collect()
}

/// CSV: a header and one line per event, the JSON fields as columns (`reasons` joined with `;`).
pub fn plan_csv(plan: &Plan, sites: &[Site], targets: &[Target]) -> String {
    let mut out = csv_header();
    for sp in &plan.sites {
        push_event_csv_rows(&sp.events, sites, targets, &mut out);
    }
    out
}

/// The CSV header line of events.
pub fn csv_header() -> String {
    let mut s = EVENT_FIELDS.join(",");
    s.push('\n');
    s
}

/// A CSV field, quoted when it holds a comma, quote or line break (RFC 4180 section 2).
fn push_csv_text(s: &str, out: &mut String) {
    if s.contains([',', '"', '\n', '\r']) {
        out.push('"');
        out.push_str(&s.replace('"', "\"\""));
        out.push('"');
    } else {
        out.push_str(s);
    }
}

/// Append `x` with exactly `decimals` decimals (0-6) without the general float formatter: scale, round half
/// away from zero, print the digits. Equal to `format!("{x:.decimals$}")` except that a negative value which
/// rounds to zero prints as `0.00`, not `-0.00`.
fn push_fixed(x: f64, decimals: u32, out: &mut String) {
    if !x.is_finite() || x.abs() >= 1e12 {
        use std::fmt::Write;
        let _ = write!(out, "{x:.prec$}", prec = decimals as usize);
        return;
    }
    let scale = 10_u64.pow(decimals);
    let scaled = (x * scale as f64).round() as i64;
    if scaled < 0 {
        out.push('-');
    }
    let v = scaled.unsigned_abs();
    push_digits(v / scale, 1, out);
    if decimals > 0 {
        out.push('.');
        push_digits(v % scale, decimals as usize, out);
    }
}

/// Append the decimal digits of `v`, zero-padded to at least `width`.
fn push_digits(mut v: u64, width: usize, out: &mut String) {
    let mut digits = [b'0'; 20];
    let mut i = digits.len();
    while v > 0 || digits.len() - i < width {
        i -= 1;
        digits[i] = b'0' + (v % 10) as u8;
        v /= 10;
    }
    for &b in &digits[i..] {
        out.push(char::from(b));
    }
}

/// Append one CSV row per event (the columns of [`EVENT_FIELDS`]) to `out`. Formats numbers with fixed
/// decimals and timestamps without allocating, so a catalogue-scale plan streams quickly.
pub fn push_event_csv_rows(events: &[Event], sites: &[Site], targets: &[Target], out: &mut String) {
    use crate::astro::civil::push_rfc3339_utc as ts;
    let num = |x: f64, d: u32, out: &mut String| {
        push_fixed(x, d, out);
        out.push(',');
    };
    for e in events {
        let t = &targets[e.target_index];
        push_csv_text(&t.name, out);
        out.push(',');
        push_csv_text(&sites[e.site_index].name, out);
        out.push(',');
        push_fixed(e.epoch as f64, 0, out);
        out.push(',');
        out.push_str(e.verdict.label());
        out.push_str(if e.observable { ",true," } else { ",false," });
        num(floor_to(e.coverage, 3), 3, out);
        for jd in [
            e.mid_utc,
            e.ingress_utc,
            e.egress_utc,
            e.block_start_utc,
            e.block_end_utc,
            e.full_block_start_utc,
            e.full_block_end_utc,
        ] {
            ts(jd, out);
            out.push(',');
        }
        for jd in [e.usable.map(|u| u.start), e.usable.map(|u| u.end)] {
            if let Some(jd) = jd {
                ts(jd, out);
            }
            out.push(',');
        }
        num(e.sigma_min, 2, out);
        num(e.baseline_before_min, 1, out);
        num(e.baseline_after_min, 1, out);
        out.push_str(&e.night_of.format("%Y-%m-%d").to_string());
        out.push(',');
        for jd in [e.night_dark.map(|d| d.start), e.night_dark.map(|d| d.end)] {
            if let Some(jd) = jd {
                ts(jd, out);
            }
            out.push(',');
        }
        for x in [
            e.alt_ingress_deg,
            e.alt_mid_deg,
            e.alt_egress_deg,
            e.alt_block_start_deg,
            e.alt_block_end_deg,
        ] {
            num(x, 2, out);
        }
        for x in [e.airmass_ingress, e.airmass_mid, e.airmass_egress] {
            if x.is_finite() {
                push_fixed(x, 3, out);
            }
            out.push(',');
        }
        for x in [
            e.az_mid_deg,
            e.sun_alt_mid_deg,
            e.moon_alt_mid_deg,
            e.moon_sep_deg,
        ] {
            num(x, 2, out);
        }
        num(e.moon_illum, 3, out);
        if let Some(m) = e.meridian_utc {
            ts(m, out);
        }
        out.push(',');
        if let Some(d) = t.depth_ppt {
            out.push_str(&d.to_string());
        }
        out.push(',');
        out.push_str(&t.priority.to_string());
        out.push(',');
        for (k, r) in e.reasons.iter().enumerate() {
            if k > 0 {
                out.push(';');
            }
            out.push_str(r.label());
        }
        out.push('\n');
    }
}

/// JSON: `{"options": ..., "sites": [...], "events": [...], "lost_ephemerides": [...]}`.
pub fn plan_json(plan: &Plan, sites: &[Site], targets: &[Target], opts: &PlanOptions) -> String {
    let site_info: Vec<serde_json::Value> = plan
        .sites
        .iter()
        .map(|sp| {
            let s = &sites[sp.site_index];
            serde_json::json!({
                "name": s.name,
                "timezone": s.tz.name(),
                "darkness": s.darkness_label,
                "darkness_sun_alt_deg": s.darkness_alt_deg,
                "min_alt_deg": round(s.min_alt_deg, 3),
                "nights_without_darkness": sp.nights.iter().filter(|n| n.dark.is_none()).map(|n| n.night_of.to_string()).collect::<Vec<_>>(),
            })
        })
        .collect();
    let lost: Vec<serde_json::Value> = plan
        .lost
        .iter()
        .map(|l| serde_json::json!({"target": targets[l.target_index].name, "sigma_min": round(l.sigma_min, 1)}))
        .collect();
    let doc = serde_json::json!({
        "options": opts,
        "sites": site_info,
        "events": records(plan, sites, targets),
        "lost_ephemerides": lost,
    });
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
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
        Reason::BelowHorizonProfile => "horizon",
        Reason::HourAngleLimit => "HA",
        Reason::MoonTooClose => "moon",
        Reason::CoverageBelowMinimum => "cov",
        Reason::InTransitBelowMinimum => "short",
        Reason::EphemerisLost => "lost",
    }
}

const LEGEND: &str = "\
Notes: flip HH:MM = meridian crossing inside the block (equatorial mounts flip). Limits that cut the block:
  sun = twilight or daylight, low = below the altitude limit, high = above the mount's highest altitude,
  horizon = behind the horizon profile, HA = outside the hour-angle limits, moon = too close to the Moon,
  cov = under the minimum coverage, short = less in-transit time than the minimum, lost = ephemeris lost.
  Block = the time that can be observed; ~ beside an edge: a limit clips the planned block there.
  Coverage is rounded down.";

/// The terminal table: one table per site, rows grouped by night, site local time (or UTC), fits 120
/// columns.
pub fn plan_table(
    plan: &Plan,
    sites: &[Site],
    targets: &[Target],
    opts: &PlanOptions,
    utc: bool,
) -> String {
    let mut out = String::new();
    let n_events: usize = plan.sites.iter().map(|s| s.events.len()).sum();
    out.push_str(&format!(
        "Transits for the nights of {} to {}\n  margin {} sigma; baselines {}/{} min before/after{}{}\n",
        opts.first_night,
        opts.last_night,
        opts.sigma_k,
        opts.baseline_before_min,
        opts.baseline_after_min,
        if opts.min_coverage > 0.0 { format!("; coverage >= {}", opts.min_coverage) } else { String::new() },
        if opts.min_in_transit_min > 0.0 { format!("; in transit >= {} min", opts.min_in_transit_min) } else { String::new() }
    ));
    for sp in &plan.sites {
        let site = &sites[sp.site_index];
        out.push_str(&format!(
            "\n{}  {:+.3} {:+.3}  times {}\n  dark when the Sun is below {} deg; target above {:.1} deg\n",
            site.name,
            site.lat_deg,
            site.lon_deg,
            super::clock_label(sp.nights.iter().map(|n| n.window), site, utc),
            site.darkness_alt_deg,
            site.min_alt_deg,
        ));
        if !sp.events.is_empty() {
            let mut table = super::styled_table(
                vec![
                    "Night",
                    "Target",
                    "Verdict",
                    "Cover",
                    "Block",
                    "Ingr  Mid   Egr",
                    "+-sig",
                    "Alt i/m/e",
                    "Moon",
                    "Notes",
                ],
                ContentArrangement::Dynamic,
            );
            table.set_width(120);
            // The widest table of all: no padding, the column rules separate.
            for col in table.column_iter_mut() {
                col.set_padding((0, 0));
            }
            let mut previous_night = None;
            for e in &sp.events {
                let t = &targets[e.target_index];
                if previous_night.is_some() && previous_night != Some(e.night_of) {
                    table.add_row(vec![""; 10]);
                }
                let night_cell = if previous_night != Some(e.night_of) {
                    e.night_of.format("%a %m-%d").to_string()
                } else {
                    String::new()
                };
                previous_night = Some(e.night_of);
                let mut notes = Vec::new();
                if let Some(m) = e.meridian_utc {
                    notes.push(format!("flip {}", hhmm(m, site, utc)));
                }
                let limits: Vec<&str> = e.reasons.iter().map(|r| reason_note(*r)).collect();
                if !limits.is_empty() {
                    notes.push(limits.join(", "));
                }
                let mut cells = super::event_cells(night_cell, &t.name, e, site, utc);
                cells.extend([
                    Cell::new(format!("{:.1}m", e.sigma_min)).set_alignment(CellAlignment::Right),
                    Cell::new(format!(
                        "{:.0}/{:.0}/{:.0}",
                        e.alt_ingress_deg, e.alt_mid_deg, e.alt_egress_deg
                    )),
                    Cell::new(format!(
                        "{:.0}d {:.0}%",
                        e.moon_sep_deg,
                        e.moon_illum * 100.0
                    )),
                    Cell::new(notes.join(" ")),
                ]);
                table.add_row(cells);
            }
            let last = table.column_count() - 1;
            for (i, col) in table.column_iter_mut().enumerate() {
                if i != last {
                    col.set_constraint(comfy_table::ColumnConstraint::ContentWidth);
                }
            }
            out.push_str(&table.to_string());
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
    if !plan.lost.is_empty() {
        out.push_str("\nEphemeris lost (timing sigma over 1/8 of the period; transits not listed, new observations needed):\n");
        for l in &plan.lost {
            out.push_str(&format!(
                "  {}: sigma {:.0} min\n",
                targets[l.target_index].name, l.sigma_min
            ));
        }
    }
    if n_events > 0 {
        out.push('\n');
        out.push_str(LEGEND);
        out.push('\n');
    }
    let observable = plan
        .sites
        .iter()
        .flat_map(|s| &s.events)
        .filter(|e| e.observable)
        .count();
    let whole = plan
        .sites
        .iter()
        .flat_map(|s| &s.events)
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

#[cfg(test)]
mod number_tests {
    use super::push_fixed;

    #[test]
    fn fixed_decimals_match_the_formatter() {
        for &x in &[
            0.0,
            1.0,
            0.851,
            12.345_6,
            -3.2049,
            1440.0,
            99.995,
            0.0005,
            -0.5,
            2_460_000.123_456,
        ] {
            for d in 0..4u32 {
                let mut s = String::new();
                push_fixed(x, d, &mut s);
                let want = format!("{x:.prec$}", prec = d as usize);
                // Ties may round differently (half away from zero vs the formatter's exact decimal); allow that.
                let close = (s.parse::<f64>().unwrap() - want.parse::<f64>().unwrap()).abs()
                    <= 10f64.powi(-(d as i32)) + 1e-12;
                assert!(s == want || close, "{x} {d}: {s} vs {want}");
            }
        }
    }
}
