#!/usr/bin/env python3
"""Generate design-column reference fixtures for rowfold's tests.

Writes:
  test/fixtures/reference/design-cases.json   one table of rows, and fits over it
                                              driven by spec-shaped cases

Requires numpy and scipy only. Run from the repository root:

  python3 scripts/make-design-fixtures.py

The output is deterministic for a given numpy/scipy version (seeded generator).
The TypeScript tests only read the JSON; they never run this script.

The table is a synthetic feeder-load data set of a regional electricity
distributor (columns feeder, region, dow, temp_c, humidity, w, load_mw) with a
few NULLs. Each case is a spec (response, terms, categorical, interactions,
segment_by, weight, intercept, confidence); the script expands it into design
columns by rowfold's conventions and fits each segment with the shared
reference fit of scripts/reference_ols.py (which states the statistical
conventions: aliasing, sigma, R-squared, F, log-likelihood, AIC/BIC, VIF,
intervals).

Design-column conventions:

* Rows with NULL in any column the case uses (response, terms, categorical,
  segment_by, weight) are left out of that case; other columns do not matter.
* Intercept first (named "intercept") when the model has one.
* Then the terms, in spec order, named as given.
* Then the categorical columns, in spec order. The levels are the distinct
  non-NULL values sorted in the column's own type order (integers numerically,
  text by byte order; the text values here are plain ASCII lowercase). The
  reference level is the first level unless the case names one. One 0/1
  indicator per non-reference level, in level order, named "<column>=<level>".
* Then the interactions, in spec order: for a pair (a, b), the product of each
  of a's design columns with each of b's (a outer loop, b inner), named
  "<a-col>*<b-col>". A term's design column is itself; a categorical's design
  columns are its indicators (without the reference level).
* Segments (segment_by) give one model each, ordered by segment value. Every
  level occurs in every segment of these fixtures, so levels taken over the
  whole case and levels taken per segment coincide.
"""

import math
import os
import sys

sys.dont_write_bytecode = True  # keep __pycache__ out of scripts/

import numpy as np
import scipy

from reference_ols import ROUTE_TOL, close, fit, write  # noqa: E402  (scripts/reference_ols.py)

GENERATOR = "scripts/make-design-fixtures.py"
LIBRARY = f"numpy {np.__version__}, scipy {scipy.__version__}"
OUT_DIR = os.path.join("test", "fixtures", "reference")
SEED = 20261215

N_ROWS = 600
N_NULL_HUMIDITY = 5
N_NULL_REGION = 3

COLUMNS = [
    ("feeder", "text"),
    ("region", "text"),
    ("dow", "integer"),
    ("temp_c", "float8"),
    ("humidity", "float8"),
    ("w", "float8"),
    ("load_mw", "float8"),
]
COLUMN_INDEX = {name: i for i, (name, _) in enumerate(COLUMNS)}
SQL_TYPE = dict(COLUMNS)


# ---------------------------------------------------------------------------
# Data
# ---------------------------------------------------------------------------

def build_table():
    """Rows of the feeder-load table as JSON values (None for NULL)."""
    rng = np.random.default_rng(SEED)
    n = N_ROWS

    feeder = np.array(["F01", "F02"])[rng.integers(0, 2, n)]
    region = np.array(["east", "north", "south"])[rng.integers(0, 3, n)]
    dow = rng.integers(0, 7, n)
    temp_c = np.round(rng.uniform(5.0, 30.0, n), 2)
    humidity = np.round(np.clip(82.0 - 1.1 * temp_c + rng.normal(0.0, 9.0, n), 15.0, 99.0), 1)
    w = np.round(rng.uniform(0.5, 3.0, n), 3)

    # Load: feeder, region and day-of-week effects, temperature with a slope
    # that differs by region, a little humidity; noise variance proportional to 1/w.
    feeder_eff = {"F01": 0.0, "F02": 2.1}
    region_eff = {"east": 0.0, "north": 1.6, "south": -0.9}
    temp_by_region = {"east": 0.22, "north": 0.29, "south": 0.17}
    dow_eff = np.array([0.0, 0.35, 0.4, 0.3, 0.25, -1.1, -1.6])
    mu = (
        9.0
        + np.array([feeder_eff[f] for f in feeder])
        + np.array([region_eff[r] for r in region])
        + dow_eff[dow]
        + np.array([temp_by_region[r] for r in region]) * temp_c
        + 0.015 * humidity
    )
    load = np.round(mu + rng.normal(0.0, 1.8, n) / np.sqrt(w), 4)

    # NULLs on disjoint rows: a few humidity readings and region attributions missing.
    picks = rng.choice(n, N_NULL_HUMIDITY + N_NULL_REGION, replace=False)
    null_humidity = set(int(i) for i in picks[:N_NULL_HUMIDITY])
    null_region = set(int(i) for i in picks[N_NULL_HUMIDITY:])

    rows = []
    for i in range(n):
        rows.append([
            str(feeder[i]),
            None if i in null_region else str(region[i]),
            int(dow[i]),
            float(temp_c[i]),
            None if i in null_humidity else float(humidity[i]),
            float(w[i]),
            float(load[i]),
        ])
    return rows


