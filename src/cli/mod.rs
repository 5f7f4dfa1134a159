//! The edge of the program: arguments, files, the clock and the terminal. Everything else is in the library.

use anyhow::{bail, Context, Result};
use chrono::{Duration, NaiveDate};
use clap::{Args, Parser, Subcommand, ValueEnum};
use dipwatch::engine::plan::{plan, PlanOptions};
use dipwatch::inputs::project::{Project, Setting};
use dipwatch::inputs::sites::{parse_sites, Site};
use dipwatch::inputs::targets::{parse_targets, ColumnMap, Target};
use dipwatch::inputs::InputError;
use dipwatch::outputs as report;
use std::io::Write;
use std::path::{Path, PathBuf};

mod calendar;
mod chart;
mod nights;
mod noise;
mod plan;
mod refine;
mod schedule;
mod tonight;

use calendar::*;
use chart::*;
use nights::*;
use noise::*;
use plan::*;
use refine::*;
use schedule::*;
use tonight::*;

#[derive(Parser, Debug)]
#[command(
    name = "dipwatch",
    version,
    about = "Plan ground-based follow-up of transiting exoplanets"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
    /// Project file with the files, column mapping and option defaults. Default: ./dipwatch.toml if present
    #[arg(long, global = true, value_name = "FILE")]
    config: Option<PathBuf>,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// List the observable full and partial transits per site and night over a date range.
    Plan(PlanArgs),
    /// One night at one site: its almanac and every transit touching it, with start times.
    Tonight(TonightArgs),
    /// A per-night almanac for one site: Sun, twilights, darkness and the Moon.
    Nights(NightsArgs),
    /// Write the plan as an iCalendar file (RFC 5545) for the team's calendars.
    Calendar(CalendarArgs),
    /// Fit observed mid-transit times to refine ephemerides, and say which ephemerides are getting stale.
    Refine(RefineArgs),
    /// Choose, per telescope and night, the non-overlapping blocks that serve the programme best.
    Schedule(ScheduleArgs),
    /// Draw SVG charts: one night for one target, or a season grid of verdicts.
    #[command(subcommand)]
    Chart(ChartCommand),
    /// Print the settings in effect (files, column mapping, option defaults) and where each comes from.
    Config,
    /// The noise budget of one exposure of one star through one telescope (ppt per term), with the suggested
    /// exposure and the noise per 10 minutes.
    Noise(NoiseArgs),
}

/// Where the sites and targets come from, and which of them to use.
#[derive(Args, Debug)]
struct InputArgs {
    #[command(flatten)]
    files: FileArgs,
    /// Only this site (repeatable; case-insensitive)
    #[arg(long = "site", value_name = "NAME")]
    site_names: Vec<String>,
    /// Only this target (repeatable; case-insensitive)
    #[arg(long = "target", value_name = "NAME")]
    target_names: Vec<String>,
}

/// The sites and targets files.
#[derive(Args, Debug)]
struct FileArgs {
    /// Sites file (TOML). Default: ./sites.toml
    #[arg(long, value_name = "FILE")]
    sites: Option<PathBuf>,
    /// Targets file (CSV). Default: ./targets.csv
    #[arg(long, value_name = "FILE")]
    targets: Option<PathBuf>,
    /// Read differently named target columns: ours=theirs,... (e.g. period_days=orb_period,t0=mid_time)
    #[arg(long, value_name = "MAP")]
    columns: Option<String>,
}

/// Where and how a command writes its result.
#[derive(Args, Debug)]
struct OutputArgs {
    /// Output format [default: table, or the project file's]
    #[arg(long, value_enum)]
    format: Option<Format>,
    /// Show UTC instead of site local time in the table
    #[arg(long)]
    utc: bool,
    /// Write to this file (atomically) instead of standard output
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
}

impl OutputArgs {
    /// The format: the command line, then the project file, then `table`.
    fn format(&self) -> Format {
        self.format
            .or_else(|| {
                project()
                    .and_then(|p| p.project.format.as_ref())
                    .and_then(|f| Format::from_str(&f.value, true).ok())
            })
            .unwrap_or(Format::Table)
    }
}

