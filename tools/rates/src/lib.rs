//! stance-rates: stance records counted per area (or counts already on the areas) → raw rates
//! with standard errors, empirical Bayes smoothing (Marshall 1991, global and local) and
//! surfaces joined to the areas.
//!
//! - The areas are read into the working CRS (the points' when points are counted): points
//!   are assigned there (see [`assign`] for the boundary rule: lowest index = first in the
//!   layer's order), and the queen contiguity of local EB is built there, so `--snap-m` is
//!   metres whatever the CRS the areas are stored in.
//! - Local EB measures each neighbour's spread around the area's own local mean (see [`eb`]).
//! - Surface statistics are taken in the surface's own CRS, the polygons projected into it.

pub mod eb;
pub mod input;
pub mod memory;
pub mod output;
pub mod params;
pub mod zonal;

use std::path::PathBuf;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{project_polygons, PolygonCrs};
use stance_core::gpkg::weights_table::WeightsTable;
use stance_core::gpkg::{areas, crs, raster};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::weights::{self, Contiguity};

use eb::Model;
use input::{Areas, Counts};
use output::{Local, Rated};
pub use params::{Config, ModelArg, RatesParams};

/// The rates tool.
#[derive(Debug)]
pub struct Rates;

impl Tool for Rates {
    type Params = RatesParams;
    const ID: &'static str = "rates";
    const TITLE: &'static str =
        "Stance rates per area with empirical Bayes smoothing and surfaces joined to areas";
    const DESCRIPTION: &'static str = "Counts the point records of each stance class in each area \
        (point in polygon through an R-tree; a point on a shared boundary goes to the first area in \
        the layer's order; points outside every area are counted and reported), or reads counts \
        already on the areas (--case-field, --at-risk-field). Computes the raw rate of the \
        --case-class records among the --at-risk-classes records (a share, binomial) or per head of \
        the --at-risk-field population (Poisson) with its standard error, and smooths it by empirical \
        Bayes: global (Marshall 1991, method of moments; binomial after Martuzzi & Elliott 1996) and \
        local (Marshall 1991: the prior of each area from the area and its neighbours, the variance \
        measured around that local mean), with neighbours from a stance-weights table or queen \
        contiguity built on the areas projected to the working CRS (--snap-m in metres). Negative \
        prior variances are set to 0 and reported; areas with no one at risk get no raw rate, the \
        prior mean, and a flag. With --surface, adds the mean, minimum and maximum of a surface \
        within each area.";
    const DEFAULT_NAME: &'static str = "rates";
    const INPUT: InputUse = InputUse::Required;
    const INPUT_DESCRIPTION: &'static str =
        "GeoPackage with the point records (a point layer with a \
        stance field), unless the counts are on the areas (--case-field); also the default file of \
        the areas and the surface.";

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "rates",
            title: "Areas with counts, rates and smoothed rates",
            description:
                "Polygon layer <name>: a copy of the area layer (its CRS and fields) with \
                count_oppose, count_neutral, count_support, count_total (with points), cases, \
                at_risk, rate_raw, rate_se, rate_eb_global, rate_eb_local, eb_local_prior_mean \
                (these two with local EB), no_one_at_risk (1 where the population at risk is 0) and, with --surface, surface_mean, surface_min, \
                surface_max, surface_cells.",
            media_type: GEOPACKAGE_MEDIA_TYPE,
        }]
    }

    fn run(params: &RatesParams, run: &mut Run) -> Result<Value> {
        let config = params.check(run.common.layer.is_some())?;
        run.progress.phase("reading");
        let (areas, table, id_field, points) = read(params, &config, run)?;
        // Checked once the records and the areas are read, before the assignment (the peak).
        let records = points.as_ref().map_or(0, |p| p.layer.fids.len());
        run.guard_memory(
            memory::estimate(&areas, points.as_ref()) as u64,
            &format!("{records} records in {} areas", areas.layer.fids.len()),
            "count the records in parts (e.g. a layer per period) and add the counts",
        )?;
        run.progress.set(0.2);
        run.progress.phase("counting");
        let counts = input::count(&config, &areas, points.as_ref(), run)?;
        drop(points);
        check_binomial(&config, &areas, &counts)?;
        run.progress.set(0.4);
        run.progress.phase("neighbours");
        let local = neighbours(&config, &areas, table, id_field.as_deref())?;
        run.progress.set(0.5);
        run.progress.phase("smoothing");
        let rated = smooth(&config, &areas, &counts, local, run)?;
        run.progress.set(0.6);
        if config.surface.is_some() {
            run.progress.phase("surface");
        }
        let rated = Rated {
            surface: surface(&config, &areas, run)?,
            ..rated
        };
        run.progress.set(0.8);
        run.progress.phase("writing");
        let name = run.layer_name("");
        let fields = output::fields(&rated);
        let written = run.output().copy_with_fields(
            &areas.path,
            &areas.layer.layer,
            &name,
            &areas.layer.fids,
            &fields,
        )?;
        run.progress.set(1.0);
        run.log(format!(
            "stance-rates: {written} areas rated into layer '{name}' (prior mean {:.6})",
            rated.global.prior.mean
        ));
        Ok(output::summary(&config, &areas, &rated, &name))
    }
}

type Read = (
    Areas,
    Option<(PathBuf, WeightsTable)>,
    Option<String>,
    Option<input::Points>,
);

