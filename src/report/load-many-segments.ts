import { sql } from 'kysely';
import type { Kysely, RawBuilder } from 'kysely';
import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import type { StoreDatabase } from '../store/index.js';
import { DISTRIBUTION_LEVELS } from './coefficient-distribution.js';
import { chooseSegment } from './choose-segment.js';
import type { ManySegments, ReportModel, SegmentIndex, Standout, TermAcrossSegments } from './report-run.js';
import { segmentLabel } from './segment-label.js';

/** Segments listed per kind of standout (largest estimates of a term, widest intervals, …). */
export const PER_KIND = 5;

/** Terms whose estimates the find-a-segment list carries per segment. */
export const INDEX_TERMS = 3;

/** Most segments in the find-a-segment list (in key order); the HTML also stops at a byte budget. */
export const INDEX_MAX_SEGMENTS = 200_000;

/** Segments named per set of aliased terms; the rest are counted. */
const ALIASED_LABELS = 12;

/** Segments read per query of the find-a-segment list. */
const INDEX_PAGE = 20_000;

/** Reads the full models of the given segment keys (the few the report shows). */
export type ReadModels = (keys: readonly string[]) => Promise<ReportModel[]>;

const estimatedIn = (alias: string) => sql`${sql.ref(`${alias}.status`)} in ('ok', 'no_residual_df')`;
const ESTIMATED = estimatedIn('m');
const FINITE = (col: RawBuilder<unknown>) => sql`(${col} is not null and ${col} not in ('NaN'::float8, 'Infinity'::float8, '-Infinity'::float8))`;

/**
 * What the report of many segments shows, aggregated where the models lie instead of read
 * model by model: each term's quantiles across the segments (`percentile_cont`, the type-7
 * quantile), the segments that stand out (window ranks per term), condition numbers, aliased
 * terms, the drift tests of the run, the chosen segment, and the find-a-segment list (a few
 * numbers per segment, read in pages into packed arrays). Only the standouts' models are read
 * in full. Memory: the list's arrays, a few tens of bytes per segment; no object per model.
 *
 * @throws ReportError (usage) when `wanted` matches no segment, or several.
 */
