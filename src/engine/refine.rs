//! Refining a linear ephemeris from observed mid-transit times: weighted least squares, O-C, staleness.
//!
//! The model Tc(n) = T_ref + (n - n_ref) P is fitted by weighted linear least squares (weights 1/sigma^2;
//! e.g. Press et al., Numerical Recipes, 3rd ed., section 15.2, "fitting data to a straight line"). Taking the
//! reference epoch n_ref at the weighted mean epoch (rounded to an integer so that T_ref is a real transit)
//! makes the T_ref-P covariance vanish (exactly at the unrounded mean, nearly so after rounding).

use crate::ephemeris::Ephemeris;

/// One observed mid-transit time, already converted to BJD_TDB.
#[derive(Debug, Clone, PartialEq)]
pub struct TimingPoint {
    /// Epoch number relative to the catalogue T0.
    pub epoch: i64,
    /// Mid-transit time, BJD_TDB.
    pub bjd_tdb: f64,
    /// 1-sigma error, days.
    pub sigma_days: f64,
    /// Where the point came from (source label, or "catalogue T0" for the prior point).
    pub label: String,
}

/// The result of a weighted linear fit.
#[derive(Debug, Clone, PartialEq)]
pub struct LinearFit {
    /// Reference epoch (relative to the catalogue T0).
    pub ref_epoch: i64,
    /// Mid-transit time at the reference epoch, BJD_TDB.
    pub t_ref: f64,
    /// Period, days.
    pub period_days: f64,
    /// 1-sigma of `t_ref`, days (after any rescaling).
    pub sigma_t_ref_days: f64,
    /// 1-sigma of the period, days (after any rescaling).
    pub sigma_period_days: f64,
    /// Covariance of `t_ref` and the period, days^2 (after any rescaling).
    pub cov_days2: f64,
    /// Chi-square of the fit.
    pub chi2: f64,
    /// Degrees of freedom (points - 2).
    pub dof: usize,
    /// Chi-square per degree of freedom (NaN when dof = 0).
    pub reduced_chi2: f64,
    /// Factor applied to the sigmas: sqrt(reduced chi-square) when that exceeds 1, else 1.
    pub sigma_scale: f64,
    /// Residuals observed - computed, days, in input order.
    pub residuals_days: Vec<f64>,
}

/// Why a fit could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitError {
    /// Fewer than two distinct epochs.
    #[error("needs at least two different epochs to fit T0 and P (found {0}); add observations of another epoch, or give the catalogue T0 and P their errors so the prior can fix P")]
    TooFewEpochs(usize),
    /// A sigma is not positive.
    #[error("point {0} has a 1-sigma error of {1} d; expected a positive error")]
    BadSigma(usize, f64),
}

/// Reduced chi-square (NaN with no degrees of freedom) and the factor applied to the sigmas: its square root
/// when it exceeds 1, else 1 (common practice, no source).
fn chi2_scale(chi2: f64, dof: usize) -> (f64, f64) {
    let reduced = if dof > 0 { chi2 / dof as f64 } else { f64::NAN };
    (reduced, if reduced > 1.0 { reduced.sqrt() } else { 1.0 })
}

/// The first point whose 1-sigma error is not a positive finite number, as an error.
fn check_sigmas(points: &[TimingPoint]) -> Result<(), FitError> {
    match points
        .iter()
        .position(|p| !(p.sigma_days > 0.0 && p.sigma_days.is_finite()))
    {
        Some(i) => Err(FitError::BadSigma(i + 1, points[i].sigma_days)),
        None => Ok(()),
    }
}

