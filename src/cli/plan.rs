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
    let format = args.output.format();
    if format != Format::Table {
        let Loaded {
            sites,
            targets,
            opts,
            tables,
        } = args.selection.load_with_tables(args.include_unobservable)?;
        let planner = dipwatch::engine::plan::Planner::with_tables(&sites, &targets, &opts, tables);
        return stream_plan(
            &planner,
            (&sites, &targets, &opts),
            args.output.out.as_deref(),
            format,
        );
    }
    let (sites, targets, opts) = args.selection.load(args.include_unobservable)?;
    let result = plan(&sites, &targets, &opts);
    let text = report::plan_table(&result, &sites, &targets, &opts, args.output.utc);
    emit(&text, args.output.out.as_deref())
}

/// Nights planned at a time when streaming: bounds memory at catalogue scale. 64 rather than 32 measured 7%
/// faster on the benchmark job (fewer chunk boundaries, each a fresh pass over every target) for 116 MiB peak
/// instead of 88 (CSV; JSON 150).
pub(super) const STREAM_CHUNK_NIGHTS: i64 = 64;

/// The output buffer of a streamed plan. Smaller than the formatted pieces (about 1 MB each), which
/// `BufWriter` then hands to the file or pipe whole instead of copying them through its buffer: 2% of the
/// catalogue job's instructions were that copy with a 1 MiB buffer.
pub(super) const OUTPUT_BUFFER_BYTES: usize = 64 * 1024;

