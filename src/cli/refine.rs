//! `dipwatch refine`: observed times in, refined ephemerides, O-C charts and the updated targets file out.

use super::*;

#[derive(Args, Debug)]
pub(super) struct RefineArgs {
    /// Targets file (CSV). Default: ./targets.csv
    #[arg(long, value_name = "FILE")]
    pub(super) targets: Option<PathBuf>,
    /// Observed mid-transit times (CSV: target, tc, tc_sigma_days[, time_system, source])
    #[arg(long, value_name = "FILE")]
    pub(super) observed: Option<PathBuf>,
    /// Only this target (repeatable)
    #[arg(long = "target", value_name = "NAME")]
    pub(super) target_names: Vec<String>,
    /// Read differently named target columns: ours=theirs,...
    #[arg(long, value_name = "MAP")]
    pub(super) columns: Option<String>,
    /// Fit the observations alone and write that fit (default: combine them with the catalogue T0 and P as a
    /// Gaussian prior with their covariance; both fits are reported either way)
    #[arg(long)]
    pub(super) observations_only: bool,
    /// Accepted for old scripts: the catalogue prior is now the default
    #[arg(long, hide = true)]
    pub(super) prior: bool,
    /// Largest distance of an observation from its predicted transit, in combined sigmas (prediction and
    /// observation), before it is an error: its epoch would be a guess
    #[arg(long, value_name = "N", default_value_t = dipwatch::engine::refine::DEFAULT_EPOCH_SIGMAS)]
    pub(super) epoch_sigma: f64,
    /// Write --out/--in-place even when the observations alone disagree with the catalogue by more than 5
    /// combined sigma
    #[arg(long)]
    pub(super) accept_tension: bool,
    /// Write the updated targets CSV here (atomically)
    #[arg(long, value_name = "FILE", conflicts_with = "in_place")]
    pub(super) out: Option<PathBuf>,
    /// Overwrite the targets file itself with the updated ephemerides
    #[arg(long)]
    pub(super) in_place: bool,
    /// Output format of the report
    #[arg(long, value_enum, default_value_t = Format::Table)]
    pub(super) format: Format,
    /// Date at which to judge how stale each ephemeris is. Default: 180 days from today
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    pub(super) stale_at: Option<NaiveDate>,
    /// Flag targets whose timing 1-sigma exceeds this fraction of T14 at that date
    #[arg(
        long,
        value_name = "F",
        default_value_t = 0.1,
        allow_negative_numbers = true
    )]
    pub(super) stale_fraction: f64,
    /// Also draw the O-C chart (SVG); with several refined targets, one file per target (FILE-<target>.svg)
    #[arg(long, value_name = "FILE.svg")]
    pub(super) chart: Option<PathBuf>,
}

impl RefineArgs {
    /// The fit reported as refined and written.
    fn fit_kind(&self) -> dipwatch::engine::refine::FitKind {
        if self.observations_only {
            dipwatch::engine::refine::FitKind::ObservationsOnly
        } else {
            dipwatch::engine::refine::FitKind::WithPrior
        }
    }
}

/// The observed times of `--observed` (only those of the `--target` names, if given).
pub(super) fn load_observations(
    args: &RefineArgs,
) -> Result<Vec<dipwatch::inputs::observed::Observation>> {
    let Some(p) = &args.observed else {
        return Ok(Vec::new());
    };
    let label = p.display().to_string();
    let text = std::fs::read_to_string(p)
        .with_context(|| format!("cannot read observed times {label}"))?;
    let mut obs = dipwatch::inputs::observed::parse_observed(&label, &text)?;
    if !args.target_names.is_empty() {
        obs.retain(|o| {
            args.target_names
                .iter()
                .any(|n| n.trim().eq_ignore_ascii_case(o.target.trim()))
        });
    }
    Ok(obs)
}

/// Refine, naming the observed file in errors and noting skipped rows.
pub(super) fn refine_observed(
    args: &RefineArgs,
    targets: &[Target],
    observations: &[dipwatch::inputs::observed::Observation],
    targets_label: &str,
) -> Result<Vec<dipwatch::engine::refine::TargetRefinement>> {
    use dipwatch::engine::refine::{refine_targets, RefineOptions};
    let observed_label = args
        .observed
        .as_ref()
        .map(|p| p.display().to_string())
        .unwrap_or_default();
    check_finite("epoch-sigma", args.epoch_sigma, 1.0, 1e6)?;
    let opts = RefineOptions {
        fit: args.fit_kind(),
        epoch_sigmas: args.epoch_sigma,
    };
    let (refinements, skipped) =
        refine_targets(targets, observations, &opts).map_err(|errors| {
            let lines: Vec<String> = errors
                .iter()
                .map(|e| match e.line() {
                    Some(line) => format!("{observed_label}:{line}: {e}"),
                    None => e.to_string(),
                })
                .collect();
            anyhow::anyhow!("{}", lines.join("\ndipwatch: "))
        })?;
    if !observations.is_empty() && skipped.len() == observations.len() {
        let names: Vec<String> = skipped.iter().map(|s| format!("{:?}", s.target)).collect();
        bail!(
            "{observed_label}:{}: target {} is not in {targets_label}, nor is any other target of this file ({}); \
             expected target names as written in the targets file",
            skipped[0].line,
            names[0],
            names.join(", ")
        );
    }
    for s in &skipped {
        eprintln!(
            "dipwatch: {observed_label}:{}: target {:?} is not in {targets_label}; row skipped",
            s.line, s.target
        );
    }
    Ok(refinements)
}

