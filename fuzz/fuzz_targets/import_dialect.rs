//! Dialect detection never panics on arbitrary bytes: the delimiter guess (on any prefix, cut
//! anywhere), the decimal-comma test and coordinate parse, and the time forms (ISO, epoch,
//! patterns, day/month-ambiguous dates); a guessed delimiter is always one of the four.
#![no_main]
use libfuzzer_sys::fuzz_target;
use stance_import::dialect::{
    looks_like_decimal_comma, parse_coordinate, sniff_delimiter, DELIMITERS,
};
use stance_import::times::{ambiguous_day_month, TimeFormat};

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    for complete in [false, true] {
        if let Some(d) = sniff_delimiter(&text, complete) {
            assert!(DELIMITERS.contains(&d));
        }
    }
    for field in text.split([',', ';', '\t', '|', '\n']) {
        for decimal_comma in [false, true] {
            if let Ok(v) = parse_coordinate(field, decimal_comma) {
                assert!(!v.is_nan() || field.to_lowercase().contains("nan"));
            }
        }
        if looks_like_decimal_comma(field) {
            assert!(parse_coordinate(field, true).is_ok());
        }
        let _ = ambiguous_day_month(field);
        for format in [
            TimeFormat::Iso,
            TimeFormat::EpochSeconds,
            TimeFormat::EpochMillis,
        ] {
            let _ = format.read(field);
        }
        if let Ok(format) = TimeFormat::parse_option(field) {
            let _ = format.read(&text);
        }
    }
});
