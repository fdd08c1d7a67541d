"""Reference kernel sums for stance-density (tools/density/tests/reference.rs).

Writes tests/reference/data/density.json: 40 weighted points, a 24 x 18 grid (row 0 north),
and at every cell centre
  - quartic (support h) from KDEpy NaiveKDE('biweight', bw = h / sqrt(7), norm = 2),
  - Epanechnikov (support h) from KDEpy NaiveKDE('epa', bw = h / sqrt(5), norm = 2),
  - Gaussian (sigma) from scipy.stats.gaussian_kde with its covariance set to sigma^2 I
    (gaussian_kde scales the data covariance by a factor; for an isotropic kernel the
    covariance is overridden in a subclass),
each multiplied by the total weight (the tools' intensity per m^2).
Run: .venv-reference/bin/python tests/reference/make_density.py
"""
import json
import math
import pathlib

import numpy as np
import scipy
import KDEpy
from KDEpy import NaiveKDE
from scipy.stats import gaussian_kde


class IsotropicKde(gaussian_kde):
    def __init__(self, data, sigma, weights):
        self._sigma = sigma
        super().__init__(data, weights=weights)

    def _compute_covariance(self):
        self.factor = 1.0
        self.covariance = self._sigma ** 2 * np.eye(2)
        self.cho_cov = np.linalg.cholesky(self.covariance)
        self.log_det = 2.0 * np.log(np.diag(self.cho_cov)).sum()


rng = np.random.default_rng(20260304)
n = 40
x = rng.uniform(1000.0, 3400.0, n)
y = rng.uniform(500.0, 2200.0, n)
w = rng.uniform(0.5, 3.0, n)
grid = {"x_min": 0.0, "y_min": 0.0, "cell_m": 150.0, "cols": 24, "rows": 18}
h = 700.0
sigma = 300.0
cx = grid["x_min"] + (np.arange(grid["cols"]) + 0.5) * grid["cell_m"]
y_max = grid["y_min"] + grid["rows"] * grid["cell_m"]
cy = y_max - (np.arange(grid["rows"]) + 0.5) * grid["cell_m"]
gx, gy = np.meshgrid(cx, cy)  # row-major, row 0 north
at = np.column_stack([gx.ravel(), gy.ravel()])
data = np.column_stack([x, y])
W = w.sum()

quartic = NaiveKDE(kernel="biweight", bw=h / math.sqrt(7.0), norm=2).fit(data, weights=w).evaluate(at) * W
epa = NaiveKDE(kernel="epa", bw=h / math.sqrt(5.0), norm=2).fit(data, weights=w).evaluate(at) * W
gauss = IsotropicKde(data.T, sigma, w).evaluate(at.T) * W

# Sanity check of the conventions against the closed forms at one cell (not the reference itself).
d2 = (x - at[100, 0]) ** 2 + (y - at[100, 1]) ** 2
u = d2 / h ** 2
assert abs(quartic[100] - (w * np.where(u < 1, 3 / (math.pi * h * h) * (1 - u) ** 2, 0)).sum()) < 1e-9 * quartic.max()
assert abs(gauss[100] - (w * np.exp(-d2 / (2 * sigma ** 2)) / (2 * math.pi * sigma ** 2)).sum()) < 1e-9 * gauss.max()

out = {
    "script": "tests/reference/make_density.py",
    "sources": {
        "quartic": f"KDEpy {KDEpy.__version__} NaiveKDE biweight, bw = h/sqrt(7), norm = 2",
        "epanechnikov": f"KDEpy {KDEpy.__version__} NaiveKDE epa, bw = h/sqrt(5), norm = 2",
        "gaussian": f"SciPy {scipy.__version__} gaussian_kde, covariance sigma^2 I",
    },
    "x": x.tolist(), "y": y.tolist(), "weight": w.tolist(),
    "grid": grid, "h_m": h, "sigma_m": sigma,
    "quartic_per_m2": quartic.tolist(),
    "epanechnikov_per_m2": epa.tolist(),
    "gaussian_per_m2": gauss.tolist(),
}
path = pathlib.Path(__file__).parent / "data" / "density.json"
path.write_text(json.dumps(out, indent=1) + "\n")
print("wrote", path, "max quartic", quartic.max(), "max gauss", gauss.max(), "max epa", epa.max())
