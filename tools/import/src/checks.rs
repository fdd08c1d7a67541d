//! Row checks of the import: each record is kept or dropped for one named reason.

use std::collections::{BTreeMap, HashMap, HashSet};
use std::hash::{Hash, Hasher};

use stance_core::stance::{ClassMap, Stance};

use crate::times::{TimeFormat, TimeProblem};

/// Why a record was dropped. Checked in this order; a record counts under the first that applies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Reason {
    /// A line that is not a record (JSON lines: not a JSON object).
    MalformedRecord,
    /// No coordinates, or coordinates that are not numbers.
    MissingCoordinates,
    /// Longitude outside −180..180 or latitude outside −90..90 (geographic input), or non-finite.
    CoordinatesOutOfRange,
    /// An empty geometry.
    EmptyGeometry,
    /// A geometry that is not a point.
    NotAPoint,
    /// A stance label the class mapping does not know (or none).
    UnknownStance,
    /// No time in the time field.
    MissingTime,
    /// A numeric date whose day and month could be either way round (`03/04/2026`), without
    /// `--time-format`.
    AmbiguousDayMonth,
    /// A time that is not an RFC 3339 / ISO 8601 date or date-time.
    UnparseableTime,
    /// A geocoding-quality level not in `--quality-order`.
    UnknownQuality,
    /// A geocoding quality below `--min-quality`.
    QualityBelowMinimum,
    /// Same author and same text as an earlier record.
    Duplicate,
    /// Beyond the first `--max-per-author` records of its author.
    OverAuthorCap,
}

impl Reason {
    /// Every reason, in checking order.
    pub const ALL: [Reason; 13] = [
        Reason::MalformedRecord,
        Reason::MissingCoordinates,
        Reason::CoordinatesOutOfRange,
        Reason::EmptyGeometry,
        Reason::NotAPoint,
        Reason::UnknownStance,
        Reason::MissingTime,
        Reason::AmbiguousDayMonth,
        Reason::UnparseableTime,
        Reason::UnknownQuality,
        Reason::QualityBelowMinimum,
        Reason::Duplicate,
        Reason::OverAuthorCap,
    ];

    /// The snake_case name used in the summary and the rejects layer.
    pub fn name(self) -> &'static str {
        match self {
            Reason::MalformedRecord => "malformed_record",
            Reason::MissingCoordinates => "missing_coordinates",
            Reason::CoordinatesOutOfRange => "coordinates_out_of_range",
            Reason::EmptyGeometry => "empty_geometry",
            Reason::NotAPoint => "not_a_point",
            Reason::UnknownStance => "unknown_stance",
            Reason::MissingTime => "missing_time",
            Reason::AmbiguousDayMonth => "ambiguous_day_month",
            Reason::UnparseableTime => "unparseable_time",
            Reason::UnknownQuality => "unknown_quality",
            Reason::QualityBelowMinimum => "quality_below_minimum",
            Reason::Duplicate => "duplicate",
            Reason::OverAuthorCap => "over_author_cap",
        }
    }
}

/// The location of a raw record as the source gave it.
#[derive(Debug, Clone, PartialEq)]
pub enum Location {
    /// Coordinates in the source CRS.
    Point(f64, f64),
    /// Nothing usable (absent or unparseable), with the raw text.
    Missing(String),
    /// An empty geometry.
    Empty,
    /// Another geometry type, by name.
    NotPoint(String),
    /// The line could not be read as a record at all.
    Malformed,
}

/// One record before checking.
#[derive(Debug, Clone, PartialEq)]
pub struct RawRecord<'a> {
    /// Location.
    pub location: Location,
    /// Stance label (None when the field is NULL).
    pub stance: Option<&'a str>,
    /// Time text, when a time field is used.
    pub time: Option<&'a str>,
    /// Author id, when an author field is used.
    pub author: Option<&'a str>,
    /// Text, when a text field is used.
    pub text: Option<&'a str>,
    /// Geocoding quality, when a quality field is used.
    pub quality: Option<&'a str>,
}

