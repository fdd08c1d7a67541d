//! The invented census districts: a jittered grid of quads with shared edges over the region
//! (one of them unpopulated), plus one island off the coast. The census of each quad is the
//! town kernels' mass inside it, the rural background and a small floor.

use std::f64::consts::PI;

use geo_types::Polygon;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::places::{REGION_EAST_LON, REGION_NORTH_LAT, REGION_SOUTH_LAT, REGION_WEST_LON};
use super::population::{TownKernel, RURAL_SHARE};
use super::rings::{closed_polygon, ring_contains, shoelace_area_deg2};

pub(super) const GRID_COLUMNS: usize = 16;
pub(super) const GRID_ROWS: usize = 13;
/// At most 0.2 of a cell per axis keeps every quad convex: the worst corner has
/// cross product 0.6² − 0.4² > 0 in cell units.
const VERTEX_JITTER_CELLS: f64 = 0.2;
/// (column, row) of the grid cell that nobody lives in; far from every town and
/// from the region centre, so no snapped coordinate can land in it.
const EMPTY_CELL: (usize, usize) = (1, 1);
/// The geography is one fixed invented place; only the records depend on the seed.
const GEOGRAPHY_SEED: u64 = 0x5645_4c44_4d41_524b;
/// Invented census people per district on top of the kernel mass.
const CENSUS_FLOOR: f64 = 40.0;
/// Sub-samples per quad axis when integrating the census kernel.
const CENSUS_SUBSAMPLES: usize = 6;

const DISTRICT_PREFIXES: [&str; GRID_COLUMNS] = [
    "Ael", "Brom", "Cael", "Dorv", "Esk", "Fael", "Grim", "Hald", "Ivr", "Jost", "Karn", "Lyr",
    "Morv", "Nyr", "Orv", "Pell",
];
const DISTRICT_SUFFIXES: [&str; GRID_ROWS] = [
    "anth", "ebrin", "ivel", "oska", "undar", "ethra", "ovin", "arrel", "imsk", "ulde", "eroth",
    "aven", "iska",
];
const ISLAND_NAME: &str = "Skerrowen Isle";
const ISLAND_CENTRE: (f64, f64) = (-139.71, 34.88);
const ISLAND_HALF_WIDTH_DEG: (f64, f64) = (0.025, 0.018);
const ISLAND_POPULATION: u32 = 640;

/// An invented census district.
#[derive(Clone, Debug, PartialEq)]
pub struct District {
    /// Code such as `VD-001`.
    pub code: String,
    /// Invented name.
    pub name: String,
    /// Closed, counter-clockwise exterior ring in lon/lat; no holes.
    pub polygon: Polygon<f64>,
    /// Invented census count (not the record count).
    pub population: u32,
}

/// Jittered (columns + 1) × (rows + 1) vertex lattice over the region; boundary
/// vertices stay on the bounding box so the cells tile it exactly.
pub struct Grid {
    vertices: Vec<[f64; 2]>,
}

impl Grid {
    pub fn new() -> Self {
        let mut rng = ChaCha8Rng::seed_from_u64(GEOGRAPHY_SEED);
        let (cell_lon, cell_lat) = cell_size_deg();
        let mut vertices = Vec::with_capacity((GRID_COLUMNS + 1) * (GRID_ROWS + 1));
        for row in 0..=GRID_ROWS {
            for column in 0..=GRID_COLUMNS {
                let mut lon = REGION_WEST_LON + column as f64 * cell_lon;
                let mut lat = REGION_SOUTH_LAT + row as f64 * cell_lat;
                if column == GRID_COLUMNS {
                    lon = REGION_EAST_LON;
                }
                if row == GRID_ROWS {
                    lat = REGION_NORTH_LAT;
                }
                let interior = column > 0 && column < GRID_COLUMNS && row > 0 && row < GRID_ROWS;
                if interior {
                    lon += rng.random_range(-VERTEX_JITTER_CELLS..VERTEX_JITTER_CELLS) * cell_lon;
                    lat += rng.random_range(-VERTEX_JITTER_CELLS..VERTEX_JITTER_CELLS) * cell_lat;
                }
                vertices.push([lon, lat]);
            }
        }
        Self { vertices }
    }

    fn vertex(&self, column: usize, row: usize) -> [f64; 2] {
        self.vertices[row * (GRID_COLUMNS + 1) + column]
    }

    /// Corners south-west, south-east, north-east, north-west: counter-clockwise.
    fn cell_ring(&self, column: usize, row: usize) -> [[f64; 2]; 4] {
        [
            self.vertex(column, row),
            self.vertex(column + 1, row),
            self.vertex(column + 1, row + 1),
            self.vertex(column, row + 1),
        ]
    }

    /// The unpopulated cell.
    pub fn empty_cell(&self) -> EmptyCell {
        EmptyCell::new(self.cell_ring(EMPTY_CELL.0, EMPTY_CELL.1))
    }
}

