import type pg from 'pg';

import type { SqlTemplate } from '../plan/sql-template.js';
import { CopyBinaryDecoder, CopyDecodeError } from './copy-binary-decoder.js';
import type { CopyBinaryDecoderOptions, DecodedBlock, NonFinitePolicy } from './copy-binary-decoder.js';
import { DesignReadError } from './design-read-error.js';
import type { DesignTransport } from './design-transport.js';
import { maskSecrets } from '../common/mask-secrets.js';
import { RowArrayBlockBuilder } from './row-array-block-builder.js';
import { streamCopyChunks } from './stream-copy-chunks.js';
import { streamRowArrays } from './stream-row-arrays.js';

/** What {@link readDesign} reads, and how. */
export interface DesignReadRequest {
  /** Selects the K key columns (text) then the V value columns (float8). */
  readonly query: SqlTemplate;
  /** The K key column names, for messages. */
  readonly keyNames: readonly string[];
  /** The V value column names, for messages and counts. */
  readonly valueNames: readonly string[];
  /**
   * Per value column, its wire type (default all float8). Numeric columns arrive exact and
   * every value is emitted as a (high, low) pair; COPY mode only.
   */
  readonly valueTypes?: readonly ('float8' | 'numeric')[];
  /**
   * `'copy'`: `COPY (query) TO STDOUT (FORMAT binary)`, values inlined as literals (the fast
   * path). `'rows'`: the query with bind parameters through a cursor, for servers without
   * COPY TO STDOUT; slower, same blocks.
   */
  readonly mode: 'copy' | 'rows';
  /** Keep NaN/±Infinity (`'pass'`) or skip and count such rows (`'skip'`). */
  readonly nonFinite: NonFinitePolicy;
  /** Rows per block (default 4096). */
  readonly blockRows?: number;
  /** Stops the read; it then rejects with a {@link DesignReadError} of code `ABORT_ERR`. */
  readonly signal?: AbortSignal;
}

/** What was read: `rowsRead = rowsEmitted + rowsSkippedNull + rowsSkippedNonFinite`. */
export interface DesignReadCounts {
  rowsRead: number;
  rowsEmitted: number;
  rowsSkippedNull: number;
  rowsSkippedNonFinite: number;
  /** Skipped rows with a NULL, by value column name; only non-zero entries. */
  nullCounts: Record<string, number>;
  /** Skipped rows with a NaN or ±Infinity, by value column name; only non-zero entries. */
  nonFiniteCounts: Record<string, number>;
}

/**
 * Receives each block. The block's arrays and the key table belong to the reader: the block
 * is overwritten once the sink returns, the key table only grows. A sink that hands blocks
 * on to another thread copies them first and may return a promise: the reader then reads no
 * further bytes until it settles (backpressure), so memory stays bounded. An exception
 * thrown by the sink, or a rejection of its promise, stops the read and is rethrown
 * unchanged.
 */
export type BlockSink = (block: DecodedBlock, keyTable: ReadonlyArray<ReadonlyArray<string | null>>) => void | Promise<void>;

const DEFAULT_BLOCK_ROWS = 4096;

/**
 * The session settings a read relies on, set again because an application may have changed
 * them on this session. UTF8: binary COPY sends key text in the session's client encoding
 * and the decoder requires UTF-8 (pg asks for UTF8 at startup and decodes all text as such).
 * extra_float_digits 3: in row mode float8 travels as text; PostgreSQL ≥ 12 prints the
 * shortest text that round-trips exactly whenever extra_float_digits > 0 (the default is 1),
 * and older servers print 17 significant digits at 3, which also round-trips. So row mode
 * yields the very same doubles as binary COPY even if the session had lowered the setting.
 */
const SESSION_SETUP = "SET client_encoding TO 'UTF8'; SET extra_float_digits TO 3";

