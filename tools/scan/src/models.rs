//! Log-likelihood ratios of one scan window: Bernoulli and Poisson (Kulldorff 1997, Commun.
//! Statist. Theory Meth. 26:1481–1496) and ordinal (Jung, Kulldorff & Klassen 2007, Statist.
//! Med. 26:1594–1607) and multinomial (Jung, Kulldorff & Richard 2010, Statist. Med.
//! 29:1910–1918).

/// Which way a window departs from the rest of the map.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Side {
    /// More cases than expected (ordinal: shifted toward the higher classes).
    High,
    /// Fewer cases than expected (ordinal: shifted toward the lower classes).
    Low,
}

/// Which sides the scan looks for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Direction {
    /// Only windows with more cases (or higher classes) than expected.
    High,
    /// Only windows with fewer cases (or lower classes) than expected.
    Low,
    /// Both, each window scored on the side it departs to.
    Both,
}

impl Direction {
    fn allows(self, side: Side) -> bool {
        matches!(
            (self, side),
            (Direction::Both, _) | (Direction::High, Side::High) | (Direction::Low, Side::Low)
        )
    }
}

/// x·ln x for x = 0, 1, …, n (0·ln 0 = 0), so that integer-count likelihoods need no `ln` call.
#[derive(Debug, Clone)]
pub struct XLogX(Vec<f64>);

impl XLogX {
    /// The table up to and including `n`.
    pub fn new(n: u64) -> Self {
        XLogX(
            (0..=n)
                .map(|i| {
                    let x = i as f64;
                    if i == 0 {
                        0.0
                    } else {
                        x * x.ln()
                    }
                })
                .collect(),
        )
    }

    /// x·ln x for an integer x within the table.
    #[inline(always)]
    pub fn at(&self, x: u64) -> f64 {
        self.0[x as usize]
    }
}

/// x·ln x for a real x ≥ 0 (0·ln 0 = 0).
pub fn xlogx(x: f64) -> f64 {
    if x <= 0.0 {
        0.0
    } else {
        x * x.ln()
    }
}

/// What a model needs to score windows of one scan: a window is described by its size inside
/// (records for the point models, expected cases for the Poisson model) and the counts inside
/// (`WIDTH` numbers per labelling).
pub trait WindowModel: Sync {
    /// Count components per location and labelling (1: cases; ordinal: one per class).
    const WIDTH: usize;
    /// What stays fixed for a window across labellings.
    type Window: Copy;
    /// The window constants for `size` inside.
    fn window(&self, size: f64) -> Self::Window;
    /// The log-likelihood ratio of the window with `inside` counts, and its side; 0 when the
    /// window departs only on a side the direction excludes.
    fn llr(&self, window: &Self::Window, inside: &[u32]) -> (f64, Side);
    /// An interval `[lo, hi]` of case counts whose ratio is provably ≤ `floor` (only for
    /// one-count models, where the ratio is monotone on each side of the expected count).
    fn band(&self, _window: &Self::Window, _floor: f64) -> Option<(u32, u32)> {
        None
    }
    /// A small integer naming the window's size, under which its `band` may be cached.
    fn band_key(&self, _window: &Self::Window) -> Option<usize> {
        None
    }
}

/// Bernoulli model: N records of which C are cases.
///
/// ln Λ = c ln(c/n) + (n−c) ln((n−c)/n) + (C−c) ln((C−c)/(N−n)) + (N−n−C+c) ln((N−n−C+c)/(N−n))
///       − C ln(C/N) − (N−C) ln((N−C)/N),
/// for a window of n records with c cases, on the side c/n ≷ (C−c)/(N−n) (Kulldorff 1997, §4).
#[derive(Debug, Clone)]
pub struct Bernoulli {
    table: XLogX,
    total: u64,
    cases: u64,
    null: f64,
    direction: Direction,
}

/// Window constants of the Bernoulli model.
#[derive(Debug, Clone, Copy)]
pub struct BernoulliWindow {
    records: u64,
    constant: f64,
}