# ---------------------------------------------------------------------------
# Specs and design columns
# ---------------------------------------------------------------------------

def categorical_entries(spec):
    """[(column, reference or None)] in spec order."""
    out = []
    for entry in spec.get("categorical", []):
        if isinstance(entry, str):
            out.append((entry, None))
        else:
            out.append((entry["column"], entry.get("reference")))
    return out


def used_columns(spec):
    cols = [spec["response"], *spec.get("terms", [])]
    cols += [c for c, _ in categorical_entries(spec)]
    cols += list(spec.get("segment_by", []))
    if "weight" in spec:
        cols.append(spec["weight"])
    return list(dict.fromkeys(cols))


def sort_levels(column, values):
    sql_type = SQL_TYPE[column]
    if sql_type == "integer":
        return sorted(set(int(v) for v in values))
    assert sql_type == "text"
    for v in values:
        assert v.isascii() and v == v.lower(), f"level {v!r} would make collation matter"
    return sorted(set(values), key=lambda s: s.encode("utf-8"))


def level_text(v):
    return str(v)


def resolve_levels(spec, rows):
    """Per categorical column: (levels, reference), levels over the case's rows."""
    out = {}
    for column, reference in categorical_entries(spec):
        values = [r[COLUMN_INDEX[column]] for r in rows]
        levels = sort_levels(column, values)
        ref = levels[0] if reference is None else reference
        assert ref in levels, (column, ref, levels)
        out[column] = (levels, ref)
    return out


def design_route_rows(spec, rows, levels):
    """Route A: row by row, with the naming rules applied literally.

    Returns (names without intercept, matrix)."""
    terms = list(spec.get("terms", []))
    cats = [c for c, _ in categorical_entries(spec)]

    def factor_columns(factor):
        """[(name, function row -> value)] of one term or categorical column."""
        if factor in terms:
            j = COLUMN_INDEX[factor]
            return [(factor, lambda r, j=j: float(r[j]))]
        lv, ref = levels[factor]
        j = COLUMN_INDEX[factor]
        return [(f"{factor}={level_text(v)}", lambda r, j=j, v=v: 1.0 if r[j] == v else 0.0)
                for v in lv if v != ref]

    columns = []
    for t in terms:
        columns += factor_columns(t)
    for c in cats:
        columns += factor_columns(c)
    for a, b in spec.get("interactions", []):
        for na, fa in factor_columns(a):
            for nb, fb in factor_columns(b):
                columns.append((f"{na}*{nb}", lambda r, fa=fa, fb=fb: fa(r) * fb(r)))

    names = [nm for nm, _ in columns]
    X = np.array([[f(r) for _, f in columns] for r in rows], dtype=float).reshape(len(rows), len(columns))
    return names, X


