//! Fuzz the targets and observed-times CSV parsers: any bytes must give targets or a clean error, never a
//! panic; accepted targets must satisfy the documented ranges.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    let map = dipwatch::inputs::targets::ColumnMap::default();
    if let Ok(ts) = dipwatch::inputs::targets::parse_targets("fuzz.csv", &text, &map) {
        for t in ts {
            assert!((0.0..360.0).contains(&t.ra_deg) && (-90.0..=90.0).contains(&t.dec_deg));
            assert!(t.ephemeris.period_days > 0.0 && t.t14_hours > 0.0 && t.t14_hours / 24.0 < t.ephemeris.period_days);
            assert!(t.ephemeris.t0_sigma_days >= 0.0 && t.ephemeris.period_sigma_days >= 0.0);
        }
    }
    let _ = dipwatch::inputs::observed::parse_observed("fuzz.csv", &text);
});