impl Bernoulli {
    /// The model for `total` records with `cases` cases.
    pub fn new(total: u64, cases: u64, direction: Direction) -> Self {
        let table = XLogX::new(total);
        let null = table.at(cases) + table.at(total - cases) - table.at(total);
        Bernoulli {
            table,
            total,
            cases,
            null,
            direction,
        }
    }

    /// ln Λ of a window of `records` records holding `cases` cases, with its side.
    pub fn ratio(&self, records: u64, cases: u64) -> (f64, Side) {
        let window = self.window(records as f64);
        self.llr(&window, &[cases as u32])
    }

    #[inline(always)]
    fn value(&self, w: &BernoulliWindow, c: u64) -> f64 {
        let t = &self.table;
        t.at(c)
            + t.at(w.records - c)
            + t.at(self.cases - c)
            // Outside controls; ordered so no intermediate goes below zero.
            + t.at(self.total + c - w.records - self.cases)
            - w.constant
    }
}

impl WindowModel for Bernoulli {
    const WIDTH: usize = 1;
    type Window = BernoulliWindow;

    fn window(&self, size: f64) -> BernoulliWindow {
        let records = size.round() as u64;
        BernoulliWindow {
            records,
            constant: self.table.at(records) + self.table.at(self.total - records) + self.null,
        }
    }

    #[inline(always)]
    fn llr(&self, w: &BernoulliWindow, inside: &[u32]) -> (f64, Side) {
        let c = u64::from(inside[0]);
        // c/n vs C/N in integers: the sign decides the side exactly.
        let lhs = u128::from(c) * u128::from(self.total);
        let rhs = u128::from(w.records) * u128::from(self.cases);
        let side = if lhs > rhs {
            Side::High
        } else if lhs < rhs {
            Side::Low
        } else {
            return (0.0, Side::High);
        };
        if !self.direction.allows(side) {
            return (0.0, side);
        }
        // Rounding can leave a tiny negative value for a window at its expectation.
        (self.value(w, c).max(0.0), side)
    }

    fn band(&self, w: &BernoulliWindow, floor: f64) -> Option<(u32, u32)> {
        let max_c = w.records.min(self.cases);
        let min_c = (self.cases + w.records).saturating_sub(self.total);
        Some(monotone_band(min_c, max_c, floor, |c| {
            self.llr(w, &[c as u32]).0
        }))
    }

    fn band_key(&self, w: &BernoulliWindow) -> Option<usize> {
        Some(w.records as usize)
    }
}

/// Space-time permutation model (Kulldorff, Heffernan, Hartman, Assunção & Mostashari 2005,
/// PLoS Med. 2(3): e59): C records in all; a cylinder holding c of them where
/// μ = c(circle)·c(periods)/C are expected from the margins scores
///
/// ln Λ = c ln(c/μ) + (C−c) ln((C−c)/(C−μ)) for c > μ, else 0 (high clusters only).
///
/// The window "size" this model is given is μ itself.
#[derive(Debug, Clone)]
pub struct SpaceTimePermutation {
    table: XLogX,
    total: u64,
}

/// Window constants of the space-time permutation model.
#[derive(Debug, Clone, Copy)]
pub struct PermutationWindow {
    expected: f64,
    ln_expected: f64,
    ln_expected_outside: f64,
}

impl SpaceTimePermutation {
    /// The model for `total` records.
    pub fn new(total: u64) -> Self {
        SpaceTimePermutation {
            table: XLogX::new(total),
            total,
        }
    }

    /// ln Λ of a cylinder with `observed` records where `expected` are expected.
    pub fn ratio(&self, expected: f64, observed: u64) -> f64 {
        self.llr(&self.window(expected), &[observed as u32]).0
    }
}

impl WindowModel for SpaceTimePermutation {
    const WIDTH: usize = 1;
    type Window = PermutationWindow;

    fn window(&self, expected: f64) -> PermutationWindow {
        let outside = self.total as f64 - expected;
        PermutationWindow {
            expected,
            ln_expected: if expected > 0.0 { expected.ln() } else { 0.0 },
            ln_expected_outside: if outside > 0.0 { outside.ln() } else { 0.0 },
        }
    }

