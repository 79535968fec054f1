import { Kysely, PostgresDialect } from 'kysely';
import type { Dialect } from 'kysely';
import type pg from 'pg';
import { copyingClient } from '../common/copy-from-input.js';
import type { StoreDatabase } from './store-database.js';

/**
 * A kysely instance over a node-postgres pool (or any kysely dialect, such as the
 * embedded database's), typed with the result schema.
 *
 * `db.destroy()` ends the pool: destroy the instance instead of ending the pool yourself.
 *
 * @example
 * const db = createStoreDb(new pg.Pool({ connectionString: url }));
 * try { await migrate(db); } finally { await db.destroy(); }
 */
export function createStoreDb(source: pg.Pool | Dialect): Kysely<StoreDatabase> {
  // The pool's clients run the store's binary COPY files (see COPY_FROM_INPUT) in the transaction.
  const dialect =
    'createDriver' in source
      ? source
      : new PostgresDialect({ pool: { connect: async () => copyingClient(await source.connect()), end: () => source.end() } });
  return new Kysely<StoreDatabase>({ dialect });
}
