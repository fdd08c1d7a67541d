//! stance-scan: circular scan statistics for clusters of stance — Bernoulli on records and
//! Poisson on areas (Kulldorff 1997), ordinal on oppose < neutral < support (Jung, Kulldorff &
//! Klassen 2007) — with Monte Carlo and Gumbel p-values (Abrams, Kleinman & Kulldorff 2010).

pub mod analysis;
pub mod clusters;
pub mod engine;
pub mod models;
pub mod windows;

use std::collections::BTreeMap;
use std::path::Path;
use std::time::Instant;

use geo::Centroid;
use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;
use stance_core::gpkg::read::{read_points, read_polygons, Column, FieldWant};
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::stance::{ClassMap, Stance};

use analysis::{scan_areas, scan_points, PointModel, ScanConfig, ScanResult};
use models::{Direction, Side};

/// Which scan statistic.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum ModelChoice {
    /// Cases against controls on records (Kulldorff 1997).
    Bernoulli,
    /// Ordered classes oppose < neutral < support on records (Jung, Kulldorff & Klassen 2007).
    Ordinal,
    /// Case counts against population or expected counts on areas (Kulldorff 1997).
    Poisson,
}

/// Which departures to look for.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum DirectionChoice {
    /// More cases than expected (ordinal: shifted toward support).
    High,
    /// Fewer cases than expected (ordinal: shifted toward oppose).
    Low,
    /// Both.
    Both,
}

/// Parameters of stance-scan.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct ScanParams {
    /// Scan statistic: bernoulli (cases vs controls), ordinal (oppose < neutral < support) or
    /// poisson (counts on areas).
    #[arg(long, value_enum, value_name = "MODEL", default_value = "bernoulli")]
    pub model: ModelChoice,

    /// Field holding the stance label (bernoulli, ordinal).
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support and -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Bernoulli: the class counted as cases.
    #[arg(long, value_name = "CLASS", default_value = "oppose")]
    pub cases: String,

    /// Bernoulli: the classes counted as controls, comma-separated (default: every other class).
    #[arg(long, value_name = "CLASS,…")]
    pub controls: Option<String>,

    /// Departures to look for: high (more cases; ordinal: toward support), low or both.
    #[arg(long, value_enum, value_name = "DIRECTION", default_value = "high")]
    pub direction: DirectionChoice,

    /// Largest window as a share of all records (poisson: of the population), in (0, 0.5].
    #[arg(long, value_name = "SHARE", default_value_t = 0.5)]
    pub max_share: f64,

    /// Largest window radius, in metres (default: no limit beyond --max-share).
    #[arg(long, value_name = "METRES")]
    pub max_radius_m: Option<f64>,

    /// Centre windows on a regular grid of this cell size (m) instead of on every distinct
    /// location; for very large data.
    #[arg(long, value_name = "METRES")]
    pub centres_cell_m: Option<f64>,

    /// Most clusters to report (the most likely and secondary ones sharing no location).
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub max_clusters: usize,

    /// Report only clusters with a Monte Carlo p-value at most this.
    #[arg(long, value_name = "P", default_value_t = 1.0)]
    pub report_p: f64,

    /// Random relabellings for the p-values (0: none, p-values are left empty).
    #[arg(long, value_name = "N", default_value_t = 999)]
    pub replicates: usize,

    /// Poisson: polygon layer of the input with the areas.
    #[arg(long, value_name = "LAYER")]
    pub areas: Option<String>,

    /// Poisson: field of observed case counts (non-negative integers).
    #[arg(long, value_name = "FIELD")]
    pub count_field: Option<String>,

    /// Poisson: field of population at risk (expected cases ∝ population).
    #[arg(long, value_name = "FIELD")]
    pub population_field: Option<String>,

    /// Poisson: field of expected cases (rescaled to sum to the observed total).
    #[arg(long, value_name = "FIELD")]
    pub expected_field: Option<String>,
}

/// The scan tool.
#[derive(Debug)]
pub struct Scan;

/// Vertices of a drawn cluster circle.
const CIRCLE_VERTICES: usize = 72;

