//! `--classes` parsing never panics; every label it accepts classifies to its class.
#![no_main]
use libfuzzer_sys::fuzz_target;
use stance_core::stance::ClassMap;

fuzz_target!(|data: &[u8]| {
    if let Ok(spec) = std::str::from_utf8(data) {
        if let Ok(map) = ClassMap::parse(spec) {
            for entry in spec.split(',').map(str::trim).filter(|e| !e.is_empty()) {
                if let Some((label, _)) = entry.rsplit_once('=') {
                    assert!(map.classify(label).is_some(), "{spec:?}: label {label:?} lost");
                }
            }
        }
    }
});
