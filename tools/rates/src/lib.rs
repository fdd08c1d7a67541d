//! stance-rates: stance records counted per area (or counts already on the areas) → raw rates
//! with standard errors, empirical Bayes smoothing (Marshall 1991, global and local) and
//! surfaces joined to the areas.
//!
//! - Points are assigned to areas in the points' working CRS: the area polygons are projected
//!   into it (see [`assign`] for the boundary rule: lowest index = first in the layer's order).
//! - Local EB uses the esda / spdep `EBlocal(geoda = TRUE)` variance (see [`eb`]).
//! - Surface statistics are taken in the surface's own CRS, the polygons projected into it.

pub mod assign;
pub mod eb;
pub mod zonal;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use geo_types::MultiPolygon;
use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{self, Column, FieldWant};
use stance_core::gpkg::stage::{ExtraColumn, FieldDef, FieldKind};
use stance_core::gpkg::weights_table::{self, AreaIds};
use stance_core::gpkg::{crs, raster};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::stance::{ClassMap, Stance};
use stance_core::weights::{self, Contiguity, Neighbours};

use eb::Model;

/// The count model, as given on the command line.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum ModelArg {
    /// Poisson counts: rare events per head of a population.
    Poisson,
    /// Binomial counts: a share of the base (e.g. oppose among all records).
    Binomial,
}

/// Parameters of stance-rates.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct RatesParams {
    /// Polygon layer of the areas; the output is a copy of it with the rate fields.
    #[arg(long, value_name = "LAYER")]
    pub areas: String,

    /// GeoPackage holding the areas (default: --input).
    #[arg(long, value_name = "FILE")]
    pub areas_file: Option<PathBuf>,

    /// Field holding the stance of each point record.
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    #[serde(default = "default_stance_field")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support, -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Stance class counted as the event: oppose, neutral or support (with points).
    #[arg(long, value_name = "CLASS")]
    pub event: Option<String>,

    /// Classes whose records form the base of a share, comma-separated, or "all" (with points,
    /// when --population-field is not given).
    #[arg(long, value_name = "CLASSES|all", default_value = "all")]
    #[serde(default = "default_base")]
    pub base: String,

    /// Field of the areas holding the population: the rate is then events per head.
    #[arg(long, value_name = "FIELD")]
    pub population_field: Option<String>,

    /// Field of the areas holding event counts (no points are read; needs --base-field).
    #[arg(long, value_name = "FIELD")]
    pub events_field: Option<String>,

    /// Field of the areas holding the base (population at risk) of --events-field.
    #[arg(long, value_name = "FIELD")]
    pub base_field: Option<String>,

    /// Count model (default: binomial for a share of records, poisson per head of a population
    /// and for --events-field counts).
    #[arg(long, value_name = "MODEL")]
    pub model: Option<ModelArg>,

    /// Weights table of stance-weights for local EB (default: queen contiguity built here).
    #[arg(long, value_name = "TABLE")]
    pub weights: Option<String>,

    /// GeoPackage holding the weights table (default: the areas' file).
    #[arg(long, value_name = "FILE")]
    pub weights_file: Option<PathBuf>,

    /// Field of the areas holding the ids used in the weights table (default: the feature id, or
    /// the id field recorded in the table's provenance).
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// Snap tolerance for on-the-fly queen contiguity, in metres of the areas' CRS units.
    #[arg(long, value_name = "M", default_value_t = 0.0)]
    #[serde(default)]
    pub snap_m: f64,

    /// Skip local EB smoothing.
    #[arg(long)]
    #[serde(default)]
    pub no_local: bool,

    /// Surface (raster) to summarise within each area: mean, min and max.
    #[arg(long, value_name = "RASTER")]
    pub surface: Option<String>,

    /// GeoPackage holding the surface (default: --input).
    #[arg(long, value_name = "FILE")]
    pub surface_file: Option<PathBuf>,

    /// Weight surface cells by the exact fraction inside each area (default: cell centres inside).
    #[arg(long)]
    #[serde(default)]
    pub area_weighted: bool,
}

fn default_stance_field() -> String {
    "stance".into()
}

fn default_base() -> String {
    "all".into()
}

/// The rates tool.
#[derive(Debug)]
pub struct Rates;

/// Where the events and base of each area come from, checked.
enum Source {
    /// Point records counted per area: the event class, and the base classes or a population.
    Points { event: Stance, base: BaseSpec },
    /// Counts already on the areas.
    Fields { events: String, base: String },
}

