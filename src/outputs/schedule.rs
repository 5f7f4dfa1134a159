//! `schedule` outputs: the chosen blocks per telescope and night.

use super::{round, EventRecord, EVENT_FIELDS};
use crate::engine::schedule::{Chosen, TelescopeEvents};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use comfy_table::{Cell, CellAlignment, ContentArrangement};

/// Extra fields of a scheduled event, after the plan's event fields.
pub const SCHEDULE_FIELDS: &[&str] = &["telescope", "score", "paired_with", "combined_coverage"];

fn tel_label(tels: &[TelescopeEvents], sites: &[Site], i: usize) -> String {
    let t = &tels[i];
    let site = &sites[t.site_index];
    if site.telescopes.len() == 1 {
        site.name.clone()
    } else {
        format!("{} / {}", site.name, t.telescope)
    }
}

fn record(
    c: &Chosen,
    tels: &[TelescopeEvents],
    sites: &[Site],
    targets: &[Target],
) -> serde_json::Value {
    let mut v =
        serde_json::to_value(EventRecord::new(&c.event, sites, targets)).unwrap_or_default();
    if let Some(obj) = v.as_object_mut() {
        obj.insert(
            "telescope".into(),
            tels[c.telescope_index].telescope.clone().into(),
        );
        obj.insert("score".into(), round(c.score, 4).into());
        obj.insert(
            "paired_with".into(),
            c.pair.map(|(t, _)| tel_label(tels, sites, t)).into(),
        );
        obj.insert(
            "combined_coverage".into(),
            c.pair.map(|(_, cov)| round(cov, 3)).into(),
        );
    }
    v
}

/// JSON: `{"weights": ..., "changeover_min": ..., "scheduled": [...]}`.
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
        .map(|c| record(c, tels, sites, targets))
        .collect();
    let doc = serde_json::json!({"weights": weights, "changeover_min": changeover_min, "scheduled": recs});
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
}

/// CSV: the plan's event columns followed by `telescope`, `score`, `paired_with`, `combined_coverage`.
pub fn schedule_csv(
    chosen: &[Chosen],
    tels: &[TelescopeEvents],
    sites: &[Site],
    targets: &[Target],
) -> String {
    let fields: Vec<&str> = EVENT_FIELDS
        .iter()
        .chain(SCHEDULE_FIELDS)
        .copied()
        .collect();
    let recs: Vec<serde_json::Value> = chosen
        .iter()
        .map(|c| record(c, tels, sites, targets))
        .collect();
    super::csv_from_records(&fields, &recs)
}

/// The terminal table: one table per telescope, rows grouped by night, site local time (or UTC).
pub fn schedule_table(
    chosen: &[Chosen],
    tels: &[TelescopeEvents],
    sites: &[Site],
    targets: &[Target],
    utc: bool,
) -> String {
    let mut out = String::new();
    for (ti, tel) in tels.iter().enumerate() {
        let site = &sites[tel.site_index];
        let rows: Vec<&Chosen> = chosen.iter().filter(|c| c.telescope_index == ti).collect();
        out.push_str(&format!(
            "\n{}: {} blocks chosen from {} candidates\n",
            tel_label(tels, sites, ti),
            rows.len(),
            tel.events.iter().filter(|e| e.observable).count()
        ));
        if rows.is_empty() {
            continue;
        }
        let mut table = super::styled_table(
            vec![
                "Night",
                "Target",
                "Verdict",
                "Cover",
                "Block",
                "Ingr  Mid   Egr",
                "Score",
                "Notes",
            ],
            ContentArrangement::Dynamic,
        );
        table.set_width(120);
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
                    "paired with {} for {:.0}% together",
                    tel_label(tels, sites, other),
                    cov * 100.0
                ),
                None => String::new(),
            };
            let mut cells = super::event_cells(night, &targets[e.target_index].name, e, site, utc);
            cells.push(Cell::new(format!("{:.2}", c.score)).set_alignment(CellAlignment::Right));
            cells.push(Cell::new(note));
            table.add_row(cells);
        }
        out.push_str(&table.to_string());
        out.push('\n');
    }
    out
}
