//! Invented "Veldmark" stance scenario: town-centred Gaussian clusters as in a Thomas process (Diggle 2013, Statistical Analysis of Spatial and Spatio-Temporal Point Patterns, 3rd ed.), planted stance zones and burst, Dawid & Skene (1979) label noise.

use geo_types::{Coord, LineString, Polygon};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use serde::Serialize;
use std::f64::consts::PI;

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
/// First second of the scenario, 2026-01-01T00:00:00Z.
pub const TIME_START_UNIX_S: i64 = 1_767_225_600;
/// Last second of the scenario, 2026-09-30T23:59:59Z.
pub const TIME_END_UNIX_S: i64 = 1_790_812_799;
/// Mean Earth radius R₁ of GRS 80 (Moritz 2000, Geodetic Reference System 1980).
pub const EARTH_RADIUS_M: f64 = 6_371_008.8;

const SECONDS_PER_DAY: i64 = 86_400;
/// Days from 2026-01-01 to the first day of each month, January to October.
const MONTH_START_DAY: [i64; 10] = [0, 31, 59, 90, 120, 151, 181, 212, 243, 273];

const GRID_COLUMNS: usize = 16;
const GRID_ROWS: usize = 13;
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

const AUTHOR_PREFIX: &str = "acct-";
const AUTHOR_DIGITS: usize = 5;
const RURAL_SHARE: f64 = 0.05;
const NEUTRAL_SHARE: f64 = 0.30;
const DUPLICATE_SHARE: f64 = 0.005;
/// Share of texts drawn from any stance's templates, so text alone is not a perfect label.
const OFF_STANCE_TEXT_SHARE: f64 = 0.15;
/// Cumulative shares of Exact, Street and Town; the rest is District.
const QUALITY_CUMULATIVE: [f64; 3] = [0.45, 0.70, 0.95];
const STREET_JITTER_M: f64 = 60.0;
/// Support-vs-oppose log-odds per degree east of the region centre (±0.9 at the edges).
const LOG_ODDS_PER_DEGREE_EAST: f64 = 1.5;
/// Support-vs-oppose log-odds per degree north of the region centre (±0.2 at the edges).
const LOG_ODDS_PER_DEGREE_NORTH: f64 = 0.5;
/// Share of all records posted by each prolific author.
const PROLIFIC_SHARES: [f64; 5] = [0.020, 0.017, 0.015, 0.012, 0.010];
/// Cumulative probabilities that an ordinary author posts 1, 2 (the rest: 3) records.
const ORDINARY_POSTS_CUMULATIVE: [f64; 2] = [0.5, 0.8];

/// (name, lon, lat, population); all invented.
const TOWN_TABLE: [(&str, f64, f64, u32); 11] = [
    ("Quellport", -140.02, 35.02, 118_000),
    ("Brisselholm", -140.25, 35.22, 34_000),
    ("Ostravel", -140.18, 34.78, 27_000),
    ("Tallowspire", -140.48, 35.10, 19_500),
    ("Gorrowmere", -140.63, 34.84, 12_400),
    ("Saltrenne", -139.90, 34.70, 8_200),
    ("Varrowfen", -140.78, 35.26, 6_100),
    ("Eskerhollow", -139.88, 35.30, 5_300),
    ("Lindquay", -140.88, 34.98, 4_300),
    ("Corvethal", -140.40, 34.68, 3_200),
    ("Mirabrook", -140.55, 35.32, 2_400),
];

const BURST_TOWN: usize = 1;
const BURST_RADIUS_M: f64 = 5_000.0;
const BURST_MONTH: u32 = 6;
const BURST_EXTRA_SHARE: f64 = 0.04;

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