export async function loadManySegments(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: string,
  total: number,
  keyNames: readonly string[],
  wanted: string | undefined,
  readModels: ReadModels,
): Promise<ManySegments> {
  const t = (name: string) => sql.id(schema, name);
  const run = sql`${runId}::bigint`;
  // One row per model and term, whether a run keeps its coefficients as arrays (migration
  // 0007) or as rows (before it).
  const coefficients = sql`
    select m.segment_key, m.status, u.term, u.term_index, u.aliased, u.estimate, u.ci_low, u.ci_high, u.p
    from ${t('models')} m
    cross join lateral (
      select cr.term, cr.term_index, cr.aliased, cr.estimate, cr.ci_low, cr.ci_high, cr.p
      from ${t('coefficient_rows')} cr where cr.model_id = m.model_id and m.terms is null
      union all
      select u.term, (u.ord - 1)::integer, u.aliased, u.estimate, u.ci_low, u.ci_high, u.p
      from unnest(m.terms, m.term_aliased, m.estimates, m.ci_lows, m.ci_highs, m.p_values)
        with ordinality as u(term, aliased, estimate, ci_low, ci_high, p, ord)
    ) u
    where m.run_id = ${run}`;
  const usable = sql`(${estimatedIn('c')} and not c.aliased and ${FINITE(sql`c.estimate`)})`;
  const width = sql`(c.ci_high - c.ci_low)`;
  const hasWidth = sql`(${estimatedIn('c')} and not c.aliased and ${FINITE(width)})`;
  const levels = sql.raw(`array[${DISTRIBUTION_LEVELS.join(', ')}]::float8[]`);

  const termsP = termDistributions(db, coefficients, usable, width, hasWidth, levels);

  // The segments that stand out per term: rank 1…PER_KIND of the largest and smallest
  // estimates and of the widest intervals; ties go to the first segment in key order.
  const rankedP = sql<{ segment_key: string; term: string; hi: string; lo: string; wide: string | null }>`
    select segment_key, term, hi, lo, wide from (
      select c.segment_key, c.term,
        row_number() over (partition by c.term order by c.estimate desc, c.segment_key) as hi,
        row_number() over (partition by c.term order by c.estimate asc, c.segment_key) as lo,
        case when ${FINITE(width)} then row_number() over (partition by c.term, ${FINITE(width)} order by ${width} desc, c.segment_key) end as wide
      from (${coefficients}) c
      where ${usable}
    ) r
    where hi <= ${PER_KIND} or lo <= ${PER_KIND} or wide <= ${PER_KIND}`.execute(db);
  const conditionP = sql<{ segment_key: string }>`
    select m.segment_key from ${t('models')} m
    where m.run_id = ${run} and ${FINITE(sql`m.condition_number`)}
    order by m.condition_number desc, m.segment_key limit ${PER_KIND}`.execute(db);
  const failedP = sql<{ segment_key: string; status: string }>`
    select m.segment_key, m.status from ${t('models')} m
    where m.run_id = ${run} and not ${ESTIMATED}
    order by m.segment_key limit ${PER_KIND}`.execute(db);
  const aliasedP = sql<{ segment_key: string }>`
    select m.segment_key from ${t('models')} m
    where m.run_id = ${run} and coalesce(cardinality(m.aliased_terms), 0) > 0
    order by m.segment_key limit ${PER_KIND}`.execute(db);
  // Drift: the tests this run (a refit) made, the strongest flags first.
  const driftCountsP = sql<{ tested: string; flagged: string }>`
    select count(*) as tested, count(*) filter (where d.flagged) as flagged from ${t('drift_tests')} d where d.run_id = ${run}`.execute(db);
  const driftedP = sql<{ segment_key: string; f_p: number | null; max_abs_z: number | null; flagged_terms: string[] | string }>`
    select d.segment_key, d.f_p, d.max_abs_z, d.flagged_terms from ${t('drift_tests')} d
    where d.run_id = ${run} and d.flagged
    order by d.f_p asc nulls last, d.max_abs_z desc nulls last, d.segment_key limit ${PER_KIND}`.execute(db);

  const conditionRowP = sql<{ n: string; quantiles: unknown }>`
    select count(*) as n, percentile_cont(${levels}) within group (order by m.condition_number) as quantiles
    from ${t('models')} m where m.run_id = ${run} and ${FINITE(sql`m.condition_number`)}`.execute(db);
  const groupsP = sql<{ terms: unknown; count: string; keys: unknown; segments: unknown }>`
    select m.aliased_terms as terms, count(*) as count,
      (array_agg(m.segment_key order by m.segment_key))[1:${ALIASED_LABELS}] as keys,
      (array_agg(m.segment::text order by m.segment_key))[1:${ALIASED_LABELS}] as segments
    from ${t('models')} m
    where m.run_id = ${run} and coalesce(cardinality(m.aliased_terms), 0) > 0
    group by m.aliased_terms order by count(*) desc, min(m.segment_key)`.execute(db);
  const chosenP = chooseInStore(db, schema, runId, wanted, readModels);

  // Independent queries at once: a server runs them on as many connections as the pool has.
  const [terms, ranked, condition, failed, aliased, driftCounts, drifted, conditionRow, groups, chosen] = await Promise.all([
    termsP, rankedP, conditionP, failedP, aliasedP, driftCountsP, driftedP, conditionRowP, groupsP, chosenP,
  ]);
  const pValues = terms.pValues;

  // Reasons in a fixed order per segment: the chosen one, then per term, then the rest.
  const reasons = new Map<string, string[]>();
  const add = (key: string, reason: string) => {
    let r = reasons.get(key);
    if (r === undefined) reasons.set(key, (r = []));
    r.push(reason);
  };
  add(chosen.segmentKey, 'residual plots');
  for (const term of terms.list) {
    const of = ranked.rows.filter((r) => r.term === term.term);
    const byRank = (rank: (r: (typeof of)[number]) => string | null) =>
      of.filter((r) => rank(r) !== null && Number(rank(r)) <= PER_KIND).sort((a, b) => Number(rank(a)) - Number(rank(b)));
    for (const r of byRank((x) => x.hi)) add(r.segment_key, `largest ${term.term}`);
    for (const r of byRank((x) => x.lo)) add(r.segment_key, `smallest ${term.term}`);
    for (const r of byRank((x) => x.wide)) add(r.segment_key, `widest interval of ${term.term}`);
  }
  for (const r of condition.rows) add(r.segment_key, 'largest condition number');
  for (const r of failed.rows) add(r.segment_key, r.status.replaceAll('_', ' '));
  for (const r of aliased.rows) add(r.segment_key, 'aliased terms');
  for (const r of drifted.rows) add(r.segment_key, driftReason(r));

  const keys = [...reasons.keys()].filter((k) => k !== chosen.segmentKey);
  const byKey = new Map((await readModels(keys)).map((m) => [m.segmentKey, m]));
  byKey.set(chosen.segmentKey, chosen);
  const standouts: Standout[] = [...reasons]
    .map(([key, why]) => ({ model: byKey.get(key)!, reasons: why }))
    .filter((s) => s.model !== undefined)
    .sort((a, b) => (a.model.segmentKey < b.model.segmentKey ? -1 : a.model.segmentKey > b.model.segmentKey ? 1 : 0));


  const index = await readIndex(db, schema, runId, total, keyNames, terms.list.map((x) => x.term).slice(0, INDEX_TERMS));
  const d = driftCounts.rows[0];
  return {
    terms: terms.list,
    condition: { n: Number(conditionRow.rows[0]?.n ?? 0), quantiles: numbers(conditionRow.rows[0]?.quantiles) },
    aliasedGroups: groups.rows.map((g) => {
      const gkeys = texts(g.keys);
      const segs = texts(g.segments);
      return {
        terms: texts(g.terms),
        count: Number(g.count),
        labels: gkeys.map((k, i) => segmentLabel(keyNames, k, parseSegment(segs[i] ?? null))),
      };
    }),
    pValues,
    drift: { tested: Number(d?.tested ?? 0), flagged: Number(d?.flagged ?? 0) },
    standouts,
    chosen,
    index,
  };
}

