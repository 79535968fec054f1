import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** The levels of one categorical column as a run fitted them. */
export interface StoredLevels {
  readonly column: string;
  readonly levels: readonly string[];
  readonly reference: string;
}

/**
 * Records the categorical levels a run fits with (`runs.design_levels`), so its models can
 * later be applied to rows through the very same indicators. Written when the run starts,
 * beside its design query.
 */
export async function recordDesignLevels(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  levels: readonly StoredLevels[],
): Promise<void> {
  checkSchemaName(schema);
  const value = JSON.stringify(levels.map((l) => ({ column: l.column, levels: l.levels, reference: l.reference })));
  await sql`update ${sql.id(schema, 'runs')} set design_levels = ${value}::jsonb
             where run_id = ${runIdText(runId)}::bigint`.execute(db);
}