/// Weighted linear least-squares fit of Tc(n) = T_ref + (n - n_ref) P.
///
/// Given: points (epoch, time, sigma > 0); `ref_epoch` to force the reference epoch (otherwise the rounded
/// weighted mean epoch). Returns the fit with covariances from the normal equations, rescaled by
/// sqrt(chi2/dof) when that exceeds 1 (common practice, no source). Times are fitted relative to the first
/// point to keep full precision.
pub fn fit_linear_ephemeris(
    points: &[TimingPoint],
    ref_epoch: Option<i64>,
) -> Result<LinearFit, FitError> {
    check_sigmas(points)?;
    let mut epochs: Vec<i64> = points.iter().map(|p| p.epoch).collect();
    epochs.sort_unstable();
    epochs.dedup();
    if epochs.len() < 2 {
        return Err(FitError::TooFewEpochs(epochs.len()));
    }
    let w: Vec<f64> = points
        .iter()
        .map(|p| 1.0 / (p.sigma_days * p.sigma_days))
        .collect();
    let sw: f64 = w.iter().sum();
    let mean_epoch = points
        .iter()
        .zip(&w)
        .map(|(p, wi)| wi * p.epoch as f64)
        .sum::<f64>()
        / sw;
    let n_ref = ref_epoch.unwrap_or(mean_epoch.round() as i64);
    let t_off = points[0].bjd_tdb;
    // Normal equations in coordinates centred on the weighted mean epoch (numerically stable; the intercept
    // and slope are then uncorrelated), then moved to n_ref: a = a_m + b d, var(a) = var(a_m) + d^2 var(b),
    // cov(a, b) = d var(b) with d = n_ref - mean epoch.
    let t_mean = points
        .iter()
        .zip(&w)
        .map(|(p, wi)| wi * (p.bjd_tdb - t_off))
        .sum::<f64>()
        / sw;
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for (p, wi) in points.iter().zip(&w) {
        let x = p.epoch as f64 - mean_epoch;
        sxx += wi * x * x;
        sxy += wi * x * (p.bjd_tdb - t_off - t_mean);
    }
    let b = sxy / sxx;
    let var_b = 1.0 / sxx;
    let d = n_ref as f64 - mean_epoch;
    let a = t_mean + b * d;
    let var_a = 1.0 / sw + d * d * var_b;
    let cov_ab = d * var_b;
    let residuals_days: Vec<f64> = points
        .iter()
        .map(|p| (p.bjd_tdb - t_off) - (a + b * (p.epoch - n_ref) as f64))
        .collect();
    let chi2: f64 = residuals_days
        .iter()
        .zip(points)
        .map(|(r, p)| (r / p.sigma_days).powi(2))
        .sum();
    let dof = points.len() - 2;
    let (reduced_chi2, sigma_scale) = chi2_scale(chi2, dof);
    let k2 = sigma_scale * sigma_scale;
    Ok(LinearFit {
        ref_epoch: n_ref,
        t_ref: t_off + a,
        period_days: b,
        sigma_t_ref_days: (var_a * k2).sqrt(),
        sigma_period_days: (var_b * k2).sqrt(),
        cov_days2: cov_ab * k2,
        chi2,
        dof,
        reduced_chi2,
        sigma_scale,
        residuals_days,
    })
}

/// A Gaussian prior on (T0 at epoch 0, P) from a catalogue ephemeris (BJD_TDB).
///
/// A zero sigma means the catalogue gives no error for that parameter; it is then left out of the prior
/// (treated as unknown rather than exact, which would let the catalogue value override every observation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Prior {
    /// T0 at epoch 0, BJD_TDB.
    pub t0: f64,
    /// Period, days.
    pub period_days: f64,
    /// 1-sigma of T0, days (0: not constrained).
    pub t0_sigma_days: f64,
    /// 1-sigma of P, days (0: not constrained).
    pub period_sigma_days: f64,
    /// Covariance of T0 and P, days^2 (used only when both sigmas are positive).
    pub cov_days2: f64,
}

impl Prior {
    /// The prior of a catalogue ephemeris already in BJD_TDB.
    pub fn of(e: &Ephemeris) -> Prior {
        Prior {
            t0: e.t0,
            period_days: e.period_days,
            t0_sigma_days: e.t0_sigma_days,
            period_sigma_days: e.period_sigma_days,
            cov_days2: e.cov_t0_period_days2,
        }
    }

