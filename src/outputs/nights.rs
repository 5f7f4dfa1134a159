//! `nights` outputs: one row per night with the Sun's and Moon's events.

use super::{hhmm, round, zone_label};
use crate::astro::civil::rfc3339_utc;
use crate::engine::almanac::NightAlmanac;
use crate::inputs::sites::Site;
use comfy_table::{Cell, CellAlignment, ContentArrangement};
use serde::Serialize;

/// One night as written to CSV and JSON. Field names are documented in the README.
#[derive(Debug, Clone, Serialize)]
pub struct NightRecord {
    /// Local date on which the night begins, YYYY-MM-DD.
    pub night_of: String,
    /// Sunset (Sun centre at -0.833 deg), RFC 3339 UTC.
    pub sunset_utc: Option<String>,
    /// Sunrise, RFC 3339 UTC.
    pub sunrise_utc: Option<String>,
    /// Sun at -6 deg in the evening.
    pub civil_dusk_utc: Option<String>,
    /// Sun at -6 deg in the morning.
    pub civil_dawn_utc: Option<String>,
    /// Sun at -12 deg in the evening.
    pub nautical_dusk_utc: Option<String>,
    /// Sun at -12 deg in the morning.
    pub nautical_dawn_utc: Option<String>,
    /// Sun at -18 deg in the evening.
    pub astronomical_dusk_utc: Option<String>,
    /// Sun at -18 deg in the morning.
    pub astronomical_dawn_utc: Option<String>,
    /// Start of darkness at the site's own level.
    pub dark_start_utc: Option<String>,
    /// End of darkness at the site's own level.
    pub dark_end_utc: Option<String>,
    /// Hours of darkness at the site's level.
    pub dark_hours: f64,
    /// First moonrise in the night window.
    pub moonrise_utc: Option<String>,
    /// First moonset in the night window.
    pub moonset_utc: Option<String>,
    /// Moon illuminated fraction at local mean solar midnight, 0-1.
    pub moon_illum: f64,
    /// Why an event is missing (polar day or night, Moon up or down all night).
    pub notes: Vec<String>,
}

/// The fields of [`NightRecord`] in order.
pub const NIGHT_FIELDS: &[&str] = &[
    "night_of",
    "sunset_utc",
    "sunrise_utc",
    "civil_dusk_utc",
    "civil_dawn_utc",
    "nautical_dusk_utc",
    "nautical_dawn_utc",
    "astronomical_dusk_utc",
    "astronomical_dawn_utc",
    "dark_start_utc",
    "dark_end_utc",
    "dark_hours",
    "moonrise_utc",
    "moonset_utc",
    "moon_illum",
    "notes",
];

impl NightRecord {
    /// The record of one almanac night.
    pub fn new(a: &NightAlmanac) -> NightRecord {
        let t = |x: Option<f64>| x.map(rfc3339_utc);
        NightRecord {
            night_of: a.night_of.to_string(),
            sunset_utc: t(a.sun.dusk),
            sunrise_utc: t(a.sun.dawn),
            civil_dusk_utc: t(a.civil.dusk),
            civil_dawn_utc: t(a.civil.dawn),
            nautical_dusk_utc: t(a.nautical.dusk),
            nautical_dawn_utc: t(a.nautical.dawn),
            astronomical_dusk_utc: t(a.astronomical.dusk),
            astronomical_dawn_utc: t(a.astronomical.dawn),
            dark_start_utc: t(a.dark.map(|d| d.start)),
            dark_end_utc: t(a.dark.map(|d| d.end)),
            dark_hours: round(a.dark_hours, 2),
            moonrise_utc: t(a.moonrise),
            moonset_utc: t(a.moonset),
            moon_illum: round(a.moon_illum, 3),
            notes: a.notes.clone(),
        }
    }
}

/// CSV: one line per night (`notes` joined with `;`, events that do not happen empty).
pub fn nights_csv(nights: &[NightAlmanac]) -> String {
    let recs: Vec<NightRecord> = nights.iter().map(NightRecord::new).collect();
    super::csv_from_records(NIGHT_FIELDS, &recs)
}

