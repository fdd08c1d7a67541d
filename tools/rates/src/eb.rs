//! Raw rates with standard errors, and empirical Bayes smoothing by the method of moments:
//! global (Marshall 1991, J. R. Stat. Soc. C 40(2), 283–294, eq. 7–9), local / spatial
//! (Marshall 1991, §4, the neighbourhood of each area as its reference population) and the
//! binomial (beta prior) form for shares (Martuzzi & Elliott 1996, Stat. Med. 15, 1867–1873).
//!
//! Notation: area i has `events` eᵢ and `base` bᵢ (population at risk, or records of the base
//! classes); the raw rate is rᵢ = eᵢ / bᵢ.
//!
//! - Prior mean m = Σe / Σb, over the areas with bᵢ > 0.
//! - Weighted spread s² = Σ bᵢ (rᵢ − m)² / Σ bᵢ; mean base b̄ = Σb / k over the k areas with bᵢ > 0.
//! - Prior variance, Poisson: φ = s² − m / b̄. Binomial (beta prior): φ = (s² − m(1 − m) / b̄) /
//!   (1 − 1/b̄), the moment estimator whose shrinkage is exactly spdep's
//!   `EBest(family = "binomial")` weight ρᵢ = (bᵢ s² − (bᵢ/b̄) m(1 − m)) / ((bᵢ − 1) s² +
//!   ((b̄ − bᵢ)/b̄) m(1 − m)). spdep neither truncates that φ nor clamps ρᵢ; here both are
//!   (a negative ρᵢ would move the estimate beyond the prior mean).
//! - A negative φ is set to 0 (Marshall 1991, p. 286; Bailey & Gatrell 1995, *Interactive
//!   Spatial Data Analysis*, p. 306; spdep and esda do the same): every area then takes the prior
//!   mean. The truncation is reported, never hidden.
//! - Smoothed rate θᵢ = m + Cᵢ (rᵢ − m) with shrinkage Cᵢ = φ / (φ + m / bᵢ) (Poisson) or
//!   Cᵢ = φ / (φ + (m(1 − m) − φ) / bᵢ) (binomial, the beta–binomial posterior mean), clamped
//!   to [0, 1], so θᵢ always lies between rᵢ and m.
//!
//! **Zero base.** An area with bᵢ = 0 carries no information: it is left out of m, s², b̄ and k,
//! its raw rate and standard error are undefined (`None`), and its smoothed rate is the prior
//! mean. (spdep returns NaN for the whole vector in that case; esda divides by zero.)
//!
//! **Local variant** (Marshall 1991, §4). The neighbourhood of i is i and its neighbours. The
//! local prior mean mᵢ, spread s²ᵢ and mean base b̄ᵢ are the formulas above over that
//! neighbourhood, with each neighbour's spread measured around **area i's** local mean:
//! s²ᵢ = Σⱼ bⱼ (rⱼ − mᵢ)² / Σⱼ bⱼ. The reference checks compare it with esda's
//! `Spatial_Empirical_Bayes` and with spdep's `EBlocal` in the variant chosen by its last
//! argument (tests/reference/make_rates.R). spdep's default variant instead sums each
//! neighbour's spread around its *own* local mean, (rⱼ − mⱼ)², which is not Marshall's estimator
//! and differs by up to 69 % on the North Carolina SIDS data; it is not implemented here.

use stance_core::weights::Neighbours;

/// The probability model of the counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Model {
    /// Events are Poisson with mean bᵢ θᵢ (rare events per head of a population).
    Poisson,
    /// Events are binomial out of bᵢ trials (a share, e.g. oppose among all records).
    Binomial,
}

impl Model {
    /// The sampling variance of a rate at mean `m` per unit of base: m (Poisson) or m(1 − m).
    fn unit_variance(self, m: f64) -> f64 {
        match self {
            Model::Poisson => m,
            Model::Binomial => m * (1.0 - m),
        }
    }

