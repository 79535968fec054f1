import { Buffer } from 'node:buffer';

import type { CopyPieces } from './copy-binary-decoder.js';

/** Binary COPY file signature (11 bytes), then flags and header-extension length (int32 each). */
const SIGNATURE = Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1');
const HEADER_BYTES = SIGNATURE.length + 8;

/**
 * One decoded row of a scoring read. Valid only inside the callback: the byte ranges point
 * into a buffer that is reused.
 */
export interface ScoreRow {
  /** Bytes that hold the pass-through fields. */
  readonly bytes: Buffer;
  /** Per pass-through field: offset of its value in `bytes`, and its length (−1 for NULL). */
  readonly passStart: Int32Array;
  readonly passLength: Int32Array;
  /** Per text field, its value (null for NULL). */
  readonly texts: (string | null)[];
  /** Per float8 field, its value (NaN when NULL; see `isNull`). */
  readonly values: Float64Array;
  readonly isNull: Uint8Array;
}

/** What a scoring read's stream holds: P pass-through fields, then T text fields, then F float8 fields. */
export interface ScoreRowLayout {
  readonly passThrough: number;
  readonly texts: number;
  readonly floats: number;
}

/**
 * Decodes `COPY (…) TO STDOUT (FORMAT binary)` output whose rows are P fields passed on
 * untouched, T text fields and F float8 fields; bytes in, rows out (never a socket). Pieces may
 * be cut anywhere: a row that spans two pieces is carried over in a buffer that grows only to
 * the longest row.
 */
export class ScoreRowDecoder {
  private readonly layout: ScoreRowLayout;
  private carry: Buffer = Buffer.alloc(64 * 1024);
  private view = new DataView(this.carry.buffer, this.carry.byteOffset, this.carry.byteLength);
  private carryLength = 0;
  private headerSeen = false;
  private ended = false;
  private readonly row: ScoreRow;
  /** Rows decoded so far. */
  rows = 0;

  constructor(layout: ScoreRowLayout) {
    this.layout = layout;
    this.row = {
      bytes: this.carry,
      passStart: new Int32Array(layout.passThrough),
      passLength: new Int32Array(layout.passThrough),
      texts: new Array<string | null>(layout.texts).fill(null),
      values: new Float64Array(layout.floats),
      isNull: new Uint8Array(layout.floats),
    };
  }

  /** Decodes the pieces; `onRow` sees every complete row in order. */
  write(pieces: CopyPieces, onRow: (row: ScoreRow) => void): void {
    for (let i = 0; i < pieces.count; i++) {
      const from = pieces.ranges[2 * i]!;
      const to = pieces.ranges[2 * i + 1]!;
      if (to > from) this.append(pieces.bytes, from, to, onRow);
    }
  }

  /** Checks that the stream ended with its trailer and nothing is left over. */
  end(): void {
    if (!this.ended) throw new Error(`the COPY stream ended without its trailer (${this.carryLength} bytes left over)`);
  }

  private append(bytes: Uint8Array, from: number, to: number, onRow: (row: ScoreRow) => void): void {
    const n = to - from;
    if (this.carryLength + n > this.carry.length) {
      // Consumed rows were shifted out, so what is left is one partial row: grow to hold it and the piece.
      const grown = Buffer.alloc(Math.max(this.carry.length * 2, this.carryLength + n));
      this.carry.copy(grown, 0, 0, this.carryLength);
      this.carry = grown;
      this.view = new DataView(grown.buffer, grown.byteOffset, grown.byteLength);
      (this.row as { bytes: Buffer }).bytes = grown;
    }
    this.carry.set(bytes.subarray(from, to), this.carryLength);
    this.carryLength += n;
    const used = this.decode(onRow);
    if (used > 0) {
      this.carry.copyWithin(0, used, this.carryLength);
      this.carryLength -= used;
    }
  }

  /** Decodes the complete rows in the carry buffer; returns the bytes consumed. */
  private decode(onRow: (row: ScoreRow) => void): number {
    const buf = this.carry;
    const view = this.view;
    const end = this.carryLength;
    let at = 0;
    if (!this.headerSeen) {
      if (end < HEADER_BYTES) return 0;
      if (!buf.subarray(0, SIGNATURE.length).equals(SIGNATURE)) throw new Error('the COPY stream does not start with the binary COPY signature');
      const extension = buf.readInt32BE(SIGNATURE.length + 4);
      if (end < HEADER_BYTES + extension) return 0;
      at = HEADER_BYTES + extension;
      this.headerSeen = true;
    }
    const { passThrough, texts, floats } = this.layout;
    const fields = passThrough + texts + floats;
    const row = this.row;
    for (;;) {
      if (this.ended) {
        if (at < end) throw new Error('bytes after the COPY trailer');
        return at;
      }
      if (end - at < 2) return at;
      const count = view.getInt16(at);
      if (count === -1) {
        this.ended = true;
        at += 2;
        continue;
      }
      if (count !== fields) throw new Error(`a COPY row has ${count} fields, expected ${fields}`);
      // One pass over the row, each field checked to be whole before it is read; a row cut by
      // the piece's end is left for the next piece (what was decoded of it is overwritten then).
      let p = at + 2;
      for (let f = 0; f < passThrough; f++) {
        if (end - p < 4) return at;
        const len = view.getInt32(p);
        if (len > 0 && end - p - 4 < len) return at;
        row.passStart[f] = p + 4;
        row.passLength[f] = len;
        p += 4 + (len > 0 ? len : 0);
      }
      for (let f = 0; f < texts; f++) {
        if (end - p < 4) return at;
        const len = view.getInt32(p);
        if (len > 0 && end - p - 4 < len) return at;
        row.texts[f] = len < 0 ? null : buf.toString('utf8', p + 4, p + 4 + len);
        p += 4 + (len > 0 ? len : 0);
      }
      for (let f = 0; f < floats; f++) {
        if (end - p < 4) return at;
        const len = view.getInt32(p);
        if (len < 0) {
          row.values[f] = NaN;
          row.isNull[f] = 1;
          p += 4;
        } else {
          if (len !== 8) throw new Error(`a float8 field has ${len} bytes`);
          if (end - p < 12) return at;
          row.values[f] = view.getFloat64(p + 4);
          row.isNull[f] = 0;
          p += 12;
        }
      }
      this.rows++;
      onRow(row);
      at = p;
    }
  }
}
