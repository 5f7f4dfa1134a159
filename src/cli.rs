//! The edge of the program: arguments, files, the clock and the terminal. Everything else is in the library.

use anyhow::{bail, Context, Result};
use chrono::{Duration, NaiveDate};
use clap::{Args, Parser, Subcommand, ValueEnum};
use dipwatch::engine::plan::{plan, PlanOptions};
use dipwatch::inputs::sites::{parse_sites, Site};
use dipwatch::inputs::targets::{parse_targets, ColumnMap, Target};
use dipwatch::inputs::InputError;
use dipwatch::outputs as report;
use std::io::Write;
use std::path::{Path, PathBuf};

#[derive(Parser, Debug)]
#[command(
    name = "dipwatch",
    version,
    about = "Plan ground-based follow-up of transiting exoplanets"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
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
    /// Output format
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
    /// Show UTC instead of site local time in the table
    #[arg(long)]
    utc: bool,
    /// Write to this file (atomically) instead of standard output
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
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
}

/// How blocks are built and judged.
#[derive(Args, Debug)]
struct BlockArgs {
    /// Smallest in-transit coverage (0-1) to list an event
    #[arg(
        long,
        value_name = "F",
        default_value_t = 0.0,
        allow_negative_numbers = true
    )]
    min_coverage: f64,
    /// Smallest usable in-transit time to list an event, minutes (at most the transit's duration)
    #[arg(
        long,
        value_name = "MIN",
        default_value_t = dipwatch::engine::plan::DEFAULT_MIN_IN_TRANSIT_MIN,
        allow_negative_numbers = true
    )]
    min_in_transit: f64,
    /// Timing margin around ingress and egress, in units of the epoch's sigma
    #[arg(
        long,
        value_name = "K",
        default_value_t = 1.0,
        allow_negative_numbers = true
    )]
    sigma: f64,
    /// Out-of-transit baseline wanted before ingress, minutes
    #[arg(
        long,
        value_name = "MIN",
        default_value_t = 30.0,
        allow_negative_numbers = true
    )]
    baseline_before: f64,
    /// Out-of-transit baseline wanted after egress, minutes
    #[arg(
        long,
        value_name = "MIN",
        default_value_t = 30.0,
        allow_negative_numbers = true
    )]
    baseline_after: f64,
}

impl BlockArgs {
    fn options(
        &self,
        first_night: NaiveDate,
        last_night: NaiveDate,
        include_unobservable: bool,
    ) -> Result<PlanOptions> {
        check_finite("min-coverage", self.min_coverage, 0.0, 1.0)?;
        check_finite("min-in-transit", self.min_in_transit, 0.0, 1440.0)?;
        check_finite("sigma", self.sigma, 0.0, 10.0)?;
        check_finite("baseline-before", self.baseline_before, 0.0, 720.0)?;
        check_finite("baseline-after", self.baseline_after, 0.0, 720.0)?;
        Ok(PlanOptions {
            first_night,
            last_night,
            sigma_k: self.sigma,
            baseline_before_min: self.baseline_before,
            baseline_after_min: self.baseline_after,
            min_coverage: self.min_coverage,
            min_in_transit_min: self.min_in_transit,
            include_unobservable,
        })
    }
}

