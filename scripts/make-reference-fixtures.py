#!/usr/bin/env python3
"""Generate reference fixtures for rowfold's tests.

Writes:
  test/fixtures/reference/ols-cases.json      weighted / unweighted least-squares fits
  test/fixtures/reference/distributions.json  t, F and chi-square tail probabilities and t quantiles

Requires numpy and scipy only. Run from the repository root:

  python3 scripts/make-reference-fixtures.py

The output is deterministic for a given numpy/scipy version (seeded generator).
The TypeScript tests only read the JSON; they never run this script.

The fit and the conventions it implements (aliasing, sigma, R-squared, F,
log-likelihood, AIC/BIC, VIF, intervals) are stated in scripts/reference_ols.py,
which scripts/make-design-fixtures.py shares.
"""

import math
import os
import sys

sys.dont_write_bytecode = True  # keep __pycache__ out of scripts/

import numpy as np
import scipy
import scipy.stats

from reference_ols import dump, fit, write  # noqa: E402  (scripts/reference_ols.py)

GENERATOR = "scripts/make-reference-fixtures.py"
LIBRARY = f"numpy {np.__version__}, scipy {scipy.__version__}"
OUT_DIR = os.path.join("test", "fixtures", "reference")
SEED = 20261201


def sig6(v):
    """Round to 6 significant digits; the result is the double the fit reads."""
    v = float(v)
    if v == 0.0:
        return 0.0
    return float(f"{v:.6g}")


def sig6_array(a):
    return np.array([sig6(v) for v in np.ravel(a)], dtype=float).reshape(np.shape(a))



# ---------------------------------------------------------------------------
# Data
# ---------------------------------------------------------------------------

def base_predictors(rng, n):
    """Three predictors on very different scales, already rounded."""
    size = sig6_array(rng.normal(1500.0, 400.0, n))        # around 1e3
    rate = sig6_array(rng.gamma(4.0, 0.005, n))            # around 1e-2
    share = sig6_array(rng.uniform(0.0, 1.0, n))           # in [0, 1]
    return size, rate, share


def response(rng, X, beta, b0, noise_sd, w=None):
    mu = b0 + X @ beta
    sd = noise_sd if w is None else noise_sd / np.sqrt(w)
    return sig6_array(mu + rng.normal(0.0, 1.0, X.shape[0]) * sd)


def weights(rng, n):
    return sig6_array(rng.uniform(0.2, 5.0, n))


def make_case(name, description, terms, X, y, w, intercept, confidence=0.95):
    X = np.asarray(X, dtype=float).reshape(len(y), len(terms))
    if w is None:
        rows = [[*map(float, X[i]), float(y[i])] for i in range(len(y))]
    else:
        rows = [[*map(float, X[i]), float(y[i]), float(w[i])] for i in range(len(y))]
    # The rows are what the consumer reads; rebuild the arrays from them so
    # the expected values are computed from exactly the written numbers.
    p = len(terms)
    Xr = np.array([r[:p] for r in rows], dtype=float).reshape(len(rows), p)
    yr = np.array([r[p] for r in rows], dtype=float)
    wr = np.array([r[p + 1] for r in rows], dtype=float) if w is not None else None
    expected = fit(terms, Xr, yr, wr, intercept, confidence)
    return {
        "name": name,
        "description": description,
        "intercept": intercept,
        "weighted": w is not None,
        "confidence": confidence,
        "terms": list(terms),
        "rows": rows,
        "expected": expected,
    }


