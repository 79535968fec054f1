#!/usr/bin/env python3
"""Generate scoring reference fixtures for rowfold's tests.

Writes:
  test/fixtures/reference/scoring-cases.json

Requires numpy, scipy and statsmodels (the versions used are recorded in the
file). Run from the repository root:

  /usr/bin/python3 scripts/make-scoring-fixtures.py

The output is deterministic for given library versions (seeded generator).
The TypeScript tests only read the JSON; they never run this script.

Two synthetic tables of a regional electricity distributor's feeders:
  readings   the rows the fits are made on (feeder, region, temp_c, humidity,
             w, load_mw)
  tomorrow   rows to score (with an id): forecast weather, some for a feeder
             with no model, one with a region the fits never saw, a few NULLs;
             load_mw is the actual load, for the error against the prediction

Each case is a spec; per segment (feeder) the script fits weighted least
squares with statsmodels (WLS) on the design columns built by rowfold's
conventions (intercept first, terms, one indicator per non-reference level,
interaction products; see scripts/make-design-fixtures.py) and records:
  * the covariance of the estimates, statsmodels' cov_params() (σ²(XᵀWX)⁻¹);
  * for every row of `tomorrow` the model can score: get_prediction() at the
    row's design, with weights=1 (a new observation of unit weight):
    predicted_mean, se_mean and the obs_ci interval at the case's level;
  * for every row it cannot score, the reason rowfold gives (no_model,
    new_level:<column>, null:<column>).

An aliased term (temp_f = 1.8·temp_c + 32) is dropped from the design before
the statsmodels fit, as rowfold leaves aliased terms out of the model (its
coefficient is not estimated, so it adds nothing to a prediction); the
covariance is then over the estimated terms only.
"""

import json
import os
import sys

sys.dont_write_bytecode = True

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm

GENERATOR = "scripts/make-scoring-fixtures.py"
LIBRARY = f"statsmodels {statsmodels.__version__}, numpy {np.__version__}, scipy {scipy.__version__}"
OUT = os.path.join("test", "fixtures", "reference", "scoring-cases.json")
SEED = 20261205

READ_COLUMNS = [("feeder", "text"), ("region", "text"), ("temp_c", "float8"), ("temp_f", "float8"),
                ("humidity", "float8"), ("w", "float8"), ("load_mw", "float8")]
TOMORROW_COLUMNS = [("id", "integer")] + READ_COLUMNS
REGIONS = ["east", "north", "south"]


def mean_load(feeder, region, temp_c, humidity):
    base = {"F01": 9.0, "F02": 11.1}.get(feeder, 10.0)
    reg = {"east": 0.0, "north": 1.6, "south": -0.9, "west": 0.4}[region]
    slope = {"east": 0.22, "north": 0.29, "south": 0.17, "west": 0.2}[region]
    return base + reg + slope * temp_c + 0.015 * humidity


def build_readings(rng, n=400):
    rows = []
    for _ in range(n):
        feeder = ["F01", "F02"][rng.integers(0, 2)]
        region = REGIONS[rng.integers(0, 3)]
        temp_c = round(float(rng.uniform(5.0, 30.0)), 2)
        humidity = round(float(np.clip(82.0 - 1.1 * temp_c + rng.normal(0.0, 9.0), 15.0, 99.0)), 1)
        w = round(float(rng.uniform(0.5, 3.0)), 3)
        load = round(mean_load(feeder, region, temp_c, humidity) + float(rng.normal(0.0, 1.8)) / np.sqrt(w), 4)
        rows.append([feeder, region, temp_c, 1.8 * temp_c + 32.0, humidity, w, load])
    return rows


def build_tomorrow(rng, n=60):
    rows = []
    for i in range(n):
        feeder = ["F01", "F02"][i % 2]
        region = REGIONS[rng.integers(0, 3)]
        temp_c = round(float(rng.uniform(2.0, 34.0)), 2)
        humidity = round(float(np.clip(82.0 - 1.1 * temp_c + rng.normal(0.0, 9.0), 15.0, 99.0)), 1)
        load = round(mean_load(feeder, region, temp_c, humidity) + float(rng.normal(0.0, 1.8)), 4)
        rows.append([i + 1, feeder, region, temp_c, 1.8 * temp_c + 32.0, humidity, 1.0, load])
    # Rows that cannot be scored, one reason each.
    rows[3][1] = "F09"  # a feeder no fit has seen: no model
    rows[10][1] = "F09"
    rows[7][2] = "west"  # a region no fit has seen
    rows[15][5] = None  # humidity missing
    rows[22][3] = None  # temperature missing
    rows[22][4] = None
    return rows


CASES = [
    {
        "name": "weighted_categorical_interaction",
        "spec": {"response": "load_mw", "terms": ["temp_c", "humidity"],
                 "categorical": [{"column": "region", "reference": "north"}],
                 "interactions": [["temp_c", "region"]], "segment_by": ["feeder"], "weight": "w",
                 "confidence": 0.95},
        "level": 0.95,
    },
    {
        "name": "no_intercept",
        "spec": {"response": "load_mw", "terms": ["temp_c"], "categorical": ["region"],
                 "intercept": False, "segment_by": ["feeder"]},
        "level": 0.9,
    },
    {
        "name": "aliased_term",
        "spec": {"response": "load_mw", "terms": ["temp_c", "temp_f", "humidity"], "weight": "w"},
        "level": 0.8,
    },
]

IDX = {name: i for i, (name, _) in enumerate(READ_COLUMNS)}


