//! Ephemeris refinement against numpy's weighted polynomial fit, a hand-solved example, and the command.

mod common;
use common::fixture;

use dipwatch::engine::refine::{
    fit_linear_ephemeris, fit_with_prior, FitError, Prior, TimingPoint,
};
use std::process::Command;

fn pt(epoch: i64, t: f64, s: f64) -> TimingPoint {
    TimingPoint {
        epoch,
        bjd_tdb: t,
        sigma_days: s,
        label: String::new(),
    }
}

#[test]
fn matches_numpy_polyfit_on_40_data_sets() {
    // Fixture: numpy.polyfit(epoch, t, 1, w=1/sigma, cov="unscaled") via tools/make_reference_fixtures.py.
    // Tolerances: 1e-7 d (9 ms) on T0 and 1e-11 d on P, far below any timing error. Variances and covariance
    // to 1e-5 relative: numpy's covariance itself is off by up to ~1e-6 relative (checked for set 2 with exact
    // rational arithmetic in Python: cov = -2.98348001299e-10, ours -2.98348001299e-10, numpy -2.98347694e-10).
    let points = fixture("refine_points.csv");
    let fits = fixture("refine_fits.csv");
    assert_eq!(fits.len(), 40);
    let mut rescaled = 0;
    for f in &fits {
        let pts: Vec<TimingPoint> = points
            .iter()
            .filter(|p| p[0] == f[0])
            .map(|p| {
                pt(
                    p[1].parse().unwrap(),
                    p[2].parse().unwrap(),
                    p[3].parse().unwrap(),
                )
            })
            .collect();
        let n: Vec<f64> = f.iter().skip(1).map(|x| x.parse().unwrap()).collect();
        let fit = fit_linear_ephemeris(&pts, Some(0)).unwrap();
        assert!(
            (fit.t_ref - n[0]).abs() < 1e-7,
            "set {}: T0 want {} got {}",
            f[0],
            n[0],
            fit.t_ref
        );
        assert!(
            (fit.period_days - n[1]).abs() < 1e-11,
            "set {}: P want {} got {}",
            f[0],
            n[1],
            fit.period_days
        );
        let k2 = fit.sigma_scale * fit.sigma_scale;
        let rel = |got: f64, want: f64| ((got - want) / want).abs();
        assert!(
            rel(fit.sigma_t_ref_days.powi(2) / k2, n[2]) < 1e-5,
            "set {}: var T0",
            f[0]
        );
        assert!(
            rel(fit.sigma_period_days.powi(2) / k2, n[3]) < 1e-5,
            "set {}: var P",
            f[0]
        );
        assert!(
            rel(fit.cov_days2 / k2, n[4]) < 1e-5,
            "set {}: cov want {} got {}",
            f[0],
            n[4],
            fit.cov_days2 / k2
        );
        assert!(
            rel(fit.chi2, n[5]) < 1e-6,
            "set {}: chi2 want {} got {}",
            f[0],
            n[5],
            fit.chi2
        );
        // Rescaling rule (common practice, no source): sqrt(chi2/dof) when above 1.
        let red = n[5] / (pts.len() - 2) as f64;
        let want_scale = if red > 1.0 { red.sqrt() } else { 1.0 };
        assert!((fit.sigma_scale - want_scale).abs() < 1e-6 * want_scale);
        rescaled += usize::from(red > 1.0);
    }
    assert!(rescaled > 5, "the fixture should exercise rescaling");
}

