import { describe, expect, it } from 'vitest';
import { ModelScorer } from '../../src/fit/scoring-model.js';
import type { RowScore } from '../../src/fit/scoring-model.js';
import { tQuantile } from '../../src/numeric/distributions.js';
import { CopyBinaryWriter } from '../../src/source/copy-binary-writer.js';
import { ScoreRowDecoder } from '../../src/source/score-row-decoder.js';
import type { ScoreRow } from '../../src/source/score-row-decoder.js';
import { packCovariance } from '../../src/store/insert-covariances.js';

/** A binary COPY stream of rows (int4 passed through, text, two float8) made by the writer. */
function stream(rows: readonly [number, string | null, number | null, number][]): Uint8Array {
  const w = new CopyBinaryWriter(4, 16);
  const int4 = new Uint8Array(4);
  for (const [id, key, a, b] of rows) {
    w.beginRow();
    new DataView(int4.buffer).setInt32(0, id);
    w.raw(int4, 0, 4);
    if (key === null) w.nullField();
    else w.text(key);
    w.float8OrNull(a === null ? NaN : a);
    w.float8OrNull(b);
  }
  return w.take();
}

function decodeAll(bytes: Uint8Array, cuts: readonly number[]): unknown[] {
  const d = new ScoreRowDecoder({ passThrough: 1, texts: 1, floats: 2 });
  const out: unknown[] = [];
  const onRow = (r: ScoreRow) =>
    out.push([r.passLength[0] === 4 ? r.bytes.readInt32BE(r.passStart[0]!) : null, r.texts[0], r.isNull[0] ? null : r.values[0], r.values[1]]);
  let at = 0;
  for (const cut of [...cuts, bytes.length]) {
    d.write({ bytes, ranges: Int32Array.of(at, cut), count: 1 }, onRow);
    at = cut;
  }
  d.end();
  return out;
}

describe('scoring codec: binary COPY rows out and in', () => {
  const rows: [number, string | null, number | null, number][] = [
    [1, '["F01"]', 1.5, -0],
    [2, null, null, 1e300],
    [3, '["Zürich, feeder ☃"]', -2.25, Number.MIN_VALUE],
  ];
  const bytes = stream(rows);

  it('reads back what the writer wrote, NULLs and non-ASCII text included', () => {
    expect(decodeAll(bytes, [])).toEqual(rows);
  });

  it('gives the same rows however the stream is cut (every single cut, and one-byte pieces)', () => {
    for (let cut = 0; cut <= bytes.length; cut++) expect(decodeAll(bytes, [cut])).toEqual(rows);
    expect(decodeAll(bytes, Array.from({ length: bytes.length - 1 }, (_, i) => i + 1))).toEqual(rows);
  });

  it('fails on a stream without its trailer, and on a row of the wrong width', () => {
    const d = new ScoreRowDecoder({ passThrough: 1, texts: 1, floats: 2 });
    d.write({ bytes: bytes.subarray(0, bytes.length - 2), ranges: Int32Array.of(0, bytes.length - 2), count: 1 }, () => {});
    expect(() => d.end()).toThrow(/without its trailer/);
    const narrow = new ScoreRowDecoder({ passThrough: 1, texts: 1, floats: 1 });
    expect(() => narrow.write({ bytes, ranges: Int32Array.of(0, bytes.length), count: 1 }, () => {})).toThrow(/4 fields, expected 3/);
  });
});

describe('ModelScorer', () => {
  // Intercept, x1 (aliased, left out), x2: the covariance is over (intercept, x2).
  const cov = [
    [0.5, -0.1],
    [-0.1, 0.04],
  ];
  const model = {
    runId: 7,
    segmentKey: '',
    segment: null,
    terms: ['intercept', 'x1', 'x2'],
    estimates: Float64Array.of(2, 0, 3),
    kept: Int32Array.of(0, 2),
    covariance: Float64Array.of(0.5, -0.1, 0.04),
    sigma: 1.5,
    dfResidual: 12,
  };
  const out: RowScore = { prediction: 0, predictionSe: 0, intervalLow: 0, intervalHigh: 0 };

  it('gives x·b, √(xᵀCx) and x·b ± t·√(σ² + xᵀCx), the aliased term counting nothing', () => {
    new ModelScorer(model, 0.9).score(Float64Array.of(1, 1000, 4), out);
    expect(out.prediction).toBe(2 + 3 * 4);
    const q = cov[0]![0]! + 2 * cov[0]![1]! * 4 + cov[1]![1]! * 16;
    expect(out.predictionSe).toBeCloseTo(Math.sqrt(q), 15);
    const half = tQuantile(0.95, 12) * Math.sqrt(1.5 ** 2 + q);
    expect(out.intervalLow).toBeCloseTo(14 - half, 12);
    expect(out.intervalHigh).toBeCloseTo(14 + half, 12);
  });

  it('gives the prediction alone (NaN for the rest) without inference', () => {
    new ModelScorer({ ...model, covariance: null, sigma: null, dfResidual: 0 }, 0.9).score(Float64Array.of(1, 0, 1), out);
    expect(out.prediction).toBe(5);
    expect(out.predictionSe).toBeNaN();
    expect(out.intervalLow).toBeNaN();
  });

  it('rejects a level outside (0, 1)', () => {
    expect(() => new ModelScorer(model, 1)).toThrow(/strictly between 0 and 1/);
  });
});

describe('packCovariance', () => {
  it('packs the upper triangle in kept-term order with each term index', () => {
    const solution = {
      covariance: Float64Array.of(1, 2, 3, 2, 5, 6, 3, 6, 9),
      keptTerms: ['intercept', 'b', 'd'],
      coefficients: ['intercept', 'b', 'c', 'd'].map((term) => ({ term })),
    } as unknown as Parameters<typeof packCovariance>[0];
    const packed = packCovariance(solution)!;
    expect(packed.termIndex).toEqual([0, 1, 3]);
    expect(Array.from(packed.packed)).toEqual([1, 2, 3, 5, 6, 9]);
  });
});
