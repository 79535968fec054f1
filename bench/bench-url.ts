const HOST = process.env['PGHOST'] ?? '127.0.0.1';
const USER = process.env['PGUSER'] ?? 'postgres';
/** The database every bench table lives in. */
export const BENCH_DB = 'rowfold_bench';

/**
 * Result schema of the bench's fits: ROWFOLD_BENCH_SCHEMA, default `rowfold_bench`. The bench
 * database is shared, and a rowfold of another version refuses a schema migrated past what it
 * knows; set it per checkout when several run benches on one machine.
 */
export const BENCH_SCHEMA = process.env['ROWFOLD_BENCH_SCHEMA'] ?? 'rowfold_bench';

/** URL of the bench database (or another database of the same server). */
export function benchUrl(db = BENCH_DB): string {
  return `postgres://${encodeURIComponent(USER)}@${HOST}:${process.env['PGPORT'] ?? 5432}/${db}`;
}

