"""Gower's dissimilarity on outside data, from two implementations that
are not assort's, for tests/gower_reference.rs.

    python3 -m venv /tmp/gowenv
    /tmp/gowenv/bin/pip install -r tests/reference/gower-requirements.txt
    /tmp/gowenv/bin/python tests/reference/gower_fixture.py

The table is derived from the iris data (tests/data/iris.csv, see
ATTRIBUTION.md) by fixed rules, so the test can derive it again:
- sepal_length_cm, sepal_width_cm: numbers;
- species: a category;
- petal band: an ordered column of three levels, petal_length_cm below 2.5
  (level 1), below 5.0 (level 2), else level 3, scored (r - 1)/(M - 1)
  as Kaufman and Rousseeuw (1990) do;
- gaps (for the second table): sepal_width_cm on every 7th record (0-based
  index divisible by 7), species on every 11th, the band on every 13th.
Column weights 1, 2, 1, 0.5.

References:
1. `gower` 0.1.2 (PyPI, `gower.gower_matrix`), a general-purpose
   implementation of Gower's coefficient, on the table without gaps. It
   computes in float32, so the test allows 1e-6.
2. For the table with gaps, which that package does not handle, the
   formula of Gower (1971) written out with numpy (pairwise over numpy
   arrays, not assort's code): a pair compares only the columns both
   records have. The script checks it against reference 1 where no gap is
   involved.
"""
import json
import pathlib

import gower
import numpy as np
import pandas as pd

HERE = pathlib.Path(__file__).resolve().parent
ROOT = HERE.parent.parent
iris = pd.read_csv(ROOT / "tests" / "data" / "iris.csv")
n = len(iris)
band = np.where(iris["petal_length_cm"] < 2.5, 1, np.where(iris["petal_length_cm"] < 5.0, 2, 3))
score = (band - 1) / 2.0
weights = np.array([1.0, 2.0, 1.0, 0.5])

full = pd.DataFrame(
    {
        "sepal_length": iris["sepal_length_cm"].astype(float),
        "sepal_width": iris["sepal_width_cm"].astype(float),
        "species": iris["species"].astype(str),
        "band": score.astype(float),
    }
)
cat = [False, False, True, False]
ref1 = gower.gower_matrix(full, weight=weights, cat_features=cat)

idx = np.arange(n)
num = np.stack([full["sepal_length"].to_numpy(), full["sepal_width"].to_numpy(), full["band"].to_numpy()], axis=1)
num[idx % 7 == 0, 1] = np.nan
num[idx % 13 == 0, 2] = np.nan
species = full["species"].to_numpy(dtype=object)
species_gap = idx % 11 == 0


def by_formula(num, species, species_gap):
    """Gower (1971): sum_f w_f d_f s_f / sum_f w_f d_f, numbers over their
    observed range, categories by matching, gaps leave a column out."""
    w_num = weights[[0, 1, 3]]
    w_cat = weights[2]
    ranges = np.nanmax(num, axis=0) - np.nanmin(num, axis=0)
    s_num = np.abs(num[:, None, :] - num[None, :, :]) / ranges
    known_num = ~np.isnan(s_num)
    s_cat = (species[:, None] != species[None, :]).astype(float)
    known_cat = ~(species_gap[:, None] | species_gap[None, :])
    top = (np.where(known_num, s_num, 0.0) * w_num).sum(axis=2) + np.where(known_cat, s_cat, 0.0) * w_cat
    bottom = (known_num * w_num).sum(axis=2) + known_cat * w_cat
    return top / bottom


# The formula agrees with the package where nothing is missing.
check = by_formula(
    np.stack([full["sepal_length"], full["sepal_width"], full["band"]], axis=1).astype(float),
    species,
    np.zeros(n, dtype=bool),
)
assert np.max(np.abs(check - ref1)) < 1e-6, np.max(np.abs(check - ref1))
ref2 = by_formula(num, species, species_gap)

rng = np.random.default_rng(1971)
pairs = [(i, j) for i in range(30) for j in range(i + 1, 30)]
pairs += [tuple(sorted(p)) for p in rng.choice(n, size=(400, 2)) if p[0] != p[1]]
out = {
    "source": "iris (tests/data/iris.csv); gower 0.1.2 for `full`, Gower's formula in numpy 2.4.6 for `gaps`",
    "weights": weights.tolist(),
    "pairs": [[int(i), int(j)] for i, j in pairs],
    "full": [float(ref1[i, j]) for i, j in pairs],
    "gaps": [float(ref2[i, j]) for i, j in pairs],
}
(ROOT / "tests" / "data" / "gower_reference.json").write_text(json.dumps(out) + "\n")
print(f"{len(pairs)} pairs written")