/// Plan and write CSV, ECSV or JSON site by site and [`STREAM_CHUNK_NIGHTS`] nights at a time, formatting the
/// events in parallel and never holding the whole plan: the output is that of `report::plan_csv` (or the ECSV, or the same JSON document as
/// `report::plan_json`, one event per line) of the whole plan. A progress bar shows on a terminal for long runs.
pub(super) fn stream_plan(
    planner: &dipwatch::engine::plan::Planner<'_>,
    (sites, targets, opts): (&[Site], &[Target], &PlanOptions),
    out: Option<&Path>,
    format: Format,
) -> Result<()> {
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
        let b = indicatif::ProgressBar::new((chunks.len() * planner.station_count()) as u64);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{msg} [{bar:30}] {pos}/{len} telescope-chunks of nights, {eta} left",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b.set_message("planning");
        Some(b)
    } else {
        None
    };
    let write_all = |w: &mut dyn Write| -> Result<()> {
        w.write_all(stream_head(planner, sites, opts, format)?.as_bytes())?;
        let lost = pipe_events(planner, &chunks, (sites, targets), format, bar.as_ref(), w)?;
        if format == Format::Json {
            let lost: Vec<dipwatch::engine::plan::LostEphemeris> = lost
                .into_iter()
                .map(
                    |(target_index, sigma_min)| dipwatch::engine::plan::LostEphemeris {
                        target_index,
                        sigma_min,
                    },
                )
                .collect();
            let tail = serde_json::to_string(&report::lost_json(&lost, targets))?;
            w.write_all(format!("\n  ],\n  \"lost_ephemerides\": {tail}\n}}\n").as_bytes())?;
        }
        w.flush()?;
        Ok(())
    };
    let result = match out {
        None => {
            let stdout = std::io::stdout();
            let mut w = std::io::BufWriter::with_capacity(OUTPUT_BUFFER_BYTES, stdout.lock());
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

/// Plan and format every telescope-chunk of nights of the run and write it to `w`, computing overlapped with
/// writing: a producer thread plans each chunk while it formats the one before (both in parallel, on rayon's
/// pool) and hands the text over a bounded channel while this thread writes it. A chunk being planned, one being
/// formatted, one in the channel and the one being written bound the memory: with a slow disk, a channel of two
/// took the JSON job to 297 MiB (one: see the README's figures), and a deeper queue cannot write faster.
/// Returns the lost ephemerides (target index to sigma in minutes).
fn pipe_events(
    planner: &dipwatch::engine::plan::Planner<'_>,
    chunks: &[(NaiveDate, NaiveDate)],
    (sites, targets): (&[Site], &[Target]),
    format: Format,
    bar: Option<&indicatif::ProgressBar>,
    w: &mut dyn Write,
) -> Result<std::collections::BTreeMap<usize, f64>> {
    use rayon::prelude::*;
    let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<Vec<u8>>>(1);
    // Written text buffers come back here for the next chunks: fresh ones would be new pages from the
    // system, zeroed by the kernel, for every megabyte of output.
    let spare: std::sync::Mutex<Vec<Vec<u8>>> = std::sync::Mutex::new(Vec::new());
    let take_buffer = || {
        spare
            .lock()
            .ok()
            .and_then(|mut v| v.pop())
            .unwrap_or_default()
    };
    // The per-target and per-station fields, written once for the whole run.
    let text = report::RowText::new(sites, targets);
    std::thread::scope(|scope| -> Result<_> {
        let producer = scope.spawn(|| {
            // Owned here, so the channel closes when planning ends.
            let tx = tx;
            let mut lost = std::collections::BTreeMap::new();
            let format_plan = |sp: dipwatch::engine::plan::SitePlan| -> Vec<Vec<u8>> {
                let parts = sp
                    .events
                    .par_chunks(2048)
                    .map(|c| format_events(c, (sites, targets), &text, format, take_buffer()))
                    .filter(|p| !p.is_empty())
                    .collect();
                // The events' memory serves a later chunk.
                planner.recycle(sp.events);
                parts
            };
            // Each telescope-chunk is formatted while the next one is planned (both on rayon's pool), so the
            // cores do not wait at the end of every planning or formatting pass for the last piece of work.
            let jobs: Vec<(usize, NaiveDate, NaiveDate)> = (0..planner.station_count())
                .flat_map(|k| chunks.iter().map(move |&(a, b)| (k, a, b)))
                .collect();
            let mut pending: Option<dipwatch::engine::plan::SitePlan> = None;
            for step in 0..=jobs.len() {
                let (planned, parts) = rayon::join(
                    || {
                        jobs.get(step)
                            .map(|&(k, a, b)| planner.station_plan(k, a, b))
                    },
                    || pending.take().map(format_plan),
                );
                if let Some((sp, chunk_lost)) = planned {
                    for (ti, sigma) in chunk_lost {
                        lost.entry(ti).or_insert(sigma);
                    }
                    pending = Some(sp);
                }
                if let Some(parts) = parts {
                    if let Some(b) = bar {
                        b.inc(1);
                    }
                    // The writer stopped (an error): stop planning too.
                    if tx.send(parts).is_err() {
                        return lost;
                    }
                }
            }
            lost
        });
        // A write error stops the loop; dropping the receiver then ends the producer at its next send.
        let written = (|| -> std::io::Result<()> {
            let mut first = true;
            for parts in &rx {
                for p in &parts {
                    if format == Format::Json && !first {
                        w.write_all(b",\n")?;
                    }
                    first = false;
                    w.write_all(p)?;
                }
                if let Ok(mut v) = spare.lock() {
                    // Enough for the chunks in flight; the rest are freed.
                    for mut p in parts {
                        if v.len() < 64 {
                            p.clear();
                            v.push(p);
                        }
                    }
                }
            }
            Ok(())
        })();
        drop(rx);
        let lost = producer
            .join()
            .map_err(|_| anyhow::anyhow!("the planning thread failed"))?;
        written?;
        Ok(lost)
    })
}

/// What comes before the events: the CSV or ECSV header, or the JSON document up to its `events` array.
fn stream_head(
    planner: &dipwatch::engine::plan::Planner<'_>,
    sites: &[Site],
    opts: &PlanOptions,
    format: Format,
) -> Result<String> {
    Ok(match format {
        Format::Ecsv => dipwatch::outputs::columns::ecsv_event_header(),
        Format::Json => {
            let site_info: Vec<serde_json::Value> = sites
                .iter()
                .enumerate()
                .map(|(si, s)| report::site_json(s, planner.site_nights(si)))
                .collect();
            format!(
                "{{\n  \"options\": {},\n  \"sites\": {},\n  \"events\": [\n",
                serde_json::to_string(opts)?,
                serde_json::to_string(&site_info)?
            )
        }
        _ => report::csv_header(),
    })
}

/// One chunk of events as CSV or ECSV lines, or JSON objects one per line (comma-separated, no trailing comma),
/// appended to `s` (an empty buffer, perhaps with room from earlier chunks).
fn format_events(
    events: &[dipwatch::engine::plan::Event],
    inputs: (&[Site], &[Target]),
    text: &report::RowText,
    format: Format,
    mut s: Vec<u8>,
) -> Vec<u8> {
    let per_event = if format == Format::Json { 1536 } else { 512 };
    s.reserve(events.len() * per_event);
    match format {
        Format::Json => {
            let mut buf = [0; dipwatch::outputs::columns::ROW_BUFFER_BYTES];
            for (i, e) in events.iter().enumerate() {
                if i > 0 {
                    s.extend_from_slice(b",\n");
                }
                s.extend_from_slice(b"    ");
                let row = report::EventRow::with_text(e, inputs, text);
                dipwatch::outputs::columns::push_event_json_row_with(&row, &mut s, &mut buf);
            }
        }
        Format::Ecsv => {
            dipwatch::outputs::columns::push_event_ecsv_rows(events, inputs, Some(text), &mut s)
        }
        _ => report::push_event_csv_rows(events, inputs, Some(text), &mut s),
    }
    s
}
