#!/usr/bin/env python3
"""Generate exact least-squares solutions for rowfold's refinement tests.

Writes test/fixtures/reference/exact-cases.json: synthetic designs (rows of doubles) whose
models have coefficients near zero beside large ones, a weighted one, one without an
intercept, a moderately ill-conditioned one and one with an aliased term, each with its
least-squares solution computed exactly in rational arithmetic (Python's fractions module:
the doubles of the rows are exact rationals, the normal equations are solved by Gaussian
elimination over the rationals), and the standard errors, sigma, R-squared and F that
follow, printed to 40 significant digits (square roots by Python's decimal module at 60
digits).

Run from the repository root:

  python3 scripts/make-refinement-fixtures.py

The data come from Python's own seeded generator (random.Random), so the output is the same
on every Python 3. The TypeScript tests only read the JSON; they never run this script.
"""

import json
import os
import random
import sys
from decimal import Decimal, getcontext
from fractions import Fraction

GENERATOR = "scripts/make-refinement-fixtures.py"
LIBRARY = f"Python {sys.version_info.major}.{sys.version_info.minor} fractions (exact rational arithmetic)"
OUT = os.path.join("test", "fixtures", "reference", "exact-cases.json")
getcontext().prec = 60


def dec(q):
    """A rational as a decimal string of 40 significant digits."""
    if q == 0:
        return "0"
    d = Decimal(q.numerator) / Decimal(q.denominator)
    return f"{d:.39e}"


def sqrt_dec(q):
    return f"{(Decimal(q.numerator) / Decimal(q.denominator)).sqrt():.39e}"


def solve_exact(a, b):
    """Solves the square rational system a x = b by Gaussian elimination with exact pivots."""
    n = len(a)
    m = [row[:] + [b[i]] for i, row in enumerate(a)]
    for c in range(n):
        piv = next(r for r in range(c, n) if m[r][c] != 0)
        m[c], m[piv] = m[piv], m[c]
        for r in range(n):
            if r != c and m[r][c] != 0:
                f = m[r][c] / m[c][c]
                m[r] = [x - f * y for x, y in zip(m[r], m[c])]
    return [m[i][n] / m[i][i] for i in range(n)]


def inverse_diagonal(a):
    """Diagonal of the inverse of a square rational matrix."""
    n = len(a)
    out = []
    for j in range(n):
        e = [Fraction(int(i == j)) for i in range(n)]
        out.append(solve_exact(a, e)[j])
    return out


def exact_fit(rows, p, intercept, weighted, kept):
    """Exact weighted least squares on the kept design columns (column 0 = intercept when there is one)."""
    xs, ys, ws = [], [], []
    for r in rows:
        x = [Fraction(v) for v in r[:p]]
        xs.append(([Fraction(1)] if intercept else []) + x)
        ys.append(Fraction(r[p]))
        ws.append(Fraction(r[p + 1]) if weighted else Fraction(1))
    cols = kept
    k = len(cols)
    g = [[sum(w * x[a] * x[b] for x, w in zip(xs, ws)) for b in cols] for a in cols]
    h = [sum(w * x[a] * y for x, y, w in zip(xs, ys, ws)) for a in cols]
    beta = solve_exact(g, h)
    rss = sum(w * (y - sum(beta[i] * x[c] for i, c in enumerate(cols))) ** 2 for x, y, w in zip(xs, ys, ws))
    sw = sum(ws)
    if intercept:
        mean = sum(w * y for y, w in zip(ys, ws)) / sw
        tss = sum(w * (y - mean) ** 2 for y, w in zip(ys, ws))
    else:
        tss = sum(w * y * y for y, w in zip(ys, ws))
    m = len(rows)
    df = m - k
    s2 = rss / df
    diag = inverse_diagonal(g)
    df1 = k - (1 if intercept else 0)
    f = ((tss - rss) / df1) / s2 if df1 > 0 and rss > 0 else None
    return {
        "estimates": [dec(b) for b in beta],
        "std_errors": [sqrt_dec(s2 * d) for d in diag],
        "sigma": sqrt_dec(s2),
        "r2": dec(1 - rss / tss),
        "f": None if f is None else dec(f),
    }