def spec_parts(spec):
    cats = []
    for c in spec.get("categorical", []):
        cats.append((c, None) if isinstance(c, str) else (c["column"], c.get("reference")))
    return spec.get("terms", []), cats, spec.get("interactions", []), spec.get("intercept", True)


def design(spec, levels, row):
    """(names, values) of the design row (intercept included), rowfold's column order."""
    terms, cats, inters, intercept = spec_parts(spec)
    cols = {}
    names, values = [], []
    if intercept:
        names.append("intercept")
        values.append(1.0)
    for t in terms:
        cols[t] = [(t, row[IDX[t]])]
    for k, (c, _) in enumerate(cats):
        lv, ref = levels[c]
        keep_all = (not intercept) and k == 0
        cols[c] = [(f"{c}={v}", 1.0 if row[IDX[c]] == v else 0.0) for v in lv if keep_all or v != ref]
    for t in terms:
        names += [n for n, _ in cols[t]]
        values += [v for _, v in cols[t]]
    for c, _ in cats:
        names += [n for n, _ in cols[c]]
        values += [v for _, v in cols[c]]
    for a, b in inters:
        for na, va in cols[a]:
            for nb, vb in cols[b]:
                names.append(f"{na}*{nb}")
                values.append(va * vb)
    return names, values


def used(spec):
    terms, cats, _, _ = spec_parts(spec)
    out = [spec["response"], *terms, *[c for c, _ in cats], *spec.get("segment_by", [])]
    if "weight" in spec:
        out.append(spec["weight"])
    return out


def main():
    rng = np.random.default_rng(SEED)
    readings = build_readings(rng)
    tomorrow = build_tomorrow(rng)
    cases = []
    for case in CASES:
        spec = case["spec"]
        terms, cats, _, _ = spec_parts(spec)
        levels = {}
        for c, ref in cats:
            lv = sorted(set(r[IDX[c]] for r in readings))
            levels[c] = (lv, lv[0] if ref is None else ref)
        seg_cols = spec.get("segment_by", [])
        segments = sorted(set(tuple(r[IDX[c]] for c in seg_cols) for r in readings))
        models = []
        fitted = {}
        for seg in segments:
            rows = [r for r in readings if tuple(r[IDX[c]] for c in seg_cols) == seg]
            names, _ = design(spec, levels, rows[0])
            X = np.array([design(spec, levels, r)[1] for r in rows], dtype=float)
            y = np.array([r[IDX[spec["response"]]] for r in rows], dtype=float)
            w = np.array([r[IDX[spec["weight"]]] for r in rows], dtype=float) if "weight" in spec else np.ones(len(rows))
            # Aliased columns: leave out any column that is (numerically) a combination of earlier ones.
            kept = []
            for j in range(X.shape[1]):
                trial = kept + [j]
                sv = np.linalg.svd(X[:, trial] * np.sqrt(w)[:, None] / np.linalg.norm(X[:, trial], axis=0), compute_uv=False)
                if sv[-1] > 1e-9 * sv[0]:
                    kept = trial
            res = sm.WLS(y, X[:, kept], weights=w).fit()
            fitted[seg] = (names, kept, res)
            cov = res.cov_params()
            models.append({
                "segment": None if not seg_cols else dict(zip(seg_cols, seg)),
                "terms": names,
                "kept_terms": [names[j] for j in kept],
                "estimates": [float(res.params[kept.index(j)]) if j in kept else None for j in range(len(names))],
                "covariance": [[float(v) for v in row] for row in np.asarray(cov)],
                "sigma": float(np.sqrt(res.scale)),
                "df_residual": float(res.df_resid),
            })
        scores = []
        for r in tomorrow:
            seg = tuple(r[1 + IDX[c]] for c in seg_cols)
            row = r[1:]
            reason = None
            for col in used(spec):
                if col == spec["response"]:
                    continue
                if row[IDX[col]] is None:
                    reason = f"null:{col}"
                    break
            if reason is None:
                for c, _ in cats:
                    if row[IDX[c]] not in levels[c][0]:
                        reason = f"new_level:{c}"
            if reason is None and seg not in fitted:
                reason = "no_model"
            if reason is not None:
                scores.append({"id": r[0], "reason": reason})
                continue
            names, kept, res = fitted[seg]
            x = np.array(design(spec, levels, row)[1], dtype=float)[kept]
            pred = res.get_prediction(x[None, :], weights=np.ones(1))
            frame = pred.summary_frame(alpha=1.0 - case["level"])
            scores.append({
                "id": r[0],
                "prediction": float(frame["mean"].iloc[0]),
                "prediction_se": float(frame["mean_se"].iloc[0]),
                "interval_low": float(frame["obs_ci_lower"].iloc[0]),
                "interval_high": float(frame["obs_ci_upper"].iloc[0]),
                "actual": row[IDX["load_mw"]],
            })
        cases.append({"name": case["name"], "spec": spec, "level": case["level"], "models": models, "scores": scores})
    doc = {
        "generator": GENERATOR,
        "library": LIBRARY,
        "seed": SEED,
        "readings": {"columns": [{"name": n, "sql_type": t} for n, t in READ_COLUMNS], "rows": readings},
        "tomorrow": {"columns": [{"name": n, "sql_type": t} for n, t in TOMORROW_COLUMNS], "rows": tomorrow},
        "cases": cases,
    }
    text = json.dumps(doc, indent=1) + "\n"
    with open(OUT, "w", encoding="utf-8") as fh:
        fh.write(text)
    print(f"wrote {OUT} ({len(text)} bytes)")


if __name__ == "__main__":
    main()
