//! Time parsing never panics, and whatever it accepts formats back to the same instant.
#![no_main]
use libfuzzer_sys::fuzz_target;
use stance_core::time::{format_utc, parse_utc_seconds};

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Some(seconds) = parse_utc_seconds(text) {
            let formatted = format_utc(seconds);
            if !formatted.is_empty() {
                assert_eq!(parse_utc_seconds(&formatted), Some(seconds), "{text:?} → {formatted}");
            }
        }
    }
});
