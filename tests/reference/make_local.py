"""Reference numbers for stance-local on the North Carolina SIDS counties from PySAL: libpysal
(Queen weights, binary) and esda (Join_Counts, Join_Counts_Local, Join_Counts_Local_BV,
Join_Counts_Local_MV, G_Local with star False / True), on tests/reference/data/nc.gpkg (a copy of
R sf's nc.gpkg; libpysal's `sids2` holds the same counties). Writes
tests/reference/data/local_nc.json.

Binary variables (stated here and read by the tests from the JSON):
  high   = SID79 / BIR79 > its median                     (univariate, co-location, bivariate x)
  low    = SID79 / BIR79 <= its first quartile (numpy)      (bivariate z; never high)
  nonwhite = NWBIR79 / BIR79 > its median                 (co-location second variable)
Values for G: SID79 / BIR79.
Run with .venv-reference/bin/python (tests/reference/requirements-reference.txt), via `make reference`."""
import json
import pathlib
import warnings

import esda
import geopandas
import libpysal
import numpy as np

warnings.filterwarnings("ignore")
here = pathlib.Path(__file__).resolve().parent
nc = geopandas.read_file(here / "data" / "nc.gpkg")
rate = (nc["SID79"] / nc["BIR79"]).to_numpy(dtype=float)
share = (nc["NWBIR79"] / nc["BIR79"]).to_numpy(dtype=float)
median = float(np.median(rate))
q25 = float(np.quantile(rate, 0.25))
share_median = float(np.median(share))
high = (rate > median).astype(float)
low = (rate <= q25).astype(float)
nonwhite = (share > share_median).astype(float)
assert not (high * low).any()


def queen(transform="b"):
    w = libpysal.weights.Queen.from_dataframe(nc, use_index=False, silence_warnings=True)
    w.transform = transform
    return w


def nan_list(a):
    return [None if not np.isfinite(v) else float(v) for v in np.asarray(a, dtype=float)]


out = {
    "source": "PySAL libpysal + esda",
    "libpysal_version": libpysal.__version__,
    "esda_version": esda.__version__,
    "numpy_version": np.__version__,
    "script": "tests/reference/make_local.py",
    "rate": "SID79 / BIR79",
    "rate_median": median,
    "rate_q25": q25,
    "share_nonwhite": "NWBIR79 / BIR79",
    "share_nonwhite_median": share_median,
    "high": high.tolist(),
    "low": low.tolist(),
    "nonwhite": nonwhite.tolist(),
}

g = esda.Join_Counts(high, queen(), permutations=999)
out["global_high"] = {"bb": float(g.bb), "ww": float(g.ww), "bw": float(g.bw), "joins": float(g.J),
                      "p_permutation_bb_999": float(g.p_sim_bb)}

uni = esda.Join_Counts_Local(connectivity=queen(), seed=1).fit(high, permutations=999)
out["local_univariate_high"] = {"join_count": nan_list(uni.LJC), "p_folded_999": nan_list(uni.p_sim)}
bv = esda.Join_Counts_Local_BV(connectivity=queen(), seed=1).fit(high, low, case="BJC",
                                                                  permutations=999)
out["local_bivariate_high_low"] = {"join_count": nan_list(bv.LJC), "p_folded_999": nan_list(bv.p_sim)}
clc = esda.Join_Counts_Local_BV(connectivity=queen(), seed=1).fit(high, nonwhite, case="CLC",
                                                                   permutations=999)
mv = esda.Join_Counts_Local_MV(connectivity=queen(), seed=1).fit([high, nonwhite], permutations=999)
out["local_colocation_high_nonwhite"] = {"join_count": nan_list(clc.LJC),
                                         "join_count_mv": nan_list(mv.LJC),
                                         "p_folded_999": nan_list(clc.p_sim)}

for star in (False, True):
    for transform, key in (("B", "binary"), ("R", "row")):
        lg = esda.G_Local(rate, queen("b"), transform=transform, star=star, permutations=999,
                          seed=1)
        out[f"g_{'star' if star else 'plain'}_{key}"] = {
            "g": nan_list(lg.Gs), "expected": nan_list(lg.EGs), "variance": nan_list(lg.VGs),
            "z": nan_list(lg.Zs), "p_folded_999": nan_list(lg.p_sim),
        }
(here / "data" / "local_nc.json").write_text(json.dumps(out, indent=1))
print("median", median, "q25", q25, "BB", g.bb, "BW", g.bw, "WW", g.ww,
      "LJC sum", np.nansum(uni.LJC))