    /// Inverse covariance (precision) of (T0, P), and the number of constrained parameters.
    fn precision(&self) -> ([[f64; 2]; 2], usize) {
        let (st, sp) = (self.t0_sigma_days, self.period_sigma_days);
        match (st > 0.0, sp > 0.0) {
            (true, true) => {
                let det = st * st * sp * sp - self.cov_days2 * self.cov_days2;
                if det > 0.0 {
                    (
                        [
                            [sp * sp / det, -self.cov_days2 / det],
                            [-self.cov_days2 / det, st * st / det],
                        ],
                        2,
                    )
                } else {
                    // An inconsistent covariance (|rho| >= 1): keep the two variances only.
                    ([[1.0 / (st * st), 0.0], [0.0, 1.0 / (sp * sp)]], 2)
                }
            }
            (true, false) => ([[1.0 / (st * st), 0.0], [0.0, 0.0]], 1),
            (false, true) => ([[0.0, 0.0], [0.0, 1.0 / (sp * sp)]], 1),
            (false, false) => ([[0.0; 2]; 2], 0),
        }
    }
}

/// Weighted linear least squares of Tc(n) = T_ref + (n - n_ref) P with a Gaussian prior on (T0, P): the
/// maximum of the posterior, i.e. generalised least squares with the prior as two more (correlated) data
/// rows (e.g. Press et al., Numerical Recipes, 3rd ed., section 15.4, normal equations; the prior enters the
/// normal matrix as its inverse covariance). Solved in the information form about the information-weighted
/// mean epoch n_c (the prior's T0 weighs in at epoch 0): N x = r with x = (T(n_c), P).
///
/// chi-square counts the observations and the prior's residual (r^T C^-1 r); the degrees of freedom are the
/// observations plus the constrained prior parameters minus 2; sigmas are scaled by sqrt(chi2/dof) when that
/// exceeds 1, as in [`fit_linear_ephemeris`]. `residuals_days` are those of the observed points only.
pub fn fit_with_prior(
    points: &[TimingPoint],
    prior: &Prior,
    ref_epoch: Option<i64>,
) -> Result<LinearFit, FitError> {
    check_sigmas(points)?;
    let (lambda, n_prior) = prior.precision();
    let w: Vec<f64> = points
        .iter()
        .map(|p| 1.0 / (p.sigma_days * p.sigma_days))
        .collect();
    // Centre on the mean epoch of the information (observations, and the prior's T0 at epoch 0).
    let sw: f64 = w.iter().sum::<f64>() + lambda[0][0];
    let n_c = points
        .iter()
        .zip(&w)
        .map(|(p, wi)| wi * p.epoch as f64)
        .sum::<f64>()
        / sw;
    let t_off = points.first().map(|p| p.bjd_tdb).unwrap_or(prior.t0);
    let mut nm = [[0.0_f64; 2]; 2];
    let mut rhs = [0.0_f64; 2];
    for (p, wi) in points.iter().zip(&w) {
        let h = [1.0, p.epoch as f64 - n_c];
        let y = p.bjd_tdb - t_off;
        for a in 0..2 {
            rhs[a] += wi * h[a] * y;
            for b in 0..2 {
                nm[a][b] += wi * h[a] * h[b];
            }
        }
    }
    // Prior: (T0, P) = G x + (t_off, 0) with G = [[1, -n_c], [0, 1]].
    let g = [[1.0, -n_c], [0.0, 1.0]];
    let d_prior = [prior.t0 - t_off, prior.period_days];
    let mut gl = [[0.0_f64; 2]; 2]; // G^T Lambda
    for a in 0..2 {
        for b in 0..2 {
            gl[a][b] = (0..2).map(|k| g[k][a] * lambda[k][b]).sum();
        }
    }
    for a in 0..2 {
        rhs[a] += (0..2).map(|k| gl[a][k] * d_prior[k]).sum::<f64>();
        for b in 0..2 {
            nm[a][b] += (0..2).map(|k| gl[a][k] * g[k][b]).sum::<f64>();
        }
    }
    let det = nm[0][0] * nm[1][1] - nm[0][1] * nm[1][0];
    let scale = nm[0][0].abs() * nm[1][1].abs();
    if det.is_nan() || det <= 1e-12 * scale {
        let mut epochs: Vec<i64> = points.iter().map(|p| p.epoch).collect();
        epochs.sort_unstable();
        epochs.dedup();
        return Err(FitError::TooFewEpochs(epochs.len()));
    }
    let inv = [
        [nm[1][1] / det, -nm[0][1] / det],
        [-nm[1][0] / det, nm[0][0] / det],
    ];
    let c = inv[0][0] * rhs[0] + inv[0][1] * rhs[1];
    let per = inv[1][0] * rhs[0] + inv[1][1] * rhs[1];
    let residuals_days: Vec<f64> = points
        .iter()
        .map(|p| (p.bjd_tdb - t_off) - (c + per * (p.epoch as f64 - n_c)))
        .collect();
    let mut chi2: f64 = residuals_days
        .iter()
        .zip(&w)
        .map(|(r, wi)| r * r * wi)
        .sum();
    let rp = [d_prior[0] - (c - n_c * per), d_prior[1] - per];
    chi2 += (0..2)
        .map(|a| (0..2).map(|b| rp[a] * lambda[a][b] * rp[b]).sum::<f64>())
        .sum::<f64>();
    let dof = (points.len() + n_prior).saturating_sub(2);
    let (reduced_chi2, sigma_scale) = chi2_scale(chi2, dof);
    let k2 = sigma_scale * sigma_scale;
    let n_ref = ref_epoch.unwrap_or(n_c.round() as i64);
    let d = n_ref as f64 - n_c;
    // Move to n_ref: a = c + d P; var(a) = var(c) + 2 d cov(c, P) + d^2 var(P); cov(a, P) = cov(c, P) + d var(P).
    let var_a = inv[0][0] + 2.0 * d * inv[0][1] + d * d * inv[1][1];
    let cov_ap = inv[0][1] + d * inv[1][1];
    Ok(LinearFit {
        ref_epoch: n_ref,
        t_ref: t_off + c + d * per,
        period_days: per,
        sigma_t_ref_days: (var_a.max(0.0) * k2).sqrt(),
        sigma_period_days: (inv[1][1].max(0.0) * k2).sqrt(),
        cov_days2: cov_ap * k2,
        chi2,
        dof,
        reduced_chi2,
        sigma_scale,
        residuals_days,
    })
}