enum BaseSpec {
    Classes(Vec<Stance>),
    Population(String),
}

fn parse_class(option: &str, text: &str) -> Result<Stance> {
    Stance::from_canonical(text).ok_or_else(|| {
        Error::argument(
            option,
            format!("'{text}' is not a stance class; expected oppose, neutral or support"),
        )
    })
}

/// Parses a number field read as text; NULL or text that is not a finite number ≥ 0 is an error.
fn numbers(
    path: &Path,
    layer: &str,
    field: &str,
    fids: &[i64],
    values: &[Option<String>],
) -> Result<Vec<f64>> {
    values
        .iter()
        .zip(fids)
        .map(|(v, fid)| {
            let bad = |message: String| Error::BadField {
                path: path.to_owned(),
                layer: layer.to_owned(),
                field: field.to_owned(),
                message,
            };
            let text = v.as_deref().ok_or_else(|| {
                bad(format!(
                    "feature {fid} has no value (NULL); expected a count ≥ 0"
                ))
            })?;
            match text.trim().parse::<f64>() {
                Ok(x) if x.is_finite() && x >= 0.0 => Ok(x),
                _ => Err(bad(format!(
                    "feature {fid} has '{text}'; expected a finite number ≥ 0"
                ))),
            }
        })
        .collect()
}

/// Projects every vertex of `polygons` from `from` to `to`.
fn project(
    polygons: &[MultiPolygon<f64>],
    from: &gdal::spatial_ref::SpatialRef,
    to: &gdal::spatial_ref::SpatialRef,
) -> Result<Vec<MultiPolygon<f64>>> {
    if from.to_wkt().ok() == to.to_wkt().ok() {
        return Ok(polygons.to_vec());
    }
    let mut out = polygons.to_vec();
    let (mut xs, mut ys) = (Vec::new(), Vec::new());
    for polygon in &out {
        for p in &polygon.0 {
            for ring in std::iter::once(p.exterior()).chain(p.interiors()) {
                for c in &ring.0 {
                    xs.push(c.x);
                    ys.push(c.y);
                }
            }
        }
    }
    crs::transform(from, to, &mut xs, &mut ys)?;
    if xs.iter().chain(&ys).any(|v| !v.is_finite()) {
        return Err(Error::Crs {
            definition: crs::label(to),
            message: format!(
                "some area vertices cannot be projected from {}",
                crs::label(from)
            ),
        });
    }
    let mut k = 0;
    for polygon in &mut out {
        for p in &mut polygon.0 {
            let fix = |ring: &mut geo_types::LineString<f64>, k: &mut usize| {
                for c in &mut ring.0 {
                    c.x = xs[*k];
                    c.y = ys[*k];
                    *k += 1;
                }
            };
            p.exterior_mut(|ring| fix(ring, &mut k));
            p.interiors_mut(|rings| {
                for ring in rings {
                    fix(ring, &mut k);
                }
            });
        }
    }
    Ok(out)
}

fn real(values: Vec<Option<f64>>) -> ExtraColumn {
    ExtraColumn::Real(values)
}

