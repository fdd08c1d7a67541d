//! The true stance of a record: neutral at a fixed share, otherwise support or oppose with
//! log-odds that follow a smooth east–north trend, raised or lowered inside the planted zones.

use rand::Rng;
use rand_chacha::ChaCha8Rng;

use super::places::{PlantedZone, REGION_CENTRE_LAT, REGION_CENTRE_LON};
use crate::geodesy::{metres_between, EARTH_RADIUS_M};

pub(super) const NEUTRAL_SHARE: f64 = 0.30;
/// Support-vs-oppose log-odds per degree east of the region centre (±0.9 at the edges).
const LOG_ODDS_PER_DEGREE_EAST: f64 = 1.5;
/// Support-vs-oppose log-odds per degree north of the region centre (±0.2 at the edges).
const LOG_ODDS_PER_DEGREE_NORTH: f64 = 0.5;

/// Name of a stance by sign: negative "oppose", 0 "neutral", positive "support".
pub fn stance_label(v: i8) -> &'static str {
    match v {
        v if v < 0 => "oppose",
        0 => "neutral",
        _ => "support",
    }
}

/// The true stance (−1, 0, 1) of a record whose true location is (`lon`, `lat`).
pub fn draw_stance(rng: &mut ChaCha8Rng, zones: &[PlantedZone], lon: f64, lat: f64) -> i8 {
    if rng.random::<f64>() < NEUTRAL_SHARE {
        return 0;
    }
    let mut log_odds = LOG_ODDS_PER_DEGREE_EAST * (lon - REGION_CENTRE_LON)
        + LOG_ODDS_PER_DEGREE_NORTH * (lat - REGION_CENTRE_LAT);
    for zone in zones {
        // The great-circle distance is at least the meridian arc R·|Δφ|, a cheap
        // exact pre-test that skips the haversine for most zones.
        let meridian_arc_m = EARTH_RADIUS_M * (lat - zone.lat).to_radians().abs();
        if meridian_arc_m <= zone.radius_m
            && metres_between(lon, lat, zone.lon, zone.lat) <= zone.radius_m
        {
            log_odds += f64::from(zone.favours) * zone.strength.ln();
        }
    }
    let p_support = 1.0 / (1.0 + (-log_odds).exp());
    if rng.random::<f64>() < p_support {
        1
    } else {
        -1
    }
}
