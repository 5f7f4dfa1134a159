//! Ephemeris refinement against numpy's weighted polynomial fit, a hand-solved example, and the command.

mod common;
use common::fixture;

use dipwatch::refine::{fit_linear_ephemeris, FitError, TimingPoint};
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