    /// Shrinkage weight on the raw rate, Cᵢ, clamped to [0, 1] (0 when φ = 0).
    fn shrinkage(self, prior_variance: f64, prior_mean: f64, base: f64) -> f64 {
        if prior_variance <= 0.0 {
            return 0.0;
        }
        let sampling = match self {
            Model::Poisson => prior_mean / base,
            Model::Binomial => (self.unit_variance(prior_mean) - prior_variance) / base,
        };
        let weight = prior_variance / (prior_variance + sampling);
        if weight.is_finite() {
            weight.clamp(0.0, 1.0)
        } else {
            1.0
        }
    }
}

/// Raw rate rᵢ = eᵢ / bᵢ and its standard error: √eᵢ / bᵢ (Poisson) or √(rᵢ(1 − rᵢ) / bᵢ)
/// (binomial). Both `None` where bᵢ = 0.
pub fn raw_rates(events: &[f64], base: &[f64], model: Model) -> Vec<Option<(f64, f64)>> {
    events
        .iter()
        .zip(base)
        .map(|(&e, &b)| {
            if b > 0.0 {
                let r = e / b;
                let se = match model {
                    Model::Poisson => e.sqrt() / b,
                    Model::Binomial => (r * (1.0 - r) / b).max(0.0).sqrt(),
                };
                Some((r, se))
            } else {
                None
            }
        })
        .collect()
}

/// The method-of-moments prior of a set of areas (the whole map, or one neighbourhood).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Prior {
    /// Prior mean m = Σe / Σb.
    pub mean: f64,
    /// Prior variance φ as estimated, before truncation (may be negative).
    pub variance_estimate: f64,
    /// Prior variance used, max(φ, 0).
    pub variance: f64,
    /// Areas with a positive base that entered the estimate.
    pub areas: usize,
}

impl Prior {
    /// Whether the estimated prior variance was negative and set to 0.
    pub fn truncated(&self) -> bool {
        self.variance_estimate < 0.0
    }
}

/// Moments over the areas `members` (indices); `None` when their total base is 0.
fn prior_of(
    events: &[f64],
    base: &[f64],
    members: impl Iterator<Item = usize> + Clone,
    model: Model,
) -> Option<Prior> {
    let (mut event_sum, mut base_sum, mut areas) = (0.0, 0.0, 0usize);
    for j in members.clone() {
        if base[j] > 0.0 {
            event_sum += events[j];
            base_sum += base[j];
            areas += 1;
        }
    }
    if base_sum <= 0.0 {
        return None;
    }
    let mean = event_sum / base_sum;
    let spread = members
        .filter(|&j| base[j] > 0.0)
        .map(|j| base[j] * (events[j] / base[j] - mean).powi(2))
        .sum::<f64>()
        / base_sum;
    let mean_base = base_sum / areas as f64;
    let variance_estimate = match model {
        Model::Poisson => spread - mean / mean_base,
        // E[s²] = φ (1 − 1/b̄) + m(1 − m)/b̄ for beta-binomial counts; with b̄ ≤ 1 (at most one
        // trial per area on average) φ is not identifiable and no smoothing weight is given.
        Model::Binomial if mean_base > 1.0 => {
            (spread - model.unit_variance(mean) / mean_base) / (1.0 - 1.0 / mean_base)
        }
        Model::Binomial => 0.0,
    };
    Some(Prior {
        mean,
        variance_estimate,
        variance: variance_estimate.max(0.0),
        areas,
    })
}

/// The smoothed rate of one area under `prior`: m + Cᵢ (rᵢ − m), or m when bᵢ = 0.
fn smooth(event: f64, base: f64, prior: &Prior, model: Model) -> f64 {
    if base > 0.0 {
        let weight = model.shrinkage(prior.variance, prior.mean, base);
        prior.mean + weight * (event / base - prior.mean)
    } else {
        prior.mean
    }
}

/// Global empirical Bayes estimates.
#[derive(Debug, Clone, PartialEq)]
pub struct GlobalEb {
    /// The prior of the whole map.
    pub prior: Prior,
    /// Smoothed rate of every area.
    pub smoothed: Vec<f64>,
}

