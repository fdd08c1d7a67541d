//! Any vector source GDAL reads (its own point geometry), and spreadsheets (Office Open XML,
//! ECMA-376, and OpenDocument, ISO/IEC 26300) whose x/y or WKT columns give the points.

use std::path::{Path, PathBuf};

use gdal::spatial_ref::SpatialRef;
use gdal::vector::{LayerAccess, OGRFieldType, OGRwkbGeometryType, OwnedFeatureIterator};
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;

use super::columns::{self, Columns, Geometry};
use super::{build_row, location_of, non_empty, source_srs, Request, Row};
use crate::checks::Location;

pub struct GdalReader {
    path: PathBuf,
    pub(super) layer: String,
    pub(super) driver: String,
    features: OwnedFeatureIterator,
    pub(super) srs: SpatialRef,
    columns: Columns<usize>,
    pub(super) count: u64,
    pub(super) read: u64,
    /// The time field, when it is a typed OGR date or date-time (read as a value, not OGR's
    /// text form).
    typed_time: Option<usize>,
    decimal_comma: bool,
}

impl GdalReader {
    pub(super) fn open(
        path: &Path,
        layer: Option<&str>,
        request: &Request,
        spreadsheet: bool,
    ) -> Result<Self> {
        let dataset = open_vector(path, spreadsheet)?;
        let driver = match path.extension().and_then(|e| e.to_str()) {
            Some(e) if e.eq_ignore_ascii_case("xlsx") => {
                "Office Open XML spreadsheet (ECMA-376)".into()
            }
            Some(e) if e.eq_ignore_ascii_case("ods") => {
                "OpenDocument spreadsheet (ISO/IEC 26300)".into()
            }
            _ => dataset.driver().long_name(),
        };
        let names: Vec<String> = dataset.layers().map(|l| l.name()).collect();
        let name = choose_layer(path, &names, layer)?;
        let owned = dataset
            .into_layer_by_name(&name)
            .map_err(Error::gdal(format!("opening layer '{name}'")))?;
        let geometry_type = gdal::vector::geometry_type_flatten(owned.defn().geometry_type());
        let native = geometry_type != OGRwkbGeometryType::wkbNone;
        if native
            && ![OGRwkbGeometryType::wkbPoint, OGRwkbGeometryType::wkbUnknown]
                .contains(&geometry_type)
        {
            return Err(Error::BadLayer {
                path: path.to_owned(),
                layer: name.clone(),
                message: format!(
                    "has {} geometries; expected points",
                    gdal::vector::geometry_type_to_name(geometry_type)
                ),
            });
        }
        let available: Vec<String> = owned.defn().fields().map(|f| f.name()).collect();
        let missing = |field: &str| Error::FieldNotFound {
            path: path.to_owned(),
            layer: name.clone(),
            field: field.to_owned(),
            available: available.join(", "),
        };
        let columns = columns::resolve(path, &available, request, native, &missing)?;
        let srs = match columns.geometry {
            Geometry::Native => source_srs(request.source_crs.as_deref(), || {
                layer_srs(path, &name, &owned)
            })?,
            _ => source_srs(request.source_crs.as_deref(), crs::wgs84)?,
        };
        let typed_time = columns.time.filter(|i| {
            owned.defn().fields().nth(*i).is_some_and(|f| {
                matches!(
                    f.field_type(),
                    OGRFieldType::OFTDateTime | OGRFieldType::OFTDate
                )
            })
        });
        Ok(GdalReader {
            path: path.to_owned(),
            driver,
            typed_time,
            columns,
            layer: name,
            count: owned.feature_count(),
            features: owned.owned_features(),
            srs,
            read: 0,
            decimal_comma: request.dialect.decimal_comma,
        })
    }

    pub(super) fn next_row(&mut self) -> Result<Option<Row>> {
        let Some(feature) = self.features.into_iter().next() else {
            return Ok(None);
        };
        self.read += 1;
        let typed_time = self.typed_time;
        let get = |i: &usize| {
            if Some(*i) == typed_time {
                // OGR's text form of a date-time ("2026/03/02 18:36:09+00") is not ISO 8601.
                return feature
                    .field_as_datetime(*i)
                    .ok()
                    .flatten()
                    .map(|t| t.to_rfc3339());
            }
            feature
                .field_as_string(*i)
                .ok()
                .flatten()
                .and_then(|s| non_empty(&s))
        };
        let native = match &self.columns.geometry {
            Geometry::Native => Some(match feature.geometry() {
                None => Location::Missing(String::new()),
                Some(g) => location_of(g),
            }),
            _ => None,
        };
        let row = feature.fid().unwrap_or(self.read);
        build_row(&self.columns, row, get, native, self.decimal_comma)
            .map(Some)
            .map_err(|found| found.error(&self.path, row))
    }
}

/// Opens `path` read-only as a vector source.
fn open_vector(path: &Path, spreadsheet: bool) -> Result<gdal::Dataset> {
    // A spreadsheet's first row is always its header, even when every cell is text.
    let headers = if spreadsheet { "FORCE" } else { "AUTO" };
    for key in ["OGR_XLSX_HEADERS", "OGR_ODS_HEADERS"] {
        gdal::config::set_thread_local_config_option(key, headers)
            .map_err(Error::gdal("setting the spreadsheet header option"))?;
    }
    gdal::Dataset::open_ex(
        path,
        gdal::DatasetOptions {
            open_flags: gdal::GdalOpenFlags::GDAL_OF_READONLY | gdal::GdalOpenFlags::GDAL_OF_VECTOR,
            ..Default::default()
        },
    )
    .map_err(|e| Error::InputFile {
        path: path.to_owned(),
        reason: format!("GDAL cannot read it as a vector source ({e})"),
    })
}

/// The layer named by `--layer`, or the only layer of the source.
fn choose_layer(path: &Path, names: &[String], layer: Option<&str>) -> Result<String> {
    match (layer, names) {
        (Some(l), _) => {
            names
                .iter()
                .find(|n| *n == l)
                .cloned()
                .ok_or_else(|| Error::LayerNotFound {
                    path: path.to_owned(),
                    layer: l.to_owned(),
                    available: names.join(", "),
                })
        }
        (None, [one]) => Ok(one.clone()),
        (None, []) => Err(Error::BadLayer {
            path: path.to_owned(),
            layer: String::new(),
            message: "the source has no layers".into(),
        }),
        (None, _) => Err(Error::argument(
            "--layer",
            format!(
                "{} has several layers; name one ({})",
                path.display(),
                names.join(", ")
            ),
        )),
    }
}

/// The layer's own CRS, in x = easting/longitude order.
fn layer_srs(path: &Path, name: &str, layer: &gdal::vector::OwnedLayer) -> Result<SpatialRef> {
    layer
        .spatial_ref()
        .map(|mut s| {
            s.set_axis_mapping_strategy(
                gdal::spatial_ref::AxisMappingStrategy::TraditionalGisOrder,
            );
            s
        })
        .ok_or_else(|| Error::BadLayer {
            path: path.to_owned(),
            layer: name.to_owned(),
            message: "has no CRS; give the coordinates' CRS with --source-crs".into(),
        })
}