impl Tool for Rates {
    type Params = RatesParams;
    const ID: &'static str = "rates";
    const TITLE: &'static str =
        "Stance rates per area with empirical Bayes smoothing and surfaces joined to areas";
    const DESCRIPTION: &'static str = "Counts the point records of each stance class in each area \
        (point in polygon through an R-tree; a point on a shared boundary goes to the first area in \
        the layer's order; points outside every area are counted and reported), or reads counts \
        already on the areas (--events-field, --base-field). Computes the raw rate of --event over \
        --base classes (a share, binomial) or over --population-field (per head, Poisson) with its \
        standard error, and smooths it by empirical Bayes: global (Marshall 1991, method of \
        moments; binomial after Martuzzi & Elliott 1996) and local (Marshall 1991, the variance of \
        esda Spatial_Empirical_Bayes = spdep EBlocal(geoda = TRUE)), with neighbours from a \
        stance-weights table or queen contiguity. Negative prior variances are set to 0 and \
        reported; areas with zero base get no raw rate, the prior mean, and a flag. With \
        --surface, adds the mean, minimum and maximum of a surface within each area.";
    const DEFAULT_NAME: &'static str = "rates";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "rates",
            title: "Areas with counts, rates and smoothed rates",
            description: "Polygon layer <name>: a copy of the area layer (its CRS and fields) with \
                count_oppose, count_neutral, count_support, count_total (with points), event_count, \
                base_count, rate_raw, rate_se, rate_eb_global, rate_eb_local, eb_local_prior_mean, \
                base_zero_flag (1 where the base is 0) and, with --surface, surface_mean, \
                surface_min, surface_max, surface_cells.",
            media_type: GEOPACKAGE_MEDIA_TYPE,
        }]
    }

    fn run(params: &RatesParams, run: &mut Run) -> Result<Value> {
        // Check parameters once, at the border.
        let counts_mode = params.events_field.is_some() || params.base_field.is_some();
        let source = if counts_mode {
            let (Some(events), Some(base)) = (&params.events_field, &params.base_field) else {
                return Err(Error::argument(
                    "--events-field",
                    "needs --base-field too (and the other way round)",
                ));
            };
            for (given, option) in [
                (params.event.is_some(), "--event"),
                (params.population_field.is_some(), "--population-field"),
                (run.common.layer.is_some(), "--layer"),
            ] {
                if given {
                    return Err(Error::argument(
                        option,
                        "cannot be used with --events-field/--base-field (no points are read)",
                    ));
                }
            }
            Source::Fields {
                events: events.clone(),
                base: base.clone(),
            }
        } else {
            let event = params.event.as_deref().ok_or_else(|| {
                Error::argument(
                    "--event",
                    "missing; give the class counted (oppose, neutral or support), or counts with --events-field and --base-field",
                )
            })?;
            let event = parse_class("--event", event)?;
            let base = match &params.population_field {
                Some(field) => {
                    if params.base != "all" {
                        return Err(Error::argument(
                            "--base",
                            "cannot be combined with --population-field (the population is the base)",
                        ));
                    }
                    BaseSpec::Population(field.clone())
                }
                None => {
                    let classes = if params.base.trim().eq_ignore_ascii_case("all") {
                        Stance::ALL.to_vec()
                    } else {
                        let mut classes = params
                            .base
                            .split(',')
                            .map(str::trim)
                            .filter(|c| !c.is_empty())
                            .map(|c| parse_class("--base", c))
                            .collect::<Result<Vec<_>>>()?;
                        classes.sort();
                        classes.dedup();
                        classes
                    };
                    if !classes.contains(&event) {
                        return Err(Error::argument(
                            "--base",
                            format!("must include the event class '{event}' (a share counts events among the base)"),
                        ));
                    }
                    BaseSpec::Classes(classes)
                }
            };
            Source::Points { event, base }
        };
        let model = match (params.model, &source) {
            (Some(ModelArg::Poisson), _) => Model::Poisson,
            (Some(ModelArg::Binomial), _) => Model::Binomial,
            (
                None,
                Source::Points {
                    base: BaseSpec::Classes(_),
                    ..
                },
            ) => Model::Binomial,
            (None, _) => Model::Poisson,
        };
        let classes = match &params.classes {
            Some(spec) => ClassMap::parse(spec).map_err(|m| Error::argument("--classes", m))?,
            None => ClassMap::default(),
        };
        if !(params.snap_m.is_finite() && params.snap_m >= 0.0) {
            return Err(Error::argument("--snap-m", "must be a finite number ≥ 0"));
        }
        if params.weights.is_some() && params.no_local {
            return Err(Error::argument(
                "--weights",
                "cannot be used with --no-local",
            ));
        }
        if params.area_weighted && params.surface.is_none() {
            return Err(Error::argument("--area-weighted", "needs --surface"));
        }

        // Read the areas.
        let input = run.input()?.to_owned();
        let areas_path = params.areas_file.clone().unwrap_or_else(|| input.clone());
        let mut area_fields: Vec<&str> = Vec::new();
        match &source {
            Source::Fields { events, base } => {
                area_fields.push(events);
                area_fields.push(base);
            }
            Source::Points {
                base: BaseSpec::Population(field),
                ..
            } => area_fields.push(field),
            Source::Points { .. } => {}
        }
        let weights_table = match &params.weights {
            Some(table) => {
                let path = params
                    .weights_file
                    .clone()
                    .unwrap_or_else(|| areas_path.clone());
                let read = weights_table::read(&path, table)?;
                Some((path, read))
            }
            None => None,
        };
        let id_field: Option<String> = params.id_field.clone().or_else(|| {
            weights_table
                .as_ref()
                .and_then(|(_, t)| t.id_field.clone().flatten())
        });
        if let Some(field) = &id_field {
            area_fields.push(field);
        }
        let areas = read::read_polygons(&areas_path, Some(&params.areas), &area_fields)?;
        let invalid_areas = run.warn_invalid_polygons(&areas, "areas");
        if areas_path == input {
            run.note_input_layer(&areas.layer);
        } else {
            run.note_extra_input(&areas_path, &areas.layer)?;
        }
        if let Some((path, table)) = &weights_table {
            run.note_extra_input(path, &table.table)?;
        }
        let n = areas.fids.len();
        let field_values = |name: &str| -> Result<Vec<f64>> {
            let k = area_fields.iter().position(|f| *f == name).unwrap_or(0);
            numbers(
                &areas_path,
                &areas.layer,
                name,
                &areas.fids,
                &areas.fields[k],
            )
        };

        // Events and base per area.
        let mut extra: Vec<(FieldDef, ExtraColumn)> = Vec::new();
        let mut points_summary = Value::Null;
        let (events, base): (Vec<f64>, Vec<f64>) = match &source {
            Source::Fields { events, base } => (field_values(events)?, field_values(base)?),
            Source::Points { event, base } => {
                let points = read::read_points(
                    &input,
                    run.common.layer.as_deref(),
                    &[(params.stance_field.as_str(), FieldWant::Text)],
                    run.common.crs.as_deref(),
                )?;
                run.note_input_layer(&points.layer);
                let Some(Column::Text(stances)) = points.columns.first() else {
                    return Err(Error::Failed("stance column was not read as text".into()));
                };
                let bad_field = |message: String| Error::BadField {
                    path: input.clone(),
                    layer: points.layer.clone(),
                    field: params.stance_field.clone(),
                    message,
                };
                // Classify the dictionary once; unknown labels are an error listing them.
                let mut unknown: BTreeMap<String, u64> = BTreeMap::new();
                let class_of: Vec<Option<Stance>> =
                    stances.values.iter().map(|v| classes.classify(v)).collect();
                for code in &stances.codes {
                    let class = class_of.get(*code as usize).copied().flatten();
                    if class.is_none() {
                        let label = stances
                            .values
                            .get(*code as usize)
                            .cloned()
                            .unwrap_or_else(|| "(null)".into());
                        *unknown.entry(label).or_default() += 1;
                    }
                }
                if !unknown.is_empty() {
                    let found: Vec<String> = unknown
                        .iter()
                        .take(10)
                        .map(|(l, c)| format!("'{l}' ×{c}"))
                        .collect();
                    return Err(bad_field(format!(
                        "unknown stance values ({}); expected {}; map them with --classes",
                        found.join(", "),
                        classes.describe()
                    )));
                }
                let projected = project(&areas.polygons, &areas.srs, &points.srs)?;
                run.progress.set(0.2);
                let assignment = assign::assign(&projected, &points.x, &points.y);
                run.check_interrupted()?;
                let mut counts = vec![[0u64; 3]; n];
                for (k, area) in assignment.area.iter().enumerate() {
                    if let (Some(a), Some(class)) = (area, class_of[stances.codes[k] as usize]) {
                        counts[*a as usize][class as usize] += 1;
                    }
                }
                for class in Stance::ALL {
                    extra.push((
                        FieldDef::new(&format!("count_{}", class.label()), FieldKind::Integer),
                        ExtraColumn::Integer(
                            counts
                                .iter()
                                .map(|c| Some(c[class as usize] as i64))
                                .collect(),
                        ),
                    ));
                }
                extra.push((
                    FieldDef::new("count_total", FieldKind::Integer),
                    ExtraColumn::Integer(
                        counts
                            .iter()
                            .map(|c| Some(c.iter().sum::<u64>() as i64))
                            .collect(),
                    ),
                ));
                let inside = points.fids.len() as u64 - assignment.outside;
                points_summary = json!({
                    "layer": points.layer,
                    "points_read": points.fids.len(),
                    "points_in_areas": inside,
                    "points_outside": assignment.outside,
                    "points_on_shared_boundary": assignment.on_shared_boundary,
                    "boundary_rule": "a point in several closed areas goes to the first in the layer's order",
                    "working_crs": crs::label(&points.srs),
                });
                if assignment.outside > 0 {
                    run.log(format!(
                        "stance-rates: {} of {} points lie outside every area and are not counted",
                        assignment.outside,
                        points.fids.len()
                    ));
                }
                let events: Vec<f64> = counts.iter().map(|c| c[*event as usize] as f64).collect();
                let base = match base {
                    BaseSpec::Classes(classes) => counts
                        .iter()
                        .map(|c| classes.iter().map(|s| c[*s as usize] as f64).sum())
                        .collect(),
                    BaseSpec::Population(field) => field_values(field)?,
                };
                (events, base)
            }
        };
        if model == Model::Binomial {
            if let Some(i) = (0..n).find(|&i| events[i] > base[i]) {
                return Err(Error::argument(
                    "--model",
                    format!(
                        "binomial needs events ≤ base, but area fid {} has {} events over a base of {}; use --model poisson",
                        areas.fids[i], events[i], base[i]
                    ),
                ));
            }
        }
        run.progress.set(0.5);

        // Neighbours for local EB.
        let neighbours: Option<(Neighbours, String)> = if params.no_local {
            None
        } else if let Some((path, table)) = &weights_table {
            let ids = match &id_field {
                None => AreaIds::Integer(areas.fids.clone()),
                Some(field) => {
                    let k = area_fields.iter().position(|f| f == field).unwrap_or(0);
                    let values: Vec<String> = areas.fields[k]
                        .iter()
                        .map(|v| v.clone().unwrap_or_default())
                        .collect();
                    AreaIds::from_text(values)
                }
            };
            if let Some(duplicate) = ids.first_duplicate() {
                return Err(Error::BadField {
                    path: areas_path.clone(),
                    layer: areas.layer.clone(),
                    field: id_field.clone().unwrap_or_else(|| "fid".into()),
                    message: format!("id '{duplicate}' appears twice; ids must be unique"),
                });
            }
            let lists = table.neighbours(&ids).map_err(|message| Error::BadLayer {
                path: path.clone(),
                layer: table.table.clone(),
                message: format!(
                    "{message} (ids by {})",
                    id_field.as_deref().unwrap_or("fid")
                ),
            })?;
            Some((lists, format!("table {}", table.table)))
        } else {
            let lists = weights::contiguity(&areas.polygons, Contiguity::Queen, params.snap_m)
                .map_err(|e| Error::BadLayer {
                    path: areas_path.clone(),
                    layer: areas.layer.clone(),
                    message: format!("queen contiguity: {e}"),
                })?;
            Some((lists, "queen contiguity".into()))
        };

        // Rates and smoothing.
        let raw = eb::raw_rates(&events, &base, model);
        let global = eb::global_eb(&events, &base, model).ok_or_else(|| Error::BadLayer {
            path: areas_path.clone(),
            layer: areas.layer.clone(),
            message: "every area has a base of 0; no rate can be estimated".into(),
        })?;
        let local = neighbours
            .as_ref()
            .map(|(lists, _)| eb::local_eb(&events, &base, lists, model));
        let zero_base: Vec<i64> = (0..n)
            .filter(|&i| base[i] <= 0.0)
            .map(|i| areas.fids[i])
            .collect();
        let events_in_zero_base: f64 = (0..n).filter(|&i| base[i] <= 0.0).map(|i| events[i]).sum();
        if global.prior.truncated() {
            run.log(format!(
                "stance-rates: the global prior variance estimate is negative ({:.3e}); set to 0, so every area takes the prior mean",
                global.prior.variance_estimate
            ));
        }

        extra.push((
            FieldDef::new("event_count", FieldKind::Real),
            real(events.iter().map(|v| Some(*v)).collect()),
        ));
        extra.push((
            FieldDef::new("base_count", FieldKind::Real),
            real(base.iter().map(|v| Some(*v)).collect()),
        ));
        extra.push((
            FieldDef::new("rate_raw", FieldKind::Real),
            real(raw.iter().map(|r| r.map(|(rate, _)| rate)).collect()),
        ));
        extra.push((
            FieldDef::new("rate_se", FieldKind::Real),
            real(raw.iter().map(|r| r.map(|(_, se)| se)).collect()),
        ));
        extra.push((
            FieldDef::new("rate_eb_global", FieldKind::Real),
            real(global.smoothed.iter().map(|v| Some(*v)).collect()),
        ));
        if let Some(local) = &local {
            extra.push((
                FieldDef::new("rate_eb_local", FieldKind::Real),
                real(local.smoothed.clone()),
            ));
            extra.push((
                FieldDef::new("eb_local_prior_mean", FieldKind::Real),
                real(local.priors.iter().map(|p| p.map(|p| p.mean)).collect()),
            ));
        }
        extra.push((
            FieldDef::new("base_zero_flag", FieldKind::Integer),
            ExtraColumn::Integer(base.iter().map(|b| Some(i64::from(*b <= 0.0))).collect()),
        ));

        // Surface joined to the areas.
        let mut surface_summary = Value::Null;
        if let Some(surface_name) = &params.surface {
            let path = params.surface_file.clone().unwrap_or_else(|| input.clone());
            let surface = raster::read(&path, surface_name)?;
            if path == input {
                run.note_input_layer(surface_name);
            } else {
                run.note_extra_input(&path, surface_name)?;
            }
            let surface_srs = crs::parse(&surface.crs_wkt)?;
            let projected = project(&areas.polygons, &areas.srs, &surface_srs)?;
            let stats = zonal::zonal(
                &surface.grid,
                &surface.values,
                &projected,
                params.area_weighted,
            );
            let empty: Vec<i64> = (0..n)
                .filter(|&i| stats[i].is_none())
                .map(|i| areas.fids[i])
                .collect();
            for (name, pick) in [
                (
                    "surface_mean",
                    (|s: &zonal::ZoneStats| s.mean) as fn(&zonal::ZoneStats) -> f64,
                ),
                ("surface_min", |s| s.min),
                ("surface_max", |s| s.max),
                ("surface_cells", |s| s.cells),
            ] {
                extra.push((
                    FieldDef::new(name, FieldKind::Real),
                    real(stats.iter().map(|s| s.as_ref().map(pick)).collect()),
                ));
            }
            surface_summary = json!({
                "surface": surface_name,
                "rule": if params.area_weighted { "exact cell fractions" } else { "cell centres inside" },
                "cell_m": surface.grid.cell_m,
                "areas_without_cells": empty,
            });
        }
        run.progress.set(0.8);

        // Write.
        let name = run.layer_name("");
        let written =
            run.output()
                .copy_with_fields(&areas_path, &areas.layer, &name, &areas.fids, &extra)?;
        run.progress.set(1.0);

        let local_summary = match (&local, &neighbours) {
            (Some(local), Some((lists, source))) => json!({
                "neighbours": source,
                "links": lists.lists.iter().map(Vec::len).sum::<usize>(),
                "islands": lists.islands().iter().map(|&i| areas.fids[i]).collect::<Vec<_>>(),
                "variance": "esda Spatial_Empirical_Bayes = spdep EBlocal(geoda = TRUE): spread around each area's local mean",
                "prior_variance_truncated_areas": local.truncated(),
                "prior_undefined_areas": local.undefined(),
            }),
            _ => Value::Null,
        };
        let (event_label, base_label) = match &source {
            Source::Fields { events, base } => (events.clone(), base.clone()),
            Source::Points { event, base } => (
                event.label().to_owned(),
                match base {
                    BaseSpec::Classes(c) => {
                        c.iter().map(|s| s.label()).collect::<Vec<_>>().join(",")
                    }
                    BaseSpec::Population(f) => format!("population field {f}"),
                },
            ),
        };
        run.log(format!(
            "stance-rates: {written} areas rated into layer '{name}' (prior mean {:.6})",
            global.prior.mean
        ));
        Ok(json!({
            "layer": name,
            "areas": n,
            "invalid_areas": invalid_areas,
            "event": event_label,
            "base": base_label,
            "model": match model { Model::Poisson => "poisson", Model::Binomial => "binomial" },
            "events_total": events.iter().sum::<f64>(),
            "base_total": base.iter().sum::<f64>(),
            "points": points_summary,
            "global_eb": {
                "prior_mean": global.prior.mean,
                "prior_variance": global.prior.variance,
                "prior_variance_estimate": global.prior.variance_estimate,
                "prior_variance_truncated": global.prior.truncated(),
                "areas_in_prior": global.prior.areas,
            },
            "local_eb": local_summary,
            "zero_base_areas": zero_base,
            "events_in_zero_base_areas": events_in_zero_base,
            "surface": surface_summary,
        }))
    }
}
