//! `dipwatch chart night|season`: the SVG charts and the linked HTML page.

use super::*;

#[derive(Subcommand, Debug)]
pub(super) enum ChartCommand {
    /// Altitude and airmass of one target through one night, with the observing block marked.
    Night(ChartNightArgs),
    /// A grid of nights by targets showing each event's verdict, with the Moon along the top.
    Season(ChartSeasonArgs),
}

#[derive(Args, Debug)]
pub(super) struct ChartNightArgs {
    #[command(flatten)]
    pub(super) files: FileArgs,
    /// The site; may be left out when the sites file holds one site
    #[arg(long, value_name = "NAME")]
    pub(super) site: Option<String>,
    /// The target
    #[arg(long, value_name = "NAME")]
    pub(super) target: String,
    /// The local date on which the night begins
    #[arg(long, value_parser = parse_date, value_name = "YYYY-MM-DD")]
    pub(super) date: NaiveDate,
    #[command(flatten)]
    pub(super) block: BlockArgs,
    /// SVG file to write
    #[arg(long, value_name = "FILE.svg")]
    pub(super) out: PathBuf,
}

pub(super) fn run_chart_night(args: ChartNightArgs) -> Result<()> {
    let site = one_site(&args.files.sites, &args.site)?;
    let targets = load_targets(
        &args.files.targets,
        &args.files.columns,
        std::slice::from_ref(&args.target),
    )?;
    let opts = args.block.options(args.date, args.date, true)?;
    let targets = opts.views(&targets);
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
pub(super) struct ChartSeasonArgs {
    #[command(flatten)]
    pub(super) input: InputArgs,
    /// First night, YYYY-MM-DD
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    pub(super) from: NaiveDate,
    /// Last night, inclusive, YYYY-MM-DD
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    pub(super) to: NaiveDate,
    #[command(flatten)]
    pub(super) block: BlockArgs,
    /// SVG file to write
    #[arg(long, value_name = "FILE.svg")]
    pub(super) out: PathBuf,
    /// Also write an HTML page in this folder: the grid linked to a night chart per event (nights/*.svg)
    #[arg(long, value_name = "DIR")]
    pub(super) html: Option<PathBuf>,
}

pub(super) fn run_chart_season(args: ChartSeasonArgs) -> Result<()> {
    let (first, last) = resolve_range(&RangeArgs {
        from: Some(args.from),
        to: Some(args.to),
        days: None,
    })?;
    let opts = args.block.options(first, last, false)?;
    let (sites, targets) = load(&args.input)?;
    let targets = opts.views(&targets);
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
            let whole_site = &sites[sp.site_index];
            let site = &whole_site.for_telescope(&whole_site.telescopes[sp.telescope_index]);
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