#[test]
fn prior_fit_matches_numpy_least_squares_with_the_prior_rows_added() {
    // Fixture: numpy.linalg.lstsq on whitened rows (observations, then the catalogue's (T0, P) as two rows
    // L^-1 with C = L L^T), covariance (A^T A)^-1 from the SVD of A, via tools/make_reference_fixtures.py refine_prior.
    // 30 sets: single epochs (P from the prior alone), correlated priors, and data 8 prior sigmas away.
    // Tolerances as for the polyfit check: 1e-7 d on T0, 1e-11 d on P, 1e-5 relative on the covariance
    // (the covariance can nearly cancel, so the script fits exactly the digits it writes); chi2 to 1e-5
    // absolute plus 1e-6 relative.
    let points = fixture("refine_prior_points.csv");
    let fits = fixture("refine_prior_fits.csv");
    assert_eq!(fits.len(), 30);
    let mut single = 0;
    for f in &fits {
        let v: Vec<f64> = f.iter().skip(1).map(|x| x.parse().unwrap()).collect();
        let pts: Vec<TimingPoint> = points
            .iter()
            .filter(|p| p[0] == f[0])
            .map(|p| {
                pt(
                    p[1].parse().unwrap(),
                    p[2].parse().unwrap(),
                    p[3].parse().unwrap(),
                )
            })
            .collect();
        single += usize::from(pts.len() == 1);
        let prior = Prior {
            t0: v[0],
            period_days: v[1],
            t0_sigma_days: v[2],
            period_sigma_days: v[3],
            cov_days2: v[4],
        };
        let fit = fit_with_prior(&pts, &prior, Some(0)).unwrap();
        let k2 = fit.sigma_scale * fit.sigma_scale;
        let rel = |got: f64, want: f64| ((got - want) / want).abs();
        assert!(
            (fit.t_ref - v[5]).abs() < 1e-7,
            "set {}: T0 want {} got {}",
            f[0],
            v[5],
            fit.t_ref
        );
        assert!(
            (fit.period_days - v[6]).abs() < 1e-11,
            "set {}: P want {} got {}",
            f[0],
            v[6],
            fit.period_days
        );
        assert!(
            rel(fit.sigma_t_ref_days.powi(2) / k2, v[7]) < 1e-5,
            "set {}: var T0",
            f[0]
        );
        assert!(
            rel(fit.sigma_period_days.powi(2) / k2, v[8]) < 1e-5,
            "set {}: var P",
            f[0]
        );
        assert!(
            rel(fit.cov_days2 / k2, v[9]) < 1e-5,
            "set {}: cov want {} got {}",
            f[0],
            v[9],
            fit.cov_days2 / k2
        );
        assert!(
            (fit.chi2 - v[10]).abs() < 1e-5 + 1e-6 * v[10],
            "set {}: chi2 want {} got {}",
            f[0],
            v[10],
            fit.chi2
        );
        assert_eq!(fit.dof, pts.len());
    }
    assert!(single >= 5, "the fixture should hold single-epoch sets");
}

#[test]
fn a_wide_prior_gives_the_observations_alone_and_a_tight_one_keeps_the_catalogue() {
    let pts: Vec<TimingPoint> = (0..4)
        .map(|i| {
            pt(
                i * 40,
                2_460_000.0 + i as f64 * 40.0 * 2.5 + 0.0004 * (i % 2) as f64,
                0.0005,
            )
        })
        .collect();
    let alone = fit_linear_ephemeris(&pts, Some(0)).unwrap();
    let wide = Prior {
        t0: 2_460_000.01,
        period_days: 2.5001,
        t0_sigma_days: 1e3,
        period_sigma_days: 1e2,
        cov_days2: 0.0,
    };
    let f = fit_with_prior(&pts, &wide, Some(0)).unwrap();
    assert!(
        (f.t_ref - alone.t_ref).abs() < 1e-9 && (f.period_days - alone.period_days).abs() < 1e-12
    );
    let tight = Prior {
        t0: 2_460_000.0,
        period_days: 2.5,
        t0_sigma_days: 1e-7,
        period_sigma_days: 1e-10,
        cov_days2: 0.0,
    };
    let f = fit_with_prior(&pts, &tight, Some(0)).unwrap();
    assert!((f.t_ref - 2_460_000.0).abs() < 1e-6 && (f.period_days - 2.5).abs() < 1e-9);
    // A catalogue without errors constrains nothing: one epoch cannot be fitted.
    let none = Prior {
        t0_sigma_days: 0.0,
        period_sigma_days: 0.0,
        ..tight
    };
    assert!(matches!(
        fit_with_prior(&pts[..1], &none, None),
        Err(FitError::TooFewEpochs(1))
    ));
}

