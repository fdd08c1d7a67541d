//! Geocoding quality: how precisely a record's reported location follows its true one.

use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use serde::Serialize;

use super::places::{REGION_CENTRE_LAT, REGION_CENTRE_LON};
use crate::geodesy::degrees_per_metre;

/// Cumulative shares of Exact, Street and Town; the rest is District.
const QUALITY_CUMULATIVE: [f64; 3] = [0.45, 0.70, 0.95];
/// Standard deviation of a street geocode's offset, per axis.
const STREET_JITTER_M: f64 = 60.0;

/// Geocoding quality of a record's coordinates, best to worst.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Quality {
    /// Device coordinates, exact.
    Exact,
    /// Geocoded to a street, a few tens of metres off.
    Street,
    /// Snapped to the town centre, so many records share one point.
    Town,
    /// Known only to a district or coarser: snapped to the region centre.
    District,
}

impl Quality {
    /// Lower-case name: `exact`, `street`, `town` or `district`.
    pub fn as_str(self) -> &'static str {
        match self {
            Quality::Exact => "exact",
            Quality::Street => "street",
            Quality::Town => "town",
            Quality::District => "district",
        }
    }
}

pub fn draw_quality(rng: &mut ChaCha8Rng) -> Quality {
    let u: f64 = rng.random();
    if u < QUALITY_CUMULATIVE[0] {
        Quality::Exact
    } else if u < QUALITY_CUMULATIVE[1] {
        Quality::Street
    } else if u < QUALITY_CUMULATIVE[2] {
        Quality::Town
    } else {
        Quality::District
    }
}

/// The location a record reports at `quality`, given its true location and its town's centre.
pub fn reported_location(
    rng: &mut ChaCha8Rng,
    quality: Quality,
    true_location: (f64, f64),
    town_centre: (f64, f64),
) -> (f64, f64) {
    let (true_lon, true_lat) = true_location;
    match quality {
        Quality::Exact => (true_lon, true_lat),
        Quality::Street => {
            let (lon_per_m, lat_per_m) = degrees_per_metre(true_lat);
            let dx: f64 = rng.sample(StandardNormal);
            let dy: f64 = rng.sample(StandardNormal);
            (
                true_lon + dx * STREET_JITTER_M * lon_per_m,
                true_lat + dy * STREET_JITTER_M * lat_per_m,
            )
        }
        Quality::Town => town_centre,
        Quality::District => (REGION_CENTRE_LON, REGION_CENTRE_LAT),
    }
}
