//! Stance classes and the mapping of a field's labels onto them.

use std::fmt;

/// A stance toward the topic, ordered oppose < neutral < support.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Stance {
    /// Against the topic (−1).
    Oppose,
    /// Neither (0).
    Neutral,
    /// For the topic (+1).
    Support,
}

impl Stance {
    /// All classes in order.
    pub const ALL: [Stance; 3] = [Stance::Oppose, Stance::Neutral, Stance::Support];

    /// The canonical label: `oppose`, `neutral`, `support`.
    pub fn label(self) -> &'static str {
        match self {
            Stance::Oppose => "oppose",
            Stance::Neutral => "neutral",
            Stance::Support => "support",
        }
    }

    /// The ordinal value −1, 0, 1.
    pub fn value(self) -> i8 {
        match self {
            Stance::Oppose => -1,
            Stance::Neutral => 0,
            Stance::Support => 1,
        }
    }

    /// The class of a canonical label or value (`oppose`/`-1`, `neutral`/`0`, `support`/`1`/`+1`),
    /// case-insensitive.
    pub fn from_canonical(text: &str) -> Option<Stance> {
        match text.trim().to_ascii_lowercase().as_str() {
            "oppose" | "-1" => Some(Stance::Oppose),
            "neutral" | "0" => Some(Stance::Neutral),
            "support" | "1" | "+1" => Some(Stance::Support),
            _ => None,
        }
    }
}

impl fmt::Display for Stance {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.label())
    }
}

/// Maps a field's labels to stance classes: the canonical labels by default, or the user's
/// `--classes "label=class,…"` (labels compared case-insensitively, trimmed).
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct ClassMap {
    custom: Option<Vec<(String, Stance)>>,
}

impl ClassMap {
    /// Parses `--classes`, e.g. `"against=oppose, meh=neutral, pro=support"` or `"N=-1,U=0,Y=1"`.
    ///
    /// # Errors
    /// A message naming the malformed entry, an unknown class, or a label given twice.
    pub fn parse(spec: &str) -> Result<Self, String> {
        let mut entries: Vec<(String, Stance)> = Vec::new();
        for entry in spec.split(',').map(str::trim).filter(|e| !e.is_empty()) {
            let (label, class) = entry
                .rsplit_once('=')
                .ok_or_else(|| format!("entry '{entry}' is not label=class (class: oppose, neutral, support or -1, 0, 1)"))?;
            let label = label.trim().to_lowercase();
            if label.is_empty() {
                return Err(format!("entry '{entry}' has an empty label"));
            }
            let class = Stance::from_canonical(class).ok_or_else(|| {
                format!(
                    "entry '{entry}': class '{}' is not oppose, neutral, support, -1, 0 or 1",
                    class.trim()
                )
            })?;
            if entries.iter().any(|(l, _)| *l == label) {
                return Err(format!("label '{label}' is given twice"));
            }
            entries.push((label, class));
        }
        if entries.is_empty() {
            return Err("no label=class entries".into());
        }
        Ok(ClassMap {
            custom: Some(entries),
        })
    }

    /// The class of `label`, or `None` for an unknown label.
    pub fn classify(&self, label: &str) -> Option<Stance> {
        match &self.custom {
            None => Stance::from_canonical(label),
            Some(entries) => {
                let wanted = label.trim().to_lowercase();
                entries.iter().find(|(l, _)| *l == wanted).map(|(_, c)| *c)
            }
        }
    }

    /// A description for messages: which labels are recognised.
    pub fn describe(&self) -> String {
        match &self.custom {
            None => "oppose/neutral/support or -1/0/1 (case-insensitive)".into(),
            Some(entries) => entries
                .iter()
                .map(|(l, c)| format!("{l}={c}"))
                .collect::<Vec<_>>()
                .join(", "),
        }
    }
}

/// How a missing (NULL) label is shown in messages, in every tool.
pub const MISSING_LABEL: &str = "(missing)";

/// `--classes` as given: the user's mapping, or the default recognition when absent.
///
/// # Errors
/// [`crate::Error::Argument`] on `--classes` naming the malformed entry.
pub fn class_map_option(spec: Option<&str>) -> crate::Result<ClassMap> {
    match spec {
        Some(spec) => ClassMap::parse(spec).map_err(|m| crate::Error::argument("--classes", m)),
        None => Ok(ClassMap::default()),
    }
}

/// One stance class named in option `option` (`oppose`, `neutral`, `support` or −1/0/1).
///
/// # Errors
/// [`crate::Error::Argument`] naming the option and the value.
pub fn parse_class(option: &str, text: &str) -> crate::Result<Stance> {
    Stance::from_canonical(text).ok_or_else(|| {
        crate::Error::argument(
            option,
            format!(
                "'{}' is not a stance class; expected oppose, neutral or support",
                text.trim()
            ),
        )
    })
}