    #[inline(always)]
    fn llr(&self, w: &PermutationWindow, inside: &[u32]) -> (f64, Side) {
        let c = u64::from(inside[0]).min(self.total);
        let observed = c as f64;
        if observed <= w.expected || w.expected <= 0.0 {
            return (0.0, Side::High);
        }
        let rest = self.total - c;
        let value = self.table.at(c) - observed * w.ln_expected + self.table.at(rest)
            - (rest as f64) * w.ln_expected_outside;
        (value.max(0.0), Side::High)
    }
}

/// Poisson model: areas with observed and expected cases, expected summing to the C observed.
///
/// ln Λ = c ln(c/E) + (C−c) ln((C−c)/(C−E)) for a window with c observed and E expected cases,
/// on the side c ≷ E (Kulldorff 1997, §5).
#[derive(Debug, Clone)]
pub struct Poisson {
    table: XLogX,
    cases: u64,
    direction: Direction,
}

/// Window constants of the Poisson model.
#[derive(Debug, Clone, Copy)]
pub struct PoissonWindow {
    expected: f64,
    ln_expected: f64,
    ln_expected_outside: f64,
}

impl Poisson {
    /// The model for `cases` observed cases in all.
    pub fn new(cases: u64, direction: Direction) -> Self {
        Poisson {
            table: XLogX::new(cases),
            cases,
            direction,
        }
    }

    /// ln Λ of a window with `cases` observed and `expected` expected cases, with its side.
    pub fn ratio(&self, expected: f64, cases: u64) -> (f64, Side) {
        self.llr(&self.window(expected), &[cases as u32])
    }
}

impl WindowModel for Poisson {
    const WIDTH: usize = 1;
    type Window = PoissonWindow;

    fn window(&self, expected: f64) -> PoissonWindow {
        let outside = self.cases as f64 - expected;
        PoissonWindow {
            expected,
            ln_expected: expected.ln(),
            ln_expected_outside: if outside > 0.0 { outside.ln() } else { 0.0 },
        }
    }

    #[inline(always)]
    fn llr(&self, w: &PoissonWindow, inside: &[u32]) -> (f64, Side) {
        let c = u64::from(inside[0]).min(self.cases);
        let observed = c as f64;
        let side = if observed > w.expected {
            Side::High
        } else if observed < w.expected {
            Side::Low
        } else {
            return (0.0, Side::High);
        };
        if !self.direction.allows(side) || w.expected <= 0.0 {
            return (0.0, side);
        }
        let rest = self.cases - c;
        let value = self.table.at(c) - observed * w.ln_expected + self.table.at(rest)
            - (rest as f64) * w.ln_expected_outside;
        (value.max(0.0), side)
    }

    fn band(&self, w: &PoissonWindow, floor: f64) -> Option<(u32, u32)> {
        Some(monotone_band(0, self.cases, floor, |c| {
            self.llr(w, &[c as u32]).0
        }))
    }
}

/// The widest interval `[lo, hi]` ⊂ `[min_c, max_c]` on which a function that falls to its
/// minimum and rises again (a one-count ratio) is ≤ `floor`, narrowed by one count on each side
/// so that rounding near the boundary can never exclude a window that beats `floor`.
/// Returns an empty band (`lo > hi`) when nothing can be skipped.
fn monotone_band(min_c: u64, max_c: u64, floor: f64, f: impl Fn(u64) -> f64) -> (u32, u32) {
    // The minimum (0) sits at the expected count: find it by binary search on the sign of the
    // discrete slope f(c+1) − f(c).
    let (mut lo_search, mut hi_search) = (min_c, max_c);
    while lo_search < hi_search {
        let mid = lo_search + (hi_search - lo_search) / 2;
        if f(mid + 1) >= f(mid) {
            hi_search = mid;
        } else {
            lo_search = mid + 1;
        }
    }
    let centre = lo_search;
    if f(centre) > floor {
        return (1, 0);
    }
    // Largest c ≥ centre with f(c) ≤ floor (f is non-decreasing there).
    let (mut a, mut b) = (centre, max_c);
    while a < b {
        let mid = a + (b - a).div_ceil(2);
        if f(mid) <= floor {
            a = mid;
        } else {
            b = mid - 1;
        }
    }
    let hi = a;
    // Smallest c ≤ centre with f(c) ≤ floor (f is non-increasing there).
    let (mut a, mut b) = (min_c, centre);
    while a < b {
        let mid = a + (b - a) / 2;
        if f(mid) <= floor {
            b = mid;
        } else {
            a = mid + 1;
        }
    }
    let lo = a;
    let lo = if lo > min_c { lo + 1 } else { lo };
    let hi = if hi < max_c { hi.saturating_sub(1) } else { hi };
    (
        u32::try_from(lo).unwrap_or(u32::MAX),
        u32::try_from(hi).unwrap_or(u32::MAX),
    )
}

