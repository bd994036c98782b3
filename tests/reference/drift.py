"""Regenerates tests/data/drift_reference.json: the population stability
index of demo features, computed independently of assort with numpy, for
the demo data against itself and against a shifted copy.

    pip install -r tests/reference/requirements.txt
    python3 tests/reference/drift.py

Data: recipes/data/coop_members.csv (the invented demo; the scenario of
the quarter-to-quarter tests). The shifted copy adds 12 to every
tenure_months and multiplies every share_fresh by 0.7, as
tests/quarter.rs does.

Method, as docs/methods.md states it: ten bins cut at the training deciles
(numpy's default linear interpolation, Hyndman and Fan's definition 7),
repeated edges kept once, bins right-closed, shares below 0.0001 counted at
0.0001, PSI = sum (a - e) ln(a / e). Features without missing values and
without a non-affine transform in the demo recipe are used, so the values
assort bins (z-scored) and the raw values here fall into the same bins.
"""
import csv
import json
import pathlib

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[2]
FEATURES = ["tenure_months", "share_fresh", "share_bulk"]


def psi(train, new):
    edges = np.unique(np.quantile(train, np.arange(1, 10) / 10.0))
    def shares(v):
        counts = np.bincount(np.searchsorted(edges, v, side="left"), minlength=len(edges) + 1)
        return np.maximum(counts / len(v), 1e-4)
    e, a = shares(train), shares(new)
    return float(np.sum((a - e) * np.log(a / e)))


def main():
    rows = list(csv.DictReader(open(ROOT / "recipes/data/coop_members.csv")))
    out = {"numpy": np.__version__}
    for f in FEATURES:
        train = np.array([float(r[f]) for r in rows])
        shifted = train + 12.0 if f == "tenure_months" else (train * 0.7 if f == "share_fresh" else train)
        out[f] = {"unshifted": psi(train, train), "shifted": psi(train, shifted)}
    (ROOT / "tests/data/drift_reference.json").write_text(json.dumps(out, indent=2) + "\n")


main()
