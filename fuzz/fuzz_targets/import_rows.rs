//! The import's row checks never panic on arbitrary field text, and every row is either kept or
//! counted under exactly one reason.
#![no_main]
use libfuzzer_sys::fuzz_target;
use stance_core::stance::ClassMap;
use stance_import::checks::{Checker, Location, RawRecord, Rules};

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let rules = Rules {
        classes: ClassMap::default(),
        geographic: true,
        uses_time: true,
        time_format: stance_import::times::TimeFormat::Iso,
        quality_order: Some(vec!["exact".into(), "street".into(), "town".into()]),
        min_quality_index: Some(1),
        drop_duplicates: true,
        max_per_author: Some(2),
    };
    let mut checker = Checker::new(rules);
    let mut rows = 0u64;
    for line in text.lines() {
        let f: Vec<&str> = line.split('\u{1f}').collect();
        let get = |i: usize| f.get(i).copied();
        let location = match (get(0).map(str::parse::<f64>), get(1).map(str::parse::<f64>)) {
            (Some(Ok(x)), Some(Ok(y))) => Location::Point(x, y),
            _ => Location::Missing(line.to_owned()),
        };
        let raw = RawRecord { location, stance: get(2), time: get(3), author: get(4), text: get(5), quality: get(6) };
        let _ = checker.check(&raw);
        rows += 1;
    }
    let counted: u64 = checker.dropped.values().sum::<u64>() + checker.kept.values().sum::<u64>();
    assert_eq!(counted, rows);
});
