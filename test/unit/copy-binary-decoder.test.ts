import { readFileSync } from 'node:fs';

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';

import {
  CopyBinaryDecoder,
  CopyDecodeError,
  type CopyBinaryDecoderOptions,
  type DecodedBlock,
} from '../../src/source/copy-binary-decoder.js';

// ---------------------------------------------------------------------------
// Test-side encoder for the binary COPY format.

const SIGNATURE = [0x50, 0x47, 0x43, 0x4f, 0x50, 0x59, 0x0a, 0xff, 0x0d, 0x0a, 0x00];

/** One field: raw bytes, or null for SQL NULL. */
type Field = Uint8Array | null;

const utf8 = new TextEncoder();

function text(s: string): Uint8Array {
  return utf8.encode(s);
}

function float8(x: number): Uint8Array {
  const out = new Uint8Array(8);
  new DataView(out.buffer).setFloat64(0, x, false);
  return out;
}

/** The fields of a design tuple: K text keys then V float8 values. */
function tuple(keys: readonly (string | null)[], values: readonly (number | null)[]): Field[] {
  return [...keys.map((k) => (k === null ? null : text(k))), ...values.map((v) => (v === null ? null : float8(v)))];
}

interface StreamSpec {
  tuples: readonly (readonly Field[])[];
  flags?: number;
  extension?: Uint8Array;
  /** Whether to end with the trailer (field count -1); default true. */
  trailer?: boolean;
}

function encode({ tuples, flags = 0, extension = new Uint8Array(0), trailer = true }: StreamSpec): Uint8Array {
  const parts: number[] = [...SIGNATURE];
  const int16 = (n: number): void => {
    parts.push((n >> 8) & 0xff, n & 0xff);
  };
  const int32 = (n: number): void => {
    parts.push((n >>> 24) & 0xff, (n >>> 16) & 0xff, (n >>> 8) & 0xff, n & 0xff);
  };
  int32(flags);
  int32(extension.length);
  parts.push(...extension);
  for (const fields of tuples) {
    int16(fields.length);
    for (const f of fields) {
      if (f === null) {
        int32(-1);
      } else {
        int32(f.length);
        parts.push(...f);
      }
    }
  }
  if (trailer) int16(-1);
  return Uint8Array.from(parts);
}

function concat(...arrays: Uint8Array[]): Uint8Array {
  const out = new Uint8Array(arrays.reduce((n, a) => n + a.length, 0));
  let p = 0;
  for (const a of arrays) {
    out.set(a, p);
    p += a.length;
  }
  return out;
}

// ---------------------------------------------------------------------------
// Running the decoder and snapshotting everything it produced.

interface BlockSnapshot {
  rows: number;
  width: number;
  /** Values as hex float64 bit patterns, so -0 and NaN compare exactly. */
  bits: string[];
  keys: number[];
}

interface Snapshot {
  blocks: BlockSnapshot[];
  keyTable: (string | null)[][];
  rowsRead: number;
  rowsEmitted: number;
  rowsSkippedNull: number;
  rowsSkippedNonFinite: number;
  nullCounts: number[];
  nonFiniteCounts: number[];
}

type Outcome = { ok: Snapshot } | { error: string; column: string | undefined };

function bitsOf(x: number): string {
  const view = new DataView(new ArrayBuffer(8));
  view.setFloat64(0, x);
  return view.getBigUint64(0).toString(16).padStart(16, '0');
}

function snapshotBlock(block: DecodedBlock): BlockSnapshot {
  const n = block.rows * block.width;
  return {
    rows: block.rows,
    width: block.width,
    bits: Array.from(block.values.subarray(0, n), bitsOf),
    keys: Array.from(block.keys.subarray(0, block.rows)),
  };
}

/**
 * Feeds `chunks` to a fresh decoder. Each chunk is copied into a larger buffer at a non-zero
 * offset (as pooled Node Buffers are), and scribbled over after `write` returns, to catch a
 * decoder that ignores byteOffset or keeps references to caller bytes.
 */
function run(options: CopyBinaryDecoderOptions, chunks: Iterable<Uint8Array>): Outcome {
  const decoder = new CopyBinaryDecoder(options);
  const blocks: BlockSnapshot[] = [];
  const onBlock = (b: DecodedBlock): void => {
    blocks.push(snapshotBlock(b));
  };
  try {
    for (const chunk of chunks) {
      const backing = new Uint8Array(chunk.length + 5);
      backing.set(chunk, 3);
      decoder.write(backing.subarray(3, 3 + chunk.length), onBlock);
      backing.fill(0xa5);
    }
    decoder.end(onBlock);
  } catch (error) {
    if (!(error instanceof CopyDecodeError)) throw error;
    return { error: error.message, column: error.column };
  }
  return {
    ok: {
      blocks,
      keyTable: decoder.keyTable.map((k) => [...k]),
      rowsRead: decoder.rowsRead,
      rowsEmitted: decoder.rowsEmitted,
      rowsSkippedNull: decoder.rowsSkippedNull,
      rowsSkippedNonFinite: decoder.rowsSkippedNonFinite,
      nullCounts: [...decoder.nullCounts],
      nonFiniteCounts: [...decoder.nonFiniteCounts],
    },
  };
}

function decodeOk(options: CopyBinaryDecoderOptions, bytes: Uint8Array): Snapshot {
  const outcome = run(options, [bytes]);
  if ('error' in outcome) throw new Error(`unexpected decode error: ${outcome.error}`);
  return outcome.ok;
}

function decodeError(options: CopyBinaryDecoderOptions, chunks: Iterable<Uint8Array>): CopyDecodeError {
  const decoder = new CopyBinaryDecoder(options);
  try {
    for (const chunk of chunks) decoder.write(chunk, () => {});
    decoder.end(() => {});
  } catch (error) {
    expect(error).toBeInstanceOf(CopyDecodeError);
    return error as CopyDecodeError;
  }
  throw new Error('expected a CopyDecodeError');
}