def design_route_arrays(spec, rows, levels):
    """Route B: whole columns at once: one-hot blocks from level codes, and
    interaction blocks as row-wise outer products (a outer, b inner)."""
    terms = list(spec.get("terms", []))
    cats = [c for c, _ in categorical_entries(spec)]
    data = {}
    for name in terms:
        data[name] = np.array([r[COLUMN_INDEX[name]] for r in rows], dtype=float)

    blocks = {}
    for t in terms:
        blocks[t] = ([t], data[t][:, None])
    for c in cats:
        lv, ref = levels[c]
        values = [r[COLUMN_INDEX[c]] for r in rows]
        code = np.array([lv.index(v) for v in values])
        onehot = (code[:, None] == np.arange(len(lv))[None, :]).astype(float)
        keep = [k for k, v in enumerate(lv) if v != ref]
        blocks[c] = ([f"{c}={level_text(lv[k])}" for k in keep], onehot[:, keep])

    names, parts = [], []
    for f in terms + cats:
        names += blocks[f][0]
        parts.append(blocks[f][1])
    for a, b in spec.get("interactions", []):
        na, A = blocks[a]
        nb, B = blocks[b]
        names += [f"{x}*{y}" for x in na for y in nb]
        parts.append((A[:, :, None] * B[:, None, :]).reshape(len(rows), len(na) * len(nb)))
    X = np.hstack(parts) if parts else np.zeros((len(rows), 0))
    return names, X


def build_models(spec, table):
    used = used_columns(spec)
    rows = [r for r in table if all(r[COLUMN_INDEX[c]] is not None for c in used)]
    levels = resolve_levels(spec, rows)

    segment_by = list(spec.get("segment_by", []))
    if segment_by:
        keys = sorted(set(tuple(r[COLUMN_INDEX[c]] for c in segment_by) for r in rows))
        groups = [(dict(zip(segment_by, k)),
                   [r for r in rows if tuple(r[COLUMN_INDEX[c]] for c in segment_by) == k])
                  for k in keys]
    else:
        groups = [(None, rows)]

    models = []
    for segment, seg_rows in groups:
        # The fixture relies on every level occurring in every segment.
        for column, (lv, _) in levels.items():
            assert set(r[COLUMN_INDEX[column]] for r in seg_rows) == set(lv), (segment, column)

        names, X = design_route_rows(spec, seg_rows, levels)
        names_b, X_b = design_route_arrays(spec, seg_rows, levels)
        assert names == names_b, (names, names_b)
        assert np.array_equal(X, X_b), "design routes differ"

        y = np.array([r[COLUMN_INDEX[spec["response"]]] for r in seg_rows], dtype=float)
        w = (np.array([r[COLUMN_INDEX[spec["weight"]]] for r in seg_rows], dtype=float)
             if "weight" in spec else None)
        expected = fit(names, X, y, w, spec["intercept"], spec["confidence"])
        assert not expected["aliased"], expected["aliased"]
        assert expected["n"] == len(seg_rows)
        models.append({
            "segment": segment,
            "design_columns": (["intercept"] if spec["intercept"] else []) + names,
            "n": len(seg_rows),
            "expected": expected,
            "_fit_input": (names, X, y, w),
        })
    return rows, levels, models


def check_reparametrisation(spec, models, table):
    """Changing the reference level of each categorical column reparametrises
    the model: rss, r2, F and loglik must not change."""
    for column, reference in categorical_entries(spec):
        values = sorted(set(r[COLUMN_INDEX[column]] for r in table if r[COLUMN_INDEX[column]] is not None),
                        key=lambda v: (isinstance(v, str), v))
        other = next(v for v in values if v != (reference if reference is not None else values[0]))
        alt = dict(spec)
        alt["categorical"] = [
            {"column": c, "reference": other} if c == column else ({"column": c, "reference": r} if r is not None else c)
            for c, r in categorical_entries(spec)
        ]
        _, _, alt_models = build_models(alt, table)
        for m, a in zip(models, alt_models):
            assert m["segment"] == a["segment"]
            for key in ("rss", "r2", "r2_adjusted", "f", "loglik", "aic", "bic"):
                assert close(m["expected"][key], a["expected"][key], ROUTE_TOL), (column, key)
            # The slope of a term that takes part in no interaction with this
            # column does not depend on the reference level.
            partners = [p for pair in spec.get("interactions", []) if column in pair for p in pair]
            for c in m["expected"]["coefficients"]:
                if c["term"] in spec.get("terms", []) and c["term"] not in partners:
                    ca = next(x for x in a["expected"]["coefficients"] if x["term"] == c["term"])
                    assert close(c["estimate"], ca["estimate"], ROUTE_TOL, scale=c["std_error"])
                    assert close(c["std_error"], ca["std_error"], ROUTE_TOL)


