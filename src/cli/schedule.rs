//! `dipwatch schedule`: the choice among colliding events per telescope and night.

use super::*;

/// How the schedule is chosen.
#[derive(Args, Debug)]
pub(super) struct ChoiceArgs {
    /// Minimum gap between two blocks on one telescope (slew, focus, calibrations), minutes
    #[arg(
        long,
        value_name = "MIN",
        default_value_t = 10.0,
        allow_negative_numbers = true
    )]
    pub(super) changeover: f64,
    /// Score weight of the in-transit coverage
    #[arg(
        long,
        value_name = "W",
        default_value_t = 1.0,
        allow_negative_numbers = true
    )]
    pub(super) weight_coverage: f64,
    /// Score weight of the verdict (whole 1, short baseline 0.8, ingress/egress only 0.5, middle only 0.2)
    #[arg(
        long,
        value_name = "W",
        default_value_t = 1.0,
        allow_negative_numbers = true
    )]
    pub(super) weight_verdict: f64,
    /// Score weight of 1/airmass at mid-transit
    #[arg(
        long,
        value_name = "W",
        default_value_t = 0.5,
        allow_negative_numbers = true
    )]
    pub(super) weight_airmass: f64,
    /// Score weight of the Moon separation (up to 90 deg)
    #[arg(
        long,
        value_name = "W",
        default_value_t = 0.25,
        allow_negative_numbers = true
    )]
    pub(super) weight_moon: f64,
    /// Score weight of the timing sigma (up to 30 min): uncertain ephemerides gain most
    #[arg(
        long,
        value_name = "W",
        default_value_t = 0.25,
        allow_negative_numbers = true
    )]
    pub(super) weight_sigma: f64,
    /// Score weight of the expected transit SNR (up to 20), where the site has a photometric set-up
    #[arg(
        long,
        value_name = "W",
        default_value_t = 0.5,
        allow_negative_numbers = true
    )]
    pub(super) weight_snr: f64,
    /// Let several telescopes observe the same transit
    #[arg(long)]
    pub(super) allow_repeats: bool,
}

impl ChoiceArgs {
    pub(super) fn weights(&self) -> dipwatch::engine::schedule::ScoreWeights {
        dipwatch::engine::schedule::ScoreWeights {
            coverage: self.weight_coverage,
            verdict: self.weight_verdict,
            airmass: self.weight_airmass,
            moon: self.weight_moon,
            sigma: self.weight_sigma,
            snr: self.weight_snr,
        }
    }
}

#[derive(Args, Debug)]
pub(super) struct ScheduleArgs {
    #[command(flatten)]
    pub(super) selection: Selection,
    #[command(flatten)]
    pub(super) choice: ChoiceArgs,
    #[command(flatten)]
    pub(super) output: OutputArgs,
}

/// Plan per telescope (each with its own altitude limit) and choose the blocks.
pub(super) fn make_schedule(
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
        ("weight-snr", c.weight_snr),
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

pub(super) fn run_schedule(args: ScheduleArgs) -> Result<()> {
    let (sites, targets, opts) = args.selection.load(false)?;
    let (tels, chosen) = make_schedule(&sites, &targets, &opts, &args.choice)?;
    let weights = args.choice.weights();
    let text = match args.output.format() {
        Format::Table => report::schedule_table(
            &chosen,
            &tels,
            &sites,
            &targets,
            (&weights, args.output.utc),
        ),
        Format::Csv => report::schedule_csv(&chosen, &tels, &sites, &targets),
        Format::Ecsv => report::schedule_ecsv(&chosen, &tels, &sites, &targets),
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
