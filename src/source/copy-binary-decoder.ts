import { Buffer } from 'node:buffer';

import { dd } from '../numeric/double-double.js';
import type { RowBlock } from '../numeric/row-block.js';
import { decodeNumericDD } from './numeric-binary.js';

/**
 * What the decoder does with a NaN or ±Infinity in a value column.
 *
 * - `'pass'`: keep the value in the block; a later stage reports it with its column and segment.
 * - `'skip'`: drop the row and count it in {@link CopyBinaryDecoder.nonFiniteCounts} and
 *   {@link CopyBinaryDecoder.rowsSkippedNonFinite}.
 */
export type NonFinitePolicy = 'pass' | 'skip';

/**
 * Options of a {@link CopyBinaryDecoder}.
 *
 * The stream being decoded must come from a query whose select list is the K key columns
 * (cast to `text`) followed by the V value columns (cast to `float8`), in that order.
 */
export interface CopyBinaryDecoderOptions {
  /** K: number of leading key (segment) columns, each `text`. May be 0. */
  readonly keyColumns: number;
  /** V: number of trailing value columns, each `float8`. */
  readonly valueColumns: number;
  /** Names of the V value columns, used in messages and {@link CopyDecodeError.column}. */
  readonly valueNames: readonly string[];
  /** Names of the K key columns, used in messages and {@link CopyDecodeError.column}. */
  readonly keyNames: readonly string[];
  /** Maximum number of rows per emitted block (a positive integer, e.g. 4096). */
  readonly blockRows: number;
  /** What to do with NaN and ±Infinity values. */
  readonly nonFinite: NonFinitePolicy;
  /**
   * Per value column, its wire type: `float8` (default) or `numeric`. With any `numeric`
   * column, every value is emitted as a (high, low) pair of doubles — the block is 2·V
   * wide — so decimal data reach a double-double fold with about 32 digits.
   */
  readonly valueTypes?: readonly ('float8' | 'numeric')[];
}

/**
 * Consecutive pieces of a byte stream that arrived together: `bytes[ranges[2i] … ranges[2i+1])`
 * for i < `count`, in stream order (the CopyData payloads of one socket read, say).
 */
export interface CopyPieces {
  readonly bytes: Uint8Array;
  readonly ranges: Int32Array;
  readonly count: number;
}

/**
 * A block of decoded rows: the V value columns row-major in `values` (width V), and per row
 * the id of its segment key in `keys` (an index into {@link CopyBinaryDecoder.keyTable}).
 *
 * Both arrays belong to the decoder and are overwritten after `onBlock` returns: use the block
 * (or copy out of it) synchronously inside the callback.
 */
export interface DecodedBlock extends RowBlock {
  /** Per row, the key id; at least `rows` long, only the first `rows` entries are meaningful. */
  readonly keys: Int32Array;
}

/**
 * A malformed, truncated or unsupported binary COPY stream, or a column of the wrong type.
 *
 * `column` names the offending column when the problem belongs to one.
 */
export class CopyDecodeError extends Error {
  /** The column the error is about, when there is one. */
  readonly column: string | undefined;

  /**
   * @param message - what went wrong and, where possible, how to fix it
   * @param options - the column concerned and/or an underlying cause
   */
  constructor(message: string, options?: { column?: string; cause?: unknown }) {
    super(message, options?.cause === undefined ? undefined : { cause: options.cause });
    this.name = 'CopyDecodeError';
    this.column = options?.column;
  }
}

/** The 11-byte signature that opens every binary COPY stream: `PGCOPY\n\377\r\n\0`. */
const SIGNATURE = Uint8Array.of(0x50, 0x47, 0x43, 0x4f, 0x50, 0x59, 0x0a, 0xff, 0x0d, 0x0a, 0x00);
/** Flags word plus header-extension length word that follow the signature. */
const HEADER_WORDS_BYTES = 8;
/** Flags bit 16: every tuple carries an OID field ahead of the regular fields. */
const FLAG_HAS_OIDS = 1 << 16;
/** Flags bits 0–15 are "critical": the format says a reader must abort on any it does not know. */
const CRITICAL_FLAGS_MASK = 0xffff;
const FLOAT8_BYTES = 8;
const INITIAL_CARRY_BYTES = 256;

/** Where in the stream the decoder is. */
const Phase = {
  Signature: 0,
  HeaderWords: 1,
  HeaderExtension: 2,
  Tuples: 3,
  Done: 4,
} as const;
type Phase = (typeof Phase)[keyof typeof Phase];