/// Write the O-C chart of each refined target (FILE, or FILE-<target>.svg for several).
pub(super) fn write_oc_charts(
    chart: &Path,
    refinements: &[dipwatch::engine::refine::TargetRefinement],
    targets: &[Target],
) -> Result<()> {
    for r in refinements {
        let name = &targets[r.target_index].name;
        let path = if refinements.len() == 1 {
            chart.to_path_buf()
        } else {
            site_file_name(chart, name).with_extension("svg")
        };
        write_atomically(
            &path,
            dipwatch::outputs::chart::oc_chart_svg(name, &r.rows).as_bytes(),
        )?;
        eprintln!(
            "dipwatch: wrote the O-C chart of {name} to {}",
            path.display()
        );
    }
    Ok(())
}

/// Write the targets file with the refined ephemerides to `out`, unless the observations and the catalogue
/// are in tension and the user has not accepted it (the report is printed first, then the refusal).
pub(super) fn write_refined_targets(
    args: &RefineArgs,
    out: &Path,
    targets_path: &Path,
    (targets_label, targets_text, map): (&str, &str, &ColumnMap),
    refinements: &[dipwatch::engine::refine::TargetRefinement],
    targets: &[Target],
    report_text: &str,
) -> Result<()> {
    let tense: Vec<String> = refinements
        .iter()
        .filter(|r| r.tension.is_serious())
        .map(|r| {
            format!(
                "{} ({})",
                targets[r.target_index].name,
                report::tension_text(&r.tension)
            )
        })
        .collect();
    if !tense.is_empty() && !args.accept_tension {
        emit(report_text, None)?;
        bail!(
            "not written to {}: the observations alone disagree with the catalogue by more than {} combined sigma \
             for {}; check those observations (O-C against the catalogue above) and the catalogue ephemeris, or \
             pass --accept-tension to write the refined ephemerides anyway",
            out.display(),
            dipwatch::engine::refine::TENSION_SIGMAS,
            tense.join(", ")
        );
    }
    if !args.in_place && same_file(out, targets_path) {
        bail!(
            "--out {} is the targets file itself; pass --in-place to overwrite it",
            out.display()
        );
    }
    let updates: Vec<(String, dipwatch::ephemeris::Ephemeris)> = refinements
        .iter()
        .map(|r| (targets[r.target_index].name.clone(), r.ephemeris))
        .collect();
    let updated = report::rewrite_targets_csv(targets_text, map, &updates)
        .map_err(|m| anyhow::anyhow!("{targets_label}: {m}"))?;
    write_atomically(out, updated.as_bytes())?;
    eprintln!(
        "dipwatch: wrote {} refined ephemerides ({}) to {}",
        updates.len(),
        args.fit_kind().label(),
        out.display()
    );
    Ok(())
}

pub(super) fn run_refine(args: RefineArgs) -> Result<()> {
    check_finite("stale-fraction", args.stale_fraction, 0.0, 10.0)?;
    let map = column_map(&args.columns)?;
    let (targets_label, targets_text) = read_input(
        &args.targets,
        "targets.csv",
        "targets.example.csv",
        "targets",
    )?;
    let targets_path = PathBuf::from(&targets_label);
    let all_targets = parse_targets(&targets_label, &targets_text, &map)?;
    let targets = select(
        all_targets,
        &args.target_names,
        |t| &t.name,
        "target",
        &targets_label,
    )?;
    let observations = load_observations(&args)?;
    let refinements = refine_observed(&args, &targets, &observations, &targets_label)?;
    let stale_date = args
        .stale_at
        .unwrap_or_else(|| chrono::Local::now().date_naive() + Duration::days(180));
    let stale_jd = dipwatch::astro::time::jd_from_calendar(
        chrono::Datelike::year(&stale_date),
        chrono::Datelike::month(&stale_date),
        f64::from(chrono::Datelike::day(&stale_date)),
    );
    let stale = dipwatch::engine::refine::staleness_table(&targets, &refinements, stale_jd);
    let stale_at = stale_date.to_string();
    let f = args.stale_fraction;
    let text = match args.format {
        Format::Table => report::refine_text(&refinements, &targets, &stale, &stale_at, f),
        Format::Csv => report::refine_csv(&refinements, &targets, &stale, f),
        Format::Json => report::refine_json(&refinements, &targets, &stale, &stale_at, f),
        Format::Ecsv => return Err(no_ecsv("refine")),
    };
    if let Some(chart) = &args.chart {
        write_oc_charts(chart, &refinements, &targets)?;
    }
    let out_path = if args.in_place {
        Some(targets_path.clone())
    } else {
        args.out.clone()
    };
    if let Some(out) = &out_path {
        write_refined_targets(
            &args,
            out,
            &targets_path,
            (&targets_label, &targets_text, &map),
            &refinements,
            &targets,
            &text,
        )?;
    }
    emit(&text, None)
}

pub(super) fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}
