import { Buffer } from 'node:buffer';

import { CopyBinaryDecoder, CopyDecodeError } from './copy-binary-decoder.js';
import type { CopyBinaryDecoderOptions, DecodedBlock } from './copy-binary-decoder.js';

/** The binary COPY header: signature, flags word 0, header-extension length 0. */
const HEADER = Buffer.concat([
  Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1'),
  Buffer.alloc(8),
]);
/** Bytes of re-encoded tuples gathered before they are handed to the decoder. */
const STAGING_BYTES = 64 * 1024;
const NULL_LENGTH = -1;
const FLOAT8_BYTES = 8;

/**
 * Builds {@link DecodedBlock}s from array rows (`[key₁ … key_K, value₁ … value_V]`, keys as
 * text or null, values as numbers or null), as the row-stream fallback receives them from
 * pg, with exactly the semantics of {@link CopyBinaryDecoder}: the same key table in order of
 * first emitted row, the same NULL and non-finite skipping and counting, the same block
 * sizes.
 *
 * It gets there by construction rather than by a second copy of the rules: each row is
 * re-encoded as a binary COPY tuple (UTF-8 key text, big-endian float8 values) and fed to a
 * CopyBinaryDecoder, so a copy read and a row read of the same query fold identically.
 * Encoding costs far less than the text parsing that the row protocol already pays.
 *
 * Blocks belong to the decoder and are reused after `onBlock` returns; use them synchronously.
 * After an error the builder is spent, as the decoder is.
 *
 * @example
 * const builder = new RowArrayBlockBuilder({ keyColumns: 1, keyNames: ['feeder'],
 *   valueColumns: 2, valueNames: ['temp', 'load'], blockRows: 4096, nonFinite: 'pass' });
 * for await (const row of rowStream) builder.push(row, fold);
 * builder.end(fold);
 */
export class RowArrayBlockBuilder {
  readonly #decoder: CopyBinaryDecoder;
  readonly #keyCount: number;
  readonly #fieldCount: number;
  readonly #keyNames: readonly string[];
  readonly #valueNames: readonly string[];
  #staging: Buffer = Buffer.allocUnsafe(STAGING_BYTES);
  #fill = 0;
  #rowsPushed = 0;

  /**
   * @param options - column layout, block size and non-finite policy, as for the decoder
   * @throws RangeError when the options are inconsistent
   */
  constructor(options: CopyBinaryDecoderOptions) {
    this.#decoder = new CopyBinaryDecoder(options);
    this.#keyCount = options.keyColumns;
    this.#fieldCount = options.keyColumns + options.valueColumns;
    this.#keyNames = [...options.keyNames];
    this.#valueNames = [...options.valueNames];
    HEADER.copy(this.#staging, 0);
    this.#fill = HEADER.length;
  }

  /** Key id → key values; see {@link CopyBinaryDecoder.keyTable}. */
  get keyTable(): ReadonlyArray<ReadonlyArray<string | null>> {
    return this.#decoder.keyTable;
  }

  /** Per value column: NULLs among skipped rows; see {@link CopyBinaryDecoder.nullCounts}. */
  get nullCounts(): readonly number[] {
    return this.#decoder.nullCounts;
  }

  /** Per value column: non-finite values among skipped rows. */
  get nonFiniteCounts(): readonly number[] {
    return this.#decoder.nonFiniteCounts;
  }

  /** Rows that reached the decoder so far (staged rows are counted once they are flushed). */
  get rowsRead(): number {
    return this.#decoder.rowsRead;
  }

  /** Rows delivered to `onBlock` so far. */
  get rowsEmitted(): number {
    return this.#decoder.rowsEmitted;
  }

  /** Rows skipped because a value column was NULL. */
  get rowsSkippedNull(): number {
    return this.#decoder.rowsSkippedNull;
  }

  /** Rows skipped because a value was NaN or ±Infinity (with `nonFinite: 'skip'`). */
  get rowsSkippedNonFinite(): number {
    return this.#decoder.rowsSkippedNonFinite;
  }

  /**
   * Adds one row; may call `onBlock` for blocks that fill up.
   *
   * @param row - K key cells (string or null) then V value cells (number or null)
   * @throws CopyDecodeError for a row of the wrong width, a key that is not text or a value
   *   that is not a number (the column was not cast to float8)
   */
  push(row: readonly unknown[], onBlock: (block: DecodedBlock) => void): void {
    const rowNumber = this.#rowsPushed + 1;
    if (row.length !== this.#fieldCount) {
      throw new CopyDecodeError(
        `row ${rowNumber} has ${row.length} columns, expected K+V = ${this.#fieldCount}; the query's select list does not match`,
      );
    }
    let bytes = 2;
    for (let f = 0; f < this.#fieldCount; f++) bytes += 4 + this.#fieldBytes(row[f], f, rowNumber);
    this.#reserve(bytes, onBlock);
    const buf = this.#staging;
    let p = buf.writeInt16BE(this.#fieldCount, this.#fill);
    for (let f = 0; f < this.#fieldCount; f++) {
      const cell = row[f];
      if (cell === null) {
        p = buf.writeInt32BE(NULL_LENGTH, p);
      } else if (f < this.#keyCount) {
        const at = p + 4;
        const length = buf.write(cell as string, at, 'utf8');
        p = buf.writeInt32BE(length, p) + length;
      } else {
        p = buf.writeInt32BE(FLOAT8_BYTES, p);
        p = buf.writeDoubleBE(cell as number, p);
      }
    }
    this.#fill = p;
    this.#rowsPushed = rowNumber;
  }

  /**
   * Declares the rows finished and emits the last, partial block.
   *
   * @param onBlock - receives the remaining blocks; must use them before returning
   */
  end(onBlock: (block: DecodedBlock) => void): void {
    this.#reserve(2, onBlock);
    // Field count −1 is the end-of-data trailer.
    this.#fill = this.#staging.writeInt16BE(-1, this.#fill);
    this.#flush(onBlock);
    this.#decoder.end(onBlock);
  }

  /** Encoded body length of one cell (0 for NULL), after checking its type. */
  #fieldBytes(cell: unknown, field: number, rowNumber: number): number {
    if (cell === null) return 0;
    if (field < this.#keyCount) {
      if (typeof cell !== 'string') {
        const name = this.#keyNames[field] ?? `key ${field + 1}`;
        throw new CopyDecodeError(`key column "${name}" in row ${rowNumber} is not text; cast it to text in the query`, {
          column: name,
        });
      }
      return Buffer.byteLength(cell, 'utf8');
    }
    if (typeof cell !== 'number') {
      const name = this.#valueNames[field - this.#keyCount] ?? `value ${field - this.#keyCount + 1}`;
      throw new CopyDecodeError(
        `value column "${name}" is not float8 (row ${rowNumber} has a ${typeof cell}); ` +
          `cast it to float8 in the query (e.g. (${name})::float8)`,
        { column: name },
      );
    }
    return FLOAT8_BYTES;
  }

  /** Makes room for `bytes` more staged bytes, flushing (or growing, for a huge row) first. */
  #reserve(bytes: number, onBlock: (block: DecodedBlock) => void): void {
    if (this.#fill + bytes <= this.#staging.length) return;
    this.#flush(onBlock);
    if (bytes > this.#staging.length) this.#staging = Buffer.allocUnsafe(Math.max(bytes, 2 * this.#staging.length));
  }

  #flush(onBlock: (block: DecodedBlock) => void): void {
    if (this.#fill === 0) return;
    const fill = this.#fill;
    this.#fill = 0;
    this.#decoder.write(this.#staging.subarray(0, fill), onBlock);
  }
}