/**
 * Decodes the output of `COPY (query) TO STDOUT (FORMAT binary)` into {@link DecodedBlock}s.
 *
 * A pure codec: bytes in via {@link write} (in chunks cut anywhere, even inside the signature,
 * a length word or a field), blocks out through the callback; it never touches a socket.
 * At most one partial tuple is carried between chunks; complete tuples are read in place
 * from the chunk, with float8 values going straight into a reused block buffer.
 *
 * Rows with a NULL in any value column are skipped and counted ({@link nullCounts},
 * {@link rowsSkippedNull}); with `nonFinite: 'skip'` so are rows with a NaN or ±Infinity
 * ({@link nonFiniteCounts}, {@link rowsSkippedNonFinite}). A row with both a NULL and a
 * non-finite value counts as a NULL skip only. Always
 * `rowsRead = rowsEmitted + rowsSkippedNull + rowsSkippedNonFinite` after {@link end}.
 *
 * Emitted blocks reuse the decoder's buffers: a consumer must use a block before the
 * `onBlock` callback returns. After any thrown error (from the stream or from `onBlock`) the
 * decoder is spent and every further call rethrows that error; blocks emitted before the
 * error must be treated as part of a failed stream.
 *
 * @example
 * const decoder = new CopyBinaryDecoder({
 *   keyColumns: 1, keyNames: ['region'], valueColumns: 2, valueNames: ['x', 'y'],
 *   blockRows: 4096, nonFinite: 'pass',
 * });
 * for await (const chunk of copyStream) decoder.write(chunk, (b) => accumulate(b, decoder.keyTable));
 * decoder.end((b) => accumulate(b, decoder.keyTable));
 */
export class CopyBinaryDecoder {
  readonly #keyCount: number;
  readonly #valueCount: number;
  readonly #fieldCount: number;
  readonly #keyNames: readonly string[];
  readonly #valueNames: readonly string[];
  readonly #blockRows: number;
  readonly #skipNonFinite: boolean;

  #phase: Phase = Phase.Signature;
  #signatureSeen = 0;
  #extensionLeft = 0;
  #ended = false;
  #failure: unknown = undefined;
  #hasFailed = false;

  // Carry: the bytes of the one item (header words or tuple) that straddles a chunk boundary.
  #carry: Buffer = Buffer.alloc(INITIAL_CARRY_BYTES);
  #carryView: DataView = new DataView(this.#carry.buffer, this.#carry.byteOffset, this.#carry.byteLength);
  #carryLength = 0;
  #carryComplete = false;

  readonly #values: Float64Array;
  /** Per value column: true when it arrives as numeric (pairs mode). */
  readonly #numeric: readonly boolean[];
  /** Where the last incomplete scan stopped (see #scanFields). */
  #scanStopField = -1;
  #scanStopAt = 0;
  /** Where the scan of the carried partial tuple resumes. */
  #carryScanField = -1;
  #carryScanAt = 0;
  /** Values per column in the block: 2 in pairs mode, else 1. */
  readonly #stride: number;
  readonly #pair = dd();
  readonly #keys: Int32Array;
  #blockFill = 0;
  /**
   * No key columns and every value float8: a tuple is then always 2 + 12·V bytes unless it
   * holds a NULL, and {@link #consumePlainTuples} reads it in one pass.
   */
  readonly #plain: boolean;

  /** Key ids by a 32-bit hash of the key's raw bytes; collisions are told apart by the bytes. */
  /**
   * Key bytes → id: an open-addressed table of ids + 1 (0 is empty), probed linearly from the
   * key's hash; the raw bytes of every key sit end to end in one arena. No object per key:
   * a million segments cost a few typed arrays, not a million maps entries and buffers.
   */
  #keySlots = new Int32Array(1024);
  #keyHashes = new Int32Array(0);
  #keyArena = new Uint8Array(4096);
  #keyArenaFill = 0;
  /** Start of key id i's bytes in the arena at [2i], its length at [2i + 1]. */
  #keySpans = new Int32Array(512);
  /** Per key id, its raw bytes (length words and bodies). */
  readonly #keyTable: (readonly (string | null)[])[] = [];
  // Raw bytes of the previous emitted row's key fields, so runs of one segment skip the Map.
  #lastKey: Buffer = Buffer.alloc(0);
  #lastKeyLength = -1;
  #lastKeyId = -1;
  readonly #utf8 = new TextDecoder('utf-8', { fatal: true });

