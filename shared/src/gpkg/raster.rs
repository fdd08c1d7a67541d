//! Float32 surfaces as GeoPackage tiled gridded coverage (OGC 17-066r1), TIFF tiles, nodata −9999.
//!
//! GDAL's GeoPackage driver creates each coverage's table and system rows (tile matrix set and
//! matrices, coverage ancillary row, extensions, spatial reference system); the tiles are then
//! encoded in parallel as uncompressed single-band Float32 TIFFs (the `tiff` crate) and inserted
//! with SQLite, with the per-tile statistics of the tile ancillary table. GDAL's own LZW tiles
//! of kernel surfaces come out larger than the raw floats and take most of a run's write time.

use std::path::Path;

use gdal::raster::RasterCreationOptions;
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
    let mut dataset = crate::gpkg::stage::unsynced(|| {
        driver.create_with_band_type_with_options::<f32, _>(path, grid.cols, grid.rows, 1, &options)
    })
    .map_err(Error::gdal(ctx()))?;
    dataset
        .set_geo_transform(&grid.geo_transform())
        .map_err(Error::gdal(ctx()))?;
    dataset
        .set_spatial_ref(surface.srs)
        .map_err(Error::gdal(ctx()))?;
    {
        let mut band = dataset.rasterband(1).map_err(Error::gdal(ctx()))?;
        // GDAL's GeoPackage driver stores the value but may report an error with an empty
        // message; what counts is that the value reads back.
        let _ = band.set_no_data_value(Some(f64::from(NODATA)));
        if band.no_data_value() != Some(f64::from(NODATA)) {
            return Err(Error::Failed(format!(
                "surface '{name}': nodata value was not stored"
            )));
        }
    }
    dataset.close().map_err(Error::gdal(ctx()))?;
    let connection = rusqlite::Connection::open(path).map_err(Error::sqlite(ctx()))?;
    // The staging file (see `stage::unsynced`).
    connection
        .execute_batch("PRAGMA synchronous = OFF; PRAGMA journal_mode = MEMORY;")
        .map_err(Error::sqlite(ctx()))?;
    write_tiles(&connection, name, surface).map_err(Error::sqlite(ctx()))
}

/// Side of a tile in cells (GDAL's `BLOCKSIZE`).
const TILE: usize = 256;

