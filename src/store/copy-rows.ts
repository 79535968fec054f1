import { Buffer } from 'node:buffer';
import { CompiledQuery } from 'kysely';
import type { Kysely } from 'kysely';
import { COPY_FROM_INPUT } from '../common/copy-from-input.js';
import type { StoreDatabase } from './store-database.js';

/** Element type ids (pg_type.oid) of the arrays a binary COPY row carries. */
const OID = { bool: 16, int4: 23, text: 25, float8: 701 } as const;

/**
 * The rows of one binary COPY file (`COPY … FROM … (FORMAT binary)`), written field by field
 * in the binary forms of the columns' types: numbers travel as their IEEE bits (no text to
 * print in the client or parse in the server, and exact by construction).
 */
export class CopyRows {
  private buf: Buffer;
  private at = 0;
  private readonly fields: number;
  /** Rows written so far. */
  rows = 0;

  constructor(fields: number, capacity = 1 << 16) {
    this.fields = fields;
    this.buf = Buffer.alloc(Math.max(capacity, 64));
    // Signature, flags, header extension length.
    this.buf.write('PGCOPY\n\xff\r\n\0', 0, 'latin1');
    this.buf.writeInt32BE(0, 11);
    this.buf.writeInt32BE(0, 15);
    this.at = 19;
  }

  private ensure(bytes: number): void {
    if (this.at + bytes <= this.buf.length) return;
    const next = Buffer.alloc(Math.max(this.buf.length * 2, this.at + bytes));
    this.buf.copy(next, 0, 0, this.at);
    this.buf = next;
  }

  beginRow(): void {
    this.ensure(2);
    this.buf.writeInt16BE(this.fields, this.at);
    this.at += 2;
    this.rows++;
  }

  nullField(): void {
    this.ensure(4);
    this.buf.writeInt32BE(-1, this.at);
    this.at += 4;
  }

  text(value: string | null): void {
    if (value === null) return this.nullField();
    const length = Buffer.byteLength(value, 'utf8');
    this.ensure(4 + length);
    this.buf.writeInt32BE(length, this.at);
    this.buf.write(value, this.at + 4, length, 'utf8');
    this.at += 4 + length;
  }

  /** jsonb: version 1, then the JSON text. */
  jsonb(json: string | null): void {
    if (json === null) return this.nullField();
    const length = Buffer.byteLength(json, 'utf8');
    this.ensure(5 + length);
    this.buf.writeInt32BE(length + 1, this.at);
    this.buf[this.at + 4] = 1;
    this.buf.write(json, this.at + 5, length, 'utf8');
    this.at += 5 + length;
  }

  bool(value: boolean): void {
    this.ensure(5);
    this.buf.writeInt32BE(1, this.at);
    this.buf[this.at + 4] = value ? 1 : 0;
    this.at += 5;
  }

  int4(value: number, what: string): void {
    if (!Number.isSafeInteger(value) || value < -2147483648 || value > 2147483647) throw new RangeError(`${what} must be a whole number, got ${value}`);
    this.ensure(8);
    this.buf.writeInt32BE(4, this.at);
    this.buf.writeInt32BE(value, this.at + 4);
    this.at += 8;
  }

  /** A bigint, a safe integer (two 32-bit halves: no BigInt per row). */
  int8(value: number, what: string): void {
    if (!Number.isSafeInteger(value)) throw new RangeError(`${what} must be a whole number, got ${value}`);
    this.ensure(12);
    this.buf.writeInt32BE(8, this.at);
    this.buf.writeInt32BE(Math.floor(value / 4294967296), this.at + 4);
    this.buf.writeUInt32BE(value >>> 0, this.at + 8);
    this.at += 12;
  }

  /** A float8 (NaN, ±Infinity and -0 kept), or NULL. */
  float8(value: number | null): void {
    if (value === null) return this.nullField();
    if (typeof value !== 'number') throw new TypeError(`expected a number or null, got ${typeof value}`);
    this.ensure(12);
    this.buf.writeInt32BE(8, this.at);
    this.buf.writeDoubleBE(value, this.at + 4);
    this.at += 12;
  }

