//! Events along the orbit besides the transit: the occultation (secondary eclipse), the star's radial-velocity
//! extremes, and any window of orbital phase; their times relative to mid-transit, durations and timing sigmas.
//!
//! Conventions: `omega` is the argument of periastron of the *star's* orbit (the radial-velocity convention,
//! v = K [cos(omega + f) + e cos(omega)], z away from the observer); papers that quote the planet's differ by 180
//! deg. Transit (conjunction, planet in front) is at true anomaly f = pi/2 - omega, occultation at
//! f = -pi/2 - omega (Winn 2010, "Transits and Occultations", section 2); the offsets are exact through
//! Kepler's equation. For inclinations below 90 deg these are the conjunctions, not the instants of minimum
//! projected separation; the difference is of order e P cot^2(i) / (2 pi), under a minute for transiting
//! planets' inclinations, and is not applied. The light travel time across the orbit (tens of seconds for a hot
//! Jupiter's occultation) is ignored: the targets file has no stellar mass or semi-major axis to compute it.
//! Orbital phase is the mean-anomaly phase, (t - T0) / P modulo 1, 0 at mid-transit.

use std::f64::consts::{FRAC_PI_2, PI, TAU};

/// An eccentric orbit as the targets file gives it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Orbit {
    /// Eccentricity, 0..1.
    pub ecc: f64,
    /// The star's argument of periastron, deg.
    pub omega_deg: f64,
    /// 1-sigma of the eccentricity.
    pub ecc_sigma: f64,
    /// 1-sigma of omega, deg.
    pub omega_sigma_deg: f64,
    /// Inclination, deg (90 if not given).
    pub inc_deg: f64,
    /// Occultation duration, first to fourth contact, hours, if given.
    pub t14_occ_hours: Option<f64>,
}

impl Orbit {
    /// A circular edge-on orbit (what a target without `ecc` has).
    pub const CIRCULAR: Orbit = Orbit {
        ecc: 0.0,
        omega_deg: 90.0,
        ecc_sigma: 0.0,
        omega_sigma_deg: 0.0,
        inc_deg: 90.0,
        t14_occ_hours: None,
    };
}

/// Mean anomaly (rad) at true anomaly `f` (rad) for eccentricity `e` < 1: eccentric anomaly
/// E = 2 atan(sqrt((1-e)/(1+e)) tan(f/2)), then Kepler's equation M = E - e sin E. Exact to rounding.
pub fn mean_from_true_anomaly(f: f64, e: f64) -> f64 {
    let half = f / 2.0;
    let big_e = 2.0 * ((1.0 - e).sqrt() * half.sin()).atan2((1.0 + e).sqrt() * half.cos());
    big_e - e * big_e.sin()
}

/// Time from mid-transit to the instant at true anomaly `f` (rad), as a fraction of the period in 0..1.
pub fn phase_of_true_anomaly(f: f64, orbit: &Orbit) -> f64 {
    let w = orbit.omega_deg.to_radians();
    let m_tra = mean_from_true_anomaly(FRAC_PI_2 - w, orbit.ecc);
    let m = mean_from_true_anomaly(f, orbit.ecc);
    ((m - m_tra) / TAU).rem_euclid(1.0)
}

/// Phase (0..1 after mid-transit) of mid-occultation, f = -pi/2 - omega. 0.5 for a circular orbit.
pub fn occultation_phase(orbit: &Orbit) -> f64 {
    phase_of_true_anomaly(-FRAC_PI_2 - orbit.omega_deg.to_radians(), orbit)
}

/// Phase of the star's largest positive radial velocity, f = -omega (0.75, i.e. -0.25, when circular).
pub fn rv_max_phase(orbit: &Orbit) -> f64 {
    phase_of_true_anomaly(-orbit.omega_deg.to_radians(), orbit)
}

/// Phase of the star's largest negative radial velocity, f = pi - omega (0.25 when circular).
pub fn rv_min_phase(orbit: &Orbit) -> f64 {
    phase_of_true_anomaly(PI - orbit.omega_deg.to_radians(), orbit)
}

/// The occultation's offset from transit in the closed form for i = 90 deg (Kopal 1946, as quoted by Winn 2010):
/// 2 pi dt / P = psi - sin psi, psi = pi + 2 atan(e cos(omega) / sqrt(1 - e^2)). A cross-check of the Kepler
/// route, as a fraction of the period.
pub fn occultation_phase_kopal(orbit: &Orbit) -> f64 {
    let (e, w) = (orbit.ecc, orbit.omega_deg.to_radians());
    let psi = PI + 2.0 * (e * w.cos() / (1.0 - e * e).sqrt()).atan();
    (psi - psi.sin()) / TAU
}

