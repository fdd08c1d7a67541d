"""Reference agreement statistics for stance-labels (tools/labels/tests/reference.rs).

Writes tests/reference/data/labels_reference.json: fixed label vectors of three labellers on
300 records with three ordered classes (0 oppose, 1 neutral, 2 support), drawn once with a
fixed numpy seed and stored, and
  - Cohen's kappa, linear- and quadratic-weighted kappa of every pair from scikit-learn
    cohen_kappa_score (weights=None / 'linear' / 'quadratic'),
  - the same kappas with their large-sample standard errors (Fleiss, Cohen & Everitt 1969)
    from statsmodels cohens_kappa (wt=None / 'linear' / 'quadratic'; std_kappa),
  - Fleiss' kappa of the records x classes table from statsmodels fleiss_kappa (method='fleiss'),
    and of the 10-subject, 14-rater worked example,
  - Krippendorff's alpha (ordinal) from the krippendorff package, with all values and with
    some values removed (NaN: missing),
  - per-class precision, recall, F1 of labeller 0 and 1 against the truth column from
    scikit-learn precision_recall_fscore_support, with Wilson 95 % intervals of precision and
    recall from statsmodels proportion_confint(method='wilson').
Run: make reference (.venv-reference, pinned in requirements-reference.txt), or alone:
     python3 -m venv /tmp/labels-venv && /tmp/labels-venv/bin/pip install \
       scikit-learn==1.5.2 statsmodels==0.14.4 krippendorff==0.8.1 numpy==2.1.3
     /tmp/labels-venv/bin/python tests/reference/make_labels.py
"""
import json
import pathlib
from importlib import metadata

import krippendorff
import numpy as np
from sklearn.metrics import cohen_kappa_score, precision_recall_fscore_support
from statsmodels.stats.inter_rater import cohens_kappa, fleiss_kappa
from statsmodels.stats.proportion import proportion_confint

K = 3
N = 300
rng = np.random.RandomState(20260)
truth = rng.choice(K, size=N, p=[0.3, 0.3, 0.4])
confusion = [
    [[0.8, 0.15, 0.05], [0.1, 0.8, 0.1], [0.05, 0.15, 0.8]],
    [[0.6, 0.3, 0.1], [0.2, 0.6, 0.2], [0.1, 0.3, 0.6]],
    [[0.7, 0.2, 0.1], [0.1, 0.7, 0.2], [0.0, 0.2, 0.8]],
]
labels = [
    [int(rng.choice(K, p=c[t])) for t in truth] for c in confusion
]


def table(a, b):
    t = np.zeros((K, K))
    for i, j in zip(a, b):
        t[i, j] += 1
    return t


pairs = []
for a in range(3):
    for b in range(a + 1, 3):
        t = table(labels[a], labels[b])
        entry = {"a": a, "b": b}
        for name, w in [("none", None), ("linear", "linear"), ("quadratic", "quadratic")]:
            entry[f"sklearn_kappa_{name}"] = float(
                cohen_kappa_score(labels[a], labels[b], weights=w)
            )
            res = cohens_kappa(t, wt=w, return_results=True)
            entry[f"statsmodels_kappa_{name}"] = float(res.kappa)
            entry[f"statsmodels_se_{name}"] = float(res.std_kappa)
        pairs.append(entry)

counts = np.zeros((N, K))
for lab in labels:
    for r, c in enumerate(lab):
        counts[r, c] += 1

example = [
    [0, 0, 0, 0, 14], [0, 2, 6, 4, 2], [0, 0, 3, 5, 6], [0, 3, 9, 2, 0], [2, 2, 8, 1, 1],
    [7, 7, 0, 0, 0], [3, 2, 6, 3, 0], [2, 5, 3, 2, 2], [6, 5, 2, 1, 0], [0, 2, 2, 3, 7],
]

reliability = np.array(labels, dtype=float)
missing = reliability.copy()
holes = [(0, r) for r in range(0, N, 7)] + [(1, r) for r in range(3, N, 11)] + [(2, r) for r in range(5, N, 13)]
for j, r in holes:
    missing[j, r] = np.nan

scores = []
for j in (0, 1):
    p, r, f, _ = precision_recall_fscore_support(truth, labels[j], labels=list(range(K)), zero_division=np.nan)
    t = table(truth, labels[j])
    classes = []
    for c in range(K):
        plo, phi = proportion_confint(t[c, c], t[:, c].sum(), alpha=0.05, method="wilson")
        rlo, rhi = proportion_confint(t[c, c], t[c, :].sum(), alpha=0.05, method="wilson")
        classes.append({
            "precision": float(p[c]), "recall": float(r[c]), "f1": float(f[c]),
            "precision_lower": float(plo), "precision_upper": float(phi),
            "recall_lower": float(rlo), "recall_upper": float(rhi),
        })
    scores.append({"labeller": j, "classes": classes})

out = {
    "source": "tests/reference/make_labels.py",
    "versions": {name: metadata.version(name) for name in ("scikit-learn", "statsmodels", "krippendorff", "numpy")},
    "classes": K,
    "truth": [int(t) for t in truth],
    "labels": labels,
    "pairs": pairs,
    "fleiss_kappa": float(fleiss_kappa(counts, method="fleiss")),
    "fleiss_example": {"table": example, "kappa": float(fleiss_kappa(np.array(example), method="fleiss"))},
    "krippendorff_ordinal": float(
        krippendorff.alpha(reliability_data=reliability, level_of_measurement="ordinal", value_domain=[0, 1, 2])
    ),
    "missing": [[None if np.isnan(v) else int(v) for v in row] for row in missing],
    "krippendorff_ordinal_missing": float(
        krippendorff.alpha(reliability_data=missing, level_of_measurement="ordinal", value_domain=[0, 1, 2])
    ),
    "scores": scores,
}
path = pathlib.Path(__file__).parent / "data" / "labels_reference.json"
path.write_text(json.dumps(out, indent=1) + "\n")
print(f"wrote {path}")
