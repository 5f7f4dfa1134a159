//! The planner on hand-built scenarios, and the root-finding path against the brute-force 1-minute oracle.

use chrono::NaiveDate;
use dipwatch::astro::atmosphere::HorizonProfile;
use dipwatch::astro::barycentric::{EarthTable, TimeSystem};
use dipwatch::astro::civil::{local_noon_jd, night_of};
use dipwatch::astro::crossings::Interval;
use dipwatch::astro::sky::sun_moon_at;
use dipwatch::astro::time::JdUtc;
use dipwatch::engine::plan::{nights_at, plan, usable_intervals, Reason, Verdict};
use dipwatch::ephemeris::Ephemeris;
use dipwatch::inputs::sites::Site;
use dipwatch::inputs::targets::Target;
use dipwatch::testing::oracle::usable_minutes_oracle;
use proptest::prelude::*;

mod common;
use common::{date, opts, site, target_at};

/// Plan one site/target for the single night `d` and return its one event.
fn single_event(s: &Site, t: &Target, d: NaiveDate) -> dipwatch::engine::plan::Event {
    let p = plan(
        std::slice::from_ref(s),
        std::slice::from_ref(t),
        &opts(d, d),
    );
    let evs = &p.sites[0].events;
    assert_eq!(evs.len(), 1, "expected one event, got {evs:?}");
    evs[0]
}

#[test]
fn transit_at_local_midnight_is_whole() {
    let s = site("Mid Test", 35.0, 10.0, "Europe/Rome");
    let d = date(2027, 1, 15);
    let night = &nights_at(&s, d, d)[0];
    let dark = night.dark.unwrap();
    let midnight = 0.5 * (dark.start + dark.end);
    let t = target_at("Midnight", &s, midnight, 30.0, 3.0);
    let e = single_event(&s, &t, d);
    assert_eq!(e.verdict, Verdict::Whole, "{e:?}");
    assert!(e.observable && e.coverage == 1.0 && e.reasons.is_empty());
    // Mid-transit recovered from BJD_TDB to within 10 ms of the instant it was built from.
    assert!(
        (e.mid_utc - midnight).abs() * 86_400.0 < 0.01,
        "mid off by {} s",
        (e.mid_utc - midnight) * 86_400.0
    );
    // On the meridian: altitude 90 - |lat - dec| = 85 deg; meridian crossing listed at mid-transit. The
    // scenario takes the catalogue RA/Dec equal to the local sidereal time and latitude, so precession from
    // J2000 to 2027 (0.38 deg, 1.5 min of RA) is the tolerance.
    assert!((e.alt_mid_deg - 85.0).abs() < 0.4, "alt {}", e.alt_mid_deg);
    assert!((e.meridian_utc.unwrap() - midnight).abs() * 1440.0 < 2.0);
    assert_eq!(e.night_of, d);
    assert!(
        (e.baseline_before_min - 30.0).abs() < 0.01 && (e.baseline_after_min - 30.0).abs() < 0.01
    );
}

#[test]
fn transit_at_dusk_gives_egress_only_and_at_dawn_ingress_only() {
    let s = site("Edge Test", -25.0, -60.0, "America/Argentina/Salta");
    let d = date(2027, 6, 10);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    let at_dusk = target_at("Dusk", &s, dark.start, -25.0, 3.0);
    let e = single_event(&s, &at_dusk, d);
    assert_eq!(e.verdict, Verdict::EgressOnly, "{e:?}");
    assert!((e.coverage - 0.5).abs() < 0.01, "coverage {}", e.coverage);
    assert!(e.reasons.contains(&Reason::Daylight));
    let at_dawn = target_at("Dawn", &s, dark.end, -25.0, 3.0);
    let e = single_event(&s, &at_dawn, d);
    assert_eq!(e.verdict, Verdict::IngressOnly, "{e:?}");
    assert!((e.coverage - 0.5).abs() < 0.01, "coverage {}", e.coverage);
}