impl LinearFit {
    /// The fitted ephemeris in BJD_TDB with T0 at the reference epoch.
    pub fn ephemeris(&self) -> Ephemeris {
        Ephemeris {
            t0: self.t_ref,
            t0_sigma_days: self.sigma_t_ref_days,
            period_days: self.period_days,
            period_sigma_days: self.sigma_period_days,
            cov_t0_period_days2: self.cov_days2,
            system: crate::astro::barycentric::TimeSystem::BjdTdb,
        }
    }
}

/// The epoch of each time by rounding against `eph` (times and `eph` in the same system).
///
/// Returns the epochs, or the index of the first time that sits more than P/4 from its predicted transit
/// (the epoch is then ambiguous) with its offset in days.
pub fn assign_epochs(eph: &Ephemeris, times: &[f64]) -> Result<Vec<i64>, (usize, f64)> {
    times
        .iter()
        .enumerate()
        .map(|(i, &t)| {
            let n = ((t - eph.t0) / eph.period_days).round() as i64;
            let off = t - eph.mid_time(n);
            if off.abs() > eph.period_days / 4.0 {
                Err((i, off))
            } else {
                Ok(n)
            }
        })
        .collect()
}

/// One target's staleness at a date, with the ephemeris it was computed from.
#[derive(Debug, Clone, PartialEq)]
pub struct StaleRow {
    /// Target index.
    pub target_index: usize,
    /// Whether the ephemeris is the refined one.
    pub refined: bool,
    /// The numbers.
    pub staleness: Staleness,
}

/// Staleness of every target at `at` (BJD_TDB or any system: a minute changes nothing), from its refined
/// ephemeris where there is one, the stalest first.
pub fn staleness_table(
    targets: &[Target],
    refinements: &[TargetRefinement],
    at: f64,
) -> Vec<StaleRow> {
    let mut rows: Vec<StaleRow> = targets
        .iter()
        .enumerate()
        .map(|(i, t)| {
            let refined = refinements.iter().find(|r| r.target_index == i);
            let eph = refined.map(|r| &r.ephemeris).unwrap_or(&t.ephemeris);
            StaleRow {
                target_index: i,
                refined: refined.is_some(),
                staleness: staleness(eph, t.t14_hours, at),
            }
        })
        .collect();
    rows.sort_by(|a, b| {
        b.staleness
            .fraction_of_t14
            .total_cmp(&a.staleness.fraction_of_t14)
    });
    rows
}