#[derive(Args, Debug)]
struct PlanArgs {
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    range: RangeArgs,
    #[command(flatten)]
    block: BlockArgs,
    /// Also list transits that cannot be observed, with the reasons
    #[arg(long)]
    include_unobservable: bool,
    #[command(flatten)]
    output: OutputArgs,
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
    match cli.command {
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
    let path = match given {
        Some(p) => p.clone(),
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
    let map = match columns {
        Some(spec) => ColumnMap::parse(spec).map_err(|m| anyhow::anyhow!("--columns: {m}"))?,
        None => ColumnMap::default(),
    };
    let (label, text) = read_input(targets, "targets.csv", "targets.example.csv", "targets")?;
    let all = parse_targets(&label, &text, &map)?;
    select(all, names, |t| &t.name, "target", &label)
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

/// Exactly one site from the file, named by `--site`.
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

fn run_plan(args: PlanArgs) -> Result<()> {
    let (first_night, last_night) = resolve_range(&args.range)?;
    let opts = args
        .block
        .options(first_night, last_night, args.include_unobservable)?;
    let (sites, targets) = load(&args.input)?;
    if args.output.format == Format::Csv {
        return stream_plan_csv(&sites, &targets, &opts, args.output.out.as_deref());
    }
    let result = plan(&sites, &targets, &opts);
    let text = match args.output.format {
        Format::Table => report::plan_table(&result, &sites, &targets, &opts, args.output.utc),
        Format::Csv => report::plan_csv(&result, &sites, &targets),
        Format::Json => report::plan_json(&result, &sites, &targets, &opts),
    };
    emit(&text, args.output.out.as_deref())
}

/// Nights planned at a time when streaming CSV: bounds memory at catalogue scale.
const STREAM_CHUNK_NIGHTS: i64 = 32;

/// Plan and write CSV site by site and month by month, formatting rows in parallel; the output is the same
/// as `report::plan_csv` of the whole plan. A progress bar shows on a terminal for long runs.
fn stream_plan_csv(
    sites: &[Site],
    targets: &[Target],
    opts: &PlanOptions,
    out: Option<&Path>,
) -> Result<()> {
    use rayon::prelude::*;
    let planner = dipwatch::engine::plan::Planner::new(sites, targets, opts);
    let n_nights = (opts.last_night - opts.first_night).num_days() + 1;
    let chunks: Vec<(NaiveDate, NaiveDate)> = (0..n_nights)
        .step_by(STREAM_CHUNK_NIGHTS as usize)
        .map(|k| {
            let a = opts.first_night + Duration::days(k);
            (
                a,
                (a + Duration::days(STREAM_CHUNK_NIGHTS - 1)).min(opts.last_night),
            )
        })
        .collect();
    let long = targets.len() as i64 * n_nights * sites.len() as i64 > 2_000_000;
    let bar = if long && std::io::IsTerminal::is_terminal(&std::io::stderr()) {
        let b = indicatif::ProgressBar::new((chunks.len() * sites.len()) as u64);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{msg} [{bar:30}] {pos}/{len} site-months, {eta} left",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b.set_message("planning");
        Some(b)
    } else {
        None
    };
    let write_all = |w: &mut dyn Write| -> Result<()> {
        w.write_all(report::csv_header().as_bytes())?;
        for si in 0..sites.len() {
            for &(a, b) in &chunks {
                let (sp, _) = planner.site_plan(si, a, b);
                let parts: Vec<String> = sp
                    .events
                    .par_chunks(2048)
                    .map(|c| {
                        let mut s = String::with_capacity(c.len() * 420);
                        report::push_event_csv_rows(c, sites, targets, &mut s);
                        s
                    })
                    .collect();
                for p in parts {
                    w.write_all(p.as_bytes())?;
                }
                if let Some(b) = &bar {
                    b.inc(1);
                }
            }
        }
        w.flush()?;
        Ok(())
    };
    let result = match out {
        None => {
            let stdout = std::io::stdout();
            let mut w = std::io::BufWriter::with_capacity(1 << 20, stdout.lock());
            match write_all(&mut w) {
                Err(e)
                    if e.downcast_ref::<std::io::Error>()
                        .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe) =>
                {
                    Ok(())
                }
                other => other,
            }
        }
        Some(path) => write_atomically_with(path, |f| write_all(f)),
    };
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    result
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
        let mut w = std::io::BufWriter::with_capacity(1 << 20, f);
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

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
enum TextFormat {
    Text,
    Json,
}

#[derive(Args, Debug)]
struct TonightArgs {
    /// The site (by name, case-insensitive); may be left out when the sites file holds one site
    #[arg(long, value_name = "NAME")]
    site: Option<String>,
    /// Only this target (repeatable); asked-for targets with nothing observable are explained
    #[arg(long = "target", value_name = "NAME")]
    target_names: Vec<String>,
    /// The local date on which the night begins. Default: the current or coming night at the site
    #[arg(long, value_parser = parse_date, value_name = "YYYY-MM-DD")]
    date: Option<NaiveDate>,
    #[command(flatten)]
    files: FileArgs,
    #[command(flatten)]
    block: BlockArgs,
    /// Output format
    #[arg(long, value_enum, default_value_t = TextFormat::Text)]
    format: TextFormat,
    /// Show UTC instead of site local time
    #[arg(long)]
    utc: bool,
}

fn run_tonight(args: TonightArgs) -> Result<()> {
    let site = one_site(&args.files.sites, &args.site)?;
    let targets = load_targets(&args.files.targets, &args.files.columns, &args.target_names)?;
    let now_jd = dipwatch::astro::civil::jd_from_datetime(&chrono::Utc::now());
    let current_night = dipwatch::astro::civil::night_of(now_jd, site.lon_deg, site.tz);
    let date = args.date.unwrap_or(current_night);
    let opts = args.block.options(date, date, true)?;
    // The countdown only makes sense for the night in progress or about to begin.
    let now = (date == current_night).then_some(now_jd);
    let sites = vec![site];
    let result = plan(&sites, &targets, &opts);
    let events = &result.sites[0].events;
    let almanac = dipwatch::engine::almanac::night_almanac(&sites[0], date);
    let asked: Vec<usize> = if args.target_names.is_empty() {
        Vec::new()
    } else {
        (0..targets.len()).collect()
    };
    let absences: Vec<report::Absence> = asked
        .iter()
        .filter(|&&ti| !events.iter().any(|e| e.target_index == ti))
        .map(|&ti| report::Absence::NoTransit {
            target_index: ti,
            next_mid_utc: dipwatch::engine::plan::next_mid_after(
                &targets[ti],
                &sites[0],
                almanac.window.end,
            ),
        })
        .collect();
    let text = match args.format {
        TextFormat::Text => report::tonight_text(
            &sites[0], &almanac, events, &targets, &asked, &absences, now, args.utc,
        ),
        TextFormat::Json => report::tonight_json(
            &sites[0], &almanac, events, &sites, &targets, &absences, now,
        ),
    };
    emit(&text, None)
}

#[derive(Args, Debug)]
struct NightsArgs {
    /// Sites file (TOML). Default: ./sites.toml
    #[arg(long, value_name = "FILE")]
    sites: Option<PathBuf>,
    /// The site (by name, case-insensitive); may be left out when the sites file holds one site
    #[arg(long, value_name = "NAME")]
    site: Option<String>,
    /// First night, YYYY-MM-DD. Default: today
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    from: Option<NaiveDate>,
    /// Number of nights
    #[arg(long, value_name = "N", default_value_t = 14)]
    days: u32,
    #[command(flatten)]
    output: OutputArgs,
}

fn run_nights(args: NightsArgs) -> Result<()> {
    let (first, last) = resolve_range(&RangeArgs {
        from: args.from,
        to: None,
        days: Some(args.days),
    })?;
    let site = one_site(&args.sites, &args.site)?;
    let nights: Vec<_> = first
        .iter_days()
        .take_while(|d| *d <= last)
        .map(|d| dipwatch::engine::almanac::night_almanac(&site, d))
        .collect();
    let text = match args.output.format {
        Format::Table => report::nights_table(&site, &nights, args.output.utc),
        Format::Csv => report::nights_csv(&nights),
        Format::Json => report::nights_json(&site, &nights),
    };
    emit(&text, args.output.out.as_deref())
}

#[derive(Args, Debug)]
struct CalendarArgs {
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    range: RangeArgs,
    #[command(flatten)]
    block: BlockArgs,
    /// Calendar file to write (atomically), or - for standard output
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
    /// One file per site: FILE-<site>.ics next to --out
    #[arg(long)]
    per_site: bool,
    /// Add a reminder this many minutes before each block
    #[arg(long, value_name = "MIN")]
    alarm_minutes: Option<u32>,
    /// The previous export: changed events get a higher SEQUENCE, dropped ones are written as cancelled
    #[arg(long, value_name = "FILE")]
    previous: Option<PathBuf>,
    /// Export the schedule (see `dipwatch schedule`) instead of every observable event
    #[arg(long)]
    schedule: bool,
    #[command(flatten)]
    choice: ChoiceArgs,
}

/// The export time: SOURCE_DATE_EPOCH (seconds since 1970, for reproducible files) or the system clock.
fn export_stamp() -> Result<chrono::DateTime<chrono::Utc>> {
    match std::env::var("SOURCE_DATE_EPOCH") {
        Ok(v) => {
            let secs: i64 = v.trim().parse().map_err(|_| {
                anyhow::anyhow!("SOURCE_DATE_EPOCH: found {v:?}, expected whole seconds since 1970")
            })?;
            chrono::DateTime::from_timestamp(secs, 0)
                .ok_or_else(|| anyhow::anyhow!("SOURCE_DATE_EPOCH: {secs} is out of range"))
        }
        Err(_) => Ok(chrono::Utc::now()),
    }
}

fn site_file_name(out: &Path, site: &str) -> PathBuf {
    let stem = out
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "calendar".into());
    let slug = dipwatch::outputs::names::slug(site);
    out.with_file_name(format!("{stem}-{slug}.ics"))
}

fn run_calendar(args: CalendarArgs) -> Result<()> {
    let (first_night, last_night) = resolve_range(&args.range)?;
    let opts = args.block.options(first_night, last_night, false)?;
    if args.per_site && args.out.as_os_str() == "-" {
        bail!("--per-site writes one file per site; expected --out FILE, not -");
    }
    let (sites, targets) = load(&args.input)?;
    let previous = match &args.previous {
        None => Vec::new(),
        Some(p) => {
            let text = std::fs::read_to_string(p)
                .with_context(|| format!("cannot read previous calendar {}", p.display()))?;
            dipwatch::outputs::calendar::parse_previous(&text)
                .map_err(|m| anyhow::anyhow!("{}: {m}", p.display()))?
        }
    };
    let cal_opts = dipwatch::outputs::calendar::CalendarOptions {
        alarm_minutes: args.alarm_minutes,
        stamp: export_stamp()?,
    };
    let mut result = plan(&sites, &targets, &opts);
    if args.schedule {
        let (_, chosen) = make_schedule(&sites, &targets, &opts, &args.choice)?;
        dipwatch::engine::schedule::keep_scheduled(&mut result, &chosen);
    }
    let range = result
        .sites
        .iter()
        .filter_map(|sp| {
            Some((
                sp.nights.first()?.window.start,
                sp.nights.last()?.window.end,
            ))
        })
        .fold((f64::INFINITY, f64::NEG_INFINITY), |acc, r| {
            (acc.0.min(r.0), acc.1.max(r.1))
        });
    let jobs: Vec<(Option<usize>, PathBuf)> = if args.per_site {
        (0..sites.len())
            .map(|i| (Some(i), site_file_name(&args.out, &sites[i].name)))
            .collect()
    } else {
        vec![(None, args.out.clone())]
    };
    // Build every file first, then write: an error never leaves some files written and others not.
    let mut outputs = Vec::new();
    for (filter, path) in jobs {
        let (text, summary) = dipwatch::outputs::calendar::build_calendar(
            &result, &sites, &targets, filter, &previous, range, &cal_opts,
        );
        outputs.push((path, text, summary));
    }
    for (path, text, summary) in &outputs {
        if path.as_os_str() == "-" {
            emit(text, None)?;
        } else {
            write_atomically(path, text.as_bytes())?;
        }
        let mut line = format!(
            "dipwatch: wrote {} events to {}",
            summary.events,
            path.display()
        );
        if args.previous.is_some() {
            line.push_str(&format!(
                "; {} new, {} changed, {} cancelled",
                summary.new,
                summary.changed,
                summary.cancelled.len()
            ));
        }
        eprintln!("{line}");
        for (s, start) in &summary.cancelled {
            eprintln!(
                "dipwatch: no longer planned, written as cancelled: {s} (was {})",
                dipwatch::astro::civil::rfc3339_utc(*start)
            );
        }
    }
    Ok(())
}

#[derive(Args, Debug)]
struct RefineArgs {
    /// Targets file (CSV). Default: ./targets.csv
    #[arg(long, value_name = "FILE")]
    targets: Option<PathBuf>,
    /// Observed mid-transit times (CSV: target, tc, tc_sigma_days[, time_system, source])
    #[arg(long, value_name = "FILE")]
    observed: Option<PathBuf>,
    /// Only this target (repeatable)
    #[arg(long = "target", value_name = "NAME")]
    target_names: Vec<String>,
    /// Read differently named target columns: ours=theirs,...
    #[arg(long, value_name = "MAP")]
    columns: Option<String>,
    /// Fit the observations alone and write that fit (default: combine them with the catalogue T0 and P as a
    /// Gaussian prior with their covariance; both fits are reported either way)
    #[arg(long)]
    observations_only: bool,
    /// Accepted for old scripts: the catalogue prior is now the default
    #[arg(long, hide = true)]
    prior: bool,
    /// Largest distance of an observation from its predicted transit, in combined sigmas (prediction and
    /// observation), before it is an error: its epoch would be a guess
    #[arg(long, value_name = "N", default_value_t = dipwatch::engine::refine::DEFAULT_EPOCH_SIGMAS)]
    epoch_sigma: f64,
    /// Write --out/--in-place even when the observations alone disagree with the catalogue by more than 5
    /// combined sigma
    #[arg(long)]
    accept_tension: bool,
    /// Write the updated targets CSV here (atomically)
    #[arg(long, value_name = "FILE", conflicts_with = "in_place")]
    out: Option<PathBuf>,
    /// Overwrite the targets file itself with the updated ephemerides
    #[arg(long)]
    in_place: bool,
    /// Output format of the report
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
    /// Date at which to judge how stale each ephemeris is. Default: 180 days from today
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    stale_at: Option<NaiveDate>,
    /// Flag targets whose timing 1-sigma exceeds this fraction of T14 at that date
    #[arg(
        long,
        value_name = "F",
        default_value_t = 0.1,
        allow_negative_numbers = true
    )]
    stale_fraction: f64,
    /// Also draw the O-C chart (SVG); with several refined targets, one file per target (FILE-<target>.svg)
    #[arg(long, value_name = "FILE.svg")]
    chart: Option<PathBuf>,
}