/// Ordinal model for K ordered classes with totals C_1…C_K (N = ΣC_k).
///
/// Jung, Kulldorff & Klassen (2007), §2: inside the window the class probabilities are p_k,
/// outside q_k; H0: p_k = q_k; H1 (high): p_1/q_1 ≤ p_2/q_2 ≤ … ≤ p_K/q_K, strict somewhere
/// (low: the reverse order). The likelihood is L = Π_k p_k^{c_k} q_k^{C_k−c_k}; under H0 its
/// maximum is Π_k (C_k/N)^{C_k}. Under H1 the order-restricted MLE pools adjacent classes that
/// violate the order (pool-adjacent-violators on the shares c_k/C_k with weights C_k); within
/// a pooled group G, p̂_k = (C_k/C_G)(c_G/n) and q̂_k = (C_k/C_G)((C_G−c_G)/(N−n)). Then
///
/// ln Λ = Σ_G [c_G ln c_G + (C_G−c_G) ln(C_G−c_G) − C_G ln C_G] − n ln n − (N−n) ln(N−n) + N ln N,
///
/// which is the published Σ_k c_k ln p̂_k + Σ_k (C_k−c_k) ln q̂_k − Σ_k C_k ln(C_k/N) with the
/// C_k/C_G factors cancelled (see [`Ordinal::ratio_direct`] for the unsimplified form).
#[derive(Debug, Clone)]
pub struct Ordinal {
    table: XLogX,
    class_totals: Vec<u64>,
    total: u64,
    direction: Direction,
}

/// Window constants of the ordinal model.
#[derive(Debug, Clone, Copy)]
pub struct OrdinalWindow {
    records: u64,
    constant: f64,
}

/// Classes handled by the ordinal model (oppose, neutral, support).
pub const ORDINAL_CLASSES: usize = 3;

impl Ordinal {
    /// The model for classes with `class_totals` records each (empty classes are allowed and
    /// take no part).
    pub fn new(class_totals: [u64; ORDINAL_CLASSES], direction: Direction) -> Self {
        let total = class_totals.iter().sum();
        Ordinal {
            table: XLogX::new(total),
            class_totals: class_totals.to_vec(),
            total,
            direction,
        }
    }

    /// ln Λ of a window with `inside[k]` records of class k, and its side.
    pub fn ratio(&self, inside: &[u32]) -> (f64, Side) {
        let records: u64 = inside.iter().map(|c| u64::from(*c)).sum();
        self.llr(&self.window(records as f64), inside)
    }

    /// Order-restricted ln L of one side: groups from pool-adjacent-violators.
    fn side_value(&self, w: &OrdinalWindow, inside: &[u32], increasing: bool) -> f64 {
        // Blocks (inside count, class total) on a stack; at most K = 3 entries.
        let mut blocks: [(u64, u64); ORDINAL_CLASSES] = [(0, 0); ORDINAL_CLASSES];
        let mut len = 0usize;
        for (k, &class_total) in self.class_totals.iter().enumerate() {
            if class_total == 0 {
                continue;
            }
            let mut block = (u64::from(inside[k]), class_total);
            // A violation: the previous block's share c/C is above (or, decreasing, below)
            // this one's; compare c1·C2 with c2·C1 exactly in integers.
            while len > 0 {
                let (pc, pt) = blocks[len - 1];
                let previous = u128::from(pc) * u128::from(block.1);
                let current = u128::from(block.0) * u128::from(pt);
                let violates = if increasing {
                    previous > current
                } else {
                    previous < current
                };
                if !violates {
                    break;
                }
                block = (block.0 + pc, block.1 + pt);
                len -= 1;
            }
            blocks[len] = block;
            len += 1;
        }
        let t = &self.table;
        let mut value = 0.0;
        for &(c, total) in &blocks[..len] {
            value += t.at(c) + t.at(total - c) - t.at(total);
        }
        let _ = w.records;
        value - w.constant
    }

