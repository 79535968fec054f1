import type { DesignShape } from '../fit/accumulator.js';
import type { FitSolution } from '../fit/fit-solution.js';
import { blockLayout, residualContext, residualModel } from '../fit/residual-model.js';
import { residualFindings } from '../fit/residual-results.js';
import type { CoefficientError, HoldoutError, ResidualTest } from '../fit/residual-results.js';
import { ResidualSegment } from '../fit/residual-segment.js';
import type { InfluentialRow, ResidualPassOptions } from '../fit/residual-segment.js';
import type { DesignPlan } from '../plan/design-plan.js';
import { HOLDOUT_VALUE } from '../plan/holdout-split.js';
import { CLUSTER_KEY, ROW_ID_VALUE, influentialLookupQuery } from '../plan/residual-columns.js';
import { unplannedLevelError } from '../plan/unplanned-level.js';
import type { Database } from '../source/database.js';
import { queryAll } from '../source/query-helpers.js';
import type { FitSpec } from '../spec/fit-spec.js';
import type { RunFitRequest } from './run-fit.js';
import { shardReadError } from './read-sites.js';

/**
 * Cluster sums × coefficients a segment may hold (8 MB of sums): past it the pass stops with
 * an error naming the segment and `residual_pass.cluster_by`.
 */
export const MAX_CLUSTER_VALUES = 1_000_000;

/** Row ids looked up per query when influential rows are resolved to their keys. */
const LOOKUP_BATCH = 20_000;

/** An influential row with its key columns' values (null if the row was not found again). */
export interface ResolvedInfluentialRow extends InfluentialRow {
  readonly rankedBy: 'cooks_distance' | 'leverage';
  readonly rank: number;
  readonly rowKey: Record<string, string | null> | null;
}

/** What the residual pass found for one model. */
export interface ModelResiduals {
  readonly errors: readonly CoefficientError[];
  readonly tests: readonly ResidualTest[];
  readonly influential: readonly ResolvedInfluentialRow[];
  /** Prediction error on the held-out rows (residual_pass.holdout), or null. */
  readonly holdout: HoldoutError | null;
  readonly notes: readonly string[];
}

/** The models the pass takes residuals against, by segment key (as FittedModel's `segmentKey`). */
export interface ResidualPassModel {
  readonly segmentKey: string;
  readonly solution: FitSolution;
}

/**
 * The residual pass: one more streamed read of every row the models hold (the plan's
 * `residual` queries, through the run's shared snapshot like every other read of the run), each
 * row's residual taken against its model's solved coefficients and folded into per-segment
 * sums (see ResidualSegment). Models without residual inference (no residual degrees of freedom)
 * are passed over. A segment whose pass saw another number of rows than its model holds (rows
 * that changed between reads cannot, within one snapshot; a refit whose stored state holds rows
 * since deleted can) gets no robust figures, only a note saying why.
 */
