//! stance-synth: generates the invented scenario (region, towns, districts, records with planted
//! zones) used by the demo, the tests and the benchmarks.

pub mod defects;
pub mod generate;

use std::f64::consts::PI;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};

use defects::Defect;
use generate::{generate, metres_between, stance_label, ScenarioParams, EARTH_RADIUS_M};

/// Parameters of stance-synth.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct SynthParams {
    /// Number of records to generate (up to 10,000,000 for benchmarks).
    #[arg(long, value_name = "N", default_value_t = 20_000)]
    pub points: usize,

    /// Also write the records as CSV (lon, lat, stance, labels, time, author, text, quality).
    #[arg(long, value_name = "FILE")]
    pub csv: Option<std::path::PathBuf>,

    /// Share of CSV rows given a typical defect (missing or swapped coordinates, label typo,
    /// local time format, blank time), so the import checks have work to do; the GeoPackage
    /// records stay clean.
    #[arg(long, value_name = "SHARE", default_value_t = 0.01)]
    pub csv_defects: f64,
}

/// The scenario generator tool.
#[derive(Debug)]
pub struct Synth;

/// Vertices of the ground-truth circles (the scan issue asks for at least 64 for circles).
const CIRCLE_VERTICES: usize = 96;

/// A circle of `radius_m` around (`lon`, `lat`) on the sphere, as a lon/lat polygon
/// (destination-point formula, e.g. Snyder 1987, Map Projections — A Working Manual, eq. 5-5/5-6).
pub fn circle_lonlat(
    lon: f64,
    lat: f64,
    radius_m: f64,
    vertices: usize,
) -> geo_types::Polygon<f64> {
    let delta = radius_m / EARTH_RADIUS_M;
    let (phi1, lambda1) = (lat.to_radians(), lon.to_radians());
    let mut ring: Vec<geo_types::Coord<f64>> = (0..vertices)
        .map(|i| {
            // Counter-clockwise from east, so the exterior ring has positive orientation.
            let bearing = PI / 2.0 - 2.0 * PI * i as f64 / vertices as f64;
            let phi2 = (phi1.sin() * delta.cos() + phi1.cos() * delta.sin() * bearing.cos()).asin();
            let lambda2 = lambda1
                + (bearing.sin() * delta.sin() * phi1.cos())
                    .atan2(delta.cos() - phi1.sin() * phi2.sin());
            geo_types::Coord {
                x: lambda2.to_degrees(),
                y: phi2.to_degrees(),
            }
        })
        .collect();
    ring.push(ring[0]);
    geo_types::Polygon::new(geo_types::LineString::new(ring), vec![])
}

