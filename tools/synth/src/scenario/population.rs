//! Where people live: a normal kernel around each town, as the offspring of a Thomas process
//! (Diggle 2013, Statistical Analysis of Spatial and Spatio-Temporal Point Patterns, 3rd ed.),
//! and a thin uniform rural background.

use std::f64::consts::PI;

use super::places::Town;
use crate::geodesy::degrees_per_metre;

/// Share of records (and of census people) in the uniform rural background.
pub const RURAL_SHARE: f64 = 0.05;

/// A town's normal kernel, with σ = 800 m + 15 m·√population converted to degrees once.
pub struct TownKernel {
    pub lon: f64,
    pub lat: f64,
    pub population: f64,
    pub sigma_lon_deg: f64,
    pub sigma_lat_deg: f64,
}

impl TownKernel {
    pub fn new(town: &Town) -> Self {
        let population = f64::from(town.population);
        let sigma_m = 800.0 + 15.0 * population.sqrt();
        let (lon_per_m, lat_per_m) = degrees_per_metre(town.lat);
        Self {
            lon: town.lon,
            lat: town.lat,
            population,
            sigma_lon_deg: sigma_m * lon_per_m,
            sigma_lat_deg: sigma_m * lat_per_m,
        }
    }

    /// People per square degree at a point.
    pub fn density_per_deg2(&self, lon: f64, lat: f64) -> f64 {
        let zx = (lon - self.lon) / self.sigma_lon_deg;
        let zy = (lat - self.lat) / self.sigma_lat_deg;
        self.population * (-0.5 * (zx * zx + zy * zy)).exp()
            / (2.0 * PI * self.sigma_lon_deg * self.sigma_lat_deg)
    }
}

/// Running totals of the towns' populations, for drawing a town ∝ population.
pub fn cumulative_populations(towns: &[Town]) -> Vec<u64> {
    towns
        .iter()
        .scan(0_u64, |total, town| {
            *total += u64::from(town.population);
            Some(*total)
        })
        .collect()
}
