"""Python peer of stance-density for tests/bench/density_vs_python.sh: pyogrio reads the records,
KDEpy's FFTKDE (biweight, bw = h/sqrt(7), norm = 2) estimates each class on the same grid,
rasterio writes Float32 GeoTIFFs. Prints JSON timings. Usage: density_peer.py GPKG GRID_JSON OUTDIR"""
import json, math, sys, time
import numpy as np
import pyogrio, rasterio
from rasterio.transform import from_origin
from KDEpy import FFTKDE

t0 = time.perf_counter()
gpkg, grid_json, outdir = sys.argv[1], sys.argv[2], sys.argv[3]
g = json.load(open(grid_json))
df = pyogrio.read_dataframe(gpkg, layer="veldmark_records", columns=["stance"])
df = df.to_crs(g["crs_wkt"])
x, y = df.geometry.x.to_numpy(), df.geometry.y.to_numpy()
t_read = time.perf_counter()
cell, cols, rows, h = g["cell_m"], g["cols"], g["rows"], g["bandwidth_m"]
cx = g["x_min"] + (np.arange(cols) + 0.5) * cell
cy = g["y_min"] + (np.arange(rows) + 0.5) * cell
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
    surfaces[cls] = z.astype("float32")
for cls, z in surfaces.items():
    with rasterio.open(f"{outdir}/peer_{cls}.tif", "w", driver="GTiff", width=cols, height=rows, count=1,
                       dtype="float32", crs=g["crs_wkt"], transform=from_origin(g["x_min"], g["y_min"] + rows * cell, cell, cell)) as d:
        d.write(z, 1)
print(json.dumps({"read_s": t_read - t0, "compute_s": t_compute, "total_s": time.perf_counter() - t0}))