/// A project file as loaded: its label, its folder (paths in it are relative to it) and its settings.
struct LoadedProject {
    label: String,
    dir: PathBuf,
    project: Project,
}

static PROJECT: std::sync::OnceLock<Option<LoadedProject>> = std::sync::OnceLock::new();

/// The project file in effect, if any.
fn project() -> Option<&'static LoadedProject> {
    PROJECT.get().and_then(Option::as_ref)
}

/// Load `--config FILE`, or ./dipwatch.toml when it exists.
fn load_project(given: &Option<PathBuf>) -> Result<Option<LoadedProject>> {
    let path = match given {
        Some(p) => p.clone(),
        None if Path::new("dipwatch.toml").exists() => PathBuf::from("dipwatch.toml"),
        None => return Ok(None),
    };
    let label = path.display().to_string();
    let text = std::fs::read_to_string(&path)
        .with_context(|| format!("cannot read project file {label}"))?;
    let project = dipwatch::inputs::project::parse_project(&label, &text)?;
    let dir = path.parent().map(Path::to_path_buf).unwrap_or_default();
    Ok(Some(LoadedProject {
        label,
        dir,
        project,
    }))
}

/// `dipwatch config`: every setting in effect and where it comes from.
fn run_config() -> Result<()> {
    let p = project();
    let from = |line: Option<usize>| match (p, line) {
        (Some(p), Some(l)) => format!("{}:{l}", p.label),
        _ => "built-in default".to_string(),
    };
    let mut out = match p {
        Some(p) => format!("Project file: {}\n", p.label),
        None => "No project file (./dipwatch.toml not found, no --config given).\n".to_string(),
    };
    let pr = p.map(|p| &p.project);
    let text = |s: Option<&Setting<String>>, default: &str| {
        (
            s.map_or(default.to_string(), |s| s.value.clone()),
            from(s.map(|s| s.line)),
        )
    };
    let num = |s: Option<&Setting<f64>>, default: f64| {
        (
            s.map_or(default, |s| s.value).to_string(),
            from(s.map(|s| s.line)),
        )
    };
    let rows = [
        (
            "sites",
            text(pr.and_then(|p| p.sites.as_ref()), "./sites.toml"),
        ),
        (
            "targets",
            text(pr.and_then(|p| p.targets.as_ref()), "./targets.csv"),
        ),
        (
            "columns",
            text(
                pr.and_then(|p| p.columns.as_ref()),
                "(none: canonical names)",
            ),
        ),
        ("sigma", num(pr.and_then(|p| p.sigma.as_ref()), 1.0)),
        (
            "baseline_before",
            num(pr.and_then(|p| p.baseline_before.as_ref()), 30.0),
        ),
        (
            "baseline_after",
            num(pr.and_then(|p| p.baseline_after.as_ref()), 30.0),
        ),
        (
            "min_coverage",
            num(pr.and_then(|p| p.min_coverage.as_ref()), 0.0),
        ),
        (
            "min_in_transit",
            num(
                pr.and_then(|p| p.min_in_transit.as_ref()),
                dipwatch::engine::plan::DEFAULT_MIN_IN_TRANSIT_MIN,
            ),
        ),
        ("format", text(pr.and_then(|p| p.format.as_ref()), "table")),
    ];
    for (key, (value, source)) in rows {
        out.push_str(&format!(
            "  {key:<16} {value}\n  {:<16} from {source}\n",
            ""
        ));
    }
    out.push_str("Options given on the command line override these.\n");
    emit(&out, None)
}

/// A range of "night of" dates.
#[derive(Args, Debug)]
struct RangeArgs {
    /// First night (local date on which it begins), YYYY-MM-DD. Default: today
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    from: Option<NaiveDate>,
    /// Last night, inclusive, YYYY-MM-DD
    #[arg(long, value_parser = parse_date, value_name = "DATE", conflicts_with = "days")]
    to: Option<NaiveDate>,
    /// Number of nights (default 30)
    #[arg(long, value_name = "N")]
    days: Option<u32>,
}

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
enum Format {
    Table,
    Csv,
    Json,
    /// Enhanced Character Separated Values (astropy APE 6): CSV with a YAML header of datatypes, units and
    /// descriptions; for commands that print events
    Ecsv,
}

