import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { Accumulator } from '../../src/fit/accumulator.js';
import type { DesignShape } from '../../src/fit/accumulator.js';
import { FitInputError } from '../../src/fit/fit-input-error.js';
import { solve } from '../../src/fit/solve.js';
import type { FitSolution } from '../../src/fit/fit-solution.js';
import { givensFoldRow } from '../../src/numeric/givens-fold.js';
import { packedLength } from '../../src/numeric/packed.js';
import { foldRows, toBlock } from '../support/fit-rows.js';
import { syntheticRows } from '../support/synthetic.js';

const P = 4;
const shape: DesignShape = { terms: ['a', 'b', 'c', 'd'], response: 'y', intercept: true, weight: 'w' };
const ROWS = syntheticRows(300, P, 7, true);

/** Relative difference of two solutions over estimates, standard errors and R². */
function maxRelDiff(a: FitSolution, b: FitSolution): number {
  let worst = Math.abs(a.r2! - b.r2!) / Math.abs(b.r2!);
  a.coefficients.forEach((c, i) => {
    const d = b.coefficients[i]!;
    worst = Math.max(worst, Math.abs(c.estimate! - d.estimate!) / Math.abs(d.estimate!));
    worst = Math.max(worst, Math.abs(c.stdError! - d.stdError!) / Math.abs(d.stdError!));
  });
  return worst;
}

/** |R| rows with a non-negative diagonal: R is unique up to the sign of each row. */
function normalisedFactor(n: number, r: Float64Array): number[] {
  const out: number[] = [];
  let k = 0;
  for (let i = 0; i < n; i++) {
    const sign = r[k]! < 0 ? -1 : 1;
    for (let j = i; j < n; j++) out.push(sign * r[k++]!);
  }
  return out;
}

describe('Accumulator fold and merge', () => {
  const whole = solve(foldRows(shape, ROWS));

  it('fold equals the row-at-a-time Givens reference (Gentleman 1973) to 1e-12', () => {
    const acc = foldRows(shape, ROWS);
    const n = acc.order;
    const ref = new Float64Array(packedLength(n));
    // The accumulator folds shifted columns (x − c, y − c_y, c the first row); so does the reference.
    const c = acc.shift!;
    expect(Array.from(c)).toEqual(ROWS[0]!.slice(0, P + 1));
    for (const row of ROWS) {
      const sw = Math.sqrt(row[P + 1]!);
      const scaled = Float64Array.from([sw, ...row.slice(0, P).map((v, j) => (v - c[j]!) * sw), (row[P]! - c[P]!) * sw]);
      givensFoldRow(n, ref, scaled);
    }
    const a = normalisedFactor(n, acc.factor);
    const b = normalisedFactor(n, ref);
    const scale = Math.max(...b.map(Math.abs));
    a.forEach((v, i) => expect(Math.abs(v - b[i]!) / scale).toBeLessThan(1e-12));
  });

  it('any cut into blocks and partitions, merged in any order, gives the same fit (1e-10)', () => {
    fc.assert(
      fc.property(
        fc.array(fc.integer({ min: 1, max: 299 }), { maxLength: 12 }),
        fc.array(fc.integer({ min: 0, max: 5 }), { minLength: 1, maxLength: 6 }),
        fc.integer({ min: 0, max: 1000 }),
        (cuts, partitionOf, seed) => {
          const bounds = [...new Set([0, ...cuts, ROWS.length])].sort((x, y) => x - y);
          const parts = new Map<number, Accumulator>();
          const block = toBlock(ROWS, P + 2);
          for (let i = 0; i + 1 < bounds.length; i++) {
            const key = partitionOf[i % partitionOf.length]!;
            let acc = parts.get(key);
            if (!acc) parts.set(key, (acc = new Accumulator(shape)));
            acc.fold(block, bounds[i]!, bounds[i + 1]!);
          }
          // Merge the partials in an order drawn from the seed, as a tree of pairs.
          let list = [...parts.values()];
          let s = seed;
          while (list.length > 1) {
            const i = s % list.length;
            const j = (i + 1 + ((s >> 3) % (list.length - 1))) % list.length;
            list[i]!.merge(list[j]!);
            list = list.filter((_, k) => k !== j);
            s = (s * 31 + 7) % 10007;
          }
          const fit = solve(list[0]!);
          expect(fit.rows).toBe(ROWS.length);
          expect(maxRelDiff(fit, whole)).toBeLessThan(1e-10);
        },
      ),
      { numRuns: 200 },
    );
  });

  it('row order does not matter (1e-10)', () => {
    fc.assert(
      fc.property(fc.array(fc.nat(), { minLength: ROWS.length, maxLength: ROWS.length }), (keys) => {
        const order = ROWS.map((r, i) => [keys[i]!, r] as const).sort((x, y) => x[0] - y[0]).map(([, r]) => r);
        expect(maxRelDiff(solve(foldRows(shape, order)), whole)).toBeLessThan(1e-10);
      }),
      { numRuns: 50 },
    );
  });

  it('state() round-trips through mergeState and clone', () => {
    const a = foldRows(shape, ROWS.slice(0, 100));
    const b = foldRows(shape, ROWS.slice(100));
    const c = new Accumulator(shape);
    c.mergeState(a.state());
    c.mergeState(b.state());
    expect(maxRelDiff(solve(c), whole)).toBeLessThan(1e-10);
    expect(maxRelDiff(solve(c.clone()), whole)).toBeLessThan(1e-12);
    expect(c.sumWeights).toBeCloseTo(ROWS.reduce((s, r) => s + r[P + 1]!, 0), 9);
  });

  it('refuses to merge a factor of another shape', () => {
    const other = new Accumulator({ terms: ['a'], response: 'y', intercept: true });
    expect(() => new Accumulator(shape).merge(other)).toThrow(/order 3 into one of order 6/);
  });
});