impl Tool for Scan {
    type Params = ScanParams;
    const ID: &'static str = "scan";
    const TITLE: &'static str =
        "Find circular clusters of stance beyond chance, with Monte Carlo p-values";
    const DESCRIPTION: &'static str = "Scans circles centred on every distinct location (or a grid) growing \
        through the nearest locations up to --max-share of the records, and scores each with a likelihood ratio: \
        Bernoulli (one class as cases against the others), ordinal (a shift toward support or toward opposition \
        on oppose < neutral < support) or Poisson (case counts on areas against population). The most likely \
        cluster and secondary clusters sharing no location are compared with the maximum ratio over random \
        relabellings (p = rank/(R+1)) and with a Gumbel fit to those maxima. Records are a biased sample of \
        people: a cluster says where the labels differ from the rest of the map, not why.";
    const DEFAULT_NAME: &'static str = "scan";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "clusters",
                title: "Clusters",
                description: "Polygon layer <name>_clusters in the working CRS (circles of 72 vertices): rank, direction, \
                    centre_x_m, centre_y_m, radius_m, locations, records, population, cases, expected_cases, \
                    observed_over_expected, relative_risk, log_likelihood_ratio, p_value, p_value_gumbel, \
                    oppose_records, neutral_records, support_records.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "members",
                title: "Cluster members",
                description: "Attribute table <name>_members: feature_id of each input record (poisson: area) inside a \
                    reported cluster, and cluster_rank.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
        ]
    }

    fn run(params: &ScanParams, run: &mut Run) -> Result<Value> {
        let config = check(params, run.common.seed)?;
        let input = run.input()?.to_owned();
        let started = Instant::now();
        let data = match params.model {
            ModelChoice::Bernoulli | ModelChoice::Ordinal => read_records(params, run, &input)?,
            ModelChoice::Poisson => read_areas(params, run, &input)?,
        };
        run.log(format!(
            "stance-scan: {} model, {} {} on {} locations, {} replicates",
            model_name(params.model),
            data.fids.len(),
            if params.model == ModelChoice::Poisson {
                "areas"
            } else {
                "records"
            },
            data.distinct_locations(),
            config.replicates
        ));
        let scanned = {
            let progress = &run.progress;
            let report = |fraction: f64| progress.set(fraction);
            let stop = run.interrupt().flag();
            let outcome = match &data.kind {
                DataKind::Points { labels, model } => {
                    scan_points(&data.x, &data.y, labels, *model, &config, &report, stop)
                }
                DataKind::Areas {
                    cases, expected, ..
                } => scan_areas(&data.x, &data.y, cases, expected, &config, &report, stop),
            };
            outcome.map_err(|_| Error::Interrupted)?
        };
        let scan_s = started.elapsed().as_secs_f64();
        run.check_interrupted()?;
        write_outputs(params, run, &data, &scanned)?;
        let clusters: Vec<Value> = scanned
            .clusters
            .iter()
            .map(|c| cluster_json(params, &data, &scanned, c))
            .collect();
        for c in &scanned.clusters {
            run.log(format!(
                "  cluster {}: {} at ({:.0}, {:.0}) radius {:.0} m, LLR {:.4}, p {}",
                c.rank,
                direction_label(params.model, c.window.side),
                scanned.centres[c.centre].0,
                scanned.centres[c.centre].1,
                c.window.radius_m,
                c.window.llr,
                c.p_value.map_or("n/a".to_owned(), |p| format!("{p:.4}"))
            ));
        }
        let mut maxima = scanned.replicate_max.clone();
        maxima.sort_by(f64::total_cmp);
        let quantile = |q: f64| -> Value {
            if maxima.is_empty() {
                Value::Null
            } else {
                let i = ((maxima.len() as f64 * q).ceil() as usize).clamp(1, maxima.len()) - 1;
                json!(maxima[i])
            }
        };
        let totals: BTreeMap<String, u64> = match params.model {
            ModelChoice::Bernoulli => BTreeMap::from([
                ("controls".to_owned(), scanned.class_totals[0]),
                ("cases".to_owned(), scanned.class_totals[1]),
            ]),
            ModelChoice::Ordinal => Stance::ALL
                .iter()
                .zip(&scanned.class_totals)
                .map(|(s, c)| (s.label().to_owned(), *c))
                .collect(),
            ModelChoice::Poisson => BTreeMap::from([("cases".to_owned(), scanned.class_totals[0])]),
        };
        Ok(json!({
            "clusters_layer": run.layer_name("clusters"),
            "members_layer": run.layer_name("members"),
            "model": model_name(params.model),
            "direction": match params.direction {
                DirectionChoice::High => "high", DirectionChoice::Low => "low", DirectionChoice::Both => "both"
            },
            "crs": crs::label(&data.srs),
            "features_analysed": data.fids.len(),
            "features_excluded": data.excluded,
            "totals": totals,
            "locations": scanned.x.len(),
            "centres": scanned.centres.len(),
            "windows_per_labelling": scanned.windows,
            "replicates": config.replicates,
            "replicate_max_llr_95th_percentile": quantile(0.95),
            "replicate_max_llr_99th_percentile": quantile(0.99),
            "scan_time_s": (scan_s * 1000.0).round() / 1000.0,
            "clusters": clusters,
        }))
    }
}

