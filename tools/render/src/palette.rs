//! Colour maps from the literature — Crameri's batlow and vik (Scientific colour maps 8.0,
//! Crameri 2018; Crameri, Shephard & Heron 2020), Okabe & Ito (2008) — and the toolbox's own
//! LISA palette and cluster-side line styles, checked under the dichromacy simulations of
//! Machado, Oliveira & Fernandes (2009).

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
/// area itself is (warm ochre–rust = high, cool teal–slate = low), lightness says whether its
/// neighbours agree (dark = cluster, light or mid = outlier), and "not significant" is a pale
/// warm sand that recedes without being a grey. The test below checks the five colours stay
/// apart in normal vision and under simulated deuteranopia, protanopia and tritanopia.
pub const LISA_COLOURS: [Rgb; 5] = [
    Rgb(0x99, 0x3d, 0x0b), // high-high: dark rust
    Rgb(0x0a, 0x33, 0x40), // low-low: deep slate teal
    Rgb(0xf0, 0xb0, 0x4a), // high-low: ochre
    Rgb(0x2e, 0x8f, 0x8c), // low-high: mid teal
    Rgb(0xe8, 0xe0, 0xcc), // not significant: pale sand
];

/// Trend classes of an area's share over periods, in legend order (the `trend` field).
pub const TREND_CLASSES: [&str; 4] = ["rising", "falling", "steady", "too few records"];

/// The toolbox's own trend palette, same order as [`TREND_CLASSES`]. Design: the two
/// directions are dark and of opposite temperature (rust = rising, deep blue = falling), a
/// steady share is a pale cream that recedes, and too few records is a plain mid grey — set
/// apart from white, which means "no value". The test below checks the four stay apart in
/// normal vision and under simulated deuteranopia, protanopia and tritanopia.
pub const TREND_COLOURS: [Rgb; 4] = [
    Rgb(0xb5, 0x39, 0x1b), // rising: rust
    Rgb(0x1d, 0x5c, 0x8f), // falling: deep blue
    Rgb(0xf2, 0xe2, 0xb6), // steady: pale cream
    Rgb(0x8c, 0x8c, 0x8c), // too few records: mid grey
];

/// Hot and cold spots of a Getis–Ord map, in legend order (the `hot_cold` field).
pub const HOT_COLD: [&str; 3] = ["hot", "cold", "not significant"];

/// The toolbox's own hot/cold palette, same order as [`HOT_COLD`]: the trend palette's rust and
/// deep blue for the two kinds of spot (warm = high values), the LISA palette's pale sand for
/// the rest.
pub const HOT_COLD_COLOURS: [Rgb; 3] = [TREND_COLOURS[0], TREND_COLOURS[1], LISA_COLOURS[4]];

/// The hot/cold class a label names (trimmed, any case), as an index into [`HOT_COLD`].
pub fn hot_cold(label: &str) -> Option<usize> {
    let key = label.trim().to_ascii_lowercase();
    HOT_COLD.iter().position(|c| *c == key)
}

/// Flags of a local join count map, in legend order (the `cluster` field of join counts).
pub const JOIN_FLAGS: [&str; 2] = ["cluster", "not significant"];

/// Dark rust for a cluster, the LISA palette's pale sand for the rest.
pub const JOIN_FLAG_COLOURS: [Rgb; 2] = [LISA_COLOURS[0], LISA_COLOURS[4]];

/// The join-count flag a label names (trimmed, any case), as an index into [`JOIN_FLAGS`].
pub fn join_flag(label: &str) -> Option<usize> {
    let key = label.trim().to_ascii_lowercase();
    JOIN_FLAGS.iter().position(|c| *c == key)
}

/// The trend class a label names (trimmed, any case), as an index into [`TREND_CLASSES`].
pub fn trend_class(label: &str) -> Option<usize> {
    let key = label.trim().to_ascii_lowercase();
    TREND_CLASSES.iter().position(|c| *c == key)
}