/// A comma-separated list of classes, or `all`, sorted and without repeats.
///
/// # Errors
/// [`crate::Error::Argument`] for an unknown class or an empty list.
pub fn parse_class_list(option: &str, text: &str) -> crate::Result<Vec<Stance>> {
    if text.trim().eq_ignore_ascii_case("all") {
        return Ok(Stance::ALL.to_vec());
    }
    let mut classes = text
        .split(',')
        .map(str::trim)
        .filter(|c| !c.is_empty())
        .map(|c| parse_class(option, c))
        .collect::<crate::Result<Vec<_>>>()?;
    classes.sort();
    classes.dedup();
    if classes.is_empty() {
        return Err(crate::Error::argument(
            option,
            "is empty; expected classes such as oppose,support or all",
        ));
    }
    Ok(classes)
}

/// Classifies a dictionary-encoded label column: the class of every distinct value (by code).
/// Labels the map does not know, and missing labels, are counted and reported together.
///
/// # Errors
/// The message for the stance field: the unknown values with their counts (at most ten, most
/// frequent first) and what is recognised.
pub fn classify_codes(
    map: &ClassMap,
    values: &[String],
    codes: &[u32],
) -> std::result::Result<Vec<Stance>, String> {
    let class_of: Vec<Option<Stance>> = values.iter().map(|v| map.classify(v)).collect();
    let mut unknown: std::collections::BTreeMap<&str, u64> = std::collections::BTreeMap::new();
    for code in codes {
        if class_of.get(*code as usize).copied().flatten().is_none() {
            let label = values
                .get(*code as usize)
                .map_or(MISSING_LABEL, String::as_str);
            *unknown.entry(label).or_default() += 1;
        }
    }
    if unknown.is_empty() {
        return Ok(class_of
            .into_iter()
            .map(|c| c.unwrap_or(Stance::Neutral))
            .collect());
    }
    let mut found: Vec<(&str, u64)> = unknown.into_iter().collect();
    found.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
    let listed: Vec<String> = found
        .iter()
        .take(10)
        .map(|(l, c)| format!("'{l}' ×{c}"))
        .collect();
    let more = if found.len() > 10 {
        format!(" and {} more", found.len() - 10)
    } else {
        String::new()
    };
    Err(format!(
        "unknown stance values {}{more}; expected {}; map them with --classes",
        listed.join(", "),
        map.describe()
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_column_is_classified_once_per_distinct_value() {
        let values = vec!["Support".to_string(), "-1".to_string(), "0".to_string()];
        let classes = classify_codes(&ClassMap::default(), &values, &[0, 1, 1, 2]).expect("known");
        assert_eq!(
            classes,
            vec![Stance::Support, Stance::Oppose, Stance::Neutral]
        );
    }

    #[test]
    fn unknown_and_missing_labels_are_listed_with_counts_most_frequent_first() {
        let values = vec!["pro".to_string(), "maybe".to_string(), "oppose".to_string()];
        let codes = [0, 1, 1, 2, u32::MAX, 1];
        let message = classify_codes(&ClassMap::default(), &values, &codes).expect_err("unknown");
        assert!(
            message.starts_with("unknown stance values 'maybe' ×3, '(missing)' ×1, 'pro' ×1;"),
            "{message}"
        );
        assert!(message.contains("map them with --classes"));
    }

    #[test]
    fn class_lists_accept_all_and_refuse_unknown_classes() {
        assert_eq!(
            parse_class_list("--at-risk-classes", " all ").expect("all"),
            Stance::ALL.to_vec()
        );
        assert_eq!(
            parse_class_list("--x", "support, oppose,support").expect("two"),
            vec![Stance::Oppose, Stance::Support]
        );
        let e = parse_class_list("--x", "oppose,maybe").expect_err("unknown");
        assert!(
            e.to_string().contains("'maybe' is not a stance class"),
            "{e}"
        );
        assert!(parse_class_list("--x", " , ").is_err());
        assert!(class_map_option(Some("pro")).is_err());
        assert_eq!(
            class_map_option(None).expect("default"),
            ClassMap::default()
        );
    }

    #[test]
    fn default_recognition_is_case_insensitive() {
        let map = ClassMap::default();
        assert_eq!(map.classify("Support"), Some(Stance::Support));
        assert_eq!(map.classify(" OPPOSE "), Some(Stance::Oppose));
        assert_eq!(map.classify("-1"), Some(Stance::Oppose));
        assert_eq!(map.classify("0"), Some(Stance::Neutral));
        assert_eq!(map.classify("+1"), Some(Stance::Support));
        assert_eq!(map.classify("maybe"), None);
        assert_eq!(map.classify(""), None);
    }

    #[test]
    fn custom_mapping_replaces_the_default() {
        let map = ClassMap::parse("against=oppose, Meh=0 ,pro=+1").expect("valid mapping");
        assert_eq!(map.classify("AGAINST"), Some(Stance::Oppose));
        assert_eq!(map.classify("meh"), Some(Stance::Neutral));
        assert_eq!(map.classify("pro"), Some(Stance::Support));
        assert_eq!(map.classify("support"), None);
    }

    #[test]
    fn malformed_mappings_are_refused() {
        assert!(ClassMap::parse("").is_err());
        assert!(ClassMap::parse("pro").is_err());
        assert!(ClassMap::parse("pro=yes").is_err());
        assert!(ClassMap::parse("=1").is_err());
        assert!(ClassMap::parse("a=1,A=0").is_err());
        assert!(Stance::Oppose < Stance::Neutral && Stance::Neutral < Stance::Support);
    }
}
