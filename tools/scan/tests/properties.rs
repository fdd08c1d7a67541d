//! Property tests (proptest): the log-likelihood ratio of a window is never negative
//! (Kulldorff 1997: Λ ≥ 1 because the window's maximum likelihood includes the null), for the
//! Bernoulli, Poisson and ordinal models, in every direction.

use proptest::prelude::*;
use stance_scan::models::{Bernoulli, Direction, Multinomial, Ordinal, Poisson};

fn direction(i: u8) -> Direction {
    [Direction::High, Direction::Low, Direction::Both][usize::from(i % 3)]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 512, ..ProptestConfig::default() })]

    #[test]
    fn bernoulli_llr_is_never_negative(total in 2u64..2000, cases_share in 0.0f64..1.0, records_share in 0.0f64..1.0, inside_share in 0.0f64..1.0, d in 0u8..3) {
        let cases = ((total as f64) * cases_share) as u64;
        let records = ((total as f64) * records_share) as u64;
        // Cases inside cannot exceed the window's records nor the cases in all.
        let inside = (((records.min(cases)) as f64) * inside_share) as u64;
        prop_assume!(records - inside <= total - cases);
        let (llr, _) = Bernoulli::new(total, cases, direction(d)).ratio(records, inside);
        prop_assert!(llr >= 0.0 && llr.is_finite(), "ln Λ = {llr}");
    }

    #[test]
    fn poisson_llr_is_never_negative(cases in 1u64..5000, expected_share in 0.001f64..0.999, inside_share in 0.0f64..1.0, d in 0u8..3) {
        let expected = cases as f64 * expected_share;
        let inside = (cases as f64 * inside_share) as u64;
        let (llr, _) = Poisson::new(cases, direction(d)).ratio(expected, inside);
        prop_assert!(llr >= 0.0 && llr.is_finite(), "ln Λ = {llr}");
    }

    #[test]
    fn ordinal_llr_is_never_negative(totals in prop::array::uniform3(0u64..400), shares in prop::array::uniform3(0.0f64..1.0), d in 0u8..3) {
        prop_assume!(totals.iter().sum::<u64>() >= 2);
        let inside: Vec<u32> = totals.iter().zip(shares).map(|(t, s)| ((*t as f64) * s) as u32).collect();
        let (llr, _) = Ordinal::new(totals, direction(d)).ratio(&inside);
        prop_assert!(llr >= 0.0 && llr.is_finite(), "ln Λ = {llr}");
    }

    #[test]
    fn multinomial_llr_is_never_negative_and_bounds_the_ordinal(totals in prop::array::uniform3(0u64..400), shares in prop::array::uniform3(0.0f64..1.0)) {
        // The multinomial maximum is over all (p, q); the ordinal one over an ordered subset
        // of the same likelihood (Jung, Kulldorff & Richard 2010; Jung, Kulldorff & Klassen 2007).
        prop_assume!(totals.iter().sum::<u64>() >= 2);
        let inside: Vec<u32> = totals.iter().zip(shares).map(|(t, s)| ((*t as f64) * s) as u32).collect();
        let llr = Multinomial::new(totals).ratio(&inside);
        prop_assert!(llr >= 0.0 && llr.is_finite(), "ln Λ = {llr}");
        let (ordinal, _) = Ordinal::new(totals, Direction::Both).ratio(&inside);
        prop_assert!(llr >= ordinal - 1e-9 * ordinal.max(1.0), "{llr} < {ordinal}");
    }
}