    /// ln Λ evaluated from the published form Σ c_k ln p̂_k + Σ (C_k−c_k) ln q̂_k − Σ C_k ln(C_k/N),
    /// with the pooled estimates built class by class; for tests against [`Ordinal::ratio`].
    pub fn ratio_direct(&self, inside: &[u32], increasing: bool) -> f64 {
        let n: f64 = inside.iter().map(|c| f64::from(*c)).sum();
        let big_n = self.total as f64;
        // Pool-adjacent-violators as lists of class indices.
        let mut groups: Vec<Vec<usize>> = Vec::new();
        for k in 0..self.class_totals.len() {
            if self.class_totals[k] == 0 {
                continue;
            }
            groups.push(vec![k]);
            loop {
                let g = groups.len();
                if g < 2 {
                    break;
                }
                let share = |group: &Vec<usize>| {
                    let c: f64 = group.iter().map(|&i| f64::from(inside[i])).sum();
                    let t: f64 = group.iter().map(|&i| self.class_totals[i] as f64).sum();
                    c / t
                };
                let (a, b) = (share(&groups[g - 2]), share(&groups[g - 1]));
                let violates = if increasing { a > b } else { a < b };
                if !violates {
                    break;
                }
                let last = groups.pop().unwrap_or_default();
                if let Some(previous) = groups.last_mut() {
                    previous.extend(last);
                }
            }
        }
        let mut value = 0.0;
        for group in &groups {
            let c_g: f64 = group.iter().map(|&i| f64::from(inside[i])).sum();
            let t_g: f64 = group.iter().map(|&i| self.class_totals[i] as f64).sum();
            for &k in group {
                let total_k = self.class_totals[k] as f64;
                let c_k = f64::from(inside[k]);
                let p = total_k / t_g * c_g / n;
                let q = total_k / t_g * (t_g - c_g) / (big_n - n);
                if c_k > 0.0 {
                    value += c_k * p.ln();
                }
                if total_k - c_k > 0.0 {
                    value += (total_k - c_k) * q.ln();
                }
                value -= total_k * (total_k / big_n).ln();
            }
        }
        value
    }
}

impl WindowModel for Ordinal {
    const WIDTH: usize = ORDINAL_CLASSES;
    type Window = OrdinalWindow;

    fn window(&self, size: f64) -> OrdinalWindow {
        let records = size.round() as u64;
        let t = &self.table;
        OrdinalWindow {
            records,
            constant: t.at(records) + t.at(self.total - records) - t.at(self.total),
        }
    }

    fn llr(&self, w: &OrdinalWindow, inside: &[u32]) -> (f64, Side) {
        let high = if self.direction.allows(Side::High) {
            self.side_value(w, inside, true)
        } else {
            0.0
        };
        let low = if self.direction.allows(Side::Low) {
            self.side_value(w, inside, false)
        } else {
            0.0
        };
        // Rounding leaves ±1e-12 where the data already satisfy H0.
        if high >= low {
            (high.max(0.0), Side::High)
        } else {
            (low.max(0.0), Side::Low)
        }
    }
}