def build_cases():
    rng = np.random.default_rng(SEED)
    cases = []

    # unweighted, with intercept
    n = 240
    size, rate, share = base_predictors(rng, n)
    lag = sig6_array(rng.normal(0.0, 1.0, n) * 6.0 + 0.02 * size)   # correlated with size (vif ~ 3)
    X = np.column_stack([size, rate, share, lag])
    y = response(rng, X, np.array([0.004, 180.0, 3.5, -0.05]), 12.0, 2.5)
    cases.append(make_case(
        "unweighted", "Four predictors on different scales, intercept, unit weights.",
        ["size", "rate", "share", "lag"], X, y, None, True))

    # weighted, with intercept
    n = 300
    size, rate, share = base_predictors(rng, n)
    w = weights(rng, n)
    X = np.column_stack([size, rate, share])
    y = response(rng, X, np.array([-0.0035, 250.0, 4.0]), 30.0, 4.0, w)
    cases.append(make_case(
        "weighted", "Three predictors, intercept, weights uniform in [0.2, 5]; noise variance proportional to 1/w.",
        ["size", "rate", "share"], X, y, w, True))

    # no intercept, unweighted
    n = 200
    size, rate, share = base_predictors(rng, n)
    X = np.column_stack([size, rate, share])
    y = response(rng, X, np.array([0.002, 90.0, 1.5]), 0.0, 2.0)
    cases.append(make_case(
        "no_intercept", "Three predictors, no intercept (uncentred R-squared), unit weights.",
        ["size", "rate", "share"], X, y, None, False))

    # weighted, no intercept
    n = 260
    size, rate, share = base_predictors(rng, n)
    wobble = sig6_array(rng.normal(0.0, 1.0, n))
    w = weights(rng, n)
    X = np.column_stack([size, rate, share, wobble])
    y = response(rng, X, np.array([0.0015, 120.0, -2.0, 0.8]), 0.0, 3.0, w)
    cases.append(make_case(
        "weighted_no_intercept", "Four predictors, no intercept, weights uniform in [0.2, 5].",
        ["size", "rate", "share", "wobble"], X, y, w, False))

    # collinear: total = count_a + count_b exactly (small integers)
    n = 220
    size, rate, share = base_predictors(rng, n)
    count_a = rng.integers(0, 12, n).astype(float)
    count_b = rng.integers(0, 8, n).astype(float)
    total = count_a + count_b
    X = np.column_stack([size, count_a, rate, count_b, total])
    y = response(rng, X, np.array([0.003, 0.6, 150.0, -0.4, 0.0]), 5.0, 3.0)
    cases.append(make_case(
        "collinear_sum",
        "Intercept; total is exactly count_a + count_b (integer columns), so total is aliased.",
        ["size", "count_a", "rate", "count_b", "total"], X, y, None, True))

    # duplicate column
    n = 180
    size, rate, share = base_predictors(rng, n)
    X = np.column_stack([size, rate, share, rate])
    y = response(rng, X, np.array([0.0045, 200.0, 2.0, 0.0]), -3.0, 2.5)
    cases.append(make_case(
        "duplicate_column", "Intercept; rate_copy is an exact copy of rate, so rate_copy is aliased.",
        ["size", "rate", "share", "rate_copy"], X, y, None, True))

    # intercept only
    n = 150
    y = sig6_array(rng.normal(42.0, 6.0, n))
    cases.append(make_case(
        "intercept_only", "No terms; the fit is the mean. F statistic is undefined (null).",
        [], np.zeros((n, 0)), y, None, True))

    # confidence 0.9
    n = 210
    size, rate, share = base_predictors(rng, n)
    X = np.column_stack([size, rate, share])
    y = response(rng, X, np.array([0.005, -160.0, 6.0]), 8.0, 2.2)
    cases.append(make_case(
        "ci90", "Three predictors, intercept, unit weights; 90% confidence intervals.",
        ["size", "rate", "share"], X, y, None, True, confidence=0.9))

    # Extras beyond the minimum set.
    n = 200
    size, rate, share = base_predictors(rng, n)
    count_a = rng.integers(0, 10, n).astype(float)
    count_b = rng.integers(0, 10, n).astype(float)
    w = weights(rng, n)
    X = np.column_stack([size, count_a, count_b, count_a + count_b, share])
    y = response(rng, X, np.array([0.004, 0.5, -0.3, 0.0, 3.0]), 2.0, 3.0, w)
    cases.append(make_case(
        "weighted_collinear_sum",
        "Weighted, intercept; total is exactly count_a + count_b and is aliased; share comes after the aliased column.",
        ["size", "count_a", "count_b", "total", "share"], X, y, w, True))

    n = 160
    w = weights(rng, n)
    y = sig6_array(rng.normal(10.0, 2.0, n) / np.sqrt(w) + 10.0)
    cases.append(make_case(
        "weighted_intercept_only", "No terms, weighted; the fit is the weighted mean.",
        [], np.zeros((n, 0)), y, w, True))

    n = 220
    size, rate, share = base_predictors(rng, n)
    w = weights(rng, n)
    w[rng.choice(n, 25, replace=False)] = 0.0
    X = np.column_stack([size, rate, share])
    y = response(rng, X, np.array([0.003, 140.0, 2.5]), 4.0, 3.0, np.where(w > 0, w, 1.0))
    cases.append(make_case(
        "weighted_zero_weights",
        "Weighted, intercept; 25 rows have weight 0 and contribute nothing (n counts only w > 0).",
        ["size", "rate", "share"], X, y, w, True))

    return cases