/// How stale an ephemeris will be at a date.
#[derive(Debug, Clone, PartialEq)]
pub struct Staleness {
    /// Epoch nearest the date.
    pub epoch: i64,
    /// Timing 1-sigma at that epoch, minutes.
    pub sigma_min: f64,
    /// sigma / T14.
    pub fraction_of_t14: f64,
    /// Whether the ephemeris is lost there (sigma > P/8).
    pub lost: bool,
}

/// The timing sigma of `eph` at the transit nearest `at` (same time system), against the duration.
pub fn staleness(eph: &Ephemeris, t14_hours: f64, at: f64) -> Staleness {
    let epoch = ((at - eph.t0) / eph.period_days).round() as i64;
    let sigma = eph.sigma_days(epoch);
    Staleness {
        epoch,
        sigma_min: sigma * 1440.0,
        fraction_of_t14: sigma * 24.0 / t14_hours,
        lost: sigma > crate::engine::plan::LOST_SIGMA_FRACTION_OF_PERIOD * eph.period_days,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pt(epoch: i64, t: f64, s: f64) -> TimingPoint {
        TimingPoint {
            epoch,
            bjd_tdb: t,
            sigma_days: s,
            label: String::new(),
        }
    }

    #[test]
    fn exact_line_has_zero_chi2() {
        let pts: Vec<_> = (0..5)
            .map(|n| pt(n * 3, 2_460_000.0 + n as f64 * 3.0 * 1.7, 0.001))
            .collect();
        let f = fit_linear_ephemeris(&pts, None).unwrap();
        assert!((f.period_days - 1.7).abs() < 1e-9);
        assert!(f.chi2 < 1e-6);
        assert_eq!(f.ref_epoch, 6);
        assert!(f.cov_days2.abs() < 1e-18);
    }

    #[test]
    fn one_epoch_is_not_enough() {
        assert_eq!(
            fit_linear_ephemeris(&[pt(3, 1.0, 0.1), pt(3, 1.1, 0.1)], None),
            Err(FitError::TooFewEpochs(1))
        );
    }
}

use crate::astro::barycentric::{EarthTable, TimeSystem};
use crate::inputs::observed::Observation;
use crate::inputs::targets::Target;

/// Points beyond this many sigmas from the refined ephemeris, or from the catalogue prediction, are flagged in
/// the O-C table (common practice, no source).
pub const OUTLIER_SIGMAS: f64 = 3.0;

/// Refined and catalogue ephemerides further apart than this many combined sigmas are in tension: the refined
/// one is not written unless the user accepts it (common practice, no source).
pub const TENSION_SIGMAS: f64 = 5.0;

/// Default largest distance of an observation from its predicted transit, in combined sigmas, before its
/// epoch is treated as unknown (common practice, no source; `--epoch-sigma`).
pub const DEFAULT_EPOCH_SIGMAS: f64 = 5.0;

/// One row of the O-C table.
#[derive(Debug, Clone, PartialEq)]
pub struct OcRow {
    /// Epoch relative to the catalogue T0.
    pub epoch: i64,
    /// Observed time converted to BJD_TDB.
    pub bjd_tdb: f64,
    /// Observed minus computed (the written ephemeris), minutes.
    pub o_minus_c_min: f64,
    /// The point's 1-sigma, minutes.
    pub sigma_min: f64,
    /// (O-C) / sigma.
    pub n_sigma: f64,
    /// |O-C| > 3 sigma.
    pub outlier: bool,
    /// Observed minus the catalogue prediction, minutes.
    pub o_minus_cat_min: f64,
    /// Combined 1-sigma of the observation and the catalogue prediction at this epoch, minutes.
    pub cat_sigma_min: f64,
    /// (O - catalogue) / combined sigma.
    pub cat_n_sigma: f64,
    /// |O - catalogue| > 3 combined sigma.
    pub cat_outlier: bool,
    /// Source label.
    pub source: String,
    /// Line in the observed file.
    pub line: Option<usize>,
}

/// Which fit an ephemeris comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FitKind {
    /// Observations combined with the catalogue ephemeris as a Gaussian prior (the default).
    WithPrior,
    /// Observations alone.
    ObservationsOnly,
}