/** Deterministic PRNG (mulberry32) so random chunkings are reproducible. */
function prng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

function* twoChunks(bytes: Uint8Array, cut: number): Generator<Uint8Array> {
  yield bytes.subarray(0, cut);
  yield bytes.subarray(cut);
}

function* byteChunks(bytes: Uint8Array): Generator<Uint8Array> {
  for (let i = 0; i < bytes.length; i++) yield bytes.subarray(i, i + 1);
}

function* randomChunks(bytes: Uint8Array, seed: number, maxSize: number): Generator<Uint8Array> {
  const rand = prng(seed);
  let p = 0;
  while (p < bytes.length) {
    // Size 0 included: empty writes must be harmless.
    const size = Math.floor(rand() * (maxSize + 1));
    yield bytes.subarray(p, p + size);
    p += size;
  }
}

/** Asserts that every chunking of `bytes` gives exactly the outcome of decoding it whole. */
function expectSplitInvariant(options: CopyBinaryDecoderOptions, bytes: Uint8Array): Outcome {
  const whole = run(options, [bytes]);
  for (let cut = 0; cut <= bytes.length; cut++) {
    const split = run(options, twoChunks(bytes, cut));
    if (JSON.stringify(split) !== JSON.stringify(whole)) expect({ cut, split }).toEqual({ cut, split: whole });
  }
  expect(run(options, byteChunks(bytes))).toEqual(whole);
  for (let seed = 1; seed <= 20; seed++) {
    expect(run(options, randomChunks(bytes, seed, 1 + (seed % 7) * 5))).toEqual(whole);
  }
  return whole;
}

function opts(partial: Partial<CopyBinaryDecoderOptions> & { keyColumns: number; valueColumns: number }): CopyBinaryDecoderOptions {
  const { keyColumns: k, valueColumns: v } = partial;
  return {
    keyNames: Array.from({ length: k }, (_, i) => `k${i}`),
    valueNames: Array.from({ length: v }, (_, i) => `v${i}`),
    blockRows: 4096,
    nonFinite: 'pass',
    ...partial,
  };
}

/** All emitted rows, flattened: [key values..., value numbers...]. */
function emittedRows(s: Snapshot): unknown[][] {
  const out: unknown[][] = [];
  for (const b of s.blocks) {
    for (let r = 0; r < b.rows; r++) {
      const key = s.keyTable[b.keys[r]!]!;
      const values = b.bits.slice(r * b.width, (r + 1) * b.width);
      out.push([...key, ...values]);
    }
  }
  return out;
}

// ---------------------------------------------------------------------------

describe('CopyBinaryDecoder: decoding', () => {
  it('decodes keys and float8 values into row-major blocks', () => {
    const bytes = encode({
      tuples: [tuple(['a'], [1, 2]), tuple(['b'], [3, 4]), tuple(['a'], [5, 6])],
    });
    const s = decodeOk(opts({ keyColumns: 1, valueColumns: 2 }), bytes);
    expect(s.blocks).toEqual([{ rows: 3, width: 2, bits: [1, 2, 3, 4, 5, 6].map(bitsOf), keys: [0, 1, 0] }]);
    expect(s.keyTable).toEqual([['a'], ['b']]);
    expect(s.rowsRead).toBe(3);
    expect(s.rowsEmitted).toBe(3);
  });

  it('returns values as numbers in a Float64Array of width V', () => {
    const decoder = new CopyBinaryDecoder(opts({ keyColumns: 0, valueColumns: 3 }));
    const seen: number[][] = [];
    const collect = (b: DecodedBlock): void => {
      expect(b.values).toBeInstanceOf(Float64Array);
      expect(b.keys).toBeInstanceOf(Int32Array);
      expect(b.width).toBe(3);
      for (let r = 0; r < b.rows; r++) seen.push(Array.from(b.values.subarray(r * 3, r * 3 + 3)));
    };
    decoder.write(encode({ tuples: [tuple([], [0.5, -1e-300, 123456789.125])] }), collect);
    decoder.end(collect);
    expect(seen).toEqual([[0.5, -1e-300, 123456789.125]]);
  });

  it('skips a header extension of any length', () => {
    const ext = Uint8Array.from({ length: 37 }, (_, i) => (i * 29) & 0xff);
    const bytes = encode({ tuples: [tuple(['x'], [1])], extension: ext });
    const s = expectSplitInvariant(opts({ keyColumns: 1, valueColumns: 1 }), bytes);
    expect('ok' in s && s.ok.blocks[0]?.bits).toEqual([bitsOf(1)]);
  });

  it('ignores flag bits 17-31 (declared backwards-compatible by the format)', () => {
    const bytes = encode({ tuples: [tuple([], [1])], flags: (1 << 17) | (1 << 30) });
    expect(decodeOk(opts({ keyColumns: 0, valueColumns: 1 }), bytes).rowsEmitted).toBe(1);
  });

  it('accepts a stream with no tuples', () => {
    const s = decodeOk(opts({ keyColumns: 1, valueColumns: 1 }), encode({ tuples: [] }));
    expect(s.blocks).toEqual([]);
    expect(s.keyTable).toEqual([]);
    expect(s.rowsRead).toBe(0);
  });

  it('accepts Node Buffers from a pool (non-zero byteOffset)', () => {
    const bytes = encode({ tuples: [tuple(['p'], [7, 8]), tuple(['q'], [9, 10])] });
    const pooled = Buffer.allocUnsafe(bytes.length); // small allocUnsafe buffers share a pool
    pooled.set(bytes);
    const decoder = new CopyBinaryDecoder(opts({ keyColumns: 1, valueColumns: 2 }));
    const got: BlockSnapshot[] = [];
    decoder.write(pooled.subarray(0, 20), (b) => got.push(snapshotBlock(b)));
    decoder.write(pooled.subarray(20), (b) => got.push(snapshotBlock(b)));
    decoder.end((b) => got.push(snapshotBlock(b)));
    expect(got).toEqual([{ rows: 2, width: 2, bits: [7, 8, 9, 10].map(bitsOf), keys: [0, 1] }]);
  });
});

