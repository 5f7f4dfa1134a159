//! `dipwatch plan`: arguments, and the streamed CSV for catalogue-scale runs.

use super::*;

#[derive(Args, Debug)]
pub(super) struct PlanArgs {
    #[command(flatten)]
    pub(super) selection: Selection,
    /// Also list transits that cannot be observed, with the reasons
    #[arg(long)]
    pub(super) include_unobservable: bool,
    #[command(flatten)]
    pub(super) output: OutputArgs,
}

pub(super) fn run_plan(args: PlanArgs) -> Result<()> {
    let (sites, targets, opts) = args.selection.load(args.include_unobservable)?;
    if args.output.format() == Format::Csv {
        return stream_plan_csv(&sites, &targets, &opts, args.output.out.as_deref());
    }
    let result = plan(&sites, &targets, &opts);
    let text = match args.output.format() {
        Format::Table => report::plan_table(&result, &sites, &targets, &opts, args.output.utc),
        Format::Csv => report::plan_csv(&result, &sites, &targets),
        Format::Json => report::plan_json(&result, &sites, &targets, &opts),
        Format::Ecsv => {
            let events: Vec<&dipwatch::engine::plan::Event> = result
                .sites
                .iter()
                .flat_map(|sp| sp.events.iter())
                .collect();
            report::events_ecsv(&events, &sites, &targets)
        }
    };
    emit(&text, args.output.out.as_deref())
}

/// Nights planned at a time when streaming CSV: bounds memory at catalogue scale.
pub(super) const STREAM_CHUNK_NIGHTS: i64 = 32;

/// Plan and write CSV site by site and month by month, formatting rows in parallel; the output is the same
/// as `report::plan_csv` of the whole plan. A progress bar shows on a terminal for long runs.
pub(super) fn stream_plan_csv(
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
