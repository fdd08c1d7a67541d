//! Property tests (proptest): an empirical Bayes rate lies between the raw rate and the prior
//! mean (Marshall 1991: θᵢ = m + Cᵢ (rᵢ − m) with 0 ≤ Cᵢ ≤ 1).

use proptest::prelude::*;
use stance_rates::eb::{global_eb, Model};

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn smoothed_rates_lie_between_raw_rate_and_prior_mean(
        areas in prop::collection::vec((0u32..500, 0.0f64..1.0), 2..40),
        binomial in any::<bool>(),
    ) {
        let base: Vec<f64> = areas.iter().map(|a| f64::from(a.0)).collect();
        // Events never exceed the base, as for shares of records.
        let events: Vec<f64> = areas.iter().map(|a| (f64::from(a.0) * a.1).floor()).collect();
        let model = if binomial { Model::Binomial } else { Model::Poisson };
        let Some(eb) = global_eb(&events, &base, model) else {
            prop_assert!(base.iter().sum::<f64>() == 0.0);
            return Ok(());
        };
        let m = eb.prior.mean;
        for (i, theta) in eb.smoothed.iter().enumerate() {
            if base[i] == 0.0 {
                prop_assert_eq!(*theta, m);
                continue;
            }
            let r = events[i] / base[i];
            // 1e-12 absolute: rates are in [0, 1]; the bound is exact up to rounding.
            prop_assert!(*theta >= r.min(m) - 1e-12 && *theta <= r.max(m) + 1e-12, "area {i}: θ {theta} outside [{r}, {m}]");
        }
    }
}
