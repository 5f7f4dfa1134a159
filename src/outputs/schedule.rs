//! `schedule` outputs: the chosen blocks per telescope and night.

use super::columns::{
    event_json, insert_json, push_csv_fields, push_header, Column, EventRow, Meta, Value,
    EVENT_COLUMNS,
};
use crate::engine::schedule::{Chosen, ScoreWeights, TelescopeEvents};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use comfy_table::{Cell, CellAlignment};

/// A chosen block with what its extra columns need.
pub struct ScheduledRow<'a> {
    /// The choice.
    pub chosen: &'a Chosen,
    /// The telescopes it was chosen among.
    pub tels: &'a [TelescopeEvents],
    /// The sites.
    pub sites: &'a [Site],
}

/// How a schedule column takes its value from a [`ScheduledRow`].
pub type ScheduledValue = for<'r, 'a> fn(&'r ScheduledRow<'a>) -> Value<'r>;

/// The columns a scheduled event has after the event columns ([`super::EVENT_COLUMNS`]).
pub const SCHEDULE_COLUMNS: &[Column<ScheduledValue>] = &[
    Column {
        name: "score",
        meta: Meta {
            datatype: "float64",
            unit: None,
            description: "schedule score",
        },
        value: |r| Value::Fixed(r.chosen.score, 4),
    },
    Column {
        name: "paired_with",
        meta: Meta {
            datatype: "string",
            unit: None,
            description: "the telescope holding the other contact of a complementary pair",
        },
        value: |r| match r.chosen.pair {
            Some((t, _)) => Value::Owned(tel_label(r.tels, r.sites, t)),
            None => Value::Null,
        },
    },
    Column {
        name: "combined_coverage",
        meta: Meta {
            datatype: "float64",
            unit: None,
            description: "coverage of the pair together, rounded down",
        },
        value: |r| match r.chosen.pair {
            Some((_, cov)) => Value::FloorFixed(cov, 3),
            None => Value::Null,
        },
    },
];

fn tel_label(tels: &[TelescopeEvents], sites: &[Site], i: usize) -> String {
    let t = &tels[i];
    sites[t.site_index].station_label(t.telescope_index)
}

/// JSON: `{"weights": ..., "changeover_min": ..., "scheduled": [...]}`: each scheduled event has the event
/// fields, then `telescope`, `score`, `paired_with`, `combined_coverage`.
pub fn schedule_json(
    chosen: &[Chosen],
    tels: &[TelescopeEvents],
    sites: &[Site],
    targets: &[Target],
    weights: &crate::engine::schedule::ScoreWeights,
    changeover_min: f64,
) -> String {
    let recs: Vec<serde_json::Value> = chosen
        .iter()
        .map(|c| {
            let mut obj = event_json(&EventRow::of(&c.event, sites, targets));
            let row = ScheduledRow {
                chosen: c,
                tels,
                sites,
            };
            insert_json(SCHEDULE_COLUMNS, |f| f(&row), &mut obj);
            serde_json::Value::Object(obj)
        })
        .collect();
    let doc = serde_json::json!({"weights": weights, "changeover_min": changeover_min, "scheduled": recs});
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
}

/// CSV: the event columns (written exactly as `plan` writes them) followed by `telescope`, `score`,
/// `paired_with`, `combined_coverage`.
pub fn schedule_csv(
    chosen: &[Chosen],
    tels: &[TelescopeEvents],
    sites: &[Site],
    targets: &[Target],
) -> String {
    let mut out = String::new();
    push_header(EVENT_COLUMNS, &mut out);
    out.push(',');
    push_header(SCHEDULE_COLUMNS, &mut out);
    out.push('\n');
    let mut out = out.into_bytes();
    push_rows(chosen, (tels, sites, targets), false, &mut out);
    super::columns::into_text(out)
}

