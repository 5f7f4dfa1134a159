//! Expected photometry per telescope: one plan row per telescope of a site, each with its own noise, and the
//! Moon's light in the noise.

mod common;
use common::*;
use dipwatch::engine::plan::plan;

#[test]
fn each_telescope_gets_its_own_row_and_noise() {
    let (sites, targets) = example_inputs();
    let opts = opts(date(2027, 3, 1), date(2027, 3, 31));
    let p = plan(&sites, &targets, &opts);
    let juniper = sites
        .iter()
        .position(|s| s.name == "Juniper Draw Station")
        .unwrap();
    let of = |ti: usize| {
        p.sites
            .iter()
            .find(|sp| sp.site_index == juniper && sp.telescope_index == ti)
            .unwrap()
    };
    let (big, small) = (of(0), of(1));
    assert!(big.events.iter().all(|e| e.telescope_index == 0));
    assert!(small.events.iter().all(|e| e.telescope_index == 1));
    // The same transit seen by both: the 0.6 m (lower read noise, more light) has less noise per 10 min.
    let mut both = 0;
    for e in &small.events {
        let Some(b) = big
            .events
            .iter()
            .find(|b| b.target_index == e.target_index && b.epoch == e.epoch)
        else {
            continue;
        };
        // (No noise where the star is below the horizon at mid-transit: an ingress- or egress-only event.)
        let (Some(nb), Some(ns)) = (b.noise, e.noise) else {
            assert!(e.alt_mid_deg < 0.0 && b.alt_mid_deg < 0.0);
            continue;
        };
        assert!(nb.noise_10min_ppt < ns.noise_10min_ppt, "{nb:?} vs {ns:?}");
        // The 0.4 m's converter (65535 ADU x 1.4 e/ADU) saturates before its 120 000 e well.
        assert!(ns.peak_well_fraction <= 0.7 + 1e-9);
        both += 1;
    }
    assert!(both >= 5, "only {both} transits seen by both telescopes");
    // The 0.4 m's own altitude limit (35 deg) holds in its rows, not in the 0.6 m's.
    assert!(small
        .events
        .iter()
        .all(|e| e.usable.is_none() || e.alt_mid_deg >= 35.0 - 1e-6 || e.coverage < 1.0));
}

#[test]
fn csv_rows_name_the_telescope_and_a_calendar_keeps_them_apart() {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args([
            "plan",
            "--sites",
            &repo("sites.example.toml"),
            "--targets",
            &repo("targets.example.csv"),
            "--site",
            "Juniper Draw Station",
            "--from",
            "2027-03-04",
            "--days",
            "1",
            "--format",
            "csv",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let mut rdr = csv::Reader::from_reader(text.as_bytes());
    let h = rdr.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let rows: Vec<csv::StringRecord> = rdr.records().map(Result::unwrap).collect();
    let amber: Vec<&csv::StringRecord> = rows.iter().filter(|r| &r[0] == "Amberfall b").collect();
    let tels: Vec<&str> = amber.iter().map(|r| &r[col("telescope")]).collect();
    assert_eq!(tels, ["0.6 m", "0.4 m"], "{text}");
    let snr = |r: &csv::StringRecord| r[col("snr")].parse::<f64>().unwrap();
    assert!(snr(amber[0]) > snr(amber[1]));
    let d = temp("photometry-calendar");
    let ics = d.join("plan.ics");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args([
            "calendar",
            "--sites",
            &repo("sites.example.toml"),
            "--targets",
            &repo("targets.example.csv"),
            "--site",
            "Juniper Draw Station",
            "--from",
            "2027-03-04",
            "--days",
            "1",
            "--out",
            ics.to_str().unwrap(),
        ])
        .env("SOURCE_DATE_EPOCH", "1800000000")
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let cal = std::fs::read_to_string(&ics).unwrap().replace("\r\n ", "");
    let uids: Vec<&str> = cal
        .lines()
        .filter(|l| l.starts_with("UID:amberfall"))
        .collect();
    assert_eq!(uids.len(), 2, "{cal}");
    assert_ne!(uids[0], uids[1]);
    assert!(cal.contains("at Juniper Draw Station / 0.4 m"));
}

#[test]
fn moonlight_raises_the_noise_of_a_faint_star() {
    use dipwatch::engine::noise::{event_noise, EventSky, MoonSky};
    let (sites, _) = example_inputs();
    let ph = sites[0].photometry.clone().unwrap();
    let noise = |moon: Option<MoonSky>| {
        event_noise(
            &ph,
            300.0,
            (15.5, Some(5.0)),
            &EventSky {
                airmass: 1.3,
                target_alt_deg: 50.0,
                moon,
            },
            (7200.0, 3600.0),
        )
        .unwrap()
    };
    let dark = noise(None);
    let full = noise(Some(MoonSky {
        illum: 1.0,
        sep_deg: 40.0,
        alt_deg: 50.0,
    }));
    let crescent = noise(Some(MoonSky {
        illum: 0.1,
        sep_deg: 40.0,
        alt_deg: 50.0,
    }));
    let set = noise(Some(MoonSky {
        illum: 1.0,
        sep_deg: 40.0,
        alt_deg: -5.0,
    }));
    assert!(full.noise_per_exposure_ppt > crescent.noise_per_exposure_ppt);
    assert!(crescent.noise_per_exposure_ppt > dark.noise_per_exposure_ppt);
    assert_eq!(set, dark, "a Moon below the horizon adds nothing");
    assert!(full.snr.unwrap() < dark.snr.unwrap());
}
