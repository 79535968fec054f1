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
 *
 * Coefficients are read where they are stored — the model row's arrays (runs of many segments)
 * or coefficient_rows — rather than through the coefficients view, whose union is probed twice
 * per model: at 100,000 segments that took twice as long.
 */
export async function loadScoringModels(db: SqlRunner, schema: string, fitName: string, runId: number | null): Promise<Map<string, ScoringModel>> {
  checkSchemaName(schema);
  const s = quoteName(schema);
  const [models, where] =
    runId === null ? [`${s}.latest_models m`, 'm.fit_name = $1'] : [`${s}.models m`, 'm.fit_name = $1 and m.run_id = $2::bigint'];
  const result = await db.query(
    `select m.run_id::text, m.segment::text, m.segment_key, m.status, m.sigma, m.df_residual::text,
            case when mm.terms is not null
                 then (select array_agg(coalesce(u.e, case when u.a then 0 end) order by u.o)
                         from unnest(mm.estimates, mm.term_aliased) with ordinality u(e, a, o))::text
                 else (select array_agg(coalesce(c.estimate, case when c.aliased then 0 end) order by c.term_index)
                         from ${s}.coefficient_rows c where c.model_id = m.model_id)::text end as estimates,
            case when mm.terms is not null then array_to_json(mm.terms)::text
                 else (select array_to_json(array_agg(c.term order by c.term_index))
                         from ${s}.coefficient_rows c where c.model_id = m.model_id)::text end as terms,
            v.term_index::text, v.packed::text
       from ${models}
       join ${s}.models mm on mm.model_id = m.model_id
       left join ${s}.covariances v on v.model_id = m.model_id
      where ${where}`,
    runId === null ? [fitName] : [fitName, String(runId)],
  );
  const out = new Map<string, ScoringModel>();
  // Every model of a run has the same terms: one array for them all, not one per segment.
  const termLists = new Map<string, readonly string[]>();
  const termsOf = (json: string): readonly string[] => {
    let t = termLists.get(json);
    if (t === undefined) termLists.set(json, (t = JSON.parse(json) as string[]));
    return t;
  };
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
      terms: terms === null ? [] : termsOf(terms),
      estimates: estimated ? Float64Array.from(b!, Number) : null,
      kept,
      covariance: packed === null ? null : parseFloat8Array(packed),
      sigma: packed === null ? null : sigma,
      dfResidual: Number(df),
    });
  }
  return out;
}
