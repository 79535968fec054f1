#!/usr/bin/env python3
"""Generate the reference condition numbers of rowfold's condition-number test.

Writes test/fixtures/reference/condition-cases.json: designs (rows of doubles, the intercept
not included) and, for each, numpy's np.linalg.cond (2-norm: ratio of the extreme singular
values) of the column-scaled design as given — the intercept a column of sqrt(w), every
column x_j * sqrt(w) scaled to unit Euclidean norm — computed with the rows in their order
and in reverse order (the two agree to rounding; the test feeds the engine both orders).

Run from the repository root:

  python3 scripts/make-condition-fixtures.py

Deterministic for a given numpy version (seeded generator). The tests only read the JSON.
"""

import json
import os

import numpy as np

GENERATOR = "scripts/make-condition-fixtures.py"
LIBRARY = f"numpy {np.__version__}"
OUT = os.path.join("test", "fixtures", "reference", "condition-cases.json")


def scaled_cond(rows, p, intercept, weighted):
    a = np.array(rows, dtype=float)
    x = a[:, :p]
    w = a[:, p + 1] if weighted else np.ones(len(a))
    cols = ([np.ones(len(a))] if intercept else []) + [x[:, j] for j in range(p)]
    d = np.column_stack(cols) * np.sqrt(w)[:, None]
    d = d / np.linalg.norm(d, axis=0)
    return float(np.linalg.cond(d))


def case(name, description, rows, terms, intercept=True, weighted=False):
    p = len(terms)
    return {
        "name": name,
        "description": description,
        "intercept": intercept,
        "weighted": weighted,
        "terms": terms,
        "rows": rows,
        "cond": scaled_cond(rows, p, intercept, weighted),
        "cond_reversed": scaled_cond(rows[::-1], p, intercept, weighted),
    }


def main():
    rng = np.random.default_rng(20261112)
    cases = []
    # 21 rows of a quadratic in a year-like predictor: the offset makes the design as given
    # far worse conditioned than its columns shifted by any one row.
    x = np.arange(1950.0, 1971.0)
    y = 3.0 + 0.2 * (x - 1960.0) + 0.01 * (x - 1960.0) ** 2 + rng.normal(0, 0.1, x.size)
    rows = [[float(a), float(a * a), float(b)] for a, b in zip(x, y)]
    cases.append(case("year-quadratic", "x = 1950..1970 and x^2 (21 rows).", rows, ["x", "x2"]))
    # Correlated predictors with offsets, 200 rows.
    z = rng.normal(size=(200, 4))
    xs = np.column_stack([10 + z[:, 0], 10 + z[:, 0] + 0.05 * z[:, 1], 3 * z[:, 2], 100 + z[:, 3]])
    y = xs @ np.array([1.0, -1.0, 0.5, 2.0]) + rng.normal(size=200)
    rows = [[float(v) for v in r] + [float(t)] for r, t in zip(xs, y)]
    cases.append(case("correlated", "Four predictors, two nearly collinear, offsets of 10 and 100 (200 rows).", rows, ["a", "b", "c", "d"]))
    # Weighted.
    xs = rng.uniform(0, 5, size=(150, 3))
    w = rng.uniform(0.2, 4.0, 150)
    y = 1 + xs @ np.array([2.0, -1.0, 0.3]) + rng.normal(size=150) / np.sqrt(w)
    rows = [[float(v) for v in r] + [float(t), float(u)] for r, t, u in zip(xs, y, w)]
    cases.append(case("weighted", "Three uniform predictors, weights in [0.2, 4] (150 rows).", rows, ["u", "v", "t"], weighted=True))
    # No intercept.
    xs = rng.normal(5, 1, size=(100, 3))
    y = xs @ np.array([1.0, 2.0, 3.0]) + rng.normal(size=100)
    rows = [[float(v) for v in r] + [float(t)] for r, t in zip(xs, y)]
    cases.append(case("no-intercept", "Three predictors around 5, no intercept (100 rows).", rows, ["p", "q", "r"], intercept=False))
    with open(OUT, "w") as fh:
        json.dump({"generator": GENERATOR, "library": LIBRARY, "cases": cases}, fh, indent=1)
        fh.write("\n")
    print(f"wrote {OUT}: {len(cases)} cases")


if __name__ == "__main__":
    main()
