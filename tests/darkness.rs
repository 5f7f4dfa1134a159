//! Darkness for any site in any zone (property tests): every night's dark interval and every event's usable
//! run, sampled each minute with the full-precision Sun, has the Sun below the site's darkness level; no
//! night is longer than 24 h; and a longitude far from its zone's meridian is caught unless the site says so.

mod common;

use dipwatch::astro::sky::sun_alt_deg;
use dipwatch::astro::time::JdUtc;
use dipwatch::engine::plan::{nights_at, plan};
use dipwatch::inputs::sites::{parse_sites, Site};
use dipwatch::inputs::targets::Target;
use proptest::prelude::*;
use std::process::Command;

/// Zones spread over the globe, several of them far from the meridians of random longitudes.
const ZONES: [&str; 12] = [
    "America/Santiago",
    "Asia/Shanghai",
    "Europe/Madrid",
    "Pacific/Kiritimati",
    "Pacific/Pago_Pago",
    "America/Denver",
    "Australia/Perth",
    "Asia/Kolkata",
    "Etc/GMT+12",
    "Etc/GMT-14",
    "Europe/London",
    "Antarctica/Troll",
];

/// Tolerance on the Sun's altitude at a sampled minute, deg: dark edges are refined to 0.5 s, in which the
/// Sun moves at most 0.0021 deg (15 deg/h); the planner's Sun tables agree with the direct Sun to 0.0001 deg.
const SUN_ALT_TOL_DEG: f64 = 0.005;

fn site(lat: f64, lon: f64, zone: &str, darkness: f64) -> Site {
    let toml = format!(
        "[[site]]\nname = \"Random\"\nlatitude_deg = {lat}\nlongitude_deg = {lon}\nelevation_m = 800\n\
         timezone = \"{zone}\"\ndarkness = {darkness}\nmin_alt_deg = 10\nallow_far_zone = true\n"
    );
    parse_sites("random", &toml).unwrap().remove(0)
}

fn target(ra: f64, dec: f64, period: f64, phase: f64) -> Target {
    common::plain_target(
        "Random b",
        ra,
        dec,
        2_461_000.0 + phase * period,
        period,
        2.5,
    )
}

/// The highest Sun altitude sampled every minute over [start, end], deg.
fn max_sun_alt_deg(site: &Site, start: f64, end: f64) -> f64 {
    let n = ((end - start) * 1440.0).floor() as usize;
    (0..=n)
        .map(|i| start + i as f64 / 1440.0)
        .chain(std::iter::once(end))
        .map(|t| sun_alt_deg(JdUtc(t), &site.observer))
        .fold(f64::NEG_INFINITY, f64::max)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 40, ..ProptestConfig::default() })]
    #[test]
    fn dark_time_is_dark_for_any_site_and_zone(
        lat in -66.0..66.0_f64,
        lon in -180.0..180.0_f64,
        zone in 0usize..ZONES.len(),
        level in 0usize..4,
        day in 0i64..365,
        ra in 0.0..360.0_f64,
        dec in -60.0..60.0_f64,
        period in 0.4..3.0_f64,
        phase in 0.0..1.0_f64,
    ) {
        let darkness = [-0.833, -6.0, -12.0, -18.0][level];
        let s = site(lat, lon, ZONES[zone], darkness);
        let first = chrono::NaiveDate::from_ymd_opt(2027, 1, 1).unwrap() + chrono::Duration::days(day);
        let last = first + chrono::Duration::days(2);
        for night in nights_at(&s, first, last) {
            let len_h = (night.window.end - night.window.start) * 24.0;
            prop_assert!(len_h <= 24.0 + 1e-6, "night {} is {len_h} h long", night.night_of);
            if let Some(d) = night.dark {
                prop_assert!(d.len_days() * 24.0 <= 24.0 + 1e-6);
                prop_assert!(d.start >= night.window.start && d.end <= night.window.end);
                let worst = max_sun_alt_deg(&s, d.start, d.end);
                prop_assert!(worst < darkness + SUN_ALT_TOL_DEG,
                    "{} {lat} {lon} {}: Sun at {worst} deg in the dark interval (level {darkness})",
                    night.night_of, ZONES[zone]);
            }
        }
        let mut opts = common::opts(first, last);
        opts.include_unobservable = false;
        let p = plan(std::slice::from_ref(&s), &[target(ra, dec, period, phase)], &opts);
        for e in &p.sites[0].events {
            let run = e.usable.expect("an observable event has a usable run");
            let worst = max_sun_alt_deg(&s, run.start, run.end);
            prop_assert!(worst < darkness + SUN_ALT_TOL_DEG,
                "{lat} {lon} {}: Sun at {worst} deg in the usable run of {}", ZONES[zone], e.night_of);
        }
    }
}

