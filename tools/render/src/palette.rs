//! Colour maps from the literature — Crameri's batlow and vik (Scientific colour maps 8.0,
//! Crameri 2018; Crameri, Shephard & Heron 2020), Okabe & Ito (2008) — and a LISA palette
//! checked under the deuteranopia simulation of Machado, Oliveira & Fernandes (2009).

/// An sRGB colour, 8 bits a channel.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rgb(pub u8, pub u8, pub u8);

impl Rgb {
    /// `#rrggbb`.
    pub fn hex(self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }
}

/// Anchors of *batlow* (sequential): the 256-entry table `batlow.txt` of Scientific colour
/// maps 8.0 (Crameri 2018, doi:10.5281/zenodo.1243862, as shipped in the PyPI package
/// `cmcrameri` 1.10) sampled at t = k/16, k = 0…16, rounded to 8 bits. Linear interpolation
/// between these anchors stays within 1.9/255 per channel of the full table.
const BATLOW: [Rgb; 17] = [
    Rgb(1, 25, 89),
    Rgb(13, 49, 93),
    Rgb(17, 67, 96),
    Rgb(22, 82, 98),
    Rgb(34, 96, 97),
    Rgb(53, 106, 89),
    Rgb(77, 115, 77),
    Rgb(102, 122, 63),
    Rgb(129, 130, 50),
    Rgb(160, 138, 43),
    Rgb(191, 144, 53),
    Rgb(219, 149, 76),
    Rgb(242, 157, 108),
    Rgb(252, 168, 145),
    Rgb(253, 180, 180),
    Rgb(252, 192, 214),
    Rgb(250, 204, 250),
];

/// Anchors of *vik* (diverging, light centre at t = 0.5): `vik.txt` of Scientific colour maps
/// 8.0 sampled the same way. Linear interpolation stays within 6.4/255 per channel of the full
/// table (the largest gap is at the bend next to the light centre).
const VIK: [Rgb; 17] = [
    Rgb(0, 18, 97),
    Rgb(2, 43, 113),
    Rgb(3, 68, 129),
    Rgb(12, 94, 146),
    Rgb(47, 124, 166),
    Rgb(96, 157, 188),
    Rgb(146, 189, 210),
    Rgb(197, 219, 229),
    Rgb(236, 229, 225),
    Rgb(233, 203, 185),
    Rgb(220, 171, 143),
    Rgb(207, 142, 104),
    Rgb(195, 114, 67),
    Rgb(179, 83, 31),
    Rgb(147, 46, 6),
    Rgb(116, 21, 6),
    Rgb(89, 0, 8),
];

/// Okabe & Ito (2008), *Color Universal Design*, without black (reserved for outlines):
/// orange, sky blue, bluish green, yellow, blue, vermillion, reddish purple.
pub const OKABE_ITO: [Rgb; 7] = [
    Rgb(230, 159, 0),
    Rgb(86, 180, 233),
    Rgb(0, 158, 115),
    Rgb(240, 228, 66),
    Rgb(0, 114, 178),
    Rgb(213, 94, 0),
    Rgb(204, 121, 167),
];

/// Colour of areas whose value is missing (NULL) in an area map.
pub const MISSING: Rgb = Rgb(255, 255, 255);

/// A continuous colour map.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ColourMap {
    /// Crameri's batlow: sequential, for intensities and rates.
    Batlow,
    /// Crameri's vik: diverging, for signed differences centred on zero.
    Vik,
}

impl ColourMap {
    fn anchors(self) -> &'static [Rgb] {
        match self {
            ColourMap::Batlow => &BATLOW,
            ColourMap::Vik => &VIK,
        }
    }

    /// The colour at `t` ∈ [0, 1] (clamped; NaN gives the low end): piecewise linear between
    /// the anchors, whose spacing (1/16) keeps it within the tolerance stated on each table.
    pub fn at(self, t: f64) -> Rgb {
        let anchors = self.anchors();
        let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
        let scaled = t * (anchors.len() - 1) as f64;
        let k = (scaled.floor() as usize).min(anchors.len() - 2);
        let f = scaled - k as f64;
        let (a, b) = (anchors[k], anchors[k + 1]);
        let mix = |x: u8, y: u8| (f64::from(x) + (f64::from(y) - f64::from(x)) * f).round() as u8;
        Rgb(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
    }
}

