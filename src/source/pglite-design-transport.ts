import type { PGlite, ParserOptions } from '@electric-sql/pglite';
import { escapeLiteral } from 'pg';

import type { SqlTemplate } from '../plan/sql-template.js';
import type { CopyPieces } from './copy-binary-decoder.js';
import type { DesignTransport } from './design-transport.js';
import { pgliteQuery } from './pglite-query.js';

/** Bytes of COPY output handed to the decoder at a time. */
const CHUNK_BYTES = 64 * 1024;
/** Rows fetched per round trip of the row-mode cursor (as the server path's QueryStream). */
const ROWS_PER_FETCH = 4096;

let cursorCount = 0;

/**
 * The embedded database's half of a design read (see readDesignFrom); the caller holds the
 * session for the whole read.
 *
 * Copy mode runs `COPY (query) TO '/dev/blob' (FORMAT binary)`: PGlite has no COPY TO STDOUT
 * stream, it collects what is written to its virtual `/dev/blob` device and returns it as a
 * Blob once the statement has finished. The values are inlined with pg's `escapeLiteral`, as
 * on the server path, and the Blob is handed to the decoder in 64 KiB slices. The whole output
 * is in memory at once (about 12 bytes per value): the price of an in-process database.
 *
 * Row mode binds the parameters and reads through a cursor, `FETCH 4096` at a time, so memory
 * stays bounded as on the server path; a read outside a transaction gets its own
 * BEGIN … COMMIT (a cursor lives in a transaction).
 *
 * @param designParsers - float8 as numbers, everything else as text (designReadParsers)
 */
export function pgliteDesignTransport(pglite: PGlite, designParsers: ParserOptions): DesignTransport {
  return {
    async exec(sql) {
      await pglite.exec(sql);
    },
    copyChunks: (query, signal) => copyChunks(pglite, query, signal),
    rowArrays: (query, signal) => rowArrays(pglite, designParsers, query, signal),
  };
}

async function* copyChunks(pglite: PGlite, query: SqlTemplate, signal?: AbortSignal): AsyncGenerator<CopyPieces, void, undefined> {
  let blob: Blob | undefined;
  try {
    const result = await pgliteQuery(pglite, `COPY (${query.toInline(escapeLiteral)}\n) TO '/dev/blob' (FORMAT binary)`);
    blob = result.blob;
  } catch (error) {
    // A COPY that fails part way leaves what it wrote on PGlite's blob device (0.5.17), and
    // PGlite hands it out with the result of whatever statement runs next: were that another
    // COPY, its output would start with half a table. Taken off the device here.
    await pglite._getWrittenBlob();
    throw error;
  }
  if (blob === undefined) throw new Error('the embedded database returned no COPY output');
  for (let at = 0; at < blob.size; at += CHUNK_BYTES) {
    signal?.throwIfAborted();
    const bytes = new Uint8Array(await blob.slice(at, at + CHUNK_BYTES).arrayBuffer());
    yield { bytes, ranges: Int32Array.of(0, bytes.byteLength), count: 1 };
  }
}

async function* rowArrays(
  pglite: PGlite,
  parsers: ParserOptions,
  query: SqlTemplate,
  signal?: AbortSignal,
): AsyncGenerator<unknown[], void, undefined> {
  const { text, values } = query.toBound();
  const cursor = `rowfold_design_${++cursorCount}`;
  const ownTransaction = !pglite.isInTransaction();
  if (ownTransaction) await pglite.exec('BEGIN');
  let finished = false;
  try {
    await pgliteQuery(pglite, `DECLARE ${cursor} NO SCROLL CURSOR FOR ${text}`, values);
    for (;;) {
      signal?.throwIfAborted();
      const batch = await pgliteQuery<unknown[]>(pglite, `FETCH FORWARD ${ROWS_PER_FETCH} FROM ${cursor}`, [], {
        rowMode: 'array',
        parsers,
      });
      for (const row of batch.rows) yield row;
      if (batch.rows.length < ROWS_PER_FETCH) break;
    }
    await pglite.exec(`CLOSE ${cursor}`);
    finished = true;
  } finally {
    // Also reached when the consumer stops early (a sink error) or the query failed.
    if (ownTransaction) await pglite.exec(finished ? 'COMMIT' : 'ROLLBACK');
    else if (!finished) await pglite.exec(`CLOSE ${cursor}`).catch(() => undefined);
  }
}