fn model_name(model: ModelChoice) -> &'static str {
    match model {
        ModelChoice::Bernoulli => "bernoulli",
        ModelChoice::Ordinal => "ordinal",
        ModelChoice::Poisson => "poisson",
    }
}

fn direction_label(model: ModelChoice, side: Side) -> &'static str {
    match (model, side) {
        (ModelChoice::Ordinal, Side::High) => "toward_support",
        (ModelChoice::Ordinal, Side::Low) => "toward_oppose",
        (_, Side::High) => "high",
        (_, Side::Low) => "low",
    }
}

/// Checks the parameters once, at the border.
fn check(params: &ScanParams, seed: u64) -> Result<ScanConfig> {
    if !(params.max_share > 0.0 && params.max_share <= 0.5) {
        return Err(Error::argument(
            "--max-share",
            format!(
                "{} is outside (0, 0.5]; a window may hold at most half of the records",
                params.max_share
            ),
        ));
    }
    if let Some(r) = params.max_radius_m {
        if !(r.is_finite() && r > 0.0) {
            return Err(Error::argument(
                "--max-radius-m",
                format!("{r} must be a positive number of metres"),
            ));
        }
    }
    if let Some(c) = params.centres_cell_m {
        if !(c.is_finite() && c > 0.0) {
            return Err(Error::argument(
                "--centres-cell-m",
                format!("{c} must be a positive number of metres"),
            ));
        }
    }
    if params.max_clusters == 0 {
        return Err(Error::argument("--max-clusters", "must be at least 1"));
    }
    if !(params.report_p > 0.0 && params.report_p <= 1.0) {
        return Err(Error::argument(
            "--report-p",
            format!("{} is outside (0, 1]", params.report_p),
        ));
    }
    match params.model {
        ModelChoice::Poisson => {
            if params.areas.is_none() {
                return Err(Error::argument(
                    "--areas",
                    "missing; the poisson model needs a polygon layer of areas",
                ));
            }
            if params.count_field.is_none() {
                return Err(Error::argument(
                    "--count-field",
                    "missing; the poisson model needs the observed counts",
                ));
            }
            match (&params.population_field, &params.expected_field) {
                (None, None) => {
                    return Err(Error::argument(
                        "--population-field",
                        "missing; the poisson model needs --population-field or --expected-field",
                    ))
                }
                (Some(_), Some(_)) => {
                    return Err(Error::argument(
                        "--expected-field",
                        "give either --population-field or --expected-field, not both",
                    ))
                }
                _ => {}
            }
        }
        ModelChoice::Bernoulli | ModelChoice::Ordinal => {
            if params.areas.is_some() {
                return Err(Error::argument("--areas", "is only for --model poisson"));
            }
        }
    }
    Ok(ScanConfig {
        direction: match params.direction {
            DirectionChoice::High => Direction::High,
            DirectionChoice::Low => Direction::Low,
            DirectionChoice::Both => Direction::Both,
        },
        max_share: params.max_share,
        max_radius_m: params.max_radius_m,
        centres_cell_m: params.centres_cell_m,
        max_clusters: params.max_clusters,
        report_p: params.report_p,
        replicates: params.replicates,
        seed,
    })
}

enum DataKind {
    Points {
        labels: Vec<u8>,
        model: PointModel,
    },
    Areas {
        cases: Vec<u32>,
        expected: Vec<f64>,
        population: Option<Vec<f64>>,
    },
}

struct Data {
    fids: Vec<i64>,
    x: Vec<f64>,
    y: Vec<f64>,
    kind: DataKind,
    srs: gdal::spatial_ref::SpatialRef,
    excluded: u64,
}

