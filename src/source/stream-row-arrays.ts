import { addAbortSignal } from 'node:stream';

import type pg from 'pg';
import QueryStream from 'pg-query-stream';

import type { SqlTemplate } from '../plan/sql-template.js';

/** Rows fetched per round trip of the cursor. */
const ROWS_PER_FETCH = 4096;
const FLOAT8_OID = 701;

/** The one part of pg's type registry a result needs: a text parser per type OID. */
interface TextTypeParsers {
  getTypeParser(oid: number, format?: string): (text: string) => unknown;
}

const asText = (text: string): string => text;
// float8 output is 'NaN', 'Infinity', '-Infinity' or a numeral, all of which Number() reads
// exactly; with extra_float_digits > 0 the numeral round-trips to the very same double.
const asFloat8 = (text: string): number => Number(text);

/**
 * float8 columns as numbers, every other column as its text. The reader's own parsers, so
 * that a parser set globally by the application (pg.types.setTypeParser) cannot change what
 * is read, and a value column that is not float8 arrives as text and is reported, not
 * silently converted.
 */
const DESIGN_TYPES: TextTypeParsers = {
  getTypeParser: (oid) => (oid === FLOAT8_OID ? asFloat8 : asText),
};

/**
 * The rows of `query` as arrays, through a cursor with bind parameters: the fallback for
 * servers that cannot run `COPY (…) TO STDOUT`. Pull-based: the next batch is fetched only
 * when the consumer has taken the previous one. Destroying the stream (a consumer that stops
 * early) closes the cursor, after which the client is usable again.
 *
 * When the connection is lost (the backend terminated, the socket reset), pg-query-stream
 * destroys itself with the error but its cursor then waits for a ReadyForQuery that never
 * comes, so the stream would neither fail nor end (node-postgres issues #2588, #2642). The
 * client's own `'error'`/`'end'` events are therefore watched while reading, and fail the
 * stream with the database error it was destroyed with (e.g. SQLSTATE 57P01) or else the
 * connection error.
 */
export async function* streamRowArrays(
  client: pg.ClientBase,
  query: SqlTemplate,
  signal?: AbortSignal,
): AsyncGenerator<unknown[], void, undefined> {
  const { text, values } = query.toBound();
  const stream = client.query(new QueryStream(text, values, { rowMode: 'array', batchSize: ROWS_PER_FETCH, types: DESIGN_TYPES }));
  if (signal !== undefined) addAbortSignal(signal, stream);
  let failed = false;
  const failStream = (connectionError: Error): void => {
    if (failed || stream.readableEnded) return;
    failed = true;
    // Emitted rather than passed to destroy(): destroy waits on the hung cursor close.
    stream.emit('error', stream.errored ?? connectionError);
  };
  const onClientError = (error: Error): void => failStream(error);
  const onClientEnd = (): void => failStream(new Error('the database connection ended while rows were being read'));
  client.on('error', onClientError);
  client.on('end', onClientEnd);
  try {
    for await (const row of stream as AsyncIterable<unknown[]>) yield row;
  } finally {
    client.removeListener('error', onClientError);
    client.removeListener('end', onClientEnd);
    stream.destroy();
  }
}
