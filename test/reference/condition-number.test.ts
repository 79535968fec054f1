// Reference: numpy's np.linalg.cond of the column-scaled design (fixture made by
// scripts/make-condition-fixtures.py; numpy version recorded in the fixture, 2.4.6 when
// made). The published condition number is that of the design as given, on every path,
// whatever the order of the rows.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { Accumulator } from '../../src/fit/accumulator.js';
import type { FitSolution } from '../../src/fit/fit-solution.js';
import { solve } from '../../src/fit/solve.js';
import { solveExtended } from '../../src/fit/solve-extended.js';
import { toBlock } from '../support/fit-rows.js';

interface ConditionCase {
  name: string;
  intercept: boolean;
  weighted: boolean;
  terms: string[];
  rows: number[][];
  cond: number;
  cond_reversed: number;
}

const fixture = JSON.parse(readFileSync(new URL('../fixtures/reference/condition-cases.json', import.meta.url), 'utf8')) as {
  library: string;
  cases: ConditionCase[];
};

function fit(c: ConditionCase, rows: number[][], path: 'qr' | 'normal' | 'double-double'): FitSolution {
  const shape = { terms: c.terms, response: 'y', intercept: c.intercept, ...(c.weighted ? { weight: 'w' } : {}) };
  const acc =
    path === 'double-double'
      ? new Accumulator(shape, { precision: 'double-double' })
      : new Accumulator(shape, { method: path });
  acc.fold(toBlock(rows, acc.blockWidth));
  return path === 'double-double' ? solveExtended(acc) : solve(acc);
}

describe(`condition number of the column-scaled design (reference: ${fixture.library}, np.linalg.cond)`, () => {
  for (const c of fixture.cases) {
    it(`${c.name}: equals numpy's on the qr, normal and double-double paths, rows in either order`, () => {
      const reversed = [...c.rows].reverse();
      // The normal equations square the condition number, so their factor carries about
      // κ²·ε of relative error; the QR paths about κ·ε (both against numpy's own, which
      // agrees with itself across the two orders to the same order).
      for (const path of ['qr', 'normal', 'double-double'] as const) {
        const tolerance = path === 'normal' ? Math.max(1e-9, 1e2 * c.cond ** 2 * Number.EPSILON) : Math.max(1e-10, 1e2 * c.cond * Number.EPSILON);
        for (const [rows, want] of [
          [c.rows, c.cond],
          [reversed, c.cond_reversed],
        ] as const) {
          const got = fit(c, rows, path).condition!;
          expect(Math.abs(got - want) / want, `${path}: ${got} against ${want}`).toBeLessThan(tolerance);
        }
      }
    });
  }

  it('regression (issue 11): the same rows in reverse order give the same condition number on the shifted qr path', () => {
    const c = fixture.cases.find((x) => x.name === 'year-quadratic')!;
    const forward = fit(c, c.rows, 'qr').condition!;
    const backward = fit(c, [...c.rows].reverse(), 'qr').condition!;
    expect(Math.abs(forward - backward) / forward).toBeLessThan(1e-9);
    // The columns as folded (shifted by the first row) are far better conditioned than the
    // design as given: reporting theirs was the bug.
    expect(forward).toBeGreaterThan(1e5);
  });
});
