import { describe, expect, it } from 'vitest';
import { solve } from '../../src/fit/solve.js';
import { foldRows } from '../support/fit-rows.js';
import { syntheticRows } from '../support/synthetic.js';

const BASE = syntheticRows(120, 3, 11); // [a, b, c, y]

function expectSameCoefficients(
  got: ReturnType<typeof solve>,
  want: ReturnType<typeof solve>,
  rel = 1e-10,
): void {
  for (const w of want.coefficients) {
    const g = got.coefficients.find((c) => c.term === w.term)!;
    for (const key of ['estimate', 'stdError', 'p', 'vif'] as const) {
      const a = g[key];
      const b = w[key];
      if (b === null) expect(a).toBeNull();
      else expect(Math.abs(a! - b) / Math.abs(b)).toBeLessThan(rel);
    }
  }
  expect(Math.abs(got.r2! - want.r2!)).toBeLessThan(1e-12);
  expect(got.dfResidual).toBe(want.dfResidual);
}

describe('rank deficiency', () => {
  const reduced = solve(foldRows({ terms: ['a', 'b', 'c'], response: 'y', intercept: true }, BASE));

  it('a duplicated column is aliased; the rest is the reduced model', () => {
    const rows = BASE.map(([a, b, c, y]) => [a!, b!, a!, c!, y!]);
    const fit = solve(foldRows({ terms: ['a', 'b', 'a_again', 'c'], response: 'y', intercept: true }, rows));
    expect(fit.status).toBe('ok');
    expect(fit.aliased).toEqual(['a_again']);
    expect(fit.rank).toBe(4);
    const dup = fit.coefficients.find((c) => c.term === 'a_again')!;
    expect(dup).toMatchObject({ aliased: true, estimate: null, stdError: null, vif: null });
    expect(fit.notes.join(' ')).toContain('a_again');
    expectSameCoefficients(fit, reduced);
  });

  it('a column that is the sum of two others is aliased (the later one)', () => {
    // Small integers so the sum is exact and the dependence exact.
    const rows = BASE.map(([a, b, c, y]) => {
      const ia = Math.round(a! * 10);
      const ib = Math.round(b! * 10);
      return [ia, ib, ia + ib, c!, y!];
    });
    const fit = solve(foldRows({ terms: ['ia', 'ib', 'sum', 'c'], response: 'y', intercept: true }, rows));
    expect(fit.aliased).toEqual(['sum']);
    const ref = solve(foldRows({ terms: ['ia', 'ib', 'c'], response: 'y', intercept: true }, rows.map(([a, b, , c, y]) => [a!, b!, c!, y!])));
    expectSameCoefficients(fit, ref);
  });

  it('a column of zeros is aliased whatever the scale of the others', () => {
    const rows = BASE.map(([a, b, , y]) => [a! * 1e12, 0, b! * 1e-9, y!]);
    const fit = solve(foldRows({ terms: ['big', 'zero', 'tiny'], response: 'y', intercept: true }, rows));
    expect(fit.aliased).toEqual(['zero']);
    expect(fit.coefficients.find((c) => c.term === 'tiny')!.estimate).not.toBeNull();
  });
});

describe('edge cases', () => {
  it('no residual degrees of freedom: estimates, no inference, and it says so', () => {
    const rows = [
      [1, 2, 3],
      [2, 1, 5],
      [4, 7, 2],
    ];
    const fit = solve(foldRows({ terms: ['a', 'b'], response: 'y', intercept: true }, rows));
    expect(fit.status).toBe('no_residual_df');
    expect(fit.dfResidual).toBe(0);
    expect(fit.notes.join(' ')).toMatch(/no residual degrees of freedom/);
    // Exact solution of the 3×3 system y = b0 + b1·a + b2·b.
    const [b0, b1, b2] = fit.coefficients.map((c) => c.estimate!);
    rows.forEach(([a, b, y]) => expect(b0! + b1! * a! + b2! * b!).toBeCloseTo(y!, 10));
    for (const c of fit.coefficients) expect(c).toMatchObject({ stdError: null, t: null, p: null, ciLow: null });
    expect(fit.sigma).toBeNull();
    expect(fit.f).toBeNull();
  });

  it('fewer rows than coefficients: nothing estimated, a note that says why', () => {
    const fit = solve(foldRows({ terms: ['a', 'b', 'c'], response: 'y', intercept: true }, BASE.slice(0, 3)));
    expect(fit.status).toBe('too_few_rows');
    expect(fit.notes[0]).toBe('too few rows: 3 rows for 4 coefficients');
    expect(fit.coefficients.every((c) => c.estimate === null)).toBe(true);
  });

  it('all weights zero: no rows, and the note says the weights were all zero', () => {
    const rows = BASE.map(([a, , , y]) => [a!, y!, 0]);
    const fit = solve(foldRows({ terms: ['a'], response: 'y', intercept: true, weight: 'w' }, rows));
    expect(fit.status).toBe('no_rows');
    expect(fit.zeroWeightRows).toBe(BASE.length);
    expect(fit.notes[0]).toBe(`no rows to fit: all ${BASE.length} rows have weight 0`);
  });

  it('intercept-only model: the estimate is the (weighted) mean and its standard error', () => {
    const rows = BASE.map(([, , , y], i) => [y!, 1 + (i % 4)]);
    const fit = solve(foldRows({ terms: [], response: 'y', intercept: true, weight: 'w' }, rows));
    const sw = rows.reduce((s, r) => s + r[1]!, 0);
    const mean = rows.reduce((s, r) => s + r[0]! * r[1]!, 0) / sw;
    const rss = rows.reduce((s, r) => s + r[1]! * (r[0]! - mean) ** 2, 0);
    const c = fit.coefficients[0]!;
    expect(c.term).toBe('intercept');
    expect(Math.abs(c.estimate! - mean) / Math.abs(mean)).toBeLessThan(1e-13);
    expect(Math.abs(c.stdError! - Math.sqrt(rss / (rows.length - 1) / sw)) / c.stdError!).toBeLessThan(1e-12);
    expect(fit.r2).toBe(0);
    expect(fit.f).toBeNull();
    expect(c.vif).toBeNull();
  });

  it('tiny p-values stay positive instead of rounding to 0', () => {
    // t near 600 on 118 df: p is about 1e-200, far below ε yet well above underflow.
    const rows = BASE.map(([a, , c]) => [a!, 3 * a! + (0.05 * (c! - 2)) / 3]);
    const fit = solve(foldRows({ terms: ['a'], response: 'y', intercept: true }, rows));
    const p = fit.coefficients[1]!.p!;
    expect(p).toBeGreaterThan(0);
    expect(p).toBeLessThan(1e-100);
  });

  it('rejects a confidence level outside (0, 1)', () => {
    const acc = foldRows({ terms: ['a'], response: 'y', intercept: true }, BASE.map(([a, , , y]) => [a!, y!]));
    expect(() => solve(acc, { confidence: 1 })).toThrow(/confidence must be between 0 and 1/);
  });
});