#[test]
fn hand_solved_three_points_and_chi2_of_four_rescales_by_two() {
    // By hand: epochs 0, 1, 2 at times 10.0, 12.0, 14.6 (days, offset from an arbitrary JD), equal sigma s.
    // Mean epoch 1, mean time 12.2; Sxx = 2; Sxy = (-1)(-2.2) + (1)(2.4) = 4.6, so P = 2.3 and T(1) = 12.2.
    // Residuals +0.1, -0.2, +0.1: chi2 = 0.06 / s^2 with 1 degree of freedom. var(P) = s^2/2, var(T(1)) = s^2/3,
    // cov = 0 at the mean epoch. With s^2 = 0.015, chi2 = 4, reduced chi-square 4, sigmas scaled by 2.
    let s = 0.015_f64.sqrt();
    let base = 2_460_000.0;
    let pts = [
        pt(0, base + 10.0, s),
        pt(1, base + 12.0, s),
        pt(2, base + 14.6, s),
    ];
    let f = fit_linear_ephemeris(&pts, None).unwrap();
    assert_eq!(f.ref_epoch, 1);
    assert!((f.t_ref - (base + 12.2)).abs() < 1e-9);
    assert!((f.period_days - 2.3).abs() < 1e-9);
    // Times near JD 2.46e6 carry ~5e-10 d of rounding, so chi2 (residuals 0.1 d over s^2) holds to ~1e-8.
    assert!((f.chi2 - 4.0).abs() < 1e-6);
    assert!((f.reduced_chi2 - 4.0).abs() < 1e-6);
    assert!((f.sigma_scale - 2.0).abs() < 1e-6);
    assert!((f.sigma_period_days - 2.0 * (0.015_f64 / 2.0).sqrt()).abs() < 1e-7);
    assert!((f.sigma_t_ref_days - 2.0 * (0.015_f64 / 3.0).sqrt()).abs() < 1e-7);
    assert!(f.cov_days2.abs() < 1e-15);
    let r: Vec<f64> = f
        .residuals_days
        .iter()
        .map(|x| (x * 10.0).round() / 10.0)
        .collect();
    assert_eq!(r, vec![0.1, -0.2, 0.1]);
    assert_eq!(
        fit_linear_ephemeris(&pts[..1], None),
        Err(FitError::TooFewEpochs(1))
    );
}

fn repo(rel: &str) -> String {
    format!("{}/{rel}", env!("CARGO_MANIFEST_DIR"))
}