describe('CopyBinaryDecoder: split invariance', () => {
  const rich = encode({
    extension: Uint8Array.of(1, 2, 3),
    tuples: [
      tuple(['a', 'x'], [1, 2, 3]),
      tuple(['a', null], [4, null, 6]),
      tuple([null, 'a'], [Number.NaN, 8, 9]),
      tuple(['a', 'x'], [10, 11, Number.POSITIVE_INFINITY]),
      tuple([null, null], [null, null, 12]),
      tuple(['ü€😀', ''], [-0, 5e-324, Number.MAX_VALUE]),
      tuple(['a', 'x'], [13, 14, 15]),
      tuple(['a', null], [16, 17, 18]),
      tuple(['ab', 'c'], [19, Number.NEGATIVE_INFINITY, 20]),
      tuple(['a', 'bc'], [21, 22, 23]),
      tuple([null, 'a'], [24, 25, 26]),
    ],
  });

  for (const nonFinite of ['pass', 'skip'] as const) {
    for (const blockRows of [1, 3, 4096]) {
      it(`gives identical blocks, keys and counts for every chunking (nonFinite ${nonFinite}, blockRows ${blockRows})`, () => {
        const outcome = expectSplitInvariant(opts({ keyColumns: 2, valueColumns: 3, blockRows, nonFinite }), rich);
        expect('ok' in outcome).toBe(true);
      });
    }
  }

  it('gives identical results for every split into three chunks', () => {
    const bytes = encode({
      tuples: [tuple(['k'], [1]), tuple([null], [null]), tuple(['k'], [Number.NaN]), tuple(['m'], [2])],
    });
    const options = opts({ keyColumns: 1, valueColumns: 1, blockRows: 2, nonFinite: 'skip' });
    const whole = JSON.stringify(run(options, [bytes]));
    for (let i = 0; i <= bytes.length; i++) {
      for (let j = i; j <= bytes.length; j++) {
        const got = run(options, [bytes.subarray(0, i), bytes.subarray(i, j), bytes.subarray(j)]);
        if (JSON.stringify(got) !== whole) expect({ i, j, got }).toEqual({ i, j, got: JSON.parse(whole) });
      }
    }
  });

  it('writePieces: the stream cut into pieces of one buffer, with protocol bytes between them, decodes as written whole', () => {
    const options = opts({ keyColumns: 2, valueColumns: 3, blockRows: 3, nonFinite: 'skip' });
    const whole = JSON.stringify(run(options, [rich]));
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: rich.length }), { maxLength: 12 }), fc.array(fc.integer({ min: 0, max: 9 }), { minLength: 13, maxLength: 13 }), (cutsIn, gaps) => {
        const cuts = [0, ...[...new Set(cutsIn)].sort((a, b) => a - b).filter((c) => c > 0 && c < rich.length), rich.length];
        // Lay the pieces out in one buffer as frames would lie in a socket read: junk
        // (message headers) before each piece, which the ranges leave out.
        const parts: number[] = [];
        const ranges: number[] = [];
        cuts.slice(1).forEach((to, i) => {
          for (let g = 0; g < gaps[i]!; g++) parts.push(0xee);
          ranges.push(parts.length);
          for (let b = cuts[i]!; b < to; b++) parts.push(rich[b]!);
          ranges.push(parts.length);
        });
        // Two reads: the pieces split at the middle one, as frames split across socket reads.
        const bytes = Uint8Array.from(parts);
        const half = Math.floor(ranges.length / 4) * 2;
        const decoder = new CopyBinaryDecoder(options);
        const blocks: BlockSnapshot[] = [];
        const onBlock = (b: DecodedBlock) => void blocks.push(snapshotBlock(b));
        decoder.writePieces({ bytes, ranges: Int32Array.from(ranges.slice(0, half)), count: half / 2 }, onBlock);
        decoder.writePieces({ bytes, ranges: Int32Array.from(ranges.slice(half)), count: (ranges.length - half) / 2 }, onBlock);
        decoder.end(onBlock);
        const got = {
          ok: {
            blocks,
            keyTable: decoder.keyTable,
            rowsRead: decoder.rowsRead,
            rowsEmitted: decoder.rowsEmitted,
            rowsSkippedNull: decoder.rowsSkippedNull,
            rowsSkippedNonFinite: decoder.rowsSkippedNonFinite,
            nullCounts: decoder.nullCounts,
            nonFiniteCounts: decoder.nonFiniteCounts,
          },
        };
        expect(JSON.stringify(got)).toBe(whole);
      }),
      { numRuns: 300 },
    );
  });

  it('decodes the rich stream to the expected rows', () => {
    const s = decodeOk(opts({ keyColumns: 2, valueColumns: 3, blockRows: 3, nonFinite: 'pass' }), rich);
    expect(s.keyTable).toEqual([['a', 'x'], [null, 'a'], ['ü€😀', ''], ['a', null], ['ab', 'c'], ['a', 'bc']]);
    expect(s.blocks.map((b) => b.rows)).toEqual([3, 3, 3]);
    expect(s.blocks.flatMap((b) => b.keys)).toEqual([0, 1, 0, 2, 0, 3, 4, 5, 1]);
    expect(s.rowsRead).toBe(11);
    expect(s.rowsEmitted).toBe(9);
    expect(s.rowsSkippedNull).toBe(2);
    expect(s.nullCounts).toEqual([1, 2, 0]);
    expect(s.rowsSkippedNonFinite).toBe(0);
  });
});