describe('Accumulator input checks', () => {
  const bad = (row: number[]) => () => new Accumulator(shape).fold(toBlock([ROWS[0]!, row], P + 2));

  it.each([
    [Number.NaN, 'a', 'term a is NaN'],
    [Number.POSITIVE_INFINITY, 'c', 'term c is Infinity'],
  ])('names the column of a non-finite value (%s)', (value, col, message) => {
    const row = [...ROWS[1]!];
    row[shape.terms.indexOf(col)] = value;
    expect(bad(row)).toThrow(message);
    try {
      bad(row)();
    } catch (e) {
      expect(e).toBeInstanceOf(FitInputError);
      expect((e as FitInputError).column).toBe(col);
    }
  });

  it('names the response when it is -Infinity', () => {
    const row = [...ROWS[1]!];
    row[P] = Number.NEGATIVE_INFINITY;
    expect(bad(row)).toThrow('response y is -Infinity in row 1');
  });

  it('rejects a negative weight and names the weight column and segment', () => {
    const row = [...ROWS[1]!];
    row[P + 1] = -0.5;
    const acc = new Accumulator(shape, { label: 'feeder=F07' });
    expect(() => acc.fold(toBlock([row], P + 2))).toThrow('weight w is negative (-0.5) in row 0 of the block in segment feeder=F07');
  });

  it('leaves the accumulator unchanged when a block holds a bad row', () => {
    const acc = foldRows(shape, ROWS.slice(0, 50));
    const before = acc.state();
    const rows = ROWS.slice(50, 60).map((r) => [...r]);
    rows[7]![2] = Number.NaN;
    expect(() => acc.fold(toBlock(rows, P + 2))).toThrow(/term c is NaN/);
    expect(acc.state()).toEqual(before);
  });

  it('rejects a block of the wrong width, naming the expected columns', () => {
    expect(() => new Accumulator(shape).fold(toBlock([[1, 2, 3]], 3))).toThrow('needs 6 (a, b, c, d, y, w)');
  });

  it('counts zero-weight rows and leaves them out', () => {
    const rows = ROWS.map((r, i) => (i % 3 === 0 ? [...r.slice(0, P + 1), 0] : r));
    const acc = foldRows(shape, rows);
    expect(acc.zeroWeightRows).toBe(100);
    expect(acc.rows).toBe(200);
    const kept = foldRows(shape, rows.filter((r) => r[P + 1] !== 0));
    expect(maxRelDiff(solve(acc), solve(kept))).toBeLessThan(1e-12);
  });
});