export async function residualPass(
  database: Database,
  spec: FitSpec,
  plan: DesignPlan,
  req: Pick<RunFitRequest, 'read' | 'signal' | 'sites'>,
  models: Iterable<ResidualPassModel>,
): Promise<Map<string, ModelResiduals>> {
  const rp = spec.residualPass;
  const residual = plan.residual;
  if (rp === null || residual === undefined) return new Map();
  const shape: DesignShape = { terms: plan.columns, response: spec.response, weight: spec.weight ?? undefined, intercept: spec.intercept };
  const options: ResidualPassOptions = {
    robust: rp.robust,
    cluster: rp.clusterBy !== null,
    maxClusterValues: MAX_CLUSTER_VALUES,
    ordered: rp.orderBy !== null,
    influentialTop: rp.influential?.top ?? 0,
  };
  const layout = { ...blockLayout(shape), width: residual.valueNames.length };
  const segments = new Map<string, { seg: ResidualSegment; solution: FitSolution }>();
  const skipped = new Map<string, string>();
  for (const m of models) {
    const model = residualModel(m.solution, shape);
    if (model === null) skipped.set(m.segmentKey, 'the model has no residual inference (no residual degrees of freedom or an exact fit)');
    else segments.set(m.segmentKey, { seg: new ResidualSegment(model, options, layout, m.segmentKey === '' ? '(all rows)' : m.segmentKey), solution: m.solution });
  }
  const segmentCount = spec.segmentBy.length;
  const clusterAt = residual.keyNames.indexOf(CLUSTER_KEY);
  const idAt = residual.valueNames.indexOf(ROW_ID_VALUE);
  const heldAt = residual.valueNames.indexOf(HOLDOUT_VALUE);
  const clusterIds = new Map<string | null, number>();
  await Promise.all(
    residual.queries.map((query, q) => {
      // A foreign leaf is read on its shard over the first pass's connection (plan.sites);
      // once: a broken read fails the run (the sums of a segment take rows from every leaf).
      const site = residual.sites?.[q] ?? null;
      if (site !== null && req.sites === undefined) throw new TypeError('a plan with shards needs the run\'s ReadSites');
      const from = site === null ? database : req.sites!.database(site);
      const read = from.withSession((session) => {
        // Per key id of this reader: its segment's sums (null: not a model) and its cluster id.
        const byId: ({ seg: ResidualSegment | null; cluster: number } | undefined)[] = [];
        return session.readDesign(
          {
            query,
            keyNames: residual.keyNames,
            valueNames: residual.valueNames,
            valueTypes: residual.valueTypes,
            mode: req.read ?? spec.read,
            nonFinite: spec.nonFinite === 'skip' ? 'skip' : 'pass',
            signal: req.signal,
          },
          (block, keyTable) => {
            const { values, width } = block;
            for (let i = 0; i < block.rows; i++) {
              const kid = block.keys[i]!;
              let entry = byId[kid];
              if (entry === undefined) {
                const key = keyTable[kid]!;
                const text = segmentCount === 0 ? '' : JSON.stringify(key.slice(0, segmentCount));
                const c = clusterAt < 0 ? null : (key[clusterAt] ?? null);
                let cluster = clusterIds.get(c);
                if (cluster === undefined) clusterIds.set(c, (cluster = clusterIds.size));
                entry = { seg: segments.get(text)?.seg ?? null, cluster };
                byId[kid] = entry;
              }
              if (entry.seg === null) continue;
              const o = i * width;
              entry.seg.row(values, o, entry.cluster, idAt < 0 ? 0 : values[o + idAt]!, heldAt >= 0 && values[o + heldAt] === 1);
            }
          },
        );
      });
      return site === null ? read : read.catch((e: unknown) => {
        throw shardReadError(site, unplannedLevelError(e, spec, plan.levels) ?? e);
      });
    }),
  ).catch((e: unknown) => {
    throw unplannedLevelError(e, spec, plan.levels) ?? e;
  });

  const out = new Map<string, ModelResiduals>();
  for (const [key, note] of skipped) out.set(key, { errors: [], tests: [], influential: [], holdout: null, notes: [note] });
  const wanted = new Map<string, Set<number>>();
  const found = new Map<string, ReturnType<typeof residualFindings>>();
  for (const [key, { seg, solution }] of segments) {
    if (seg.rows !== seg.model.rows) {
      out.set(key, {
        errors: [],
        tests: [],
        influential: [],
        holdout: null,
        notes: [`the residual pass read ${seg.rows} row(s) with a positive weight where the model holds ${seg.model.rows}: no robust figures`],
      });
      continue;
    }
    const f = residualFindings(seg, residualContext(solution, shape, { clusterBy: rp.clusterBy, orderBy: rp.orderBy, holdout: rp.holdout !== null }));
    found.set(key, f);
    if (rp.influential !== null) {
      const ids = new Set([...f.topCooks, ...f.topLeverage].map((r) => r.id));
      wanted.set(key, ids);
    }
  }
  const keysOf = rp.influential === null ? new Map<string, Record<string, string | null>>() : await lookUpRows(database, spec, rp.influential.keys, wanted);
  for (const [key, f] of found) {
    const rows = (list: readonly InfluentialRow[], rankedBy: ResolvedInfluentialRow['rankedBy']) =>
      list.map((r, i) => ({ ...r, rankedBy, rank: i + 1, rowKey: keysOf.get(`${key}\u0000${r.id}`) ?? null }));
    out.set(key, {
      errors: f.errors,
      tests: f.notes.length === 0 ? f.tests : [...f.tests, { test: 'notes', statistic: null, df: null, p: null, extras: { notes: f.notes.join('; ') } }],
      influential: [...rows(f.topCooks, 'cooks_distance'), ...rows(f.topLeverage, 'leverage')],
      holdout: f.holdout,
      notes: f.notes,
    });
  }
  return out;
}

/**
 * The key columns of the influential rows, found again by their id in the run's snapshot: by
 * `segmentKey\0id`. Each batch of ids is one scan of the source.
 */
async function lookUpRows(
  database: Database,
  spec: FitSpec,
  keys: readonly string[],
  wanted: ReadonlyMap<string, ReadonlySet<number>>,
): Promise<Map<string, Record<string, string | null>>> {
  const all = [...new Set([...wanted.values()].flatMap((s) => [...s]))];
  const out = new Map<string, Record<string, string | null>>();
  const segments = spec.segmentBy.length;
  for (let start = 0; start < all.length; start += LOOKUP_BATCH) {
    const ids = all.slice(start, start + LOOKUP_BATCH);
    const rows = await database.withSession((s) => queryAll(s, influentialLookupQuery(spec, keys, ids)));
    for (const r of rows) {
      const seg = segments === 0 ? '' : JSON.stringify(r.slice(0, segments));
      const id = Number(r[segments + keys.length]);
      if (!wanted.get(seg)?.has(id)) continue;
      // Rows whose keys repeat share an id: the first found stands for them.
      const k = `${seg}\u0000${id}`;
      if (!out.has(k)) out.set(k, Object.fromEntries(keys.map((c, i) => [c, (r[segments + i] as string | null) ?? null])));
    }
  }
  return out;
}