/// The observed times of `--observed` (only those of the `--target` names, if given).
fn load_observations(args: &RefineArgs) -> Result<Vec<dipwatch::inputs::observed::Observation>> {
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
fn refine_observed(
    args: &RefineArgs,
    targets: &[Target],
    observations: &[dipwatch::inputs::observed::Observation],
    targets_label: &str,
) -> Result<Vec<dipwatch::engine::refine::TargetRefinement>> {
    use dipwatch::engine::refine::{refine_targets, FitKind, RefineError, RefineOptions};
    let observed_label = args
        .observed
        .as_ref()
        .map(|p| p.display().to_string())
        .unwrap_or_default();
    check_finite("epoch-sigma", args.epoch_sigma, 1.0, 1e6)?;
    let opts = RefineOptions {
        fit: if args.observations_only {
            FitKind::ObservationsOnly
        } else {
            FitKind::WithPrior
        },
        epoch_sigmas: args.epoch_sigma,
    };
    let (refinements, skipped) =
        refine_targets(targets, observations, &opts).map_err(|e| match e {
            RefineError::Fit { .. } => anyhow::anyhow!("{e}"),
            _ => anyhow::anyhow!(
                "{observed_label}:{}",
                e.to_string().trim_start_matches("line ")
            ),
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
fn write_oc_charts(
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
fn write_refined_targets(
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
        if args.observations_only {
            dipwatch::engine::refine::FitKind::ObservationsOnly.label()
        } else {
            dipwatch::engine::refine::FitKind::WithPrior.label()
        },
        out.display()
    );
    Ok(())
}

fn run_refine(args: RefineArgs) -> Result<()> {
    check_finite("stale-fraction", args.stale_fraction, 0.0, 10.0)?;
    let targets_path = args
        .targets
        .clone()
        .unwrap_or_else(|| PathBuf::from("targets.csv"));
    let map = match &args.columns {
        Some(spec) => ColumnMap::parse(spec).map_err(|m| anyhow::anyhow!("--columns: {m}"))?,
        None => ColumnMap::default(),
    };
    let (targets_label, targets_text) = read_input(
        &args.targets,
        "targets.csv",
        "targets.example.csv",
        "targets",
    )?;
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

fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// How the schedule is chosen.
#[derive(Args, Debug)]
struct ChoiceArgs {
    /// Minimum gap between two blocks on one telescope (slew, focus, calibrations), minutes
    #[arg(
        long,
        value_name = "MIN",
        default_value_t = 10.0,
        allow_negative_numbers = true
    )]
    changeover: f64,
    /// Score weight of the in-transit coverage
    #[arg(
        long,
        value_name = "W",
        default_value_t = 1.0,
        allow_negative_numbers = true
    )]
    weight_coverage: f64,
    /// Score weight of the verdict (whole 1, short baseline 0.8, ingress/egress only 0.5, middle only 0.2)
    #[arg(
        long,
        value_name = "W",
        default_value_t = 1.0,
        allow_negative_numbers = true
    )]
    weight_verdict: f64,
    /// Score weight of 1/airmass at mid-transit
    #[arg(
        long,
        value_name = "W",
        default_value_t = 0.5,
        allow_negative_numbers = true
    )]
    weight_airmass: f64,
    /// Score weight of the Moon separation (up to 90 deg)
    #[arg(
        long,
        value_name = "W",
        default_value_t = 0.25,
        allow_negative_numbers = true
    )]
    weight_moon: f64,
    /// Score weight of the timing sigma (up to 30 min): uncertain ephemerides gain most
    #[arg(
        long,
        value_name = "W",
        default_value_t = 0.25,
        allow_negative_numbers = true
    )]
    weight_sigma: f64,
    /// Let several telescopes observe the same transit
    #[arg(long)]
    allow_repeats: bool,
}

