#!/usr/bin/env python3
"""Generate reference fixtures for rowfold's tests.

Writes:
  test/fixtures/reference/ols-cases.json      weighted / unweighted least-squares fits
  test/fixtures/reference/distributions.json  t, F and chi-square tail probabilities and t quantiles

Requires numpy and scipy only. Run from the repository root:

  python3 scripts/make-reference-fixtures.py

The output is deterministic for a given numpy/scipy version (seeded generator).
The TypeScript tests only read the JSON; they never run this script.

Conventions implemented here (they are rowfold's, stated once so the fixtures
can be checked against them):

* Weighted fits use sqrt(w)-scaled rows throughout. n counts rows with w > 0.
* A design column that is a linear combination of earlier columns (intercept
  first, then terms in order) is aliased and dropped; every statistic is that of
  the reduced model.
* rss = sum w r^2, sigma^2 = rss / (n - rank), cov = sigma^2 (X'WX)^-1.
* p = 2 t.sf(|t|, df), CI = est +- t.ppf(1 - (1 - conf)/2, df) * se.
* TSS is centred about the weighted mean with an intercept, about zero without.
  r2 = 1 - rss/TSS; adjusted r2 uses (n - 1) with intercept, n without.
  F numerator df = rank - 1 with intercept, rank without.
* loglik = -n/2 (ln 2pi + ln(rss/n) + 1) + 1/2 sum_{w>0} ln w;
  aic/bic count rank + 1 parameters (the +1 is the error variance).
* vif_j = 1 / (1 - R2_j), R2_j from regressing sqrt(w) x_j on the other kept
  columns of sqrt(w) X, centred (weighted mean) with an intercept, uncentred
  without.
"""

import json
import math
import os
import sys

import numpy as np
import scipy
import scipy.linalg
import scipy.stats

GENERATOR = "scripts/make-reference-fixtures.py"
LIBRARY = f"numpy {np.__version__}, scipy {scipy.__version__}"
OUT_DIR = os.path.join("test", "fixtures", "reference")
SEED = 20261201

ALIAS_TOL = 1e-9     # relative residual norm below which a column counts as aliased
ROUTE_TOL = 1e-10    # agreement required between independent computations
VIF_TOL = 1e-9


def sig6(v):
    """Round to 6 significant digits; the result is the double the fit reads."""
    v = float(v)
    if v == 0.0:
        return 0.0
    return float(f"{v:.6g}")


def sig6_array(a):
    return np.array([sig6(v) for v in np.ravel(a)], dtype=float).reshape(np.shape(a))


