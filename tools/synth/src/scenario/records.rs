//! The point process of the records, drawn in one pass: each record's true location (around a
//! town, in the rural background or in the burst), its reported location, stance, labels, time,
//! author and text; a small share repeats the previous record exactly.

use std::f64::consts::PI;

use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use serde::Serialize;

use super::authors::AuthorStream;
use super::districts::EmptyCell;
use super::geocoding::{draw_quality, reported_location, Quality};
use super::labels::{draw_label, CONFUSION_A, CONFUSION_B};
use super::places::{
    PlantedBurst, PlantedZone, Town, BURST_TOWN, REGION_EAST_LON, REGION_NORTH_LAT,
    REGION_SOUTH_LAT, REGION_WEST_LON,
};
use super::population::{cumulative_populations, TownKernel, RURAL_SHARE};
use super::stance::draw_stance;
use super::texts::draw_text;
use super::time::draw_time;
use crate::geodesy::{degrees_per_metre, metres_between};

/// Share of records that repeat the previous record exactly.
const DUPLICATE_SHARE: f64 = 0.005;

/// One invented post.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Record {
    /// Reported longitude (degrees), after geocoding at `quality`.
    pub lon: f64,
    /// Reported latitude (degrees).
    pub lat: f64,
    /// True stance: −1 oppose, 0 neutral, 1 support.
    pub stance: i8,
    /// Label from classifier A, drawn from `confusion_a[stance + 1]`.
    pub label_a: i8,
    /// Label from classifier B, drawn from `confusion_b[stance + 1]`.
    pub label_b: i8,
    /// Posting time, UTC seconds within 2026-01-01 .. 2026-09-30.
    pub time_unix_s: i64,
    /// Author id such as `acct-00042`.
    pub author: String,
    /// Geocoding quality of `lon`/`lat`.
    pub quality: Quality,
    /// Short invented post text.
    pub text: String,
    /// Index into `Scenario::towns` of the source (or, for rural records, nearest) town.
    pub town: usize,
}

/// What records are drawn from: the towns and their kernels, the unpopulated cell, the
/// planted zones and the burst.
pub struct Sampler<'a> {
    pub towns: &'a [Town],
    pub kernels: &'a [TownKernel],
    pub empty_cell: EmptyCell,
    pub zones: &'a [PlantedZone],
    pub burst: &'a PlantedBurst,
}

/// A record's true and reported location.
struct Located {
    true_lon: f64,
    true_lat: f64,
    town: usize,
    quality: Quality,
    lon: f64,
    lat: f64,
}