impl ChoiceArgs {
    fn weights(&self) -> dipwatch::engine::schedule::ScoreWeights {
        dipwatch::engine::schedule::ScoreWeights {
            coverage: self.weight_coverage,
            verdict: self.weight_verdict,
            airmass: self.weight_airmass,
            moon: self.weight_moon,
            sigma: self.weight_sigma,
        }
    }
}

#[derive(Args, Debug)]
struct ScheduleArgs {
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    range: RangeArgs,
    #[command(flatten)]
    block: BlockArgs,
    #[command(flatten)]
    choice: ChoiceArgs,
    #[command(flatten)]
    output: OutputArgs,
}

/// Plan per telescope (each with its own altitude limit) and choose the blocks.
fn make_schedule(
    sites: &[Site],
    targets: &[Target],
    opts: &PlanOptions,
    c: &ChoiceArgs,
) -> Result<(
    Vec<dipwatch::engine::schedule::TelescopeEvents>,
    Vec<dipwatch::engine::schedule::Chosen>,
)> {
    check_finite("changeover", c.changeover, 0.0, 720.0)?;
    for (name, w) in [
        ("weight-coverage", c.weight_coverage),
        ("weight-verdict", c.weight_verdict),
        ("weight-airmass", c.weight_airmass),
        ("weight-moon", c.weight_moon),
        ("weight-sigma", c.weight_sigma),
    ] {
        check_finite(name, w, 0.0, 1000.0)?;
    }
    let weights = c.weights();
    let tels = dipwatch::engine::schedule::telescope_candidates(sites, targets, opts);
    let chosen = dipwatch::engine::schedule::schedule(
        &tels,
        targets,
        &weights,
        c.changeover,
        c.allow_repeats,
    );
    Ok((tels, chosen))
}

