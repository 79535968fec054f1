// Reference: NIST/ITL StRD linear least-squares regression, certified values
// (test/fixtures/nist-strd). The double-double factor with refined solves must reach
// LRE ≥ 13 on every certified value, and the fast path's digit estimate must agree with
// the LRE it actually reaches within 2 digits.
import { describe, expect, it } from 'vitest';
import { Accumulator } from '../../src/fit/accumulator.js';
import { solve } from '../../src/fit/solve.js';
import { solveExtended } from '../../src/fit/solve-extended.js';
import type { FitSolution } from '../../src/fit/fit-solution.js';
import { toBlock } from '../support/fit-rows.js';
import { lre } from '../support/lre.js';
import { NIST_SETS, loadNistSet } from '../support/nist.js';
import type { NistSet } from '../support/nist.js';

function lres(set: NistSet, fit: FitSolution): number[] {
  const c = set.certified;
  return [
    ...c.parameters.map((p, i) => lre(fit.coefficients[i]!.estimate, p.estimate)),
    ...c.parameters.map((p, i) => lre(fit.coefficients[i]!.stdError, p.std_dev)),
    lre(fit.sigma, c.residual_std_dev),
    lre(fit.r2, c.r_squared),
    lre(fit.f, c.anova.f_statistic),
  ];
}

function fitWith(set: NistSet, precision: 'double' | 'double-double'): FitSolution {
  const shape = { terms: set.terms, response: 'y', intercept: set.intercept };
  if (precision === 'double') {
    const acc = new Accumulator(shape);
    acc.fold(toBlock(set.rows, set.terms.length + 1));
    return solve(acc);
  }
  // The decimal data and their powers arrive as (high, low) pairs, as numeric columns do.
  const acc = new Accumulator(shape, { precision, pairs: true });
  acc.fold(toBlock(set.pairRows, 2 * (set.terms.length + 1)));
  return solveExtended(acc);
}

describe('certified accuracy (NIST StRD certified values)', () => {
  const table: string[] = [];
  for (const name of NIST_SETS) {
    it(`${name}: the extended path reaches LRE ≥ 13 and says so within 2 digits; the fast estimate never promises more than it delivers`, () => {
      const set = loadNistSet(name);
      const ext = fitWith(set, 'double-double');
      const fast = fitWith(set, 'double');
      const extMin = Math.min(...lres(set, ext));
      const fastMin = Math.min(...lres(set, fast));
      table.push(
        `${name.padEnd(9)} extended ${extMin.toFixed(1).padStart(5)}  fast ${fastMin.toFixed(1).padStart(5)}  fast estimate ${fast.estimatedDigits!.toFixed(1).padStart(5)}`,
      );
      if (name === 'Wampler5') console.log(`minimum LRE by set\n${table.join('\n')}`);
      expect(ext.accuracy).toBe('extended');
      expect(extMin).toBeGreaterThanOrEqual(13);
      expect(Math.abs(ext.estimatedDigits! - extMin)).toBeLessThanOrEqual(2);
      // auto relies on this: a fast result whose estimate clears the bar really does.
      expect(fast.estimatedDigits!).toBeLessThanOrEqual(fastMin + 1);
    });
  }
});
