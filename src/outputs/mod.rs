//! Outputs: terminal tables, CSV and JSON, calendars and charts. Pure formatting: values in, strings out.

pub mod calendar;
pub mod chart;
pub mod columns;
pub mod names;
mod nights;
mod plan;
mod refine;
mod schedule;
mod tonight;

pub use columns::{
    csv_header, event_field_names, event_json, events_ecsv, push_event_csv_rows, Column, EventRow,
    Meta, RowText, Value, EVENT_COLUMNS,
};
pub use nights::{nights_csv, nights_json, nights_table, NightRecord, NIGHT_FIELDS};
pub use plan::{lost_json, plan_csv, plan_json, plan_table, site_json};
pub use refine::{
    refine_csv, refine_json, refine_text, rewrite_targets_csv, stale_status, tension_text,
};
pub use schedule::{
    schedule_csv, schedule_ecsv, schedule_json, schedule_table, ScheduledRow, SCHEDULE_COLUMNS,
};
pub use tonight::{countdown, tonight_json, tonight_text};

use crate::astro::civil::{local_hhmm, zone_abbreviation};
use crate::inputs::sites::Site;

fn round(x: f64, decimals: i32) -> f64 {
    let k = 10f64.powi(decimals);
    (x * k).round() / k
}

/// `x` rounded down to `decimals` places: for fractions a person acts on (coverage), never shown higher than
/// they are. The 1e-9 guard only absorbs binary noise (0.29 * 100 = 28.999999999999996). The floor by
/// truncation ([`crate::astro::frames::floor_fast`], the same value): a coverage in every row of a plan.
pub fn floor_to(x: f64, decimals: i32) -> f64 {
    let k = 10f64.powi(decimals);
    crate::astro::frames::floor_fast((x * k) + 1e-9) / k
}

/// A fraction 0-1 as a whole percentage rounded down: `99%` for 0.995, `100%` only for the whole.
pub fn percent_floor(frac: f64) -> String {
    format!("{:.0}%", floor_to(frac * 100.0, 0))
}

/// The expected photometry of an event in one line (tonight, calendar): exposure, noise per 10 minutes, SNR
/// rounded down, and a saturation warning above the suggested-exposure limit.
pub fn photometry_line(n: &crate::engine::noise::EventNoise) -> String {
    format!(
        "Photometry: {:.0} s exposures, {:.2} ppt per 10 min, SNR {}{}",
        n.exposure_s,
        n.noise_10min_ppt,
        n.snr
            .map(|x| format!("{:.1}", floor_to(x, 1)))
            .unwrap_or_else(|| "-- (no depth)".into()),
        if n.peak_well_fraction > crate::engine::noise::WELL_FRACTION_LIMIT {
            format!(
                "; SATURATES ({:.0}% of full well): defocus",
                n.peak_well_fraction * 100.0
            )
        } else {
            String::new()
        }
    )
}

/// Mark for a block edge clipped to the usable run (twilight, altitude or another limit cuts the theoretical
/// block there).
pub const CLIPPED_EDGE_MARK: &str = "~";

/// The block as it can be observed, `HH:MM-HH:MM`, with [`CLIPPED_EDGE_MARK`] beside an edge that the
/// usable run clipped.
fn block_text(e: &crate::engine::plan::Event, site: &Site, utc: bool) -> String {
    let start_mark = if e.start_clipped() {
        CLIPPED_EDGE_MARK
    } else {
        ""
    };
    let end_mark = if e.end_clipped() {
        CLIPPED_EDGE_MARK
    } else {
        ""
    };
    format!(
        "{start_mark}{}-{}{end_mark}",
        hhmm(e.block_start_utc, site, utc),
        hhmm(e.block_end_utc, site, utc)
    )
}

/// `HH:MM` in site local time, or UTC.
fn hhmm(jd: f64, site: &Site, utc: bool) -> String {
    if utc {
        crate::astro::civil::datetime_from_jd(jd)
            .format("%H:%M")
            .to_string()
    } else {
        local_hhmm(jd, site.tz)
    }
}

/// The zone abbreviation in force at `jd`, or `UTC`.
fn zone_label(jd: f64, site: &Site, utc: bool) -> String {
    if utc {
        "UTC".into()
    } else {
        zone_abbreviation(jd, site.tz)
    }
}

/// "UTC", or the zone abbreviations in force over the night windows, in order (`GMT then BST`), with the IANA
/// name: how the tables say which clock their times are on.
fn clock_label(
    windows: impl Iterator<Item = crate::astro::crossings::Interval>,
    site: &Site,
    utc: bool,
) -> String {
    if utc {
        return "UTC".into();
    }
    let mut zones: Vec<String> = windows
        .flat_map(|w| [zone_label(w.start, site, utc), zone_label(w.end, site, utc)])
        .collect();
    zones.dedup();
    format!("{} ({})", zones.join(" then "), site.tz.name())
}

