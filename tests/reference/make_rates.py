"""Reference numbers for stance-rates from PySAL: esda Empirical_Bayes (global) and
Spatial_Empirical_Bayes (local) on the North Carolina SIDS counties (SID74 over BIR74), queen
contiguity from libpysal. Writes tests/reference/data/rates_nc_esda.json.

Run from the repository root with the reference venv: .venv-reference/bin/python
tests/reference/make_rates.py (or `make reference`). Data: sf's nc.gpkg (Debian r-cran-sf),
copied to tests/reference/data/nc.gpkg, read with pyogrio in file order.
"""

import json

import esda
import libpysal
import numpy as np
import pyogrio

PATH = "tests/reference/data/nc.gpkg"

frame = pyogrio.read_dataframe(PATH)
events = frame["SID74"].to_numpy(dtype=float)
base = frame["BIR74"].to_numpy(dtype=float)
queen = libpysal.weights.Queen.from_dataframe(frame, use_index=False)
queen.id_order = list(range(len(frame)))  # features in file order, as e and b
global_eb = esda.smoothing.Empirical_Bayes(events, base)
local_eb = esda.smoothing.Spatial_Empirical_Bayes(events, base, queen)

out = {
    "source": "PySAL esda Empirical_Bayes / Spatial_Empirical_Bayes on sf nc.gpkg "
    "(SID74 over BIR74), libpysal Queen.from_dataframe",
    "script": "tests/reference/make_rates.py",
    "esda_version": esda.__version__,
    "libpysal_version": libpysal.__version__,
    "numpy_version": np.__version__,
    "fips": frame["FIPS"].tolist(),
    "queen_links": int(sum(len(v) for v in queen.neighbors.values())),
    "global": [float(v) for v in np.ravel(global_eb.r)],
    "local": [float(v) for v in np.ravel(local_eb.r)],
}
with open("tests/reference/data/rates_nc_esda.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
