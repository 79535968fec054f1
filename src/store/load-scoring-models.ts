import type { ScoringModel } from '../fit/scoring-model.js';
import { parseFloat8Array } from './float8-array.js';
import { checkSchemaName } from './schema-name.js';
import type { SqlRunner } from './sql-runner.js';
import { quoteName } from './sql-runner.js';

/**
 * The models a scoring applies, by segment key: those of the named run, or else every segment's
 * latest (the newest succeeded run that has the segment, as latest_models shows). Each comes with
 * its estimates in coefficient order (0 for an aliased term; null when nothing was estimated),
 * its packed covariance and residual standard error (null without inference).
 */
export async function loadScoringModels(db: SqlRunner, schema: string, fitName: string, runId: number | null): Promise<Map<string, ScoringModel>> {
  checkSchemaName(schema);
  const s = quoteName(schema);
  const [models, where] =
    runId === null ? [`${s}.latest_models m`, 'm.fit_name = $1'] : [`${s}.models m`, 'm.fit_name = $1 and m.run_id = $2::bigint'];
  const result = await db.query(
    `select m.run_id::text, m.segment::text, m.segment_key, m.status, m.sigma, m.df_residual::text,
            (select array_agg(coalesce(c.estimate, case when c.aliased then 0 end) order by c.term_index)::text
               from ${s}.coefficients c where c.model_id = m.model_id) as estimates,
            (select array_to_json(array_agg(c.term order by c.term_index))::text
               from ${s}.coefficients c where c.model_id = m.model_id) as terms,
            v.term_index::text, v.packed::text
       from ${models}
       left join ${s}.covariances v on v.model_id = m.model_id
      where ${where}`,
    runId === null ? [fitName] : [fitName, String(runId)],
  );
  const out = new Map<string, ScoringModel>();
  for (const r of result.rows) {
    const [run, segment, segmentKey, status, sigma, df, estimates, terms, termIndex, packed] = r as [
      string,
      string | null,
      string,
      string,
      number | null,
      string,
      string | null,
      string | null,
      string | null,
      string | null,
    ];
    const b = estimates === null ? null : estimates.replace(/^\{|\}$/g, '').split(',');
    const estimated = b !== null && (status === 'ok' || status === 'no_residual_df') && !b.includes('NULL');
    const kept =
      termIndex !== null
        ? Int32Array.from(termIndex.replace(/^\{|\}$/g, '').split(','), Number)
        : // Without inference no covariance is stored: the estimated terms are the non-aliased ones.
          Int32Array.from(
            (b ?? []).flatMap((_, i) => [i]),
            (i) => i,
          );
    out.set(segmentKey, {
      runId: Number(run),
      segmentKey,
      segment: segment === null ? null : (JSON.parse(segment) as Record<string, string | null>),
      terms: terms === null ? [] : (JSON.parse(terms) as string[]),
      estimates: estimated ? Float64Array.from(b!, Number) : null,
      kept,
      covariance: packed === null ? null : parseFloat8Array(packed),
      sigma: packed === null ? null : sigma,
      dfResidual: Number(df),
    });
  }
  return out;
}
