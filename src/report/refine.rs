//! `refine` outputs: fit summaries, O-C tables, staleness, and the updated targets CSV.

use super::round;
use crate::ephemeris::Ephemeris;
use crate::inputs::targets::{detect_delimiter, ColumnMap, Target};
use crate::refine::{Staleness, TargetRefinement};
use comfy_table::{Cell, CellAlignment, ContentArrangement};
use serde_json::json;

/// One target's staleness at the chosen date, with the ephemeris it was computed from.
#[derive(Debug, Clone, PartialEq)]
pub struct StaleRow {
    /// Target index.
    pub target_index: usize,
    /// Whether the ephemeris is the refined one.
    pub refined: bool,
    /// The numbers.
    pub staleness: Staleness,
}

/// The plain-language status of a staleness row.
pub fn stale_status(s: &Staleness, fraction: f64) -> &'static str {
    if s.lost {
        "lost: transit times unknown"
    } else if s.fraction_of_t14 > fraction {
        "refresh first"
    } else if s.fraction_of_t14 > fraction / 2.0 {
        "refresh soon"
    } else {
        "fresh"
    }
}

/// Text report: per refined target the old and new ephemeris and the O-C table; then the staleness table.
pub fn refine_text(
    refinements: &[TargetRefinement],
    targets: &[Target],
    stale: &[StaleRow],
    stale_at: &str,
    fraction: f64,
) -> String {
    let mut out = String::new();
    for r in refinements {
        let t = &targets[r.target_index];
        let old = &t.ephemeris;
        let f = &r.fit;
        let n_obs = r.rows.iter().filter(|x| x.line.is_some()).count();
        out.push_str(&format!(
            "{}: {} observed transit{}{}\n",
            t.name,
            n_obs,
            if n_obs == 1 { "" } else { "s" },
            if r.rows.len() > n_obs {
                " + catalogue T0 as a prior point"
            } else {
                ""
            }
        ));
        out.push_str(&format!(
            "  catalogue  T0 {:.6} {} +- {:.6} d   P {:.9} +- {:.2e} d\n",
            old.t0,
            old.system.name(),
            old.t0_sigma_days,
            old.period_days,
            old.period_sigma_days
        ));
        out.push_str(&format!(
            "  refined    T0 {:.6} BJD_TDB +- {:.6} d   P {:.9} +- {:.2e} d   cov {} d^2 (epoch {} of the catalogue)\n",
            r.ephemeris.t0,
            r.ephemeris.t0_sigma_days,
            r.ephemeris.period_days,
            r.ephemeris.period_sigma_days,
            if r.ephemeris.cov_t0_period_days2.abs() < 1e-30 {
                "0".to_string()
            } else {
                format!("{:.2e}", r.ephemeris.cov_t0_period_days2)
            },
            f.ref_epoch
        ));
        if f.dof > 0 {
            out.push_str(&format!(
                "  chi-square {:.2} for {} degrees of freedom (reduced {:.2})",
                f.chi2, f.dof, f.reduced_chi2
            ));
            if f.sigma_scale > 1.0 {
                out.push_str(&format!(
                    "; sigmas scaled up by sqrt(reduced chi-square) = {:.2} (common practice)",
                    f.sigma_scale
                ));
            }
            out.push('\n');
        } else {
            out.push_str("  two points for two parameters: the line passes through both, no chi-square test possible\n");
        }
        let mut table = super::styled_table(
            vec![
                "Epoch",
                "BJD_TDB",
                "O-C min",
                "+-sig min",
                "O-C/sig",
                "Flag",
                "Source",
            ],
            ContentArrangement::Disabled,
        );
        for row in &r.rows {
            table.add_row(vec![
                Cell::new(row.epoch).set_alignment(CellAlignment::Right),
                Cell::new(format!("{:.5}", row.bjd_tdb)),
                Cell::new(format!("{:+.2}", row.o_minus_c_min)).set_alignment(CellAlignment::Right),
                Cell::new(format!("{:.2}", row.sigma_min)).set_alignment(CellAlignment::Right),
                Cell::new(format!("{:+.1}", row.n_sigma)).set_alignment(CellAlignment::Right),
                Cell::new(if row.outlier { "beyond 3 sigma" } else { "" }),
                Cell::new(match row.line {
                    Some(l) if row.source.is_empty() => format!("line {l}"),
                    Some(l) => format!("{} (line {l})", row.source),
                    None => row.source.clone(),
                }),
            ]);
        }
        for line in table.to_string().lines() {
            out.push_str("  ");
            out.push_str(line);
            out.push('\n');
        }
        out.push('\n');
    }
    if !stale.is_empty() {
        out.push_str(&format!(
            "Ephemeris age on {stale_at}: timing 1-sigma at the nearest transit, against the duration T14 (refresh first above {:.0}% of T14)\n",
            fraction * 100.0
        ));
        let mut table = super::styled_table(
            vec![
                "Target",
                "Ephemeris",
                "Epoch",
                "sigma min",
                "T14 h",
                "sigma/T14",
                "Status",
            ],
            ContentArrangement::Disabled,
        );
        for s in stale {
            let t = &targets[s.target_index];
            table.add_row(vec![
                Cell::new(&t.name),
                Cell::new(if s.refined { "refined" } else { "catalogue" }),
                Cell::new(s.staleness.epoch).set_alignment(CellAlignment::Right),
                Cell::new(format!("{:.1}", s.staleness.sigma_min))
                    .set_alignment(CellAlignment::Right),
                Cell::new(format!("{:.2}", t.t14_hours)).set_alignment(CellAlignment::Right),
                Cell::new(format!("{:.0}%", s.staleness.fraction_of_t14 * 100.0))
                    .set_alignment(CellAlignment::Right),
                Cell::new(stale_status(&s.staleness, fraction)),
            ]);
        }
        out.push_str(&table.to_string());
        out.push('\n');
    }
    out
}

