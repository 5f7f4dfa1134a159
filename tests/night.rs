//! `nights` against ERFA Sun-crossing fixtures, and `tonight` against `plan` for the same event.

mod common;
use common::fixture;

use chrono::NaiveDate;
use dipwatch::engine::almanac::night_almanac;
use dipwatch::inputs::sites::parse_sites;
use std::process::Command;

#[test]
fn nights_match_erfa_sun_crossings_north_south_arctic() {
    // Fixture: tools/make_reference_fixtures.py (pyerfa 2.0.1), bisection to 0.1 s on ERFA's apparent Sun
    // altitude between local noon and the next local noon. Issue tolerance: 30 s.
    const TOL_S: f64 = 30.0;
    let mut worst: f64 = 0.0;
    let mut nulls = 0;
    for row in fixture("nights.csv") {
        let toml = format!(
            "[[site]]\nname = \"{}\"\nlatitude_deg = {}\nlongitude_deg = {}\nelevation_m = {}\ntimezone = \"{}\"\n",
            row[0], row[1], row[2], row[3], row[4]
        );
        let site = parse_sites("fixture", &toml).unwrap().remove(0);
        let date: NaiveDate = row[5].parse().unwrap();
        let a = night_almanac(&site, date);
        let got = [
            a.sun.dusk,
            a.sun.dawn,
            a.civil.dusk,
            a.civil.dawn,
            a.nautical.dusk,
            a.nautical.dawn,
            a.astronomical.dusk,
            a.astronomical.dawn,
        ];
        for (k, g) in got.iter().enumerate() {
            let want = &row[6 + k];
            match (want.is_empty(), g) {
                (true, None) => nulls += 1,
                (false, Some(t)) => {
                    let e = (t - want.parse::<f64>().unwrap()).abs() * 86_400.0;
                    worst = worst.max(e);
                    assert!(
                        e < TOL_S,
                        "{} {date} column {}: off by {e} s",
                        row[0],
                        6 + k
                    );
                }
                _ => panic!(
                    "{} {date} column {}: want {want:?} got {g:?}",
                    row[0],
                    6 + k
                ),
            }
        }
        // A missing event always comes with a note saying why.
        if got.iter().any(Option::is_none) {
            assert!(
                !a.notes.is_empty(),
                "{} {date}: missing event without a note",
                row[0]
            );
        }
    }
    assert!(nulls > 0, "the arctic site must contribute polar cases");
    eprintln!("nights vs ERFA: worst {worst:.2} s; {nulls} events correctly absent");
}

fn repo(rel: &str) -> String {
    format!("{}/{rel}", env!("CARGO_MANIFEST_DIR"))
}

fn run(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(args)
        .output()
        .unwrap()
}