fn run_schedule(args: ScheduleArgs) -> Result<()> {
    let (first_night, last_night) = resolve_range(&args.range)?;
    let opts = args.block.options(first_night, last_night, false)?;
    let (sites, targets) = load(&args.input)?;
    let (tels, chosen) = make_schedule(&sites, &targets, &opts, &args.choice)?;
    let weights = args.choice.weights();
    let text = match args.output.format {
        Format::Table => report::schedule_table(&chosen, &tels, &sites, &targets, args.output.utc),
        Format::Csv => report::schedule_csv(&chosen, &tels, &sites, &targets),
        Format::Json => report::schedule_json(
            &chosen,
            &tels,
            &sites,
            &targets,
            &weights,
            args.choice.changeover,
        ),
    };
    emit(&text, args.output.out.as_deref())
}

#[derive(Subcommand, Debug)]
enum ChartCommand {
    /// Altitude and airmass of one target through one night, with the observing block marked.
    Night(ChartNightArgs),
    /// A grid of nights by targets showing each event's verdict, with the Moon along the top.
    Season(ChartSeasonArgs),
}

#[derive(Args, Debug)]
struct ChartNightArgs {
    #[command(flatten)]
    files: FileArgs,
    /// The site; may be left out when the sites file holds one site
    #[arg(long, value_name = "NAME")]
    site: Option<String>,
    /// The target
    #[arg(long, value_name = "NAME")]
    target: String,
    /// The local date on which the night begins
    #[arg(long, value_parser = parse_date, value_name = "YYYY-MM-DD")]
    date: NaiveDate,
    #[command(flatten)]
    block: BlockArgs,
    /// SVG file to write
    #[arg(long, value_name = "FILE.svg")]
    out: PathBuf,
}