# ---------------------------------------------------------------------------
# Distributions
# ---------------------------------------------------------------------------

def num(v):
    """Integral values as JSON integers (degrees of freedom, grid points)."""
    if float(v).is_integer() and abs(v) < 2**53:
        return int(v)
    return float(v)


def keep(value):
    return math.isfinite(value) and value > 1e-300


def build_distributions():
    t_sf = []
    for df in [1, 2, 5, 30, 1000, 1e6]:
        for x in [-2.5, 0, 0.5, 1.96, 3, 10, 40, 100, 1e3]:
            v = float(scipy.stats.t.sf(x, df))
            if keep(v):
                t_sf.append([num(x), num(df), v])

    t_ppf = []
    for df in [1, 2, 3, 5, 10, 30, 100, 1000, 1e6]:
        for q in [0.025, 0.05, 0.5, 0.8, 0.95, 0.975, 0.995, 0.9995]:
            v = float(scipy.stats.t.ppf(q, df))
            assert math.isfinite(v)
            t_ppf.append([q, num(df), v])

    f_sf = []
    # Note: checked once against a 50-digit evaluation, scipy's f.sf with
    # df2 = 1e6 is off by up to ~3e-11 relative; every other entry here agrees
    # to ~2e-13 or better. Compare with a tolerance of at least 1e-10.
    dfs = [(1, 1), (1, 10), (2, 30), (3, 200), (5, 5), (10, 71), (4, 1e6), (20, 500)]
    for d1, d2 in dfs:
        for x in [0.1, 0.5, 1, 2.5, 5, 10, 50, 100, 5000, 1e6]:
            v = float(scipy.stats.f.sf(x, d1, d2))
            if keep(v):
                f_sf.append([num(x), num(d1), num(d2), v])

    chi2_sf = []
    for df in [1, 2, 5, 10, 50, 100, 500]:
        for x in [0.1, 1, 3.84, 10, 50, 100, 500, 1000, 2000]:
            v = float(scipy.stats.chi2.sf(x, df))
            if keep(v):
                chi2_sf.append([num(x), num(df), v])

    # The extreme points the brief calls for must survive the underflow filter.
    assert any(r[0] == 5000 and r[1:3] == [3, 200] for r in f_sf)
    assert any(r[0] == 5000 and r[1:3] == [10, 71] for r in f_sf)
    assert any(r[0] == 1e6 for r in f_sf)
    assert any(r[0] == 2000 and r[1] == 500 for r in chi2_sf)

    return {
        "generator": GENERATOR,
        "library": LIBRARY,
        "t_sf": t_sf,
        "t_ppf": t_ppf,
        "f_sf": f_sf,
        "chi2_sf": chi2_sf,
    }



def main():
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    os.chdir(root)
    os.makedirs(OUT_DIR, exist_ok=True)

    cases = build_cases()
    for c in cases:
        e = c["expected"]
        print(f"  {c['name']:24s} n={e['n']:3d} rank={e['rank']} aliased={e['aliased']} "
              f"r2={e['r2']:.3f} f_p={e['f_p']}")
    write(os.path.join(OUT_DIR, "ols-cases.json"),
          {"generator": GENERATOR, "library": LIBRARY, "cases": cases})
    write(os.path.join(OUT_DIR, "distributions.json"), build_distributions())
    return 0


if __name__ == "__main__":
    sys.exit(main())
