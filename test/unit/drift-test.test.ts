import { describe, expect, it } from 'vitest';
import { Accumulator } from '../../src/fit/accumulator.js';
import { DRIFT_LEVEL, driftTest } from '../../src/fit/drift-test.js';
import { solve } from '../../src/fit/solve.js';
import { fUpper } from '../../src/numeric/distributions.js';

// Issue 5, drift: y = 1 + (2 + shift)·x1 − 0.5·x2 + N(0, 1), x1 ~ U(0, 10), x2 ~ U(−2, 2);
// 200 rows before, 100 after, 2,000 replications per case with a fixed seed.
const shape = { terms: ['x1', 'x2'], response: 'y', intercept: true };

function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

function rows(next: () => number, n: number, shift: number): Float64Array {
  const v = new Float64Array(n * 3);
  for (let i = 0; i < n; i++) {
    const x1 = next() * 10;
    const x2 = next() * 4 - 2;
    const e = Math.sqrt(-2 * Math.log(1 - next())) * Math.cos(2 * Math.PI * next());
    v.set([x1, x2, 1 + (2 + shift) * x1 - 0.5 * x2 + e], i * 3);
  }
  return v;
}

function fold(values: Float64Array): Accumulator {
  const acc = new Accumulator(shape);
  acc.fold({ rows: values.length / 3, width: 3, values });
  return acc;
}

function rates(shift: number, newRows: number, seed: number) {
  const next = rng(seed);
  let flagged = 0;
  let chowRejects = 0;
  let termFlags = 0;
  const reps = 2000;
  for (let r = 0; r < reps; r++) {
    const d = driftTest(fold(rows(next, 200, 0)), fold(rows(next, newRows, shift)));
    if (d.flagged) flagged++;
    if (d.fP !== null && d.fP < DRIFT_LEVEL) chowRejects++;
    if (d.flaggedTerms.length > 0) termFlags++;
  }
  return { flagged: flagged / reps, chow: chowRejects / reps, terms: termFlags / reps };
}

describe('driftTest', () => {
  it('stays quiet without a break: false flags at most 2 · level (0.02) per segment', () => {
    const r = rates(0, 100, 1);
    console.log(`no break: flagged ${r.flagged}, Chow rejects ${r.chow}, a term flagged ${r.terms} (level ${DRIFT_LEVEL})`);
    // Binomial(2000, 0.01) has sd 0.0022: each test near its level, the union below 2·level.
    expect(r.chow).toBeGreaterThan(0.003);
    expect(r.chow).toBeLessThan(0.018);
    expect(r.terms).toBeLessThan(0.018);
    expect(r.flagged).toBeLessThan(0.03);
  });

  it('fires on a break: x1 up by 0.3 (about 7 standard errors of the difference) is flagged every time', () => {
    const r = rates(0.3, 100, 2);
    console.log(`break of 0.3: flagged ${r.flagged}, Chow rejects ${r.chow}, a term flagged ${r.terms}`);
    expect(r.flagged).toBe(1);
    expect(r.terms).toBe(1);
  });

  it('with fewer new rows than coefficients, takes Chow’s predictive test', () => {
    const next = rng(3);
    const quiet = driftTest(fold(rows(next, 200, 0)), fold(rows(next, 2, 0)));
    expect(quiet.test).toBe('chow_predictive');
    expect([quiet.fDf1, quiet.fDf2]).toEqual([2, 197]);
    expect(quiet.termChanges).toEqual([]);
    const broken = driftTest(fold(rows(next, 200, 0)), fold(rows(next, 2, 3)));
    expect(broken.fP!).toBeLessThan(1e-6);
    expect(broken.flagged).toBe(true);
  });

  it('computes Chow’s F from the factors as from separate fits over the raw rows', () => {
    const next = rng(4);
    const a = rows(next, 150, 0);
    const b = rows(next, 80, 0.05);
    const both = new Float64Array(a.length + b.length);
    both.set(a);
    both.set(b, a.length);
    const rss = (v: Float64Array) => solve(fold(v)).rss!;
    const k = 3;
    const f = ((rss(both) - rss(a) - rss(b)) / k) / ((rss(a) + rss(b)) / (230 - 2 * k));
    const d = driftTest(fold(a), fold(b));
    expect(d.test).toBe('chow');
    expect(Math.abs(d.f! - f) / f).toBeLessThan(1e-9);
    expect(d.fP).toBeCloseTo(fUpper(f, k, 230 - 2 * k), 12);
    expect(d.zCritical).toBeCloseTo(2.9352, 4); // Φ⁻¹(1 − 0.01 / 6)
  });
});