/// The refusal of `--format ecsv` by a command that prints no events.
fn no_ecsv(command: &str) -> anyhow::Error {
    anyhow::anyhow!(
        "--format ecsv: found ecsv for {command}, expected table, csv or json (ecsv is written by plan, schedule and tonight)"
    )
}

/// What a run plans: the inputs and their selection, the nights, and how blocks are built and judged.
#[derive(Args, Debug)]
struct Selection {
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    range: RangeArgs,
    #[command(flatten)]
    block: BlockArgs,
}

impl Selection {
    /// The plan options of the run: its nights and how blocks are built and judged.
    fn options(&self, include_unobservable: bool) -> Result<PlanOptions> {
        let (first_night, last_night) = resolve_range(&self.range)?;
        self.block
            .options(first_night, last_night, include_unobservable)
    }

    /// The sites, the targets and the plan options of the run (unobservable events listed or not).
    fn load(&self, include_unobservable: bool) -> Result<(Vec<Site>, Vec<Target>, PlanOptions)> {
        let opts = self.options(include_unobservable)?;
        let (sites, targets) = load(&self.input)?;
        let targets = opts.views(&targets);
        Ok((sites, targets, opts))
    }

    /// [`Selection::load`], and the run's sky tables built while the targets file is read (they depend on the
    /// sites and the dates only): the tables of a year take about as long as reading 10,000 targets.
    fn load_with_tables(&self, include_unobservable: bool) -> Result<Loaded> {
        let opts = self.options(include_unobservable)?;
        let sites = load_sites(&self.input.files.sites, &self.input.site_names)?;
        let (targets, tables) = rayon::join(
            || {
                load_targets(
                    &self.input.files.targets,
                    &self.input.files.columns,
                    &self.input.target_names,
                )
            },
            || dipwatch::engine::plan::Planner::sky_tables(&sites, &opts),
        );
        let targets = opts.views(&targets?);
        Ok(Loaded {
            sites,
            targets,
            opts,
            tables,
        })
    }
}

/// What [`Selection::load_with_tables`] gives: the inputs, the options and the sky tables of a run.
struct Loaded {
    sites: Vec<Site>,
    targets: Vec<Target>,
    opts: PlanOptions,
    tables: Option<dipwatch::astro::tables::SkyTables>,
}

/// Targets as the planned kinds' entries (one per kind and target, see `dipwatch::orbit::kind_views`).
trait KindViews {
    fn views(&self, targets: &[Target]) -> Vec<Target>;
}

impl KindViews for PlanOptions {
    fn views(&self, targets: &[Target]) -> Vec<Target> {
        dipwatch::orbit::kind_views(targets, &self.kinds, self.rv_window_hours)
    }
}

/// How blocks are built and judged.
#[derive(Args, Debug)]
struct BlockArgs {
    /// Smallest in-transit coverage (0-1) to list an event [default: 0]
    #[arg(long, value_name = "F", allow_negative_numbers = true)]
    min_coverage: Option<f64>,
    /// Smallest usable in-transit time to list an event, minutes (at most the transit's duration) [default: 30]
    #[arg(long, value_name = "MIN", allow_negative_numbers = true)]
    min_in_transit: Option<f64>,
    /// Smallest expected transit SNR to list an event, where the site has a photometric set-up [default: 0]
    #[arg(long, value_name = "SNR", allow_negative_numbers = true)]
    min_snr: Option<f64>,
    /// Timing margin around ingress and egress, in units of the epoch's sigma [default: 1]
    #[arg(long, value_name = "K", allow_negative_numbers = true)]
    sigma: Option<f64>,
    /// Out-of-transit baseline wanted before ingress, minutes [default: 30]
    #[arg(long, value_name = "MIN", allow_negative_numbers = true)]
    baseline_before: Option<f64>,
    /// Out-of-transit baseline wanted after egress, minutes [default: 30]
    #[arg(long, value_name = "MIN", allow_negative_numbers = true)]
    baseline_after: Option<f64>,
    /// What to plan: transit, occultation, rv-max, rv-min or phase:A-B (orbital phase, 0 at mid-transit);
    /// repeat or separate with commas for several [default: transit]
    #[arg(long, value_name = "KIND", value_delimiter = ',', value_parser = parse_kind)]
    kind: Vec<dipwatch::orbit::EventKind>,
    /// Length of the window planned around a radial-velocity extreme, hours [default: 1]
    #[arg(long, value_name = "HOURS")]
    rv_window: Option<f64>,
}