/// Winn (2010) eq. 33, the first-order offset: dt / P = 1/2 + e cos(omega) (1 + csc^2 i) / pi.
pub fn occultation_phase_first_order(orbit: &Orbit) -> f64 {
    let (e, w, i) = (
        orbit.ecc,
        orbit.omega_deg.to_radians(),
        orbit.inc_deg.to_radians(),
    );
    0.5 + e * w.cos() * (1.0 + 1.0 / i.sin().powi(2)) / PI
}

/// Occultation duration over transit duration, (1 + e sin omega) / (1 - e sin omega) (Winn 2010 eq. 16, for
/// equal impact parameters; it neglects their difference, of order e for grazing geometries).
pub fn occultation_duration_ratio(orbit: &Orbit) -> f64 {
    let es = orbit.ecc * orbit.omega_deg.to_radians().sin();
    (1.0 + es) / (1.0 - es)
}

/// What is observed: the transit, the occultation, a radial-velocity extreme, or a window of orbital phase.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub enum EventKind {
    /// The transit (primary eclipse).
    Transit,
    /// The occultation (secondary eclipse).
    Occultation,
    /// The star's largest positive radial velocity.
    RvMax,
    /// The star's largest negative radial velocity.
    RvMin,
    /// A window of orbital phase from `.0` to `.1` (0 at mid-transit); `.1` < `.0` wraps through phase 0.
    Phase(f64, f64),
}

impl EventKind {
    /// Parse `transit`, `occultation`, `rv-max`, `rv-min` or `phase:A-B` (0 <= A, B <= 1, A != B).
    pub fn parse(text: &str) -> Result<EventKind, String> {
        let t = text.trim().to_ascii_lowercase();
        let expected =
            "expected transit, occultation, rv-max, rv-min or phase:A-B (A, B within 0..1, e.g. \
                        phase:0.20-0.30)";
        match t.as_str() {
            "transit" => return Ok(EventKind::Transit),
            "occultation" => return Ok(EventKind::Occultation),
            "rv-max" => return Ok(EventKind::RvMax),
            "rv-min" => return Ok(EventKind::RvMin),
            _ => {}
        }
        let Some(range) = t.strip_prefix("phase:") else {
            return Err(format!("found {text:?}, {expected}"));
        };
        let parsed = range.split_once('-').and_then(|(a, b)| {
            Some((a.trim().parse::<f64>().ok()?, b.trim().parse::<f64>().ok()?))
        });
        match parsed {
            Some((a, b)) if (0.0..=1.0).contains(&a) && (0.0..=1.0).contains(&b) && a != b => {
                Ok(EventKind::Phase(a, b))
            }
            _ => Err(format!("found {text:?}, {expected}")),
        }
    }

    /// The `kind` field's text where it does not depend on the kind's values (not for phase windows).
    pub fn fixed_label(&self) -> Option<&'static str> {
        match self {
            EventKind::Transit => Some("transit"),
            EventKind::Occultation => Some("occultation"),
            EventKind::RvMax => Some("rv-max"),
            EventKind::RvMin => Some("rv-min"),
            EventKind::Phase(..) => None,
        }
    }

    /// The name written in the `kind` field: `transit`, `occultation`, `rv-max`, `rv-min`, `phase:A-B`.
    pub fn label(&self) -> String {
        match self {
            EventKind::Phase(a, b) => format!("phase:{a:.2}-{b:.2}"),
            _ => self.fixed_label().unwrap_or_default().into(),
        }
    }

    /// The short marker tables put after a target's name (empty for transits).
    pub fn marker(&self) -> String {
        match self {
            EventKind::Transit => String::new(),
            EventKind::Occultation => "[occ]".into(),
            EventKind::RvMax => "[rv+]".into(),
            EventKind::RvMin => "[rv-]".into(),
            EventKind::Phase(a, b) => format!("[{a:.2}-{b:.2}]"),
        }
    }

    /// The noun for one such event in sentences and calendar summaries.
    pub fn noun(&self) -> &'static str {
        match self {
            EventKind::Transit => "transit",
            EventKind::Occultation => "occultation",
            EventKind::RvMax => "RV maximum",
            EventKind::RvMin => "RV minimum",
            EventKind::Phase(..) => "phase window",
        }
    }

    /// How the start, centre and end of such an event are called in sentences.
    pub fn instant_labels(&self) -> [&'static str; 3] {
        match self {
            EventKind::Transit => ["ingress", "mid-transit", "egress"],
            EventKind::Occultation => ["ingress", "mid-occultation", "egress"],
            EventKind::RvMax => ["window start", "RV maximum", "window end"],
            EventKind::RvMin => ["window start", "RV minimum", "window end"],
            EventKind::Phase(..) => ["window start", "centre", "window end"],
        }
    }

    /// True for kinds observed as a window (no contacts, no out-of-event baseline): RV extremes and phase
    /// windows.
    pub fn is_window(&self) -> bool {
        matches!(
            self,
            EventKind::RvMax | EventKind::RvMin | EventKind::Phase(..)
        )
    }
}