impl FitKind {
    /// The label used in every output.
    pub fn label(self) -> &'static str {
        match self {
            FitKind::WithPrior => "with-catalogue-prior",
            FitKind::ObservationsOnly => "observations-only",
        }
    }
}

/// How far the observations alone put T0 and P from the catalogue, in combined sigmas.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tension {
    /// |T(n_ref) observed - catalogue| / combined sigma, at the observations' reference epoch.
    pub t_sigmas: f64,
    /// |P observed - catalogue| / combined sigma (None with a single epoch, where P is not measured).
    pub p_sigmas: Option<f64>,
}

impl Tension {
    /// The larger of the two.
    pub fn worst(&self) -> f64 {
        self.t_sigmas.max(self.p_sigmas.unwrap_or(0.0))
    }

    /// True above [`TENSION_SIGMAS`].
    pub fn is_serious(&self) -> bool {
        self.worst() > TENSION_SIGMAS
    }
}

/// The refinement of one target.
#[derive(Debug, Clone, PartialEq)]
pub struct TargetRefinement {
    /// Target index in the input list.
    pub target_index: usize,
    /// The fit that is reported as "refined" and written (see `written`).
    pub fit: LinearFit,
    /// The refined ephemeris in BJD_TDB, with T0 at the reference epoch.
    pub ephemeris: Ephemeris,
    /// Which fit `fit` is.
    pub written: FitKind,
    /// The fit with the catalogue prior, when it could be made.
    pub with_prior: Option<LinearFit>,
    /// The fit of the observations alone (None with fewer than two epochs).
    pub observations_only: Option<LinearFit>,
    /// The catalogue ephemeris converted to BJD_TDB.
    pub catalogue_bjd: Ephemeris,
    /// Observations alone against the catalogue.
    pub tension: Tension,
    /// The O-C table, observed points in file order.
    pub rows: Vec<OcRow>,
}

/// An observed row that was left out, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Skipped {
    /// Line in the observed file.
    pub line: usize,
    /// Target name as written.
    pub target: String,
}

/// Options of a refinement.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RefineOptions {
    /// Which fit to report as refined and write.
    pub fit: FitKind,
    /// Largest distance from the predicted transit, in combined sigmas, for assigning an epoch.
    pub epoch_sigmas: f64,
}

impl Default for RefineOptions {
    fn default() -> Self {
        RefineOptions {
            fit: FitKind::WithPrior,
            epoch_sigmas: DEFAULT_EPOCH_SIGMAS,
        }
    }
}

/// Why refinement stopped.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RefineError {
    /// An observation is more than P/4 from every predicted transit.
    #[error("{target} observed at {tc} is {offset_min:.1} min from the nearest predicted transit, more than a quarter of the period ({quarter_min:.1} min): the epoch is ambiguous; check the time and its time system, or the catalogue period")]
    Ambiguous {
        /// Line in the observed file.
        line: usize,
        /// Target name.
        target: String,
        /// The observed time as given.
        tc: f64,
        /// Offset from the nearest prediction, minutes.
        offset_min: f64,
        /// P/4, minutes.
        quarter_min: f64,
    },
    /// An observation is many combined sigmas from its predicted transit.
    #[error("{target} observed at {tc} is {offset_min:+.1} min from its predicted transit (epoch {epoch}), {n_sigma:.1} combined sigma (prediction +-{pred_sigma_min:.1} min, observation +-{obs_sigma_min:.1} min); expected within {limit} sigma: check the time, its time system and the catalogue ephemeris, or pass --epoch-sigma N if the catalogue errors are known to be too small")]
    FarFromPrediction {
        /// Line in the observed file.
        line: usize,
        /// Target name.
        target: String,
        /// The observed time as given.
        tc: f64,
        /// Epoch of the nearest predicted transit.
        epoch: i64,
        /// Offset from that prediction, minutes.
        offset_min: f64,
        /// Offset in combined sigmas.
        n_sigma: f64,
        /// The prediction's 1-sigma, minutes.
        pred_sigma_min: f64,
        /// The observation's 1-sigma, minutes.
        obs_sigma_min: f64,
        /// The limit, sigmas.
        limit: f64,
    },
    /// The fit failed.
    #[error("{target}: {source}")]
    Fit {
        /// Target name.
        target: String,
        /// The cause.
        source: FitError,
    },
}