  readonly #nullCounts: number[];
  readonly #nonFiniteCounts: number[];
  #rowsRead = 0;
  #rowsEmitted = 0;
  #rowsSkippedNull = 0;
  #rowsSkippedNonFinite = 0;

  /**
   * @param options - column layout, block size and non-finite policy
   * @throws RangeError when the options are inconsistent (negative counts, names of the wrong
   *   length, a non-positive `blockRows`)
   */
  constructor(options: CopyBinaryDecoderOptions) {
    const { keyColumns: k, valueColumns: v, keyNames, valueNames, blockRows, nonFinite } = options;
    if (!Number.isInteger(k) || k < 0) throw new RangeError(`keyColumns must be a non-negative integer, got ${k}`);
    if (!Number.isInteger(v) || v < 0) throw new RangeError(`valueColumns must be a non-negative integer, got ${v}`);
    // The tuple field count travels as an int16.
    if (k + v < 1 || k + v > 0x7fff) throw new RangeError(`keyColumns + valueColumns must be 1..32767, got ${k + v}`);
    if (keyNames.length !== k) throw new RangeError(`keyNames has ${keyNames.length} names for ${k} key columns`);
    if (valueNames.length !== v) throw new RangeError(`valueNames has ${valueNames.length} names for ${v} value columns`);
    if (!Number.isInteger(blockRows) || blockRows < 1) throw new RangeError(`blockRows must be a positive integer, got ${blockRows}`);
    if (nonFinite !== 'pass' && nonFinite !== 'skip') throw new RangeError(`nonFinite must be 'pass' or 'skip', got ${String(nonFinite)}`);
    this.#keyCount = k;
    this.#valueCount = v;
    this.#fieldCount = k + v;
    this.#keyNames = [...keyNames];
    this.#valueNames = [...valueNames];
    this.#blockRows = blockRows;
    this.#skipNonFinite = nonFinite === 'skip';
    const types = options.valueTypes ?? [];
    if (types.length !== 0 && types.length !== v) throw new RangeError(`valueTypes has ${types.length} types for ${v} value columns`);
    this.#numeric = Array.from({ length: v }, (_, j) => types[j] === 'numeric');
    this.#stride = this.#numeric.some(Boolean) ? 2 : 1;
    this.#plain = k === 0 && this.#stride === 1;
    this.#values = new Float64Array(blockRows * v * this.#stride);
    this.#keys = new Int32Array(blockRows);
    this.#nullCounts = new Array<number>(v).fill(0);
    this.#nonFiniteCounts = new Array<number>(v).fill(0);
    if (k === 0) this.#keyTable.push([]);
  }

  /**
   * Key id → the K key values of that segment (`null` for a SQL NULL, which is a segment value
   * of its own, distinct from any string). Ids are assigned in order of first emitted row and
   * never change; a key whose rows were all skipped gets no id. With K = 0 the table is `[[]]`
   * and every row has id 0.
   */
  get keyTable(): ReadonlyArray<ReadonlyArray<string | null>> {
    return this.#keyTable;
  }

  /** Per value column: how many skipped rows had a NULL in that column. */
  get nullCounts(): readonly number[] {
    return this.#nullCounts;
  }

  /** Per value column: how many rows skipped for a non-finite value had one in that column. */
  get nonFiniteCounts(): readonly number[] {
    return this.#nonFiniteCounts;
  }

  /** Tuples read so far (the trailer not included). */
  get rowsRead(): number {
    return this.#rowsRead;
  }

  /** Rows delivered to `onBlock` so far. */
  get rowsEmitted(): number {
    return this.#rowsEmitted;
  }

  /** Rows skipped because a value column was NULL. */
  get rowsSkippedNull(): number {
    return this.#rowsSkippedNull;
  }

  /** Rows skipped because a value was NaN or ±Infinity (only with `nonFinite: 'skip'`). */
  get rowsSkippedNonFinite(): number {
    return this.#rowsSkippedNonFinite;
  }

  /**
   * Decodes the next chunk of the stream, calling `onBlock` for each block that fills up.
   *
   * @param chunk - the next bytes of the stream, cut anywhere; not retained after return
   * @param onBlock - receives full blocks; must use them before returning (buffers are reused)
   * @throws CopyDecodeError on a malformed stream or a value column that is not float8
   */
  write(chunk: Uint8Array, onBlock: (block: DecodedBlock) => void): void {
    this.#checkUsable('write');
    try {
      const end = chunk.byteLength;
      if (end === 0) return;
      this.#decode(Buffer.from(chunk.buffer, chunk.byteOffset, end), new DataView(chunk.buffer, chunk.byteOffset, end), 0, end, onBlock);
    } catch (error) {
      this.#fail(error);
      throw error;
    }
  }