/// Where a kind's events fall on the orbit of a target: the centre's offset after mid-transit and its
/// timing sigma from e and omega, both days, and the event's duration in hours (contacts for an
/// occultation, the window for the others).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Placement {
    /// Centre minus mid-transit of the same epoch, days, 0..P.
    pub offset_days: f64,
    /// 1-sigma of that offset from the errors of e and omega (linearised), days.
    pub offset_sigma_days: f64,
    /// Duration of the event, hours.
    pub duration_hours: f64,
}

/// The placement of `kind` for an orbit of `period_days` with transit duration `t14_hours`; RV extremes
/// are windows of `rv_window_hours` centred on the extreme.
pub fn placement(
    kind: EventKind,
    orbit: &Orbit,
    period_days: f64,
    t14_hours: f64,
    rv_window_hours: f64,
) -> Placement {
    let phase = |o: &Orbit| match kind {
        EventKind::Transit => 0.0,
        EventKind::Occultation => occultation_phase(o),
        EventKind::RvMax => rv_max_phase(o),
        EventKind::RvMin => rv_min_phase(o),
        EventKind::Phase(a, b) => {
            let width = (b - a).rem_euclid(1.0);
            (a + width / 2.0).rem_euclid(1.0)
        }
    };
    let p0 = phase(orbit);
    // Linearised propagation of the e and omega errors, by central differences (steps small against any
    // sigma that matters, large against rounding); phases are compared on the circle.
    let wrap = |d: f64| (d + 0.5).rem_euclid(1.0) - 0.5;
    let de = 1e-6;
    let dw = 1e-5;
    let with = |ecc: f64, omega_deg: f64| {
        phase(&Orbit {
            ecc: ecc.clamp(0.0, 0.999_999),
            omega_deg,
            ..*orbit
        })
    };
    let d_de = wrap(
        with(orbit.ecc + de, orbit.omega_deg) - with((orbit.ecc - de).max(0.0), orbit.omega_deg),
    ) / (orbit.ecc + de - (orbit.ecc - de).max(0.0));
    let d_dw = wrap(with(orbit.ecc, orbit.omega_deg + dw) - with(orbit.ecc, orbit.omega_deg - dw))
        / (2.0 * dw);
    let sigma_phase =
        ((d_de * orbit.ecc_sigma).powi(2) + (d_dw * orbit.omega_sigma_deg).powi(2)).sqrt();
    let duration_hours = match kind {
        EventKind::Transit => t14_hours,
        EventKind::Occultation => orbit
            .t14_occ_hours
            .unwrap_or(t14_hours * occultation_duration_ratio(orbit)),
        EventKind::RvMax | EventKind::RvMin => rv_window_hours,
        EventKind::Phase(a, b) => (b - a).rem_euclid(1.0) * period_days * 24.0,
    };
    Placement {
        offset_days: p0 * period_days,
        offset_sigma_days: sigma_phase * period_days,
        duration_hours,
    }
}

/// Default length of the window planned around a radial-velocity extreme, hours: an exposure or two with
/// a high-resolution spectrograph plus acquisition (common practice, no source).
pub const DEFAULT_RV_WINDOW_HOURS: f64 = 1.0;