/**
 * Run once on a server session before the read. Binary COPY builds each value in its own
 * ~1 kB buffer in a per-row memory context that is reset after every row, so a wide row
 * (a few hundred columns) makes the backend malloc and free a few hundred kB per row. With
 * glibc's default trim threshold (128 kB), depending on what the session ran before, each
 * free can hand the top of the heap back to the kernel and the next row takes it again:
 * measured here on PostgreSQL 15, 1,000,000 rows × 201 float8 columns, a ctid-range or
 * filtered COPY ran at 7–15 MB/s with the backend spending its time in brk() (strace),
 * against 130–230 MB/s otherwise. glibc raises its mmap and trim thresholds when a block
 * that was mmapped is freed (the dynamic threshold described in mallopt(3), from memory):
 * one 4 MB allocation freed at the end of this statement lifts the trim threshold to 8 MB,
 * and the per-row blocks are then reused instead of returned. Harmless elsewhere.
 */
export const SERVER_ALLOCATOR_WARMUP = "SELECT length(repeat('x', 4000000))";

/**
 * Prepares a server session for a design read: the session settings (see SESSION_SETUP)
 * and the allocator warm-up (see SERVER_ALLOCATOR_WARMUP). readDesign calls it; so does
 * the benchmark's receive-only floor, so that both read under the same conditions.
 */
export async function prepareReadSession(client: pg.ClientBase): Promise<void> {
  await client.query(SESSION_SETUP);
  await client.query(SERVER_ALLOCATOR_WARMUP);
}

/**
 * Streams the rows of a design query into `sink` as {@link DecodedBlock}s: key ids into a
 * key table plus float8 values row-major. Rows with a NULL value are skipped and counted per
 * column; NaN/±Infinity are passed on or skipped and counted, as `req.nonFinite` says. Both
 * modes give identical blocks, key tables and counts. Memory stays bounded whatever the row
 * count: the stream is pulled only as fast as the sink consumes blocks.
 *
 * The read first sets the session's `client_encoding` to UTF8 and `extra_float_digits` to 3
 * (see above); both stay set on the client.
 *
 * On failure: a sink exception and a {@link CopyDecodeError} (wrong column types) are
 * rethrown as they are; anything from the database or the connection, and an abort, rejects
 * with a {@link DesignReadError} that keeps the SQLSTATE `code` and the original error as
 * `cause`. After any failure the client may be mid-stream (a COPY that was not read to the
 * end leaves it unusable): the caller must discard it with `release(err)` — or use
 * {@link withClient}, which does so — never return it to the pool with a plain `release()`.
 *
 * @example
 * const counts = await withClient(pool, (client) =>
 *   readDesign(client, { query, keyNames: ['feeder'], valueNames: ['temp', 'load'], mode: 'copy', nonFinite: 'pass' },
 *     (block, keyTable) => fit.consume(block, keyTable)),
 * );
 */
export function readDesign(client: pg.ClientBase, req: DesignReadRequest, sink: BlockSink): Promise<DesignReadCounts> {
  return readDesignFrom(
    {
      // exec runs the session setup, once per read; the warm-up only helps COPY, and as a
      // speed-up only it never fails a read.
      exec: async (sql) => {
        await client.query(sql);
        if (req.mode === 'copy') await client.query(SERVER_ALLOCATOR_WARMUP).catch(() => undefined);
      },
      copyChunks: (query, signal) => streamCopyChunks(client, query, signal),
      rowArrays: (query, signal) => streamRowArrays(client, query, signal),
    },
    req,
    sink,
  );
}

/**
 * {@link readDesign} over any back end: the same decoding, skipping, counting and error
 * reporting, whatever delivers the bytes or rows (a pg client, the embedded database).
 */
