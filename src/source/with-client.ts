import type pg from 'pg';

/**
 * Runs `fn` with a client checked out of `pool` and always gives the client back.
 *
 * When `fn` throws, or the client reports a connection error while it is checked out, the
 * client is released with the error (`release(err)`), which makes the pool discard it instead
 * of handing a broken connection (a half-read COPY, a terminated backend) to the next caller.
 * A healthy client that saw an ordinary query error is discarded too: a new connection costs
 * a few milliseconds, a poisoned one can hang a run.
 *
 * While `fn` runs, the client's `'error'` events are caught and recorded; pg-pool listens
 * only to idle clients, and an unheard `'error'` (the server ending the connection mid-query)
 * would crash the process.
 *
 * @example
 * const counts = await withClient(pool, (client) => readDesign(client, request, sink));
 */
export async function withClient<T>(pool: pg.Pool, fn: (client: pg.PoolClient) => Promise<T>): Promise<T> {
  const client = await pool.connect();
  let failure: Error | undefined;
  const onError = (error: Error): void => {
    failure ??= error;
  };
  client.on('error', onError);
  try {
    return await fn(client);
  } catch (error) {
    failure ??= error instanceof Error ? error : new Error(String(error));
    throw error;
  } finally {
    client.removeListener('error', onError);
    client.release(failure);
  }
}
