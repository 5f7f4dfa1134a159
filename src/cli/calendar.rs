//! `dipwatch calendar`: the plan (or the schedule) as RFC 5545 files, compared with a previous export.

use super::*;

#[derive(Args, Debug)]
pub(super) struct CalendarArgs {
    #[command(flatten)]
    pub(super) selection: Selection,
    /// Calendar file to write (atomically), or - for standard output
    #[arg(long, value_name = "FILE")]
    pub(super) out: PathBuf,
    /// One file per site: FILE-<site>.ics next to --out
    #[arg(long)]
    pub(super) per_site: bool,
    /// Add a reminder this many minutes before each block
    #[arg(long, value_name = "MIN")]
    pub(super) alarm_minutes: Option<u32>,
    /// The previous export: changed events get a higher SEQUENCE, dropped ones are written as cancelled
    #[arg(long, value_name = "FILE")]
    pub(super) previous: Option<PathBuf>,
    /// Export the schedule (see `dipwatch schedule`) instead of every observable event
    #[arg(long)]
    pub(super) schedule: bool,
    #[command(flatten)]
    pub(super) choice: ChoiceArgs,
}

/// The export time: SOURCE_DATE_EPOCH (seconds since 1970, for reproducible files) or the system clock.
pub(super) fn export_stamp() -> Result<chrono::DateTime<chrono::Utc>> {
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

pub(super) fn site_file_name(out: &Path, site: &str) -> PathBuf {
    let stem = out
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "calendar".into());
    let slug = dipwatch::outputs::names::slug(site);
    out.with_file_name(format!("{stem}-{slug}.ics"))
}

pub(super) fn run_calendar(args: CalendarArgs) -> Result<()> {
    if args.per_site && args.out.as_os_str() == "-" {
        bail!("--per-site writes one file per site; expected --out FILE, not -");
    }
    let (sites, targets, opts) = args.selection.load(false)?;
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