/// Multinomial model for K unordered classes with totals C_1…C_K (N = ΣC_k).
///
/// Jung, Kulldorff & Richard (2010), Statist. Med. 29:1910–1918 (the formula written here from
/// memory of the paper): inside the window the class probabilities are p_k, outside q_k;
/// H0: p_k = q_k for every k; H1: p_k ≠ q_k for some k, any mix. The maximum likelihood
/// estimates are p̂_k = c_k/n and q̂_k = (C_k−c_k)/(N−n), so
///
/// ln Λ = Σ_k [c_k ln(c_k/n) + (C_k−c_k) ln((C_k−c_k)/(N−n))] − Σ_k C_k ln(C_k/N)
///      = Σ_k [c_k ln c_k + (C_k−c_k) ln(C_k−c_k) − C_k ln C_k] − n ln n − (N−n) ln(N−n) + N ln N.
///
/// The ratio has no side: every window is scored (reported as [`Side::High`]); which class a
/// cluster leans to is read from its shares afterwards.
#[derive(Debug, Clone)]
pub struct Multinomial {
    table: XLogX,
    class_totals: [u64; ORDINAL_CLASSES],
    total: u64,
}

impl Multinomial {
    /// The model for classes with `class_totals` records each (empty classes take no part).
    pub fn new(class_totals: [u64; ORDINAL_CLASSES]) -> Self {
        let total = class_totals.iter().sum();
        Multinomial {
            table: XLogX::new(total),
            class_totals,
            total,
        }
    }

    /// ln Λ of a window with `inside[k]` records of class k.
    pub fn ratio(&self, inside: &[u32]) -> f64 {
        let records: u64 = inside.iter().map(|c| u64::from(*c)).sum();
        self.llr(&self.window(records as f64), inside).0
    }
}

impl WindowModel for Multinomial {
    const WIDTH: usize = ORDINAL_CLASSES;
    type Window = OrdinalWindow;

    fn window(&self, size: f64) -> OrdinalWindow {
        let records = size.round() as u64;
        let t = &self.table;
        OrdinalWindow {
            records,
            constant: t.at(records) + t.at(self.total - records) - t.at(self.total),
        }
    }

