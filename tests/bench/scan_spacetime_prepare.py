"""Benchmark data for the space-time scan of stance-scan: RECORDS records snapped to LOCATIONS
distinct locations (integer metres in UTM zone 33N, around 60 invented towns) over MONTHS months
from January 2024, with a burst of extra records (0.5 %) within 4 km of one town in months 21-22.
Pure NumPy from a fixed seed; writes a CSV for ogr2ogr (GeoPackage layer `records`, fields
stance and time_utc) and an .npz for the peer (x, y, month per record).

Usage: scan_spacetime_prepare.py RECORDS LOCATIONS MONTHS OUT.csv OUT.npz
"""
import sys

import numpy as np

records, locations, months = (int(v) for v in sys.argv[1:4])
out_csv, out_npz = sys.argv[4:6]
rng = np.random.default_rng(2005)
towns = rng.uniform(0, 120_000, (60, 2))
town_of = rng.integers(0, len(towns), locations * 2)
xy = np.round(towns[town_of] + rng.normal(0, 3_000, (locations * 2, 2)))
_, first = np.unique(xy, axis=0, return_index=True)
sites = xy[np.sort(first)[:locations]]
weight = rng.lognormal(0.0, 1.0, len(sites))
burst = records // 200
site = rng.choice(len(sites), records - burst, p=weight / weight.sum())
site[: len(sites)] = np.arange(len(sites))  # every location holds a record
month = rng.integers(0, months, records - burst)
near = np.flatnonzero(((sites - towns[7]) ** 2).sum(axis=1) <= 4_000.0 ** 2)
site = np.concatenate([site, rng.choice(near, burst)])
month = np.concatenate([month, rng.integers(20, 22, burst) % months])
order = rng.permutation(records)
site, month = site[order], month[order]
x, y = sites[site, 0] + 500_000.0, sites[site, 1] + 4_000_000.0
stance = np.array(["oppose", "neutral", "support"])[rng.integers(0, 3, records)]
label = np.array([f"{2024 + m // 12}-{m % 12 + 1:02d}-15T12:00:00Z" for m in range(months)])
with open(out_csv, "w") as f:
    f.write("x,y,stance,time_utc\n")
    for i in range(0, records, 100_000):
        j = slice(i, i + 100_000)
        rows = np.char.add(np.char.add(x[j].astype(int).astype(str), ","), y[j].astype(int).astype(str))
        rows = np.char.add(np.char.add(np.char.add(rows, ","), stance[j]), ",")
        rows = np.char.add(rows, label[month[j]])
        f.write("\n".join(rows.tolist()) + "\n")
np.savez(out_npz, x=x, y=y, month=month.astype(np.int32))
print(f"{records} records on {len(np.unique(np.column_stack([x, y]), axis=0))} locations, {months} months")