impl Data {
    fn distinct_locations(&self) -> usize {
        windows::merge_locations(&self.x, &self.y).x.len()
    }
}

fn parse_class(option: &str, text: &str) -> Result<Stance> {
    Stance::from_canonical(text).ok_or_else(|| {
        Error::argument(
            option,
            format!(
                "'{}' is not a class; expected oppose, neutral or support",
                text.trim()
            ),
        )
    })
}

fn read_records(params: &ScanParams, run: &mut Run, input: &Path) -> Result<Data> {
    let classes = match &params.classes {
        Some(spec) => ClassMap::parse(spec).map_err(|m| Error::argument("--classes", m))?,
        None => ClassMap::default(),
    };
    let (cases, controls) = if params.model == ModelChoice::Bernoulli {
        let cases = parse_class("--cases", &params.cases)?;
        let controls: Vec<Stance> = match &params.controls {
            Some(list) => list
                .split(',')
                .map(str::trim)
                .filter(|c| !c.is_empty())
                .map(|c| parse_class("--controls", c))
                .collect::<Result<_>>()?,
            None => Stance::ALL
                .iter()
                .copied()
                .filter(|s| *s != cases)
                .collect(),
        };
        if controls.is_empty() {
            return Err(Error::argument(
                "--controls",
                "is empty; name at least one class",
            ));
        }
        if controls.contains(&cases) {
            return Err(Error::argument(
                "--controls",
                format!("includes the case class '{cases}'; cases and controls must differ"),
            ));
        }
        (Some(cases), controls)
    } else {
        (None, Vec::new())
    };
    let layer = read_points(
        input,
        run.common.layer.as_deref(),
        &[(params.stance_field.as_str(), FieldWant::Text)],
        run.common.crs.as_deref(),
    )?;
    run.note_input_layer(&layer.layer);
    let Some(Column::Text(column)) = layer.columns.first() else {
        return Err(Error::Failed("stance column missing after reading".into()));
    };
    let bad_field = |message: String| Error::BadField {
        path: input.to_owned(),
        layer: layer.layer.clone(),
        field: params.stance_field.clone(),
        message,
    };
    let mut value_counts: BTreeMap<String, u64> = BTreeMap::new();
    let mapped: Vec<Option<Stance>> = column.values.iter().map(|v| classes.classify(v)).collect();
    let mut per_record: Vec<Option<Stance>> = Vec::with_capacity(column.codes.len());
    for &code in &column.codes {
        let stance = mapped.get(code as usize).copied().flatten();
        if stance.is_none() {
            let label = column
                .values
                .get(code as usize)
                .map_or("NULL".to_owned(), |v| format!("'{v}'"));
            *value_counts.entry(label).or_default() += 1;
        }
        per_record.push(stance);
    }
    if !value_counts.is_empty() {
        let found: Vec<String> = value_counts
            .iter()
            .take(10)
            .map(|(v, c)| format!("{v} ×{c}"))
            .collect();
        return Err(bad_field(format!(
            "values that are not a stance class (expected {}; found {}); map them with --classes",
            classes.describe(),
            found.join(", ")
        )));
    }
    let mut class_counts: BTreeMap<Stance, u64> = BTreeMap::new();
    for s in per_record.iter().flatten() {
        *class_counts.entry(*s).or_default() += 1;
    }
    let counts_text = || {
        Stance::ALL
            .iter()
            .map(|s| format!("{s} ×{}", class_counts.get(s).copied().unwrap_or(0)))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut fids = Vec::new();
    let (mut x, mut y) = (Vec::new(), Vec::new());
    let mut labels = Vec::new();
    let mut excluded = 0u64;
    let model = match cases {
        Some(cases) => {
            let n_cases = class_counts.get(&cases).copied().unwrap_or(0);
            let n_controls: u64 = controls
                .iter()
                .map(|c| class_counts.get(c).copied().unwrap_or(0))
                .sum();
            if n_cases == 0 || n_controls == 0 {
                return Err(bad_field(format!(
                    "needs both cases ({cases}) and controls ({}); found {}",
                    controls
                        .iter()
                        .map(|c| c.label())
                        .collect::<Vec<_>>()
                        .join(","),
                    counts_text()
                )));
            }
            for (i, s) in per_record.iter().enumerate() {
                let label = match s {
                    Some(s) if *s == cases => 1,
                    Some(s) if controls.contains(s) => 0,
                    _ => {
                        excluded += 1;
                        continue;
                    }
                };
                fids.push(layer.fids[i]);
                x.push(layer.x[i]);
                y.push(layer.y[i]);
                labels.push(label);
            }
            PointModel::Bernoulli
        }
        None => {
            if class_counts.len() < 2 {
                return Err(bad_field(format!(
                    "the ordinal model needs at least two classes present; found {}",
                    counts_text()
                )));
            }
            for (i, s) in per_record.iter().enumerate() {
                if let Some(s) = s {
                    fids.push(layer.fids[i]);
                    x.push(layer.x[i]);
                    y.push(layer.y[i]);
                    labels.push((s.value() + 1) as u8);
                }
            }
            PointModel::Ordinal
        }
    };
    Ok(Data {
        fids,
        x,
        y,
        kind: DataKind::Points { labels, model },
        srs: layer.srs,
        excluded,
    })
}

fn read_areas(params: &ScanParams, run: &mut Run, input: &Path) -> Result<Data> {
    let areas_layer = params.areas.clone().unwrap_or_default();
    let count_field = params.count_field.clone().unwrap_or_default();
    let (size_field, is_population) = match (&params.population_field, &params.expected_field) {
        (Some(p), _) => (p.clone(), true),
        (None, Some(e)) => (e.clone(), false),
        (None, None) => return Err(Error::argument("--population-field", "missing")),
    };
    let layer = read_polygons(
        input,
        Some(&areas_layer),
        &[count_field.as_str(), size_field.as_str()],
    )?;
    run.note_input_layer(&layer.layer);
    run.warn_invalid_polygons(&layer, "areas");
    let bad = |field: &str, message: String| Error::BadField {
        path: input.to_owned(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let mut cases = Vec::with_capacity(layer.fids.len());
    let mut size = Vec::with_capacity(layer.fids.len());
    for (i, fid) in layer.fids.iter().enumerate() {
        let text = layer.fields[0][i].as_deref().unwrap_or("");
        let value: f64 = text.trim().parse().map_err(|_| {
            bad(
                &count_field,
                format!("feature {fid}: '{text}' is not a count"),
            )
        })?;
        if !(value >= 0.0 && value.fract() == 0.0 && value <= f64::from(u32::MAX)) {
            return Err(bad(
                &count_field,
                format!("feature {fid}: {value} is not a non-negative whole count"),
            ));
        }
        cases.push(value as u32);
        let text = layer.fields[1][i].as_deref().unwrap_or("");
        let value: f64 = text.trim().parse().map_err(|_| {
            bad(
                &size_field,
                format!("feature {fid}: '{text}' is not a number"),
            )
        })?;
        if !(value.is_finite() && value >= 0.0) {
            return Err(bad(
                &size_field,
                format!("feature {fid}: {value} must be a finite number ≥ 0"),
            ));
        }
        if value == 0.0 && cases[i] > 0 {
            return Err(bad(
                &size_field,
                format!("feature {fid}: {} cases with {size_field} 0; every case needs a population at risk", cases[i]),
            ));
        }
        size.push(value);
    }
    let total_cases: u64 = cases.iter().map(|&c| u64::from(c)).sum();
    let total_size: f64 = size.iter().sum();
    if total_cases == 0 {
        return Err(bad(
            &count_field,
            "every count is 0; there is nothing to scan".into(),
        ));
    }
    if total_size <= 0.0 {
        return Err(bad(&size_field, "sums to 0".into()));
    }
    // Expected cases under H0 sum to the observed total (Kulldorff 1997, §5).
    let expected: Vec<f64> = size
        .iter()
        .map(|s| s * total_cases as f64 / total_size)
        .collect();
    let (mut x, mut y): (Vec<f64>, Vec<f64>) = layer
        .polygons
        .iter()
        .map(|p| {
            p.centroid()
                .map_or((f64::NAN, f64::NAN), |c| (c.x(), c.y()))
        })
        .unzip();
    if let Some(i) = x.iter().position(|v| !v.is_finite()) {
        return Err(Error::BadLayer {
            path: input.to_owned(),
            layer: layer.layer.clone(),
            message: format!(
                "feature {} has no centroid (degenerate polygon)",
                layer.fids[i]
            ),
        });
    }
    let srs = crs::working(run.common.crs.as_deref(), &layer.srs, || {
        crs::lonlat_centre(&layer.srs, &x, &y)
    })?;
    if layer.srs.to_wkt().ok() != srs.to_wkt().ok() {
        crs::transform(&layer.srs, &srs, &mut x, &mut y)?;
    }
    Ok(Data {
        fids: layer.fids,
        x,
        y,
        kind: DataKind::Areas {
            cases,
            expected,
            population: is_population.then_some(size),
        },
        srs,
        excluded: 0,
    })
}

/// The statistics of a cluster for the layer and the summary.
struct ClusterFigures {
    records: Option<u64>,
    population: Option<f64>,
    cases: u64,
    expected: f64,
    relative_risk: f64,
    classes: Option<[u32; 3]>,
}

fn figures(data: &Data, scanned: &ScanResult, c: &clusters::Cluster) -> ClusterFigures {
    let w = &c.window;
    match &data.kind {
        DataKind::Points {
            model: PointModel::Bernoulli,
            ..
        } => {
            let n = w.size;
            let total = scanned.total_weight;
            let all_cases = scanned.class_totals[1] as f64;
            let cases = f64::from(w.inside[0]);
            ClusterFigures {
                records: Some(n.round() as u64),
                population: None,
                cases: u64::from(w.inside[0]),
                expected: n * all_cases / total,
                relative_risk: (cases / n) / ((all_cases - cases) / (total - n)),
                classes: None,
            }
        }
        DataKind::Points {
            model: PointModel::Ordinal,
            ..
        } => {
            let n = w.size;
            let total = scanned.total_weight;
            // The class at the end the window is shifted toward.
            let k = if w.side == Side::High { 2 } else { 0 };
            let all = scanned.class_totals[k] as f64;
            let cases = f64::from(w.inside[k]);
            ClusterFigures {
                records: Some(n.round() as u64),
                population: None,
                cases: u64::from(w.inside[k]),
                expected: n * all / total,
                relative_risk: (cases / n) / ((all - cases) / (total - n)),
                classes: Some(w.inside),
            }
        }
        DataKind::Areas { population, .. } => {
            let e = w.size;
            let all = scanned.class_totals[0] as f64;
            let cases = f64::from(w.inside[0]);
            ClusterFigures {
                records: None,
                population: population
                    .as_ref()
                    .map(|p| c.members.iter().map(|&m| p[m as usize]).sum()),
                cases: u64::from(w.inside[0]),
                expected: e,
                relative_risk: (cases / e) / ((all - cases) / (all - e)),
                classes: None,
            }
        }
    }
}

fn cluster_json(
    params: &ScanParams,
    data: &Data,
    scanned: &ScanResult,
    c: &clusters::Cluster,
) -> Value {
    let f = figures(data, scanned, c);
    let (cx, cy) = scanned.centres[c.centre];
    json!({
        "rank": c.rank,
        "direction": direction_label(params.model, c.window.side),
        "centre_x_m": cx,
        "centre_y_m": cy,
        "radius_m": c.window.radius_m,
        "locations": c.window.locations,
        "records": f.records,
        "population": f.population,
        "cases": f.cases,
        "expected_cases": f.expected,
        "relative_risk": finite(f.relative_risk),
        "log_likelihood_ratio": c.window.llr,
        "p_value": c.p_value,
        "p_value_gumbel": c.p_value_gumbel,
    })
}

fn finite(v: f64) -> Value {
    if v.is_finite() {
        json!(v)
    } else {
        Value::Null
    }
}

/// A circle of `radius` around (`cx`, `cy`) as a closed ring of [`CIRCLE_VERTICES`] vertices.
pub fn circle(cx: f64, cy: f64, radius: f64) -> geo_types::Polygon<f64> {
    let mut ring: Vec<geo_types::Coord<f64>> = (0..CIRCLE_VERTICES)
        .map(|i| {
            let a = std::f64::consts::TAU * i as f64 / CIRCLE_VERTICES as f64;
            geo_types::coord! { x: cx + radius * a.cos(), y: cy + radius * a.sin() }
        })
        .collect();
    ring.push(ring[0]);
    geo_types::Polygon::new(geo_types::LineString::new(ring), Vec::new())
}

fn write_outputs(
    params: &ScanParams,
    run: &mut Run,
    data: &Data,
    scanned: &ScanResult,
) -> Result<()> {
    let fields = [
        FieldDef::new("rank", FieldKind::Integer),
        FieldDef::new("direction", FieldKind::Text),
        FieldDef::new("centre_x_m", FieldKind::Real),
        FieldDef::new("centre_y_m", FieldKind::Real),
        FieldDef::new("radius_m", FieldKind::Real),
        FieldDef::new("locations", FieldKind::Integer),
        FieldDef::new("records", FieldKind::Integer),
        FieldDef::new("population", FieldKind::Real),
        FieldDef::new("cases", FieldKind::Integer),
        FieldDef::new("expected_cases", FieldKind::Real),
        FieldDef::new("observed_over_expected", FieldKind::Real),
        FieldDef::new("relative_risk", FieldKind::Real),
        FieldDef::new("log_likelihood_ratio", FieldKind::Real),
        FieldDef::new("p_value", FieldKind::Real),
        FieldDef::new("p_value_gumbel", FieldKind::Real),
        FieldDef::new("oppose_records", FieldKind::Integer),
        FieldDef::new("neutral_records", FieldKind::Integer),
        FieldDef::new("support_records", FieldKind::Integer),
    ];
    let name = run.layer_name("clusters");
    let srs = data.srs.clone();
    {
        let mut writer =
            run.output()
                .create_vector(&name, GeometryKind::MultiPolygon, Some(&srs), &fields)?;
        for c in &scanned.clusters {
            let f = figures(data, scanned, c);
            let (cx, cy) = scanned.centres[c.centre];
            // A window of one location has radius 0; draw it halfway to the next location
            // (every radius up to there gives the same window), or 1 m when none is left out.
            let drawn = if c.window.radius_m > 0.0 {
                c.window.radius_m
            } else if c.window.next_distance_m.is_finite() && c.window.next_distance_m > 0.0 {
                0.5 * c.window.next_distance_m
            } else {
                1.0
            };
            let polygon = circle(cx, cy, drawn);
            let opt_int =
                |v: Option<u64>| v.map_or(FieldData::Null, |v| FieldData::Integer(v as i64));
            let opt_real = |v: Option<f64>| v.map_or(FieldData::Null, FieldData::Real);
            let class = |k: usize| {
                f.classes
                    .map_or(FieldData::Null, |c| FieldData::Integer(i64::from(c[k])))
            };
            writer.add(
                Shape::Polygon(&polygon),
                &[
                    FieldData::Integer(c.rank as i64),
                    FieldData::Text(direction_label(params.model, c.window.side)),
                    FieldData::Real(cx),
                    FieldData::Real(cy),
                    FieldData::Real(c.window.radius_m),
                    FieldData::Integer(c.window.locations as i64),
                    opt_int(f.records),
                    opt_real(f.population),
                    FieldData::Integer(f.cases as i64),
                    FieldData::Real(f.expected),
                    FieldData::Real(f.cases as f64 / f.expected),
                    FieldData::Real(f.relative_risk),
                    FieldData::Real(c.window.llr),
                    opt_real(c.p_value),
                    opt_real(c.p_value_gumbel),
                    class(0),
                    class(1),
                    class(2),
                ],
            )?;
        }
        writer.finish()?;
    }
    // Members: every analysed record (or area) whose location lies in a reported cluster.
    let mut rank_of_location = vec![0usize; scanned.x.len()];
    for c in &scanned.clusters {
        for &m in &c.members {
            rank_of_location[m as usize] = c.rank;
        }
    }
    let fields = [
        FieldDef::new("feature_id", FieldKind::Integer),
        FieldDef::new("cluster_rank", FieldKind::Integer),
    ];
    let name = run.layer_name("members");
    let mut writer = run
        .output()
        .create_vector(&name, GeometryKind::None, None, &fields)?;
    let mut rows: Vec<(usize, i64)> = data
        .fids
        .iter()
        .zip(&scanned.of_point)
        .filter_map(|(&fid, &l)| {
            let rank = rank_of_location[l as usize];
            (rank > 0).then_some((rank, fid))
        })
        .collect();
    rows.sort_unstable();
    for (rank, fid) in rows {
        writer.add(
            Shape::None,
            &[FieldData::Integer(fid), FieldData::Integer(rank as i64)],
        )?;
    }
    writer.finish()?;
    Ok(())
}