/// The entries to plan for `kinds`: for each kind, every target as that kind's event (kinds in the order
/// given, targets in file order within each). A view keeps the name, position and magnitude; its reference
/// time is moved to the event's centre (T0 + offset, same epoch numbering), its T0 sigma gains the offset's
/// sigma from e and omega in quadrature (independent of T0 and P, so the covariance is unchanged), its duration
/// is the event's, and its depth is dropped for anything but a transit (the transit depth is not the
/// occultation's, and a window has none: no SNR is claimed).
pub fn kind_views(
    targets: &[crate::inputs::targets::Target],
    kinds: &[EventKind],
    rv_window_hours: f64,
) -> Vec<crate::inputs::targets::Target> {
    let mut out = Vec::with_capacity(targets.len() * kinds.len());
    for kind in kinds {
        for t in targets {
            if *kind == EventKind::Transit {
                out.push(t.clone());
                continue;
            }
            let orbit = t.orbit.unwrap_or(Orbit::CIRCULAR);
            let eph = &t.ephemeris;
            let p = placement(*kind, &orbit, eph.period_days, t.t14_hours, rv_window_hours);
            let mut v = t.clone();
            v.kind = *kind;
            v.ephemeris.t0 = eph.t0 + p.offset_days;
            v.ephemeris.t0_sigma_days = eph.t0_sigma_days.hypot(p.offset_sigma_days);
            v.t14_hours = p.duration_hours.min(eph.period_days * 24.0 * 0.999);
            v.depth_ppt = None;
            out.push(v);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn orbit(ecc: f64, omega_deg: f64) -> Orbit {
        Orbit {
            ecc,
            omega_deg,
            ..Orbit::CIRCULAR
        }
    }

    #[test]
    fn circular_orbits() {
        // Occultation at phase 0.5, RV maximum at -0.25 (0.75), minimum at +0.25, whatever omega.
        for w in [0.0, 37.0, 90.0, 270.0] {
            let o = orbit(0.0, w);
            assert!((occultation_phase(&o) - 0.5).abs() < 1e-12);
            assert!((rv_max_phase(&o) - 0.75).abs() < 1e-12);
            assert!((rv_min_phase(&o) - 0.25).abs() < 1e-12);
        }
    }

    #[test]
    fn exact_offsets_for_a_ten_day_orbit() {
        // The values for P = 10 d, computed with an independent script by the Kepler route and Kopal's
        // closed form: e 0.1, omega 0: 5.6356 d; e 0.3, omega 45: 6.3710 d; e 0.5, omega 200: 2.0835 d.
        const TOLERANCE_DAYS: f64 = 0.000_05; // the quoted values have 4 decimals
        for (e, w, want) in [
            (0.1, 0.0, 5.6356),
            (0.3, 45.0, 6.3710),
            (0.5, 200.0, 2.0835),
        ] {
            let o = orbit(e, w);
            let got = 10.0 * occultation_phase(&o);
            assert!(
                (got - want).abs() < TOLERANCE_DAYS,
                "e {e} omega {w}: {got}"
            );
            assert!((10.0 * occultation_phase_kopal(&o) - got).abs() < 1e-9);
        }
    }

    #[test]
    fn first_order_formula_agrees_to_second_order_in_e() {
        // Winn (2010) eq. 33 is first order in e: its error must shrink at least as e^2 (ratio >= 4 when e
        // halves). At i = 90 deg the e^2 term cancels and the error falls as e^3 (ratio 8), as the exact route
        // shows; it never exceeds e^2 / 100 of the period here.
        for w in [0.0, 30.0, 60.0, 135.0, 250.0] {
            let err = |e: f64| {
                (occultation_phase(&orbit(e, w)) - occultation_phase_first_order(&orbit(e, w)))
                    .abs()
            };
            for e in [0.08, 0.04, 0.02] {
                assert!(err(e) < e * e / 100.0, "omega {w} e {e}: {}", err(e));
                if err(e / 2.0) > 1e-12 {
                    let r = err(e) / err(e / 2.0);
                    assert!(r > 3.9, "omega {w} e {e}: ratio {r}");
                }
            }
        }
    }

    #[test]
    fn a_published_eccentric_planet() {
        // HAT-P-2 b: e = 0.517, omega = 188.1 deg (star's argument; Pal et al. 2010, from memory), occultation
        // observed at phase 0.187 (Lewis et al. 2013, from memory). The Kepler route gives the same to 0.002.
        let phase = occultation_phase(&orbit(0.517, 188.1));
        assert!((phase - 0.187).abs() < 0.003, "{phase}");
    }

    #[test]
    fn sigma_from_e_and_omega_is_linearised() {
        // For small e the offset is P/2 + (2P/pi) e cos(omega): d/de = 2P cos(omega)/pi.
        let mut o = orbit(0.01, 0.0);
        o.ecc_sigma = 0.001;
        let p = placement(EventKind::Occultation, &o, 10.0, 3.0, 1.0);
        assert!(
            (p.offset_sigma_days - 2.0 * 10.0 / PI * 0.001).abs() < 2e-5,
            "{p:?}"
        );
        assert_eq!(
            placement(EventKind::Transit, &o, 10.0, 3.0, 1.0).offset_sigma_days,
            0.0
        );
    }

    #[test]
    fn kinds_parse_and_print() {
        assert_eq!(EventKind::parse("occultation"), Ok(EventKind::Occultation));
        assert_eq!(
            EventKind::parse("Phase:0.2-0.3"),
            Ok(EventKind::Phase(0.2, 0.3))
        );
        assert_eq!(
            EventKind::parse("phase:0.9-0.1").unwrap().label(),
            "phase:0.90-0.10"
        );
        assert!(EventKind::parse("phase:0.2-1.3").is_err());
        assert!(EventKind::parse("eclipse")
            .unwrap_err()
            .contains("expected transit, occultation"));
    }
}
