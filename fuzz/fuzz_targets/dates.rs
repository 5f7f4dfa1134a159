//! Fuzz the date path: text -> a "night of" date (as the command line parses it) -> the night's start (local mean
//! solar noon) at several longitudes and zones -> back to the "night of" date, which must round-trip for every
//! date dipwatch accepts (1972-2200).
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    let Ok(date) = text.trim().parse::<chrono::NaiveDate>() else { return };
    let lo = chrono::NaiveDate::from_ymd_opt(1972, 1, 1).unwrap();
    let hi = chrono::NaiveDate::from_ymd_opt(2200, 1, 1).unwrap();
    if date < lo || date > hi {
        return;
    }
    for zone in ["Europe/London", "America/Santiago", "Pacific/Chatham", "Asia/Kathmandu", "Etc/GMT+12"] {
        let tz: chrono_tz::Tz = zone.parse().unwrap();
        for lon in [-179.5, -70.4, 0.0, 87.6, 179.9] {
            let start = dipwatch::astro::civil::night_start_jd(date, lon, tz);
            assert_eq!(dipwatch::astro::civil::night_of(start + 0.25, lon, tz), date, "{zone} {lon} {date}");
        }
        let noon = dipwatch::astro::civil::local_noon_jd(date, tz);
        let mut s = Vec::new();
        dipwatch::astro::civil::push_rfc3339_utc(noon, &mut s);
        assert_eq!(s, dipwatch::astro::civil::rfc3339_utc(noon).as_bytes());
    }
});