async function termDistributions(
  db: Kysely<StoreDatabase>,
  coefficients: RawBuilder<unknown>,
  usable: RawBuilder<unknown>,
  width: RawBuilder<unknown>,
  hasWidth: RawBuilder<unknown>,
  levels: RawBuilder<unknown>,
): Promise<{ list: TermAcrossSegments[]; pValues: number }> {
  const rows = await sql<Record<string, unknown>>`
    select c.term, min(c.term_index) as first_index,
      count(*) filter (where ${usable}) as estimated,
      percentile_cont(${levels}) within group (order by c.estimate) filter (where ${usable}) as quantiles,
      percentile_cont(0.5) within group (order by ${width}) filter (where ${hasWidth}) as median_width,
      count(*) filter (where ${hasWidth}) as with_interval,
      count(*) filter (where ${hasWidth} and (c.ci_low > 0 or c.ci_high < 0)) as excludes_zero,
      count(*) filter (where c.term <> ${INTERCEPT_TERM} and ${FINITE(sql`c.p`)}) as p_values
    from (${coefficients}) c
    group by c.term`.execute(db);
  // Terms in model order, the intercept last (its scale usually dwarfs the others').
  const sorted = [...rows.rows].sort((a, b) => {
    const ia = a['term'] === INTERCEPT_TERM ? 1 : 0;
    const ib = b['term'] === INTERCEPT_TERM ? 1 : 0;
    return ia - ib || Number(a['first_index']) - Number(b['first_index']) || String(a['term']).localeCompare(String(b['term']));
  });
  return {
    list: sorted.map((r) => ({
      term: String(r['term']),
      estimated: Number(r['estimated']),
      quantiles: numbers(r['quantiles']),
      medianWidth: r['median_width'] === null || r['median_width'] === undefined ? null : Number(r['median_width']),
      withInterval: Number(r['with_interval']),
      excludesZero: Number(r['excludes_zero']),
    })),
    pValues: rows.rows.reduce((n, r) => n + Number(r['p_values']), 0),
  };
}

function driftReason(r: { f_p: number | null; max_abs_z: number | null; flagged_terms: string[] | string }): string {
  const flaggedTerms = texts(r.flagged_terms);
  const parts: string[] = [];
  if (r.f_p !== null) parts.push(`Chow p ${Number(r.f_p) < 1e-4 ? Number(r.f_p).toExponential(1) : Number(r.f_p).toFixed(4)}`);
  if (flaggedTerms.length > 0) parts.push(`moved: ${flaggedTerms.join(', ')}`);
  return `drift${parts.length > 0 ? ` (${parts.join('; ')})` : ''}`;
}

/**
 * The segment of the residual plots, found in the tables as {@link chooseSegment} finds it
 * among loaded models: the candidates a key, `col=value` pairs or a bare value select are read,
 * and chooseSegment decides among them (same rules, same errors).
 */
async function chooseInStore(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: string,
  wanted: string | undefined,
  readModels: ReadModels,
): Promise<ReportModel> {
  const t = (name: string) => sql.id(schema, name);
  const run = sql`${runId}::bigint`;
  let keys: string[];
  if (wanted === undefined) {
    // Most rows among the models with estimates (any model if none has them); ties: first key.
    const r = await sql<{ segment_key: string }>`
      select m.segment_key from ${t('models')} m where m.run_id = ${run}
      order by (${ESTIMATED}) desc, m.rows desc, m.segment_key limit 1`.execute(db);
    keys = r.rows.map((x) => x.segment_key);
  } else {
    const objects: string[] = [];
    if (wanted.includes('=')) {
      objects.push(JSON.stringify(Object.fromEntries(wanted.split(',').map(splitPair))));
      objects.push(JSON.stringify(Object.fromEntries([splitPair(wanted)])));
    }
    const r = await sql<{ segment_key: string }>`
      select m.segment_key from ${t('models')} m
      where m.run_id = ${run} and (
        m.segment_key = ${wanted}
        or m.segment @> any(${objects}::jsonb[])
        or (m.segment is not null and (select count(*) from jsonb_object_keys(m.segment)) = 1
            and exists (select 1 from jsonb_each(m.segment) e where e.value = to_jsonb(${wanted}::text))))
      order by m.segment_key limit 1000`.execute(db);
    keys = r.rows.map((x) => x.segment_key);
    if (keys.length === 0) {
      // No match: chooseSegment names a few segments of the run in its error.
      const first = await sql<{ segment_key: string }>`select m.segment_key from ${t('models')} m where m.run_id = ${run} order by m.segment_key limit 4`.execute(db);
      keys = first.rows.map((x) => x.segment_key);
    }
  }
  return chooseSegment(await readModels(keys), wanted);
}