/// Ink of the lines of a share chart: black for the whole study area, then the toolbox's own
/// six colours for the other units (brick, blue, amber, plum, cyan, grey), apart from each other
/// in normal vision and under each simulated dichromacy (see the tests); the dash patterns of
/// [`chart_line`] tell them apart without colour too.
pub const CHART_COLOURS: [Rgb; 7] = [
    Rgb(0x00, 0x00, 0x00),
    Rgb(0xb8, 0x3a, 0x1e),
    Rgb(0x1f, 0x5f, 0xc0),
    Rgb(0xe8, 0xb0, 0x20),
    Rgb(0x70, 0x30, 0x80),
    Rgb(0x60, 0xc8, 0xc8),
    Rgb(0x80, 0x80, 0x80),
];

/// The line of series `k` of a share chart (0 = the whole study area): colour, dash, halo.
pub fn chart_line(k: usize) -> LineStyle {
    const DASHES: [Dash; 4] = [Dash::Solid, Dash::Dashed, Dash::Dotted, Dash::DashDot];
    LineStyle {
        colour: CHART_COLOURS[k % CHART_COLOURS.len()],
        dash: if k == 0 {
            Dash::Solid
        } else {
            DASHES[(k - 1) % 4]
        },
        halo: Rgb(255, 255, 255),
    }
}

/// How a line is broken.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Dash {
    /// Unbroken.
    Solid,
    /// Long dashes.
    Dashed,
    /// Dots.
    Dotted,
    /// Dash and dot.
    DashDot,
}

impl Dash {
    /// On and off lengths (px at scale 1), alternating; empty for a solid line.
    pub fn pattern(self) -> &'static [f64] {
        match self {
            Dash::Solid => &[],
            Dash::Dashed => &[12.0, 6.0],
            Dash::Dotted => &[3.0, 4.0],
            Dash::DashDot => &[12.0, 4.0, 3.0, 4.0],
        }
    }
}

/// How an overlay's lines look: ink over a halo that keeps them legible on any fill.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LineStyle {
    /// Ink colour.
    pub colour: Rgb,
    /// Dash pattern of the ink.
    pub dash: Dash,
    /// Halo colour under the ink (white under dark ink, near-black under light ink).
    pub halo: Rgb,
}

/// Plain overlays (areas, contours, points): black over white.
pub const PLAIN_LINE: LineStyle = LineStyle {
    colour: Rgb(0, 0, 0),
    dash: Dash::Solid,
    halo: Rgb(255, 255, 255),
};

/// Ink colours of the sides of a cluster layer, in the order of [`side_style`]: plum (toward
/// support, or high), green (toward oppose, or low), black (neutral) and yellow (any other side,
/// e.g. control classes joined by '+'). Chosen away from batlow and vik so that a circle never
/// matches the surface under it, and apart from each other in normal vision and under simulated
/// deuteranopia, protanopia and tritanopia (see the tests); the dash patterns tell the sides
/// apart without colour too.
pub const SIDE_COLOURS: [Rgb; 4] = [
    Rgb(0x9c, 0x1d, 0x8a),
    Rgb(0x1a, 0x96, 0x41),
    Rgb(0x00, 0x00, 0x00),
    Rgb(0xff, 0xe0, 0x00),
];

const SIDE_DASHES: [Dash; 4] = [Dash::Solid, Dash::Dashed, Dash::Dotted, Dash::DashDot];

/// Slot of a side label in [`SIDE_COLOURS`]: support/high 0, oppose/low 1, neutral 2, others 3.
pub fn side_slot(label: &str) -> usize {
    match label.trim().to_ascii_lowercase().as_str() {
        "support" | "high" => 0,
        "oppose" | "low" => 1,
        "neutral" => 2,
        _ => 3,
    }
}

/// The line style of a cluster side.
pub fn side_style(label: &str) -> LineStyle {
    let slot = side_slot(label);
    let colour = SIDE_COLOURS[slot];
    LineStyle {
        colour,
        dash: SIDE_DASHES[slot],
        halo: if lab(colour)[0] > 70.0 {
            Rgb(0x1a, 0x1a, 0x1a)
        } else {
            Rgb(255, 255, 255)
        },
    }
}

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