  /**
   * Decodes the next pieces of the stream as they arrived, without copying them together:
   * `pieces.bytes[ranges[2i] … ranges[2i+1])` for i < `count`, in order (for example the
   * payloads of the protocol's CopyData messages within one socket read). The same as
   * {@link write} of each piece in turn.
   *
   * @throws CopyDecodeError on a malformed stream or a value column that is not float8
   */
  writePieces(pieces: CopyPieces, onBlock: (block: DecodedBlock) => void): void {
    this.#checkUsable('write');
    try {
      const { bytes: chunk, ranges, count } = pieces;
      const bytes = Buffer.from(chunk.buffer, chunk.byteOffset, chunk.byteLength);
      const view = new DataView(chunk.buffer, chunk.byteOffset, chunk.byteLength);
      for (let i = 0; i < count; i++) {
        const from = ranges[2 * i]!;
        const to = ranges[2 * i + 1]!;
        if (from < 0 || to > chunk.byteLength || from > to) throw new RangeError(`piece ${i} (${from}..${to}) is outside its ${chunk.byteLength} bytes`);
        if (to > from) this.#decode(bytes, view, from, to, onBlock);
      }
    } catch (error) {
      this.#fail(error);
      throw error;
    }
  }

  /**
   * Declares the stream finished and emits the last, partial block (if any rows remain).
   *
   * @param onBlock - receives the last block; must use it before returning
   * @throws CopyDecodeError when the stream stopped before the end-of-data trailer, inside the
   *   header or inside a tuple
   */
  end(onBlock: (block: DecodedBlock) => void): void {
    this.#checkUsable('end');
    this.#ended = true;
    try {
      this.#finish();
      if (this.#blockFill > 0) this.#emit(onBlock);
    } catch (error) {
      this.#fail(error);
      throw error;
    }
  }

  #checkUsable(call: string): void {
    if (this.#hasFailed) throw this.#failure;
    if (this.#ended) throw new Error(`CopyBinaryDecoder.${call}() called after end()`);
  }

  #fail(error: unknown): void {
    this.#hasFailed = true;
    this.#failure = error;
  }

  #finish(): void {
    switch (this.#phase) {
      case Phase.Signature:
        throw new CopyDecodeError(
          this.#signatureSeen === 0
            ? 'COPY stream is empty: expected a binary COPY header (truncated stream)'
            : `COPY stream truncated inside the signature (${this.#signatureSeen} of ${SIGNATURE.length} bytes)`,
        );
      case Phase.HeaderWords:
        throw new CopyDecodeError(
          `COPY stream truncated inside the header (${this.#carryLength} of ${HEADER_WORDS_BYTES} bytes of flags and extension length)`,
        );
      case Phase.HeaderExtension:
        throw new CopyDecodeError(`COPY stream truncated inside the header extension (${this.#extensionLeft} bytes missing)`);
      case Phase.Tuples:
        if (this.#carryLength === 1) {
          // One byte of an int16 cannot tell a tuple's field count from the trailer's −1.
          throw new CopyDecodeError(
            `COPY stream truncated inside the field count of tuple ${this.#rowsRead + 1} (or the end-of-data trailer)`,
          );
        }
        if (this.#carryLength > 0) {
          throw new CopyDecodeError(
            `COPY stream truncated inside tuple ${this.#rowsRead + 1} (${this.#carryLength} bytes of it received)`,
          );
        }
        throw new CopyDecodeError(
          `COPY stream truncated: it ended after ${this.#rowsRead} tuples without the end-of-data trailer`,
        );
      case Phase.Done:
        return;
    }
  }