fn cell_size_deg() -> (f64, f64) {
    (
        (REGION_EAST_LON - REGION_WEST_LON) / GRID_COLUMNS as f64,
        (REGION_NORTH_LAT - REGION_SOUTH_LAT) / GRID_ROWS as f64,
    )
}

/// The unpopulated cell, with its bounding box as a cheap pre-test.
pub struct EmptyCell {
    ring: [[f64; 2]; 4],
    min: [f64; 2],
    max: [f64; 2],
}

impl EmptyCell {
    fn new(ring: [[f64; 2]; 4]) -> Self {
        let mut min = ring[0];
        let mut max = ring[0];
        for [x, y] in ring {
            min = [min[0].min(x), min[1].min(y)];
            max = [max[0].max(x), max[1].max(y)];
        }
        Self { ring, min, max }
    }

    pub fn contains(&self, lon: f64, lat: f64) -> bool {
        lon >= self.min[0]
            && lon <= self.max[0]
            && lat >= self.min[1]
            && lat <= self.max[1]
            && ring_contains(&self.ring, lon, lat)
    }
}

/// The grid's districts row by row from the south-west, then the island; codes `VD-001`….
pub fn build_districts(grid: &Grid, kernels: &[TownKernel]) -> Vec<District> {
    let town_population: f64 = kernels.iter().map(|k| k.population).sum();
    let region_area_deg2 =
        (REGION_EAST_LON - REGION_WEST_LON) * (REGION_NORTH_LAT - REGION_SOUTH_LAT);
    let rural_per_deg2 = town_population * RURAL_SHARE / (1.0 - RURAL_SHARE) / region_area_deg2;

    let mut districts = Vec::with_capacity(GRID_COLUMNS * GRID_ROWS + 1);
    // The syllable arrays have one entry per row and per column.
    for (row, suffix) in DISTRICT_SUFFIXES.iter().enumerate() {
        for (column, prefix) in DISTRICT_PREFIXES.iter().enumerate() {
            let ring = grid.cell_ring(column, row);
            let population = if (column, row) == EMPTY_CELL {
                0
            } else {
                let people = kernel_mass(&ring, kernels)
                    + rural_per_deg2 * shoelace_area_deg2(&ring)
                    + CENSUS_FLOOR;
                people.round() as u32
            };
            districts.push(District {
                code: format!("VD-{:03}", districts.len() + 1),
                name: format!("{prefix}{suffix}"),
                polygon: closed_polygon(&ring),
                population,
            });
        }
    }
    districts.push(District {
        code: format!("VD-{:03}", districts.len() + 1),
        name: ISLAND_NAME.to_string(),
        polygon: closed_polygon(&island_ring()),
        population: ISLAND_POPULATION,
    });
    districts
}

/// Town-kernel people in a quad: midpoint rule on the bilinear map of the unit square,
/// weighted by its Jacobian determinant.
fn kernel_mass(ring: &[[f64; 2]; 4], kernels: &[TownKernel]) -> f64 {
    let [sw, se, ne, nw] = *ring;
    let n = CENSUS_SUBSAMPLES;
    let mut mass = 0.0;
    for i in 0..n {
        let u = (i as f64 + 0.5) / n as f64;
        for j in 0..n {
            let v = (j as f64 + 0.5) / n as f64;
            let point = |axis: usize| {
                (1.0 - u) * (1.0 - v) * sw[axis]
                    + u * (1.0 - v) * se[axis]
                    + u * v * ne[axis]
                    + (1.0 - u) * v * nw[axis]
            };
            let d_du = |axis: usize| (1.0 - v) * (se[axis] - sw[axis]) + v * (ne[axis] - nw[axis]);
            let d_dv = |axis: usize| (1.0 - u) * (nw[axis] - sw[axis]) + u * (ne[axis] - se[axis]);
            let jacobian = (d_du(0) * d_dv(1) - d_du(1) * d_dv(0)).abs();
            let (lon, lat) = (point(0), point(1));
            let density: f64 = kernels.iter().map(|k| k.density_per_deg2(lon, lat)).sum();
            mass += density * jacobian;
        }
    }
    mass / (n * n) as f64
}

/// Small heptagon east of the coast, outside the grid; counter-clockwise.
fn island_ring() -> Vec<[f64; 2]> {
    const SIDES: usize = 7;
    (0..SIDES)
        .map(|k| {
            let angle = 2.0 * PI * k as f64 / SIDES as f64;
            [
                ISLAND_CENTRE.0 + ISLAND_HALF_WIDTH_DEG.0 * angle.cos(),
                ISLAND_CENTRE.1 + ISLAND_HALF_WIDTH_DEG.1 * angle.sin(),
            ]
        })
        .collect()
}