/// Encodes and inserts the tiles of `surface` into the empty coverage table `name` that GDAL
/// created: at the finest zoom level, placed by the tile matrix set's origin; tiles with no
/// data are left out (readers fill them with nodata, as GDAL does when it writes).
fn write_tiles(
    connection: &rusqlite::Connection,
    name: &str,
    surface: &Surface<'_>,
) -> rusqlite::Result<()> {
    use rayon::prelude::*;
    let grid = surface.grid;
    let (set_min_x, set_max_y): (f64, f64) = connection.query_row(
        "SELECT min_x, max_y FROM gpkg_tile_matrix_set WHERE lower(table_name) = lower(?1)",
        [name],
        |r| Ok((r.get(0)?, r.get(1)?)),
    )?;
    let (zoom, matrix_width, matrix_height, tile_width, tile_height): (i64, i64, i64, i64, i64) =
        connection.query_row(
            "SELECT zoom_level, matrix_width, matrix_height, tile_width, tile_height FROM gpkg_tile_matrix
             WHERE lower(table_name) = lower(?1) ORDER BY zoom_level DESC LIMIT 1",
            [name],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?)),
        )?;
    if tile_width != TILE as i64 || tile_height != TILE as i64 {
        return Err(rusqlite::Error::UserFunctionError(
            format!("unexpected tile size {tile_width}×{tile_height}").into(),
        ));
    }
    // Cell (0, 0) of the grid sits this many cells right of and below the matrix origin.
    let (x0, y0) = (grid.x_min, grid.y_max());
    let offset_col = ((x0 - set_min_x) / grid.cell_m).round() as i64;
    let offset_row = ((set_max_y - y0) / grid.cell_m).round() as i64;
    let tiles: Vec<(i64, i64)> = (0..matrix_height)
        .flat_map(|r| (0..matrix_width).map(move |c| (c, r)))
        .filter(|&(c, r)| {
            let first_col = c * TILE as i64 - offset_col;
            let first_row = r * TILE as i64 - offset_row;
            first_col < grid.cols as i64
                && first_row < grid.rows as i64
                && first_col + TILE as i64 > 0
                && first_row + TILE as i64 > 0
        })
        .collect();
    let encoded: Vec<Option<Encoded>> = tiles
        .par_iter()
        .map(|&(c, r)| encode_tile(grid, surface.values, (c, r), (offset_col, offset_row)))
        .collect::<rusqlite::Result<_>>()?;
    connection.execute_batch("BEGIN")?;
    {
        let mut tile = connection.prepare(&format!(
            "INSERT INTO {} (zoom_level, tile_column, tile_row, tile_data) VALUES (?1, ?2, ?3, ?4)",
            super::quote_identifier(name)
        ))?;
        let mut ancillary = connection.prepare(
            "INSERT INTO gpkg_2d_gridded_tile_ancillary (tpudt_name, tpudt_id, scale, offset, min, max, mean, std_dev)
             VALUES (?1, ?2, 1.0, 0.0, ?3, ?4, ?5, ?6)",
        )?;
        for (c, r, bytes, stats) in encoded.into_iter().flatten() {
            tile.execute(rusqlite::params![zoom, c, r, bytes])?;
            let id = connection.last_insert_rowid();
            ancillary.execute(rusqlite::params![
                name, id, stats[0], stats[1], stats[2], stats[3]
            ])?;
        }
    }
    connection.execute_batch("COMMIT")
}

/// An encoded tile: column, row, TIFF bytes and (min, max, mean, standard deviation).
type Encoded = (i64, i64, Vec<u8>, [f64; 4]);

/// Tile (`c`, `r`) of the matrix as an uncompressed Float32 TIFF with its statistics; `None`
/// when every cell is nodata (left out, as GDAL does). `offset` is where grid cell (0, 0) sits
/// in the matrix, in cells.
fn encode_tile(
    grid: &Grid,
    values: &[f32],
    (c, r): (i64, i64),
    (offset_col, offset_row): (i64, i64),
) -> rusqlite::Result<Option<Encoded>> {
    let mut cells = vec![NODATA; TILE * TILE];
    let (mut n, mut sum, mut sum2) = (0u64, 0.0f64, 0.0f64);
    let (mut low, mut high) = (f64::INFINITY, f64::NEG_INFINITY);
    for tr in 0..TILE {
        let row = r * TILE as i64 + tr as i64 - offset_row;
        if row < 0 || row >= grid.rows as i64 {
            continue;
        }
        for tc in 0..TILE {
            let col = c * TILE as i64 + tc as i64 - offset_col;
            if col < 0 || col >= grid.cols as i64 {
                continue;
            }
            let v = values[row as usize * grid.cols + col as usize];
            if v.is_finite() && v != NODATA {
                cells[tr * TILE + tc] = v;
                let v = f64::from(v);
                n += 1;
                sum += v;
                sum2 += v * v;
                low = low.min(v);
                high = high.max(v);
            }
        }
    }
    if n == 0 {
        return Ok(None);
    }
    let mean = sum / n as f64;
    let std_dev = (sum2 / n as f64 - mean * mean).max(0.0).sqrt();
    let mut bytes = std::io::Cursor::new(Vec::with_capacity(TILE * TILE * 4 + 512));
    tiff::encoder::TiffEncoder::new(&mut bytes)
        .and_then(|mut e| {
            e.write_image::<tiff::encoder::colortype::Gray32Float>(TILE as u32, TILE as u32, &cells)
        })
        .map_err(|e| rusqlite::Error::UserFunctionError(e.to_string().into()))?;
    Ok(Some((c, r, bytes.into_inner(), [low, high, mean, std_dev])))
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