/// A record that passed every check.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CleanRecord {
    /// x (longitude or easting in the source CRS).
    pub x: f64,
    /// y (latitude or northing).
    pub y: f64,
    /// Stance class.
    pub stance: Stance,
    /// UTC seconds, when a time field is used.
    pub time_utc_s: Option<i64>,
    /// Index of the quality level in the order, when a quality field is used.
    pub quality_level: Option<usize>,
}

/// The checking rules, validated once from the parameters.
#[derive(Debug, Clone)]
pub struct Rules {
    /// Stance class mapping.
    pub classes: ClassMap,
    /// Whether coordinates are longitude/latitude (range-checked).
    pub geographic: bool,
    /// Whether a time field is used.
    pub uses_time: bool,
    /// How its times are written.
    pub time_format: TimeFormat,
    /// Quality levels from best to worst (lower-cased), when a quality field is used.
    pub quality_order: Option<Vec<String>>,
    /// Index of the worst level still kept.
    pub min_quality_index: Option<usize>,
    /// Whether author+text duplicates are dropped (both fields given).
    pub drop_duplicates: bool,
    /// At most this many records per author (author field required).
    pub max_per_author: Option<usize>,
}

/// Stateful checker: duplicates and author caps depend on the records seen before.
#[derive(Debug)]
pub struct Checker {
    rules: Rules,
    seen: HashSet<u128>,
    per_author: HashMap<String, usize>,
    /// Dropped records per reason.
    pub dropped: BTreeMap<Reason, u64>,
    /// Unknown stance labels with their counts.
    pub unknown_labels: BTreeMap<String, u64>,
    /// One example per form of unparseable time (form: digits → 9, letters → a).
    pub time_examples: BTreeMap<String, String>,
    /// Unknown quality levels with their counts.
    pub unknown_quality: BTreeMap<String, u64>,
    /// Records per stance class kept.
    pub kept: BTreeMap<Stance, u64>,
    /// Time values parsed successfully (kept or not).
    pub times_parsed: u64,
    /// Stance labels recognised (kept or not).
    pub stances_recognised: u64,
    /// The first day/month-ambiguous time seen.
    pub ambiguous_example: Option<String>,
    /// What the coordinates look like, for the whole-input warnings.
    pub coordinates: CoordinateTally,
}

/// Counts of coordinate pairs that hint at a misread input as a whole.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct CoordinateTally {
    /// Rows with a numeric coordinate pair.
    pub points: u64,
    /// Of those, pairs outside the longitude/latitude range.
    pub out_of_range: u64,
    /// Of those, pairs inside the range once swapped.
    pub in_range_swapped: u64,
    /// Pairs at exactly (0, 0).
    pub at_origin: u64,
}

impl CoordinateTally {
    fn add(&mut self, x: f64, y: f64, geographic: bool) {
        self.points += 1;
        if x == 0.0 && y == 0.0 {
            self.at_origin += 1;
        }
        let in_range = |lon: f64, lat: f64| lon.abs() <= 180.0 && lat.abs() <= 90.0;
        if geographic && x.is_finite() && y.is_finite() && !in_range(x, y) {
            self.out_of_range += 1;
            if in_range(y, x) {
                self.in_range_swapped += 1;
            }
        }
    }

    /// Whether most pairs are out of range as (longitude, latitude) but in range swapped.
    pub fn looks_swapped(&self) -> bool {
        self.in_range_swapped > 0 && self.in_range_swapped * 2 > self.points
    }

    /// Whether every pair is (0, 0).
    pub fn all_at_origin(&self) -> bool {
        self.points > 0 && self.at_origin == self.points
    }
}

/// Key of (author, text) for exact-duplicate detection: two independent SipHash digests, so a
/// false match needs a 128-bit collision.
fn duplicate_key(author: &str, text: &str) -> u128 {
    let digest = |salt: u8| {
        let mut hasher = std::hash::DefaultHasher::new();
        salt.hash(&mut hasher);
        author.hash(&mut hasher);
        text.hash(&mut hasher);
        hasher.finish()
    };
    (u128::from(digest(1)) << 64) | u128::from(digest(2))
}