describe('CopyBinaryDecoder: blocks', () => {
  const rowsStream = (n: number): Uint8Array =>
    encode({ tuples: Array.from({ length: n }, (_, i) => tuple([], [i, 10 * i])) });

  function blocksDuring(blockRows: number, n: number): { inWrite: number[]; inEnd: number[] } {
    const decoder = new CopyBinaryDecoder(opts({ keyColumns: 0, valueColumns: 2, blockRows }));
    const inWrite: number[] = [];
    const inEnd: number[] = [];
    decoder.write(rowsStream(n), (b) => inWrite.push(b.rows));
    decoder.end((b) => inEnd.push(b.rows));
    return { inWrite, inEnd };
  }

  it('emits a block as soon as it holds blockRows rows; end() then has nothing left', () => {
    expect(blocksDuring(4, 4)).toEqual({ inWrite: [4], inEnd: [] });
  });

  it('with blockRows + 1 rows emits a full block and a one-row block at end()', () => {
    expect(blocksDuring(4, 5)).toEqual({ inWrite: [4], inEnd: [1] });
  });

  it('handles fewer rows than a block, many blocks, blockRows 1 and no rows', () => {
    expect(blocksDuring(4, 3)).toEqual({ inWrite: [], inEnd: [3] });
    expect(blocksDuring(4, 9)).toEqual({ inWrite: [4, 4], inEnd: [1] });
    expect(blocksDuring(1, 3)).toEqual({ inWrite: [1, 1, 1], inEnd: [] });
    expect(blocksDuring(4, 0)).toEqual({ inWrite: [], inEnd: [] });
  });

  it('keeps row order and values across block boundaries', () => {
    const s = decodeOk(opts({ keyColumns: 0, valueColumns: 2, blockRows: 4 }), rowsStream(9));
    expect(s.blocks.flatMap((b) => b.bits)).toEqual(Array.from({ length: 9 }, (_, i) => [i, 10 * i]).flat().map(bitsOf));
    expect(s.rowsEmitted).toBe(9);
  });

  it('fills blocks only with kept rows (skipped rows do not leave gaps)', () => {
    const bytes = encode({
      tuples: [tuple([], [1]), tuple([], [null]), tuple([], [2]), tuple([], [Number.NaN]), tuple([], [3])],
    });
    const s = decodeOk(opts({ keyColumns: 0, valueColumns: 1, blockRows: 2, nonFinite: 'skip' }), bytes);
    expect(s.blocks).toEqual([
      { rows: 2, width: 1, bits: [1, 2].map(bitsOf), keys: [0, 0] },
      { rows: 1, width: 1, bits: [3].map(bitsOf), keys: [0] },
    ]);
  });

  it('reuses its buffers from block to block (the documented contract)', () => {
    const decoder = new CopyBinaryDecoder(opts({ keyColumns: 0, valueColumns: 2, blockRows: 2 }));
    const arrays = new Set<Float64Array>();
    decoder.write(rowsStream(5), (b) => arrays.add(b.values));
    decoder.end((b) => arrays.add(b.values));
    expect(arrays.size).toBe(1);
  });
});

describe('CopyBinaryDecoder: keys', () => {
  it('with K = 0 gives every row id 0 and a key table of one empty key', () => {
    const decoder = new CopyBinaryDecoder(opts({ keyColumns: 0, valueColumns: 1 }));
    expect(decoder.keyTable).toEqual([[]]);
    const s = decodeOk(opts({ keyColumns: 0, valueColumns: 1, blockRows: 2 }), encode({ tuples: [1, 2, 3].map((x) => tuple([], [x])) }));
    expect(s.keyTable).toEqual([[]]);
    expect(s.blocks.flatMap((b) => b.keys)).toEqual([0, 0, 0]);
  });

  it('with K = 2 treats NULL as its own key value, distinct from every string', () => {
    const keys: (string | null)[][] = [
      ['a', null],
      [null, 'a'],
      [null, null],
      ['a', ''],
      ['a', 'NULL'],
      ['', ''],
      ['a', 'bc'],
      ['ab', 'c'],
    ];
    const bytes = encode({ tuples: [...keys, ...keys.slice().reverse()].map((k, i) => tuple(k, [i])) });
    const s = expectSplitInvariant(opts({ keyColumns: 2, valueColumns: 1, blockRows: 3 }), bytes);
    if (!('ok' in s)) throw new Error(s.error);
    expect(s.ok.keyTable).toEqual(keys);
    expect(s.ok.blocks.flatMap((b) => b.keys)).toEqual([0, 1, 2, 3, 4, 5, 6, 7, 7, 6, 5, 4, 3, 2, 1, 0]);
  });

  it('keeps ids stable across blocks and writes', () => {
    const decoder = new CopyBinaryDecoder(opts({ keyColumns: 1, valueColumns: 1, blockRows: 2 }));
    const ids: number[] = [];
    const collect = (b: DecodedBlock): void => {
      ids.push(...b.keys.subarray(0, b.rows));
    };
    const stream = encode({ tuples: ['b', 'a', 'b', 'c', 'a', 'a', 'b'].map((k) => tuple([k], [1])) });
    decoder.write(stream.subarray(0, 40), collect);
    const tableAfterFirst = decoder.keyTable.slice();
    decoder.write(stream.subarray(40), collect);
    decoder.end(collect);
    expect(ids).toEqual([0, 1, 0, 2, 1, 1, 0]);
    expect(decoder.keyTable).toEqual([['b'], ['a'], ['c']]);
    expect(decoder.keyTable.slice(0, tableAfterFirst.length)).toEqual(tableAfterFirst);
  });

  it('decodes key text as UTF-8, including characters outside the BMP', () => {
    const s = decodeOk(opts({ keyColumns: 1, valueColumns: 1 }), encode({ tuples: [tuple(['日本語 🚀 naïve'], [1])] }));
    expect(s.keyTable).toEqual([['日本語 🚀 naïve']]);
  });

  it('gives no id to a key whose rows were all skipped', () => {
    const bytes = encode({ tuples: [tuple(['gone'], [null]), tuple(['kept'], [1]), tuple(['nan'], [Number.NaN])] });
    const skip = decodeOk(opts({ keyColumns: 1, valueColumns: 1, nonFinite: 'skip' }), bytes);
    expect(skip.keyTable).toEqual([['kept']]);
    const pass = decodeOk(opts({ keyColumns: 1, valueColumns: 1, nonFinite: 'pass' }), bytes);
    expect(pass.keyTable).toEqual([['kept'], ['nan']]);
  });
});

