//! Working CRS: the user's `--crs`, the input's projected CRS in metres, or a Lambert azimuthal
//! equal-area projection (EPSG method 9820) centred on geographic data.

use gdal::spatial_ref::{AxisMappingStrategy, CoordTransform, SpatialRef};

use crate::error::{Error, Result};

/// Tolerance on a projected CRS's linear unit for it to count as metres.
const METRE_TOLERANCE: f64 = 1e-9;

/// A spatial reference with traditional GIS axis order (x = longitude / easting).
///
/// # Errors
/// [`Error::Crs`] when GDAL/PROJ cannot interpret `definition` (EPSG:n, WKT or PROJ string).
pub fn parse(definition: &str) -> Result<SpatialRef> {
    let mut srs = SpatialRef::from_definition(definition).map_err(|e| Error::Crs {
        definition: definition.to_owned(),
        message: format!("not understood ({e}); expected EPSG:n, WKT or a PROJ string"),
    })?;
    srs.set_axis_mapping_strategy(AxisMappingStrategy::TraditionalGisOrder);
    Ok(srs)
}

/// WGS 84 longitude/latitude in traditional order.
///
/// # Errors
/// [`Error::Crs`] if PROJ's database is unavailable.
pub fn wgs84() -> Result<SpatialRef> {
    parse("EPSG:4326")
}

/// A Lambert azimuthal equal-area CRS on WGS 84 centred on (`lon`, `lat`), rounded to 1e-4°
/// so the same data always gives the same definition.
///
/// # Errors
/// [`Error::Crs`] for a centre outside the valid range.
pub fn laea_centred(lon: f64, lat: f64) -> Result<SpatialRef> {
    if !(lon.is_finite()
        && lat.is_finite()
        && (-180.0..=180.0).contains(&lon)
        && (-90.0..=90.0).contains(&lat))
    {
        return Err(Error::Crs {
            definition: format!("LAEA centre {lon}, {lat}"),
            message: "centre out of range".into(),
        });
    }
    let round = |v: f64| (v * 1e4).round() / 1e4;
    let proj = format!(
        "+proj=laea +lat_0={} +lon_0={} +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs",
        round(lat),
        round(lon)
    );
    parse(&proj)
}

/// Whether `srs` is projected with metres as its linear unit.
pub fn is_projected_metres(srs: &SpatialRef) -> bool {
    srs.is_projected() && (srs.linear_units() - 1.0).abs() < METRE_TOLERANCE
}

/// A short label for logs and summaries: `EPSG:n` when known, else the CRS name.
pub fn label(srs: &SpatialRef) -> String {
    match (srs.auth_name(), srs.auth_code()) {
        (Some(name), Ok(code)) => format!("{name}:{code}"),
        // A CRS built from a PROJ string (the centred LAEA) has no authority and the name
        // "unknown": its PROJ string says what it is.
        _ => match srs.name().filter(|n| !n.eq_ignore_ascii_case("unknown")) {
            Some(name) => name,
            None => srs
                .to_proj4()
                .map(|p| p.trim().to_owned())
                .unwrap_or_else(|_| "unnamed CRS".into()),
        },
    }
}

/// Chooses the working CRS for data in `source`.
///
/// - `--crs` given: it must be projected in metres.
/// - `source` projected in metres: used as is.
/// - otherwise (geographic, or projected in feet or another unit): a Lambert azimuthal
///   equal-area CRS centred on the data, whose lon/lat centre `centre` computes on demand.
///
/// # Errors
/// [`Error::Crs`] for an unusable `--crs`.
pub fn working(
    user: Option<&str>,
    source: &SpatialRef,
    centre: impl FnOnce() -> Result<(f64, f64)>,
) -> Result<SpatialRef> {
    if let Some(definition) = user {
        let srs = parse(definition)?;
        if !srs.is_projected() {
            return Err(Error::Crs {
                definition: definition.to_owned(),
                message: "is not a projected CRS; distances need a projected CRS in metres".into(),
            });
        }
        if !is_projected_metres(&srs) {
            return Err(Error::Crs {
                definition: definition.to_owned(),
                message: format!(
                    "uses the unit '{}' ({} m); the working CRS must be in metres",
                    srs.linear_units_name().unwrap_or_default(),
                    srs.linear_units()
                ),
            });
        }
        return Ok(srs);
    }
    if is_projected_metres(source) {
        let mut srs = source.clone();
        srs.set_axis_mapping_strategy(AxisMappingStrategy::TraditionalGisOrder);
        return Ok(srs);
    }
    let (lon, lat) = centre()?;
    laea_centred(lon, lat)
}