#[test]
fn short_baseline_when_dark_starts_inside_the_before_baseline() {
    let s = site("Base Test", 45.0, 5.0, "Europe/Paris");
    let d = date(2027, 10, 2);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    // Ingress - sigma 10 minutes after dark starts: 20 of the 30 baseline minutes are in twilight.
    let mid = dark.start + (10.0 + 0.72) / 1440.0 + 1.5 / 24.0;
    let t = target_at("Base", &s, mid, 40.0, 3.0);
    let e = single_event(&s, &t, d);
    assert_eq!(e.verdict, Verdict::WholeShortBaseline, "{e:?}");
    assert!(
        (e.baseline_before_min - 10.0).abs() < 0.1,
        "before {}",
        e.baseline_before_min
    );
}

#[test]
fn target_behind_the_horizon_profile_is_rejected_with_reason() {
    let mut s = site("Wall Test", 35.0, 10.0, "Europe/Rome");
    s.horizon = HorizonProfile::new(&[(0.0, 88.0), (180.0, 88.0)]);
    let d = date(2027, 1, 15);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    let t = target_at("Walled", &s, 0.5 * (dark.start + dark.end), 30.0, 3.0);
    let e = single_event(&s, &t, d);
    assert_eq!(e.verdict, Verdict::NotObservable);
    assert!(!e.observable);
    assert_eq!(e.reasons, vec![Reason::BelowHorizonProfile]);
}

#[test]
fn target_near_the_moon_is_rejected_with_reason() {
    let mut s = site("Moon Test", 20.0, -100.0, "America/Mexico_City");
    s.min_moon_sep_deg = Some(40.0);
    // 2027-02-20 is a few days before full Moon (from the Moon's phase computed here): a bright, high Moon.
    let d = date(2027, 2, 18);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    let mid = 0.5 * (dark.start + dark.end);
    let sm = sun_moon_at(JdUtc(mid), &s.observer);
    assert!(
        sm.moon_alt_deg > 30.0,
        "scenario needs the Moon up: {}",
        sm.moon_alt_deg
    );
    // Put the target 5 deg north of the Moon (apparent of date ~ catalogue within 0.4 deg).
    let mut t = target_at("Moonlit", &s, mid, 0.0, 2.0);
    t.ra_deg = sm.moon_topo.ra_rad.to_degrees() - 0.35;
    t.dec_deg = sm.moon_topo.dec_rad.to_degrees() + 5.0;
    let p = plan(std::slice::from_ref(&s), &[t], &opts(d, d));
    let e = p.sites[0]
        .events
        .iter()
        .find(|e| (e.mid_utc - mid).abs() < 0.5)
        .expect("event");
    assert!(e.moon_sep_deg < 8.0, "sep {}", e.moon_sep_deg);
    assert_eq!(e.verdict, Verdict::NotObservable, "{e:?}");
    assert!(e.reasons.contains(&Reason::MoonTooClose), "{:?}", e.reasons);
}

#[test]
fn polar_summer_has_no_dark_time_and_says_so() {
    let s = site("Far North", 78.2, 15.6, "Arctic/Longyearbyen");
    let (first, last) = (date(2027, 6, 1), date(2027, 6, 7));
    let nights = nights_at(&s, first, last);
    assert!(nights.iter().all(|n| n.dark.is_none()));
    let t = target_at("Polar", &s, local_noon_jd(first, s.tz) + 0.5, 60.0, 2.0);
    let p = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts(first, last),
    );
    assert!(p.sites[0]
        .events
        .iter()
        .all(|e| e.verdict == Verdict::NotObservable && e.reasons.contains(&Reason::Daylight)));
    let mut o = opts(first, last);
    o.include_unobservable = false;
    let table = dipwatch::outputs::plan_table(
        &plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o),
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &o,
        false,
    );
    assert!(table.contains("No dark time at Far North (the Sun stays above -12 deg) on: 2027-06-01 to 2027-06-07 (7 nights)"), "{table}");
    assert!(table.contains("Nothing observable at Far North"), "{table}");
    let json = dipwatch::outputs::plan_json(
        &plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o),
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &o,
    );
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert_eq!(
        v["sites"][0]["nights_without_darkness"]
            .as_array()
            .unwrap()
            .len(),
        7
    );
}

