//! Edge cases: the date line, clock changes, the celestial poles, circumpolar and never-rising targets,
//! far epochs, a leap second, dates beyond the leap-second table, and a 10-year range.

use chrono::NaiveDate;
use dipwatch::astro::atmosphere::HorizonProfile;
use dipwatch::astro::barycentric::{EarthTable, TimeSystem};
use dipwatch::astro::civil::{local_hhmm, night_of};
use dipwatch::astro::frames::{unit_from_radec, Observer};
use dipwatch::astro::time::JdUtc;
use dipwatch::engine::plan::{nights_at, plan, PlanOptions, Reason, Verdict};
use dipwatch::ephemeris::Ephemeris;
use dipwatch::inputs::sites::{Site, Telescope};
use dipwatch::inputs::targets::Target;

fn site(lat: f64, lon: f64, tz: &str, min_alt: f64) -> Site {
    Site {
        name: "Edge".into(),
        observer: Observer::from_deg(lat, lon, 100.0),
        lat_deg: lat,
        lon_deg: lon,
        elevation_m: 100.0,
        tz: tz.parse().unwrap(),
        min_alt_deg: min_alt,
        darkness_alt_deg: -12.0,
        darkness_label: "nautical".into(),
        horizon: HorizonProfile::default(),
        hour_angle_limits_h: None,
        min_moon_sep_deg: None,
        photometry: None,
        max_alt_deg: None,
        telescopes: vec![Telescope {
            name: "main".into(),
            min_alt_deg: None,
            max_alt_deg: None,
            photometry: None,
        }],
    }
}

fn target(ra: f64, dec: f64, t0: f64, period: f64, system: TimeSystem) -> Target {
    Target {
        name: "Edge b".into(),
        ra_deg: ra,
        dec_deg: dec,
        ephemeris: Ephemeris {
            t0,
            t0_sigma_days: 0.0005,
            period_days: period,
            period_sigma_days: 0.0,
            cov_t0_period_days2: 0.0,
            system,
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
    }
}

fn opts(first: &str, last: &str, all: bool) -> PlanOptions {
    PlanOptions {
        first_night: first.parse().unwrap(),
        last_night: last.parse().unwrap(),
        sigma_k: 1.0,
        baseline_before_min: 30.0,
        baseline_after_min: 30.0,
        min_coverage: 0.0,
        min_in_transit_min: 0.0,
        min_snr: 0.0,
        include_unobservable: all,
        kinds: vec![dipwatch::orbit::EventKind::Transit],
        rv_window_hours: 1.0,
    }
}

fn local_hours(jd: f64, s: &Site) -> f64 {
    let t = dipwatch::astro::civil::datetime_from_jd(jd).with_timezone(&s.tz);
    let h = chrono::Timelike::hour(&t) as f64 + chrono::Timelike::minute(&t) as f64 / 60.0;
    if h < 12.0 {
        h + 24.0
    } else {
        h
    }
}

#[test]
fn sites_next_to_the_date_line_have_nights_around_local_midnight() {
    // Solar midnight at longitude +-179.9 falls near local midnight in zones of UTC+12 and UTC-12; the equation of
    // time (<= 16.5 min) and the 0.1 deg (0.4 min) offset keep it within 30 minutes (common practice, no source).
    for (lon, tz) in [(179.9, "Etc/GMT-12"), (-179.9, "Etc/GMT+12")] {
        let s = site(-17.7, lon, tz, 30.0);
        for n in nights_at(
            &s,
            NaiveDate::from_ymd_opt(2027, 5, 1).unwrap(),
            NaiveDate::from_ymd_opt(2027, 5, 5).unwrap(),
        ) {
            let d = n.dark.unwrap();
            let mid = local_hours(0.5 * (d.start + d.end), &s);
            assert!(
                (mid - 24.0).abs() < 0.5,
                "lon {lon}: dark midpoint at {mid} h local"
            );
            assert_eq!(night_of(d.start, s.lon_deg, s.tz), n.night_of);
            assert_eq!(night_of(d.end, s.lon_deg, s.tz), n.night_of);
        }
    }
}

#[test]
fn clock_changes_give_real_local_times_and_mark_the_repeated_hour() {
    let tz: chrono_tz::Tz = "Europe/Berlin".parse().unwrap();
    // 2027-03-28: 02:00 CET jumps to 03:00 CEST at 01:00 UTC; no local time in 02:00-03:00 exists.
    let jd = |y, m, d: f64| dipwatch::astro::time::jd_from_calendar(y, m, d);
    assert_eq!(local_hhmm(jd(2027, 3, 28.0 + 59.0 / 1440.0), tz), "01:59");
    assert_eq!(local_hhmm(jd(2027, 3, 28.0 + 60.0 / 1440.0), tz), "03:00");
    // 2027-10-31: 03:00 CEST falls back to 02:00 CET at 01:00 UTC; 02:30 happens twice.
    assert_eq!(
        local_hhmm(jd(2027, 10, 31.0 + 30.0 / 1440.0), tz),
        "02:30 CEST"
    );
    assert_eq!(
        local_hhmm(jd(2027, 10, 31.0 + 90.0 / 1440.0), tz),
        "02:30 CET"
    );
    assert_eq!(local_hhmm(jd(2027, 10, 31.0 + 150.0 / 1440.0), tz), "03:30");
    // A block that starts in the skipped hour's neighbourhood: the plan table prints the real local times.
    let s = site(52.5, 13.4, "Europe/Berlin", 10.0);
    // JD_UTC mid-transit at 01:40 UTC = 03:40 CEST; block starts 01:40 - 1 h - 0.7 min - 30 min = 00:09:18 UTC,
    // rounded up to the whole minute that can be acted on: 00:10 UTC = 01:10 CET.
    let t = target(
        90.0,
        60.0,
        jd(2027, 3, 28.0 + 100.0 / 1440.0),
        17.3,
        TimeSystem::JdUtc,
    );
    let o = opts("2027-03-27", "2027-03-27", true);
    let p = plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o);
    let e = &p.sites[0].events[0];
    assert_eq!(local_hhmm(e.mid_utc, s.tz), "03:40");
    assert_eq!(local_hhmm(e.block_start_utc, s.tz), "01:10");
    let table = dipwatch::outputs::plan_table(&p, &[s], &[t], &o, false);
    // Block 00:10-04:10 UTC; ingress, mid, egress 00:40, 01:40, 02:40 UTC: the wall clock skips 02:00-03:00.
    assert!(
        table.contains("01:10-05:10") && table.contains("01:40 03:40 04:40"),
        "{table}"
    );
    assert!(table.contains("times CET then CEST"), "{table}");
}