/// The CRS for summaries: `EPSG:n` when known, else its PROJ string (the centred Lambert
/// azimuthal equal-area projection has no name).
pub fn summary_text(srs: &SpatialRef) -> String {
    let name = label(srs);
    if name.eq_ignore_ascii_case("unknown") || name == "unnamed CRS" {
        srs.to_proj4().map(|p| p.trim().to_owned()).unwrap_or(name)
    } else {
        name
    }
}

/// Transforms coordinates in place from `from` to `to`.
///
/// # Errors
/// [`Error::Crs`] when PROJ cannot transform them (e.g. a point outside the projection's domain).
pub fn transform(from: &SpatialRef, to: &SpatialRef, xs: &mut [f64], ys: &mut [f64]) -> Result<()> {
    if xs.is_empty() {
        return Ok(());
    }
    // PROJ transforms are not shareable across threads: each chunk builds its own, and chunks
    // run in parallel (on 2 cores this halves the projection of 1,000,000 points).
    let chunk: usize = xs.len().div_ceil(rayon::current_num_threads()).max(1 << 12);
    let make = || {
        CoordTransform::new(from, to).map_err(|e| Error::Crs {
            definition: label(to),
            message: format!("no transformation from {} ({e})", label(from)),
        })
    };
    make()?;
    let from_wkt = from.to_wkt().map_err(|e| Error::Crs {
        definition: label(from),
        message: e.to_string(),
    })?;
    let to_wkt = to.to_wkt().map_err(|e| Error::Crs {
        definition: label(to),
        message: e.to_string(),
    })?;
    use rayon::prelude::*;
    xs.par_chunks_mut(chunk)
        .zip(ys.par_chunks_mut(chunk))
        .try_for_each(|(x, y)| {
            let from = parse(&from_wkt)?;
            let to = parse(&to_wkt)?;
            let transform = CoordTransform::new(&from, &to).map_err(|e| Error::Crs {
                definition: label(&to),
                message: e.to_string(),
            })?;
            let mut z = vec![0.0; x.len()];
            transform
                .transform_coords(x, y, &mut z)
                .map_err(|e| Error::Crs {
                    definition: label(&to),
                    message: format!("transforming from {} failed ({e})", label(&from)),
                })
        })
}

/// Centre (lon, lat) of the bounding box of points given in `source`, for centring a projection.
///
/// # Errors
/// [`Error::Crs`] when the points cannot be taken to WGS 84.
pub fn lonlat_centre(source: &SpatialRef, xs: &[f64], ys: &[f64]) -> Result<(f64, f64)> {
    let finite = xs
        .iter()
        .zip(ys)
        .filter(|(x, y)| x.is_finite() && y.is_finite());
    let (mut x0, mut x1, mut y0, mut y1) = (
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    );
    for (x, y) in finite {
        x0 = x0.min(*x);
        x1 = x1.max(*x);
        y0 = y0.min(*y);
        y1 = y1.max(*y);
    }
    if !x0.is_finite() {
        return Err(Error::Crs {
            definition: label(source),
            message: "no finite coordinates to centre a projection on".into(),
        });
    }
    let mut cx = [(x0 + x1) / 2.0];
    let mut cy = [(y0 + y1) / 2.0];
    if !source.is_geographic() {
        transform(source, &wgs84()?, &mut cx, &mut cy)?;
    }
    Ok((cx[0], cy[0]))
}