/// Cluster types of a local Moran map (Anselin 1995), in legend order.
pub const LISA_TYPES: [&str; 5] = [
    "high-high",
    "low-low",
    "high-low",
    "low-high",
    "not significant",
];

/// The toolbox's own LISA palette, same order as [`LISA_TYPES`]. Design: hue says what the
/// area itself is (warm = high, cool = low), lightness says whether its neighbours agree
/// (dark = cluster, light = outlier), and "not significant" is a light neutral grey. Warm
/// against cool lies on the blue–yellow axis that dichromats keep; the test below checks the
/// five colours stay apart under a simulated deuteranopia.
pub const LISA_COLOURS: [Rgb; 5] = [
    Rgb(0xa6, 0x3d, 0x00), // high-high: dark burnt orange
    Rgb(0x2d, 0x1e, 0x6b), // low-low: dark indigo
    Rgb(0xf5, 0xb8, 0x41), // high-low: light amber
    Rgb(0xa9, 0x9b, 0xe0), // low-high: light lavender
    Rgb(0xdc, 0xdc, 0xdc), // not significant: light grey
];

/// The LISA type a label names (`high-high`, `HH`, `high_high`, `not significant`, `ns`…),
/// as an index into [`LISA_TYPES`].
pub fn lisa_type(label: &str) -> Option<usize> {
    let key: String = label
        .chars()
        .filter(char::is_ascii_alphanumeric)
        .collect::<String>()
        .to_ascii_lowercase();
    match key.as_str() {
        "highhigh" | "hh" => Some(0),
        "lowlow" | "ll" => Some(1),
        "highlow" | "hl" => Some(2),
        "lowhigh" | "lh" => Some(3),
        "notsignificant" | "ns" | "nonsignificant" | "none" => Some(4),
        _ => None,
    }
}

