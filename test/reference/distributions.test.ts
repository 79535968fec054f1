// Reference: scipy 1.17.1 (scipy.stats t.sf, t.ppf, f.sf, chi2.sf), values committed in
// test/fixtures/reference/distributions.json by scripts/make-reference-fixtures.py.
import { readFileSync } from 'node:fs';
import { describe, it } from 'vitest';
import { chiSquareUpper, fUpper, tQuantile, tTwoSided, tUpper } from '../../src/numeric/distributions.js';
import { expectClose } from '../support/close.js';

const fx = JSON.parse(readFileSync(new URL('../fixtures/reference/distributions.json', import.meta.url), 'utf8')) as {
  library: string;
  t_sf: [number, number, number][];
  t_ppf: [number, number, number][];
  f_sf: [number, number, number, number][];
  chi2_sf: [number, number, number][];
};

describe(`distribution tails against ${fx.library}`, () => {
  it('t upper tail, including tails far below ε (no 1 − cdf cancellation)', () => {
    for (const [x, df, v] of fx.t_sf) {
      expectClose(tUpper(x, df), v, 1e-10, `t.sf(${x}, ${df})`);
      if (x > 0) expectClose(tTwoSided(x, df), 2 * v, 1e-10, `2·t.sf(${x}, ${df})`);
    }
  });
  it('t quantiles', () => {
    for (const [q, df, v] of fx.t_ppf) expectClose(tQuantile(q, df), v, 1e-10, `t.ppf(${q}, ${df})`, 1e-15);
  });
  it('F upper tail (scipy itself is good to ~3e-11 at df2 = 1e6, hence 1e-10)', () => {
    for (const [x, d1, d2, v] of fx.f_sf) expectClose(fUpper(x, d1, d2), v, 1e-10, `f.sf(${x}, ${d1}, ${d2})`);
  });
  it('χ² upper tail', () => {
    for (const [x, df, v] of fx.chi2_sf) expectClose(chiSquareUpper(x, df), v, 1e-10, `chi2.sf(${x}, ${df})`);
  });
});