fn run_chart_night(args: ChartNightArgs) -> Result<()> {
    let site = one_site(&args.files.sites, &args.site)?;
    let targets = load_targets(
        &args.files.targets,
        &args.files.columns,
        std::slice::from_ref(&args.target),
    )?;
    let opts = args.block.options(args.date, args.date, true)?;
    let events = dipwatch::engine::plan::events_of_night(&site, &targets[0], args.date, &opts);
    let almanac = dipwatch::engine::almanac::night_almanac(&site, args.date);
    let svg = dipwatch::outputs::chart::night_chart_svg(
        &site,
        &targets[0],
        &almanac,
        &events,
        opts.sigma_k,
    );
    write_atomically(&args.out, svg.as_bytes())?;
    eprintln!("dipwatch: wrote {}", args.out.display());
    Ok(())
}

#[derive(Args, Debug)]
struct ChartSeasonArgs {
    #[command(flatten)]
    input: InputArgs,
    /// First night, YYYY-MM-DD
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    from: NaiveDate,
    /// Last night, inclusive, YYYY-MM-DD
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    to: NaiveDate,
    #[command(flatten)]
    block: BlockArgs,
    /// SVG file to write
    #[arg(long, value_name = "FILE.svg")]
    out: PathBuf,
    /// Also write an HTML page in this folder: the grid linked to a night chart per event (nights/*.svg)
    #[arg(long, value_name = "DIR")]
    html: Option<PathBuf>,
}