/// Global empirical Bayes smoothing (Marshall 1991; binomial: Martuzzi & Elliott 1996).
///
/// Worked example (Poisson): e = (1, 3), b = (10, 10) → m = 0.2, s² = 0.01, b̄ = 10,
/// φ = 0.01 − 0.02 < 0 → 0, so both areas take 0.2.
///
/// Returns `None` when the total base is 0 (no prior can be estimated).
pub fn global_eb(events: &[f64], base: &[f64], model: Model) -> Option<GlobalEb> {
    let prior = prior_of(events, base, 0..events.len(), model)?;
    let smoothed = events
        .iter()
        .zip(base)
        .map(|(&e, &b)| smooth(e, b, &prior, model))
        .collect();
    Some(GlobalEb { prior, smoothed })
}

/// Local (spatial) empirical Bayes estimates.
#[derive(Debug, Clone, PartialEq)]
pub struct LocalEb {
    /// The local prior of each area (`None` where its neighbourhood has no base).
    pub priors: Vec<Option<Prior>>,
    /// Smoothed rate of each area (`None` where the local prior is undefined).
    pub smoothed: Vec<Option<f64>>,
}

impl LocalEb {
    /// Areas whose local prior variance was negative and set to 0.
    pub fn truncated(&self) -> usize {
        self.priors
            .iter()
            .flatten()
            .filter(|p| p.truncated())
            .count()
    }

    /// Areas whose neighbourhood (the area and its neighbours) has a total base of 0.
    pub fn undefined(&self) -> usize {
        self.priors.iter().filter(|p| p.is_none()).count()
    }
}

