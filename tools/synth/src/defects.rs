//! Deliberate defects in the CSV export, so the import example shows its checks at work: the
//! kinds of damage real exports carry (swapped or missing coordinates, label typos, times in a
//! local format, blank times).

/// One kind of damage done to a CSV row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Defect {
    /// Longitude and latitude cells left empty.
    MissingCoordinates,
    /// Longitude and latitude swapped (the latitude then falls outside −90..90).
    SwappedCoordinates,
    /// A stance label with a typo or a placeholder.
    LabelTypo,
    /// The time written month/day/year with a 12-hour clock.
    LocalTimeFormat,
    /// No time.
    BlankTime,
}

const KINDS: [Defect; 5] = [
    Defect::MissingCoordinates,
    Defect::SwappedCoordinates,
    Defect::LabelTypo,
    Defect::LocalTimeFormat,
    Defect::BlankTime,
];

/// Labels a careless export might hold.
pub const TYPOS: [&str; 4] = ["suport", "Opose", "n/a", "undecided?"];

/// SplitMix64 (Steele, Lea & Flood 2014): a fixed, fast mix so defects depend only on the row
/// and the seed.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The defect of row `index` (0-based) for `seed`, if any; about `share` of rows get one.
pub fn defect_for(index: usize, seed: u64, share: f64) -> Option<(Defect, u64)> {
    let draw = mix(mix(seed) ^ index as u64);
    let uniform = (draw >> 11) as f64 / (1u64 << 53) as f64;
    if uniform >= share {
        return None;
    }
    let detail = mix(draw);
    Some((KINDS[(detail % KINDS.len() as u64) as usize], detail >> 8))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn share_and_kinds_are_as_asked_and_deterministic() {
        let n = 200_000;
        let hits: Vec<Defect> = (0..n)
            .filter_map(|i| defect_for(i, 5, 0.01))
            .map(|(d, _)| d)
            .collect();
        // Binomial(200000, 0.01): sd ≈ 44.5, so ±250 is more than 5 sd.
        assert!((hits.len() as i64 - 2000).abs() < 250, "{}", hits.len());
        for kind in KINDS {
            assert!(
                hits.iter().filter(|d| **d == kind).count() > 250,
                "{kind:?} too rare"
            );
        }
        assert_eq!(defect_for(17, 5, 0.5), defect_for(17, 5, 0.5));
        assert!((0..n).all(|i| defect_for(i, 5, 0.0).is_none()));
    }
}