  /** Header of a one-dimensional array of `n` elements (empty: no dimensions). */
  private arrayHeader(n: number, oid: number, hasNull: boolean, elementBytes: number): void {
    const head = n === 0 ? 12 : 20;
    this.ensure(4 + head + elementBytes);
    const start = this.at;
    this.buf.writeInt32BE(head + elementBytes, start);
    this.buf.writeInt32BE(n === 0 ? 0 : 1, start + 4);
    this.buf.writeInt32BE(hasNull ? 1 : 0, start + 8);
    this.buf.writeInt32BE(oid, start + 12);
    if (n > 0) {
      this.buf.writeInt32BE(n, start + 16);
      this.buf.writeInt32BE(1, start + 20);
    }
    this.at = start + 4 + head;
  }

  /** float8[] of `n` elements `get(0..n-1)`; null elements are NULL. */
  float8Array(n: number, get: (i: number) => number | null): void {
    let nulls = 0;
    for (let i = 0; i < n; i++) if (get(i) === null) nulls++;
    this.arrayHeader(n, OID.float8, nulls > 0, nulls * 4 + (n - nulls) * 12);
    for (let i = 0; i < n; i++) {
      const v = get(i);
      if (v === null) {
        this.buf.writeInt32BE(-1, this.at);
        this.at += 4;
      } else {
        if (typeof v !== 'number') throw new TypeError(`expected a number or null, got ${typeof v}`);
        this.buf.writeInt32BE(8, this.at);
        this.buf.writeDoubleBE(v, this.at + 4);
        this.at += 12;
      }
    }
  }

  int4Array(values: readonly number[], what: string): void {
    this.arrayHeader(values.length, OID.int4, false, values.length * 8);
    for (const v of values) {
      if (!Number.isSafeInteger(v) || v < -2147483648 || v > 2147483647) throw new RangeError(`${what} must be whole numbers, got ${v}`);
      this.buf.writeInt32BE(4, this.at);
      this.buf.writeInt32BE(v, this.at + 4);
      this.at += 8;
    }
  }

  boolArray(n: number, get: (i: number) => boolean): void {
    this.arrayHeader(n, OID.bool, false, n * 5);
    for (let i = 0; i < n; i++) {
      this.buf.writeInt32BE(1, this.at);
      this.buf[this.at + 4] = get(i) ? 1 : 0;
      this.at += 5;
    }
  }

  textArray(values: readonly string[]): void {
    let bytes = 0;
    for (const v of values) bytes += 4 + Buffer.byteLength(v, 'utf8');
    this.arrayHeader(values.length, OID.text, false, bytes);
    for (const v of values) {
      const length = Buffer.byteLength(v, 'utf8');
      this.buf.writeInt32BE(length, this.at);
      this.buf.write(v, this.at + 4, length, 'utf8');
      this.at += 4 + length;
    }
  }

  /** The finished file (trailer added); the writer is done. */
  finish(): Uint8Array {
    this.ensure(2);
    this.buf.writeInt16BE(-1, this.at);
    this.at += 2;
    return this.buf.subarray(0, this.at);
  }
}

/**
 * Copies a binary COPY file into `schema.table (columns)` on the transaction `trx` (both
 * dialects run a `COPY … FROM STDIN` statement given the file as its one parameter, see
 * COPY_FROM_INPUT); resolves when the server has taken every row.
 */
export async function copyRows(
  trx: Kysely<StoreDatabase>,
  schema: string,
  table: string,
  columns: readonly string[],
  data: Uint8Array,
): Promise<void> {
  const id = (s: string) => `"${s.replace(/"/g, '""')}"`;
  const text = `copy ${id(schema)}.${id(table)} (${columns.map(id).join(', ')}) ${COPY_FROM_INPUT}`;
  await trx.executeQuery(CompiledQuery.raw(text, [data]));
}