/// Local empirical Bayes smoothing (Marshall 1991, local): the prior of area i is estimated on
/// i and its neighbours, with the spread measured around i's local mean (see the module docs).
///
/// An island's neighbourhood is itself: m = rᵢ, so it keeps its raw rate.
///
/// # Panics
/// Never for valid input: `neighbours` must have one list per area, with indices < `events.len()`
/// (checked at the border by the caller).
pub fn local_eb(events: &[f64], base: &[f64], neighbours: &Neighbours, model: Model) -> LocalEb {
    let priors: Vec<Option<Prior>> = neighbours
        .lists
        .iter()
        .enumerate()
        .map(|(i, list)| {
            let members = std::iter::once(i).chain(list.iter().map(|&j| j as usize));
            prior_of(events, base, members, model)
        })
        .collect();
    let smoothed = priors
        .iter()
        .enumerate()
        .map(|(i, prior)| prior.map(|p| smooth(events[i], base[i], &p, model)))
        .collect();
    LocalEb { priors, smoothed }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn chain(n: usize) -> Neighbours {
        Neighbours {
            lists: (0..n)
                .map(|i| {
                    let mut l = Vec::new();
                    if i > 0 {
                        l.push(i as u32 - 1);
                    }
                    if i + 1 < n {
                        l.push(i as u32 + 1);
                    }
                    l
                })
                .collect(),
        }
    }

    /// Hand-worked: e = (1, 3), b = (10, 10): m = 0.2, s² = 0.01, φ = 0.01 − 0.2/10 < 0 → 0.
    #[test]
    fn negative_prior_variance_is_truncated_to_zero_and_every_area_takes_the_mean() {
        let got =
            global_eb(&[1.0, 3.0], &[10.0, 10.0], Model::Poisson).expect("defined in this test");
        assert_relative_eq!(got.prior.mean, 0.2, max_relative = 1e-15);
        assert_relative_eq!(
            got.prior.variance_estimate,
            0.01 - 0.02,
            max_relative = 1e-12
        );
        assert!(got.prior.truncated());
        assert_eq!(got.prior.variance, 0.0);
        for s in &got.smoothed {
            assert_relative_eq!(*s, 0.2, max_relative = 1e-15);
        }
    }

    /// Hand-worked: e = (0, 100), b = (100, 100): m = 0.5, s² = 0.25, b̄ = 100,
    /// φ = 0.25 − 0.005 = 0.245, C = 0.245 / (0.245 + 0.005) = 0.98 →
    /// θ = (0.5 − 0.98·0.5, 0.5 + 0.98·0.5) = (0.01, 0.99).
    #[test]
    fn poisson_shrinkage_matches_a_hand_worked_case() {
        let got = global_eb(&[0.0, 100.0], &[100.0, 100.0], Model::Poisson)
            .expect("defined in this test");
        assert_relative_eq!(got.prior.variance, 0.245, max_relative = 1e-12);
        assert_relative_eq!(got.smoothed[0], 0.01, max_relative = 1e-12);
        assert_relative_eq!(got.smoothed[1], 0.99, max_relative = 1e-12);
    }

    /// Zero base: no raw rate, left out of the prior, smoothed to the prior mean.
    #[test]
    fn a_zero_base_area_has_no_raw_rate_and_takes_the_prior_mean() {
        let events = [2.0, 8.0, 0.0, 30.0];
        let base = [100.0, 100.0, 0.0, 300.0];
        let raw = raw_rates(&events, &base, Model::Poisson);
        assert_eq!(raw[2], None);
        let with = global_eb(&events, &base, Model::Poisson).expect("defined in this test");
        let without = global_eb(&[2.0, 8.0, 30.0], &[100.0, 100.0, 300.0], Model::Poisson)
            .expect("defined in this test");
        assert_eq!(with.prior, without.prior);
        assert_eq!(with.smoothed[2], with.prior.mean);
        assert_relative_eq!(with.prior.mean, 40.0 / 500.0, max_relative = 1e-15);
        // All bases zero: no prior at all.
        assert!(global_eb(&[0.0, 0.0], &[0.0, 0.0], Model::Poisson).is_none());
        // Local: the zero-base area's neighbourhood still has a base, so it takes its local mean.
        let local = local_eb(&events, &base, &chain(4), Model::Poisson);
        let prior = local.priors[2].expect("defined in this test");
        assert_relative_eq!(prior.mean, 38.0 / 400.0, max_relative = 1e-15);
        assert_eq!(local.smoothed[2], Some(prior.mean));
    }

    /// Every smoothed rate lies between the raw rate and the prior mean, for both models.
    #[test]
    fn smoothed_rates_lie_between_raw_rate_and_prior_mean() {
        let events = [0.0, 3.0, 9.0, 1.0, 40.0, 12.0, 5.0, 0.0];
        let base = [50.0, 60.0, 40.0, 200.0, 90.0, 100.0, 30.0, 10.0];
        for model in [Model::Poisson, Model::Binomial] {
            let global = global_eb(&events, &base, model).expect("defined in this test");
            assert!(!global.prior.truncated());
            let local = local_eb(&events, &base, &chain(8), model);
            for i in 0..events.len() {
                let r = events[i] / base[i];
                let check = |smoothed: f64, mean: f64| {
                    let (lo, hi) = if r < mean { (r, mean) } else { (mean, r) };
                    assert!(
                        smoothed >= lo - 1e-15 && smoothed <= hi + 1e-15,
                        "{model:?} area {i}: {smoothed} not in [{lo}, {hi}]"
                    );
                };
                check(global.smoothed[i], global.prior.mean);
                check(
                    local.smoothed[i].expect("defined in this test"),
                    local.priors[i].expect("defined in this test").mean,
                );
            }
        }
    }

    /// An island is its own neighbourhood: its local prior mean is its own rate, which it keeps.
    #[test]
    fn an_island_keeps_its_raw_rate_and_an_all_zero_neighbourhood_is_undefined() {
        let neighbours = Neighbours {
            lists: vec![vec![1], vec![0], vec![], vec![]],
        };
        let local = local_eb(
            &[3.0, 5.0, 7.0, 0.0],
            &[10.0, 20.0, 70.0, 0.0],
            &neighbours,
            Model::Poisson,
        );
        assert_relative_eq!(
            local.smoothed[2].expect("defined in this test"),
            0.1,
            max_relative = 1e-15
        );
        assert_eq!(local.smoothed[3], None);
        assert_eq!(local.undefined(), 1);
    }

    /// Standard errors: Poisson √e / b, binomial √(r(1 − r) / b).
    #[test]
    fn raw_rate_standard_errors() {
        let poisson = raw_rates(&[4.0], &[100.0], Model::Poisson);
        assert_eq!(poisson[0], Some((0.04, 0.02)));
        let binomial = raw_rates(&[25.0], &[100.0], Model::Binomial);
        let (r, se) = binomial[0].expect("defined in this test");
        assert_relative_eq!(r, 0.25, max_relative = 1e-15);
        assert_relative_eq!(se, (0.25f64 * 0.75 / 100.0).sqrt(), max_relative = 1e-15);
    }
}