/// JSON: `{"site": ..., "nights": [...]}`; an event that does not happen is null and a note says which.
pub fn nights_json(site: &Site, nights: &[NightAlmanac]) -> String {
    let recs: Vec<NightRecord> = nights.iter().map(NightRecord::new).collect();
    let doc = serde_json::json!({
        "site": {
            "name": site.name,
            "latitude_deg": site.lat_deg,
            "longitude_deg": site.lon_deg,
            "timezone": site.tz.name(),
            "darkness_sun_alt_deg": site.darkness_alt_deg,
        },
        "nights": recs,
    });
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
}

/// The terminal table: one row per night in site local time (or UTC); `--` marks an event that does not happen
/// (the notes under the table say why).
pub fn nights_table(site: &Site, nights: &[NightAlmanac], utc: bool) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "{}  {:+.3} {:+.3}  times {}; darkness: Sun below {} deg\n",
        site.name,
        site.lat_deg,
        site.lon_deg,
        super::clock_label(nights.iter().map(|n| n.window), site, utc),
        site.darkness_alt_deg
    ));
    let dark_header = format!("Dark {:.0}", site.darkness_alt_deg);
    let mut table = super::styled_table(
        vec![
            "Night",
            "Sunset",
            "dusk-6",
            "dusk-12",
            "dusk-18",
            "dawn-18",
            "dawn-12",
            "dawn-6",
            "Sunrise",
            &dark_header,
            "Hours",
            "Moonrise",
            "Moonset",
            "Moon",
        ],
        ContentArrangement::Disabled,
    );
    for col in table.column_iter_mut() {
        col.set_padding((0, 0));
    }
    let t = |x: Option<f64>| x.map(|v| hhmm(v, site, utc)).unwrap_or_else(|| "--".into());
    let mut changes = Vec::new();
    for a in nights {
        let mut night = a.night_of.format("%a %m-%d").to_string();
        let (before, after) = (
            zone_label(a.window.start, site, utc),
            zone_label(a.window.end, site, utc),
        );
        if before != after {
            night.push('*');
            changes.push(format!("{} ({before} to {after})", a.night_of));
        }
        let dark = a
            .dark
            .map(|d| format!("{}-{}", hhmm(d.start, site, utc), hhmm(d.end, site, utc)))
            .unwrap_or_else(|| "--".into());
        table.add_row(vec![
            Cell::new(night),
            Cell::new(t(a.sun.dusk)),
            Cell::new(t(a.civil.dusk)),
            Cell::new(t(a.nautical.dusk)),
            Cell::new(t(a.astronomical.dusk)),
            Cell::new(t(a.astronomical.dawn)),
            Cell::new(t(a.nautical.dawn)),
            Cell::new(t(a.civil.dawn)),
            Cell::new(t(a.sun.dawn)),
            Cell::new(dark),
            Cell::new(format!("{:.1}", a.dark_hours)).set_alignment(CellAlignment::Right),
            Cell::new(t(a.moonrise)),
            Cell::new(t(a.moonset)),
            Cell::new(format!("{:.0}%", a.moon_illum * 100.0)).set_alignment(CellAlignment::Right),
        ]);
    }
    out.push_str(&format!(
        "  dusk-N, dawn-N: the Sun at -N deg; {dark_header}: the dark interval at this site's level; Moon: lit fraction\n"
    ));
    if !changes.is_empty() {
        out.push_str(&format!(
            "  * the clocks change during the night of {}; each time is in the offset in force at that moment\n",
            changes.join(", ")
        ));
    }
    out.push_str(&table.to_string());
    out.push('\n');
    let mut notes: Vec<String> = Vec::new();
    for a in nights {
        for n in &a.notes {
            notes.push(format!("{}: {n}", a.night_of));
        }
    }
    if !notes.is_empty() {
        out.push_str("\nEvents marked -- do not happen:\n");
        // Many identical notes in a row (a polar summer) are summarised.
        let max = 12;
        for n in notes.iter().take(max) {
            out.push_str(&format!("  {n}\n"));
        }
        if notes.len() > max {
            out.push_str(&format!(
                "  ... and {} more such notes (see --format json)\n",
                notes.len() - max
            ));
        }
    }
    out
}
