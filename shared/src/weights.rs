//! Spatial weights: neighbour lists of areas (contiguity, k nearest, distance band), their
//! summaries, and row or binary standardisation.
//!
//! API contract (implementation in progress): every list is sorted and holds no self-link;
//! `lists[i]` are the indices (into the areas' order) of the neighbours of area `i`.

/// Neighbour lists of `n` areas.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Neighbours {
    /// `lists[i]`: sorted indices of the neighbours of area `i` (no self-links).
    pub lists: Vec<Vec<u32>>,
}

impl Neighbours {
    /// Number of areas.
    pub fn len(&self) -> usize {
        self.lists.len()
    }

    /// True when there are no areas.
    pub fn is_empty(&self) -> bool {
        self.lists.is_empty()
    }

    /// Areas without neighbours.
    pub fn islands(&self) -> Vec<usize> {
        (0..self.lists.len()).filter(|&i| self.lists[i].is_empty()).collect()
    }
}