/// ECSV (astropy APE 6): the event columns, then `telescope`, `score`, `paired_with`, `combined_coverage`.
pub fn schedule_ecsv(
    chosen: &[Chosen],
    tels: &[TelescopeEvents],
    sites: &[Site],
    targets: &[Target],
) -> String {
    use super::columns::{metas, push_ecsv_header};
    let mut out = String::new();
    push_ecsv_header(
        metas(EVENT_COLUMNS).chain(metas(SCHEDULE_COLUMNS)),
        &mut out,
    );
    let mut out = out.into_bytes();
    push_rows(chosen, (tels, sites, targets), true, &mut out);
    super::columns::into_text(out)
}

/// One line per chosen block: the event columns, then the schedule's, as CSV (or ECSV with `ecsv`).
fn push_rows(
    chosen: &[Chosen],
    (tels, sites, targets): (&[TelescopeEvents], &[Site], &[Target]),
    ecsv: bool,
    out: &mut Vec<u8>,
) {
    use super::columns::push_ecsv_fields;
    for c in chosen {
        let row = EventRow::of(&c.event, sites, targets);
        let extra = ScheduledRow {
            chosen: c,
            tels,
            sites,
        };
        if ecsv {
            push_ecsv_fields(EVENT_COLUMNS, |f| f(&row), out);
            out.push(b',');
            push_ecsv_fields(SCHEDULE_COLUMNS, |f| f(&extra), out);
        } else {
            push_csv_fields(EVENT_COLUMNS, |f| f(&row), out);
            out.push(b',');
            push_csv_fields(SCHEDULE_COLUMNS, |f| f(&extra), out);
        }
        out.push(b'\n');
    }
}

/// The terminal table: one table per telescope, rows grouped by night, site local time (or UTC).
pub fn schedule_table(
    chosen: &[Chosen],
    tels: &[TelescopeEvents],
    sites: &[Site],
    targets: &[Target],
    (weights, utc): (&ScoreWeights, bool),
) -> String {
    let mut out = String::new();
    for (ti, tel) in tels.iter().enumerate() {
        let site = &sites[tel.site_index];
        let rows: Vec<&Chosen> = chosen.iter().filter(|c| c.telescope_index == ti).collect();
        if ti > 0 {
            out.push('\n');
        }
        out.push_str(&format!(
            "{}: {} blocks chosen from {} candidates\n",
            tel_label(tels, sites, ti),
            rows.len(),
            tel.events.iter().filter(|e| e.observable).count()
        ));
        if rows.is_empty() {
            continue;
        }
        let mut table = super::wide_table(&["Score", "Notes"]);
        let mut prev = None;
        for c in rows {
            let e = &c.event;
            let night = if prev != Some(e.night_of) {
                e.night_of.format("%a %m-%d").to_string()
            } else {
                String::new()
            };
            prev = Some(e.night_of);
            let note = match c.pair {
                Some((other, cov)) => format!(
                    "+ {} = {}",
                    tel_label(tels, sites, other),
                    super::percent_floor(cov)
                ),
                None => String::new(),
            };
            let mut cells =
                super::event_cells(night, &targets[e.target_index].label(), e, site, utc);
            cells.push(Cell::new(format!("{:.2}", c.score)).set_alignment(CellAlignment::Right));
            cells.push(Cell::new(note));
            table.add_row(cells);
        }
        out.push_str(&table.to_string());
        out.push('\n');
    }
    if !chosen.is_empty() {
        out.push('\n');
        out.push_str(super::VERDICT_LEGEND);
        let kinds = super::kind_legend(targets);
        if !kinds.is_empty() {
            out.push('\n');
            out.push_str(kinds.trim_end());
        }
        out.push_str(&format!(
            "\nScore: priority x ({} x coverage + {} x verdict value + {} / airmass at mid-transit + {} x Moon distance/90 deg\n  + {} x timing sigma/30 min + {} x SNR/20); verdict values whole 1, whole/sb 0.8, ingress or egress 0.5, middle 0.2,\n  window 1, part 0.5.\n  Higher is better; each telescope-night takes the set of blocks with the highest total.\nNotes: + TELESCOPE = N%: paired with the other contact of the same transit there; together they cover N%.\n",
            weights.coverage, weights.verdict, weights.airmass, weights.moon, weights.sigma, weights.snr
        ));
    }
    out
}