def generated_rows(spec):
    """The rows of a generated case, as test/support/exact-cases.ts makes them: draws of the
    Park-Miller generator (state = 16807 * state mod 2^31 - 1, exact in doubles) over 2^31,
    each predictor the optional "offset" plus a draw, y summed left to right in double
    arithmetic from the optional "constant", so both languages get the same doubles."""
    state = spec["seed"]

    def draw():
        nonlocal state
        state = (16807 * state) % 2147483647
        return state / 2147483648

    rows = []
    for _ in range(spec["rows"]):
        x = [spec.get("offset", 0.0) + draw() for _ in spec["coefficients"]]
        y = spec.get("constant", 0.0)
        for c, v in zip(spec["coefficients"], x):
            y += c * v
        y += (draw() - 0.5) * spec["noise"]
        rows.append(x + [y])
    return rows


def case(name, description, rows, terms, intercept, weighted, aliased=(), generated=None):
    p = len(terms)
    names = (["intercept"] if intercept else []) + list(terms)
    kept = [i for i, t in enumerate(names) if t not in aliased]
    exact = exact_fit(rows, p, intercept, weighted, kept)
    full = lambda vals: [vals[kept.index(i)] if i in kept else None for i in range(len(names))]
    return {
        "name": name,
        "description": description,
        "intercept": intercept,
        "weighted": weighted,
        "terms": list(terms),
        "aliased": list(aliased),
        **({"generated": generated} if generated is not None else {"rows": rows}),
        "exact": {
            "estimates": full(exact["estimates"]),
            "std_errors": full(exact["std_errors"]),
            "sigma": exact["sigma"],
            "r2": exact["r2"],
            "f": exact["f"],
        },
    }


