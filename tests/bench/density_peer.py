"""Python peer of stance-density for tests/bench/density_vs_python.sh, doing the same job: pyogrio
reads the records, projects them to the grid's CRS, KDEpy's FFTKDE (biweight, bw = h/sqrt(7),
norm = 2) estimates each class on the same grid, NumPy forms the four comparison surfaces
(difference, difference of square roots, share, log ratio), and rasterio (GDAL's GeoPackage
driver) writes the seven Float32 surfaces into one GeoPackage.

The job runs twice in the same process: cold, then warm (the headline). Prints JSON timings of
both. Usage: density_peer.py GPKG GRID_JSON OUTDIR"""
import json, math, os, sys, time
import numpy as np
import pyogrio, rasterio
from rasterio.transform import from_origin
from KDEpy import FFTKDE


def job(gpkg, g, out):
    t0 = time.perf_counter()
    df = pyogrio.read_dataframe(gpkg, layer="veldmark_records", columns=["stance"])
    df = df.to_crs(g["crs_wkt"])
    x, y = df.geometry.x.to_numpy(), df.geometry.y.to_numpy()
    t_read = time.perf_counter()
    cell, cols, rows, h = g["cell_m"], g["cols"], g["rows"], g["bandwidth_m"]
    # FFTKDE needs an equidistant grid strictly containing the data: pad by the support.
    pad = int(math.ceil(h / cell)) + 2
    ex = g["x_min"] + (np.arange(-pad, cols + pad) + 0.5) * cell
    ey = g["y_min"] + (np.arange(-pad, rows + pad) + 0.5) * cell
    mesh = np.array(np.meshgrid(ex, ey, indexing="ij")).reshape(2, -1).T
    surfaces = {}
    t_compute = 0.0
    for cls in ["oppose", "neutral", "support"]:
        sel = (df["stance"] == cls).to_numpy()
        data = np.column_stack([x[sel], y[sel]])
        t = time.perf_counter()
        z = FFTKDE(kernel="biweight", bw=h / math.sqrt(7.0), norm=2).fit(data).evaluate(mesh)
        z = z.reshape(len(ex), len(ey))[pad:pad + cols, pad:pad + rows].T[::-1] * sel.sum() * 1e6
        t_compute += time.perf_counter() - t
        surfaces[cls] = z
    a, b = np.maximum(surfaces["support"], 0.0), np.maximum(surfaces["oppose"], 0.0)
    total = a + b
    floor = 1e-6 * total.max()
    surfaces["diff"] = a - b
    surfaces["sqrtdiff"] = np.sqrt(a) - np.sqrt(b)
    surfaces["share"] = np.where(total >= floor, a / np.where(total > 0, total, 1.0), np.nan)
    surfaces["log_ratio"] = np.log((a + floor) / (b + floor))
    t_write = time.perf_counter()
    transform = from_origin(g["x_min"], g["y_min"] + rows * cell, cell, cell)
    for k, (name, z) in enumerate(surfaces.items()):
        options = {"RASTER_TABLE": f"density_{name}"}
        if k > 0:
            options["APPEND_SUBDATASET"] = "YES"
        with rasterio.open(out, "w", driver="GPKG", width=cols, height=rows, count=1, dtype="float32",
                           crs=g["crs_wkt"], transform=transform, nodata=-9999.0, **options) as d:
            d.write(np.nan_to_num(z, nan=-9999.0).astype("float32"), 1)
    end = time.perf_counter()
    return {"read_s": t_read - t0, "compute_s": t_compute, "write_s": end - t_write, "total_s": end - t0}


gpkg, grid_json, outdir = sys.argv[1], sys.argv[2], sys.argv[3]
g = json.load(open(grid_json))
out = f"{outdir}/peer.gpkg"
timings = {}
for run in ["cold", "warm"]:
    if os.path.exists(out):
        os.remove(out)
    timings[run] = job(gpkg, g, out)
print(json.dumps(timings))
