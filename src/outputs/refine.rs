//! `refine` outputs: fit summaries, O-C tables, staleness, and the updated targets CSV.

use super::round;
use crate::engine::refine::{FitKind, LinearFit, StaleRow, Staleness, TargetRefinement, Tension};
use crate::ephemeris::Ephemeris;
use crate::inputs::targets::{detect_delimiter, ColumnMap, Target};
use comfy_table::{Cell, CellAlignment, ContentArrangement};
use serde_json::json;

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

/// `T 1.2 sigma, P 0.4 sigma` for a tension.
pub fn tension_text(t: &Tension) -> String {
    match t.p_sigmas {
        Some(p) => format!("T0 {:.1} sigma, P {:.1} sigma", t.t_sigmas, p),
        None => format!("{:.1} sigma (one epoch: P not measured)", t.t_sigmas),
    }
}

fn cov_text(c: f64) -> String {
    if c.abs() < 1e-30 {
        "0".to_string()
    } else {
        format!("{c:.2e}")
    }
}

/// One fit as a line: T0 at its reference epoch, P, their sigmas and covariance, the chi-square.
fn fit_line(label: &str, f: &LinearFit, written: bool) -> String {
    let chi = if f.dof > 0 {
        format!(
            "chi2 {:.2}/{} dof{}",
            f.chi2,
            f.dof,
            if f.sigma_scale > 1.0 {
                format!(", sigmas x{:.2}", f.sigma_scale)
            } else {
                String::new()
            }
        )
    } else {
        "no chi-square test (as many data as parameters)".to_string()
    };
    format!(
        "  {label:<18} T0 {:.6} BJD_TDB +- {:.6} d   P {:.9} +- {:.2e} d{}\n  {:<18} cov {} d^2, T0 at epoch {} of the catalogue, {chi}\n",
        f.t_ref,
        f.sigma_t_ref_days,
        f.period_days,
        f.sigma_period_days,
        if written { "   <- refined" } else { "" },
        "",
        cov_text(f.cov_days2),
        f.ref_epoch,
    )
}

/// Text report: per refined target the catalogue ephemeris, both fits (the one reported as refined marked),
/// the tension between the observations and the catalogue, and the O-C table against both; then the
/// staleness table.
pub fn refine_text(
    refinements: &[TargetRefinement],
    targets: &[Target],
    stale: &[StaleRow],
    stale_at: &str,
    fraction: f64,
) -> String {
    let mut out = String::new();
    for r in refinements {
        push_refinement(&mut out, r, &targets[r.target_index]);
    }
    if !stale.is_empty() {
        push_staleness(&mut out, stale, targets, stale_at, fraction);
    }
    out
}

/// One refined target: the catalogue, both fits, the tension and the O-C table.
fn push_refinement(out: &mut String, r: &TargetRefinement, t: &Target) {
    let old = &t.ephemeris;
    let n_obs = r.rows.len();
    out.push_str(&format!(
        "{}: {} observed transit{}\n",
        t.name,
        n_obs,
        if n_obs == 1 { "" } else { "s" },
    ));
    out.push_str(&format!(
        "  {:<18} T0 {:.6} {} +- {:.6} d   P {:.9} +- {:.2e} d\n{}",
        "catalogue",
        old.t0,
        old.system.name(),
        old.t0_sigma_days,
        old.period_days,
        old.period_sigma_days,
        if old.cov_t0_period_days2 == 0.0 {
            String::new()
        } else {
            format!(
                "  {:<18} cov {} d^2\n",
                "",
                cov_text(old.cov_t0_period_days2)
            )
        }
    ));
    match &r.with_prior {
        Some(f) => out.push_str(&fit_line(
            "with prior",
            f,
            r.written == FitKind::WithPrior,
        )),
        None => out.push_str("  with prior         not possible: the catalogue gives no errors and the observations hold one epoch\n"),
    }
    match &r.observations_only {
        Some(f) => out.push_str(&fit_line(
            "observations only",
            f,
            r.written == FitKind::ObservationsOnly,
        )),
        None => out.push_str(
            "  observations only  not possible: one epoch cannot fix T0 and P without the catalogue\n",
        ),
    }
    out.push_str(&format!(
        "  observations against the catalogue: {}{}\n",
        tension_text(&r.tension),
        if r.tension.is_serious() {
            format!(
                " - MORE THAN {} SIGMA: the observations and the catalogue disagree; not written without --accept-tension",
                crate::engine::refine::TENSION_SIGMAS
            )
        } else {
            String::new()
        }
    ));
    push_oc_table(out, r);
}

