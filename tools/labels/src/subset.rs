//! A simple random sample of the hand-coded records (`--reference-sample`): to simulate hand
//! coding a subset when a reference label exists for every record (e.g. synthetic data), or to
//! hold part of the hand coding out.

use rand::Rng;

/// Keeps `size` of the records that have a reference class, drawn without replacement
/// (partial Fisher–Yates shuffle) by `rng`; clears the others. All are kept when fewer exist.
pub fn keep_sample<R: Rng>(reference: &mut [Option<usize>], size: usize, rng: &mut R) {
    let mut coded: Vec<usize> = (0..reference.len())
        .filter(|&i| reference[i].is_some())
        .collect();
    if coded.len() <= size {
        return;
    }
    for i in 0..size {
        let j = rng.random_range(i..coded.len());
        coded.swap(i, j);
    }
    for &i in &coded[size..] {
        reference[i] = None;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use stance_core::montecarlo::replicate_rng;

    #[test]
    fn keeps_exactly_the_sample_size_among_coded_records() {
        let mut reference: Vec<Option<usize>> =
            (0..100).map(|i| (i % 4 != 0).then_some(i % 3)).collect();
        keep_sample(&mut reference, 20, &mut replicate_rng(7, 0));
        assert_eq!(reference.iter().flatten().count(), 20);
        assert!(reference.iter().step_by(4).all(Option::is_none));
        let mut again: Vec<Option<usize>> =
            (0..100).map(|i| (i % 4 != 0).then_some(i % 3)).collect();
        keep_sample(&mut again, 20, &mut replicate_rng(7, 0));
        assert_eq!(reference, again);
    }
}
