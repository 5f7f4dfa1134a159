//! Events besides the transit: occultations, radial-velocity extremes and phase windows, planned like transits
//! and told apart in every output.

mod common;
use common::*;
use dipwatch::engine::plan::{plan, Verdict};
use dipwatch::orbit::{
    kind_views, occultation_phase, placement, rv_max_phase, rv_min_phase, EventKind, Orbit,
};
use proptest::prelude::*;

fn run(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(args)
        .env("SOURCE_DATE_EPOCH", "1800000000")
        .output()
        .unwrap()
}

/// Run a command (its words up to the first option) on the example files.
fn example(args: &[&str]) -> String {
    let k = args
        .iter()
        .position(|a| a.starts_with("--"))
        .unwrap_or(args.len());
    let mut all: Vec<String> = args[..k].iter().map(|s| s.to_string()).collect();
    all.extend([
        "--sites".to_string(),
        repo("sites.example.toml"),
        "--targets".to_string(),
        repo("targets.example.csv"),
    ]);
    all.extend(args[k..].iter().map(|s| s.to_string()));
    let o = run(&all.iter().map(String::as_str).collect::<Vec<_>>());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    /// For any e < 1 and omega the occultation never falls on the transit, and the two radial-velocity
    /// extremes are distinct instants strictly between transits.
    #[test]
    fn occultation_never_coincides_with_transit(ecc in 0.0f64..0.95, omega in -360.0f64..360.0) {
        let o = Orbit { ecc, omega_deg: omega, ..Orbit::CIRCULAR };
        let occ = occultation_phase(&o);
        prop_assert!(occ > 1e-6 && occ < 1.0 - 1e-6, "phase {occ}");
        let (hi, lo) = (rv_max_phase(&o), rv_min_phase(&o));
        prop_assert!((hi - lo).abs() > 1e-9);
        // The two conjunctions are half an orbit of true anomaly apart: the occultation moves with e cos omega
        // only, and the first-order offset never has the wrong sign.
        let first = 0.5 + 2.0 * ecc * omega.to_radians().cos() / std::f64::consts::PI;
        if ecc > 0.01 && omega.to_radians().cos().abs() > 0.2 {
            prop_assert_eq!((occ - 0.5).signum(), (first - 0.5).signum());
        }
    }

    /// Phase windows cut at any points tile the orbit: consecutive windows meet, and together they last one
    /// period.
    #[test]
    fn phase_windows_tile_the_orbit(mut cuts in proptest::collection::vec(0.001f64..0.999, 1..6)) {
        cuts.sort_by(f64::total_cmp);
        cuts.dedup_by(|a, b| (*a - *b).abs() < 1e-6);
        let period = 3.7;
        let n = cuts.len();
        let mut total_h = 0.0;
        for k in 0..n {
            let (a, b) = (cuts[k], cuts[(k + 1) % n]);
            if n == 1 {
                break;
            }
            let p = placement(EventKind::Phase(a, b), &Orbit::CIRCULAR, period, 2.0, 1.0);
            total_h += p.duration_hours;
            // This window ends where the next begins.
            let end = (p.offset_days + p.duration_hours / 48.0).rem_euclid(period);
            let next = placement(EventKind::Phase(b, cuts[(k + 2) % n]), &Orbit::CIRCULAR, period, 2.0, 1.0);
            let next_start = (next.offset_days - next.duration_hours / 48.0).rem_euclid(period);
            let gap = (end - next_start + period / 2.0).rem_euclid(period) - period / 2.0;
            prop_assert!(gap.abs() < 1e-9, "gap {gap}");
        }
        if n > 1 {
            prop_assert!((total_h - period * 24.0).abs() < 1e-9, "{total_h}");
        }
    }
}

#[test]
fn views_move_the_ephemeris_to_the_event() {
    let (_, targets) = example_inputs();
    let kinds = [EventKind::Transit, EventKind::Occultation, EventKind::RvMin];
    let v = kind_views(&targets, &kinds, 1.5);
    assert_eq!(v.len(), 3 * targets.len());
    let n = targets.len();
    let amber = targets
        .iter()
        .position(|t| t.name == "Amberfall b")
        .unwrap();
    let (t, occ, rv) = (&v[amber], &v[n + amber], &v[2 * n + amber]);
    let p = t.ephemeris.period_days;
    // A circular orbit: occultation half a period after transit, RV minimum a quarter.
    assert!((occ.ephemeris.t0 - t.ephemeris.t0 - p / 2.0).abs() < 1e-9);
    assert!((rv.ephemeris.t0 - t.ephemeris.t0 - p / 4.0).abs() < 1e-9);
    assert_eq!(occ.t14_hours, t.t14_hours);
    assert_eq!(rv.t14_hours, 1.5);
    assert_eq!(
        occ.depth_ppt, None,
        "the transit depth is not the occultation's"
    );
    assert_eq!(occ.ephemeris.t0_sigma_days, t.ephemeris.t0_sigma_days);
    // An eccentric orbit with sigmas: a later or earlier occultation, wider timing sigma, another duration.
    let salt = targets
        .iter()
        .position(|t| t.name == "Saltmarsh d")
        .unwrap();
    let (t, occ) = (&v[salt], &v[n + salt]);
    assert!(occ.ephemeris.t0_sigma_days > t.ephemeris.t0_sigma_days);
    assert!((occ.t14_hours - t.t14_hours).abs() > 0.01);
    let o = t.orbit.unwrap();
    let want = occultation_phase(&o) * t.ephemeris.period_days;
    assert!((occ.ephemeris.t0 - t.ephemeris.t0 - want).abs() < 1e-9);
}

