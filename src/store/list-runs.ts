import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { checkSchemaName } from './schema-name.js';
import type { RunStatus, StoreDatabase } from './store-database.js';

/** One past run of a fit, as `rowfold runs` shows it. */
export interface RunSummary {
  readonly runId: number;
  readonly status: RunStatus;
  readonly startedAt: Date;
  readonly endedAt: Date | null;
  /** Duration of reading, folding and solving (succeeded runs), else wall time to the end (failed runs); null while running. */
  readonly seconds: number | null;
  readonly rowsRead: number | null;
  readonly rowsUsed: number | null;
  readonly segments: number | null;
  readonly error: string | null;
}

/**
 * The newest `limit` runs of a fit, newest first. A schema without result tables (no fit
 * has run there) gives an empty list rather than an error.
 *
 * @example
 * const runs = await listRuns(db, 'rowfold', 'feeder_load', 20);
 */
export async function listRuns(db: Kysely<StoreDatabase>, schema: string, fitName: string, limit: number): Promise<RunSummary[]> {
  checkSchemaName(schema);
  const exists = await sql<{ found: boolean }>`select to_regclass(${`${quoteIdent(schema)}.runs`}) is not null as found`.execute(db);
  if (exists.rows[0]?.found !== true) return [];
  const rows = await db
    .withSchema(schema)
    .selectFrom('runs')
    .select([
      'run_id',
      'status',
      'started_at',
      'ended_at',
      'seconds',
      'rows_read',
      'rows_used',
      'segment_count',
      'error_message',
      sql<number | null>`extract(epoch from ended_at - started_at)::float8`.as('wall_seconds'),
    ])
    .where('fit_name', '=', fitName)
    .orderBy('run_id', 'desc')
    .limit(limit)
    .execute();
  return rows.map((r) => ({
    runId: Number(r.run_id),
    status: r.status,
    startedAt: new Date(r.started_at),
    endedAt: r.ended_at === null ? null : new Date(r.ended_at),
    seconds: r.seconds ?? (r.wall_seconds === null ? null : Number(r.wall_seconds)),
    rowsRead: r.rows_read === null ? null : Number(r.rows_read),
    rowsUsed: r.rows_used === null ? null : Number(r.rows_used),
    segments: r.segment_count,
    error: r.error_message,
  }));
}

function quoteIdent(name: string): string {
  return `"${name.replace(/"/g, '""')}"`;
}
