//! Helpers shared by the integration tests.
#![allow(dead_code)]

/// Rows of a fixture CSV under tests/data/reference/ (comment lines starting with '#' and the header skipped).
pub fn fixture(name: &str) -> Vec<Vec<String>> {
    let path = format!("{}/tests/data/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    text.lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect()
}

/// A path inside the repository.
pub fn repo(rel: &str) -> String {
    format!("{}/{rel}", env!("CARGO_MANIFEST_DIR"))
}

/// A fresh, empty temporary folder for one test.
pub fn temp(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("dipwatch-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

use chrono::NaiveDate;
use dipwatch::astro::atmosphere::HorizonProfile;
use dipwatch::astro::barycentric::{EarthTable, TimeSystem};
use dipwatch::astro::frames::{unit_from_radec, Observer};
use dipwatch::astro::time::JdUtc;
use dipwatch::engine::plan::PlanOptions;
use dipwatch::ephemeris::Ephemeris;
use dipwatch::inputs::sites::Site;
use dipwatch::inputs::targets::Target;

/// A hand-built site: 500 m, altitude limit 30 deg, nautical darkness (-12 deg), one telescope `main`.
pub fn site(name: &str, lat: f64, lon: f64, tz: &str) -> Site {
    Site {
        name: name.into(),
        observer: Observer::from_deg(lat, lon, 500.0),
        lat_deg: lat,
        lon_deg: lon,
        elevation_m: 500.0,
        tz: tz.parse().unwrap(),
        min_alt_deg: 30.0,
        darkness_alt_deg: -12.0,
        darkness_label: "nautical".into(),
        horizon: HorizonProfile::default(),
        hour_angle_limits_h: None,
        min_moon_sep_deg: None,
        photometry: None,
        max_alt_deg: None,
        telescopes: vec![dipwatch::inputs::sites::Telescope {
            name: "main".into(),
            min_alt_deg: None,
            max_alt_deg: None,
            photometry: None,
        }],
    }
}

/// A target that transits the site's meridian (RA = local sidereal time) at `jd_utc`, with mid-transit
/// exactly then (T0 in BJD_TDB computed through the core).
pub fn target_at(name: &str, s: &Site, jd_utc: f64, dec_deg: f64, t14_hours: f64) -> Target {
    let eo = dipwatch::astro::frames::EarthOrientation::at(JdUtc(jd_utc));
    let ra_deg = eo.last_rad(s.observer.lon_rad).to_degrees();
    let icrs = unit_from_radec(ra_deg.to_radians(), dec_deg.to_radians());
    let table = EarthTable::new(jd_utc - 2.0, jd_utc + 2.0);
    let t0 = table.time_in_system(TimeSystem::BjdTdb, JdUtc(jd_utc), &icrs, Some(&s.observer));
    Target {
        name: name.into(),
        ra_deg,
        dec_deg,
        ephemeris: Ephemeris {
            t0,
            t0_sigma_days: 0.0005,
            period_days: 13.7,
            period_sigma_days: 0.0,
            cov_t0_period_days2: 0.0,
            system: TimeSystem::BjdTdb,
        },
        t14_hours,
        depth_ppt: Some(10.0),
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

pub fn opts(first: NaiveDate, last: NaiveDate) -> PlanOptions {
    PlanOptions {
        first_night: first,
        last_night: last,
        sigma_k: 1.0,
        baseline_before_min: 30.0,
        baseline_after_min: 30.0,
        min_coverage: 0.0,
        min_in_transit_min: 0.0,
        min_snr: 0.0,
        include_unobservable: true,
        kinds: vec![dipwatch::orbit::EventKind::Transit],
        rv_window_hours: 1.0,
    }
}

pub fn date(y: i32, m: u32, d: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(y, m, d).unwrap()
}

/// A target with a plain BJD_TDB ephemeris: T0 +- 0.001 d, P +- 1e-6 d, depth 5 ppt, priority 1.
pub fn plain_target(
    name: &str,
    ra_deg: f64,
    dec_deg: f64,
    t0: f64,
    period_days: f64,
    t14_hours: f64,
) -> Target {
    Target {
        name: name.into(),
        ra_deg,
        dec_deg,
        ephemeris: Ephemeris {
            t0,
            t0_sigma_days: 0.001,
            period_days,
            period_sigma_days: 1e-6,
            cov_t0_period_days2: 0.0,
            system: TimeSystem::BjdTdb,
        },
        t14_hours,
        depth_ppt: Some(5.0),
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

/// The example sites and targets (sites.example.toml, targets.example.csv), parsed.
pub fn example_inputs() -> (Vec<Site>, Vec<Target>) {
    let sites = dipwatch::inputs::sites::parse_sites(
        "sites.example.toml",
        &std::fs::read_to_string(repo("sites.example.toml")).unwrap(),
    )
    .unwrap();
    let targets = dipwatch::inputs::targets::parse_targets(
        "targets.example.csv",
        &std::fs::read_to_string(repo("targets.example.csv")).unwrap(),
        &dipwatch::inputs::targets::ColumnMap::default(),
    )
    .unwrap();
    (sites, targets)
}