impl RefineError {
    /// The line of the observed file the error is about, if any.
    pub fn line(&self) -> Option<usize> {
        match self {
            RefineError::Ambiguous { line, .. } | RefineError::FarFromPrediction { line, .. } => {
                Some(*line)
            }
            RefineError::Fit { .. } => None,
        }
    }
}

/// Convert a time in `system` to BJD_TDB for a target direction (geocentric: the site term, <= 21 ms, is
/// dropped because observed-times files do not say where each transit was observed).
pub fn to_bjd_tdb(system: TimeSystem, value: f64, target: &Target) -> f64 {
    if system == TimeSystem::BjdTdb {
        return value;
    }
    let icrs = target.icrs_at(value);
    let table = EarthTable::new(value - 1.0, value + 1.0);
    let utc = table.utc_from_system(system, value, &icrs, None);
    table.time_in_system(TimeSystem::BjdTdb, utc, &icrs, None)
}

/// Epochs of the observations `obs` (times already in BJD_TDB in `times`) against the catalogue: the nearest
/// predicted transit, which must lie within P/4 and within `limit` combined sigmas (the catalogue's sigma(n)
/// and the observation's; the sigma test is skipped when the catalogue gives no errors).
fn epochs_against_catalogue(
    target: &Target,
    cat: &Ephemeris,
    obs: &[&Observation],
    times: &[f64],
    limit: f64,
) -> Result<Vec<i64>, Vec<RefineError>> {
    let has_errors = cat.t0_sigma_days > 0.0 || cat.period_sigma_days > 0.0;
    let mut epochs = Vec::with_capacity(times.len());
    let mut problems = Vec::new();
    for (i, &t) in times.iter().enumerate() {
        let n = ((t - cat.t0) / cat.period_days).round() as i64;
        let off = t - cat.mid_time(n);
        let pred = cat.sigma_days(n);
        let comb = pred.hypot(obs[i].sigma_days);
        if off.abs() > cat.period_days / 4.0 {
            problems.push(RefineError::Ambiguous {
                line: obs[i].line,
                target: target.name.clone(),
                tc: obs[i].tc,
                offset_min: off * 1440.0,
                quarter_min: cat.period_days / 4.0 * 1440.0,
            });
        } else if has_errors && off.abs() > limit * comb {
            problems.push(RefineError::FarFromPrediction {
                line: obs[i].line,
                target: target.name.clone(),
                tc: obs[i].tc,
                epoch: n,
                offset_min: off * 1440.0,
                n_sigma: off.abs() / comb,
                pred_sigma_min: pred * 1440.0,
                obs_sigma_min: obs[i].sigma_days * 1440.0,
                limit,
            });
        }
        epochs.push(n);
    }
    if problems.is_empty() {
        Ok(epochs)
    } else {
        Err(problems)
    }
}

/// Observations alone against the catalogue: T at the observations' reference epoch and P, each against the
/// catalogue value with the combined sigma; with a single epoch, the worst observation.
fn tension_of(cat: &Ephemeris, obs_fit: Option<&LinearFit>, rows: &[OcRow]) -> Tension {
    match obs_fit {
        Some(f) => {
            let n = f.ref_epoch;
            let dt = f.t_ref - cat.mid_time(n);
            let st = f.sigma_t_ref_days.hypot(cat.sigma_days(n));
            let dp = f.period_days - cat.period_days;
            let sp = f.sigma_period_days.hypot(cat.period_sigma_days);
            Tension {
                t_sigmas: if st > 0.0 { dt.abs() / st } else { 0.0 },
                p_sigmas: Some(if sp > 0.0 { dp.abs() / sp } else { 0.0 }),
            }
        }
        None => Tension {
            t_sigmas: rows.iter().map(|r| r.cat_n_sigma.abs()).fold(0.0, f64::max),
            p_sigmas: None,
        },
    }
}

