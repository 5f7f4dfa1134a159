//! Fuzz the sites TOML parser: any bytes give sites or a clean error; accepted sites satisfy the ranges.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    if let Ok(sites) = dipwatch::inputs::sites::parse_sites("fuzz.toml", &text) {
        for s in sites {
            assert!((-90.0..=90.0).contains(&s.lat_deg) && (-180.0..=180.0).contains(&s.lon_deg));
            assert!(!s.telescopes.is_empty());
            for az in [0.0, 123.4, 359.9] {
                assert!(s.horizon.min_alt_deg(az).is_finite());
            }
        }
    }
});
