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
    #[error("needs at least two different epochs to fit T0 and P (found {0}); add observations or use --prior")]
    TooFewEpochs(usize),
    /// A sigma is not positive.
    #[error("point {0} has a 1-sigma error of {1} d; expected a positive error")]
    BadSigma(usize, f64),
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
    for (i, p) in points.iter().enumerate() {
        if !(p.sigma_days > 0.0 && p.sigma_days.is_finite()) {
            return Err(FitError::BadSigma(i + 1, p.sigma_days));
        }
    }
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
    let reduced_chi2 = if dof > 0 { chi2 / dof as f64 } else { f64::NAN };
    let sigma_scale = if reduced_chi2 > 1.0 {
        reduced_chi2.sqrt()
    } else {
        1.0
    };
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
        lost: sigma > crate::plan::LOST_SIGMA_FRACTION_OF_PERIOD * eph.period_days,
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

/// Points beyond this many sigmas from the refined ephemeris are flagged in the O-C table (common practice,
/// no source).
pub const OUTLIER_SIGMAS: f64 = 3.0;

/// One row of the O-C table.
#[derive(Debug, Clone, PartialEq)]
pub struct OcRow {
    /// Epoch relative to the catalogue T0.
    pub epoch: i64,
    /// Observed time converted to BJD_TDB.
    pub bjd_tdb: f64,
    /// Observed minus computed (refined ephemeris), minutes.
    pub o_minus_c_min: f64,
    /// The point's 1-sigma, minutes.
    pub sigma_min: f64,
    /// (O-C) / sigma.
    pub n_sigma: f64,
    /// |O-C| > 3 sigma.
    pub outlier: bool,
    /// Source label.
    pub source: String,
    /// Line in the observed file (None for the catalogue prior point).
    pub line: Option<usize>,
}

/// The refinement of one target.
#[derive(Debug, Clone, PartialEq)]
pub struct TargetRefinement {
    /// Target index in the input list.
    pub target_index: usize,
    /// The fit.
    pub fit: LinearFit,
    /// The refined ephemeris in BJD_TDB, with T0 at the reference epoch.
    pub ephemeris: Ephemeris,
    /// The O-C table, observed points first in file order, then the prior point if used.
    pub rows: Vec<OcRow>,
}

/// Why refinement stopped.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RefineError {
    /// An observation names a target not in the targets file.
    #[error("line {line}: target {name:?} is not in the targets file")]
    UnknownTarget {
        /// Line in the observed file.
        line: usize,
        /// Name as written.
        name: String,
    },
    /// An observation is more than P/4 from every predicted transit.
    #[error("line {line}: {target} observed at {tc} is {offset_min:.1} min from the nearest predicted transit, more than a quarter of the period ({quarter_min:.1} min): the epoch is ambiguous; check the time and its time system, or the catalogue period")]
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
    /// The fit failed.
    #[error("{target}: {source}")]
    Fit {
        /// Target name.
        target: String,
        /// The cause.
        source: FitError,
    },
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

/// Refine the ephemeris of every target that has observations (or only `only`, if not empty).
///
/// With `use_prior`, the catalogue T0 enters as one more point at epoch 0 with its 1-sigma. Returns the
/// refinements in target order, or the first problem (naming its line).
pub fn refine_targets(
    targets: &[Target],
    observations: &[Observation],
    use_prior: bool,
) -> Result<Vec<TargetRefinement>, RefineError> {
    let mut by_target: Vec<Vec<&Observation>> = vec![Vec::new(); targets.len()];
    for o in observations {
        match targets
            .iter()
            .position(|t| t.name.eq_ignore_ascii_case(o.target.trim()))
        {
            Some(i) => by_target[i].push(o),
            None => {
                return Err(RefineError::UnknownTarget {
                    line: o.line,
                    name: o.target.clone(),
                })
            }
        }
    }
    let mut out = Vec::new();
    for (ti, obs) in by_target.iter().enumerate() {
        if obs.is_empty() {
            continue;
        }
        let target = &targets[ti];
        let cat = &target.ephemeris;
        let t0_bjd = to_bjd_tdb(cat.system, cat.t0, target);
        let cat_bjd = Ephemeris {
            t0: t0_bjd,
            system: TimeSystem::BjdTdb,
            ..*cat
        };
        let times: Vec<f64> = obs
            .iter()
            .map(|o| to_bjd_tdb(o.system, o.tc, target))
            .collect();
        let epochs =
            assign_epochs(&cat_bjd, &times).map_err(|(i, off)| RefineError::Ambiguous {
                line: obs[i].line,
                target: target.name.clone(),
                tc: obs[i].tc,
                offset_min: off * 1440.0,
                quarter_min: cat.period_days / 4.0 * 1440.0,
            })?;
        let mut points: Vec<TimingPoint> = obs
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
        if use_prior && cat.t0_sigma_days > 0.0 {
            points.push(TimingPoint {
                epoch: 0,
                bjd_tdb: t0_bjd,
                sigma_days: cat.t0_sigma_days,
                label: "catalogue T0".into(),
            });
        }
        let fit = fit_linear_ephemeris(&points, None).map_err(|source| RefineError::Fit {
            target: target.name.clone(),
            source,
        })?;
        let rows = points
            .iter()
            .enumerate()
            .map(|(i, p)| {
                let r = fit.residuals_days[i];
                OcRow {
                    epoch: p.epoch,
                    bjd_tdb: p.bjd_tdb,
                    o_minus_c_min: r * 1440.0,
                    sigma_min: p.sigma_days * 1440.0,
                    n_sigma: r / p.sigma_days,
                    outlier: (r / p.sigma_days).abs() > OUTLIER_SIGMAS,
                    source: p.label.clone(),
                    line: obs.get(i).map(|o| o.line),
                }
            })
            .collect();
        let ephemeris = Ephemeris {
            t0: fit.t_ref,
            t0_sigma_days: fit.sigma_t_ref_days,
            period_days: fit.period_days,
            period_sigma_days: fit.sigma_period_days,
            cov_t0_period_days2: fit.cov_days2,
            system: TimeSystem::BjdTdb,
        };
        out.push(TargetRefinement {
            target_index: ti,
            fit,
            ephemeris,
            rows,
        });
    }
    Ok(out)
}