describe('CopyBinaryDecoder: NULL and non-finite values', () => {
  const options = (nonFinite: 'pass' | 'skip'): CopyBinaryDecoderOptions =>
    opts({ keyColumns: 1, valueColumns: 3, nonFinite, valueNames: ['x', 'w', 'y'] });

  it('skips rows with a NULL value and counts the NULLs per column', () => {
    const bytes = encode({
      tuples: [
        tuple(['a'], [1, 2, 3]),
        tuple(['a'], [null, 2, 3]),
        tuple(['a'], [1, null, null]),
        tuple(['a'], [null, null, null]),
        tuple([null], [4, 5, 6]),
      ],
    });
    const s = decodeOk(options('pass'), bytes);
    expect(s.nullCounts).toEqual([2, 2, 2]);
    expect(s.rowsSkippedNull).toBe(3);
    expect(s.rowsRead).toBe(5);
    expect(s.rowsEmitted).toBe(2);
    expect(emittedRows(s)).toEqual([
      ['a', ...[1, 2, 3].map(bitsOf)],
      [null, ...[4, 5, 6].map(bitsOf)],
    ]);
  });

  const nonFiniteStream = encode({
    tuples: [
      tuple(['a'], [1, 2, 3]),
      tuple(['a'], [Number.NaN, 2, 3]),
      tuple(['a'], [1, Number.POSITIVE_INFINITY, Number.NEGATIVE_INFINITY]),
      tuple(['a'], [-0, Number.MIN_VALUE, -Number.MAX_VALUE]),
      tuple(['a'], [null, Number.NaN, 3]),
    ],
  });

  it("with nonFinite 'pass' keeps NaN and ±Infinity in the block", () => {
    const s = decodeOk(options('pass'), nonFiniteStream);
    expect(s.rowsEmitted).toBe(4);
    expect(s.rowsSkippedNonFinite).toBe(0);
    expect(s.nonFiniteCounts).toEqual([0, 0, 0]);
    expect(s.blocks[0]?.bits).toEqual(
      [1, 2, 3, Number.NaN, 2, 3, 1, Infinity, -Infinity, -0, Number.MIN_VALUE, -Number.MAX_VALUE].map(bitsOf),
    );
  });

  it("with nonFinite 'skip' drops those rows and counts per column; a NULL takes precedence", () => {
    const s = decodeOk(options('skip'), nonFiniteStream);
    expect(s.rowsEmitted).toBe(2);
    expect(s.rowsSkippedNonFinite).toBe(2);
    expect(s.nonFiniteCounts).toEqual([1, 1, 1]);
    expect(s.rowsSkippedNull).toBe(1);
    expect(s.nullCounts).toEqual([1, 0, 0]);
    expect(s.rowsRead).toBe(s.rowsEmitted + s.rowsSkippedNull + s.rowsSkippedNonFinite);
    // Finite extremes (negative zero, subnormal, -MAX_VALUE) are kept bit for bit.
    expect(s.blocks[0]?.bits).toEqual([1, 2, 3, -0, Number.MIN_VALUE, -Number.MAX_VALUE].map(bitsOf));
  });
});

describe('CopyBinaryDecoder: one pass over whole tuples (no key columns, every value float8)', () => {
  // Whole tuples of this layout are read in one pass; a NULL, another field length, the
  // trailer or a tuple cut by the chunk go to the general path. Both must agree row for row.
  const rows: (number | null)[][] = [
    [1, 2, 3],
    [null, 2, 3],
    [Number.NaN, 5, 6],
    [7, Number.POSITIVE_INFINITY, null],
    [-0, Number.MIN_VALUE, -Number.MAX_VALUE],
    [10, 11, Number.NEGATIVE_INFINITY],
    [13, 14, 15],
  ];
  const bytes = encode({ tuples: rows.map((r) => tuple([], r)) });

  for (const nonFinite of ['pass', 'skip'] as const) {
    it(`gives what a byte-at-a-time read gives, with NULLs and non-finite values (nonFinite ${nonFinite})`, () => {
      const options = opts({ keyColumns: 0, valueColumns: 3, nonFinite, blockRows: 2 });
      const whole = decodeOk(options, bytes);
      const bytewise = run(options, Array.from(bytes, (b) => Uint8Array.of(b)));
      if (!('ok' in bytewise)) throw new Error(bytewise.error);
      expect(whole).toEqual(bytewise.ok);
      expect(whole.rowsRead).toBe(7);
      expect(whole.rowsSkippedNull).toBe(2);
      expect(whole.nullCounts).toEqual([1, 0, 1]);
      if (nonFinite === 'skip') {
        expect(whole.rowsSkippedNonFinite).toBe(2);
        expect(whole.nonFiniteCounts).toEqual([1, 0, 1]);
        expect(emittedRows(whole)).toEqual([[1, 2, 3], [-0, Number.MIN_VALUE, -Number.MAX_VALUE], [13, 14, 15]].map((r) => r.map(bitsOf)));
      } else {
        expect(whole.rowsEmitted).toBe(5);
      }
    });
  }

  it('still rejects a value field of another length met in the middle of a chunk', () => {
    const bad = encode({ tuples: [tuple([], [1, 2, 3]), [float8(4), Uint8Array.of(1, 2, 3, 4), float8(6)], tuple([], [7, 8, 9])] });
    const error = decodeError(opts({ keyColumns: 0, valueColumns: 3 }), [bad]);
    expect(error.column).toBe('v1');
    expect(error.message).toMatch(/not float8: its field is 4 bytes/);
  });
});

