//! `dipwatch tonight`: one night at one site, with the countdown when run on the day.

use super::*;

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
pub(super) enum TextFormat {
    Text,
    Json,
    /// The night's events as ECSV (astropy APE 6), the columns of `plan`
    Ecsv,
}

#[derive(Args, Debug)]
pub(super) struct TonightArgs {
    /// The site (by name, case-insensitive); may be left out when the sites file holds one site
    #[arg(long, value_name = "NAME")]
    pub(super) site: Option<String>,
    /// Only this target (repeatable); asked-for targets with nothing observable are explained
    #[arg(long = "target", value_name = "NAME")]
    pub(super) target_names: Vec<String>,
    /// The local date on which the night begins. Default: the current or coming night at the site
    #[arg(long, value_parser = parse_date, value_name = "YYYY-MM-DD")]
    pub(super) date: Option<NaiveDate>,
    #[command(flatten)]
    pub(super) files: FileArgs,
    #[command(flatten)]
    pub(super) block: BlockArgs,
    /// Output format
    #[arg(long, value_enum, default_value_t = TextFormat::Text)]
    pub(super) format: TextFormat,
    /// Show UTC instead of site local time
    #[arg(long)]
    pub(super) utc: bool,
}

pub(super) fn run_tonight(args: TonightArgs) -> Result<()> {
    let site = one_site(&args.files.sites, &args.site)?;
    let targets = load_targets(&args.files.targets, &args.files.columns, &args.target_names)?;
    let now_jd = dipwatch::astro::civil::jd_from_datetime(&chrono::Utc::now());
    let current_night = dipwatch::engine::tonight::current_or_coming_night(&site, now_jd);
    let date = args.date.unwrap_or(current_night);
    let opts = args.block.options(date, date, true)?;
    let targets = opts.views(&targets);
    // The countdown only makes sense for the night in progress or about to begin.
    let now = (date == current_night).then_some(now_jd);
    let night = dipwatch::engine::tonight::tonight(
        &site,
        &targets,
        &opts,
        !args.target_names.is_empty(),
        now,
    );
    let text = match args.format {
        TextFormat::Text => report::tonight_text(&night, &targets, args.utc),
        TextFormat::Json => report::tonight_json(&night, std::slice::from_ref(&site), &targets),
        TextFormat::Ecsv => {
            report::events_ecsv(&night.events, std::slice::from_ref(&site), &targets)
        }
    };
    emit(&text, None)
}
