import type { Kysely } from 'kysely';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** The levels of one categorical column as a run fits them. */
export interface StoredLevels {
  readonly column: string;
  readonly levels: readonly string[];
  readonly reference: string;
}

/** What is known about a run when it starts. */
export interface RunStart {
  readonly fitName: string;
  /** Hash of the normalised fit spec. */
  readonly specHash: string;
  /** The fit spec as used by the run. */
  readonly specText: string;
  /** The generated SQL query that yields the design rows. */
  readonly designQuery: string;
  /** Version of rowfold. */
  readonly toolVersion: string;
  /** Where the rows are read when not from this database (connection names and places, no password). */
  readonly readFrom?: string | null | undefined;
  /**
   * The categorical levels the run fits with, in spec order, so its models can later score
   * rows through the very same indicators (`runs.design_levels`); written with the row.
   */
  readonly designLevels?: readonly StoredLevels[];
  /** The design as the spec names it, for dashboards to filter on (see migration 0011). */
  readonly design?: RunDesign;
}

/** The design of a fit as the spec names it: the `runs` columns response … segment_by. */
export interface RunDesign {
  readonly response: string;
  readonly weight: string | null;
  /** Terms, then categorical columns, then interactions (`a*b`). */
  readonly terms: readonly string[];
  readonly categorical: readonly string[];
  readonly segmentBy: readonly string[];
}

/**
 * Records the start of a run (status `running`) and returns its id. The row is committed on
 * its own, before any work, so a run that crashes stays visible as running and one that fails
 * can be marked failed.
 *
 * @example
 * const runId = await startRun(db, 'rowfold', { fitName: 'feeder_load', specHash, specText, designQuery, toolVersion });
 */
export async function startRun(db: Kysely<StoreDatabase>, schema: string, run: RunStart): Promise<number> {
  checkSchemaName(schema);
  if (db.isTransaction) {
    throw new TypeError('startRun needs a Kysely instance, not a transaction: the running row must commit on its own');
  }
  const row = await db
    .withSchema(schema)
    .insertInto('runs')
    .values({
      fit_name: run.fitName,
      spec_hash: run.specHash,
      spec_text: run.specText,
      design_query: run.designQuery,
      tool_version: run.toolVersion,
      status: 'running',
      ...(run.readFrom == null ? {} : { read_from: run.readFrom }),
      ...(run.designLevels === undefined
        ? {}
        : { design_levels: JSON.stringify(run.designLevels.map((l) => ({ column: l.column, levels: l.levels, reference: l.reference }))) }),
      ...(run.design === undefined
        ? {}
        : {
            response: run.design.response,
            weight: run.design.weight,
            terms: [...run.design.terms],
            categorical: [...run.design.categorical],
            segment_by: [...run.design.segmentBy],
          }),
    })
    .returning('run_id')
    .executeTakeFirstOrThrow();
  return Number(row.run_id);
}