def check_interaction_slopes(models):
    """Case `interaction`: the temp_c slope within each region, fitted on that
    region's rows alone (a plain regression on temp_c), equals the intercept-
    and slope-shifted combination of the pooled fit's estimates; checked on
    the point estimates (the pooled fit shares sigma, so standard errors differ)."""
    (model,) = models
    names, X, y, _ = model["_fit_input"]
    est = {c["term"]: c["estimate"] for c in model["expected"]["coefficients"]}
    temp = X[:, names.index("temp_c")]
    for region in ("east", "north", "south"):
        if f"region={region}" in names:
            mask = X[:, names.index(f"region={region}")] == 1.0
            slope = est["temp_c"] + est[f"temp_c*region={region}"]
            level = est["intercept"] + est[f"region={region}"]
        else:
            mask = np.all(X[:, [i for i, nm in enumerate(names) if nm.startswith("region=")]] == 0.0, axis=1)
            slope = est["temp_c"]
            level = est["intercept"]
        sub = fit(["temp_c"], temp[mask][:, None], y[mask], None, True, 0.95)
        sub_est = {c["term"]: c["estimate"] for c in sub["coefficients"]}
        assert close(slope, sub_est["temp_c"], ROUTE_TOL, scale=abs(sub_est["temp_c"])), region
        assert close(level, sub_est["intercept"], ROUTE_TOL, scale=abs(sub_est["intercept"])), region


# ---------------------------------------------------------------------------
# Cases
# ---------------------------------------------------------------------------

def spec_of(terms, categorical=(), interactions=(), segment_by=(), weight=None):
    spec = {
        "response": "load_mw",
        "terms": list(terms),
        "categorical": list(categorical),
        "interactions": [list(p) for p in interactions],
        "segment_by": list(segment_by),
    }
    if weight is not None:
        spec["weight"] = weight
    spec["intercept"] = True
    spec["confidence"] = 0.95
    return spec


CASES = [
    ("weighted",
     "load_mw ~ temp_c + humidity, weight w, no segments; rows with NULL humidity are left out.",
     spec_of(["temp_c", "humidity"], weight="w")),
    ("categorical_reference",
     "load_mw ~ temp_c + region (reference 'south') + dow (default reference 0), one model per feeder; "
     "rows with NULL region are left out.",
     spec_of(["temp_c"], categorical=[{"column": "region", "reference": "south"}, "dow"], segment_by=["feeder"])),
    ("interaction",
     "load_mw ~ temp_c + region (default reference 'east') + temp_c x region, no segments; "
     "rows with NULL region are left out.",
     spec_of(["temp_c"], categorical=["region"], interactions=[["temp_c", "region"]])),
    ("interaction_terms",
     "load_mw ~ temp_c + humidity + temp_c x humidity (a product of two numeric terms), weight w; "
     "rows with NULL humidity are left out.",
     spec_of(["temp_c", "humidity"], interactions=[["temp_c", "humidity"]], weight="w")),
]


def build_cases(table):
    cases = []
    for name, description, spec in CASES:
        rows, levels, models = build_models(spec, table)
        check_reparametrisation(spec, models, table)
        if name == "interaction":
            check_interaction_slopes(models)
        for m in models:
            del m["_fit_input"]
        cases.append({"name": name, "description": description, "spec": spec, "models": models})
        for m in models:
            e = m["expected"]
            print(f"  {name:22s} segment={m['segment']} n={e['n']:3d} rank={e['rank']} "
                  f"r2={e['r2']:.3f} f_p={e['f_p']:.3g} min p={min(c['p'] for c in e['coefficients']):.3g}")
            print(f"    {m['design_columns']}")
    return cases


def main():
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    os.chdir(root)
    os.makedirs(OUT_DIR, exist_ok=True)

    table = build_table()
    # The expected values are computed from exactly these JSON values; make
    # sure every float survives a text round trip unchanged.
    for r in table:
        for v in r:
            if isinstance(v, float):
                assert math.isfinite(v) and float(repr(v)) == v

    cases = build_cases(table)
    write(os.path.join(OUT_DIR, "design-cases.json"), {
        "generator": GENERATOR,
        "library": LIBRARY,
        "table": {
            "columns": [{"name": n, "sql_type": t} for n, t in COLUMNS],
            "rows": table,
        },
        "cases": cases,
    })
    return 0


if __name__ == "__main__":
    sys.exit(main())