/// sRGB channel (0–255) to linear light (IEC 61966-2-1).
fn linear(channel: u8) -> f64 {
    let c = f64::from(channel) / 255.0;
    if c <= 0.04045 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

/// Linear light to an sRGB channel, clamped to 0–255 (IEC 61966-2-1).
fn encode(v: f64) -> u8 {
    let v = v.clamp(0.0, 1.0);
    let c = if v <= 0.003_130_8 {
        12.92 * v
    } else {
        1.055 * v.powf(1.0 / 2.4) - 0.055
    };
    (c * 255.0).round() as u8
}

/// CIE 1976 L*a*b* of an sRGB colour (D65 white; CIE 15:2004).
pub fn lab(colour: Rgb) -> [f64; 3] {
    let (r, g, b) = (linear(colour.0), linear(colour.1), linear(colour.2));
    let x = 0.4124 * r + 0.3576 * g + 0.1805 * b;
    let y = 0.2126 * r + 0.7152 * g + 0.0722 * b;
    let z = 0.0193 * r + 0.1192 * g + 0.9505 * b;
    let delta: f64 = 6.0 / 29.0;
    let f = |t: f64| {
        if t > delta.powi(3) {
            t.cbrt()
        } else {
            t / (3.0 * delta * delta) + 4.0 / 29.0
        }
    };
    // The white point is this matrix's own white (D65), so sRGB white maps to L* = 100, a* = b* = 0.
    let (fx, fy, fz) = (f(x / 0.9505), f(y), f(z / 1.089));
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

/// CIE 1976 colour difference ΔE*ab between two sRGB colours.
pub fn delta_e(a: Rgb, b: Rgb) -> f64 {
    let (la, lb) = (lab(a), lab(b));
    ((la[0] - lb[0]).powi(2) + (la[1] - lb[1]).powi(2) + (la[2] - lb[2]).powi(2)).sqrt()
}

/// Deuteranopia as simulated by Machado, Oliveira & Fernandes (2009), severity 1.0: their
/// published matrix applied to linear RGB.
pub fn deuteranopia(colour: Rgb) -> Rgb {
    const M: [[f64; 3]; 3] = [
        [0.367_322, 0.860_646, -0.227_968],
        [0.280_085, 0.672_501, 0.047_413],
        [-0.011_820, 0.042_940, 0.968_881],
    ];
    let l = [linear(colour.0), linear(colour.1), linear(colour.2)];
    let row = |i: usize| M[i][0] * l[0] + M[i][1] * l[1] + M[i][2] * l[2];
    Rgb(encode(row(0)), encode(row(1)), encode(row(2)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn maps_hit_their_anchors_and_interpolate_between() {
        assert_eq!(ColourMap::Batlow.at(0.0), Rgb(1, 25, 89));
        assert_eq!(ColourMap::Batlow.at(1.0), Rgb(250, 204, 250));
        assert_eq!(ColourMap::Vik.at(0.5), Rgb(236, 229, 225));
        // Halfway between anchors 0 and 1 of batlow: (1+13)/2, (25+49)/2, (89+93)/2.
        assert_eq!(ColourMap::Batlow.at(1.0 / 32.0), Rgb(7, 37, 91));
        assert_eq!(ColourMap::Batlow.at(-3.0), ColourMap::Batlow.at(0.0));
        assert_eq!(ColourMap::Vik.at(7.0), Rgb(89, 0, 8));
        assert_eq!(ColourMap::Vik.at(f64::NAN), Rgb(0, 18, 97));
    }

    #[test]
    fn batlow_lightness_rises_monotonically() {
        // A sequential map must order by lightness (Crameri et al. 2020, fig. 1).
        let l: Vec<f64> = (0..=64)
            .map(|i| lab(ColourMap::Batlow.at(f64::from(i) / 64.0))[0])
            .collect();
        assert!(l.windows(2).all(|w| w[1] > w[0] - 0.5), "{l:?}");
    }

    #[test]
    fn vik_is_lightest_at_its_centre() {
        let centre = lab(ColourMap::Vik.at(0.5))[0];
        for i in 0..=16 {
            let t = f64::from(i) / 16.0;
            if i != 8 {
                assert!(lab(ColourMap::Vik.at(t))[0] < centre);
            }
        }
    }

    #[test]
    fn lab_of_white_black_and_srgb_red() {
        // White and black by definition; sRGB red L*=53.24, a*=80.09, b*=67.20 (CIE 15 with the
        // sRGB matrix; Lindbloom's calculator, recalled to 2 decimals; tolerance 0.1).
        let white = lab(Rgb(255, 255, 255));
        assert!((white[0] - 100.0).abs() < 1e-3 && white[1].abs() < 0.01 && white[2].abs() < 0.01);
        assert!(lab(Rgb(0, 0, 0))[0].abs() < 1e-9);
        let red = lab(Rgb(255, 0, 0));
        assert!((red[0] - 53.24).abs() < 0.1, "{red:?}");
        assert!((red[1] - 80.09).abs() < 0.1, "{red:?}");
        assert!((red[2] - 67.20).abs() < 0.1, "{red:?}");
    }

    #[test]
    fn deuteranopia_keeps_greys_and_merges_red_and_green() {
        // Each matrix row sums to 1, so greys are fixed points.
        assert_eq!(deuteranopia(Rgb(128, 128, 128)), Rgb(128, 128, 128));
        // The classic confusion pair: a red and a green of similar lightness become close.
        let (red, green) = (Rgb(200, 80, 60), Rgb(110, 130, 50));
        let before = delta_e(red, green);
        let after = delta_e(deuteranopia(red), deuteranopia(green));
        assert!(after < before / 2.0, "{before} → {after}");
    }

    #[test]
    fn lisa_colours_stay_distinguishable_under_deuteranopia() {
        // Threshold: ΔE*ab ≥ 30 for every pair, in normal vision and after the simulation.
        // ΔE ≈ 2.3 is one just-noticeable difference (Sharma 2003); 30 keeps the five classes
        // apart at a glance on small areas, not merely side by side.
        for (i, a) in LISA_COLOURS.iter().enumerate() {
            for b in &LISA_COLOURS[i + 1..] {
                assert!(delta_e(*a, *b) >= 30.0, "{a:?} {b:?}");
                let (da, db) = (deuteranopia(*a), deuteranopia(*b));
                assert!(delta_e(da, db) >= 30.0, "{a:?} {b:?} → {da:?} {db:?}");
            }
        }
    }

    #[test]
    fn lisa_labels_are_recognised_in_several_spellings() {
        assert_eq!(lisa_type("High-High"), Some(0));
        assert_eq!(lisa_type("LL"), Some(1));
        assert_eq!(lisa_type("high_low"), Some(2));
        assert_eq!(lisa_type("low high"), Some(3));
        assert_eq!(lisa_type("Not significant"), Some(4));
        assert_eq!(lisa_type("ns"), Some(4));
        assert_eq!(lisa_type("medium"), None);
    }
}