fn eph_json(e: &Ephemeris) -> serde_json::Value {
    json!({
        "t0": e.t0,
        "time_system": e.system.name(),
        "t0_sigma_days": e.t0_sigma_days,
        "period_days": e.period_days,
        "period_sigma_days": e.period_sigma_days,
        "t0_period_cov_days2": e.cov_t0_period_days2,
    })
}

/// JSON: `{"refined": [...], "staleness": {...}}`.
pub fn refine_json(
    refinements: &[TargetRefinement],
    targets: &[Target],
    stale: &[StaleRow],
    stale_at: &str,
    fraction: f64,
) -> String {
    let refined: Vec<serde_json::Value> = refinements
        .iter()
        .map(|r| {
            let f = &r.fit;
            json!({
                "target": targets[r.target_index].name,
                "catalogue": eph_json(&targets[r.target_index].ephemeris),
                "refined": eph_json(&r.ephemeris),
                "reference_epoch": f.ref_epoch,
                "chi2": round(f.chi2, 4),
                "dof": f.dof,
                "reduced_chi2": if f.reduced_chi2.is_finite() { Some(round(f.reduced_chi2, 4)) } else { None },
                "sigma_scale": round(f.sigma_scale, 4),
                "o_minus_c": r.rows.iter().map(|row| json!({
                    "epoch": row.epoch,
                    "bjd_tdb": row.bjd_tdb,
                    "o_minus_c_min": round(row.o_minus_c_min, 3),
                    "sigma_min": round(row.sigma_min, 3),
                    "n_sigma": round(row.n_sigma, 2),
                    "outlier": row.outlier,
                    "source": row.source,
                    "line": row.line,
                })).collect::<Vec<_>>(),
            })
        })
        .collect();
    let staleness: Vec<serde_json::Value> = stale
        .iter()
        .map(|s| {
            json!({
                "target": targets[s.target_index].name,
                "ephemeris": if s.refined { "refined" } else { "catalogue" },
                "epoch": s.staleness.epoch,
                "sigma_min": round(s.staleness.sigma_min, 2),
                "sigma_over_t14": round(s.staleness.fraction_of_t14, 4),
                "status": stale_status(&s.staleness, fraction),
            })
        })
        .collect();
    let doc = json!({
        "refined": refined,
        "staleness": {"date": stale_at, "refresh_fraction_of_t14": fraction, "targets": staleness},
    });
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
}

