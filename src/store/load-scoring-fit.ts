import { checkSchemaName } from './schema-name.js';
import type { SqlRunner } from './sql-runner.js';
import { quoteName } from './sql-runner.js';
import type { StoredLevels } from './start-run.js';

/** What scoring needs of a fit's run: the spec it ran and the levels it fitted with. */
export interface ScoringFitRecord {
  readonly runId: number;
  readonly specText: string;
  /** Null for a run written before levels were recorded. */
  readonly levels: readonly StoredLevels[] | null;
}

/** Why a fit cannot score: it never ran, no run of it succeeded, or the named run is not usable. */
export type ScoringFitLookup =
  | { readonly ok: true; readonly fit: ScoringFitRecord }
  | { readonly ok: false; readonly reason: 'no_schema' | 'unknown_fit' | 'no_succeeded_run' | 'unknown_run' | 'run_not_succeeded'; readonly status?: string };

/**
 * Finds the run whose spec and levels a scoring uses: the named run (it must belong to the fit
 * and have succeeded), or else the fit's newest succeeded run.
 */
export async function loadScoringFit(db: SqlRunner, schema: string, fitName: string, runId: number | null): Promise<ScoringFitLookup> {
  checkSchemaName(schema);
  const s = quoteName(schema);
  const exists = await db.query(`select to_regclass($1) is not null`, [`${s}.runs`]);
  if (exists.rows[0]?.[0] !== true) return { ok: false, reason: 'no_schema' };
  const any = await db.query(`select count(*)::int from ${s}.runs where fit_name = $1`, [fitName]);
  if (Number(any.rows[0]?.[0] ?? 0) === 0) return { ok: false, reason: 'unknown_fit' };
  const rows =
    runId === null
      ? await db.query(
          `select run_id::text, status, spec_text, design_levels::text from ${s}.runs
            where fit_name = $1 and status = 'succeeded' order by run_id desc limit 1`,
          [fitName],
        )
      : await db.query(`select run_id::text, status, spec_text, design_levels::text from ${s}.runs where fit_name = $1 and run_id = $2::bigint`, [
          fitName,
          String(runId),
        ]);
  const row = rows.rows[0];
  if (row === undefined) return { ok: false, reason: runId === null ? 'no_succeeded_run' : 'unknown_run' };
  if (row[1] !== 'succeeded') return { ok: false, reason: 'run_not_succeeded', status: String(row[1]) };
  return {
    ok: true,
    fit: {
      runId: Number(row[0]),
      specText: String(row[2]),
      levels: row[3] === null ? null : (JSON.parse(String(row[3])) as StoredLevels[]),
    },
  };
}
