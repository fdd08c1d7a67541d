"""Independent read-back of a stance-toolbox GeoPackage.

Usage: python read_back.py FILE.gpkg

Reads every vector layer with pyogrio and every gridded-coverage (raster) table with
rasterio -- both PyPI wheels carry their own GDAL build, independent of the Debian GDAL the
toolbox links -- and prints ONE JSON object to stdout:

  {"versions": {...},
   "vector": [{"name", "geometry_type", "count", "crs", "fields", "fids",
               "values": {field: [...]},                  # every attribute value
               "datetime_as_string": {field: [...]},      # GDAL's own text, with time zone
               "x", "y", "x_bits", "y_bits",              # point layers only
               "total_bounds", "wkb_lengths"}, ...],      # every layer
   "raster": [{"name", "width", "height", "transform", "crs_wkt", "nodata", "dtype",
               "unit", "values"}, ...]}

Notes
- Point WKB is decoded with `struct` (no shapely/geopandas needed). Coordinates are given
  as numbers and as the IEEE-754 bit patterns of the doubles (`x_bits`, `y_bits`, unsigned
  64-bit integers), so a reader whose JSON float parsing is not exactly rounding can still
  compare bit for bit. Empty points give null.
- Date-times: `values` holds str() of the numpy datetime64 pyogrio returns (no time zone);
  `datetime_as_string` holds GDAL's text for the same field (pyogrio's
  `datetime_as_string=True`), which carries the zone (`+00` for UTC).
- Raster values are band 1, row 0 at the top (north), row-major, nodata (and NaN) -> null.
  Float32 values are widened to double exactly, so their decimal text identifies the f32.
- JSON is written with allow_nan=False: any NaN left anywhere is a bug in this script.

Checked with: Python 3 in the project venv (tests/reference/requirements.txt), numpy 2.1.3,
pyogrio 0.10.0 (GDAL 3.9.1 in its wheel), rasterio 1.4.3 (GDAL 3.9.3 in its wheel).
"""

import json
import math
import sqlite3
import struct
import sys

import numpy as np
import pyogrio
import rasterio
from pyogrio import raw


def plain(value):
    """A numpy scalar or Python value as a JSON-safe Python value (NaN/NaT -> None)."""
    if value is None:
        return None
    if isinstance(value, np.datetime64):
        return None if np.isnat(value) else str(value)
    if isinstance(value, (np.integer, int)) and not isinstance(value, bool):
        return int(value)
    if isinstance(value, (np.floating, float)):
        value = float(value)
        return None if math.isnan(value) else value
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, bytes):
        return value.hex()
    return str(value)


def decode_point(wkb):
    """(x, y) from a WKB point (either byte order, ISO Z/M codes allowed); None if empty/other."""
    if wkb is None or len(wkb) < 5:
        return None
    endian = "<" if wkb[0] == 1 else ">"
    (code,) = struct.unpack(endian + "I", wkb[1:5])
    if (code & 0x0FFFFFFF) % 1000 != 1 or len(wkb) < 21:
        return None
    x, y = struct.unpack(endian + "dd", wkb[5:21])
    if math.isnan(x) and math.isnan(y):
        return None
    return x, y


def bits(value):
    """IEEE-754 bit pattern of a double as an unsigned integer."""
    return struct.unpack("<Q", struct.pack("<d", value))[0]


def read_vector(path, name, geometry_type):
    info = pyogrio.read_info(path, layer=name)
    meta, fids, geometry, field_data = raw.read(path, layer=name, return_fids=True)
    fields = [str(f) for f in meta["fields"]]
    layer = {
        "name": name,
        "geometry_type": geometry_type,
        "count": int(info["features"]),
        "crs": info["crs"],
        "fields": fields,
        "dtypes": [str(d) for d in meta["dtypes"]],
        "fids": [int(f) for f in fids],
        "values": {
            field: [plain(v) for v in column] for field, column in zip(fields, field_data)
        },
        "total_bounds": [plain(v) for v in info["total_bounds"]],
        "wkb_lengths": [None if g is None else len(g) for g in geometry],
    }
    datetime_fields = [f for f, d in zip(fields, meta["dtypes"]) if str(d).startswith("datetime64")]
    if datetime_fields:
        _, _, _, as_text = raw.read(
            path, layer=name, columns=datetime_fields, read_geometry=False, datetime_as_string=True
        )
        layer["datetime_as_string"] = {
            field: [plain(v) for v in column] for field, column in zip(datetime_fields, as_text)
        }
    if geometry_type.lower() == "point":
        points = [decode_point(g) for g in geometry]
        layer["x"] = [None if p is None else p[0] for p in points]
        layer["y"] = [None if p is None else p[1] for p in points]
        layer["x_bits"] = [None if p is None else bits(p[0]) for p in points]
        layer["y_bits"] = [None if p is None else bits(p[1]) for p in points]
    return layer


def contents(path, data_types):
    """Table names of `gpkg_contents` with one of `data_types`, sorted."""
    connection = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        marks = ", ".join("?" for _ in data_types)
        rows = connection.execute(
            f"SELECT table_name FROM gpkg_contents WHERE data_type IN ({marks}) "
            "ORDER BY table_name",
            list(data_types),
        ).fetchall()
    finally:
        connection.close()
    return [r[0] for r in rows]


def vector_layers(path):
    """(name, geometry type) of every vector layer as pyogrio lists them.

    pyogrio opens files in vector mode, in which GDAL refuses a GeoPackage that holds only
    rasters ("not recognized as being in a supported file format"): such a file has no layers.
    """
    if not contents(path, ["features", "attributes"]):
        return []
    return [(str(n), str(g)) for n, g in pyogrio.list_layers(path)]


def read_raster(path, name):
    with rasterio.open(f"GPKG:{path}:{name}") as dataset:
        band = dataset.read(1)
        nodata = dataset.nodata
        missing = np.isnan(band) if band.dtype.kind == "f" else np.zeros(band.shape, bool)
        if nodata is not None:
            missing |= band == nodata
        values = [None if m else plain(v) for v, m in zip(band.ravel(), missing.ravel())]
        return {
            "name": name,
            "width": dataset.width,
            "height": dataset.height,
            "count": dataset.count,
            "transform": list(dataset.transform.to_gdal()),
            "crs_wkt": None if dataset.crs is None else dataset.crs.to_wkt(),
            "crs_epsg": None if dataset.crs is None else dataset.crs.to_epsg(),
            "nodata": plain(nodata),
            "dtype": dataset.dtypes[0],
            "unit": dataset.units[0] or None,
            "values": values,
        }


def main(argv):
    if len(argv) != 2:
        print("usage: python read_back.py FILE.gpkg", file=sys.stderr)
        return 2
    path = argv[1]
    result = {
        "file": path,
        "versions": {
            "numpy": np.__version__,
            "pyogrio": pyogrio.__version__,
            "pyogrio_gdal": pyogrio.__gdal_version_string__,
            "rasterio": rasterio.__version__,
            "rasterio_gdal": rasterio.__gdal_version__,
        },
        "vector": [read_vector(path, n, g) for n, g in vector_layers(path)],
        "raster": [read_raster(path, n) for n in contents(path, ["2d-gridded-coverage"])],
    }
    json.dump(result, sys.stdout, allow_nan=False)
    sys.stdout.write("\n")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