describe('CopyBinaryDecoder: errors', () => {
  const o = opts({ keyColumns: 1, valueColumns: 2, valueNames: ['price', 'qty'], keyNames: ['region'] });
  const good = encode({ tuples: [tuple(['a'], [1, 2]), tuple(['b'], [3, 4])] });

  /** Every chunking of a bad stream must fail with the same error. */
  function expectErrorAtEveryCut(options: CopyBinaryDecoderOptions, bytes: Uint8Array): { error: string; column: string | undefined } {
    const outcome = expectSplitInvariant(options, bytes);
    if (!('error' in outcome)) throw new Error('expected the stream to fail');
    return outcome;
  }

  it('rejects a stream without the PGCOPY signature', () => {
    const textCopy = text('a\t1\t2\n\\.\n');
    const e = expectErrorAtEveryCut(o, textCopy);
    expect(e.error).toMatch(/not a binary COPY stream/);
    expect(e.error).toMatch(/FORMAT binary/);
    // Fails on the first byte already, without waiting for end().
    expect(() => new CopyBinaryDecoder(o).write(textCopy.subarray(0, 1), () => {})).toThrow(/not a binary COPY stream/);
  });

  it('rejects a signature that goes wrong partway', () => {
    const bad = good.slice();
    bad[7] = 0x3f; // the \377 byte, as a text-mode transfer would mangle it
    expect(expectErrorAtEveryCut(o, bad).error).toMatch(/not a binary COPY stream: byte 7/);
  });

  it('rejects the OIDs flag', () => {
    const e = expectErrorAtEveryCut(o, encode({ tuples: [tuple(['a'], [1, 2])], flags: 1 << 16 }));
    expect(e.error).toMatch(/OIDs/);
    expect(e.error).toMatch(/not supported/);
  });

  it('rejects unknown critical flags (bits 0-15)', () => {
    expect(expectErrorAtEveryCut(o, encode({ tuples: [], flags: 1 })).error).toMatch(/unknown critical header flags 0x1/);
  });

  it('rejects a negative header extension length', () => {
    const bytes = encode({ tuples: [] });
    new DataView(bytes.buffer).setInt32(15, -4);
    expect(expectErrorAtEveryCut(o, bytes).error).toMatch(/extension length is negative/);
  });

  it('rejects a tuple with the wrong number of fields, saying K+V and the count found', () => {
    const bytes = encode({ tuples: [tuple(['a'], [1, 2]), tuple(['a'], [1])] });
    const e = expectErrorAtEveryCut(o, bytes);
    expect(e.error).toMatch(/tuple 2 has 2 fields, expected K\+V = 3 \(1 key \+ 2 value columns\)/);
  });

  it('rejects a value column that is not float8, naming it and saying to cast it', () => {
    const int4 = Uint8Array.of(0, 0, 0, 7);
    const bytes = encode({ tuples: [tuple(['a'], [1, 2]), [text('a'), float8(1), int4]] });
    const e = expectErrorAtEveryCut(o, bytes);
    expect(e.column).toBe('qty');
    expect(e.error).toMatch(/value column "qty" is not float8: its field is 4 bytes/);
    expect(e.error).toMatch(/cast it to float8 in the query/);
    const err = decodeError(o, [bytes]);
    expect(err).toBeInstanceOf(Error);
    expect(err.name).toBe('CopyDecodeError');
    expect(err.column).toBe('qty');
  });

  it('accepts key fields of any length, including empty', () => {
    const long = 'x'.repeat(70_000);
    const s = decodeOk(o, encode({ tuples: [tuple([''], [1, 2]), tuple([long], [3, 4])] }));
    expect(s.keyTable).toEqual([[''], [long]]);
  });

  it('rejects a negative field length other than -1', () => {
    const bytes = encode({ tuples: [[text('a'), float8(1), float8(2)]] });
    // Field count (2 bytes) after the 19-byte header, then the key's length word.
    new DataView(bytes.buffer).setInt32(21, -2);
    const e = expectErrorAtEveryCut(o, bytes);
    expect(e.error).toMatch(/invalid field length -2/);
    expect(e.column).toBe('region');
  });

  it('rejects key text that is not UTF-8', () => {
    const e = expectErrorAtEveryCut(o, encode({ tuples: [[Uint8Array.of(0x7a, 0xfc), float8(1), float8(2)]] }));
    expect(e.error).toMatch(/key column "region" in tuple 1 is not valid UTF-8/);
    expect(e.column).toBe('region');
  });

  it('reports a truncated stream wherever it stops, and a missing trailer', () => {
    const messages = new Set<string>();
    for (let n = 0; n < good.length; n++) {
      const e = decodeError(o, [good.subarray(0, n)]);
      expect(e.message).toMatch(/truncated/);
      messages.add(e.message.replace(/\d+/g, 'N'));
    }
    expect([...messages].sort()).toEqual(
      [
        'COPY stream is empty: expected a binary COPY header (truncated stream)',
        'COPY stream truncated inside the signature (N of N bytes)',
        'COPY stream truncated inside the header (N of N bytes of flags and extension length)',
        'COPY stream truncated inside tuple N (N bytes of it received)',
        'COPY stream truncated inside the field count of tuple N (or the end-of-data trailer)',
        'COPY stream truncated: it ended after N tuples without the end-of-data trailer',
      ].sort(),
    );
    expect(decodeError(o, [encode({ tuples: [tuple(['a'], [1, 2])], trailer: false })]).message).toBe(
      'COPY stream truncated: it ended after 1 tuples without the end-of-data trailer',
    );
    const ext = encode({ tuples: [], extension: new Uint8Array(10) });
    expect(decodeError(o, [ext.subarray(0, 24)]).message).toBe(
      'COPY stream truncated inside the header extension (5 bytes missing)',
    );
  });

  it('does not emit the last partial block when the trailer is missing', () => {
    const decoder = new CopyBinaryDecoder(o);
    let blocks = 0;
    decoder.write(encode({ tuples: [tuple(['a'], [1, 2])], trailer: false }), () => blocks++);
    expect(() => decoder.end(() => blocks++)).toThrow(CopyDecodeError);
    expect(blocks).toBe(0);
  });

  it('rejects bytes after the trailer, in the same chunk or a later one', () => {
    expect(expectErrorAtEveryCut(o, concat(good, Uint8Array.of(0, 1, 2))).error).toBe(
      'COPY stream has data after the end-of-data trailer',
    );
    const decoder = new CopyBinaryDecoder(o);
    decoder.write(good, () => {});
    decoder.write(new Uint8Array(0), () => {});
    expect(() => decoder.write(Uint8Array.of(1, 2), () => {})).toThrow(/data after the end-of-data trailer/);
  });

  it('stays failed after an error, rethrowing the same error', () => {
    const decoder = new CopyBinaryDecoder(o);
    let first: unknown;
    try {
      decoder.write(text('nope'), () => {});
    } catch (error) {
      first = error;
    }
    expect(first).toBeInstanceOf(CopyDecodeError);
    expect(() => decoder.write(good, () => {})).toThrow(first as Error);
    expect(() => decoder.end(() => {})).toThrow(first as Error);
  });

  it('stays failed after onBlock throws', () => {
    const decoder = new CopyBinaryDecoder({ ...o, blockRows: 1 });
    const boom = new Error('consumer failed');
    expect(() =>
      decoder.write(good, () => {
        throw boom;
      }),
    ).toThrow(boom);
    expect(() => decoder.end(() => {})).toThrow(boom);
  });

  it('refuses write() and end() after end()', () => {
    const decoder = new CopyBinaryDecoder(o);
    decoder.write(good, () => {});
    decoder.end(() => {});
    expect(() => decoder.write(good, () => {})).toThrow(/after end\(\)/);
    expect(() => decoder.end(() => {})).toThrow(/after end\(\)/);
  });

  it('validates its options', () => {
    const base = opts({ keyColumns: 1, valueColumns: 1 });
    expect(() => new CopyBinaryDecoder({ ...base, keyColumns: -1 })).toThrow(RangeError);
    expect(() => new CopyBinaryDecoder({ ...base, valueColumns: 1.5 })).toThrow(RangeError);
    expect(() => new CopyBinaryDecoder({ ...base, keyColumns: 0, valueColumns: 0, keyNames: [], valueNames: [] })).toThrow(RangeError);
    expect(() => new CopyBinaryDecoder({ ...base, keyNames: [] })).toThrow(/keyNames/);
    expect(() => new CopyBinaryDecoder({ ...base, valueNames: ['a', 'b'] })).toThrow(/valueNames/);
    expect(() => new CopyBinaryDecoder({ ...base, blockRows: 0 })).toThrow(/blockRows/);
    expect(() => new CopyBinaryDecoder({ ...base, nonFinite: 'drop' as 'skip' })).toThrow(/nonFinite/);
  });
});

