//! The scenario as layers (records, districts, towns, planted truth) and as the run's summary.

use serde_json::{json, Value};
use stance_core::error::Result;
use stance_core::gpkg::crs;
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape, Staging};
use stance_core::host::{Interrupt, Progress, Run};

use crate::geodesy::{circle_lonlat, metres_between};
use crate::scenario::{stance_label, PlantedZone, Scenario};

/// Vertices of the ground-truth circles (the scan issue asks for at least 64 for circles).
const CIRCLE_VERTICES: usize = 96;

/// Records between progress reports and interrupt checks.
pub const REPORT_EVERY: usize = 65_536;

/// Names of the four output layers.
#[derive(Debug, Clone)]
pub struct LayerNames {
    pub records: String,
    pub districts: String,
    pub towns: String,
    pub truth: String,
}

impl LayerNames {
    /// `<name>_records`, `<name>_districts`, `<name>_towns`, `<name>_truth`.
    pub fn new(run: &Run) -> Self {
        LayerNames {
            records: run.layer_name("records"),
            districts: run.layer_name("districts"),
            towns: run.layer_name("towns"),
            truth: run.layer_name("truth"),
        }
    }
}

/// Stages the four layers in EPSG:4326; progress runs from 0.3 to 0.8 over the records.
///
/// # Errors
/// A staging failure, or an interrupt.
pub fn write_layers(run: &mut Run, scenario: &Scenario, names: &LayerNames) -> Result<()> {
    let (staging, progress, interrupt) = run.writing();
    progress.phase("writing");
    write_records(staging, (progress, interrupt), &names.records, scenario)?;
    write_districts(staging, &names.districts, scenario)?;
    write_towns(staging, &names.towns, scenario)?;
    write_truth(staging, &names.truth, scenario)
}

fn write_records(
    staging: &mut Staging,
    (progress, interrupt): (&Progress, &Interrupt),
    name: &str,
    scenario: &Scenario,
) -> Result<()> {
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
        staging.create_vector(name, GeometryKind::Point, Some(&crs::wgs84()?), &fields)?;
    let total = scenario.records.len();
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
        if i.is_multiple_of(REPORT_EVERY) {
            progress.set_counted(0.3 + 0.5 * i as f64 / total as f64, i as u64, total as u64);
            interrupt.check()?;
        }
    }
    writer.finish().map(drop)
}

fn write_districts(staging: &mut Staging, name: &str, scenario: &Scenario) -> Result<()> {
    let fields = [
        FieldDef::new("code", FieldKind::Text),
        FieldDef::new("name", FieldKind::Text),
        FieldDef::new("population", FieldKind::Integer),
    ];
    let wgs84 = crs::wgs84()?;
    let mut writer =
        staging.create_vector(name, GeometryKind::MultiPolygon, Some(&wgs84), &fields)?;
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
    writer.finish().map(drop)
}

fn write_towns(staging: &mut Staging, name: &str, scenario: &Scenario) -> Result<()> {
    let fields = [
        FieldDef::new("name", FieldKind::Text),
        FieldDef::new("population", FieldKind::Integer),
    ];
    let mut writer =
        staging.create_vector(name, GeometryKind::Point, Some(&crs::wgs84()?), &fields)?;
    for t in &scenario.towns {
        writer.add(
            Shape::Point(t.lon, t.lat),
            &[
                FieldData::Text(&t.name),
                FieldData::Integer(i64::from(t.population)),
            ],
        )?;
    }
    writer.finish().map(drop)
}

/// The planted zones and the burst as circles of [`CIRCLE_VERTICES`] vertices.
fn write_truth(staging: &mut Staging, name: &str, scenario: &Scenario) -> Result<()> {
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
    let wgs84 = crs::wgs84()?;
    let mut writer =
        staging.create_vector(name, GeometryKind::MultiPolygon, Some(&wgs84), &fields)?;
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
    writer.finish().map(drop)
}

/// Records whose reported location lies in `zone`.
fn records_inside(scenario: &Scenario, zone: &PlantedZone) -> usize {
    scenario
        .records
        .iter()
        .filter(|r| metres_between(r.lon, r.lat, zone.lon, zone.lat) <= zone.radius_m)
        .count()
}

/// The run's results: counts, the planted truth, the confusion matrices and the layers.
pub fn summary(scenario: &Scenario, names: &LayerNames, csv_defects: usize) -> Value {
    let zones: Vec<Value> = scenario
        .zones
        .iter()
        .map(|z| {
            json!({
                "name": z.name, "favours": stance_label(z.favours), "lon": z.lon, "lat": z.lat,
                "radius_m": z.radius_m, "odds_multiplier": z.strength
            })
        })
        .collect();
    let counts: Vec<usize> = scenario
        .zones
        .iter()
        .map(|z| records_inside(scenario, z))
        .collect();
    let b = &scenario.burst;
    json!({
        "records": scenario.records.len(),
        "districts": scenario.districts.len(),
        "towns": scenario.towns.len(),
        "zones": zones,
        "records_in_zones": counts,
        "burst": {
            "lon": b.lon, "lat": b.lat, "radius_m": b.radius_m, "month": b.month,
            "extra_share": b.extra_share
        },
        "confusion_a": scenario.confusion_a,
        "confusion_b": scenario.confusion_b,
        "layers": [names.records, names.districts, names.towns, names.truth],
        "csv_rows_with_defects": csv_defects,
    })
}