#[test]
fn targets_at_the_celestial_poles() {
    let s = site(50.0, 10.0, "Europe/Berlin", 30.0);
    let d = NaiveDate::from_ymd_opt(2027, 1, 20).unwrap();
    let night = &nights_at(&s, d, d)[0];
    let midnight = 0.5 * (night.dark.unwrap().start + night.dark.unwrap().end);
    for (dec, want) in [(90.0, Verdict::Whole), (-90.0, Verdict::NotObservable)] {
        let t = target(0.0, dec, midnight, 13.7, TimeSystem::JdUtc);
        let p = plan(
            std::slice::from_ref(&s),
            std::slice::from_ref(&t),
            &opts("2027-01-20", "2027-01-20", true),
        );
        let e = &p.sites[0].events[0];
        assert_eq!(e.verdict, want, "dec {dec}");
        // At the pole the altitude is the latitude (within precession since J2000, 0.4 deg).
        assert!(
            (e.alt_mid_deg.abs() - 50.0).abs() < 0.5,
            "dec {dec}: alt {}",
            e.alt_mid_deg
        );
        if dec < 0.0 {
            assert_eq!(e.reasons, vec![Reason::BelowAltitudeLimit]);
        }
    }
}

#[test]
fn circumpolar_targets_are_up_all_night_and_low_ones_never() {
    let s = site(60.0, 25.0, "Europe/Helsinki", 20.0);
    let d = NaiveDate::from_ymd_opt(2027, 1, 10).unwrap();
    let night = &nights_at(&s, d, d)[0];
    let dark = night.dark.unwrap();
    for ra in [0.0, 90.0, 180.0, 270.0] {
        // Dec +80 from latitude 60: altitude between 50 and 70 deg, always above the 20 deg limit.
        let t = target(ra, 80.0, dark.start + 0.1, 13.7, TimeSystem::JdUtc);
        let p = plan(
            std::slice::from_ref(&s),
            std::slice::from_ref(&t),
            &opts("2027-01-10", "2027-01-10", true),
        );
        assert_eq!(p.sites[0].events[0].verdict, Verdict::Whole, "ra {ra}");
        // Dec -60 from latitude 60 culminates at -30 deg: never up.
        let t = target(ra, -60.0, dark.start + 0.1, 13.7, TimeSystem::JdUtc);
        let p = plan(
            std::slice::from_ref(&s),
            std::slice::from_ref(&t),
            &opts("2027-01-10", "2027-01-10", true),
        );
        assert_eq!(
            p.sites[0].events[0].verdict,
            Verdict::NotObservable,
            "ra {ra}"
        );
    }
}