/// The O-C table of one refined target: against the refined ephemeris and against the catalogue.
fn push_oc_table(out: &mut String, r: &TargetRefinement) {
    let mut table = super::styled_table(
        vec![
            "Epoch",
            "BJD_TDB",
            "O-C min",
            "+-sig",
            "O-C/sig",
            "O-cat min",
            "+-comb",
            "O-cat/sig",
            "Flag",
            "Source",
        ],
        ContentArrangement::Disabled,
    );
    for row in &r.rows {
        let mut flags = Vec::new();
        if row.outlier {
            flags.push("fit>3sig");
        }
        if row.cat_outlier {
            flags.push("cat>3sig");
        }
        table.add_row(vec![
            Cell::new(row.epoch).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:.5}", row.bjd_tdb)),
            Cell::new(format!("{:+.2}", row.o_minus_c_min)).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:.2}", row.sigma_min)).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:+.1}", row.n_sigma)).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:+.2}", row.o_minus_cat_min)).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:.2}", row.cat_sigma_min)).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:+.1}", row.cat_n_sigma)).set_alignment(CellAlignment::Right),
            Cell::new(flags.join("; ")),
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
    out.push_str("  O-C: against the refined ephemeris; O-cat: against the catalogue prediction, with the combined sigma of both;\n  fit>3sig, cat>3sig: beyond 3 sigma of either.\n\n");
}

/// The staleness table, stalest first.
fn push_staleness(
    out: &mut String,
    stale: &[StaleRow],
    targets: &[Target],
    stale_at: &str,
    fraction: f64,
) {
    out.push_str(&format!(
        "Ephemeris age on {stale_at}: timing 1-sigma at the nearest transit, against the duration T14\n  (refresh first above {:.0}% of T14)\n",
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
            Cell::new(format!("{:.1}", s.staleness.sigma_min)).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:.2}", t.t14_hours)).set_alignment(CellAlignment::Right),
            Cell::new(format!("{:.0}%", s.staleness.fraction_of_t14 * 100.0))
                .set_alignment(CellAlignment::Right),
            Cell::new(stale_status(&s.staleness, fraction)),
        ]);
    }
    out.push_str(&table.to_string());
    out.push('\n');
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

fn fit_json(f: &LinearFit) -> serde_json::Value {
    let mut v = eph_json(&f.ephemeris());
    v["reference_epoch"] = json!(f.ref_epoch);
    v["chi2"] = json!(round(f.chi2, 4));
    v["dof"] = json!(f.dof);
    v["sigma_scale"] = json!(round(f.sigma_scale, 4));
    v
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
                "refined_from": r.written.label(),
                "with_prior": r.with_prior.as_ref().map(fit_json),
                "observations_only": r.observations_only.as_ref().map(fit_json),
                "tension": {
                    "t0_sigmas": round(r.tension.t_sigmas, 2),
                    "period_sigmas": r.tension.p_sigmas.map(|p| round(p, 2)),
                    "serious": r.tension.is_serious(),
                },
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
                    "o_minus_catalogue_min": round(row.o_minus_cat_min, 3),
                    "catalogue_combined_sigma_min": round(row.cat_sigma_min, 3),
                    "catalogue_n_sigma": round(row.cat_n_sigma, 2),
                    "catalogue_outlier": row.cat_outlier,
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
        "refined_from",
        "tension_sigmas",
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
            r.map(|r| r.written.label().to_string()).unwrap_or_default(),
            opt(r.map(|r| r.tension.worst())),
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
    // Each of our columns -> the file's column(s); a two-sided error (`ours=PLUS|MINUS`) names two.
    let cols_of = |rows: &mut Vec<Vec<String>>, ours: &str| -> Vec<usize> {
        let mapped = map
            .0
            .get(ours)
            .cloned()
            .unwrap_or_else(|| ours.to_string())
            .to_lowercase();
        mapped
            .split('|')
            .map(|theirs| {
                let theirs = theirs.trim();
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
            })
            .collect()
    };
    let name_i = cols_of(&mut rows, "name")[0];
    let cols = [
        cols_of(&mut rows, "t0"),
        cols_of(&mut rows, "t0_sigma_days"),
        cols_of(&mut rows, "period_days"),
        cols_of(&mut rows, "period_sigma_days"),
        cols_of(&mut rows, "t0_period_cov_days2"),
        cols_of(&mut rows, "time_system"),
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
        // Written in the catalogue's own units where the mapping names them.
        let back = |col: &str, v: f64| match map.1.get(col) {
            Some(u) => crate::inputs::units::from_canonical(col, *u, v),
            None => v,
        };
        let values = [
            format!("{:.6}", back("t0", e.t0)),
            format!("{:.3e}", back("t0_sigma_days", e.t0_sigma_days)),
            format!("{:.9}", back("period_days", e.period_days)),
            format!("{:.3e}", back("period_sigma_days", e.period_sigma_days)),
            format!("{:.3e}", e.cov_t0_period_days2),
            e.system.name().to_string(),
        ];
        for (targets, v) in cols.iter().zip(values) {
            for (k, &i) in targets.iter().enumerate() {
                // The minus side of a two-sided error keeps a leading minus sign if the file uses one.
                let negative = k > 0 && row[i].trim_start().starts_with('-');
                row[i] = if negative { format!("-{v}") } else { v.clone() };
            }
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