def main():
    rng = random.Random(20261111)
    cases = []

    # 1. Zero intercept beside N(0, 1) slopes on uniform predictors, tiny noise.
    p = 12
    b = [rng.gauss(0, 1) for _ in range(p)]
    rows = []
    for _ in range(400):
        x = [rng.random() for _ in range(p)]
        rows.append(x + [sum(bj * xj for bj, xj in zip(b, x)) + 1e-6 * rng.gauss(0, 1)])
    cases.append(case("zero-intercept", "12 uniform predictors, N(0, 1) slopes, true intercept 0, noise 1e-6.",
                      rows, [f"x{j + 1}" for j in range(p)], True, False))

    # 2. One effect of 1e-7 beside effects in the hundreds; predictors offset to about 1000.
    coef = [250.0, -3.0, 0.5, 1e-7, 40.0, -7.0]
    rows = []
    for _ in range(500):
        x = [1000.0 + 10.0 * rng.random() for _ in coef]
        rows.append(x + [12.0 + sum(c * v for c, v in zip(coef, x)) + 1e-4 * rng.gauss(0, 1)])
    cases.append(case("tiny-effect", "Six predictors near 1000; one coefficient 1e-7 beside 250, 40, -7, -3, 0.5; noise 1e-4.",
                      rows, ["a", "b", "c", "tiny", "d", "e"], True, False))

    # 3. Weighted, three true zeros.
    coef = [2.0, 0.0, -1.5, 0.0, 3.0, 0.0, 0.75, 5.0]
    rows = []
    for _ in range(300):
        x = [rng.gauss(j, 1.0 + j) for j in range(len(coef))]
        w = 0.5 + 2.5 * rng.random()
        rows.append(x + [-4.0 + sum(c * v for c, v in zip(coef, x)) + 1e-5 * rng.gauss(0, 1) / w ** 0.5, w])
    cases.append(case("weighted-zeros", "Weighted; eight predictors, three of them with true coefficient 0; noise 1e-5.",
                      rows, [f"z{j + 1}" for j in range(len(coef))], True, True))

    # 4. No intercept; one coefficient 1e-8.
    coef = [3.0, 1e-8, -2.0, 0.25, 9.0]
    rows = []
    for _ in range(300):
        x = [rng.gauss(5.0, 1.0) for _ in coef]
        rows.append(x + [sum(c * v for c, v in zip(coef, x)) + 1e-7 * rng.gauss(0, 1)])
    cases.append(case("no-intercept", "No intercept; five predictors around 5, one coefficient 1e-8; noise 1e-7.",
                      rows, ["u1", "u2", "u3", "u4", "u5"], False, False))

    # 5. Columns on scales from 1e-3 to 1e3, contributions alike, one true zero.
    scales = [1e-3, 1e-2, 0.1, 1.0, 10.0, 100.0, 1e3]
    coef = [1.0 / s for s in scales]
    coef[3] = 0.0
    rows = []
    for _ in range(600):
        x = [s * rng.random() for s in scales]
        rows.append(x + [7.0 + sum(c * v for c, v in zip(coef, x)) + 1e-3 * rng.gauss(0, 1)])
    cases.append(case("mixed-scales", "Seven predictors on scales 1e-3 to 1e3, equal contributions, one true zero; noise 1e-3.",
                      rows, [f"s{j + 1}" for j in range(len(scales))], True, False))

    # 6. Raw powers of x in [1, 2] (moderately ill-conditioned), the cubic's coefficient 0.
    rows = []
    for _ in range(250):
        x = 1.0 + rng.random()
        pw = [x, x * x, x * x * x, x * x * x * x]
        rows.append(pw + [1.0 - 2.0 * pw[0] + 0.5 * pw[1] + 0.0 * pw[2] + 0.125 * pw[3] + 1e-6 * rng.gauss(0, 1)])
    cases.append(case("raw-powers", "x, x^2, x^3, x^4 for x in [1, 2]; the cubic's coefficient 0; noise 1e-6.",
                      rows, ["x", "x2", "x3", "x4"], True, False))

    # 7. An aliased term: x3 = x1 + x2 exactly (small integers), near-zero coefficient beside it.
    rows = []
    for _ in range(200):
        x1 = float(rng.randint(0, 40))
        x2 = float(rng.randint(0, 40))
        x4 = rng.random()
        rows.append([x1, x2, x1 + x2, x4, 100.0 + 30.0 * x1 - 20.0 * x2 + 2e-6 * x4 + 1e-5 * rng.gauss(0, 1)])
    cases.append(case("aliased", "x3 = x1 + x2 exactly (aliased); x4's coefficient 2e-6 beside 30 and -20; noise 1e-5.",
                      rows, ["x1", "x2", "x3", "x4"], True, False, aliased=("x3",)))

    # 8. Large enough for the first pass to refine on its own (sums gathered as rows come):
    # 100,000 generated rows (not stored: the tests make the same doubles), true intercept 0.
    gen = {"seed": 20261113, "rows": 100000, "coefficients": [1.5, -2.25, 0.75, 3.0, -1.0, 0.5, 2.0, -0.25], "noise": 0.2}
    cases.append(case("generated-100k", "100,000 generated rows, eight uniform predictors, true intercept 0, noise uniform of width 0.2.",
                      generated_rows(gen), [f"g{j + 1}" for j in range(8)], True, False, generated=gen))

    # 9. Predictors far from zero (about 10^6 + a draw) and a response far from zero (about
    # 5*10^7), one true zero: the factor folds shifted columns, and every refinement path
    # (a pass of its own, sums gathered in the first pass, a refit from the previous
    # solution) must carry the intercept through the shift.
    gen = {"seed": 20261205, "rows": 4000, "coefficients": [1.5, 0.0, -2.0, 0.75, 3.0], "noise": 1e-4,
           "offset": 1e6, "constant": 5e7}
    cases.append(case("offset-columns", "4,000 generated rows, five predictors about 10^6, response about 5*10^7, one true zero, noise uniform of width 1e-4.",
                      generated_rows(gen), [f"o{j + 1}" for j in range(5)], True, False, generated=gen))

    # 10. Predictors far from zero whose effects cancel (y = x1 - x2 + ...): the response and
    # the folded intercept are small, while the shifts make the rounding of the slopes a large
    # error of the folded intercept.
    gen = {"seed": 20261206, "rows": 3000, "coefficients": [1.0, -1.0, 0.0, 0.5, -0.5], "noise": 1e-6, "offset": 1e6}
    cases.append(case("offset-cancelling", "3,000 generated rows, five predictors about 10^6 whose effects cancel (1, -1, 0, 0.5, -0.5), noise uniform of width 1e-6.",
                      generated_rows(gen), [f"k{j + 1}" for j in range(5)], True, False, generated=gen))

    with open(OUT, "w") as fh:
        json.dump({"generator": GENERATOR, "library": LIBRARY, "cases": cases}, fh, indent=1)
        fh.write("\n")
    print(f"wrote {OUT}: {len(cases)} cases")


if __name__ == "__main__":
    main()
