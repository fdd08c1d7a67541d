//! Stance classes and the mapping of a field's labels onto them (DESIGN.md, data conventions).

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

#[cfg(test)]
mod tests {
    use super::*;

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