/// The "form" of a text: digits → 9, letters → a, other characters kept (at most 40).
pub fn text_form(text: &str) -> String {
    text.chars()
        .take(40)
        .map(|c| {
            if c.is_ascii_digit() {
                '9'
            } else if c.is_alphabetic() {
                'a'
            } else {
                c
            }
        })
        .collect()
}

impl Checker {
    /// What the checker keeps per row so far: distinct duplicate keys and distinct authors
    /// counted (for the memory estimate).
    pub fn keys_held(&self) -> (usize, usize) {
        (self.seen.len(), self.per_author.len())
    }

    /// A checker with no records seen.
    pub fn new(rules: Rules) -> Self {
        Checker {
            rules,
            seen: HashSet::new(),
            per_author: HashMap::new(),
            dropped: BTreeMap::new(),
            unknown_labels: BTreeMap::new(),
            time_examples: BTreeMap::new(),
            unknown_quality: BTreeMap::new(),
            kept: BTreeMap::new(),
            times_parsed: 0,
            stances_recognised: 0,
            ambiguous_example: None,
            coordinates: CoordinateTally::default(),
        }
    }

    /// Checks one record: the clean record, or the reason it is dropped (also counted).
    pub fn check(&mut self, raw: &RawRecord<'_>) -> Result<CleanRecord, Reason> {
        let result = self.classify(raw);
        match &result {
            Ok(clean) => *self.kept.entry(clean.stance).or_default() += 1,
            Err(reason) => *self.dropped.entry(*reason).or_default() += 1,
        }
        result
    }

    fn classify(&mut self, raw: &RawRecord<'_>) -> Result<CleanRecord, Reason> {
        // Field-level parses are done first so the whole-input checks see every row.
        let stance = raw.stance.and_then(|s| self.rules.classes.classify(s));
        if stance.is_some() {
            self.stances_recognised += 1;
        }
        if raw.location == Location::Malformed {
            return Err(Reason::MalformedRecord);
        }
        let time = if self.rules.uses_time {
            self.read_time(raw.time)
        } else {
            Ok(None)
        };

        let (x, y) = match &raw.location {
            Location::Missing(_) => return Err(Reason::MissingCoordinates),
            Location::Empty => return Err(Reason::EmptyGeometry),
            Location::NotPoint(_) => return Err(Reason::NotAPoint),
            Location::Malformed => return Err(Reason::MalformedRecord),
            Location::Point(x, y) => (*x, *y),
        };
        self.coordinates.add(x, y, self.rules.geographic);
        if !x.is_finite()
            || !y.is_finite()
            || (self.rules.geographic && (x.abs() > 180.0 || y.abs() > 90.0))
        {
            return Err(Reason::CoordinatesOutOfRange);
        }
        let Some(stance) = stance else {
            let label = raw
                .stance
                .map(|s| s.trim().chars().take(60).collect::<String>())
                .unwrap_or_else(|| "(null)".into());
            let label = if label.is_empty() {
                "(empty)".to_owned()
            } else {
                label
            };
            *self.unknown_labels.entry(label).or_default() += 1;
            return Err(Reason::UnknownStance);
        };
        let time_utc_s = time?;
        let quality_level = match &self.rules.quality_order {
            None => None,
            Some(order) => {
                let level = raw
                    .quality
                    .map(|q| q.trim().to_lowercase())
                    .unwrap_or_default();
                match order.iter().position(|l| *l == level) {
                    None => {
                        let shown = if level.is_empty() {
                            "(empty)".to_owned()
                        } else {
                            level
                        };
                        *self.unknown_quality.entry(shown).or_default() += 1;
                        return Err(Reason::UnknownQuality);
                    }
                    Some(index) if self.rules.min_quality_index.is_some_and(|m| index > m) => {
                        return Err(Reason::QualityBelowMinimum)
                    }
                    Some(index) => Some(index),
                }
            }
        };
        if self.rules.drop_duplicates {
            if let (Some(author), Some(text)) = (raw.author, raw.text) {
                if !self.seen.insert(duplicate_key(author, text)) {
                    return Err(Reason::Duplicate);
                }
            }
        }
        if let (Some(cap), Some(author)) = (self.rules.max_per_author, raw.author) {
            let count = self.per_author.entry(author.to_owned()).or_default();
            if *count >= cap {
                return Err(Reason::OverAuthorCap);
            }
            *count += 1;
        }
        Ok(CleanRecord {
            x,
            y,
            stance,
            time_utc_s,
            quality_level,
        })
    }
}