/// The headers of the cells of [`event_cells`], the first columns of every event table.
const EVENT_CELL_HEADERS: [&str; 6] = [
    "Night",
    "Target",
    "Verdict",
    "Cover",
    "Block",
    "Ingr  Mid   Egr",
];

/// A table of events 120 columns wide, the columns of [`event_cells`] then `more`: no padding (the column rules
/// separate), the content arranged dynamically.
fn wide_table(more: &[&str]) -> comfy_table::Table {
    let header: Vec<&str> = EVENT_CELL_HEADERS.iter().chain(more).copied().collect();
    let mut table = styled_table(header, comfy_table::ContentArrangement::Dynamic);
    table.set_width(120);
    for col in table.column_iter_mut() {
        col.set_padding((0, 0));
    }
    table
}

/// Let only the last column of `table` wrap: every other column keeps its content width.
fn last_column_wraps(table: &mut comfy_table::Table) {
    let last = table.column_count() - 1;
    for (i, col) in table.column_iter_mut().enumerate() {
        if i != last {
            col.set_constraint(comfy_table::ColumnConstraint::ContentWidth);
        }
    }
}

/// The table style of every terminal table: a rule under the header and column separators, no outer frame
/// (comfy-table preset string), columns padded by one space on the right.
fn styled_table(
    header: Vec<&str>,
    arrangement: comfy_table::ContentArrangement,
) -> comfy_table::Table {
    let mut table = comfy_table::Table::new();
    table
        .load_preset("     ─┼ │          ")
        .set_content_arrangement(arrangement)
        .set_header(header);
    for col in table.column_iter_mut() {
        col.set_padding((0, 1));
    }
    table
}

/// The legend of the short verdict labels of the tables.
pub const VERDICT_LEGEND: &str = "\
Verdict: whole = ingress to egress with their margins and both baselines; whole/sb = the same with less
  baseline than asked; ingress, egress = only that contact with its margin; middle = in transit, neither contact;
  none = not observable.";

/// The legend of event kinds, for tables listing anything besides transits.
pub const KIND_LEGEND: &str = "\
Kinds: [occ] = occultation (secondary eclipse; Ingr/Egr its contacts); [rv+], [rv-] = the star's largest
  positive, negative radial velocity; [A-B] = orbital phase window (0 at mid-transit). For these windows the
  three times are start, centre and end; window = the whole window with its margins, part = part of it.";

/// The kinds legend when `targets` plan anything but transits, else nothing.
pub fn kind_legend(targets: &[crate::inputs::targets::Target]) -> String {
    if targets
        .iter()
        .any(|t| t.kind != crate::orbit::EventKind::Transit)
    {
        format!("{KIND_LEGEND}\n")
    } else {
        String::new()
    }
}

/// The first cells of a table row about an event: night (as given), target, verdict, coverage, block, and the
/// ingress, mid-transit and egress times; shared by the plan and schedule tables.
fn event_cells(
    night: String,
    target: &str,
    e: &crate::engine::plan::Event,
    site: &Site,
    utc: bool,
) -> Vec<comfy_table::Cell> {
    use comfy_table::{Cell, CellAlignment};
    vec![
        Cell::new(night),
        Cell::new(target),
        Cell::new(e.verdict.short_label()),
        Cell::new(percent_floor(e.coverage)).set_alignment(CellAlignment::Right),
        Cell::new(block_text(e, site, utc)),
        Cell::new(format!(
            "{} {} {}",
            hhmm(e.ingress_utc, site, utc),
            hhmm(e.mid_utc, site, utc),
            hhmm(e.egress_utc, site, utc)
        )),
    ]
}

/// Write CSV rows from serializable records whose JSON form has scalar or list values: null -> empty, lists
/// joined with `;`. The header is `fields`.
fn csv_from_records<T: serde::Serialize>(fields: &[&str], records: &[T]) -> String {
    let mut w = csv::WriterBuilder::new()
        .has_headers(false)
        .from_writer(Vec::new());
    let _ = w.write_record(fields);
    for r in records {
        let value = serde_json::to_value(r).unwrap_or_default();
        let cells: Vec<String> = value
            .as_object()
            .map(|o| o.values().map(csv_cell).collect())
            .unwrap_or_default();
        let _ = w.write_record(cells);
    }
    String::from_utf8(w.into_inner().unwrap_or_default()).unwrap_or_default()
}

fn csv_cell(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::Null => String::new(),
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Array(items) => items.iter().map(csv_cell).collect::<Vec<_>>().join(";"),
        other => other.to_string(),
    }
}