fn temp(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("dipwatch-refine-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn run(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn an_observation_a_third_of_a_period_off_stops_with_its_line() {
    let d = temp("ambiguous");
    let obs = d.join("obs.csv");
    // Amberfall b: T0 2460712.38215, P 2.7741832 d. Epoch 10 is at 2460740.124; 0.9 d later is ~P/3 off.
    std::fs::write(&obs, "target,tc,tc_sigma_days\nAmberfall b,2460740.12400,0.0005\nAmberfall b,2460741.02400,0.0005\n").unwrap();
    let o = run(&[
        "refine",
        "--targets",
        &repo("targets.example.csv"),
        "--observed",
        obs.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("obs.csv:3: Amberfall b observed at 2460741.024"),
        "{err}"
    );
    assert!(err.contains("the epoch is ambiguous"), "{err}");
}

#[test]
fn refine_writes_an_updated_targets_file_and_never_overwrites_the_input_unasked() {
    let d = temp("write");
    let targets = d.join("targets.csv");
    std::fs::copy(repo("targets.example.csv"), &targets).unwrap();
    let out = d.join("refined.csv");
    let t = targets.to_str().unwrap();
    let o = run(&[
        "refine",
        "--targets",
        t,
        "--observed",
        &repo("observed.example.csv"),
        "--out",
        out.to_str().unwrap(),
        "--format",
        "json",
        "--stale-at",
        "2027-09-01",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["refined"].as_array().unwrap().len(), 4);
    let updated = std::fs::read_to_string(&out).unwrap();
    let original = std::fs::read_to_string(repo("targets.example.csv")).unwrap();
    assert!(
        updated.starts_with("# Example targets"),
        "leading comments kept"
    );
    // The refined targets are readable and carry the new numbers; others are unchanged.
    let parsed = dipwatch::inputs::targets::parse_targets(
        "u",
        &updated,
        &dipwatch::inputs::targets::ColumnMap::default(),
    )
    .unwrap();
    let amber = parsed.iter().find(|x| x.name == "Amberfall b").unwrap();
    let want_p = v["refined"][0]["refined"]["period_days"].as_f64().unwrap();
    assert!((amber.ephemeris.period_days - want_p).abs() < 1e-9);
    assert!(
        amber.ephemeris.cov_t0_period_days2 != 0.0
            || v["refined"][0]["refined"]["t0_period_cov_days2"] == 0.0
    );
    let salt = parsed.iter().find(|x| x.name == "Saltmarsh d").unwrap();
    assert_eq!(
        salt.ephemeris.system.name(),
        "BJD_TDB",
        "HJD_UTC catalogue entry refined into BJD_TDB"
    );
    let cinder_line = |text: &str| {
        text.lines()
            .find(|l| l.starts_with("Cinderlark b"))
            .unwrap()
            .to_string()
    };
    assert_eq!(cinder_line(&updated), cinder_line(&original));
    assert_eq!(
        std::fs::read_to_string(&targets).unwrap(),
        original,
        "input untouched"
    );
    // --out pointing at the input is refused without --in-place.
    let o = run(&[
        "refine",
        "--targets",
        t,
        "--observed",
        &repo("observed.example.csv"),
        "--out",
        t,
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("pass --in-place"));
    assert_eq!(std::fs::read_to_string(&targets).unwrap(), original);
    let o = run(&[
        "refine",
        "--targets",
        t,
        "--observed",
        &repo("observed.example.csv"),
        "--in-place",
    ]);
    assert!(o.status.success());
    assert_ne!(std::fs::read_to_string(&targets).unwrap(), original);
}

#[test]
fn staleness_flags_the_stale_examples() {
    let o = run(&[
        "refine",
        "--targets",
        &repo("targets.example.csv"),
        "--stale-at",
        "2027-09-01",
        "--format",
        "csv",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    let row = |name: &str| {
        text.lines()
            .find(|l| l.starts_with(name))
            .unwrap()
            .to_string()
    };
    // Ravelstone b: sigma_P = 0.0004 d; about 95 epochs after T0 the 1-sigma is ~55 min, 17% of its 5.38 h T14.
    assert!(row("Ravelstone b").ends_with("refresh first"), "{text}");
    assert!(row("Amberfall b").ends_with("fresh"), "{text}");
}

/// Refine the example targets with `observed` text; returns the output and the --out path.
fn refine_example(
    name: &str,
    observed: &str,
    extra: &[&str],
) -> (std::process::Output, std::path::PathBuf) {
    let d = temp(name);
    let obs = d.join("obs.csv");
    std::fs::write(&obs, observed).unwrap();
    let out = d.join("refined.csv");
    let mut args = vec!["refine", "--targets", &repo("targets.example.csv")]
        .into_iter()
        .map(String::from)
        .collect::<Vec<String>>();
    args.extend(
        [
            "--observed",
            obs.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--format",
            "json",
            "--stale-at",
            "2027-09-01",
        ]
        .map(String::from),
    );
    args.extend(extra.iter().map(|s| s.to_string()));
    let o = run(&args.iter().map(String::as_str).collect::<Vec<_>>());
    (o, out)
}

#[test]
fn by_default_the_catalogue_is_a_prior_and_the_written_ephemeris_is_never_worse() {
    let observed = std::fs::read_to_string(repo("observed.example.csv")).unwrap();
    let (o, out) = refine_example("prior-default", &observed, &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let targets = dipwatch::inputs::targets::parse_targets(
        "t",
        &std::fs::read_to_string(repo("targets.example.csv")).unwrap(),
        &dipwatch::inputs::targets::ColumnMap::default(),
    )
    .unwrap();
    let written = dipwatch::inputs::targets::parse_targets(
        "u",
        &std::fs::read_to_string(&out).unwrap(),
        &dipwatch::inputs::targets::ColumnMap::default(),
    )
    .unwrap();
    let at = 2_461_649.5; // 2027-09-01
    for r in v["refined"].as_array().unwrap() {
        assert_eq!(r["refined_from"], "with-catalogue-prior");
        assert!(
            r["observations_only"].is_object(),
            "both fits reported: {r}"
        );
        let name = r["target"].as_str().unwrap();
        let cat = targets.iter().find(|t| t.name == name).unwrap();
        let new = written.iter().find(|t| t.name == name).unwrap();
        // Information only adds: the period and the timing at a later date are never less certain.
        assert!(
            new.ephemeris.period_sigma_days <= cat.ephemeris.period_sigma_days * 1.0001,
            "{name}: P sigma {} -> {}",
            cat.ephemeris.period_sigma_days,
            new.ephemeris.period_sigma_days
        );
        let sig = |t: &dipwatch::inputs::targets::Target| {
            dipwatch::engine::refine::staleness(&t.ephemeris, t.t14_hours, at).sigma_min
        };
        assert!(
            sig(new) <= sig(cat) * 1.0001,
            "{name}: {} -> {}",
            sig(cat),
            sig(new)
        );
    }
    // Observations alone when asked, and then the JSON says so.
    let (o, _) = refine_example("prior-alone", &observed, &["--observations-only"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(v["refined"]
        .as_array()
        .unwrap()
        .iter()
        .all(|r| r["refined_from"] == "observations-only"));
}

#[test]
fn an_observation_many_sigma_from_its_prediction_names_its_line_even_under_a_quarter_period() {
    // Saltmarsh d (P 9.66 d, prediction +-2 min at epoch 14): a time 1.2 d late (0.12 P) is an error.
    let (o, out) = refine_example(
        "far",
        "target,tc,tc_sigma_days\nSaltmarsh d,2460805.83503,0.0011\nSaltmarsh d,2460807.03503,0.0011\n",
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("obs.csv:3: Saltmarsh d observed at 2460807.03503"),
        "{err}"
    );
    assert!(
        err.contains("combined sigma") && err.contains("expected within 5 sigma"),
        "{err}"
    );
    assert!(!out.exists());
}

#[test]
fn tension_with_the_catalogue_is_flagged_and_blocks_writing_unless_accepted() {
    // Amberfall b's example times all moved 20 min late: consistent among themselves, about 20 combined
    // sigma from the catalogue. Allowed in by --epoch-sigma 50, they must be flagged and not written.
    let observed = "target,tc,tc_sigma_days\n\
        Amberfall b,2460826.13759,0.00045\n\
        Amberfall b,2460942.65369,0.00045\n\
        Amberfall b,2461061.94343,0.00045\n\
        Amberfall b,2461178.45922,0.00045\n";
    let (o, out) = refine_example("tension", observed, &["--epoch-sigma", "50"]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("not written")
            && err.contains("Amberfall b")
            && err.contains("--accept-tension"),
        "{err}"
    );
    assert!(!out.exists(), "nothing may be written");
    // The report is still printed: O-C against the catalogue beyond 3 combined sigma for every point.
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let r = &v["refined"][0];
    assert_eq!(r["tension"]["serious"], true);
    assert!(r["tension"]["t0_sigmas"].as_f64().unwrap() > 5.0);
    for row in r["o_minus_c"].as_array().unwrap() {
        assert_eq!(row["catalogue_outlier"], true, "{row}");
        assert!(row["o_minus_catalogue_min"].as_f64().unwrap() > 19.0);
    }
    let (o, out) = refine_example(
        "tension-ok",
        observed,
        &["--epoch-sigma", "50", "--accept-tension"],
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(out.exists());
}

#[test]
fn rows_of_unknown_targets_are_skipped_with_a_note() {
    let observed = format!(
        "{}Nobody b,2460826.12370,0.0005\n",
        std::fs::read_to_string(repo("observed.example.csv")).unwrap()
    );
    let (o, _) = refine_example("unknown", &observed, &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("target \"Nobody b\" is not in") && err.contains("row skipped"),
        "{err}"
    );
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["refined"].as_array().unwrap().len(), 4);
}

#[test]
fn two_sided_errors_are_read_conservatively_and_both_sides_are_updated() {
    let d = temp("two-sided");
    let targets = d.join("targets.csv");
    std::fs::write(
        &targets,
        "name,ra,dec,t0,T0 err+,T0 err-,period_days,period_sigma_days,t14_hours\n\
         Amberfall b,07:42:18.6,+21:14:09,2460712.38215,0.00042,-0.00030,2.7741832,0.0000021,2.61\n",
    )
    .unwrap();
    let map = "t0_sigma_days=T0 err+|T0 err-";
    let parsed = dipwatch::inputs::targets::parse_targets(
        "t",
        &std::fs::read_to_string(&targets).unwrap(),
        &dipwatch::inputs::targets::ColumnMap::parse(map).unwrap(),
    )
    .unwrap();
    // The larger magnitude of the two sides.
    assert_eq!(parsed[0].ephemeris.t0_sigma_days, 0.00042);
    let out = d.join("refined.csv");
    let o = run(&[
        "refine",
        "--targets",
        targets.to_str().unwrap(),
        "--columns",
        map,
        "--observed",
        &repo("observed.example.csv"),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = std::fs::read_to_string(&out).unwrap();
    let mut rdr = csv::Reader::from_reader(text.as_bytes());
    let rec = rdr.records().next().unwrap().unwrap();
    let plus: f64 = rec[4].parse().unwrap();
    let minus: f64 = rec[5].parse().unwrap();
    assert!(plus > 0.0 && plus < 0.00042, "{text}");
    assert_eq!(
        minus, -plus,
        "both sides updated, the minus side keeps its sign: {text}"
    );
    // Only sigma columns may be two-sided.
    assert!(dipwatch::inputs::targets::ColumnMap::parse("t0=a|b")
        .unwrap_err()
        .contains("accepted only for t0_sigma_days and period_sigma_days"));
}

#[test]
fn every_bad_observed_row_is_reported_not_only_the_first() {
    let (o, out) = refine_example(
        "two-bad",
        "target,tc,tc_sigma_days\nSaltmarsh d,2460807.03503,0.0011\nAmberfall b,2460741.02400,0.0005\nAmberfall b,2460740.12400,0.0005\n",
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("obs.csv:2: Saltmarsh d") && err.contains("obs.csv:3: Amberfall b"),
        "{err}"
    );
    assert_eq!(err.matches("dipwatch: ").count(), 2, "{err}");
    assert!(!out.exists());
}
