"""Shared reference least-squares fit for rowfold's fixture generators.

Used by scripts/make-reference-fixtures.py (ols-cases.json) and
scripts/make-design-fixtures.py (design-cases.json). Requires numpy and scipy only.

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

import numpy as np
import scipy
import scipy.linalg
import scipy.stats

ALIAS_TOL = 1e-9     # relative residual norm below which a column counts as aliased
ROUTE_TOL = 1e-10    # agreement required between independent computations
VIF_TOL = 1e-9


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