describe('CopyBinaryDecoder: random streams against a model', () => {
  const keyValue = fc.oneof(fc.constant(null), fc.constantFrom('', 'a', 'b', 'ab', 'ü', '🚀'));
  const value = fc.oneof(
    { weight: 6, arbitrary: fc.double() },
    { weight: 1, arbitrary: fc.constant(null) },
  );

  it('decodes any chunking of any stream to what a direct model predicts', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 0, max: 2 }),
        fc.integer({ min: 1, max: 3 }),
        fc.integer({ min: 1, max: 5 }),
        fc.constantFrom('pass' as const, 'skip' as const),
        fc.array(fc.tuple(fc.array(keyValue, { minLength: 2, maxLength: 2 }), fc.array(value, { minLength: 3, maxLength: 3 })), {
          maxLength: 25,
        }),
        // Sizes cycle; empty writes are included, but at least one size must move forward.
        // Large ones hold many whole tuples, which a layout without keys decodes in one pass.
        fc
          .array(fc.oneof(fc.integer({ min: 0, max: 40 }), fc.integer({ min: 41, max: 600 })), { minLength: 1, maxLength: 30 })
          .filter((a) => a.some((x) => x > 0)),
        (k, v, blockRows, nonFinite, rawRows, sizes) => {
          const rows = rawRows.map(([keys, values]) => ({ keys: keys.slice(0, k), values: values.slice(0, v) }));
          const bytes = encode({ tuples: rows.map((r) => tuple(r.keys, r.values)) });

          // Model: the rows kept, key ids by first kept occurrence, counts.
          const nullCounts = new Array<number>(v).fill(0);
          const nonFiniteCounts = new Array<number>(v).fill(0);
          let rowsSkippedNull = 0;
          let rowsSkippedNonFinite = 0;
          const kept: unknown[][] = [];
          const table: (string | null)[][] = k === 0 ? [[]] : [];
          for (const r of rows) {
            if (r.values.some((x) => x === null)) {
              r.values.forEach((x, j) => x === null && nullCounts[j]!++);
              rowsSkippedNull++;
              continue;
            }
            const xs = r.values as number[];
            if (nonFinite === 'skip' && xs.some((x) => !Number.isFinite(x))) {
              xs.forEach((x, j) => !Number.isFinite(x) && nonFiniteCounts[j]!++);
              rowsSkippedNonFinite++;
              continue;
            }
            if (k > 0 && !table.some((t) => JSON.stringify(t) === JSON.stringify(r.keys))) table.push(r.keys);
            kept.push([...r.keys, ...xs.map(bitsOf)]);
          }

          let p = 0;
          let i = 0;
          const chunks: Uint8Array[] = [];
          while (p < bytes.length) {
            const size = sizes[i++ % sizes.length]!;
            chunks.push(bytes.subarray(p, p + size));
            p += size;
          }
          const outcome = run(opts({ keyColumns: k, valueColumns: v, blockRows, nonFinite }), chunks);
          if (!('ok' in outcome)) throw new Error(outcome.error);
          const s = outcome.ok;
          expect(emittedRows(s)).toEqual(kept);
          expect(s.keyTable).toEqual(table);
          expect(s.nullCounts).toEqual(nullCounts);
          expect(s.nonFiniteCounts).toEqual(nonFiniteCounts);
          expect(s.rowsSkippedNull).toBe(rowsSkippedNull);
          expect(s.rowsSkippedNonFinite).toBe(rowsSkippedNonFinite);
          expect(s.rowsRead).toBe(rows.length);
          expect(s.rowsEmitted).toBe(kept.length);
          // Every block but the last is full.
          s.blocks.slice(0, -1).forEach((b) => expect(b.rows).toBe(blockRows));
        },
      ),
      { numRuns: 300 },
    );
  });
});