/// A dichromacy simulated by Machado, Oliveira & Fernandes (2009), severity 1.0: their published
/// matrices, applied to linear RGB.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dichromacy {
    /// No L cones.
    Protanopia,
    /// No M cones.
    Deuteranopia,
    /// No S cones.
    Tritanopia,
}

impl Dichromacy {
    /// All three.
    pub const ALL: [Dichromacy; 3] = [
        Dichromacy::Protanopia,
        Dichromacy::Deuteranopia,
        Dichromacy::Tritanopia,
    ];

    fn matrix(self) -> [[f64; 3]; 3] {
        match self {
            Dichromacy::Protanopia => [
                [0.152_286, 1.052_583, -0.204_868],
                [0.114_503, 0.786_281, 0.099_216],
                [-0.003_882, -0.048_116, 1.051_998],
            ],
            Dichromacy::Deuteranopia => [
                [0.367_322, 0.860_646, -0.227_968],
                [0.280_085, 0.672_501, 0.047_413],
                [-0.011_820, 0.042_940, 0.968_881],
            ],
            Dichromacy::Tritanopia => [
                [1.255_528, -0.076_749, -0.178_779],
                [-0.078_411, 0.930_809, 0.147_602],
                [0.004_733, 0.691_367, 0.303_900],
            ],
        }
    }

