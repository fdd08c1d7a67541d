"""Reference numbers for stance-weights and stance-moran on the North Carolina SIDS counties
(SID74 over BIR74) from PySAL: libpysal (Queen / Rook weights) and esda (Moran, Moran_Local,
Moran_Rate), on tests/reference/data/nc.gpkg (a copy of R sf's nc.gpkg; libpysal's `sids2`
holds the same counties). Writes tests/reference/data/moran_nc_pysal.json.
Run with .venv-reference/bin/python (tests/reference/requirements-reference.txt), via `make reference`."""
import json
import pathlib

import esda
import geopandas
import libpysal
import numpy as np

here = pathlib.Path(__file__).resolve().parent
nc = geopandas.read_file(here / "data" / "nc.gpkg")
y = (nc["SID74"] / nc["BIR74"]).to_numpy()

queen = libpysal.weights.Queen.from_dataframe(nc, use_index=False)
rook = libpysal.weights.Rook.from_dataframe(nc, use_index=False)
out = {
    "source": "PySAL libpysal + esda",
    "libpysal_version": libpysal.__version__,
    "esda_version": esda.__version__,
    "script": "tests/reference/make_moran.py",
    "variable": "SID74 / BIR74",
    "queen_links": int(queen.s0),
    "rook_links": int(rook.s0),
}
for name, transformation in [("row", "r"), ("binary", "b")]:
    w = libpysal.weights.Queen.from_dataframe(nc, use_index=False)
    w.transform = transformation
    g = esda.Moran(y, w, transformation=transformation, permutations=999)
    out[f"global_queen_{name}"] = {
        "i": g.I, "expected": g.EI, "variance_normality": g.VI_norm,
        "variance_randomisation": g.VI_rand, "z_normality": g.z_norm, "z_randomisation": g.z_rand,
        "p_normality_two_sided": g.p_norm, "p_randomisation_two_sided": g.p_rand,
        "p_permutation_999_seeded_by_numpy": g.p_sim,
    }
    lm = esda.Moran_Local(y, w, transformation=transformation, permutations=999, seed=1)
    out[f"local_queen_{name}"] = {
        "is_esda_scale": lm.Is.tolist(), "expected_conditional": lm.EIc.tolist(),
        "variance_conditional": lm.VIc.tolist(), "p_permutation_folded_999": lm.p_sim.tolist(),
        "quadrant": lm.q.tolist(),
    }
w = libpysal.weights.Queen.from_dataframe(nc, use_index=False)
rate = esda.Moran_Rate(nc["SID74"].to_numpy(), nc["BIR74"].to_numpy(), w, adjusted=True,
                       transformation="r", permutations=999)
out["eb_index_queen_row"] = {"i": rate.I, "expected": rate.EI}
(here / "data" / "moran_nc_pysal.json").write_text(json.dumps(out, indent=1))
print("queen", out["queen_links"], "rook", out["rook_links"], "I", out["global_queen_row"]["i"],
      "EB", rate.I)