impl Checker {
    /// Reads a time text, keeping one example per form of the texts not read.
    fn read_time(&mut self, time: Option<&str>) -> Result<Option<i64>, Reason> {
        let Some(t) = time.map(str::trim).filter(|t| !t.is_empty()) else {
            return Err(Reason::MissingTime);
        };
        match self.rules.time_format.read(t) {
            Ok(s) => {
                self.times_parsed += 1;
                Ok(Some(s))
            }
            Err(problem) => {
                let form = text_form(t);
                if self.time_examples.len() < 20 || self.time_examples.contains_key(&form) {
                    self.time_examples
                        .entry(form)
                        .or_insert_with(|| t.chars().take(60).collect());
                }
                if problem == TimeProblem::AmbiguousDayMonth {
                    self.ambiguous_example
                        .get_or_insert_with(|| t.chars().take(60).collect());
                    return Err(Reason::AmbiguousDayMonth);
                }
                Err(Reason::UnparseableTime)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rules() -> Rules {
        Rules {
            classes: ClassMap::default(),
            geographic: true,
            uses_time: true,
            time_format: TimeFormat::Iso,
            quality_order: Some(vec![
                "exact".into(),
                "street".into(),
                "town".into(),
                "district".into(),
            ]),
            min_quality_index: Some(2),
            drop_duplicates: true,
            max_per_author: Some(2),
        }
    }

    fn good<'a>() -> RawRecord<'a> {
        RawRecord {
            location: Location::Point(-140.2, 35.0),
            stance: Some("support"),
            time: Some("2026-03-04T05:06:07Z"),
            author: Some("a1"),
            text: Some("hello"),
            quality: Some("street"),
        }
    }

    /// Each bad row is dropped under its own reason; nothing is dropped silently.
    #[test]
    fn matrix_of_bad_rows_counts_each_reason() {
        let mut checker = Checker::new(rules());
        let cases: Vec<(RawRecord<'_>, Option<Reason>)> = vec![
            (good(), None),
            (
                RawRecord {
                    location: Location::Missing(String::new()),
                    text: Some("t1"),
                    ..good()
                },
                Some(Reason::MissingCoordinates),
            ),
            (
                RawRecord {
                    location: Location::Missing("abc".into()),
                    text: Some("t2"),
                    ..good()
                },
                Some(Reason::MissingCoordinates),
            ),
            (
                RawRecord {
                    location: Location::Point(181.0, 0.0),
                    text: Some("t3"),
                    ..good()
                },
                Some(Reason::CoordinatesOutOfRange),
            ),
            (
                RawRecord {
                    location: Location::Point(0.0, -90.5),
                    text: Some("t4"),
                    ..good()
                },
                Some(Reason::CoordinatesOutOfRange),
            ),
            (
                RawRecord {
                    location: Location::Point(f64::NAN, 0.0),
                    text: Some("t5"),
                    ..good()
                },
                Some(Reason::CoordinatesOutOfRange),
            ),
            (
                RawRecord {
                    location: Location::Empty,
                    text: Some("t6"),
                    ..good()
                },
                Some(Reason::EmptyGeometry),
            ),
            (
                RawRecord {
                    location: Location::NotPoint("LINESTRING".into()),
                    text: Some("t7"),
                    ..good()
                },
                Some(Reason::NotAPoint),
            ),
            (
                RawRecord {
                    stance: Some("maybe"),
                    text: Some("t8"),
                    ..good()
                },
                Some(Reason::UnknownStance),
            ),
            (
                RawRecord {
                    stance: None,
                    text: Some("t9"),
                    ..good()
                },
                Some(Reason::UnknownStance),
            ),
            (
                RawRecord {
                    time: Some(""),
                    text: Some("t10"),
                    ..good()
                },
                Some(Reason::MissingTime),
            ),
            (
                RawRecord {
                    time: Some("03/04/2026"),
                    text: Some("t11"),
                    ..good()
                },
                Some(Reason::AmbiguousDayMonth),
            ),
            (
                RawRecord {
                    time: Some("13/04/2026"),
                    text: Some("t11b"),
                    ..good()
                },
                Some(Reason::UnparseableTime),
            ),
            (
                RawRecord {
                    location: Location::Malformed,
                    text: Some("t11c"),
                    ..good()
                },
                Some(Reason::MalformedRecord),
            ),
            (
                RawRecord {
                    quality: Some("rooftop"),
                    text: Some("t12"),
                    ..good()
                },
                Some(Reason::UnknownQuality),
            ),
            (
                RawRecord {
                    quality: Some("district"),
                    text: Some("t13"),
                    ..good()
                },
                Some(Reason::QualityBelowMinimum),
            ),
            (good(), Some(Reason::Duplicate)),
            (
                RawRecord {
                    text: Some("second"),
                    ..good()
                },
                None,
            ),
            (
                RawRecord {
                    text: Some("third"),
                    ..good()
                },
                Some(Reason::OverAuthorCap),
            ),
            (
                RawRecord {
                    text: Some("third"),
                    author: Some("a2"),
                    quality: Some("TOWN"),
                    ..good()
                },
                None,
            ),
        ];
        for (i, (raw, expected)) in cases.iter().enumerate() {
            let got = checker.check(raw).err();
            assert_eq!(got, *expected, "case {i}: {raw:?}");
        }
        let dropped: u64 = checker.dropped.values().sum();
        let kept: u64 = checker.kept.values().sum();
        assert_eq!(dropped + kept, cases.len() as u64);
        assert_eq!(checker.dropped[&Reason::MissingCoordinates], 2);
        assert_eq!(checker.dropped[&Reason::CoordinatesOutOfRange], 3);
        assert_eq!(checker.dropped[&Reason::UnknownStance], 2);
        assert_eq!(checker.unknown_labels["maybe"], 1);
        assert_eq!(checker.unknown_labels["(null)"], 1);
        assert_eq!(checker.time_examples["99/99/9999"], "03/04/2026");
        assert_eq!(checker.unknown_quality["rooftop"], 1);
        assert_eq!(checker.ambiguous_example.as_deref(), Some("03/04/2026"));
        assert_eq!(kept, 3);
    }

    /// Swapped pairs (latitude first) and all-(0, 0) inputs are recognised as a whole.
    #[test]
    fn coordinate_tally_recognises_swapped_and_null_island() {
        let mut tally = CoordinateTally::default();
        // (35, -140) read as lon 35, lat -140: out of range, in range swapped.
        for _ in 0..3 {
            tally.add(35.0, -140.0, true);
        }
        tally.add(-140.0, 35.0, true);
        assert_eq!(tally.out_of_range, 3);
        assert_eq!(tally.in_range_swapped, 3);
        assert!(tally.looks_swapped());
        assert!(!tally.all_at_origin());
        let mut origin = CoordinateTally::default();
        origin.add(0.0, 0.0, true);
        origin.add(0.0, 0.0, true);
        assert!(origin.all_at_origin());
        assert!(!origin.looks_swapped());
        // Projected input is never range-checked.
        let mut projected = CoordinateTally::default();
        projected.add(512_000.0, 4_100_000.0, false);
        assert!(!projected.looks_swapped());
    }

    #[test]
    fn projected_coordinates_are_not_range_checked() {
        let mut checker = Checker::new(Rules {
            geographic: false,
            ..rules()
        });
        let raw = RawRecord {
            location: Location::Point(512_000.0, 4_100_000.0),
            ..good()
        };
        assert!(checker.check(&raw).is_ok());
    }

    #[test]
    fn text_form_masks_digits_and_letters() {
        assert_eq!(text_form("12 March 2026"), "99 aaaaa 9999");
    }
}