def close(a, b, tol, scale=None):
    """|a - b| <= tol * max(|a|, |b|, scale)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    ref = np.maximum(np.abs(a), np.abs(b))
    if scale is not None:
        ref = np.maximum(ref, np.asarray(scale, dtype=float))
    return bool(np.all(np.abs(a - b) <= tol * ref))


# ---------------------------------------------------------------------------
# The fit
# ---------------------------------------------------------------------------

def find_aliased(Xs, names):
    """Sequentially drop columns of the scaled design that lie in the span of
    the earlier kept columns. Returns the kept column indices."""
    kept = []
    for j in range(Xs.shape[1]):
        col = Xs[:, j]
        norm = np.linalg.norm(col)
        if norm == 0.0:
            continue
        if kept:
            # Unit-norm columns keep the projection well conditioned even
            # though the raw columns differ in scale by ~1e5.
            B = Xs[:, kept] / np.linalg.norm(Xs[:, kept], axis=0)
            Q, _ = np.linalg.qr(B, mode="reduced")
            u = col / norm
            u = u - Q @ (Q.T @ u)
            u = u - Q @ (Q.T @ u)  # second pass (reorthogonalisation)
            rel = np.linalg.norm(u)
        else:
            rel = 1.0
        if rel > ALIAS_TOL:
            # Non-aliased columns in these fixtures are far from dependent;
            # make sure the threshold is not doing anything delicate.
            assert rel > 1e-3, f"column {names[j]} nearly collinear (rel {rel})"
            kept.append(j)
        else:
            assert rel < 1e-12, f"column {names[j]} ambiguous (rel {rel})"
    return kept


def regress_r2(target, others, centred, sw):
    """R^2 of regressing a scaled column on other scaled columns."""
    if others.shape[1] > 0:
        coef, *_ = np.linalg.lstsq(others, target, rcond=None)
        resid = target - others @ coef
    else:
        resid = target
    rss = float(resid @ resid)
    if centred:
        # target is sqrt(w) x; the weighted mean of x is sum(w x) / sum(w)
        w = sw * sw
        x = np.divide(target, sw, out=np.zeros_like(target), where=sw > 0)
        xbar = float(np.sum(w * x) / np.sum(w))
        tss = float(np.sum(w * (x - xbar) ** 2))
    else:
        tss = float(target @ target)
    return 1.0 - rss / tss, tss


def fit(terms, X, y, w, intercept, confidence):
    nrow = X.shape[0]
    if w is None:
        w = np.ones(nrow)
    assert np.all(w >= 0)
    sw = np.sqrt(w)
    pos = w > 0
    n = int(np.count_nonzero(pos))

    names = (["intercept"] if intercept else []) + list(terms)
    cols = ([np.ones(nrow)] if intercept else []) + [X[:, j] for j in range(X.shape[1])]
    D = np.column_stack(cols) if cols else np.zeros((nrow, 0))
    Ds = D * sw[:, None]
    ys = y * sw

    kept = find_aliased(Ds, names)
    rank = len(kept)
    Xr = Ds[:, kept]
    df = n - rank
    assert df > 0

    # Route 1 (the reported values): Householder QR of the column-equilibrated
    # design, triangular solve, then one step of iterative refinement with the
    # residual accumulated in extended precision. Equilibration matters here
    # because the raw columns differ in scale by ~1e5. (On platforms where
    # longdouble is plain double the refinement step is merely less effective.)
    scale = np.linalg.norm(Xr, axis=0)
    Q, R = np.linalg.qr(Xr / scale, mode="reduced")
    gamma = scipy.linalg.solve_triangular(R, Q.T @ ys, lower=False)
    r_ext = ys.astype(np.longdouble) - (Xr / scale).astype(np.longdouble) @ gamma.astype(np.longdouble)
    gamma = gamma + scipy.linalg.solve_triangular(R, Q.T @ r_ext.astype(float), lower=False)
    beta = gamma / scale
    Rinv = scipy.linalg.solve_triangular(R, np.eye(rank), lower=False)
    xtwx_inv = (Rinv @ Rinv.T) / np.outer(scale, scale)
    resid = ys.astype(np.longdouble) - Xr.astype(np.longdouble) @ beta.astype(np.longdouble)
    rss = float(np.sum(resid * resid))

    # Route 2 (check): lstsq on the raw scaled design; covariance from an
    # explicit inverse of the normal matrix.
    beta_ls, _, lrank, _ = np.linalg.lstsq(Xr, ys, rcond=None)
    assert lrank == rank
    rss_ls = float(np.sum((ys - Xr @ beta_ls) ** 2))
    xtwx_inv_ls = np.linalg.inv(Xr.T @ Xr)

    sigma2 = rss / df
    se = np.sqrt(sigma2 * np.diag(xtwx_inv))
    se_ls = np.sqrt(sigma2 * np.diag(xtwx_inv_ls))
    assert close(beta, beta_ls, ROUTE_TOL, scale=se), (beta, beta_ls)
    assert close(rss, rss_ls, ROUTE_TOL)
    assert close(se, se_ls, ROUTE_TOL), (se, se_ls)
    # Also the residual sum of squares written unscaled: sum w (y - X b)^2.
    assert close(rss, float(np.sum(w * (y - D[:, kept] @ beta) ** 2)), ROUTE_TOL)

    tstat = beta / se
    p = 2.0 * scipy.stats.t.sf(np.abs(tstat), df)
    q = 1.0 - (1.0 - confidence) / 2.0
    tcrit = float(scipy.stats.t.ppf(q, df))

    # Goodness of fit.
    if intercept:
        ybar = float(np.sum(w * y) / np.sum(w))
        tss = float(np.sum(w * (y - ybar) ** 2))
        f_df1 = rank - 1
    else:
        tss = float(np.sum(w * y * y))
        f_df1 = rank
    if intercept and rank == 1:
        # Intercept-only: rss equals tss exactly in exact arithmetic.
        assert close(rss, tss, 1e-12)
        r2 = 0.0
        r2_adj = 0.0
    else:
        r2 = 1.0 - rss / tss
        if intercept:
            r2_adj = 1.0 - (1.0 - r2) * (n - 1) / df
        else:
            r2_adj = 1.0 - (1.0 - r2) * n / df
    if f_df1 > 0:
        f = ((tss - rss) / f_df1) / (rss / df)
        f_p = float(scipy.stats.f.sf(f, f_df1, df))
        assert f_p > 1e-300, f"f_p underflow ({f_p}); weaken the signal"
    else:
        f = None
        f_p = None

    sum_log_w = float(np.sum(np.log(w[pos])))
    loglik = -n / 2.0 * (math.log(2.0 * math.pi) + math.log(rss / n) + 1.0) + 0.5 * sum_log_w
    k = rank + 1
    aic = -2.0 * loglik + 2.0 * k
    bic = -2.0 * loglik + math.log(n) * k

    # VIF: auxiliary regressions on the other kept scaled columns.
    vif = {}
    for pos_j, j in enumerate(kept):
        if intercept and j == 0:
            continue
        others = [c for c in kept if c != j]
        r2_j, tss_j = regress_r2(Ds[:, j], Ds[:, others], intercept, sw)
        v = 1.0 / (1.0 - r2_j)
        v2 = float(xtwx_inv[pos_j, pos_j]) * tss_j
        assert close(v, v2, VIF_TOL), (names[j], v, v2)
        vif[j] = v

    coefficients = []
    for j, name in enumerate(names):
        if j in kept:
            i = kept.index(j)
            assert math.isfinite(p[i]) and (p[i] > 1e-300), f"p underflow for {name}"
            coefficients.append({
                "term": name,
                "aliased": False,
                "estimate": float(beta[i]),
                "std_error": float(se[i]),
                "t": float(tstat[i]),
                "p": float(p[i]),
                "ci_low": float(beta[i] - tcrit * se[i]),
                "ci_high": float(beta[i] + tcrit * se[i]),
                "vif": vif.get(j),
            })
        else:
            coefficients.append({
                "term": name,
                "aliased": True,
                "estimate": None,
                "std_error": None,
                "t": None,
                "p": None,
                "ci_low": None,
                "ci_high": None,
                "vif": None,
            })

    return {
        "rank": rank,
        "aliased": [names[j] for j in range(len(names)) if j not in kept],
        "n": n,
        "df_residual": df,
        "rss": rss,
        "sigma": math.sqrt(sigma2),
        "r2": r2,
        "r2_adjusted": r2_adj,
        "f": f,
        "f_df1": f_df1 if f_df1 > 0 else None,
        "f_df2": df if f_df1 > 0 else None,
        "f_p": f_p,
        "loglik": loglik,
        "aic": aic,
        "bic": bic,
        "coefficients": coefficients,
    }


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


# ---------------------------------------------------------------------------
# Output: indented objects, but lists of scalars on one line (rows stay compact)
# ---------------------------------------------------------------------------

def dump(obj, indent=0):
    pad = "  " * indent
    inner = "  " * (indent + 1)
    if isinstance(obj, dict):
        if not obj:
            return "{}"
        items = [f"{inner}{json.dumps(k)}: {dump(v, indent + 1)}" for k, v in obj.items()]
        return "{\n" + ",\n".join(items) + "\n" + pad + "}"
    if isinstance(obj, list):
        if all(not isinstance(v, (dict, list)) for v in obj):
            return json.dumps(obj, allow_nan=False)
        items = [inner + dump(v, indent + 1) for v in obj]
        return "[\n" + ",\n".join(items) + "\n" + pad + "]"
    return json.dumps(obj, allow_nan=False)


def write(path, obj):
    text = dump(obj) + "\n"
    assert json.loads(text) == obj, f"{path}: JSON does not round-trip"
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(text)
    print(f"wrote {path} ({len(text.encode('utf-8'))} bytes)")


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