fn run_chart_season(args: ChartSeasonArgs) -> Result<()> {
    let (first, last) = resolve_range(&RangeArgs {
        from: Some(args.from),
        to: Some(args.to),
        days: None,
    })?;
    let opts = args.block.options(first, last, false)?;
    let (sites, targets) = load(&args.input)?;
    let result = plan(&sites, &targets, &opts);
    // Moon illuminated fraction at local mean solar midnight of the first site.
    let moon = dipwatch::engine::almanac::moon_by_night(&sites[0], first, last);
    let svg = dipwatch::outputs::chart::season_svg(&result, &sites, &targets, &moon);
    write_atomically(&args.out, svg.as_bytes())?;
    eprintln!("dipwatch: wrote {}", args.out.display());
    if let Some(dir) = &args.html {
        let nights_dir = dir.join("nights");
        std::fs::create_dir_all(&nights_dir)
            .with_context(|| format!("cannot create {}", nights_dir.display()))?;
        for sp in &result.sites {
            let site = &sites[sp.site_index];
            let mut done = std::collections::HashSet::new();
            for e in &sp.events {
                let file = dipwatch::outputs::chart::night_chart_file(e, &sites, &targets);
                if !done.insert(file.clone()) {
                    continue;
                }
                // Every event of that target on that night, as plan sees them.
                let target = &targets[e.target_index];
                let events =
                    dipwatch::engine::plan::events_of_night(site, target, e.night_of, &opts);
                let alm = dipwatch::engine::almanac::night_almanac(site, e.night_of);
                let chart = dipwatch::outputs::chart::night_chart_svg(
                    site,
                    target,
                    &alm,
                    &events,
                    opts.sigma_k,
                );
                write_atomically(&nights_dir.join(&file), chart.as_bytes())?;
            }
        }
        let page = dir.join("index.html");
        write_atomically(
            &page,
            dipwatch::outputs::chart::season_html(&result, &sites, &targets, &moon).as_bytes(),
        )?;
        eprintln!(
            "dipwatch: wrote {} with the night charts in {}",
            page.display(),
            nights_dir.display()
        );
    }
    Ok(())
}