  /** Decodes `bytes[start … end)`, the next bytes of the stream (`view` over the same bytes). */
  #decode(bytes: Buffer, view: DataView, start: number, end: number, onBlock: (block: DecodedBlock) => void): void {
    let pos = start;
    while (pos < end) {
      switch (this.#phase) {
        case Phase.Signature: {
          // Checked byte by byte so that a text-format or non-COPY stream fails at once.
          while (pos < end && this.#signatureSeen < SIGNATURE.length) {
            if (bytes[pos] !== SIGNATURE[this.#signatureSeen]) {
              throw new CopyDecodeError(
                `not a binary COPY stream: byte ${this.#signatureSeen} does not match the PGCOPY signature ` +
                  '(was the COPY run WITH (FORMAT binary)?)',
              );
            }
            pos++;
            this.#signatureSeen++;
          }
          if (this.#signatureSeen === SIGNATURE.length) this.#phase = Phase.HeaderWords;
          break;
        }
        case Phase.HeaderWords: {
          pos = this.#appendToCarry(bytes, pos, end, HEADER_WORDS_BYTES - this.#carryLength);
          if (this.#carryLength === HEADER_WORDS_BYTES) {
            this.#readHeaderWords(this.#carryView);
            this.#carryLength = 0;
          }
          break;
        }
        case Phase.HeaderExtension: {
          // The extension's contents are for future format versions; skipping them is what the
          // format asks of readers that do not understand them.
          const skip = Math.min(this.#extensionLeft, end - pos);
          pos += skip;
          this.#extensionLeft -= skip;
          if (this.#extensionLeft === 0) this.#phase = Phase.Tuples;
          break;
        }
        case Phase.Tuples: {
          if (this.#carryLength > 0) {
            pos = this.#completeCarriedTuple(bytes, view, pos, end);
            if (!this.#carryComplete) break;
            this.#consumeTuple(this.#carryView, this.#carry, 0, onBlock);
            this.#carryLength = 0;
            break;
          }
          while (pos < end && this.#phase === Phase.Tuples) {
            if (this.#plain) {
              // Whole tuples of the common layout in one pass; the first one it cannot take
              // (cut by the chunk's end, a NULL, the trailer, a malformed one) is the general
              // path's below.
              pos = this.#consumePlainTuples(view, pos, end, onBlock);
              if (pos >= end) break;
            }
            const tupleEnd = this.#scanTuple(view, pos, end);
            if (tupleEnd > end) {
              // Only the straddling tail (a prefix of one tuple) is copied.
              this.#carryScanField = -1;
              this.#carryScanAt = 0;
              pos = this.#appendToCarry(bytes, pos, end, end - pos);
              break;
            }
            this.#consumeTuple(view, bytes, pos, onBlock);
            pos = tupleEnd;
          }
          break;
        }
        case Phase.Done:
          throw new CopyDecodeError('COPY stream has data after the end-of-data trailer');
      }
    }
  }

  #readHeaderWords(view: DataView): void {
    const flags = view.getUint32(0);
    if ((flags & FLAG_HAS_OIDS) !== 0) {
      throw new CopyDecodeError(
        'binary COPY stream includes OIDs (header flag bit 16), which is not supported: run the COPY without OIDS',
      );
    }
    if ((flags & CRITICAL_FLAGS_MASK) !== 0) {
      throw new CopyDecodeError(
        `binary COPY stream sets unknown critical header flags 0x${(flags & CRITICAL_FLAGS_MASK).toString(16)} ` +
          '(a newer, incompatible format version?)',
      );
    }
    // Bits 17–31 are declared backwards-compatible: ignoring them is what the format asks.
    const extensionLength = view.getInt32(4);
    if (extensionLength < 0) {
      throw new CopyDecodeError(`binary COPY header extension length is negative (${extensionLength})`);
    }
    this.#extensionLeft = extensionLength;
    this.#phase = extensionLength === 0 ? Phase.Tuples : Phase.HeaderExtension;
  }

  /** Copies up to `count` bytes from `bytes[pos..end)` onto the carry; returns the new position. */
  #appendToCarry(bytes: Buffer, pos: number, end: number, count: number): number {
    const take = Math.min(count, end - pos);
    const needed = this.#carryLength + take;
    if (needed > this.#carry.byteLength) {
      const grown = Buffer.alloc(Math.max(needed, this.#carry.byteLength * 2));
      this.#carry.copy(grown, 0, 0, this.#carryLength);
      this.#carry = grown;
      this.#carryView = new DataView(grown.buffer, grown.byteOffset, grown.byteLength);
    }
    bytes.copy(this.#carry, this.#carryLength, pos, pos + take);
    this.#carryLength = needed;
    return pos + take;
  }

  /**
   * Moves bytes from the chunk onto the carried partial tuple, one structural piece at a time
   * (field count, length word, field body), never past the tuple's end. Returns the new chunk
   * position and sets {@link #carryComplete}; when the tuple is still incomplete the chunk is used up.
   */
  #completeCarriedTuple(bytes: Buffer, view: DataView, pos: number, end: number): number {
    for (;;) {
      // Resumes where the last look stopped: rescanning from the tuple's start after every
      // piece would cost O(fields²) per tuple that straddles two chunks.
      const tupleEnd = this.#scanFields(this.#carryView, 0, this.#carryLength, this.#carryScanField, this.#carryScanAt);
      this.#carryScanField = this.#scanStopField;
      this.#carryScanAt = this.#scanStopAt;
      this.#carryComplete = tupleEnd <= this.#carryLength;
      if (this.#carryComplete || pos === end) return pos;
      if (this.#carryScanField >= 0 && this.#carryScanAt === this.#carryLength) {
        // The carry ends on a field boundary: the rest of the tuple lies in this chunk from
        // `pos`. Scan it there and copy it over in one piece.
        const restEnd = this.#scanFields(view, pos, end, this.#carryScanField, pos);
        const base = this.#carryLength - pos;
        const stopField = this.#scanStopField;
        const stopAt = this.#scanStopAt;
        pos = this.#appendToCarry(bytes, pos, end, Math.min(restEnd, end) - pos);
        if (restEnd <= end) {
          this.#carryComplete = true;
          return pos;
        }
        this.#carryScanField = stopField;
        this.#carryScanAt = stopAt + base;
        continue;
      }
      pos = this.#appendToCarry(bytes, pos, end, tupleEnd - this.#carryLength);
    }
  }

  /**
   * Walks the tuple (or trailer) starting at `pos`, validating field count and lengths as far as
   * the bytes go. Returns the offset just past it when it is complete (≤ `end`), otherwise the
   * offset up to which bytes are needed to make progress (> `end`).
   */
  #scanTuple(view: DataView, pos: number, end: number): number {
    return this.#scanFields(view, pos, end, -1, pos);
  }

  /**
   * {@link #scanTuple} from field `from` at offset `at` (`from` −1: from the field count at
   * `pos`). When the tuple is incomplete, {@link #scanStopField} and {@link #scanStopAt} say
   * where the next look can resume (the start of the first incomplete field).
   */
  #scanFields(view: DataView, pos: number, end: number, from: number, at: number): number {
    const fields = this.#fieldCount;
    let p = at;
    if (from < 0) {
      this.#scanStopField = -1;
      this.#scanStopAt = pos;
      if (pos + 2 > end) return pos + 2;
      const count = view.getInt16(pos);
      // Field count −1 is the end-of-data trailer.
      if (count === -1) return pos + 2;
      if (count !== fields) {
        throw new CopyDecodeError(
          `tuple ${this.#rowsRead + 1} has ${count} fields, expected K+V = ${this.#fieldCount} ` +
            `(${this.#keyCount} key + ${this.#valueCount} value columns); the query's select list does not match`,
        );
      }
      p = pos + 2;
      from = 0;
    }
    for (let f = from; f < fields; f++) {
      this.#scanStopField = f;
      this.#scanStopAt = p;
      if (p + 4 > end) return p + 4;
      const length = view.getInt32(p);
      p += 4;
      // The common field, a float8 (or 8 bytes of key text), needs no further checks.
      if (length === FLOAT8_BYTES) {
        p += FLOAT8_BYTES;
        if (p > end) return p;
        continue;
      }
      // Length −1 is a NULL with no body.
      if (length === -1) continue;
      if (length < 0) {
        throw new CopyDecodeError(
          `tuple ${this.#rowsRead + 1}, column "${this.#columnName(f)}": invalid field length ${length}`,
          { column: this.#columnName(f) },
        );
      }
      if (f >= this.#keyCount && length !== FLOAT8_BYTES && !this.#numeric[f - this.#keyCount]) {
        const name = this.#columnName(f);
        throw new CopyDecodeError(
          `value column "${name}" is not float8: its field is ${length} bytes, a float8 is ${FLOAT8_BYTES}; ` +
            `cast it to float8 in the query (e.g. (${name})::float8)`,
          { column: name },
        );
      }
      p += length;
      if (p > end) return p;
    }
    return p;
  }

  #columnName(field: number): string {
    return field < this.#keyCount
      ? (this.#keyNames[field] ?? `key ${field + 1}`)
      : (this.#valueNames[field - this.#keyCount] ?? `value ${field - this.#keyCount + 1}`);
  }

  /**
   * The fast path of a plain layout (see {@link #plain}): reads whole tuples from `pos` in one
   * pass — field count, length words and values together — for as long as each lies wholly
   * before `end` with V fields of 8 bytes, and returns where it stopped. A tuple it stops at
   * (cut by `end`, holding a NULL or another length, or the trailer) is left to the general
   * path, which validates, counts and reports it; values this pass wrote into that row's block
   * slot are overwritten there or ignored. Counts, skips and blocks are the general path's.
   */
  #consumePlainTuples(view: DataView, pos: number, end: number, onBlock: (block: DecodedBlock) => void): number {
    const v = this.#valueCount;
    const size = 2 + v * (4 + FLOAT8_BYTES);
    const values = this.#values;
    while (pos + size <= end) {
      if (view.getInt16(pos) !== v) return pos;
      const base = this.#blockFill * v;
      let p = pos + 2;
      // x − x is NaN exactly when x is NaN or ±Infinity, so the sum stays 0 only for finite rows.
      let check = 0;
      for (let j = 0; j < v; j++) {
        if (view.getInt32(p) !== FLOAT8_BYTES) return pos;
        const x = view.getFloat64(p + 4);
        values[base + j] = x;
        check += x - x;
        p += 4 + FLOAT8_BYTES;
      }
      this.#rowsRead++;
      pos = p;
      if (check !== 0 && this.#skipNonFinite) {
        for (let j = 0; j < v; j++) if (!Number.isFinite(values[base + j]!)) this.#nonFiniteCounts[j]!++;
        this.#rowsSkippedNonFinite++;
        continue;
      }
      this.#keys[this.#blockFill] = 0;
      this.#blockFill++;
      if (this.#blockFill === this.#blockRows) this.#emit(onBlock);
    }
    return pos;
  }

  /** Decodes one complete, already validated tuple (or the trailer) at `pos`. */
  #consumeTuple(view: DataView, bytes: Buffer, pos: number, onBlock: (block: DecodedBlock) => void): void {
    if (view.getInt16(pos) === -1) {
      this.#phase = Phase.Done;
      return;
    }
    this.#rowsRead++;
    let p = pos + 2;
    const keyStart = p;
    for (let f = 0; f < this.#keyCount; f++) {
      const length = view.getInt32(p);
      p += 4 + (length > 0 ? length : 0);
    }
    const keyEnd = p;

    // Values land directly in the block slot; a skipped row simply does not advance the fill.
    const v = this.#valueCount;
    const values = this.#values;
    const stride = this.#stride;
    const base = this.#blockFill * v * stride;
    let hasNull = false;
    let hasNonFinite = false;
    const numeric = this.#numeric;
    for (let j = 0; j < v; j++) {
      const length = view.getInt32(p);
      p += 4;
      if (length === -1) {
        hasNull = true;
        this.#nullCounts[j]!++;
        continue;
      }
      let x: number;
      if (stride === 1) {
        x = view.getFloat64(p);
      } else if (numeric[j]) {
        decodeNumericDD(view, p, length, this.#pair);
        x = this.#pair.hi;
        values[base + 2 * j + 1] = this.#pair.lo;
      } else {
        x = view.getFloat64(p);
        values[base + 2 * j + 1] = 0;
      }
      p += length;
      values[base + j * stride] = x;
      // x − x is NaN exactly when x is NaN or ±Infinity.
      if (x - x !== 0) hasNonFinite = true;
    }
    if (hasNull) {
      this.#rowsSkippedNull++;
      return;
    }
    if (hasNonFinite && this.#skipNonFinite) {
      for (let j = 0; j < v; j++) if (!Number.isFinite(values[base + j * stride]!)) this.#nonFiniteCounts[j]!++;
      this.#rowsSkippedNonFinite++;
      return;
    }

    this.#keys[this.#blockFill] = this.#keyCount === 0 ? 0 : this.#keyId(view, bytes, keyStart, keyEnd);
    this.#blockFill++;
    if (this.#blockFill === this.#blockRows) this.#emit(onBlock);
  }

  /**
   * The id of the key whose raw fields (length words and bodies) are `bytes[start..end)`.
   * The raw bytes identify a key exactly: the length words keep ('a','bc') apart from
   * ('ab','c') and NULL (length −1) apart from any string.
   */
  #keyId(view: DataView, bytes: Buffer, start: number, end: number): number {
    const length = end - start;
    if (length === this.#lastKeyLength && sameBytes(this.#lastKey, 0, bytes, start, length)) return this.#lastKeyId;
    // FNV-1a over the raw bytes: no string is made per row (rows of interleaved segments
    // change key on almost every row).
    let h = 0x811c9dc5;
    for (let i = start; i < end; i++) h = Math.imul(h ^ bytes[i]!, 0x01000193);
    let slots = this.#keySlots;
    let mask = slots.length - 1;
    let at = h & mask;
    let id = -1;
    for (let slot = slots[at]!; slot !== 0; slot = slots[at]!) {
      if (this.#keyHashes[slot - 1] === h && this.#isKey(slot - 1, bytes, start, length)) {
        id = slot - 1;
        break;
      }
      at = (at + 1) & mask;
    }
    if (id < 0) {
      id = this.#keyTable.length;
      this.#keyTable.push(this.#decodeKey(view, bytes, start));
      this.#keepKey(id, h, bytes, start, length);
      slots[at] = id + 1;
      if (2 * (id + 1) > slots.length) {
        // Above half full: twice the slots, every id placed again by its hash.
        slots = this.#keySlots = new Int32Array(2 * slots.length);
        mask = slots.length - 1;
        for (let k = 0; k <= id; k++) {
          let a = this.#keyHashes[k]! & mask;
          while (slots[a] !== 0) a = (a + 1) & mask;
          slots[a] = k + 1;
        }
      }
    }
    if (this.#lastKey.byteLength < length) this.#lastKey = Buffer.alloc(Math.max(length, 2 * this.#lastKey.byteLength));
    const last = this.#lastKey;
    for (let i = 0; i < length; i++) last[i] = bytes[start + i]!;
    this.#lastKeyLength = length;
    this.#lastKeyId = id;
    return id;
  }

  #isKey(id: number, bytes: Uint8Array, start: number, length: number): boolean {
    return this.#keySpans[2 * id + 1] === length && sameBytes(this.#keyArena, this.#keySpans[2 * id]!, bytes, start, length);
  }

  /** Keeps key id `id`'s hash and bytes (arena and spans grow by doubling). */
  #keepKey(id: number, h: number, bytes: Uint8Array, start: number, length: number): void {
    if (this.#keyHashes.length <= id) {
      const hashes = new Int32Array(Math.max(1024, 2 * this.#keyHashes.length));
      hashes.set(this.#keyHashes);
      this.#keyHashes = hashes;
    }
    this.#keyHashes[id] = h;
    if (this.#keySpans.length < 2 * id + 2) {
      const spans = new Int32Array(2 * this.#keySpans.length);
      spans.set(this.#keySpans);
      this.#keySpans = spans;
    }
    if (this.#keyArenaFill + length > this.#keyArena.length) {
      const arena = new Uint8Array(Math.max(2 * this.#keyArena.length, this.#keyArenaFill + length));
      arena.set(this.#keyArena.subarray(0, this.#keyArenaFill));
      this.#keyArena = arena;
    }
    this.#keyArena.set(bytes.subarray(start, start + length), this.#keyArenaFill);
    this.#keySpans[2 * id] = this.#keyArenaFill;
    this.#keySpans[2 * id + 1] = length;
    this.#keyArenaFill += length;
  }

  #decodeKey(view: DataView, bytes: Buffer, start: number): (string | null)[] {
    const key: (string | null)[] = [];
    let p = start;
    for (let f = 0; f < this.#keyCount; f++) {
      const length = view.getInt32(p);
      p += 4;
      if (length === -1) {
        key.push(null);
        continue;
      }
      try {
        key.push(this.#utf8.decode(bytes.subarray(p, p + length)));
      } catch (cause) {
        // Binary COPY sends text in the session's client_encoding, not necessarily UTF-8.
        const name = this.#columnName(f);
        throw new CopyDecodeError(
          `key column "${name}" in tuple ${this.#rowsRead} is not valid UTF-8; set client_encoding to UTF8 for the COPY session`,
          { column: name, cause },
        );
      }
      p += length;
    }
    return key;
  }

  #emit(onBlock: (block: DecodedBlock) => void): void {
    const rows = this.#blockFill;
    this.#blockFill = 0;
    this.#rowsEmitted += rows;
    onBlock({ rows, width: this.#valueCount * this.#stride, values: this.#values, keys: this.#keys });
  }
}

/** Whether a[aStart … aStart+length) equals b[bStart … bStart+length). */
function sameBytes(a: Uint8Array, aStart: number, b: Uint8Array, bStart: number, length: number): boolean {
  for (let i = 0; i < length; i++) if (a[aStart + i] !== b[bStart + i]) return false;
  return true;
}