/// A `--kind` value.
fn parse_kind(text: &str) -> Result<dipwatch::orbit::EventKind, String> {
    dipwatch::orbit::EventKind::parse(text)
}

impl BlockArgs {
    fn options(
        &self,
        first_night: NaiveDate,
        last_night: NaiveDate,
        include_unobservable: bool,
    ) -> Result<PlanOptions> {
        // The command line, then the project file, then the built-in default.
        let pick = |given: Option<f64>, key: fn(&Project) -> Option<f64>, default: f64| {
            given
                .or(project().and_then(|p| key(&p.project)))
                .unwrap_or(default)
        };
        let min_coverage = pick(
            self.min_coverage,
            |p| p.min_coverage.as_ref().map(|s| s.value),
            0.0,
        );
        let min_in_transit = pick(
            self.min_in_transit,
            |p| p.min_in_transit.as_ref().map(|s| s.value),
            dipwatch::engine::plan::DEFAULT_MIN_IN_TRANSIT_MIN,
        );
        let sigma = pick(self.sigma, |p| p.sigma.as_ref().map(|s| s.value), 1.0);
        let before = pick(
            self.baseline_before,
            |p| p.baseline_before.as_ref().map(|s| s.value),
            30.0,
        );
        let after = pick(
            self.baseline_after,
            |p| p.baseline_after.as_ref().map(|s| s.value),
            30.0,
        );
        check_finite("min-coverage", min_coverage, 0.0, 1.0)?;
        check_finite("min-in-transit", min_in_transit, 0.0, 1440.0)?;
        let min_snr = self.min_snr.unwrap_or(0.0);
        check_finite("min-snr", min_snr, 0.0, 1e6)?;
        check_finite("sigma", sigma, 0.0, 10.0)?;
        check_finite("baseline-before", before, 0.0, 720.0)?;
        check_finite("baseline-after", after, 0.0, 720.0)?;
        let rv_window_hours = self
            .rv_window
            .unwrap_or(dipwatch::orbit::DEFAULT_RV_WINDOW_HOURS);
        check_finite("rv-window", rv_window_hours, 0.01, 48.0)?;
        let mut kinds = self.kind.clone();
        if kinds.is_empty() {
            kinds.push(dipwatch::orbit::EventKind::Transit);
        }
        kinds.dedup();
        Ok(PlanOptions {
            first_night,
            last_night,
            sigma_k: sigma,
            baseline_before_min: before,
            baseline_after_min: after,
            min_coverage,
            min_in_transit_min: min_in_transit,
            min_snr,
            include_unobservable,
            kinds,
            rv_window_hours,
        })
    }
}

/// Render an error chain for the user: input errors list every problem; others show their causes.
pub fn describe(e: &anyhow::Error) -> String {
    if let Some(input) = e.downcast_ref::<InputError>() {
        return input.to_string().replace('\n', "\ndipwatch: ");
    }
    let mut s = e.to_string();
    for cause in e.chain().skip(1) {
        s.push_str(&format!(": {cause}"));
    }
    s
}

pub fn run() -> Result<()> {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            std::process::exit(code);
        }
    };
    let loaded = load_project(&cli.config)?;
    let _ = PROJECT.set(loaded);
    match cli.command {
        Command::Config => run_config(),
        Command::Noise(args) => run_noise(args),
        Command::Plan(args) => run_plan(args),
        Command::Tonight(args) => run_tonight(args),
        Command::Nights(args) => run_nights(args),
        Command::Calendar(args) => run_calendar(args),
        Command::Refine(args) => run_refine(args),
        Command::Schedule(args) => run_schedule(args),
        Command::Chart(ChartCommand::Night(args)) => run_chart_night(args),
        Command::Chart(ChartCommand::Season(args)) => run_chart_season(args),
    }
}

