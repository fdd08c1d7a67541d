//! The invented "Veldmark" stance scenario: a fixed invented geography (region, towns,
//! districts, planted zones and burst) and records drawn from a seed. Records cluster around
//! towns as in a Thomas process (Diggle 2013, Statistical Analysis of Spatial and
//! Spatio-Temporal Point Patterns, 3rd ed.) and carry two classifier labels with Dawid & Skene
//! (1979) label noise. Pure: no files, no clock, no global randomness.

mod authors;
mod digits;
mod districts;
mod geocoding;
mod labels;
mod places;
mod population;
mod records;
mod rings;
mod stance;
mod texts;
mod time;

#[cfg(test)]
mod tests;

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

pub use districts::District;
pub use geocoding::Quality;
pub use places::{PlantedBurst, PlantedZone, Town};
pub use records::Record;
pub use stance::stance_label;

/// Size and seed of a scenario.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ScenarioParams {
    /// Total number of records, burst and duplicates included.
    pub points: usize,
    /// Seed of the `ChaCha8Rng` that draws the records.
    pub seed: u64,
}

/// One generated scenario with its planted ground truth.
#[derive(Clone, Debug, PartialEq)]
pub struct Scenario {
    /// Geolocated posts, `points` of them.
    pub records: Vec<Record>,
    /// Invented towns the records cluster around.
    pub towns: Vec<Town>,
    /// Jittered-grid districts with shared edges, then one island district.
    pub districts: Vec<District>,
    /// Discs where the odds of one stance are multiplied.
    pub zones: Vec<PlantedZone>,
    /// Extra records in one month around one town.
    pub burst: PlantedBurst,
    /// Classifier A: row = true class (oppose, neutral, support), column = label; rows sum to 1.
    pub confusion_a: [[f64; 3]; 3],
    /// Classifier B, noisier than A; same layout.
    pub confusion_b: [[f64; 3]; 3],
}

/// Generates the Veldmark scenario: fixed invented geography, records drawn from
/// `ChaCha8Rng::seed_from_u64(params.seed)` in one pass (O(points) time and memory).
///
/// Each record picks a town with probability ∝ population and an isotropic normal
/// offset with σ = 800 m + 15 m·√population (5 % are uniform rural background instead),
/// is 30 % neutral, and otherwise supports with log-odds
/// 1.5·(lon + 140.4) + 0.5·(lat − 35) + Σ favours·ln(strength) over the zones that
/// contain its true location. The reported location then follows its geocoding quality.
pub fn generate(params: &ScenarioParams) -> Scenario {
    let towns = places::invented_towns();
    let kernels: Vec<population::TownKernel> =
        towns.iter().map(population::TownKernel::new).collect();
    let grid = districts::Grid::new();
    let districts = districts::build_districts(&grid, &kernels);
    let zones = places::planted_zones();
    let burst = places::planted_burst(&towns);
    let sampler = records::Sampler {
        towns: &towns,
        kernels: &kernels,
        empty_cell: grid.empty_cell(),
        zones: &zones,
        burst: &burst,
    };
    let mut rng = ChaCha8Rng::seed_from_u64(params.seed);
    let records = sampler.draw_records(&mut rng, params.points);
    Scenario {
        records,
        towns,
        districts,
        zones,
        burst,
        confusion_a: labels::CONFUSION_A,
        confusion_b: labels::CONFUSION_B,
    }
}