/// (text before the number, text after it), by true stance.
const OPPOSE_TEMPLATES: [(&str, &str); 7] = [
    ("The levy adds ", " a month to my bill. Vote no."),
    ("Day ", " of asking who actually gains from the wind levy."),
    ("", " turbines on the horizon and we pay for them? Oppose."),
    (
        "Fishing grounds lost, levy up ",
        " percent. Not in our name.",
    ),
    ("Meeting #", ": the levy is a tax on the coast. Against."),
    ("Scrap the offshore levy. Signature ", "."),
    ("I count ", " reasons to reject the wind levy."),
];
const NEUTRAL_TEMPLATES: [(&str, &str); 6] = [
    ("Public hearing on the wind-farm levy, session ", "."),
    ("Read the levy proposal up to page ", ". Still undecided."),
    ("Question ", " for the council: how is the levy collected?"),
    ("Ferry late by ", " min, levy debate on the radio."),
    ("Poll ", ": has anyone costed the levy both ways?"),
    ("Levy explainer part ", " is out."),
];
const SUPPORT_TEMPLATES: [(&str, &str); 7] = [
    ("Back the levy: ", " local jobs at the new harbour yard."),
    ("Clean power for ", " thousand homes. Yes to the levy!"),
    ("The wind levy pays back in ", " years. Worth it."),
    ("Proud to back the offshore levy, day ", "."),
    ("", " of us marched for the wind levy today."),
    ("Turbines over tankers. Levy yes, pledge ", "."),
    ("Our kids get ", " years of cleaner air. Support the levy."),
];

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

/// A disc where the odds of one stance are multiplied.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PlantedZone {
    /// Invented name.
    pub name: String,
    /// Centre longitude (degrees).
    pub lon: f64,
    /// Centre latitude (degrees).
    pub lat: f64,
    /// Radius in metres (haversine, see [`metres_between`]).
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

/// Name of a stance by sign: negative "oppose", 0 "neutral", positive "support".
pub fn stance_label(v: i8) -> &'static str {
    match v {
        v if v < 0 => "oppose",
        0 => "neutral",
        _ => "support",
    }
}

