//! Invariants over random targets (proptest): ingress < mid < egress inside the block; coverage in [0, 1];
//! the acted-on block equal to the usable run inside the planned block; every event's night inside the requested range and its mid-transit inside that night's window; the usable
//! run inside the block; and the same inputs give byte-identical CSV.

use dipwatch::astro::barycentric::TimeSystem;
use dipwatch::engine::plan::{plan, PlanOptions};
use dipwatch::ephemeris::Ephemeris;
use dipwatch::inputs::sites::parse_sites;
use dipwatch::inputs::targets::Target;
use proptest::prelude::*;

fn sites() -> Vec<dipwatch::inputs::sites::Site> {
    let text =
        std::fs::read_to_string(format!("{}/sites.example.toml", env!("CARGO_MANIFEST_DIR")))
            .unwrap();
    parse_sites("sites.example.toml", &text).unwrap()
}

prop_compose! {
    fn any_target()(
        ra in 0.0..360.0_f64,
        sin_dec in -1.0..1.0_f64,
        period in 0.3..40.0_f64,
        t14_frac in 0.01..0.3_f64,
        phase in 0.0..1.0_f64,
        t0_sigma in 0.0..0.01_f64,
        p_sigma in 0.0..0.001_f64,
        system in 0usize..3,
    ) -> Target {
        Target {
            name: "Random b".into(),
            ra_deg: ra,
            dec_deg: sin_dec.asin().to_degrees(),
            ephemeris: Ephemeris {
                t0: 2_461_000.0 + phase * period,
                t0_sigma_days: t0_sigma,
                period_days: period,
                period_sigma_days: p_sigma,
                cov_t0_period_days2: 0.0,
                system: [TimeSystem::BjdTdb, TimeSystem::HjdUtc, TimeSystem::JdUtc][system],
            },
            t14_hours: (period * 24.0 * t14_frac).min(12.0),
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
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]
    #[test]
    fn plan_invariants(targets in prop::collection::vec(any_target(), 1..4), start_day in 0i64..365, all in any::<bool>()) {
        let sites = sites();
        let first = chrono::NaiveDate::from_ymd_opt(2027, 1, 1).unwrap() + chrono::Duration::days(start_day);
        let opts = PlanOptions {
            first_night: first,
            last_night: first + chrono::Duration::days(9),
            sigma_k: 1.0,
            baseline_before_min: 30.0,
            baseline_after_min: 30.0,
            min_coverage: 0.0,
            min_in_transit_min: 0.0,
            min_snr: 0.0,
            include_unobservable: all,
            kinds: vec![dipwatch::orbit::EventKind::Transit],
            rv_window_hours: 1.0,
        };
        let p = plan(&sites, &targets, &opts);
        for sp in &p.sites {
            for e in &sp.events {
                prop_assert!(e.full_block_start_utc < e.ingress_utc && e.ingress_utc < e.mid_utc);
                prop_assert!(e.mid_utc < e.egress_utc && e.egress_utc < e.full_block_end_utc);
                // The block acted on is the planned block clipped to what can be observed.
                prop_assert!(e.block_start_utc >= e.full_block_start_utc - 1e-9);
                prop_assert!(e.block_end_utc <= e.full_block_end_utc + 1e-9);
                prop_assert!(e.block_start_utc < e.block_end_utc);
                if let Some(u) = e.usable {
                    // Inside the run, on whole minutes, less than a minute in from each edge.
                    let min = 1.0 / 1440.0;
                    prop_assert!(e.block_start_utc >= u.start - 1e-9 && e.block_start_utc - u.start < min + 1e-9);
                    prop_assert!(e.block_end_utc <= u.end + 1e-9 && u.end - e.block_end_utc < min + 1e-9);
                    let on_minute = |jd: f64| { let m = (jd - 2_440_587.5) * 1440.0; (m - m.round()).abs() < 1e-4 };
                    if u.end - u.start >= 2.0 * min {
                        prop_assert!(on_minute(e.block_start_utc) && on_minute(e.block_end_utc));
                    }
                }
                prop_assert!((0.0..=1.0).contains(&e.coverage));
                prop_assert!(e.night_of >= opts.first_night && e.night_of <= opts.last_night);
                let night = sp.nights.iter().find(|n| n.night_of == e.night_of).unwrap();
                prop_assert!(e.mid_utc >= night.window.start && e.mid_utc < night.window.end);
                if let Some(u) = e.usable {
                    prop_assert!(u.start >= e.full_block_start_utc - 1e-9 && u.end <= e.full_block_end_utc + 1e-9);
                }
                prop_assert!(!e.observable || e.coverage > 0.0);
            }
        }
        let a = dipwatch::outputs::plan_csv(&p, &sites, &targets);
        let b = dipwatch::outputs::plan_csv(&plan(&sites, &targets, &opts), &sites, &targets);
        prop_assert_eq!(a, b);
    }
}
