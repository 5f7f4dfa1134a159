//! Observed mid-transit times (CSV): `target`, `tc`, `tc_sigma_days`, optional `time_system` and `source`.
//! The same reading rules as the targets file: case-insensitive headers, detected delimiter, BOM, CRLF, `#`
//! comments.

use super::{open_csv, parse_finite, CsvInput, InputError, Problems};
use crate::astro::barycentric::TimeSystem;
use std::collections::HashMap;

/// One measured mid-transit time.
#[derive(Debug, Clone, PartialEq)]
pub struct Observation {
    /// Target name as written.
    pub target: String,
    /// Mid-transit time, full Julian Date in `system`.
    pub tc: f64,
    /// 1-sigma error, days (> 0).
    pub sigma_days: f64,
    /// Time system of `tc`.
    pub system: TimeSystem,
    /// Source label (observer, night, paper), may be empty.
    pub source: String,
    /// Line in the file.
    pub line: usize,
}

const REQUIRED: [&str; 3] = ["target", "tc", "tc_sigma_days"];

/// Parse and validate an observed-times file.
pub fn parse_observed(file: &str, text: &str) -> Result<Vec<Observation>, InputError> {
    let CsvInput {
        mut reader,
        headers,
        header_line,
    } = open_csv(
        file,
        text,
        "a header (target,tc,tc_sigma_days,...) and one row per observed transit",
    )?;
    let index: HashMap<&str, usize> = ["target", "tc", "tc_sigma_days", "time_system", "source"]
        .into_iter()
        .filter_map(|name| headers.iter().position(|h| h == name).map(|i| (name, i)))
        .collect();
    let mut problems = Problems::default();
    for name in REQUIRED {
        if !index.contains_key(name) {
            problems.push(
                Some(header_line),
                name,
                format!(
                    "column {name:?} not found in the header (found: {})",
                    headers.join(", ")
                ),
            );
        }
    }
    if !problems.list_is_empty() {
        return problems.into_result(file, Vec::new());
    }
    let mut out = Vec::new();
    for record in reader.records() {
        let record = match record {
            Ok(r) => r,
            Err(e) => {
                problems.push(
                    e.position().map(|p| p.line() as usize),
                    "",
                    format!("unreadable CSV row: {e}"),
                );
                continue;
            }
        };
        let line = record.position().map(|p| p.line() as usize).unwrap_or(0);
        if record.iter().all(|f| f.trim().is_empty()) {
            continue;
        }
        if let Some(o) = parse_row(&record, &index, line, &mut problems) {
            out.push(o);
        }
    }
    if out.is_empty() && problems.list_is_empty() {
        problems.push(
            None,
            "",
            "found a header but no rows; expected one row per observed transit".into(),
        );
    }
    problems.into_result(file, out)
}

/// One observation from one row, or None with every problem of the row reported.
fn parse_row(
    record: &csv::StringRecord,
    index: &HashMap<&str, usize>,
    line: usize,
    problems: &mut Problems,
) -> Option<Observation> {
    let cell = |name: &str| {
        index
            .get(name)
            .and_then(|&i| record.get(i))
            .map(str::trim)
            .unwrap_or("")
    };
    let target = cell("target").to_string();
    if target.is_empty() {
        problems.push(
            Some(line),
            "target",
            "found an empty name; expected a target name from the targets file".into(),
        );
    }
    let tc = match parse_finite(cell("tc"), "a full Julian Date between 2400000 and 2600000") {
        Ok(v) if (2_400_000.0..2_600_000.0).contains(&v) => Some(v),
        Ok(v) => {
            problems.push(Some(line), "tc", crate::inputs::targets::not_a_full_jd(v));
            None
        }
        Err(m) => {
            problems.push(Some(line), "tc", m);
            None
        }
    };
    let sigma = match parse_finite(cell("tc_sigma_days"), "a 1-sigma error in days, > 0") {
        Ok(v) if v > 0.0 && v < 10.0 => Some(v),
        Ok(v) => {
            problems.push(
                Some(line),
                "tc_sigma_days",
                format!("found {v}, expected a 1-sigma error in days, > 0"),
            );
            None
        }
        Err(m) => {
            problems.push(Some(line), "tc_sigma_days", m);
            None
        }
    };
    let system = TimeSystem::parse(cell("time_system"));
    if system.is_none() {
        problems.push(
            Some(line),
            "time_system",
            format!(
                "found {:?}, expected BJD_TDB, HJD_UTC or JD_UTC",
                cell("time_system")
            ),
        );
    }
    if target.is_empty() {
        return None;
    }
    Some(Observation {
        target,
        tc: tc?,
        sigma_days: sigma?,
        system: system?,
        source: cell("source").to_string(),
        line,
    })
}