#[test]
fn windows_get_window_verdicts_and_no_baseline() {
    let (sites, targets) = example_inputs();
    let mut opts = opts(date(2027, 3, 1), date(2027, 3, 31));
    opts.include_unobservable = false;
    let views = kind_views(
        &targets,
        &[EventKind::RvMax, EventKind::Phase(0.6, 0.7)],
        1.0,
    );
    let p = plan(&sites, &views, &opts);
    let events: Vec<_> = p.sites.iter().flat_map(|s| &s.events).collect();
    assert!(events.len() > 20);
    for e in &events {
        assert!(
            matches!(e.verdict, Verdict::WholeWindow | Verdict::PartWindow),
            "{:?}",
            e.verdict
        );
        assert_eq!((e.baseline_before_min, e.baseline_after_min), (0.0, 0.0));
        // The planned block is the window with its timing margins, nothing more.
        let margin = e.sigma_min / 1440.0;
        assert!((e.full_block_start_utc - (e.ingress_utc - margin)).abs() < 1e-9);
        assert!(e.noise.is_none_or(|n| n.snr.is_none()), "no depth, no SNR");
        if e.verdict == Verdict::WholeWindow {
            assert!(e.coverage > 0.999);
        }
    }
}

#[test]
fn every_output_shows_the_kind() {
    // CSV: the kind field, null contacts for windows, window edges instead.
    let csv_text = example(&[
        "plan",
        "--from",
        "2027-03-01",
        "--days",
        "10",
        "--kind",
        "occultation,rv-max",
        "--format",
        "csv",
    ]);
    let mut rdr = csv::Reader::from_reader(csv_text.as_bytes());
    let h = rdr.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let rows: Vec<csv::StringRecord> = rdr.records().map(Result::unwrap).collect();
    let kinds: std::collections::BTreeSet<&str> = rows.iter().map(|r| &r[col("kind")]).collect();
    assert_eq!(
        kinds.into_iter().collect::<Vec<_>>(),
        ["occultation", "rv-max"]
    );
    for r in &rows {
        let window = &r[col("kind")] == "rv-max";
        assert_eq!(r[col("ingress_utc")].is_empty(), window);
        assert_eq!(r[col("window_start_utc")].is_empty(), !window);
        assert!(!r[col("mid_utc")].is_empty());
    }
    // Table: the markers.
    let table = example(&[
        "plan",
        "--from",
        "2027-03-01",
        "--days",
        "10",
        "--kind",
        "occultation,rv-max",
    ]);
    assert!(
        table.contains("[occ]") && table.contains("[rv+]"),
        "{table}"
    );
    // tonight: the marker in the heading and the event's own instants.
    let tonight = example(&[
        "tonight",
        "--site",
        "Kestrel Moor",
        "--date",
        "2027-03-04",
        "--kind",
        "occultation",
    ]);
    assert!(
        tonight.contains("Moss Harbour b [occ]") && tonight.contains("mid-occultation"),
        "{tonight}"
    );
    // Calendar SUMMARY and a UID of its own.
    let d = temp("kinds-calendar");
    let ics = d.join("k.ics");
    example(&[
        "calendar",
        "--from",
        "2027-03-04",
        "--days",
        "1",
        "--site",
        "Kestrel Moor",
        "--kind",
        "transit,occultation",
        "--out",
        ics.to_str().unwrap(),
    ]);
    let cal = std::fs::read_to_string(&ics).unwrap().replace("\r\n ", "");
    assert!(
        cal.contains("SUMMARY:Moss Harbour b occultation (whole) at Kestrel Moor"),
        "{cal}"
    );
    assert!(cal.contains("UID:moss-harbour-b-occultation."), "{cal}");
    // Schedule: the marker in its table.
    let sched = example(&[
        "schedule",
        "--from",
        "2027-03-01",
        "--days",
        "5",
        "--kind",
        "rv-min",
    ]);
    assert!(sched.contains("[rv-]"), "{sched}");
    // Season grid: the outline tells the kind (a circle for occultations), with a legend entry.
    let svg_path = d.join("s.svg");
    example(&[
        "chart",
        "season",
        "--from",
        "2027-03-01",
        "--to",
        "2027-03-10",
        "--kind",
        "transit,occultation",
        "--out",
        svg_path.to_str().unwrap(),
    ]);
    let svg = std::fs::read_to_string(&svg_path).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let occ_frames: Vec<_> = doc
        .descendants()
        .filter(|n| {
            n.attribute("class")
                .is_some_and(|c| c.contains("event") && c.contains("kind-occultation"))
        })
        .filter_map(|g| g.children().find(|c| c.has_tag_name("rect")))
        .collect();
    assert!(!occ_frames.is_empty());
    for f in occ_frames {
        let rx: f64 = f.attribute("rx").unwrap().parse().unwrap();
        let w: f64 = f.attribute("width").unwrap().parse().unwrap();
        assert!(
            (rx - w / 2.0).abs() < 0.11,
            "an occultation is drawn as a circle"
        );
    }
    assert!(svg.contains(">occultation</text>"));
}

#[test]
fn a_bad_kind_is_refused_with_the_choices() {
    let o = run(&["plan", "--kind", "eclipse"]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("expected transit, occultation, rv-max, rv-min or phase:A-B"),
        "{err}"
    );
}
