"""Regenerates tests/data/drift_reference.json: the population stability
index of demo features, computed independently of assort with numpy, for
the demo data against itself and against a shifted copy.

    pip install -r tests/reference/requirements.txt
    python3 tests/reference/drift.py

Data: recipes/data/coop_members.csv (the invented demo; the scenario of
the quarter-to-quarter tests). The shifted copy adds 12 to every
tenure_months and multiplies every share_fresh by 0.7, as
tests/quarter.rs does.

The share of records far from every centre is computed from a snapshot of
the demo recipe's model (tests/data/demo_model.json, written by
`save model`): each record is prepared with the model's own parameters
(fill, clip, transform, scale, weight, one-hot levels), its distance to the
nearest centre taken, and the share beyond the model's stored 99th
percentile counted, for the demo data and the shifted copy.

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
TRANSFORMS = {"none": lambda v: v, "log1p": np.log1p, "log": np.log, "sqrt": np.sqrt}


def psi(train, new):
    edges = np.unique(np.quantile(train, np.arange(1, 10) / 10.0))
    def shares(v):
        counts = np.bincount(np.searchsorted(edges, v, side="left"), minlength=len(edges) + 1)
        return np.maximum(counts / len(v), 1e-4)
    e, a = shares(train), shares(new)
    return float(np.sum((a - e) * np.log(a / e)))


def far_share(model, rows):
    """Share of records farther from every centre than the model's limit."""
    x = []
    for r in rows:
        v = []
        for f in model["features"]:
            raw = r[f["column"]].strip()
            val = float(raw) if raw else f["fill"]
            if f["clip"]:
                val = min(max(val, f["clip"][0]), f["clip"][1])
            val = TRANSFORMS[f["transform"]](val)
            v.append(0.0 if f["constant"] else (val - f["centre"]) / f["divisor"] * f["multiplier"])
        for c in model["categories"]:
            level = r[c["column"]].strip() or "(blank)"
            v.extend(c["value"] if level == l else 0.0 for l in c["levels"])
        x.append(v)
    x = np.array(x)
    centres = np.array(model["centres"])
    d = np.sqrt(((x[:, None, :] - centres[None, :, :]) ** 2).sum(axis=2)).min(axis=1)
    return float(np.mean(d > model["drift"]["far_distance"]))


def shift(rows):
    out = []
    for r in rows:
        r = dict(r)
        r["tenure_months"] = repr(float(r["tenure_months"]) + 12.0)
        r["share_fresh"] = repr(float(r["share_fresh"]) * 0.7)
        out.append(r)
    return out


def main():
    rows = list(csv.DictReader(open(ROOT / "recipes/data/coop_members.csv")))
    out = {"numpy": np.__version__}
    for f in FEATURES:
        train = np.array([float(r[f]) for r in rows])
        shifted = train + 12.0 if f == "tenure_months" else (train * 0.7 if f == "share_fresh" else train)
        out[f] = {"unshifted": psi(train, train), "shifted": psi(train, shifted)}
    model = json.loads((ROOT / "tests/data/demo_model.json").read_text())
    out["far_share"] = {"unshifted": far_share(model, rows), "shifted": far_share(model, shift(rows))}
    (ROOT / "tests/data/drift_reference.json").write_text(json.dumps(out, indent=2) + "\n")


main()