/// CSV: one row per target with its (refined or catalogue) ephemeris, fit statistics and staleness.
pub fn refine_csv(
    refinements: &[TargetRefinement],
    targets: &[Target],
    stale: &[StaleRow],
    fraction: f64,
) -> String {
    let mut w = csv::Writer::from_writer(Vec::new());
    let _ = w.write_record([
        "target",
        "refined",
        "t0",
        "time_system",
        "t0_sigma_days",
        "period_days",
        "period_sigma_days",
        "t0_period_cov_days2",
        "n_points",
        "chi2",
        "reduced_chi2",
        "sigma_scale",
        "outliers",
        "sigma_min_at_date",
        "sigma_over_t14",
        "status",
    ]);
    for s in stale {
        let t = &targets[s.target_index];
        let r = refinements
            .iter()
            .find(|r| r.target_index == s.target_index);
        let e = r.map(|r| &r.ephemeris).unwrap_or(&t.ephemeris);
        let opt = |x: Option<f64>| {
            x.filter(|v| v.is_finite())
                .map(|v| format!("{}", round(v, 4)))
                .unwrap_or_default()
        };
        let _ = w.write_record([
            t.name.clone(),
            r.is_some().to_string(),
            format!("{:.6}", e.t0),
            e.system.name().to_string(),
            format!("{:.3e}", e.t0_sigma_days),
            format!("{:.9}", e.period_days),
            format!("{:.3e}", e.period_sigma_days),
            format!("{:.3e}", e.cov_t0_period_days2),
            r.map(|r| r.rows.len().to_string()).unwrap_or_default(),
            opt(r.map(|r| r.fit.chi2)),
            opt(r.map(|r| r.fit.reduced_chi2)),
            opt(r.map(|r| r.fit.sigma_scale)),
            r.map(|r| r.rows.iter().filter(|x| x.outlier).count().to_string())
                .unwrap_or_default(),
            format!("{:.2}", s.staleness.sigma_min),
            format!("{:.4}", s.staleness.fraction_of_t14),
            stale_status(&s.staleness, fraction).to_string(),
        ]);
    }
    String::from_utf8(w.into_inner().unwrap_or_default()).unwrap_or_default()
}

/// The targets file with refined ephemerides written in: the same columns and rows (comment lines before
/// the header kept), T0, its sigma, the period, its sigma, the covariance and the time system replaced for the
/// refined targets; covariance and time-system columns are appended when the file has none.
pub fn rewrite_targets_csv(
    original: &str,
    map: &ColumnMap,
    updates: &[(String, Ephemeris)],
) -> Result<String, String> {
    let text = original.strip_prefix('\u{feff}').unwrap_or(original);
    let delimiter = detect_delimiter(text);
    let leading_comments: Vec<&str> = text
        .lines()
        .take_while(|l| l.trim_start().starts_with('#'))
        .collect();
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .comment(Some(b'#'))
        .flexible(true)
        .has_headers(false)
        .from_reader(text.as_bytes());
    let mut rows: Vec<Vec<String>> = Vec::new();
    for r in reader.records() {
        let r = r.map_err(|e| format!("cannot re-read the targets file: {e}"))?;
        rows.push(r.iter().map(str::to_string).collect());
    }
    if rows.is_empty() {
        return Err("the targets file has no header".into());
    }
    let col = |rows: &mut Vec<Vec<String>>, ours: &str| -> usize {
        let theirs = map
            .0
            .get(ours)
            .cloned()
            .unwrap_or_else(|| ours.to_string())
            .to_lowercase();
        match rows[0]
            .iter()
            .position(|h| h.trim().to_lowercase() == theirs)
        {
            Some(i) => i,
            None => {
                rows[0].push(ours.to_string());
                rows[0].len() - 1
            }
        }
    };
    let name_i = col(&mut rows, "name");
    let cols = [
        col(&mut rows, "t0"),
        col(&mut rows, "t0_sigma_days"),
        col(&mut rows, "period_days"),
        col(&mut rows, "period_sigma_days"),
        col(&mut rows, "t0_period_cov_days2"),
        col(&mut rows, "time_system"),
    ];
    let width = rows[0].len();
    for row in rows.iter_mut().skip(1) {
        row.resize(width.max(row.len()), String::new());
        let Some((_, e)) = updates
            .iter()
            .find(|(n, _)| row[name_i].trim().eq_ignore_ascii_case(n))
        else {
            continue;
        };
        let values = [
            format!("{:.6}", e.t0),
            format!("{:.3e}", e.t0_sigma_days),
            format!("{:.9}", e.period_days),
            format!("{:.3e}", e.period_sigma_days),
            format!("{:.3e}", e.cov_t0_period_days2),
            e.system.name().to_string(),
        ];
        for (i, v) in cols.iter().zip(values) {
            row[*i] = v;
        }
    }
    let mut w = csv::WriterBuilder::new()
        .delimiter(delimiter)
        .from_writer(Vec::new());
    for row in &rows {
        w.write_record(row).map_err(|e| e.to_string())?;
    }
    let body =
        String::from_utf8(w.into_inner().map_err(|e| e.to_string())?).map_err(|e| e.to_string())?;
    let mut out = String::new();
    for c in leading_comments {
        out.push_str(c);
        out.push('\n');
    }
    out.push_str(&body);
    Ok(out)
}