impl Tool for Synth {
    type Params = SynthParams;
    const ID: &'static str = "synth";
    const TITLE: &'static str =
        "Generate the invented Veldmark scenario: records, towns, districts and planted truth";
    const DESCRIPTION: &'static str = "Writes an invented coastal region (in an empty stretch of ocean, so no real \
        place is implied) with towns, 150-300 districts sharing boundaries (one island, one unpopulated), and \
        geolocated records of stance toward an invented offshore wind-farm levy: spread around towns by \
        population, with smoothly varying stance, planted zones of elevated support and opposition, a share \
        snapped to town centres, nine months of time stamps with a planted burst, two simulated classifier \
        labels with known confusion matrices, prolific authors, duplicates and geocoding-quality levels. \
        The same seed gives the same data.";
    const DEFAULT_NAME: &'static str = "veldmark";
    const INPUT: InputUse = InputUse::None;

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "records",
                title: "Records",
                description: "Point layer <name>_records (EPSG:4326).",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "districts",
                title: "Districts",
                description: "Polygon layer <name>_districts with code, name, population.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "towns",
                title: "Towns",
                description: "Point layer <name>_towns with name and population.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "truth",
                title: "Planted truth",
                description: "Polygon layer <name>_truth: planted zones and the burst as circles.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "csv",
                title: "CSV export",
                description: "With --csv FILE: the records as CSV.",
                media_type: "text/csv",
            },
        ]
    }

    fn run(params: &SynthParams, run: &mut Run) -> Result<Value> {
        if !(0.0..=1.0).contains(&params.csv_defects) {
            return Err(Error::argument(
                "--csv-defects",
                format!("{} is not a share between 0 and 1", params.csv_defects),
            ));
        }
        if params.points == 0 || params.points > 50_000_000 {
            return Err(Error::argument(
                "--points",
                format!(
                    "{} is out of range; expected 1 to 50,000,000",
                    params.points
                ),
            ));
        }
        // Measured: about 200 bytes a record (two strings each) while the scenario is held.
        run.guard_memory(
            params.points as u64 * 200,
            &format!("{} records", params.points),
            "ask for fewer --points",
        )?;
        let scenario = generate(&ScenarioParams {
            points: params.points,
            seed: run.common.seed,
        });
        run.progress.set(0.3);
        let wgs84 = crs::wgs84()?;
        let records_name = run.layer_name("records");
        let districts_name = run.layer_name("districts");
        let towns_name = run.layer_name("towns");
        let truth_name = run.layer_name("truth");
        let csv_path = match &params.csv {
            Some(path) => Some(run.output().side_file(path)?),
            None => None,
        };
        let run_seed = run.common.seed;
        let mut csv_defects = 0usize;
        let (staging, progress, interrupt) = run.writing();

        let fields = [
            FieldDef::new("stance", FieldKind::Text),
            FieldDef::new("label_a", FieldKind::Text),
            FieldDef::new("label_b", FieldKind::Text),
            FieldDef::new("time_utc", FieldKind::DateTime),
            FieldDef::new("author_id", FieldKind::Text),
            FieldDef::new("text", FieldKind::Text),
            FieldDef::new("quality", FieldKind::Text),
            FieldDef::new("town", FieldKind::Text),
        ];
        let mut writer =
            staging.create_vector(&records_name, GeometryKind::Point, Some(&wgs84), &fields)?;
        for (i, r) in scenario.records.iter().enumerate() {
            writer.add(
                Shape::Point(r.lon, r.lat),
                &[
                    FieldData::Text(stance_label(r.stance)),
                    FieldData::Text(stance_label(r.label_a)),
                    FieldData::Text(stance_label(r.label_b)),
                    FieldData::DateTime(r.time_unix_s),
                    FieldData::Text(&r.author),
                    FieldData::Text(&r.text),
                    FieldData::Text(r.quality.as_str()),
                    FieldData::Text(&scenario.towns[r.town].name),
                ],
            )?;
            if i.is_multiple_of(65_536) {
                progress.set(0.3 + 0.5 * i as f64 / scenario.records.len() as f64);
                interrupt.check()?;
            }
        }
        writer.finish()?;

        let fields = [
            FieldDef::new("code", FieldKind::Text),
            FieldDef::new("name", FieldKind::Text),
            FieldDef::new("population", FieldKind::Integer),
        ];
        let mut writer = staging.create_vector(
            &districts_name,
            GeometryKind::MultiPolygon,
            Some(&wgs84),
            &fields,
        )?;
        for d in &scenario.districts {
            writer.add(
                Shape::Polygon(&d.polygon),
                &[
                    FieldData::Text(&d.code),
                    FieldData::Text(&d.name),
                    FieldData::Integer(i64::from(d.population)),
                ],
            )?;
        }
        writer.finish()?;

        let fields = [
            FieldDef::new("name", FieldKind::Text),
            FieldDef::new("population", FieldKind::Integer),
        ];
        let mut writer =
            staging.create_vector(&towns_name, GeometryKind::Point, Some(&wgs84), &fields)?;
        for t in &scenario.towns {
            writer.add(
                Shape::Point(t.lon, t.lat),
                &[
                    FieldData::Text(&t.name),
                    FieldData::Integer(i64::from(t.population)),
                ],
            )?;
        }
        writer.finish()?;

        let fields = [
            FieldDef::new("kind", FieldKind::Text),
            FieldDef::new("name", FieldKind::Text),
            FieldDef::new("favours", FieldKind::Text),
            FieldDef::new("centre_lon", FieldKind::Real),
            FieldDef::new("centre_lat", FieldKind::Real),
            FieldDef::new("radius_m", FieldKind::Real),
            FieldDef::new("odds_multiplier", FieldKind::Real),
            FieldDef::new("month", FieldKind::Integer),
        ];
        let mut writer = staging.create_vector(
            &truth_name,
            GeometryKind::MultiPolygon,
            Some(&wgs84),
            &fields,
        )?;
        for z in &scenario.zones {
            let circle = circle_lonlat(z.lon, z.lat, z.radius_m, CIRCLE_VERTICES);
            writer.add(
                Shape::Polygon(&circle),
                &[
                    FieldData::Text("stance_zone"),
                    FieldData::Text(&z.name),
                    FieldData::Text(stance_label(z.favours)),
                    FieldData::Real(z.lon),
                    FieldData::Real(z.lat),
                    FieldData::Real(z.radius_m),
                    FieldData::Real(z.strength),
                    FieldData::Null,
                ],
            )?;
        }
        let b = &scenario.burst;
        let circle = circle_lonlat(b.lon, b.lat, b.radius_m, CIRCLE_VERTICES);
        writer.add(
            Shape::Polygon(&circle),
            &[
                FieldData::Text("time_burst"),
                FieldData::Text("burst"),
                FieldData::Null,
                FieldData::Real(b.lon),
                FieldData::Real(b.lat),
                FieldData::Real(b.radius_m),
                FieldData::Null,
                FieldData::Integer(i64::from(b.month)),
            ],
        )?;
        writer.finish()?;

        if let Some(path) = &csv_path {
            let mut csv = csv::Writer::from_path(path)
                .map_err(|e| Error::Failed(format!("writing CSV: {e}")))?;
            let io = |e: csv::Error| Error::Failed(format!("writing CSV: {e}"));
            csv.write_record([
                "id", "lon", "lat", "stance", "label_a", "label_b", "time", "author", "text",
                "quality",
            ])
            .map_err(io)?;
            let mut defects_written = 0usize;
            for (i, r) in scenario.records.iter().enumerate() {
                let mut lon = format!("{:.6}", r.lon);
                let mut lat = format!("{:.6}", r.lat);
                let mut stance = stance_label(r.stance).to_owned();
                let mut time = stance_core::time::format_utc(r.time_unix_s);
                if let Some((defect, detail)) = defects::defect_for(i, run_seed, params.csv_defects)
                {
                    defects_written += 1;
                    match defect {
                        Defect::MissingCoordinates => (lon, lat) = (String::new(), String::new()),
                        Defect::SwappedCoordinates => std::mem::swap(&mut lon, &mut lat),
                        Defect::LabelTypo => {
                            stance = defects::TYPOS[(detail % defects::TYPOS.len() as u64) as usize]
                                .to_owned()
                        }
                        Defect::LocalTimeFormat => {
                            if let Some(t) = chrono::DateTime::from_timestamp(r.time_unix_s, 0) {
                                time = t.format("%m/%d/%Y %I:%M %p").to_string();
                            }
                        }
                        Defect::BlankTime => time.clear(),
                    }
                }
                csv.write_record([
                    (i + 1).to_string(),
                    lon,
                    lat,
                    stance,
                    stance_label(r.label_a).to_owned(),
                    stance_label(r.label_b).to_owned(),
                    time,
                    r.author.clone(),
                    r.text.clone(),
                    r.quality.as_str().to_owned(),
                ])
                .map_err(io)?;
            }
            csv_defects = defects_written;
            csv.flush()
                .map_err(|e| Error::Failed(format!("writing CSV: {e}")))?;
        }
        progress.set(1.0);

        let zones: Vec<Value> = scenario
            .zones
            .iter()
            .map(|z| json!({"name": z.name, "favours": stance_label(z.favours), "lon": z.lon, "lat": z.lat, "radius_m": z.radius_m, "odds_multiplier": z.strength}))
            .collect();
        let inside = |z: &generate::PlantedZone| {
            scenario
                .records
                .iter()
                .filter(|r| metres_between(r.lon, r.lat, z.lon, z.lat) <= z.radius_m)
                .count()
        };
        let counts: Vec<usize> = scenario.zones.iter().map(inside).collect();
        Ok(json!({
            "records": scenario.records.len(),
            "districts": scenario.districts.len(),
            "towns": scenario.towns.len(),
            "zones": zones,
            "records_in_zones": counts,
            "burst": {"lon": b.lon, "lat": b.lat, "radius_m": b.radius_m, "month": b.month, "extra_share": b.extra_share},
            "confusion_a": scenario.confusion_a,
            "confusion_b": scenario.confusion_b,
            "layers": [records_name, districts_name, towns_name, truth_name],
            "csv_rows_with_defects": csv_defects,
        }))
    }
}
