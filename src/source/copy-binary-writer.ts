import { Buffer } from 'node:buffer';

const SIGNATURE = Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1');

/**
 * Builds `COPY … FROM STDIN (FORMAT binary)` input row by row into a buffer of bounded size:
 * the caller takes the bytes (`take`) whenever `size` passes its batch and sends them. Each
 * taken batch is a whole COPY file (signature, rows, trailer), so batches can go as separate
 * COPY statements of one transaction.
 *
 * @example
 * const w = new CopyBinaryWriter(3);
 * w.beginRow(); w.text('F01'); w.int8(7); w.float8(1.5);
 * await send(w.take());
 */
export class CopyBinaryWriter {
  private buf: Buffer;
  private view: DataView;
  private at = 0;
  private readonly fields: number;
  /** Rows in the current batch. */
  rows = 0;

  constructor(fields: number, capacity = 1 << 20) {
    this.fields = fields;
    this.buf = Buffer.alloc(Math.max(capacity, 64));
    this.view = new DataView(this.buf.buffer, this.buf.byteOffset, this.buf.byteLength);
    this.start();
  }

  /** Bytes in the current batch. */
  get size(): number {
    return this.at;
  }

  beginRow(): void {
    this.ensure(2);
    this.buf.writeInt16BE(this.fields, this.at);
    this.at += 2;
    this.rows++;
  }

  /** A field's bytes as they are (binary form of the column's type), or NULL for a negative length. */
  raw(bytes: Uint8Array, start: number, length: number): void {
    if (length < 0) return this.nullField();
    this.ensure(4 + length);
    this.buf.writeInt32BE(length, this.at);
    const to = this.at + 4;
    // Short fields (a key, an id) byte by byte: a subarray per row and field is garbage per row.
    if (length <= 32) for (let i = 0; i < length; i++) this.buf[to + i] = bytes[start + i]!;
    else this.buf.set(bytes.subarray(start, start + length), to);
    this.at += 4 + length;
  }

  text(value: string): void {
    const length = Buffer.byteLength(value, 'utf8');
    this.ensure(4 + length);
    this.buf.writeInt32BE(length, this.at);
    this.buf.write(value, this.at + 4, 'utf8');
    this.at += 4 + length;
  }

  /** A bigint column's value, a safe integer (written as two 32-bit halves: no BigInt per row). */
  int8(value: number): void {
    this.ensure(12);
    const v = this.view;
    v.setInt32(this.at, 8);
    v.setInt32(this.at + 4, Math.floor(value / 4294967296));
    v.setUint32(this.at + 8, value >>> 0);
    this.at += 12;
  }

  /** A float8, or NULL for NaN (a score that does not exist, as a standard error without inference). */
  float8OrNull(value: number): void {
    if (Number.isNaN(value)) return this.nullField();
    this.ensure(12);
    this.view.setInt32(this.at, 8);
    this.view.setFloat64(this.at + 4, value);
    this.at += 12;
  }

  nullField(): void {
    this.ensure(4);
    this.buf.writeInt32BE(-1, this.at);
    this.at += 4;
  }

  /** The batch as a whole COPY file (trailer added); the writer starts a new batch. */
  take(): Uint8Array {
    this.ensure(2);
    this.buf.writeInt16BE(-1, this.at);
    this.at += 2;
    const out = Uint8Array.prototype.slice.call(this.buf, 0, this.at);
    this.at = 0;
    this.rows = 0;
    this.start();
    return out;
  }

  private start(): void {
    SIGNATURE.copy(this.buf, 0);
    this.buf.writeInt32BE(0, SIGNATURE.length);
    this.buf.writeInt32BE(0, SIGNATURE.length + 4);
    this.at = SIGNATURE.length + 8;
  }

  private ensure(n: number): void {
    if (this.at + n <= this.buf.length) return;
    const grown = Buffer.alloc(Math.max(this.buf.length * 2, this.at + n));
    this.buf.copy(grown, 0, 0, this.at);
    this.buf = grown;
    this.view = new DataView(grown.buffer, grown.byteOffset, grown.byteLength);
  }
}
