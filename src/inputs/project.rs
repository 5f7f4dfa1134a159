//! The project file, `dipwatch.toml`: where the sites and targets files are, how the targets' columns are mapped
//! (with units), and the defaults of the plan options, so that a team types them once. Options given on the
//! command line win over the file; the file wins over dipwatch's built-in defaults.

use super::{InputError, Problems};
use serde::Deserialize;
use toml::Spanned;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProject {
    sites: Option<Spanned<String>>,
    targets: Option<Spanned<String>>,
    columns: Option<Spanned<String>>,
    plan: Option<RawPlan>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPlan {
    sigma: Option<Spanned<f64>>,
    baseline_before: Option<Spanned<f64>>,
    baseline_after: Option<Spanned<f64>>,
    min_coverage: Option<Spanned<f64>>,
    min_in_transit: Option<Spanned<f64>>,
    format: Option<Spanned<String>>,
}

/// One setting of the project file with the line it is on.
#[derive(Debug, Clone, PartialEq)]
pub struct Setting<T> {
    /// The value.
    pub value: T,
    /// Line in the project file.
    pub line: usize,
}

/// The settings of a project file. Paths are as written (relative to the project file's folder).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Project {
    /// Sites file.
    pub sites: Option<Setting<String>>,
    /// Targets file.
    pub targets: Option<Setting<String>>,
    /// Column mapping, as for `--columns`.
    pub columns: Option<Setting<String>>,
    /// Default `--sigma`.
    pub sigma: Option<Setting<f64>>,
    /// Default `--baseline-before`, minutes.
    pub baseline_before: Option<Setting<f64>>,
    /// Default `--baseline-after`, minutes.
    pub baseline_after: Option<Setting<f64>>,
    /// Default `--min-coverage`.
    pub min_coverage: Option<Setting<f64>>,
    /// Default `--min-in-transit`, minutes.
    pub min_in_transit: Option<Setting<f64>>,
    /// Default `--format` of the commands that print events (`table`, `csv`, `json`, `ecsv`).
    pub format: Option<Setting<String>>,
}

fn line_of(text: &str, offset: usize) -> usize {
    text[..offset.min(text.len())].matches('\n').count() + 1
}

/// Parse a project file. Unknown keys, wrong types and out-of-range numbers are errors naming their line.
pub fn parse_project(file: &str, text: &str) -> Result<Project, InputError> {
    let raw: RawProject = toml::from_str(text).map_err(|e| {
        let line = e.span().map(|s| line_of(text, s.start));
        InputError::single(
            file,
            line,
            None,
            format!(
                "not a valid project file: {} (expected the keys sites, targets, columns and a [plan] table with \
                 sigma, baseline_before, baseline_after, min_coverage, min_in_transit, format)",
                e.message()
            ),
        )
    })?;
    let at = |s: &std::ops::Range<usize>| line_of(text, s.start);
    let text_setting = |v: &Option<Spanned<String>>| {
        v.as_ref().map(|v| Setting {
            value: v.get_ref().clone(),
            line: at(&v.span()),
        })
    };
    let mut problems = Problems::default();
    let mut number = |v: &Option<Spanned<f64>>, key: &str, lo: f64, hi: f64| {
        v.as_ref().and_then(|v| {
            let x = *v.get_ref();
            if x.is_finite() && (lo..=hi).contains(&x) {
                Some(Setting {
                    value: x,
                    line: at(&v.span()),
                })
            } else {
                problems.push(
                    Some(at(&v.span())),
                    key,
                    format!("found {x}, expected a number within {lo}..{hi}"),
                );
                None
            }
        })
    };
    let mut project = Project {
        sites: text_setting(&raw.sites),
        targets: text_setting(&raw.targets),
        columns: text_setting(&raw.columns),
        ..Project::default()
    };
    if let Some(p) = &raw.plan {
        project.sigma = number(&p.sigma, "sigma", 0.0, 10.0);
        project.baseline_before = number(&p.baseline_before, "baseline_before", 0.0, 720.0);
        project.baseline_after = number(&p.baseline_after, "baseline_after", 0.0, 720.0);
        project.min_coverage = number(&p.min_coverage, "min_coverage", 0.0, 1.0);
        project.min_in_transit = number(&p.min_in_transit, "min_in_transit", 0.0, 1440.0);
        project.format = text_setting(&p.format);
        if let Some(f) = &project.format {
            if !["table", "csv", "json", "ecsv"].contains(&f.value.as_str()) {
                problems.push(
                    Some(f.line),
                    "format",
                    format!("found {:?}, expected table, csv, json or ecsv", f.value),
                );
            }
        }
    }
    problems.into_result(file, project)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn settings_with_their_lines_and_unknown_keys_refused() {
        let text = "sites = \"s.toml\"\ncolumns = \"ra=RA:hours\"\n\n[plan]\nsigma = 2\nformat = \"csv\"\n";
        let p = parse_project("dipwatch.toml", text).unwrap();
        assert_eq!(p.sites.unwrap().line, 1);
        assert_eq!(p.columns.unwrap().value, "ra=RA:hours");
        assert_eq!(
            p.sigma.unwrap(),
            Setting {
                value: 2.0,
                line: 5
            }
        );
        assert_eq!(p.format.unwrap().line, 6);
        let err =
            parse_project("dipwatch.toml", "sites = \"a\"\n[plan]\nsigmas = 2\n").unwrap_err();
        assert!(err.to_string().contains("dipwatch.toml:3:"), "{err}");
        assert!(err.to_string().contains("sigmas"), "{err}");
        let err = parse_project("dipwatch.toml", "[plan]\nmin_coverage = 3\n").unwrap_err();
        assert!(
            err.to_string()
                .contains("dipwatch.toml:2: min_coverage: found 3"),
            "{err}"
        );
    }
}