/** The find-a-segment list: a few numbers of every segment (up to INDEX_MAX_SEGMENTS), in key order, read in pages. */
async function readIndex(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: string,
  total: number,
  keyNames: readonly string[],
  terms: readonly string[],
): Promise<SegmentIndex> {
  const t = (name: string) => sql.id(schema, name);
  const n = Math.min(total, INDEX_MAX_SEGMENTS);
  const k = terms.length;
  const labels: string[] = [];
  const keys: string[] = [];
  const statuses: string[] = [];
  const rows = new Float64Array(n);
  const estimates = new Float64Array(n * k).fill(Number.NaN);
  const estimateColumns = terms.map(
    (term, j) => sql`case when ${ESTIMATED} then coalesce(
      case when not coalesce(m.term_aliased[array_position(m.terms, ${term}::text)], true) then m.estimates[array_position(m.terms, ${term}::text)] end,
      (select cr.estimate from ${t('coefficient_rows')} cr where m.terms is null and cr.model_id = m.model_id and cr.term = ${term}::text and not cr.aliased)) end as ${sql.ref(`e${j}`)}`,
  );
  const columns = estimateColumns.length === 0 ? sql`` : sql`, ${sql.join(estimateColumns)}`;
  for (let after: string | null = null; labels.length < n; ) {
    const page = Math.min(INDEX_PAGE, n - labels.length);
    const r: { rows: Record<string, unknown>[] } = await sql<Record<string, unknown>>`
      select m.segment_key, m.segment::text as segment, m.rows, m.status${columns}
      from ${t('models')} m
      where m.run_id = ${runId}::bigint ${after === null ? sql`` : sql`and m.segment_key > ${after}`}
      order by m.segment_key limit ${page}`.execute(db);
    for (const row of r.rows) {
      const i = labels.length;
      const key = String(row['segment_key']);
      keys.push(key);
      labels.push(segmentLabel(keyNames, key, parseSegment(row['segment'] as string | null)));
      rows[i] = Number(row['rows']);
      statuses.push(row['status'] === 'ok' ? '' : String(row['status']));
      for (let j = 0; j < k; j++) {
        const v = row[`e${j}`];
        if (v !== null && v !== undefined) estimates[i * k + j] = Number(v);
      }
    }
    if (r.rows.length < page) break;
    after = String(r.rows[r.rows.length - 1]!['segment_key']);
  }
  return { total, terms, labels, keys, rows: rows.subarray(0, labels.length), statuses, estimates: estimates.subarray(0, labels.length * k) };
}

function splitPair(text: string): [string, string] {
  const at = text.indexOf('=');
  return at < 0 ? [text.trim(), ''] : [text.slice(0, at).trim(), text.slice(at + 1)];
}

function parseSegment(text: string | null): Record<string, string | null> | null {
  return text === null ? null : (JSON.parse(text) as Record<string, string | null>);
}

/** A float8[] as the driver hands it over (an array, or its text form). */
function numbers(v: unknown): number[] {
  if (v === null || v === undefined) return [];
  if (Array.isArray(v)) return v.map(Number);
  return String(v).replace(/^\{|\}$/g, '').split(',').filter((x) => x !== '').map(Number);
}

/** A text[] as the driver hands it over (an array, or its text form). */
function texts(v: unknown): string[] {
  if (v === null || v === undefined) return [];
  if (Array.isArray(v)) return v.map(String);
  const inner = String(v).replace(/^\{|\}$/g, '');
  if (inner === '') return [];
  // Text form: elements quoted when they hold commas, quotes or spaces.
  const out: string[] = [];
  const re = /"((?:[^"\\]|\\.)*)"|([^,]+)/g;
  for (let m = re.exec(inner); m !== null; m = re.exec(inner)) out.push(m[1] !== undefined ? m[1].replace(/\\(.)/g, '$1') : m[2]!);
  return out;
}
