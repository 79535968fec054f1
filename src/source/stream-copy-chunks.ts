import type { Buffer } from 'node:buffer';
import { addAbortSignal } from 'node:stream';

import { escapeLiteral } from 'pg';
import type pg from 'pg';
import { to as copyTo } from 'pg-copy-streams';

import type { SqlTemplate } from '../plan/sql-template.js';

/**
 * The bytes of `COPY (query) TO STDOUT (FORMAT binary)`, chunk by chunk as they arrive.
 *
 * COPY takes no bind parameters, so the query's values are inlined as literals with pg's own
 * `escapeLiteral` (which doubles quotes and switches to an `E''` literal when there are
 * backslashes), never by searching the SQL text. The newline before `)` keeps a trailing
 * `--` comment in the user's SQL from swallowing the closing parenthesis.
 *
 * Pull-based: the connection's socket is read only as fast as chunks are consumed, so the
 * server is held back by TCP flow control rather than buffered in memory. The generator
 * destroys the stream when the consumer stops early, but the client is then still inside
 * the COPY and must be discarded by its owner.
 */
export async function* streamCopyChunks(
  client: pg.ClientBase,
  query: SqlTemplate,
  signal?: AbortSignal,
): AsyncGenerator<Buffer, void, undefined> {
  const stream = client.query(copyTo(`COPY (${query.toInline(escapeLiteral)}\n) TO STDOUT (FORMAT binary)`));
  if (signal !== undefined) addAbortSignal(signal, stream);
  try {
    for await (const chunk of stream as AsyncIterable<Buffer>) yield chunk;
  } finally {
    stream.destroy();
  }
}