#[test]
fn flipped_longitude_sign_reproduction_has_no_daylight_events() {
    // The field-trial case: latitude -24.6, longitude +70.4 (sign flipped) on America/Santiago, nautical.
    let s = site(-24.6, 70.4, "America/Santiago", -12.0);
    let first = chrono::NaiveDate::from_ymd_opt(2027, 1, 1).unwrap();
    let last = chrono::NaiveDate::from_ymd_opt(2027, 1, 31).unwrap();
    for night in nights_at(&s, first, last) {
        let d = night.dark.expect("a dark interval at -24.6 in January");
        // About 8.6 h of nautical darkness in the southern summer at 24.6 S (not 24 h).
        assert!(
            d.len_days() * 24.0 < 9.5,
            "{}: {} h",
            night.night_of,
            d.len_days() * 24.0
        );
    }
}

fn run(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(args)
        .output()
        .unwrap()
}

fn write_site(dir: &std::path::Path, lon: f64, zone: &str, extra: &str) -> String {
    let path = dir.join("sites.toml");
    std::fs::write(
        &path,
        format!(
            "[[site]]\nname = \"Somewhere\"\nlatitude_deg = -24.6\nlongitude_deg = {lon}\n\
             timezone = \"{zone}\"\n{extra}"
        ),
    )
    .unwrap();
    path.to_string_lossy().into_owned()
}

#[test]
fn a_site_far_from_its_zone_is_stopped_with_the_likely_cause() {
    let dir = common::temp("far-zone");
    let sites = write_site(&dir, 70.4, "America/Santiago", "");
    let out = run(&[
        "nights",
        "--sites",
        &sites,
        "--site",
        "Somewhere",
        "--from",
        "2027-01-10",
    ]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    for want in [
        "sites.toml:4: longitude_deg",
        "UTC+4:42",
        "UTC-4:00",
        "8.7 h apart",
        "east is positive",
        "allow_far_zone",
    ] {
        assert!(err.contains(want), "missing {want:?} in {err}");
    }
    // The same site, accepted on purpose, plans with correct darkness.
    let sites = write_site(&dir, 70.4, "America/Santiago", "allow_far_zone = true\n");
    let out = run(&[
        "nights",
        "--sites",
        &sites,
        "--site",
        "Somewhere",
        "--from",
        "2027-01-10",
        "--days",
        "1",
        "--format",
        "csv",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn real_stations_up_to_two_and_a_half_hours_from_their_zone_pass() {
    // Common practice, no source: western China keeps UTC+8 (87.6 E is 2.2 h behind it) and Galicia keeps
    // Central European Time (8.6 W is 1.6 h behind it).
    for (lon, zone) in [
        (87.6, "Asia/Shanghai"),
        (-8.6, "Europe/Madrid"),
        (-70.4, "America/Santiago"),
    ] {
        let toml = format!(
            "[[site]]\nname = \"S\"\nlatitude_deg = 40\nlongitude_deg = {lon}\ntimezone = \"{zone}\"\n"
        );
        assert!(parse_sites("s", &toml).is_ok(), "{lon} {zone}");
    }
}