describe('CopyBinaryDecoder: fixture captured from PostgreSQL', () => {
  const bytes = new Uint8Array(readFileSync(new URL('../fixtures/copy/sample.bin', import.meta.url)));
  const fixtureOptions = (nonFinite: 'pass' | 'skip'): CopyBinaryDecoderOptions => ({
    keyColumns: 1,
    keyNames: ['k'],
    valueColumns: 2,
    valueNames: ['x', 'y'],
    blockRows: 4096,
    nonFinite,
  });
  const unicodeKey = 'zürich 東京 🚀';

  it("decodes test/fixtures/copy/sample.bin with nonFinite 'pass' (whole and at every cut)", () => {
    const outcome = expectSplitInvariant(fixtureOptions('pass'), bytes);
    if (!('ok' in outcome)) throw new Error(outcome.error);
    const s = outcome.ok;
    expect(s.keyTable).toEqual([['north'], [unicodeKey], [null], ['south']]);
    expect(emittedRows(s)).toEqual([
      ['north', bitsOf(1.5), bitsOf(-2.25)],
      ['north', bitsOf(Number.NaN), bitsOf(3)],
      [unicodeKey, '8000000000000000', '0000000000000001'],
      [null, bitsOf(1e308), bitsOf(-1.7976931348623157e308)],
      ['south', '000fffffffffffff', bitsOf(Number.POSITIVE_INFINITY)],
      ['north', bitsOf(0.1), bitsOf(0.2)],
    ]);
    expect(s.blocks.flatMap((b) => b.keys)).toEqual([0, 0, 1, 2, 3, 0]);
    expect(s.rowsRead).toBe(7);
    expect(s.rowsEmitted).toBe(6);
    expect(s.rowsSkippedNull).toBe(1);
    expect(s.nullCounts).toEqual([1, 0]);
    expect(s.nonFiniteCounts).toEqual([0, 0]);
  });

  it('yields exactly the numbers PostgreSQL printed', () => {
    const decoder = new CopyBinaryDecoder(fixtureOptions('pass'));
    const values: number[] = [];
    const collect = (b: DecodedBlock): void => {
      values.push(...b.values.subarray(0, b.rows * b.width));
    };
    decoder.write(bytes, collect);
    decoder.end(collect);
    expect(values.slice(4, 6)).toEqual([-0, 5e-324]);
    expect(Object.is(values[4], -0)).toBe(true);
    expect(values[5]).toBe(Number.MIN_VALUE);
    expect(values[6]).toBe(1e308);
    expect(values[7]).toBe(-Number.MAX_VALUE);
    expect(values[8]).toBe(2.2250738585072009e-308);
    expect(values[8]! < 2.2250738585072014e-308).toBe(true); // below the smallest normal: subnormal
    expect(values[2]).toBeNaN();
    expect(values[9]).toBe(Infinity);
  });

  it("decodes the fixture with nonFinite 'skip' (whole and at every cut)", () => {
    const outcome = expectSplitInvariant(fixtureOptions('skip'), bytes);
    if (!('ok' in outcome)) throw new Error(outcome.error);
    const s = outcome.ok;
    expect(s.keyTable).toEqual([['north'], [unicodeKey], [null]]);
    expect(emittedRows(s)).toEqual([
      ['north', bitsOf(1.5), bitsOf(-2.25)],
      [unicodeKey, bitsOf(-0), bitsOf(5e-324)],
      [null, bitsOf(1e308), bitsOf(-Number.MAX_VALUE)],
      ['north', bitsOf(0.1), bitsOf(0.2)],
    ]);
    expect(s.rowsEmitted).toBe(4);
    expect(s.rowsSkippedNull).toBe(1);
    expect(s.rowsSkippedNonFinite).toBe(2);
    expect(s.nonFiniteCounts).toEqual([1, 1]);
  });
});