#[test]
fn clock_change_inside_the_range_gives_right_local_times_and_nights() {
    // Europe/London moves from GMT to BST at 2027-03-28 01:00 UTC (EU rule: last Sunday of March).
    let s = site("Clock Test", 51.0, -1.0, "Europe/London");
    let (first, last) = (date(2027, 3, 25), date(2027, 3, 31));
    let nights = nights_at(&s, first, last);
    // Nights run from local mean solar noon (12:04 UTC at 1.0 W: 12 h + 1 deg x 4 min/deg), which the clock
    // change does not move, so both sides of the change keep 24 h nights.
    let frac = |jd: f64| ((jd + 0.5).fract() * 24.0 * 60.0).round() / 60.0;
    assert_eq!(frac(nights[0].window.start), 12.0 + 4.0 / 60.0);
    assert_eq!(frac(nights[4].window.start), 12.0 + 4.0 / 60.0);
    assert!(nights
        .windows(2)
        .all(|w| (w[1].window.start - w[0].window.start - 1.0).abs() < 1e-9));
    let d = nights[5].night_of; // 2027-03-30, in BST
    let dark = nights[5].dark.unwrap();
    let mid = 0.5 * (dark.start + dark.end);
    let t = target_at("Clocked", &s, mid, 40.0, 2.0);
    let p = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts(first, last),
    );
    let e = p.sites[0]
        .events
        .iter()
        .find(|e| e.night_of == d)
        .expect("event on the BST night");
    assert_eq!(night_of(e.mid_utc, s.lon_deg, s.tz), d);
    let utc = dipwatch::astro::civil::datetime_from_jd(e.mid_utc);
    let local = dipwatch::astro::civil::local_hhmm(e.mid_utc, s.tz);
    let want = (utc + chrono::Duration::hours(1))
        .format("%H:%M")
        .to_string();
    assert_eq!(local, want, "BST is UTC+1");
    let table = dipwatch::outputs::plan_table(
        &p,
        std::slice::from_ref(&s),
        &[t],
        &opts(first, last),
        false,
    );
    assert!(
        table.contains("times GMT then BST (Europe/London)"),
        "{table}"
    );
}

#[test]
fn ephemeris_lost_is_reported_not_listed() {
    let s = site("Lost Test", 35.0, 10.0, "Europe/Rome");
    let d = date(2027, 1, 15);
    let mut t = target_at("Stale", &s, local_noon_jd(d, s.tz) + 0.5, 30.0, 3.0);
    t.ephemeris.t0 -= 1000.0 * t.ephemeris.period_days;
    t.ephemeris.period_sigma_days = 0.01; // 1000 epochs -> sigma 10 d > P/8
    let mut o = opts(d, d);
    o.include_unobservable = false;
    let p = plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o);
    assert!(p.sites[0].events.is_empty());
    assert_eq!(p.lost.len(), 1);
    assert!(p.lost[0].sigma_min > 14_000.0);
    // A target that never rises to the site's limit (dec -70 at latitude 35) is skipped before any transit is
    // looked at, and its lost ephemeris is still reported, with the same sigma as when every transit is listed.
    t.dec_deg = -70.0;
    let p = plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o);
    assert!(p.sites[0].events.is_empty());
    assert_eq!(p.lost.len(), 1);
    o.include_unobservable = true;
    let all = plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o);
    assert!(!all.sites[0].events.is_empty());
    assert_eq!(all.lost.len(), 1);
    assert_eq!(p.lost[0].sigma_min, all.lost[0].sigma_min);
}

#[test]
fn a_zenith_limit_cuts_the_block_with_its_own_reason() {
    // The target culminates 0.3 deg from the zenith at mid-transit; a mount limited to 87 deg loses it there.
    let mut s = site("Zenith Test", 35.0, 10.0, "Europe/Rome");
    let d = date(2027, 1, 15);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    let midnight = 0.5 * (dark.start + dark.end);
    let t = target_at("Overhead", &s, midnight, 35.0, 3.0);
    assert_eq!(single_event(&s, &t, d).verdict, Verdict::Whole);
    s.max_alt_deg = Some(87.0);
    let e = single_event(&s, &t, d);
    assert!(e.reasons.contains(&Reason::AboveAltitudeLimit), "{e:?}");
    assert_ne!(e.verdict, Verdict::Whole, "{e:?}");
    assert!(e.coverage < 0.9, "{e:?}");
    assert_eq!(Reason::AboveAltitudeLimit.label(), "above-altitude-limit");
    // A telescope's own limit applies where the site has none.
    s.max_alt_deg = None;
    let mut tel = s.telescopes[0].clone();
    tel.max_alt_deg = Some(87.0);
    let per_tel = single_event(&s.for_telescope(&tel), &t, d);
    assert!(per_tel.reasons.contains(&Reason::AboveAltitudeLimit));
    assert_eq!(single_event(&s, &t, d).verdict, Verdict::Whole);
}

