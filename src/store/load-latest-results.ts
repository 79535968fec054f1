import type { Kysely, Selectable } from 'kysely';
import { sql } from 'kysely';
import { checkSchemaName } from './schema-name.js';
import type { LatestCoefficientsView, LatestModelsView, StoreDatabase } from './store-database.js';

/** The rows of latest_models of one fit, each with its rows of latest_coefficients (in term order). */
export interface LatestResultRows {
  readonly models: readonly (Selectable<LatestModelsView> & { readonly coefficients: readonly Selectable<LatestCoefficientsView>[] })[];
}

/**
 * Reads the latest model of every segment of a fit (the `latest_models` view) and their
 * coefficients (`latest_coefficients`), ordered by segment key and term index. A schema
 * without result tables gives no models.
 *
 * @example
 * const { models } = await loadLatestResults(db, 'rowfold', 'feeder_load');
 */
export async function loadLatestResults(db: Kysely<StoreDatabase>, schema: string, fitName: string): Promise<LatestResultRows> {
  checkSchemaName(schema);
  const exists = await sql<{ found: boolean }>`select to_regclass(${`"${schema.replace(/"/g, '""')}".latest_models`}) is not null as found`.execute(db);
  if (exists.rows[0]?.found !== true) return { models: [] };
  const models = await db.withSchema(schema).selectFrom('latest_models').selectAll().where('fit_name', '=', fitName).orderBy('segment_key').execute();
  const coefficients = await db
    .withSchema(schema)
    .selectFrom('latest_coefficients')
    .selectAll()
    .where('fit_name', '=', fitName)
    .orderBy('segment_key')
    .orderBy('term_index')
    .execute();
  const bySegment = new Map<string, Selectable<LatestCoefficientsView>[]>();
  for (const c of coefficients) {
    const list = bySegment.get(c.segment_key) ?? [];
    list.push(c);
    bySegment.set(c.segment_key, list);
  }
  return { models: models.map((m) => ({ ...m, coefficients: bySegment.get(m.segment_key) ?? [] })) };
}