/// Reads the weights table, the points (which fix the working CRS) and the areas.
fn read(params: &RatesParams, config: &Config, run: &mut Run) -> Result<Read> {
    let input = run.input()?.to_owned();
    let areas_path = config.areas_file.clone().unwrap_or(input);
    let table = input::read_table(config, &areas_path, run)?;
    let id_field = match &table {
        Some((_, t)) => areas::id_field_for(params.id_field.as_deref(), Some(t))?,
        None => None,
    };
    let points = input::read_points(config, run)?;
    let user_crs = run.common.crs.clone();
    let target = match &points {
        Some(p) => PolygonCrs::Into(&p.layer.srs),
        None => PolygonCrs::Working(user_crs.as_deref()),
    };
    let areas = input::read_areas(config, id_field.as_deref(), target, run)?;
    run.debug(format!("read {} areas", areas.layer.fids.len()));
    Ok((areas, table, id_field, points))
}

/// A binomial rate needs cases ≤ population at risk in every area.
fn check_binomial(config: &Config, areas: &Areas, counts: &Counts) -> Result<()> {
    if config.model != Model::Binomial {
        return Ok(());
    }
    let (cases, at_risk) = (&counts.cases, &counts.at_risk);
    match (0..cases.len()).find(|&i| cases[i] > at_risk[i]) {
        Some(i) => Err(Error::argument(
            "--model",
            format!(
                "binomial needs cases ≤ at risk, but area fid {} has {} cases and {} at risk; use --model poisson",
                areas.layer.fids[i], cases[i], at_risk[i]
            ),
        )),
        None => Ok(()),
    }
}

/// The neighbours of local EB: from the table (matched by id) or queen contiguity built on the
/// areas in the working CRS. None with `--no-local`.
fn neighbours(
    config: &Config,
    areas: &Areas,
    table: Option<(PathBuf, WeightsTable)>,
    id_field: Option<&str>,
) -> Result<Option<(weights::Neighbours, String)>> {
    let Some(local) = &config.local else {
        return Ok(None);
    };
    if let Some((path, table)) = table {
        let id = areas.id_column(id_field)?;
        let id = id.as_ref().map(|(f, c)| (f.as_str(), *c));
        let ids = areas::area_ids(&areas.path, &areas.layer, id)?;
        let lists = areas::table_neighbours(&path, &table, &ids, id_field)?;
        return Ok(Some((lists, format!("table {}", table.table))));
    }
    let params::LocalNeighbours::Queen { snap_m } = local else {
        return Err(Error::Failed("weights table expected".into()));
    };
    let lists =
        weights::contiguity(&areas.layer.polygons, Contiguity::Queen, *snap_m).map_err(|e| {
            Error::BadLayer {
                path: areas.path.clone(),
                layer: areas.layer.layer.clone(),
                message: format!("queen contiguity: {e}"),
            }
        })?;
    Ok(Some((lists, format!("queen contiguity, snap {snap_m} m"))))
}

/// Raw rates, global and local EB.
fn smooth<'a>(
    config: &Config,
    areas: &Areas,
    counts: &'a Counts,
    local: Option<(weights::Neighbours, String)>,
    run: &Run,
) -> Result<Rated<'a>> {
    let (cases, at_risk) = (&counts.cases, &counts.at_risk);
    let model = config.model;
    let global = eb::global_eb(cases, at_risk, model).ok_or_else(|| Error::BadLayer {
        path: areas.path.clone(),
        layer: areas.layer.layer.clone(),
        message: "no area has anyone at risk; no rate can be estimated".into(),
    })?;
    if global.prior.truncated() {
        run.log(format!(
            "stance-rates: the global prior variance estimate is negative ({:.3e}); set to 0, so every area takes the prior mean",
            global.prior.variance_estimate
        ));
    }
    let local = local.map(|(neighbours, source)| {
        let eb = eb::local_eb(cases, at_risk, &neighbours, model);
        Local {
            neighbours,
            source,
            eb,
        }
    });
    Ok(Rated {
        counts,
        raw: eb::raw_rates(cases, at_risk, model),
        global,
        local,
        surface: None,
    })
}

/// Statistics of `--surface` within each area, in the surface's CRS.
fn surface(
    config: &Config,
    areas: &Areas,
    run: &mut Run,
) -> Result<Option<(Vec<Option<zonal::ZoneStats>>, Value)>> {
    let Some(spec) = &config.surface else {
        return Ok(None);
    };
    let input = run.input()?.to_owned();
    let path = spec.file.clone().unwrap_or_else(|| input.clone());
    let surface = raster::read(&path, &spec.name)?;
    if path == input {
        run.note_input_layer(&spec.name);
    } else {
        run.note_extra_input(&path, &spec.name)?;
    }
    let surface_srs = crs::parse(&surface.crs_wkt)?;
    let mut polygons = areas.layer.polygons.clone();
    project_polygons(
        &mut polygons,
        &areas.layer.srs,
        &surface_srs,
        &areas.layer.layer,
    )?;
    let stats = zonal::zonal(
        &surface.grid,
        &surface.values,
        &polygons,
        spec.area_weighted,
    );
    let empty: Vec<i64> = (0..stats.len())
        .filter(|&i| stats[i].is_none())
        .map(|i| areas.layer.fids[i])
        .collect();
    let summary = json!({
        "surface": spec.name,
        "rule": if spec.area_weighted { "exact cell fractions" } else { "cell centres inside" },
        "cell_m": surface.grid.cell_m,
        "areas_without_cells": empty,
    });
    Ok(Some((stats, summary)))
}
