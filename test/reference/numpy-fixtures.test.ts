// Reference: fixtures computed with numpy 2.4.6 and scipy 1.17.1 by
// scripts/make-reference-fixtures.py (committed in test/fixtures/reference/ols-cases.json).
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { solve } from '../../src/fit/solve.js';
import { expectClose } from '../support/close.js';
import { foldRows } from '../support/fit-rows.js';
import type { ReferenceExpected } from '../support/reference-case.js';

type Expected = ReferenceExpected;
interface Case {
  name: string;
  intercept: boolean;
  weighted: boolean;
  confidence: number;
  terms: string[];
  rows: number[][];
  expected: Expected;
}

const fixture = JSON.parse(
  readFileSync(new URL('../fixtures/reference/ols-cases.json', import.meta.url), 'utf8'),
) as { library: string; cases: Case[] };

const REL = 1e-9;

describe(`engine against ${fixture.library} (scripts/make-reference-fixtures.py)`, () => {
  for (const c of fixture.cases) {
    it(`${c.name}: estimates, standard errors, p, R², F, AIC, BIC, VIF to 1e-9 relative`, () => {
      const acc = foldRows(
        { terms: c.terms, response: 'y', intercept: c.intercept, weight: c.weighted ? 'w' : undefined },
        c.rows,
      );
      const fit = solve(acc, { confidence: c.confidence });
      const e = c.expected;
      expect(fit.status).toBe('ok');
      expect(fit.rank).toBe(e.rank);
      expect(fit.aliased).toEqual(e.aliased);
      expect(fit.rows).toBe(e.n);
      expect(fit.dfResidual).toBe(e.df_residual);
      expectClose(fit.rss, e.rss, REL, 'rss');
      expectClose(fit.sigma, e.sigma, REL, 'sigma');
      expectClose(fit.r2, e.r2, REL, 'r2', 1e-15);
      expectClose(fit.r2Adjusted, e.r2_adjusted, REL, 'r2_adjusted', 1e-15);
      expectClose(fit.f, e.f, REL, 'f');
      expectClose(fit.fP, e.f_p, REL, 'f_p');
      expectClose(fit.logLik, e.loglik, REL, 'loglik');
      expectClose(fit.aic, e.aic, REL, 'aic');
      expectClose(fit.bic, e.bic, REL, 'bic');
      expect(fit.coefficients.map((x) => x.term)).toEqual(e.coefficients.map((x) => x.term));
      e.coefficients.forEach((x, i) => {
        const got = fit.coefficients[i]!;
        expect(got.aliased, x.term).toBe(x.aliased);
        expectClose(got.estimate, x.estimate, REL, `${x.term} estimate`);
        expectClose(got.stdError, x.std_error, REL, `${x.term} std_error`);
        expectClose(got.t, x.t, REL, `${x.term} t`);
        expectClose(got.p, x.p, REL, `${x.term} p`);
        expectClose(got.ciLow, x.ci_low, REL, `${x.term} ci_low`);
        expectClose(got.ciHigh, x.ci_high, REL, `${x.term} ci_high`);
        expectClose(got.vif, x.vif, REL, `${x.term} vif`);
      });
    });
  }
});