/// Refine the ephemeris of every target that has observations.
///
/// Both fits are made when possible: the observations with the catalogue ephemeris as a Gaussian prior on
/// (T0, P) with its covariance ([`fit_with_prior`]), and the observations alone ([`fit_linear_ephemeris`]);
/// `opts.fit` chooses the one reported as refined. Observations of targets not in `targets` are returned as
/// skipped. Returns the refinements in target order, or every problem (each naming its line), by line.
pub fn refine_targets(
    targets: &[Target],
    observations: &[Observation],
    opts: &RefineOptions,
) -> Result<(Vec<TargetRefinement>, Vec<Skipped>), Vec<RefineError>> {
    let mut by_target: Vec<Vec<&Observation>> = vec![Vec::new(); targets.len()];
    let mut skipped = Vec::new();
    for o in observations {
        match targets
            .iter()
            .position(|t| t.name.eq_ignore_ascii_case(o.target.trim()))
        {
            Some(i) => by_target[i].push(o),
            None => skipped.push(Skipped {
                line: o.line,
                target: o.target.clone(),
            }),
        }
    }
    let mut out = Vec::new();
    let mut problems = Vec::new();
    for (ti, obs) in by_target.iter().enumerate() {
        if obs.is_empty() {
            continue;
        }
        match refine_one(ti, &targets[ti], obs, opts) {
            Ok(r) => out.push(r),
            Err(mut e) => problems.append(&mut e),
        }
    }
    if problems.is_empty() {
        Ok((out, skipped))
    } else {
        problems.sort_by_key(|e| e.line());
        Err(problems)
    }
}

fn refine_one(
    ti: usize,
    target: &Target,
    obs: &[&Observation],
    opts: &RefineOptions,
) -> Result<TargetRefinement, Vec<RefineError>> {
    let cat = &target.ephemeris;
    let cat_bjd = Ephemeris {
        t0: to_bjd_tdb(cat.system, cat.t0, target),
        system: TimeSystem::BjdTdb,
        ..*cat
    };
    let times: Vec<f64> = obs
        .iter()
        .map(|o| to_bjd_tdb(o.system, o.tc, target))
        .collect();
    let epochs = epochs_against_catalogue(target, &cat_bjd, obs, &times, opts.epoch_sigmas)?;
    let points: Vec<TimingPoint> = obs
        .iter()
        .zip(&times)
        .zip(&epochs)
        .map(|((o, &t), &n)| TimingPoint {
            epoch: n,
            bjd_tdb: t,
            sigma_days: o.sigma_days,
            label: o.source.clone(),
        })
        .collect();
    let fit_err = |source| {
        vec![RefineError::Fit {
            target: target.name.clone(),
            source,
        }]
    };
    let with_prior = fit_with_prior(&points, &Prior::of(&cat_bjd), None);
    let observations_only = fit_linear_ephemeris(&points, None);
    let fit = match opts.fit {
        FitKind::WithPrior => with_prior.clone().map_err(fit_err)?,
        FitKind::ObservationsOnly => observations_only.clone().map_err(fit_err)?,
    };
    let rows: Vec<OcRow> = points
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let r = fit.residuals_days[i];
            let oc_cat = p.bjd_tdb - cat_bjd.mid_time(p.epoch);
            let comb = cat_bjd.sigma_days(p.epoch).hypot(p.sigma_days);
            OcRow {
                epoch: p.epoch,
                bjd_tdb: p.bjd_tdb,
                o_minus_c_min: r * 1440.0,
                sigma_min: p.sigma_days * 1440.0,
                n_sigma: r / p.sigma_days,
                outlier: (r / p.sigma_days).abs() > OUTLIER_SIGMAS,
                o_minus_cat_min: oc_cat * 1440.0,
                cat_sigma_min: comb * 1440.0,
                cat_n_sigma: oc_cat / comb,
                cat_outlier: (oc_cat / comb).abs() > OUTLIER_SIGMAS,
                source: p.label.clone(),
                line: Some(obs[i].line),
            }
        })
        .collect();
    let observations_only = observations_only.ok();
    let tension = tension_of(&cat_bjd, observations_only.as_ref(), &rows);
    Ok(TargetRefinement {
        target_index: ti,
        ephemeris: fit.ephemeris(),
        fit,
        written: opts.fit,
        with_prior: with_prior.ok(),
        observations_only,
        catalogue_bjd: cat_bjd,
        tension,
        rows,
    })
}
