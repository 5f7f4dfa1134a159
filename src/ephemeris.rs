//! Linear transit ephemerides: predicted mid-transit times and their growing uncertainty.

use crate::astro::barycentric::TimeSystem;

/// A linear ephemeris Tc(n) = T0 + n P with its 1-sigma errors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ephemeris {
    /// Reference mid-transit time T0, days, in `system`.
    pub t0: f64,
    /// 1-sigma error of T0, days.
    pub t0_sigma_days: f64,
    /// Orbital period P, days (> 0).
    pub period_days: f64,
    /// 1-sigma error of P, days.
    pub period_sigma_days: f64,
    /// Covariance of T0 and P, days^2 (0 when unknown).
    pub cov_t0_period_days2: f64,
    /// Time system of T0.
    pub system: TimeSystem,
}

impl Ephemeris {
    /// Predicted mid-transit time of epoch `n`, days in `self.system`.
    pub fn mid_time(&self, n: i64) -> f64 {
        self.t0 + n as f64 * self.period_days
    }

    /// 1-sigma timing error of epoch `n`, days: sqrt(sigma_T0^2 + n^2 sigma_P^2 + 2 n cov).
    /// Linear error propagation (common practice, no source); a negative variance from an inconsistent
    /// covariance is clamped to 0.
    pub fn sigma_days(&self, n: i64) -> f64 {
        let n = n as f64;
        (self.t0_sigma_days.powi(2)
            + n * n * self.period_sigma_days.powi(2)
            + 2.0 * n * self.cov_t0_period_days2)
            .max(0.0)
            .sqrt()
    }

    /// The epochs whose predicted mid-times fall in `[from, to]` (days in `self.system`).
    pub fn epochs_between(&self, from: f64, to: f64) -> std::ops::RangeInclusive<i64> {
        let first = ((from - self.t0) / self.period_days).ceil() as i64;
        let last = ((to - self.t0) / self.period_days).floor() as i64;
        first..=last
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn eph() -> Ephemeris {
        Ephemeris {
            t0: 2_460_000.0,
            t0_sigma_days: 0.001,
            period_days: 2.5,
            period_sigma_days: 0.0001,
            cov_t0_period_days2: 0.0,
            system: TimeSystem::BjdTdb,
        }
    }

    proptest::proptest! {
        /// The sigma over a run of epochs never exceeds the larger of its two ends (the planner checks only
        /// the ends for a lost ephemeris), whatever the covariance, consistent or not.
        #[test]
        fn sigma_peaks_at_an_end_of_any_run_of_epochs(
            st in 0.0f64..0.01,
            sp in 0.0f64..1e-4,
            rho in -1.5f64..1.5,
            a in -5000i64..5000,
            len in 0i64..400,
        ) {
            let e = Ephemeris {
                t0_sigma_days: st,
                period_sigma_days: sp,
                cov_t0_period_days2: rho * st * sp,
                ..eph()
            };
            let ends = e.sigma_days(a).max(e.sigma_days(a + len));
            for n in a..=a + len {
                proptest::prop_assert!(e.sigma_days(n) <= ends * (1.0 + 1e-12) + 1e-18, "epoch {}", n);
            }
        }
    }

    #[test]
    fn sigma_grows_with_epoch() {
        let e = eph();
        assert!((e.sigma_days(0) - 0.001).abs() < 1e-15);
        // sqrt(0.001^2 + 100^2 * 0.0001^2) = sqrt(1e-6 + 1e-4)
        assert!((e.sigma_days(100) - (1.01e-4_f64).sqrt()).abs() < 1e-15);
        assert_eq!(e.sigma_days(-100), e.sigma_days(100));
    }

    #[test]
    fn epochs_between_are_inclusive() {
        let e = eph();
        assert_eq!(e.epochs_between(2_460_000.0, 2_460_005.0), 0..=2);
        assert_eq!(e.epochs_between(2_459_999.0, 2_460_004.9), 0..=1);
    }
}
