import { describe, expect, it } from 'vitest';
import { Accumulator } from '../../src/fit/accumulator.js';
import { FitInputError } from '../../src/fit/fit-input-error.js';
import { SegmentedFit } from '../../src/fit/segmented-fit.js';
import { rng } from '../support/synthetic.js';

// Interleaved segments: each block brings every segment a row or two, which SegmentedFit
// holds back and folds a few dozen at a time. The factors must equal those of each
// segment's rows folded on their own (up to rounding), and bad data must still be caught
// when its block arrives, naming the segment.

const shape = { terms: ['x1', 'x2', 'x3'], response: 'y', intercept: true };
const SEGMENTS = 300;

function interleavedBlocks(blocks: number, rows: number, seed: number) {
  const u = rng(seed);
  return Array.from({ length: blocks }, () => {
    const keys = new Int32Array(rows);
    const values = new Float64Array(rows * 4);
    for (let i = 0; i < rows; i++) {
      keys[i] = Math.floor(u() * SEGMENTS);
      for (let j = 0; j < 3; j++) values[i * 4 + j] = u() * 10 - 5;
      values[i * 4 + 3] = 1 + keys[i]! * 0.01 + values[i * 4]! - 2 * values[i * 4 + 1]! + (u() - 0.5);
    }
    return { rows, width: 4, values, keys };
  });
}

/** The first row (after row 100) whose segment already appeared earlier in the block. */
function laterRowOfSeenSegment(keys: Int32Array): number {
  const seen = new Set<number>();
  for (let i = 0; i < keys.length; i++) {
    if (i > 100 && seen.has(keys[i]!)) return i;
    seen.add(keys[i]!);
  }
  throw new Error('no such row');
}

const keyTable = Array.from({ length: SEGMENTS }, (_, k) => [String(k)]);

describe('SegmentedFit with interleaved segments', () => {
  it('gives each segment the factor of its own rows folded directly (1e-12 relative)', () => {
    const blocks = interleavedBlocks(40, 1000, 5);
    const fit = new SegmentedFit(shape, ['s']);
    for (const b of blocks) fit.consume(b, keyTable);
    const direct = Array.from({ length: SEGMENTS }, () => new Accumulator(shape));
    for (const b of blocks) for (let i = 0; i < b.rows; i++) direct[b.keys[i]!]!.fold(b, i, i + 1);
    const states = fit.states();
    expect(states).toHaveLength(SEGMENTS);
    let rows = 0;
    for (const s of states) {
      const ref = direct[Number(s.key[0])]!;
      expect(s.acc.rows).toBe(ref.rows);
      rows += s.acc.rows;
      // R is unique up to the signs of its rows: compare |R|.
      const a = s.acc.factor;
      const b = ref.factor;
      const scale = Math.max(...b.map(Math.abs));
      a.forEach((v, i) => expect(Math.abs(Math.abs(v) - Math.abs(b[i]!)) / scale).toBeLessThan(1e-12));
    }
    expect(rows).toBe(40_000);
  });

  it('a bad value in a held-back row fails when its block arrives, naming column and segment', () => {
    const [block] = interleavedBlocks(1, 500, 9);
    const fit = new SegmentedFit(shape, ['s']);
    // A row whose segment already had a row in this block: it takes the inline check.
    const bad = laterRowOfSeenSegment(block!.keys);
    block!.values[bad * 4 + 2] = Number.NaN;
    const seg = block!.keys[bad];
    let error: unknown;
    try {
      fit.consume(block!, keyTable);
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(FitInputError);
    expect((error as FitInputError).column).toBe('x3');
    expect((error as Error).message).toContain(`s=${seg}`);
  });

  it('a negative weight in a held-back row fails when its block arrives, naming the weight and segment', () => {
    const weighted = { ...shape, weight: 'w' };
    const [block] = interleavedBlocks(1, 500, 11);
    // Append a weight column of ones, then make one weight negative.
    const values = new Float64Array(500 * 5);
    for (let i = 0; i < 500; i++) {
      values.set(block!.values.subarray(i * 4, i * 4 + 4), i * 5);
      values[i * 5 + 4] = 1;
    }
    const bad = laterRowOfSeenSegment(block!.keys);
    values[bad * 5 + 4] = -2;
    const fit = new SegmentedFit(weighted, ['s']);
    expect(() => fit.consume({ rows: 500, width: 5, values, keys: block!.keys }, keyTable)).toThrow(
      new RegExp(`weight w is negative \\(-2\\).*s=${block!.keys[bad]}`),
    );
  });
});
