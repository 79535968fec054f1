import type pg from 'pg';
import { copyInto } from './copy-in.js';

/**
 * How the result store hands a kysely dialect a binary COPY file: the statement
 * `COPY table (columns) FROM STDIN (FORMAT binary)`, ending in these words, with the whole
 * file as its only parameter (a Uint8Array). Both dialects (server and embedded) recognise it
 * and run the COPY on the connection of the transaction, so rows copied this way land in the
 * same transaction as every other statement of it.
 */
export const COPY_FROM_INPUT = 'from stdin (format binary)';

/** The file of a statement in the form of {@link COPY_FROM_INPUT}, or null for any other statement. */
export function copyFromInput(text: string, parameters: readonly unknown[]): Uint8Array | null {
  if (parameters.length !== 1 || !(parameters[0] instanceof Uint8Array)) return null;
  if (!/^copy\s/i.test(text) || !text.endsWith(COPY_FROM_INPUT)) return null;
  return parameters[0];
}

/** The kysely-facing wrapper of each pool client (one per client, so kysely's own cache of connections holds). */
const wrapped = new WeakMap<pg.PoolClient, pg.PoolClient>();

/**
 * A pool client for kysely that runs a statement in the form of COPY_FROM_INPUT (the result
 * store's binary COPY files) as a COPY FROM STDIN on the same connection; every other call
 * goes to the client as it is.
 */
export function copyingClient(client: pg.PoolClient): pg.PoolClient {
  let w = wrapped.get(client);
  if (w === undefined) {
    w = new Proxy(client, {
      get(target, prop, receiver) {
        if (prop !== 'query') {
          const v: unknown = Reflect.get(target, prop, receiver);
          return typeof v === 'function' ? (v as (...a: unknown[]) => unknown).bind(target) : v;
        }
        return (...args: unknown[]) => {
          const [text, values] = args;
          const data = typeof text === 'string' && Array.isArray(values) ? copyFromInput(text, values) : null;
          if (data === null) return (target.query as (...a: unknown[]) => unknown)(...args);
          return copyInto(target, text as string, data).then((n) => ({ command: 'COPY', rowCount: n, rows: [] }));
        };
      },
    });
    wrapped.set(client, w);
  }
  return w;
}
