#!/usr/bin/env python3
"""Generate reference fixtures for the residual pass (robust errors, tests, influence).

Writes test/fixtures/reference/residual-cases.json. Uses statsmodels (its OLS/WLS results
with cov_type HC0..HC3, cluster and HAC; het_breuschpagan; durbin_watson; jarque_bera;
OLSInfluence), numpy and scipy; their versions are written into the fixture. Run from the
repository root with the system python:

  /usr/bin/python3 scripts/make-residual-fixtures.py

Conventions the fixtures pin (and rowfold follows):
- weighted fits: everything is computed on the whitened rows sqrt(w)*x, sqrt(w)*e
  (statsmodels' wexog / wresid); leverage and Cook's distance of a weighted fit come from
  OLSInfluence of the OLS fit of the whitened rows;
- cluster: statsmodels' default small-sample correction G/(G-1)*(n-1)/(n-k);
- Newey-West (cov_type HAC): Bartlett kernel, no small-sample correction, lag
  floor(4*(n/100)^(2/9));
- Breusch-Pagan: het_breuschpagan(wresid, wexog, robust=True) (Koenker's studentized form);
- skewness and kurtosis: statsmodels' jarque_bera (population moments; kurtosis not excess).
Deterministic for given library versions (seeded generator).
"""

import json
import math
import os
import sys

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.outliers_influence import OLSInfluence
from statsmodels.stats.stattools import durbin_watson, jarque_bera

SEED = 20261205
OUT = os.path.join("test", "fixtures", "reference", "residual-cases.json")


def sig6(a):
    return np.array([float(f"{v:.6g}") for v in np.ravel(a)]).reshape(np.shape(a))


def nw_lag(n):
    return int(math.floor(4 * (n / 100.0) ** (2.0 / 9.0)))


def case(name, X, y, w=None, groups=None, ordered=False):
    n, p = X.shape
    Xc = sm.add_constant(X, prepend=True)
    model = sm.WLS(y, Xc, weights=w) if w is not None else sm.OLS(y, Xc)
    base = model.fit()
    out = {
        "name": name,
        "terms": [f"x{j}" for j in range(p)],
        "rows": [list(map(float, X[i])) + [float(y[i])] + ([float(w[i])] if w is not None else []) for i in range(n)],
        "weighted": w is not None,
        "estimates": list(map(float, base.params)),
        "se_classical": list(map(float, base.bse)),
    }
    for hc in ["HC0", "HC1", "HC2", "HC3"]:
        out["se_" + hc.lower()] = list(map(float, model.fit(cov_type=hc).bse))
    if groups is not None:
        out["clusters"] = list(map(int, groups))
        out["se_cluster"] = list(map(float, model.fit(cov_type="cluster", cov_kwds={"groups": groups}).bse))
        out["n_clusters"] = int(len(np.unique(groups)))
    if ordered:
        lag = nw_lag(n)
        out["nw_lag"] = lag
        out["se_newey_west"] = list(map(float, model.fit(cov_type="HAC", cov_kwds={"maxlags": lag}).bse))
        out["durbin_watson"] = float(durbin_watson(base.wresid))
    lm, lmp, _, _ = het_breuschpagan(base.wresid, model.wexog, robust=True)
    out["breusch_pagan"] = [float(lm), float(lmp)]
    jb, jbp, skew, kurt = jarque_bera(base.wresid)
    out["jarque_bera"] = [float(jb), float(jbp)]
    out["skewness"] = float(skew)
    out["kurtosis"] = float(kurt)
    infl = OLSInfluence(sm.OLS(model.wendog, model.wexog).fit())
    out["leverage"] = list(map(float, infl.hat_matrix_diag))
    out["cooks_distance"] = list(map(float, infl.cooks_distance[0]))
    out["quantiles"] = {str(q): float(np.quantile(base.wresid, q)) for q in [0.01, 0.05, 0.25, 0.5, 0.75, 0.95, 0.99]}
    out["sigma"] = float(np.sqrt(base.scale))
    return out


def main():
    rng = np.random.default_rng(SEED)
    cases = []
    # Heteroskedastic errors: spread grows with |x0|.
    n = 200
    X = sig6(rng.normal(size=(n, 3)) * [1.0, 10.0, 0.01])
    y = sig6(1.5 + X @ [2.0, -0.3, 40.0] + rng.normal(size=n) * (0.5 + np.abs(X[:, 0])))
    cases.append(case("heteroskedastic", X, y))
    # Weighted, near-zero coefficient beside a large one.
    n = 150
    X = sig6(rng.uniform(-5, 5, size=(n, 2)))
    w = sig6(rng.uniform(0.2, 3.0, size=n))
    y = sig6(1000.0 + X @ [250.0, 1e-4] + rng.normal(size=n) * (1 + X[:, 0] ** 2) / np.sqrt(w))
    cases.append(case("weighted", X, y, w=w))
    # Clustered: a shared shock per cluster.
    n, g = 240, 20
    groups = rng.integers(0, g, size=n)
    X = sig6(rng.normal(size=(n, 2)) + rng.normal(size=(g, 2))[groups])
    y = sig6(3.0 + X @ [1.0, -2.0] + rng.normal(size=g)[groups] + rng.normal(size=n))
    cases.append(case("clustered", X, y, groups=groups))
    # Ordered with AR(1) errors (hourly readings of one feeder).
    n = 300
    e = np.zeros(n)
    for t in range(1, n):
        e[t] = 0.7 * e[t - 1] + rng.normal()
    hour = np.arange(n) % 24
    X = sig6(np.column_stack([10 + 8 * np.sin(2 * np.pi * hour / 24) + rng.normal(size=n), rng.uniform(30, 90, size=n)]))
    y = sig6(50 + X @ [1.8, 0.05] + e)
    cases.append(case("autocorrelated", X, y, ordered=True))
    # Everything at once: weights, clusters and an order.
    n, g = 260, 13
    groups = np.repeat(np.arange(g), n // g)
    X = sig6(rng.normal(size=(n, 3)))
    w = sig6(rng.uniform(0.5, 2.0, size=n))
    e = np.zeros(n)
    for t in range(1, n):
        e[t] = 0.5 * e[t - 1] + rng.normal()
    y = sig6(-2.0 + X @ [0.5, 0.0, 3.0] + e / np.sqrt(w))
    cases.append(case("weighted_clustered_ordered", X, y, w=w, groups=groups, ordered=True))
    # Wide: 14 terms, so the meats are summed in staged blocks (12 coefficients and up).
    n = 400
    X = sig6(rng.normal(size=(n, 14)))
    y = sig6(5.0 + X @ np.linspace(-1, 1, 14) + rng.normal(size=n) * (0.5 + np.abs(X[:, 3])))
    cases.append(case("wide", X, y))
    doc = {
        "generator": "scripts/make-residual-fixtures.py",
        "library": f"statsmodels {statsmodels.__version__}, numpy {np.__version__}, scipy {scipy.__version__}",
        "seed": SEED,
        "cases": cases,
    }
    with open(OUT, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
