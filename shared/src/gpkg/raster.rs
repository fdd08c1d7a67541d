//! Float32 surfaces as GeoPackage tiled gridded coverage (OGC 17-066r1), TIFF tiles, nodata −9999.

use std::path::Path;

use gdal::raster::{Buffer, RasterCreationOptions};
use gdal::spatial_ref::SpatialRef;
use gdal::{Dataset, DriverManager};

use crate::error::{Error, Result};
use crate::grid::Grid;

/// Nodata value of every surface (SQLite cannot store NaN).
pub const NODATA: f32 = -9999.0;

/// A surface to write: values row-major, row 0 north, NaN or [`NODATA`] for no data.
#[derive(Debug)]
pub struct Surface<'a> {
    /// The grid.
    pub grid: &'a Grid,
    /// Cell values (`grid.len()` of them).
    pub values: &'a [f32],
    /// CRS of the grid.
    pub srs: &'a SpatialRef,
    /// Name of the quantity, e.g. `intensity_support`.
    pub field_name: &'a str,
    /// Unit of measure, e.g. `points per km²`.
    pub unit: &'a str,
    /// What the quantity is, in a sentence.
    pub quantity: &'a str,
}

/// Writes `surface` as table `name` into the GeoPackage at `path` (created if `!exists`).
pub(crate) fn write(path: &Path, exists: bool, name: &str, surface: &Surface<'_>) -> Result<()> {
    let ctx = || format!("writing surface '{name}'");
    let grid = surface.grid;
    if surface.values.len() != grid.len() {
        return Err(Error::Failed(format!(
            "surface '{name}': {} values for a grid of {} cells",
            surface.values.len(),
            grid.len()
        )));
    }
    let driver = DriverManager::get_driver_by_name("GPKG")
        .map_err(Error::gdal("finding GDAL's GPKG driver"))?;
    let mut options = vec![
        format!("RASTER_TABLE={name}"),
        "TILE_FORMAT=TIFF".to_owned(),
        "BLOCKSIZE=256".to_owned(),
        format!("FIELD_NAME={}", surface.field_name),
        format!("UOM={}", surface.unit),
        format!("QUANTITY_DEFINITION={}", surface.quantity),
        format!("RASTER_DESCRIPTION={}", surface.quantity),
        "GRID_CELL_ENCODING=grid-value-is-area".to_owned(),
    ];
    if exists {
        options.push("APPEND_SUBDATASET=YES".to_owned());
    }
    let options = RasterCreationOptions::from_iter(options);
    let mut dataset = driver
        .create_with_band_type_with_options::<f32, _>(path, grid.cols, grid.rows, 1, &options)
        .map_err(Error::gdal(ctx()))?;
    dataset
        .set_geo_transform(&grid.geo_transform())
        .map_err(Error::gdal(ctx()))?;
    dataset
        .set_spatial_ref(surface.srs)
        .map_err(Error::gdal(ctx()))?;
    {
        let mut band = dataset.rasterband(1).map_err(Error::gdal(ctx()))?;
        // GDAL's GeoPackage driver stores the value but may report an error with an empty message
        // (DESIGN.md); what counts is that the value reads back.
        let _ = band.set_no_data_value(Some(f64::from(NODATA)));
        if band.no_data_value() != Some(f64::from(NODATA)) {
            return Err(Error::Failed(format!(
                "surface '{name}': nodata value was not stored"
            )));
        }
        let data: Vec<f32> = surface
            .values
            .iter()
            .map(|v| if v.is_finite() { *v } else { NODATA })
            .collect();
        let mut buffer = Buffer::new((grid.cols, grid.rows), data);
        band.write((0, 0), (grid.cols, grid.rows), &mut buffer)
            .map_err(Error::gdal(ctx()))?;
    }
    dataset.close().map_err(Error::gdal(ctx()))?;
    Ok(())
}

/// A surface read back: its grid, values (nodata as NaN) and WKT of its CRS.
#[derive(Debug, Clone)]
pub struct SurfaceData {
    /// The grid.
    pub grid: Grid,
    /// Values, row 0 north; NaN where no data.
    pub values: Vec<f32>,
    /// CRS as WKT.
    pub crs_wkt: String,
}

/// Reads surface table `name` from the GeoPackage at `path`.
///
/// # Errors
/// [`Error::LayerNotFound`] if the table is missing, [`Error::BadLayer`] if it is not a
/// single-band north-up grid.
pub fn read(path: &Path, name: &str) -> Result<SurfaceData> {
    let tables = super::list_tables(path)?;
    if !tables
        .iter()
        .any(|(t, kind)| t == name && kind.contains("gridded"))
    {
        let available: Vec<&str> = tables
            .iter()
            .filter(|(_, k)| k.contains("gridded"))
            .map(|(t, _)| t.as_str())
            .collect();
        return Err(Error::LayerNotFound {
            path: path.to_owned(),
            layer: name.to_owned(),
            available: if available.is_empty() {
                "no surfaces".into()
            } else {
                available.join(", ")
            },
        });
    }
    let bad = |message: String| Error::BadLayer {
        path: path.to_owned(),
        layer: name.to_owned(),
        message,
    };
    let dataset = Dataset::open_ex(
        format!("GPKG:{}:{}", path.display(), name),
        gdal::DatasetOptions {
            open_flags: gdal::GdalOpenFlags::GDAL_OF_READONLY | gdal::GdalOpenFlags::GDAL_OF_RASTER,
            ..Default::default()
        },
    )
    .map_err(|e| bad(e.to_string()))?;
    let (cols, rows) = dataset.raster_size();
    let transform = dataset.geo_transform().map_err(|e| bad(e.to_string()))?;
    let grid = Grid::from_geo_transform(&transform, cols, rows)
        .ok_or_else(|| bad("not a north-up grid of square cells".into()))?;
    let band = dataset.rasterband(1).map_err(|e| bad(e.to_string()))?;
    let nodata = band.no_data_value();
    let buffer = band
        .read_as::<f32>((0, 0), (cols, rows), (cols, rows), None)
        .map_err(|e| bad(e.to_string()))?;
    let (_, mut values) = buffer.into_shape_and_vec();
    if let Some(nodata) = nodata {
        for v in &mut values {
            if f64::from(*v) == nodata {
                *v = f32::NAN;
            }
        }
    }
    Ok(SurfaceData {
        grid,
        values,
        crs_wkt: dataset.projection(),
    })
}