/// Great-circle distance in metres by the haversine formula, R = 6 371 008.8 m:
/// d = 2R·asin √(sin²(Δφ/2) + cos φ₁ cos φ₂ sin²(Δλ/2)).
/// One degree of latitude is R·π/180 ≈ 111 195.08 m. Sinnott (1984), Sky and Telescope 68(2), 159.
pub fn metres_between(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> f64 {
    let phi1 = lat1.to_radians();
    let phi2 = lat2.to_radians();
    let half_dphi = 0.5 * (phi2 - phi1);
    let half_dlambda = 0.5 * (lon2 - lon1).to_radians();
    let a = half_dphi.sin().powi(2) + phi1.cos() * phi2.cos() * half_dlambda.sin().powi(2);
    2.0 * EARTH_RADIUS_M * a.sqrt().min(1.0).asin()
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
    let towns = invented_towns();
    let kernels: Vec<TownKernel> = towns.iter().map(TownKernel::new).collect();
    let grid = Grid::new();
    let districts = build_districts(&grid, &kernels);
    let zones = planted_zones();
    let burst = planted_burst(&towns);
    let confusion_a = [[0.86, 0.10, 0.04], [0.08, 0.84, 0.08], [0.03, 0.12, 0.85]];
    let confusion_b = [[0.72, 0.20, 0.08], [0.15, 0.68, 0.17], [0.07, 0.23, 0.70]];

    let sampler = Sampler {
        towns: &towns,
        kernels: &kernels,
        town_cumulative: cumulative_populations(&towns),
        empty_cell: EmptyCell::new(grid.cell_ring(EMPTY_CELL.0, EMPTY_CELL.1)),
        zones: &zones,
        burst: &burst,
        confusion_a: &confusion_a,
        confusion_b: &confusion_b,
    };
    let mut rng = ChaCha8Rng::seed_from_u64(params.seed);
    let mut authors = AuthorStream::new();
    let burst_count = ((params.points as f64) * burst.extra_share).round() as usize;
    let mut records: Vec<Record> = Vec::with_capacity(params.points);
    for index in 0..params.points {
        let burst_slot = is_burst_slot(index, burst_count, params.points);
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
        records.push(sampler.record(&mut rng, burst_slot, &mut authors));
    }

    Scenario {
        records,
        towns,
        districts,
        zones,
        burst,
        confusion_a,
        confusion_b,
    }
}

fn invented_towns() -> Vec<Town> {
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

fn planted_zones() -> Vec<PlantedZone> {
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
        zone("Ostravel Flats", -140.17, 34.77, 8_000.0, 1),
        zone("Tallowspire Ridge", -140.49, 35.12, 9_000.0, -1),
        zone("Gorrowmere Moor", -140.64, 34.85, 10_000.0, -1),
    ]
}

fn planted_burst(towns: &[Town]) -> PlantedBurst {
    let town = &towns[BURST_TOWN];
    PlantedBurst {
        lon: town.lon,
        lat: town.lat,
        radius_m: BURST_RADIUS_M,
        month: BURST_MONTH,
        extra_share: BURST_EXTRA_SHARE,
    }
}

fn metres_per_degree_lat() -> f64 {
    EARTH_RADIUS_M * PI / 180.0
}

/// Degrees per metre east and north at a latitude (local equirectangular plane).
fn degrees_per_metre(lat: f64) -> (f64, f64) {
    let per_lat = 1.0 / metres_per_degree_lat();
    (per_lat / lat.to_radians().cos(), per_lat)
}

/// A town's normal kernel, with σ converted to degrees once.
struct TownKernel {
    lon: f64,
    lat: f64,
    population: f64,
    sigma_lon_deg: f64,
    sigma_lat_deg: f64,
}

impl TownKernel {
    fn new(town: &Town) -> Self {
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
    fn density_per_deg2(&self, lon: f64, lat: f64) -> f64 {
        let zx = (lon - self.lon) / self.sigma_lon_deg;
        let zy = (lat - self.lat) / self.sigma_lat_deg;
        self.population * (-0.5 * (zx * zx + zy * zy)).exp()
            / (2.0 * PI * self.sigma_lon_deg * self.sigma_lat_deg)
    }
}

fn cumulative_populations(towns: &[Town]) -> Vec<u64> {
    towns
        .iter()
        .scan(0_u64, |total, town| {
            *total += u64::from(town.population);
            Some(*total)
        })
        .collect()
}

/// Jittered (columns + 1) × (rows + 1) vertex lattice over the region; boundary
/// vertices stay on the bounding box so the cells tile it exactly.
struct Grid {
    vertices: Vec<[f64; 2]>,
}

impl Grid {
    fn new() -> Self {
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
}

fn cell_size_deg() -> (f64, f64) {
    (
        (REGION_EAST_LON - REGION_WEST_LON) / GRID_COLUMNS as f64,
        (REGION_NORTH_LAT - REGION_SOUTH_LAT) / GRID_ROWS as f64,
    )
}

/// Crossing-number test; points exactly on an edge are measure-zero here because
/// no snapped coordinate lies near the only ring this is used for.
fn ring_contains(ring: &[[f64; 2]; 4], lon: f64, lat: f64) -> bool {
    let mut inside = false;
    for (i, j) in [(0, 3), (1, 0), (2, 1), (3, 2)] {
        let [xi, yi] = ring[i];
        let [xj, yj] = ring[j];
        if (yi > lat) != (yj > lat) && lon < (xj - xi) * (lat - yi) / (yj - yi) + xi {
            inside = !inside;
        }
    }
    inside
}

fn shoelace_area_deg2(ring: &[[f64; 2]]) -> f64 {
    let n = ring.len();
    0.5 * (0..n)
        .map(|i| {
            let [x1, y1] = ring[i];
            let [x2, y2] = ring[(i + 1) % n];
            x1 * y2 - x2 * y1
        })
        .sum::<f64>()
}

fn closed_polygon(ring: &[[f64; 2]]) -> Polygon<f64> {
    let mut coords: Vec<Coord<f64>> = ring.iter().map(|&[x, y]| Coord { x, y }).collect();
    if let Some(&first) = coords.first() {
        coords.push(first);
    }
    Polygon::new(LineString::new(coords), Vec::new())
}

/// The unpopulated cell, with its bounding box as a cheap pre-test.
struct EmptyCell {
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

    fn contains(&self, lon: f64, lat: f64) -> bool {
        lon >= self.min[0]
            && lon <= self.max[0]
            && lat >= self.min[1]
            && lat <= self.max[1]
            && ring_contains(&self.ring, lon, lat)
    }
}

fn build_districts(grid: &Grid, kernels: &[TownKernel]) -> Vec<District> {
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

/// Exactly `burst_count` of `points` slots, evenly spread over the record order.
fn is_burst_slot(index: usize, burst_count: usize, points: usize) -> bool {
    let before = (index as u128 * burst_count as u128) / points as u128;
    let after = ((index + 1) as u128 * burst_count as u128) / points as u128;
    after > before
}

/// Authors in one pass: five prolific ids (1..=5) at fixed shares, and ordinary ids
/// (6, 7, …) that each post 1–3 consecutive records.
struct AuthorStream {
    next_ordinary: u64,
    current: u64,
    remaining: u32,
}

impl AuthorStream {
    fn new() -> Self {
        Self {
            next_ordinary: PROLIFIC_SHARES.len() as u64 + 1,
            current: 0,
            remaining: 0,
        }
    }

    fn next_id(&mut self, rng: &mut ChaCha8Rng) -> u64 {
        let u: f64 = rng.random();
        let mut cumulative = 0.0;
        for (k, share) in PROLIFIC_SHARES.iter().enumerate() {
            cumulative += share;
            if u < cumulative {
                return k as u64 + 1;
            }
        }
        if self.remaining == 0 {
            self.current = self.next_ordinary;
            self.next_ordinary += 1;
            let v: f64 = rng.random();
            self.remaining = 1 + ORDINARY_POSTS_CUMULATIVE
                .iter()
                .filter(|&&c| v >= c)
                .count() as u32;
        }
        self.remaining -= 1;
        self.current
    }
}

struct Sampler<'a> {
    towns: &'a [Town],
    kernels: &'a [TownKernel],
    town_cumulative: Vec<u64>,
    empty_cell: EmptyCell,
    zones: &'a [PlantedZone],
    burst: &'a PlantedBurst,
    confusion_a: &'a [[f64; 3]; 3],
    confusion_b: &'a [[f64; 3]; 3],
}

impl Sampler<'_> {
    fn allowed(&self, lon: f64, lat: f64) -> bool {
        lon > REGION_WEST_LON
            && lon < REGION_EAST_LON
            && lat > REGION_SOUTH_LAT
            && lat < REGION_NORTH_LAT
            && !self.empty_cell.contains(lon, lat)
    }

    fn record(&self, rng: &mut ChaCha8Rng, burst: bool, authors: &mut AuthorStream) -> Record {
        // Rejection keeps every record (true and reported) inside the region and out of
        // the unpopulated district; the rejected mass is a fraction of a percent.
        let (true_lon, true_lat, town, quality, lon, lat) = loop {
            let (true_lon, true_lat, town) = if burst {
                self.burst_location(rng)
            } else if rng.random::<f64>() < RURAL_SHARE {
                self.rural_location(rng)
            } else {
                self.town_location(rng)
            };
            if !self.allowed(true_lon, true_lat) {
                continue;
            }
            let quality = draw_quality(rng);
            let (lon, lat) = match quality {
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
                Quality::Town => (self.towns[town].lon, self.towns[town].lat),
                Quality::District => (REGION_CENTRE_LON, REGION_CENTRE_LAT),
            };
            if self.allowed(lon, lat) {
                break (true_lon, true_lat, town, quality, lon, lat);
            }
        };

        let stance = self.draw_stance(rng, true_lon, true_lat);
        let row = (stance + 1) as usize;
        let label_a = draw_label(rng, &self.confusion_a[row]);
        let label_b = draw_label(rng, &self.confusion_b[row]);
        let time_unix_s = if burst {
            let month = self.burst.month as usize;
            let start = TIME_START_UNIX_S + MONTH_START_DAY[month - 1] * SECONDS_PER_DAY;
            let end = TIME_START_UNIX_S + MONTH_START_DAY[month] * SECONDS_PER_DAY - 1;
            rng.random_range(start..=end)
        } else {
            rng.random_range(TIME_START_UNIX_S..=TIME_END_UNIX_S)
        };
        let mut author = String::with_capacity(AUTHOR_PREFIX.len() + AUTHOR_DIGITS + 2);
        author.push_str(AUTHOR_PREFIX);
        push_zero_padded(&mut author, authors.next_id(rng), AUTHOR_DIGITS);
        let text = draw_text(rng, stance);
        Record {
            lon,
            lat,
            stance,
            label_a,
            label_b,
            time_unix_s,
            author,
            quality,
            text,
            town,
        }
    }

    fn town_location(&self, rng: &mut ChaCha8Rng) -> (f64, f64, usize) {
        let total = self.town_cumulative.last().copied().unwrap_or(0);
        let ticket = rng.random_range(0..total.max(1));
        let town = self
            .town_cumulative
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

    fn draw_stance(&self, rng: &mut ChaCha8Rng, lon: f64, lat: f64) -> i8 {
        if rng.random::<f64>() < NEUTRAL_SHARE {
            return 0;
        }
        let mut log_odds = LOG_ODDS_PER_DEGREE_EAST * (lon - REGION_CENTRE_LON)
            + LOG_ODDS_PER_DEGREE_NORTH * (lat - REGION_CENTRE_LAT);
        for zone in self.zones {
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
}

fn draw_quality(rng: &mut ChaCha8Rng) -> Quality {
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

/// Label drawn from one confusion row (oppose, neutral, support).
fn draw_label(rng: &mut ChaCha8Rng, row: &[f64; 3]) -> i8 {
    let u: f64 = rng.random();
    if u < row[0] {
        -1
    } else if u < row[0] + row[1] {
        0
    } else {
        1
    }
}

fn draw_text(rng: &mut ChaCha8Rng, stance: i8) -> String {
    let text_stance = if rng.random::<f64>() < OFF_STANCE_TEXT_SHARE {
        rng.random_range(-1_i8..=1)
    } else {
        stance
    };
    let templates: &[(&str, &str)] = match text_stance {
        -1 => &OPPOSE_TEMPLATES,
        0 => &NEUTRAL_TEMPLATES,
        _ => &SUPPORT_TEMPLATES,
    };
    let (before, after) = templates[rng.random_range(0..templates.len())];
    let number: u32 = rng.random_range(1..=99);
    // Exact capacity: `format!` would reserve twice the literal length, which at
    // ten million records is hundreds of megabytes of slack.
    let mut text = String::with_capacity(before.len() + 2 + after.len());
    text.push_str(before);
    push_zero_padded(&mut text, u64::from(number), 1);
    text.push_str(after);
    text
}

/// Appends `value` in decimal, left-padded with zeros to at least `width` digits.
fn push_zero_padded(out: &mut String, value: u64, width: usize) {
    let mut digits = [0_u8; 20];
    let mut start = digits.len();
    let mut rest = value;
    loop {
        start -= 1;
        digits[start] = b'0' + (rest % 10) as u8;
        rest /= 10;
        if rest == 0 {
            break;
        }
    }
    for _ in (digits.len() - start)..width {
        out.push('0');
    }
    out.extend(digits[start..].iter().map(|&d| char::from(d)));
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scenario(points: usize, seed: u64) -> Scenario {
        generate(&ScenarioParams { points, seed })
    }

    fn exterior(district: &District) -> Vec<[f64; 2]> {
        district
            .polygon
            .exterior()
            .coords()
            .map(|c| [c.x, c.y])
            .collect()
    }

    fn share<F: Fn(&Record) -> bool, G: Fn(&Record) -> bool>(
        records: &[Record],
        select: F,
        count: G,
    ) -> (f64, usize) {
        let selected: Vec<&Record> = records.iter().filter(|r| select(r)).collect();
        let hits = selected.iter().filter(|r| count(r)).count();
        (hits as f64 / selected.len().max(1) as f64, selected.len())
    }

    #[test]
    fn same_seed_same_records_and_different_seed_differs() {
        let a = scenario(5_000, 7);
        let b = scenario(5_000, 7);
        let c = scenario(5_000, 8);
        assert_eq!(a, b);
        assert_ne!(a.records, c.records);
        // The geography is fixed; only records depend on the seed.
        assert_eq!(a.districts, c.districts);
    }

    #[test]
    fn counts_bounds_and_times() {
        for points in [0, 1, 3, 20_000] {
            let s = scenario(points, 11);
            assert_eq!(s.records.len(), points);
            for r in &s.records {
                assert!(r.lon > REGION_WEST_LON && r.lon < REGION_EAST_LON, "{r:?}");
                assert!(
                    r.lat > REGION_SOUTH_LAT && r.lat < REGION_NORTH_LAT,
                    "{r:?}"
                );
                assert!((TIME_START_UNIX_S..=TIME_END_UNIX_S).contains(&r.time_unix_s));
                assert!(r.town < s.towns.len());
                assert!((-1..=1).contains(&r.stance));
                assert!(!r.text.is_empty() && r.text.len() < 80, "{}", r.text);
            }
        }
    }

    #[test]
    fn towns_are_plausible() {
        let s = scenario(0, 1);
        assert!((8..=12).contains(&s.towns.len()));
        assert!(s
            .towns
            .iter()
            .all(|t| (2_000..=120_000).contains(&t.population)));
        assert_eq!(
            s.towns.iter().filter(|t| t.population >= 100_000).count(),
            1
        );
    }

    #[test]
    fn haversine_worked_values() {
        // One degree of latitude: R·π/180 = 6 371 008.8 × 0.017453292519943295 m.
        let one_degree = metres_between(-140.0, 35.0, -140.0, 36.0);
        assert!((one_degree - 111_195.08).abs() < 0.01, "{one_degree}");
        // Along the equator the same holds for longitude.
        let equator = metres_between(0.0, 0.0, 1.0, 0.0);
        assert!((equator - 111_195.08).abs() < 0.01, "{equator}");
        assert_eq!(metres_between(-140.4, 35.0, -140.4, 35.0), 0.0);
    }

    #[test]
    fn support_and_oppose_zones_are_detectable() {
        let s = scenario(50_000, 3);
        for zone in &s.zones {
            let inside =
                |r: &Record| metres_between(r.lon, r.lat, zone.lon, zone.lat) <= zone.radius_m;
            let favoured = |r: &Record| r.stance == zone.favours;
            let (share_in, n_in) = share(&s.records, inside, favoured);
            let (share_out, _) = share(&s.records, |r| !inside(r), favoured);
            assert!(n_in > 1_000, "{}: only {n_in} records inside", zone.name);
            // Odds × 3 moves the share by ≈ 0.15–0.2; 0.08 leaves room for the
            // dilution by snapped records and ≈ 0.01 sampling error at n > 1000.
            assert!(
                share_in > share_out + 0.08,
                "{}: inside {share_in:.3} vs outside {share_out:.3}",
                zone.name
            );
        }
        assert_eq!(s.zones.iter().filter(|z| z.favours == 1).count(), 2);
        assert!(s.zones.iter().any(|z| z.favours == -1));
    }

    #[test]
    fn stance_and_quality_shares() {
        let s = scenario(50_000, 5);
        let n = s.records.len() as f64;
        let neutral = s.records.iter().filter(|r| r.stance == 0).count() as f64 / n;
        // 0.30 ± 4 standard errors (σ ≈ 0.002 at n = 50 000).
        assert!((neutral - 0.30).abs() < 0.01, "{neutral}");
        for (quality, expected) in [
            (Quality::Exact, 0.45),
            (Quality::Street, 0.25),
            (Quality::Town, 0.25),
            (Quality::District, 0.05),
        ] {
            let got = s.records.iter().filter(|r| r.quality == quality).count() as f64 / n;
            assert!(
                (got - expected).abs() < 0.015,
                "{}: {got}",
                quality.as_str()
            );
        }
        for r in s.records.iter().filter(|r| r.quality == Quality::Town) {
            assert_eq!((r.lon, r.lat), (s.towns[r.town].lon, s.towns[r.town].lat));
        }
        for r in s.records.iter().filter(|r| r.quality == Quality::District) {
            assert_eq!((r.lon, r.lat), (REGION_CENTRE_LON, REGION_CENTRE_LAT));
        }
    }

    #[test]
    fn burst_is_concentrated_in_its_month_and_disc() {
        let s = scenario(50_000, 9);
        let b = &s.burst;
        let month_start =
            |m: u32| TIME_START_UNIX_S + MONTH_START_DAY[m as usize - 1] * SECONDS_PER_DAY;
        let mut per_month = [0_usize; 9];
        for r in &s.records {
            if metres_between(r.lon, r.lat, b.lon, b.lat) <= b.radius_m {
                let m = (1..=9).rev().find(|&m| r.time_unix_s >= month_start(m));
                if let Some(m) = m {
                    per_month[m as usize - 1] += 1;
                }
            }
        }
        let in_burst = per_month[b.month as usize - 1];
        let other_max = per_month
            .iter()
            .enumerate()
            .filter(|&(i, _)| i + 1 != b.month as usize)
            .map(|(_, &c)| c)
            .max()
            .unwrap_or(0);
        // ≈ 0.04 × 50 000 × 0.7 unsnapped ≈ 1 400 extra records against a few hundred.
        assert!(in_burst > 2 * other_max + 500, "{per_month:?}");
    }

    #[test]
    fn authors_and_duplicates() {
        let s = scenario(50_000, 13);
        let n = s.records.len() as f64;
        let mut counts = std::collections::BTreeMap::<&str, usize>::new();
        for r in &s.records {
            *counts.entry(r.author.as_str()).or_default() += 1;
        }
        let prolific = counts.values().filter(|&&c| c as f64 >= 0.008 * n).count();
        assert_eq!(prolific, 5);
        let largest = counts.values().copied().max().unwrap_or(0) as f64 / n;
        assert!(largest <= 0.025, "{largest}");
        let small = counts.values().filter(|&&c| c <= 3).count() as f64 / counts.len() as f64;
        assert!(small > 0.95, "{small}");
        let duplicates = s
            .records
            .windows(2)
            .filter(|w| w[0].author == w[1].author && w[0].text == w[1].text)
            .count() as f64
            / n;
        // 0.005 minus the burst slots, ± 4 standard errors (σ ≈ 0.0003).
        assert!((duplicates - 0.005).abs() < 0.0015, "{duplicates}");
    }

    #[test]
    fn districts_tile_the_region_with_an_island_and_an_empty_cell() {
        let s = scenario(50_000, 17);
        let grid = &s.districts[..s.districts.len() - 1];
        let island = &s.districts[s.districts.len() - 1];
        assert!((150..=300).contains(&grid.len()));
        for d in &s.districts {
            let ring = exterior(d);
            assert!(ring.len() >= 4);
            assert_eq!(ring.first(), ring.last(), "{} not closed", d.code);
            assert!(
                shoelace_area_deg2(&ring[..ring.len() - 1]) > 0.0,
                "{} not CCW",
                d.code
            );
            assert!(d.polygon.interiors().is_empty());
        }
        // Every grid vertex lies in the bounding box, the island entirely east of it,
        // so the island touches nothing.
        for d in grid {
            for [x, y] in exterior(d) {
                assert!((REGION_WEST_LON..=REGION_EAST_LON).contains(&x));
                assert!((REGION_SOUTH_LAT..=REGION_NORTH_LAT).contains(&y));
            }
        }
        assert!(exterior(island).iter().all(|&[x, _]| x > REGION_EAST_LON));
        // Neighbours share edges exactly.
        for row in 0..GRID_ROWS {
            for column in 0..GRID_COLUMNS - 1 {
                let west = exterior(&grid[row * GRID_COLUMNS + column]);
                let east = exterior(&grid[row * GRID_COLUMNS + column + 1]);
                assert_eq!((west[1], west[2]), (east[0], east[3]));
            }
        }
        // The cells tile the box: areas add up to its area (exact up to rounding).
        let total: f64 = grid
            .iter()
            .map(|d| {
                let ring = exterior(d);
                shoelace_area_deg2(&ring[..ring.len() - 1])
            })
            .sum();
        assert!((total - 1.2 * 0.8).abs() < 1e-9, "{total}");

        let empty: Vec<&District> = s.districts.iter().filter(|d| d.population == 0).collect();
        assert_eq!(empty.len(), 1);
        let ring = exterior(empty[0]);
        let quad = [ring[0], ring[1], ring[2], ring[3]];
        assert!(s
            .records
            .iter()
            .all(|r| !ring_contains(&quad, r.lon, r.lat)));
        assert!(island.population > 0);
        // Codes are unique and in order.
        for (i, d) in s.districts.iter().enumerate() {
            assert_eq!(d.code, format!("VD-{:03}", i + 1));
        }
        let mut names: Vec<&str> = s.districts.iter().map(|d| d.name.as_str()).collect();
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), s.districts.len());
        // The census follows the towns: the most populous district is the big city's.
        let city = &s.towns[0];
        let top = grid.iter().max_by_key(|d| d.population).map(exterior);
        let top = top.map(|r| [r[0], r[1], r[2], r[3]]);
        assert!(top.is_some_and(|q| {
            let dist = metres_between(
                0.25 * q.iter().map(|p| p[0]).sum::<f64>(),
                0.25 * q.iter().map(|p| p[1]).sum::<f64>(),
                city.lon,
                city.lat,
            );
            dist < 10_000.0
        }));
    }

    #[test]
    fn confusion_rows_sum_to_one_and_labels_follow_them() {
        let s = scenario(50_000, 21);
        for matrix in [&s.confusion_a, &s.confusion_b] {
            for row in matrix {
                assert!((row.iter().sum::<f64>() - 1.0).abs() < 1e-12);
            }
        }
        let diagonal_mean = |m: &[[f64; 3]; 3]| (m[0][0] + m[1][1] + m[2][2]) / 3.0;
        assert!(diagonal_mean(&s.confusion_a) > diagonal_mean(&s.confusion_b) + 0.1);
        let n = s.records.len() as f64;
        let agreement_a = s.records.iter().filter(|r| r.label_a == r.stance).count() as f64 / n;
        let agreement_b = s.records.iter().filter(|r| r.label_b == r.stance).count() as f64 / n;
        // Diagonals differ by ≤ 0.02 between classes and sampling σ ≈ 0.002, so 0.02 holds.
        assert!(
            (agreement_a - diagonal_mean(&s.confusion_a)).abs() < 0.02,
            "{agreement_a}"
        );
        assert!(
            (agreement_b - diagonal_mean(&s.confusion_b)).abs() < 0.02,
            "{agreement_b}"
        );
    }

    #[test]
    fn zero_padding_matches_format() {
        for (value, width) in [
            (0, 1),
            (7, 1),
            (42, 5),
            (99_999, 5),
            (123_456, 5),
            (u64::MAX, 5),
        ] {
            let mut got = String::new();
            push_zero_padded(&mut got, value, width);
            assert_eq!(got, format!("{value:0width$}"));
        }
    }

    #[test]
    fn labels_and_quality_names() {
        assert_eq!(stance_label(-1), "oppose");
        assert_eq!(stance_label(0), "neutral");
        assert_eq!(stance_label(1), "support");
        assert_eq!(Quality::Exact.as_str(), "exact");
        assert_eq!(Quality::Street.as_str(), "street");
        assert_eq!(Quality::Town.as_str(), "town");
        assert_eq!(Quality::District.as_str(), "district");
    }
}