impl Sampler<'_> {
    /// `points` records from `rng`, exactly round(points × burst share) of them burst extras.
    pub fn draw_records(&self, rng: &mut ChaCha8Rng, points: usize) -> Vec<Record> {
        let town_cumulative = cumulative_populations(self.towns);
        let mut authors = AuthorStream::new();
        let burst_count = ((points as f64) * self.burst.extra_share).round() as usize;
        let mut records: Vec<Record> = Vec::with_capacity(points);
        for index in 0..points {
            let burst_slot = is_burst_slot(index, burst_count, points);
            // Duplicates never take a burst slot, so the burst count stays exact.
            if !burst_slot {
                let duplicate = records
                    .last()
                    .filter(|_| rng.random::<f64>() < DUPLICATE_SHARE)
                    .cloned();
                if let Some(copy) = duplicate {
                    records.push(copy);
                    continue;
                }
            }
            records.push(self.record(rng, burst_slot, &town_cumulative, &mut authors));
        }
        records
    }

    fn allowed(&self, lon: f64, lat: f64) -> bool {
        lon > REGION_WEST_LON
            && lon < REGION_EAST_LON
            && lat > REGION_SOUTH_LAT
            && lat < REGION_NORTH_LAT
            && !self.empty_cell.contains(lon, lat)
    }

    fn record(
        &self,
        rng: &mut ChaCha8Rng,
        burst: bool,
        town_cumulative: &[u64],
        authors: &mut AuthorStream,
    ) -> Record {
        let at = self.locate(rng, burst, town_cumulative);
        let stance = draw_stance(rng, self.zones, at.true_lon, at.true_lat);
        let row = (stance + 1) as usize;
        let label_a = draw_label(rng, &CONFUSION_A[row]);
        let label_b = draw_label(rng, &CONFUSION_B[row]);
        let time_unix_s = draw_time(rng, burst.then_some(self.burst.month));
        let author = authors.next_author(rng);
        let text = draw_text(rng, stance);
        Record {
            lon: at.lon,
            lat: at.lat,
            stance,
            label_a,
            label_b,
            time_unix_s,
            author,
            quality: at.quality,
            text,
            town: at.town,
        }
    }

    /// Rejection keeps every record (true and reported) inside the region and out of the
    /// unpopulated district; the rejected mass is a fraction of a percent.
    fn locate(&self, rng: &mut ChaCha8Rng, burst: bool, town_cumulative: &[u64]) -> Located {
        loop {
            let (true_lon, true_lat, town) = if burst {
                self.burst_location(rng)
            } else if rng.random::<f64>() < RURAL_SHARE {
                self.rural_location(rng)
            } else {
                self.town_location(rng, town_cumulative)
            };
            if !self.allowed(true_lon, true_lat) {
                continue;
            }
            let quality = draw_quality(rng);
            let centre = (self.towns[town].lon, self.towns[town].lat);
            let (lon, lat) = reported_location(rng, quality, (true_lon, true_lat), centre);
            if self.allowed(lon, lat) {
                return Located {
                    true_lon,
                    true_lat,
                    town,
                    quality,
                    lon,
                    lat,
                };
            }
        }
    }

    fn town_location(&self, rng: &mut ChaCha8Rng, town_cumulative: &[u64]) -> (f64, f64, usize) {
        let total = town_cumulative.last().copied().unwrap_or(0);
        let ticket = rng.random_range(0..total.max(1));
        let town = town_cumulative
            .partition_point(|&c| c <= ticket)
            .min(self.kernels.len() - 1);
        let kernel = &self.kernels[town];
        let dx: f64 = rng.sample(StandardNormal);
        let dy: f64 = rng.sample(StandardNormal);
        (
            kernel.lon + dx * kernel.sigma_lon_deg,
            kernel.lat + dy * kernel.sigma_lat_deg,
            town,
        )
    }

    fn rural_location(&self, rng: &mut ChaCha8Rng) -> (f64, f64, usize) {
        let lon = rng.random_range(REGION_WEST_LON..REGION_EAST_LON);
        let lat = rng.random_range(REGION_SOUTH_LAT..REGION_NORTH_LAT);
        (lon, lat, self.nearest_town(lon, lat))
    }

    fn burst_location(&self, rng: &mut ChaCha8Rng) -> (f64, f64, usize) {
        // Uniform on the disc: radius ∝ √u.
        let radius_m = self.burst.radius_m * rng.random::<f64>().sqrt();
        let angle = 2.0 * PI * rng.random::<f64>();
        let (lon_per_m, lat_per_m) = degrees_per_metre(self.burst.lat);
        (
            self.burst.lon + radius_m * angle.cos() * lon_per_m,
            self.burst.lat + radius_m * angle.sin() * lat_per_m,
            BURST_TOWN,
        )
    }

    fn nearest_town(&self, lon: f64, lat: f64) -> usize {
        let mut best = (0, f64::INFINITY);
        for (index, town) in self.towns.iter().enumerate() {
            let d = metres_between(lon, lat, town.lon, town.lat);
            if d < best.1 {
                best = (index, d);
            }
        }
        best.0
    }
}

/// Exactly `burst_count` of `points` slots, evenly spread over the record order.
fn is_burst_slot(index: usize, burst_count: usize, points: usize) -> bool {
    let before = (index as u128 * burst_count as u128) / points as u128;
    let after = ((index + 1) as u128 * burst_count as u128) / points as u128;
    after > before
}