export async function readDesignFrom(transport: DesignTransport, req: DesignReadRequest, sink: BlockSink): Promise<DesignReadCounts> {
  if (req.mode !== 'copy' && req.mode !== 'rows') throw new RangeError(`mode must be 'copy' or 'rows', got ${String(req.mode)}`);
  const options: CopyBinaryDecoderOptions = {
    keyColumns: req.keyNames.length,
    keyNames: req.keyNames,
    valueColumns: req.valueNames.length,
    valueNames: req.valueNames,
    blockRows: req.blockRows ?? DEFAULT_BLOCK_ROWS,
    nonFinite: req.nonFinite,
    // Numeric columns are decoded exact, as (high, low) pairs, from COPY only.
    ...(req.mode === 'copy' && req.valueTypes !== undefined ? { valueTypes: req.valueTypes } : {}),
  };
  // Both validate the options (RangeError) before anything is sent.
  const reader = req.mode === 'copy' ? new CopyBinaryDecoder(options) : new RowArrayBlockBuilder(options);

  // Marks the sink's own exceptions so that they pass through unwrapped.
  let sinkFailure: { error: unknown } | undefined;
  let pending: Promise<void>[] = [];
  const onBlock = (block: DecodedBlock): void => {
    try {
      const wait = sink(block, reader.keyTable);
      if (wait !== undefined) pending.push(wait);
    } catch (error) {
      sinkFailure = { error };
      throw error;
    }
  };
  // Waits for the sink's promises of the chunk just decoded before the next is read.
  const settle = async (): Promise<void> => {
    if (pending.length === 0) return;
    const waits = pending;
    pending = [];
    try {
      await Promise.all(waits);
    } catch (error) {
      sinkFailure = { error };
      throw error;
    }
  };

  try {
    req.signal?.throwIfAborted();
    await transport.exec(SESSION_SETUP);
    req.signal?.throwIfAborted();
    if (reader instanceof CopyBinaryDecoder) {
      for await (const pieces of transport.copyChunks(req.query, req.signal)) {
        reader.writePieces(pieces, onBlock);
        if (pending.length > 0) await settle();
      }
    } else {
      for await (const row of transport.rowArrays(req.query, req.signal)) {
        reader.push(row, onBlock);
        if (pending.length > 0) await settle();
      }
    }
    reader.end(onBlock);
    await settle();
  } catch (error) {
    if (sinkFailure !== undefined && error === sinkFailure.error) throw error;
    if (error instanceof CopyDecodeError) throw error;
    throw readError(error, req, reader.rowsRead);
  }
  return {
    rowsRead: reader.rowsRead,
    rowsEmitted: reader.rowsEmitted,
    rowsSkippedNull: reader.rowsSkippedNull,
    rowsSkippedNonFinite: reader.rowsSkippedNonFinite,
    nullCounts: byName(req.valueNames, reader.nullCounts),
    nonFiniteCounts: byName(req.valueNames, reader.nonFiniteCounts),
  };
}

function byName(names: readonly string[], counts: readonly number[]): Record<string, number> {
  const out: Record<string, number> = {};
  names.forEach((name, j) => {
    const n = counts[j] ?? 0;
    if (n > 0) out[name] = (out[name] ?? 0) + n;
  });
  return out;
}

function readError(error: unknown, req: DesignReadRequest, rowsRead: number): DesignReadError {
  const { mode, signal } = req;
  const where = `(${mode} mode, after ${rowsRead} rows)`;
  if (signal?.aborted === true) {
    return new DesignReadError(`reading the design query was aborted ${where}`, {
      code: 'ABORT_ERR',
      mode,
      rowsRead,
      cause: signal.reason,
    });
  }
  const code = errorCode(error);
  const text = maskSecrets(error instanceof Error ? error.message : String(error));
  let message: string;
  if (code !== undefined && /^[0-9A-Z]{5}$/.test(code)) {
    message = `the design query failed ${where}: ${text} [SQLSTATE ${code}]`;
    // 57014: a timeout or cancel ended the statement; other class 57 (operator intervention) and
    // 08 (connection exception): the connection went. Nothing wrong with the fit either way.
    if (code === '57014') {
      message += '; statement_timeout (set for the role, the database or in PGOPTIONS) or a cancel request ended the read: raise the timeout for rowfold, or have each run read less';
    } else if (code === '55P03') {
      message += '; the read waited for a lock longer than lock_timeout allows (another session held the source, e.g. for DDL): rerun once it is free';
    } else if (/^(57|08)/.test(code)) {
      message += '; the connection was lost, so the read can simply be rerun';
    }
    if (code === '0A000' && mode === 'copy') {
      message += "; if this server cannot run COPY (...) TO STDOUT, read with mode 'rows' instead";
    }
  } else {
    message = `reading the design query failed ${where}: ${text}${code === undefined ? '' : ` [${code}]`}`;
  }
  return new DesignReadError(message, { code, mode, rowsRead, cause: error });
}

function errorCode(error: unknown): string | undefined {
  if (typeof error !== 'object' || error === null || !('code' in error)) return undefined;
  return typeof error.code === 'string' ? error.code : undefined;
}
