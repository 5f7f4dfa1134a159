//! `dipwatch nights`: the almanac of a range of nights at one site.

use super::*;

#[derive(Args, Debug)]
pub(super) struct NightsArgs {
    /// Sites file (TOML). Default: ./sites.toml
    #[arg(long, value_name = "FILE")]
    pub(super) sites: Option<PathBuf>,
    /// The site (by name, case-insensitive); may be left out when the sites file holds one site
    #[arg(long, value_name = "NAME")]
    pub(super) site: Option<String>,
    /// First night, YYYY-MM-DD. Default: today
    #[arg(long, value_parser = parse_date, value_name = "DATE")]
    pub(super) from: Option<NaiveDate>,
    /// Number of nights
    #[arg(long, value_name = "N", default_value_t = 14)]
    pub(super) days: u32,
    #[command(flatten)]
    pub(super) output: OutputArgs,
}

pub(super) fn run_nights(args: NightsArgs) -> Result<()> {
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
    let text = match args.output.format() {
        Format::Table => report::nights_table(&site, &nights, args.output.utc),
        Format::Csv => report::nights_csv(&nights),
        Format::Json => report::nights_json(&site, &nights),
        Format::Ecsv => return Err(no_ecsv("nights")),
    };
    emit(&text, args.output.out.as_deref())
}
