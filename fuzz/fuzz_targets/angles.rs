//! Fuzz the right ascension and declination parsers: results, when accepted, are in range.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    if let Ok(ra) = dipwatch::inputs::angles::parse_ra_deg(&text) {
        assert!((0.0..360.0).contains(&ra), "{text:?} -> {ra}");
    }
    if let Ok(dec) = dipwatch::inputs::angles::parse_dec_deg(&text) {
        assert!((-90.0..=90.0).contains(&dec), "{text:?} -> {dec}");
    }
});