fn read_input(
    given: &Option<PathBuf>,
    default: &str,
    example: &str,
    what: &str,
) -> Result<(String, String)> {
    let from_project = project().and_then(|p| {
        let s = if what == "sites" {
            &p.project.sites
        } else {
            &p.project.targets
        };
        s.as_ref().map(|s| p.dir.join(&s.value))
    });
    let path = match given.clone().or(from_project) {
        Some(p) => p,
        None => {
            let p = PathBuf::from(default);
            if !p.exists() {
                bail!(
                    "no {what} file given and ./{default} not found; pass --{} FILE (the repository's {example} is a starting point)",
                    what
                );
            }
            p
        }
    };
    let label = path.display().to_string();
    let bytes = std::fs::read(&path).with_context(|| format!("cannot read {what} file {label}"))?;
    let text = String::from_utf8(bytes).map_err(|e| {
        anyhow::anyhow!(
            "{label}: not UTF-8 text (invalid byte at offset {}); expected a UTF-8 {what} file",
            e.utf8_error().valid_up_to()
        )
    })?;
    Ok((label, text))
}

/// Load, parse and select sites.
fn load_sites(sites: &Option<PathBuf>, names: &[String]) -> Result<Vec<Site>> {
    let (label, text) = read_input(sites, "sites.toml", "sites.example.toml", "sites")?;
    let all = parse_sites(&label, &text)?;
    select(all, names, |s| &s.name, "site", &label)
}

/// Load, parse and select targets.
fn load_targets(
    targets: &Option<PathBuf>,
    columns: &Option<String>,
    names: &[String],
) -> Result<Vec<Target>> {
    let map = column_map(columns)?;
    let (label, text) = read_input(targets, "targets.csv", "targets.example.csv", "targets")?;
    let all = parse_targets(&label, &text, &map)?;
    select(all, names, |t| &t.name, "target", &label)
}

/// The column mapping: `--columns`, else the project file's `columns`, else none.
fn column_map(columns: &Option<String>) -> Result<ColumnMap> {
    if let Some(spec) = columns {
        return ColumnMap::parse(spec).map_err(|m| anyhow::anyhow!("--columns: {m}"));
    }
    match project().and_then(|p| p.project.columns.as_ref().map(|c| (p, c))) {
        Some((p, c)) => ColumnMap::parse(&c.value)
            .map_err(|m| anyhow::anyhow!("{}:{}: columns: {m}", p.label, c.line)),
        None => Ok(ColumnMap::default()),
    }
}

/// Load, parse and select sites and targets.
fn load(input: &InputArgs) -> Result<(Vec<Site>, Vec<Target>)> {
    let sites = load_sites(&input.files.sites, &input.site_names)?;
    let targets = load_targets(
        &input.files.targets,
        &input.files.columns,
        &input.target_names,
    )?;
    Ok((sites, targets))
}

/// A command-line date: ISO 8601 `YYYY-MM-DD` only. Other common forms (`12/05/2026`, `05.12.2026`) are
/// refused with the expected form, because their day/month order differs between countries.
fn parse_date(text: &str) -> std::result::Result<NaiveDate, String> {
    let t = text.trim();
    if let Ok(d) = NaiveDate::parse_from_str(t, "%Y-%m-%d") {
        return Ok(d);
    }
    let parts: Vec<&str> = t.split(['/', '.', '-']).collect();
    let hint = match parts.as_slice() {
        [a, b, y] if y.len() == 4 && a.parse::<u32>().is_ok() && b.parse::<u32>().is_ok() => {
            let (a, b) = (a.parse::<u32>().unwrap_or(0), b.parse::<u32>().unwrap_or(0));
            let as_dm = NaiveDate::from_ymd_opt(y.parse().unwrap_or(0), b, a);
            let as_md = NaiveDate::from_ymd_opt(y.parse().unwrap_or(0), a, b);
            match (as_dm, as_md) {
                (Some(x), Some(y)) if x != y => {
                    format!(" ({x} if day first, {y} if month first: write the one you mean)")
                }
                (Some(x), _) | (None, Some(x)) => format!(" (did you mean {x}?)"),
                _ => String::new(),
            }
        }
        _ => String::new(),
    };
    Err(format!(
        "found {t:?}, expected a date as YYYY-MM-DD (ISO 8601), e.g. 2027-03-01{hint}"
    ))
}