#[test]
fn an_epoch_ten_to_the_fifth_periods_away() {
    let s = site(-30.0, -70.0, "America/Santiago", 30.0);
    let o = opts("2027-04-01", "2027-04-10", false);
    // T0 100,000 periods before the range.
    let mut t = target(
        150.0,
        -30.0,
        2_461_500.0 - 100_000.0 * 0.8,
        0.8,
        TimeSystem::BjdTdb,
    );
    let p = plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o);
    assert!(
        !p.sites[0].events.is_empty(),
        "with an exact period the transits are still listed"
    );
    for e in &p.sites[0].events {
        assert!(e.epoch > 99_000 && e.sigma_min < 1.0);
    }
    // With a period error of 1e-5 d, sigma is 1 d > P/8: the ephemeris is lost, and said so.
    t.ephemeris.period_sigma_days = 1e-5;
    let p = plan(&[s], &[t], &o);
    assert!(p.sites[0].events.is_empty());
    assert_eq!(p.lost.len(), 1);
    assert!(
        (p.lost[0].sigma_min - 1440.0).abs() < 20.0,
        "{}",
        p.lost[0].sigma_min
    );
}

#[test]
fn across_the_2016_leap_second_and_beyond_the_table() {
    // IERS Bulletin C 52: 2016-12-31 23:59:60 UTC was inserted. A JD_UTC mid-time at 2017-01-01T00:00:00Z.
    let s = site(-30.0, -70.0, "America/Santiago", 10.0);
    let t0 = 2_457_754.5;
    let t = target(90.0, -30.0, t0, 1.5, TimeSystem::JdUtc);
    let p = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts("2016-12-29", "2017-01-03", true),
    );
    let mids: Vec<String> = p.sites[0]
        .events
        .iter()
        .map(|e| dipwatch::astro::civil::rfc3339_utc(e.mid_utc))
        .collect();
    assert!(
        mids.contains(&"2017-01-01T00:00:00.000Z".to_string()),
        "{mids:?}"
    );
    // BJD_TDB <-> UTC round trips on both sides of the leap second and in 2035 (beyond the table: 37 s).
    let icrs = unit_from_radec(1.0, -0.5);
    for utc in [2_457_754.499_9, 2_457_754.500_1, 2_464_328.5] {
        let table = EarthTable::new(utc - 2.0, utc + 2.0);
        let bjd = table.time_in_system(TimeSystem::BjdTdb, JdUtc(utc), &icrs, None);
        let back = table.utc_from_system(TimeSystem::BjdTdb, bjd, &icrs, None);
        assert!(
            (back.0 - utc).abs() * 86_400.0 < 1e-3,
            "utc {utc}: back {} s off",
            (back.0 - utc) * 86_400.0
        );
    }
    let p = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts("2035-06-01", "2035-06-05", false),
    );
    assert!(!p.sites[0].events.is_empty());
}

#[test]
fn a_ten_year_range() {
    let s = site(31.0, -111.0, "America/Phoenix", 30.0);
    let t = target(100.0, 20.0, 2_461_400.3, 3.217, TimeSystem::BjdTdb);
    let p = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts("2027-01-01", "2036-12-31", false),
    );
    assert_eq!(p.sites[0].nights.len(), 3653);
    let years: std::collections::BTreeSet<i32> = p.sites[0]
        .events
        .iter()
        .map(|e| chrono::Datelike::year(&e.night_of))
        .collect();
    assert_eq!(years.len(), 10, "events in every year: {years:?}");
    // About 1135 transits in 10 years; a target at RA 100 deg is in the night sky for about a third of them.
    let n = p.sites[0].events.len();
    assert!((150..700).contains(&n), "{n} events");
}