    #[inline(always)]
    fn llr(&self, w: &OrdinalWindow, inside: &[u32]) -> (f64, Side) {
        let t = &self.table;
        let mut value = -w.constant;
        for (&c, &class_total) in inside.iter().zip(&self.class_totals) {
            let c = u64::from(c);
            value += t.at(c) + t.at(class_total - c) - t.at(class_total);
        }
        // Rounding leaves ±1e-12 where the mix inside equals the mix outside.
        (value.max(0.0), Side::High)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn bernoulli_worked_example() {
        // N = 10, C = 4, window n = 3 with c = 3, by hand:
        // ln Λ = 3 ln(3/3) + 0 + 1·ln(1/7) + 6 ln(6/7) − 4 ln(4/10) − 6 ln(6/10)
        //      = −1.945910149 − 0.924904083 + 3.665162927 + 3.064953742 = 3.859302442.
        // Tolerance 1e-9: the last printed digit of the hand value.
        let model = Bernoulli::new(10, 4, Direction::High);
        let (value, side) = model.ratio(3, 3);
        assert_eq!(side, Side::High);
        assert!((value - 3.859302442).abs() < 1e-9, "{value}");
        // At the expectation the ratio is 0; below it the high scan scores 0.
        assert_eq!(model.ratio(5, 2).0, 0.0);
        assert_eq!(model.ratio(5, 1).0, 0.0);
        // The low scan scores the mirror case: 3 records with no case.
        let low = Bernoulli::new(10, 4, Direction::Low);
        let (value, side) = low.ratio(3, 0);
        let by_hand = 3.0 * (1.0f64).ln() + 4.0 * (4.0f64 / 7.0).ln() + 3.0 * (3.0f64 / 7.0).ln()
            - 4.0 * 0.4f64.ln()
            - 6.0 * 0.6f64.ln();
        assert_eq!(side, Side::Low);
        assert_relative_eq!(value, by_hand, max_relative = 1e-12);
    }

    #[test]
    fn bernoulli_band_never_hides_a_better_window() {
        for (total, cases, records) in [(10, 4, 3), (200, 37, 61), (1000, 500, 499), (50, 1, 25)] {
            let model = Bernoulli::new(total, cases, Direction::Both);
            let w = model.window(records as f64);
            for floor in [0.0, 0.3, 1.0, 2.5, 7.0, 1e9] {
                let (lo, hi) = model.band(&w, floor).expect("band");
                for c in 0..=records.min(cases) {
                    if (c as u32) >= lo && (c as u32) <= hi {
                        assert!(
                            model.llr(&w, &[c as u32]).0 <= floor,
                            "{total} {cases} {records} {floor} {c}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn poisson_matches_formula() {
        // c = 12 observed, E = 5 expected, C = 40 in all:
        // 12 ln(12/5) + 28 ln(28/35) = 10.505491 − 6.248096 = 4.257395 (computed term by term).
        let model = Poisson::new(40, Direction::Both);
        let (value, side) = model.ratio(5.0, 12);
        let direct = 12.0 * (12.0f64 / 5.0).ln() + 28.0 * (28.0f64 / 35.0).ln();
        assert_eq!(side, Side::High);
        assert_relative_eq!(value, direct, max_relative = 1e-12);
        let (low, side) = model.ratio(10.0, 2);
        let direct = 2.0 * (2.0f64 / 10.0).ln() + 38.0 * (38.0f64 / 30.0).ln();
        assert_eq!(side, Side::Low);
        assert_relative_eq!(low, direct, max_relative = 1e-12);
        let w = model.window(5.0);
        for floor in [0.0, 1.0, 4.0] {
            let (lo, hi) = model.band(&w, floor).expect("band");
            for c in lo..=hi {
                assert!(model.llr(&w, &[c]).0 <= floor);
            }
        }
    }

    #[test]
    fn ordinal_without_violations_is_the_unrestricted_ratio() {
        // Totals 10/10/10, inside 1/3/6: shares rise, no pooling; ln Λ is the 2×3 table's
        // G/2 = Σ c ln(c·N/(n·C_k)) over the six cells.
        let model = Ordinal::new([10, 10, 10], Direction::High);
        let (value, side) = model.ratio(&[1, 3, 6]);
        let cells: [(f64, f64, f64); 3] = [(1.0, 10.0, 10.0), (3.0, 10.0, 10.0), (6.0, 10.0, 10.0)];
        let (n, big_n) = (10.0f64, 30.0f64);
        let mut g = 0.0;
        for (c, total, _) in cells {
            g += c * (c * big_n / (n * total)).ln();
            let d: f64 = total - c;
            g += d * (d * big_n / ((big_n - n) * total)).ln();
        }
        assert_eq!(side, Side::High);
        assert_relative_eq!(value, g, max_relative = 1e-12);
    }

    #[test]
    fn ordinal_pools_violators_and_agrees_with_the_published_form() {
        let model = Ordinal::new([7, 5, 9], Direction::Both);
        for a in 0..=7u32 {
            for b in 0..=5u32 {
                for c in 0..=9u32 {
                    let n = a + b + c;
                    if n == 0 || n == 21 {
                        continue;
                    }
                    let inside = [a, b, c];
                    let (value, _) = model.ratio(&inside);
                    let direct = model
                        .ratio_direct(&inside, true)
                        .max(model.ratio_direct(&inside, false))
                        .max(0.0);
                    // Tolerance 1e-10: both sum ~20 terms of size ≤ 60 in f64.
                    assert!(
                        (value - direct).abs() < 1e-10,
                        "{inside:?} {value} {direct}"
                    );
                }
            }
        }
        // A window shifted toward the low classes scores on the low side only.
        let high_only = Ordinal::new([7, 5, 9], Direction::High);
        assert_eq!(high_only.ratio(&[6, 2, 0]).0, 0.0);
        let (low, side) = model.ratio(&[6, 2, 0]);
        assert!(low > 0.0);
        assert_eq!(side, Side::Low);
    }

    #[test]
    fn ordinal_mle_beats_every_feasible_point() {
        // The pooled estimates must maximise L over {p_k/q_k non-decreasing}: compare with
        // random feasible (p, q) from a fixed generator.
        use rand::{Rng, SeedableRng};
        let totals = [7u64, 5, 9];
        let inside = [5u32, 1, 4]; // shares 5/7 > 1/5 < 4/9: classes 1 and 2 pool
        let model = Ordinal::new(totals, Direction::High);
        let best = model.ratio(&inside).0;
        let big_n = 21.0f64;
        let null: f64 = totals
            .iter()
            .map(|&t| t as f64 * (t as f64 / big_n).ln())
            .sum();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        for _ in 0..200_000 {
            let q: Vec<f64> = {
                let raw: Vec<f64> = (0..3).map(|_| rng.random::<f64>() + 1e-9).collect();
                let s: f64 = raw.iter().sum();
                raw.iter().map(|v| v / s).collect()
            };
            let mut ratios: Vec<f64> = (0..3).map(|_| rng.random::<f64>() * 3.0 + 1e-9).collect();
            ratios.sort_by(f64::total_cmp);
            let raw: Vec<f64> = (0..3).map(|k| ratios[k] * q[k]).collect();
            let s: f64 = raw.iter().sum();
            let p: Vec<f64> = raw.iter().map(|v| v / s).collect();
            let mut ll = 0.0;
            for k in 0..3 {
                ll += f64::from(inside[k]) * p[k].ln()
                    + (totals[k] as f64 - f64::from(inside[k])) * q[k].ln();
            }
            assert!(ll - null <= best + 1e-12, "feasible point beats the MLE");
        }
    }

    #[test]
    fn multinomial_is_the_unrestricted_three_class_ratio() {
        // Totals 7/5/9, inside 5/1/4 (n = 10, N = 21), term by term from the published form
        // Σ c_k ln(c_k/n) + Σ (C_k−c_k) ln((C_k−c_k)/(N−n)) − Σ C_k ln(C_k/N).
        let model = Multinomial::new([7, 5, 9]);
        let by_hand = 5.0 * (5.0f64 / 10.0).ln()
            + 1.0 * (1.0f64 / 10.0).ln()
            + 4.0 * (4.0f64 / 10.0).ln()
            + 2.0 * (2.0f64 / 11.0).ln()
            + 4.0 * (4.0f64 / 11.0).ln()
            + 5.0 * (5.0f64 / 11.0).ln()
            - 7.0 * (7.0f64 / 21.0).ln()
            - 5.0 * (5.0f64 / 21.0).ln()
            - 9.0 * (9.0f64 / 21.0).ln();
        assert_relative_eq!(model.ratio(&[5, 1, 4]), by_hand, max_relative = 1e-12);
        // It is at least the ordinal ratio on either side (a restricted maximum of the same
        // likelihood) and equals it when the shares are already ordered.
        let ordinal = Ordinal::new([7, 5, 9], Direction::Both);
        for a in 0..=7u32 {
            for b in 0..=5u32 {
                for c in 0..=9u32 {
                    let n = a + b + c;
                    if n == 0 || n == 21 {
                        continue;
                    }
                    let m = model.ratio(&[a, b, c]);
                    assert!(m >= ordinal.ratio(&[a, b, c]).0 - 1e-12);
                }
            }
        }
        let ordered = Multinomial::new([10, 10, 10]);
        let up = Ordinal::new([10, 10, 10], Direction::High);
        assert_relative_eq!(
            ordered.ratio(&[1, 3, 6]),
            up.ratio(&[1, 3, 6]).0,
            max_relative = 1e-12
        );
        // The same mix inside and outside scores 0; an empty class takes no part.
        assert_eq!(Multinomial::new([10, 20, 30]).ratio(&[1, 2, 3]), 0.0);
        assert_relative_eq!(
            Multinomial::new([7, 0, 9]).ratio(&[5, 0, 1]),
            Bernoulli::new(16, 7, Direction::Both).ratio(6, 5).0,
            max_relative = 1e-12
        );
    }

    #[test]
    fn xlogx_table() {
        let t = XLogX::new(5);
        assert_eq!(t.at(0), 0.0);
        assert_eq!(t.at(1), 0.0);
        assert_relative_eq!(t.at(5), 5.0 * 5.0f64.ln());
        assert_eq!(xlogx(0.0), 0.0);
    }
}