fn temp(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("dipwatch-night-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[test]
fn tonight_agrees_with_plan_for_a_midnight_transit() {
    // A crafted target whose mid-transit falls at local midnight (00:00 CET = 23:00 UTC) on the night of
    // 2027-01-20 at an invented site; T0 given directly in JD_UTC so that the crafted time is exact.
    let d = temp("midnight");
    let sites = d.join("sites.toml");
    std::fs::write(
        &sites,
        "[[site]]\nname = \"Lindenhof Test\"\nlatitude_deg = 47.5\nlongitude_deg = 8.2\nelevation_m = 500\ntimezone = \"Europe/Zurich\"\nmin_alt_deg = 20\n",
    )
    .unwrap();
    let targets = d.join("targets.csv");
    // JD 2461426.458333 = 2027-01-20T23:00:00Z.
    std::fs::write(
        &targets,
        "name,ra,dec,t0,t0_sigma_days,period_days,period_sigma_days,t14_hours,time_system\n\
         Midnight Test b,08:05:00,+45:00:00,2461426.4583333333,0.0007,3.1,0.00001,2.4,JD_UTC\n",
    )
    .unwrap();
    let (s, t) = (sites.to_str().unwrap(), targets.to_str().unwrap());
    let tonight = run(&[
        "tonight",
        "--sites",
        s,
        "--targets",
        t,
        "--site",
        "lindenhof test",
        "--date",
        "2027-01-20",
        "--format",
        "json",
    ]);
    assert!(
        tonight.status.success(),
        "{}",
        String::from_utf8_lossy(&tonight.stderr)
    );
    let plan = run(&[
        "plan",
        "--sites",
        s,
        "--targets",
        t,
        "--from",
        "2027-01-20",
        "--days",
        "1",
        "--format",
        "json",
    ]);
    let tv: serde_json::Value = serde_json::from_slice(&tonight.stdout).unwrap();
    let pv: serde_json::Value = serde_json::from_slice(&plan.stdout).unwrap();
    let te = &tv["events"][0];
    let pe = &pv["events"][0];
    assert_eq!(te["mid_utc"], "2027-01-20T23:00:00.000Z");
    for field in dipwatch::outputs::event_field_names() {
        assert_eq!(
            te[field], pe[field],
            "field {field} differs between tonight and plan"
        );
    }
    assert_eq!(tv["night"]["night_of"], "2027-01-20");
    // And the text report prints the same local times as the plan's table (CET = UTC+1).
    let text = run(&[
        "tonight",
        "--sites",
        s,
        "--targets",
        t,
        "--site",
        "Lindenhof Test",
        "--date",
        "2027-01-20",
    ]);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(text.contains("mid-transit  00:00  +-1.0 min"), "{text}");
    let alt = pe["alt_mid_deg"].as_f64().unwrap();
    assert!(text.contains(&format!("alt {alt:>5.1} deg")), "{text}");
}

#[test]
fn tonight_explains_named_targets_with_nothing_to_show() {
    let out = run(&[
        "tonight",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &repo("targets.example.csv"),
        "--site",
        "Kestrel Moor",
        "--date",
        "2027-03-02",
        "--target",
        "Brackenhurst b",
        "--target",
        "Tollund Reach c",
    ]);
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("Nothing observable tonight."), "{text}");
    // Each named target gets its own explanation: a transit that cannot be observed (with reasons), no transit,
    // or a target that never rises high enough (Brackenhurst b at dec -58.7 from latitude +54.4).
    assert!(
        text.contains("Brackenhurst b: never rises above this site's limit of 25.0 deg"),
        "{text}"
    );
    for name in ["Brackenhurst b", "Tollund Reach c"] {
        assert!(
            text.contains(&format!("{name}: the transit at"))
                || text.contains(&format!("{name}: no transit during this night"))
                || text.contains(&format!("{name}: never rises above this site's limit")),
            "{name} not explained:\n{text}"
        );
    }
}

#[test]
fn nights_json_marks_polar_summer_with_nulls_and_notes() {
    let d = temp("polar");
    let sites = d.join("sites.toml");
    std::fs::write(
        &sites,
        "[[site]]\nname = \"Ice Point\"\nlatitude_deg = 78.9\nlongitude_deg = 11.9\ntimezone = \"Arctic/Longyearbyen\"\n",
    )
    .unwrap();
    let out = run(&[
        "nights",
        "--sites",
        sites.to_str().unwrap(),
        "--site",
        "Ice Point",
        "--from",
        "2027-06-20",
        "--days",
        "2",
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let n = &v["nights"][0];
    for f in [
        "night_of",
        "sunset_utc",
        "sunrise_utc",
        "civil_dusk_utc",
        "civil_dawn_utc",
        "nautical_dusk_utc",
        "nautical_dawn_utc",
        "astronomical_dusk_utc",
        "astronomical_dawn_utc",
        "dark_hours",
        "moonrise_utc",
        "moonset_utc",
        "moon_illum",
    ] {
        assert!(n.get(f).is_some(), "field {f} missing");
    }
    assert!(n["sunset_utc"].is_null() && n["astronomical_dawn_utc"].is_null());
    assert_eq!(n["dark_hours"].as_f64(), Some(0.0));
    let notes = n["notes"].as_array().unwrap();
    assert!(
        notes.iter().any(|x| x
            .as_str()
            .unwrap()
            .starts_with("sunset/sunrise: the Sun stays above")),
        "{notes:?}"
    );
}