/// The site named `name`, or the only site of the file when no name is given.
fn one_site(sites_file: &Option<PathBuf>, name: &Option<String>) -> Result<Site> {
    let names: Vec<String> = name.iter().cloned().collect();
    let mut sites = load_sites(sites_file, &names)?;
    if sites.len() > 1 {
        let known: Vec<&str> = sites.iter().map(|s| s.name.as_str()).collect();
        bail!(
            "--site: {} holds {} sites ({}); expected --site NAME to choose one",
            sites_file
                .as_ref()
                .map_or_else(|| "the sites file".to_string(), |p| p.display().to_string()),
            sites.len(),
            known.join(", ")
        );
    }
    Ok(sites.remove(0))
}

fn select<T>(
    items: Vec<T>,
    wanted: &[String],
    name: impl Fn(&T) -> &String,
    what: &str,
    file: &str,
) -> Result<Vec<T>> {
    if wanted.is_empty() {
        return Ok(items);
    }
    for w in wanted {
        if !items.iter().any(|i| name(i).eq_ignore_ascii_case(w.trim())) {
            let known: Vec<&str> = items.iter().map(|i| name(i).as_str()).collect();
            bail!(
                "--{what} {w:?}: no {what} of that name in {file}; expected one of: {}",
                known.join(", ")
            );
        }
    }
    Ok(items
        .into_iter()
        .filter(|i| {
            wanted
                .iter()
                .any(|w| name(i).eq_ignore_ascii_case(w.trim()))
        })
        .collect())
}

/// Resolve the night range: default from today (system clock, local date), 30 nights.
fn resolve_range(r: &RangeArgs) -> Result<(NaiveDate, NaiveDate)> {
    let from = r.from.unwrap_or_else(|| chrono::Local::now().date_naive());
    let to = match (r.to, r.days) {
        (Some(to), _) => to,
        (None, Some(0)) => bail!("--days: found 0, expected at least 1 night"),
        (None, Some(n)) => from + Duration::days(i64::from(n) - 1),
        (None, None) => from + Duration::days(29),
    };
    if to < from {
        bail!("--to {to} is before --from {from}; expected a last night on or after the first");
    }
    let min = NaiveDate::from_ymd_opt(1972, 1, 1).expect("valid date");
    let max = NaiveDate::from_ymd_opt(2200, 1, 1).expect("valid date");
    if from < min || to > max {
        bail!("nights {from} to {to}: expected dates within 1972-01-01..2200-01-01 (the leap-second table starts in 1972)");
    }
    if (to - from).num_days() > 366 * 20 {
        bail!("nights {from} to {to}: expected a range of at most 20 years");
    }
    Ok((from, to))
}

fn check_finite(name: &str, v: f64, lo: f64, hi: f64) -> Result<()> {
    if !v.is_finite() || v < lo || v > hi {
        bail!("--{name}: found {v}, expected a number within {lo}..{hi}");
    }
    Ok(())
}

/// Print to stdout, or write the file atomically (temporary file in the same folder, then rename).
fn emit(text: &str, out: Option<&Path>) -> Result<()> {
    match out {
        None => {
            let mut stdout = std::io::stdout().lock();
            match stdout.write_all(text.as_bytes()) {
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
                other => other.context("cannot write to standard output"),
            }
        }
        Some(path) => write_atomically(path, text.as_bytes()),
    }
}

/// Write `bytes` to `path` so that readers see either the old file or the whole new one, never a part.
pub fn write_atomically(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomically_with(path, |w| w.write_all(bytes).map_err(anyhow::Error::from))
}

/// Like [`write_atomically`], with the content produced by `fill` into a buffered temporary file in the same
/// folder; on any error the temporary file is removed and `path` is untouched.
pub fn write_atomically_with(
    path: &Path,
    fill: impl FnOnce(&mut dyn Write) -> Result<()>,
) -> Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "out".into());
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| -> Result<()> {
        let f = std::fs::File::create(&tmp)?;
        let mut w = std::io::BufWriter::with_capacity(plan::OUTPUT_BUFFER_BYTES, f);
        fill(&mut w)?;
        let f = w.into_inner().map_err(|e| e.into_error())?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)?;
        Ok(())
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(e).with_context(|| format!("cannot write {}", path.display()));
    }
    Ok(())
}
