//! The invented geography: the region's extent, its towns, the planted stance zones and the
//! planted burst. All names and numbers are invented; the region lies in an empty stretch of
//! the North Pacific so that no real place is implied.

use serde::Serialize;

/// Western edge of the invented region (degrees longitude, WGS 84).
pub const REGION_WEST_LON: f64 = -141.0;
/// Eastern edge of the invented region; the sea and the island lie east of it.
pub const REGION_EAST_LON: f64 = -139.8;
/// Southern edge of the invented region (degrees latitude).
pub const REGION_SOUTH_LAT: f64 = 34.6;
/// Northern edge of the invented region (degrees latitude).
pub const REGION_NORTH_LAT: f64 = 35.4;
/// Longitude that `Quality::District` records are snapped to.
pub const REGION_CENTRE_LON: f64 = -140.4;
/// Latitude that `Quality::District` records are snapped to.
pub const REGION_CENTRE_LAT: f64 = 35.0;

/// (name, lon, lat, population); all invented.
const TOWN_TABLE: [(&str, f64, f64, u32); 11] = [
    ("Quellport", -140.02, 35.02, 118_000),
    ("Brisselholm", -140.25, 35.22, 34_000),
    ("Quennisholt", -140.18, 34.78, 27_000),
    ("Tallowspire", -140.48, 35.10, 19_500),
    ("Gorrowmere", -140.63, 34.84, 12_400),
    ("Saltrenne", -139.90, 34.70, 8_200),
    ("Varrowfen", -140.78, 35.26, 6_100),
    ("Eskerhollow", -139.88, 35.30, 5_300),
    ("Lindquay", -140.88, 34.98, 4_300),
    ("Corvethal", -140.40, 34.68, 3_200),
    ("Mirabrook", -140.55, 35.32, 2_400),
];

/// Index into the town table of the town the burst surrounds.
pub const BURST_TOWN: usize = 1;
const BURST_RADIUS_M: f64 = 5_000.0;
const BURST_MONTH: u32 = 6;
const BURST_EXTRA_SHARE: f64 = 0.04;

/// An invented town.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Town {
    /// Invented name.
    pub name: String,
    /// Centre longitude (degrees).
    pub lon: f64,
    /// Centre latitude (degrees).
    pub lat: f64,
    /// Invented population.
    pub population: u32,
}

/// A disc where the odds of one stance are multiplied.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PlantedZone {
    /// Invented name.
    pub name: String,
    /// Centre longitude (degrees).
    pub lon: f64,
    /// Centre latitude (degrees).
    pub lat: f64,
    /// Radius in metres (haversine, see [`crate::geodesy::metres_between`]).
    pub radius_m: f64,
    /// 1 favours support, −1 favours oppose.
    pub favours: i8,
    /// Multiplier of the odds of the favoured stance against the other.
    pub strength: f64,
}

/// Extra records concentrated in one month within a disc around one town.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PlantedBurst {
    /// Centre longitude (degrees), a town centre.
    pub lon: f64,
    /// Centre latitude (degrees).
    pub lat: f64,
    /// Radius of the disc the true locations are drawn from, metres.
    pub radius_m: f64,
    /// Month of 2026, 1..=9.
    pub month: u32,
    /// Share of all records that are burst extras: round(points × extra_share) of them.
    pub extra_share: f64,
}

/// The towns of the table, in table order (largest first).
pub fn invented_towns() -> Vec<Town> {
    TOWN_TABLE
        .iter()
        .map(|&(name, lon, lat, population)| Town {
            name: name.to_string(),
            lon,
            lat,
            population,
        })
        .collect()
}

/// Two zones favouring support and two favouring opposition, each multiplying the odds by 3.
pub fn planted_zones() -> Vec<PlantedZone> {
    let zone = |name: &str, lon, lat, radius_m, favours| PlantedZone {
        name: name.to_string(),
        lon,
        lat,
        radius_m,
        favours,
        strength: 3.0,
    };
    vec![
        zone("Quellport Harbour Front", -139.96, 35.06, 6_000.0, 1),
        zone("Quennisholt Flats", -140.17, 34.77, 8_000.0, 1),
        zone("Tallowspire Ridge", -140.49, 35.12, 9_000.0, -1),
        zone("Gorrowmere Moor", -140.64, 34.85, 10_000.0, -1),
    ]
}

/// The burst around [`BURST_TOWN`].
pub fn planted_burst(towns: &[Town]) -> PlantedBurst {
    let town = &towns[BURST_TOWN];
    PlantedBurst {
        lon: town.lon,
        lat: town.lat,
        radius_m: BURST_RADIUS_M,
        month: BURST_MONTH,
        extra_share: BURST_EXTRA_SHARE,
    }
}