    /// How `colour` looks with this dichromacy.
    pub fn simulate(self, colour: Rgb) -> Rgb {
        let m = self.matrix();
        let l = [linear(colour.0), linear(colour.1), linear(colour.2)];
        let row = |i: usize| m[i][0] * l[0] + m[i][1] * l[1] + m[i][2] * l[2];
        Rgb(encode(row(0)), encode(row(1)), encode(row(2)))
    }
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
        assert_eq!(
            Dichromacy::Deuteranopia.simulate(Rgb(128, 128, 128)),
            Rgb(128, 128, 128)
        );
        // The classic confusion pair: a red and a green of similar lightness become close.
        let (red, green) = (Rgb(200, 80, 60), Rgb(110, 130, 50));
        let before = delta_e(red, green);
        let after = delta_e(
            Dichromacy::Deuteranopia.simulate(red),
            Dichromacy::Deuteranopia.simulate(green),
        );
        assert!(after < before / 2.0, "{before} → {after}");
    }

    /// The smallest ΔE*ab between two of `colours`, in normal vision and under each simulated
    /// dichromacy.
    fn closest_pair(colours: &[Rgb]) -> f64 {
        let mut closest = f64::INFINITY;
        for see in [
            None,
            Some(Dichromacy::Protanopia),
            Some(Dichromacy::Deuteranopia),
            Some(Dichromacy::Tritanopia),
        ] {
            let seen: Vec<Rgb> = colours
                .iter()
                .map(|c| see.map_or(*c, |d| d.simulate(*c)))
                .collect();
            for (i, a) in seen.iter().enumerate() {
                for b in &seen[i + 1..] {
                    closest = closest.min(delta_e(*a, *b));
                }
            }
        }
        closest
    }

    #[test]
    fn lisa_colours_stay_distinguishable_under_every_dichromacy() {
        // Threshold: ΔE*ab ≥ 30 for every pair, in normal vision and after each simulation.
        // ΔE ≈ 2.3 is one just-noticeable difference (Sharma 2003); 30 keeps the five classes
        // apart at a glance on small areas, not merely side by side.
        assert!(
            closest_pair(&LISA_COLOURS) >= 30.0,
            "{}",
            closest_pair(&LISA_COLOURS)
        );
        // "Not significant" is no grey (a* and b* of a grey are 0) and no white ("no value").
        let sand = lab(LISA_COLOURS[4]);
        assert!(sand[1].hypot(sand[2]) >= 8.0, "{sand:?}");
        assert!(delta_e(LISA_COLOURS[4], MISSING) >= 10.0);
    }

    #[test]
    fn side_colours_are_apart_from_each_other_and_from_the_surface_palettes() {
        assert!(
            closest_pair(&SIDE_COLOURS) >= 30.0,
            "{}",
            closest_pair(&SIDE_COLOURS)
        );
        // No side colour within ΔE*ab 30 of any anchor of batlow or vik.
        for side in SIDE_COLOURS {
            for anchor in BATLOW.iter().chain(&VIK) {
                assert!(delta_e(side, *anchor) >= 30.0, "{side:?} {anchor:?}");
            }
        }
        assert_eq!(side_style("oppose").dash, Dash::Dashed);
        assert_eq!(side_style("Support").colour, SIDE_COLOURS[0]);
        assert_eq!(side_style("neutral+support").colour, SIDE_COLOURS[3]);
        // Yellow ink gets a dark halo, the others a white one.
        assert_eq!(side_style("neutral+support").halo, Rgb(0x1a, 0x1a, 0x1a));
        assert_eq!(side_style("low").halo, Rgb(255, 255, 255));
    }

    #[test]
    fn trend_colours_stay_distinguishable_and_apart_from_no_value() {
        // Same threshold as the LISA palette: ΔE*ab ≥ 30 in every vision.
        let closest = closest_pair(&TREND_COLOURS);
        assert!(closest >= 30.0, "{closest}");
        for colour in TREND_COLOURS {
            assert!(delta_e(colour, MISSING) >= 10.0, "{colour:?}");
        }
        // Rising and falling are the darkest, steady the lightest.
        let l: Vec<f64> = TREND_COLOURS.iter().map(|c| lab(*c)[0]).collect();
        assert!(l[0] < l[3] && l[1] < l[3] && l[2] > l[3], "{l:?}");
        assert_eq!(trend_class(" Too few records "), Some(3));
        assert_eq!(trend_class("rising"), Some(0));
        assert_eq!(trend_class("no trend"), None);
    }

    #[test]
    fn hot_spots_are_warm_cold_spots_cool_and_flags_are_named() {
        // Hot is the warm rust (red channel above blue), cold the deep blue (blue above red),
        // and both stay apart from the pale sand of "not significant" in every vision.
        let [hot, cold, rest] = HOT_COLD_COLOURS;
        assert!(hot.0 > hot.2 && cold.2 > cold.0);
        assert!(closest_pair(&HOT_COLD_COLOURS) >= 20.0);
        assert!(lab(rest)[0] > lab(hot)[0] && lab(rest)[0] > lab(cold)[0]);
        assert_eq!(hot_cold(" Hot "), Some(0));
        assert_eq!(hot_cold("not significant"), Some(2));
        assert_eq!(hot_cold("high-high"), None);
        assert_eq!(join_flag("cluster"), Some(0));
        assert_eq!(join_flag("hot"), None);
    }

    #[test]
    fn chart_lines_are_apart_by_colour_and_by_dash() {
        // ΔE*ab ≥ 20 between any two line colours in every vision (lines are thin, and the
        // dashes carry the difference too).
        let closest = closest_pair(&CHART_COLOURS);
        assert!(closest >= 20.0, "{closest}");
        assert_eq!(chart_line(0).dash, Dash::Solid);
        assert_eq!(chart_line(1).dash, Dash::Solid);
        assert_eq!(chart_line(2).dash, Dash::Dashed);
        assert_eq!(chart_line(5).dash, Dash::Solid);
        assert_ne!(chart_line(1).colour, chart_line(5).colour);
    }

    #[test]
    fn dichromacy_matrices_keep_greys() {
        // Each published matrix row sums to 1 (to 6 decimals), so greys stay (±1 for rounding).
        for d in Dichromacy::ALL {
            let g = d.simulate(Rgb(128, 128, 128));
            assert!(
                g.0.abs_diff(128) <= 1 && g.1.abs_diff(128) <= 1 && g.2.abs_diff(128) <= 1,
                "{d:?} {g:?}"
            );
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