// -----------------------------------------------------------------------------------------------------
// Oracle: the root-finding path against a 1-minute brute-force sampler with the full-precision pipeline.

/// Edges may differ by up to 1 minute (the oracle's resolution) plus 1 s.
const EDGE_TOL_DAYS: f64 = 61.0 / 86_400.0;

#[allow(clippy::too_many_arguments)]
fn check_against_oracle(
    lat: f64,
    lon: f64,
    ra: f64,
    dec: f64,
    day: u32,
    offset_h: f64,
    horizon: bool,
    ha: bool,
    moon: bool,
    high: bool,
) {
    let mut s = site("Oracle", lat, lon, "Etc/UTC");
    if horizon {
        s.horizon = HorizonProfile::new(&[(0.0, 35.0), (90.0, 20.0), (200.0, 45.0), (300.0, 25.0)]);
    }
    if ha {
        s.hour_angle_limits_h = Some((-3.0, 2.5));
    }
    if moon {
        s.min_moon_sep_deg = Some(60.0);
    }
    if high {
        s.max_alt_deg = Some(75.0);
    }
    let d = date(2027, 1, 1) + chrono::Duration::days(i64::from(day));
    let night = nights_at(&s, d, d).remove(0);
    let start = night.window.start + offset_h / 24.0;
    let block = Interval {
        start,
        end: start + 4.0 / 24.0,
    };
    let earth = EarthTable::new(block.start - 1.0, block.end + 1.0);
    let t = Target {
        name: "X".into(),
        ra_deg: ra,
        dec_deg: dec,
        ephemeris: Ephemeris {
            t0: 2_461_000.0,
            t0_sigma_days: 0.0,
            period_days: 3.0,
            period_sigma_days: 0.0,
            cov_t0_period_days2: 0.0,
            system: TimeSystem::BjdTdb,
        },
        t14_hours: 2.0,
        depth_ppt: None,
        mag: None,
        mag_band: None,
        priority: 1.0,
        notes: String::new(),
        pm_ra_cosdec_mas_per_yr: 0.0,
        pm_dec_mas_per_yr: 0.0,
        coord_epoch_jyear: 2000.0,
        orbit: None,
        kind: dipwatch::orbit::EventKind::Transit,
    };
    let (fast, _) = usable_intervals(&s, &t, &night, &block);
    let slow = usable_minutes_oracle(&s, &t, &night, block.start, block.end, &earth);
    for (i, ok) in slow.iter().enumerate() {
        let tm = block.start + i as f64 / 1440.0;
        let inside = fast.iter().any(|iv| tm >= iv.start && tm <= iv.end);
        if inside != *ok {
            let near_edge = fast.iter().any(|iv| {
                (tm - iv.start).abs() < EDGE_TOL_DAYS || (tm - iv.end).abs() < EDGE_TOL_DAYS
            }) || (i > 0 && slow[i - 1] != *ok)
                || (i + 1 < slow.len() && slow[i + 1] != *ok);
            assert!(near_edge, "minute {i}: oracle {ok}, root finding {inside}; intervals {fast:?}; site {lat},{lon} target {ra},{dec} day {day}");
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 500, ..ProptestConfig::default() })]
    #[test]
    fn root_finding_agrees_with_the_one_minute_oracle(
        lat in -65.0..65.0_f64,
        lon in -180.0..180.0_f64,
        ra in 0.0..360.0_f64,
        sin_dec in -1.0..1.0_f64,
        day in 0u32..365,
        offset_h in 0.0..20.0_f64,
        flags in 0u8..16,
    ) {
        check_against_oracle(lat, lon, ra, sin_dec.asin().to_degrees(), day, offset_h, flags & 1 != 0, flags & 2 != 0, flags & 4 != 0, flags & 8 != 0);
    }
}
