"""Benchmark data for stance-scan: 100,000 stance-synth records moved onto 20,000 distinct
locations (the first 20,000 distinct record positions; every other record snaps to the nearest
of them), projected to a Lambert azimuthal equal-area CRS in metres, with cases = oppose (and
classes 0/1/2 = oppose/neutral/support for the multinomial scan).
Writes a GeoPackage point layer `records` (for stance-scan) and an .npz (for the peer).

Usage: scan_prepare_data.py SYNTH.gpkg OUT.gpkg OUT.npz
"""
import sys

import geopandas as gpd
import numpy as np
from scipy.spatial import cKDTree

synth, out_gpkg, out_npz = sys.argv[1:4]
records = gpd.read_file(synth, layer="veldmark_records", columns=["stance"])
records = records.to_crs("+proj=laea +lat_0=35 +lon_0=-140.3 +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs")
xy = np.column_stack([records.geometry.x.to_numpy(), records.geometry.y.to_numpy()])
_, first = np.unique(xy, axis=0, return_index=True)
sites = xy[np.sort(first)[:20000]]
_, nearest = cKDTree(sites).query(xy)
xy = sites[nearest]
records = records.set_geometry(gpd.points_from_xy(xy[:, 0], xy[:, 1], crs=records.crs))
records.to_file(out_gpkg, layer="records", driver="GPKG")
stance = records["stance"].to_numpy()
classes = np.select([stance == "oppose", stance == "neutral", stance == "support"], [0, 1, 2], -1).astype(np.int8)
np.savez(out_npz, x=xy[:, 0], y=xy[:, 1], labels=(stance == "oppose").astype(np.int8), classes=classes)
print(f"{len(records)} records on {len(np.unique(xy, axis=0))} distinct locations")
