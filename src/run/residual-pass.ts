import type { DesignShape } from '../fit/accumulator.js';
import type { FitSolution } from '../fit/fit-solution.js';
import { blockLayout, residualContext, residualModel } from '../fit/residual-model.js';
import type { CoefficientError, HoldoutError, ResidualFindings, ResidualTest } from '../fit/residual-results.js';
import { ResidualSegment } from '../fit/residual-segment.js';
import type { InfluentialRow, ResidualModel, ResidualPassOptions } from '../fit/residual-segment.js';
import { feedResidualRows, ResidualThread, residualThreadWanted, segmentResult } from '../fit/residual-thread.js';
import type { ResidualThreadResult } from '../fit/residual-thread.js';
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
  req: Pick<RunFitRequest, 'read' | 'signal' | 'sites' | 'threads'>,
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
  // Segment i of the pass: its sums (on this thread, or on the residual thread) and solution.
  const entries: { key: string; seg: ResidualSegment | null; solution: FitSolution; model: ResidualModel; label: string }[] = [];
  const indexOf = new Map<string, number>();
  const skipped = new Map<string, string>();
  let largestK = 0;
  for (const m of models) {
    const model = residualModel(m.solution, shape);
    if (model === null) {
      skipped.set(m.segmentKey, 'the model has no residual inference (no residual degrees of freedom or an exact fit)');
      continue;
    }
    indexOf.set(m.segmentKey, entries.length);
    entries.push({ key: m.segmentKey, seg: null, solution: m.solution, model, label: m.segmentKey === '' ? '(all rows)' : m.segmentKey });
    largestK = Math.max(largestK, model.estimates.length);
  }
  const contextOf = (solution: FitSolution) => residualContext(solution, shape, { clusterBy: rp.clusterBy, orderBy: rp.orderBy, holdout: rp.holdout !== null });
  const segmentCount = spec.segmentBy.length;
  const clusterAt = residual.keyNames.indexOf(CLUSTER_KEY);
  const idAt = residual.valueNames.indexOf(ROW_ID_VALUE);
  const heldAt = residual.valueNames.indexOf(HOLDOUT_VALUE);
  const clusterIds = new Map<string | null, number>();
  // Large models take their sums on a thread of their own while this one receives (see ResidualThread).
  const thread = residualThreadWanted(largestK, req.threads)
    ? new ResidualThread({ options, layout, idAt, heldAt, segments: entries.map((e) => ({ model: e.model, label: e.label, context: contextOf(e.solution) })) })
    : null;
  const local = thread === null ? entries.map((e) => (e.seg = new ResidualSegment(e.model, options, layout, e.label))) : [];
  let threadResults: readonly ResidualThreadResult[] = [];
  try {
    await Promise.all(
      residual.queries.map((query, q) => {
        // A foreign leaf is read on its shard over the first pass's connection (plan.sites);
        // once: a broken read fails the run (the sums of a segment take rows from every leaf).
        const site = residual.sites?.[q] ?? null;
        if (site !== null && req.sites === undefined) throw new TypeError('a plan with shards needs the run\'s ReadSites');
        const from = site === null ? database : req.sites!.database(site);
        const read = from.withSession((session) => {
          // Per key id of this reader: its segment's index (−1: not a model) and its cluster id.
          const segOf: number[] = [];
          const clusterOf: number[] = [];
          let segment = new Int32Array(0);
          let cluster = new Int32Array(0);
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
              if (segment.length < block.rows) {
                segment = new Int32Array(block.rows);
                cluster = new Int32Array(block.rows);
              }
              for (let i = 0; i < block.rows; i++) {
                const kid = block.keys[i]!;
                let s = segOf[kid];
                if (s === undefined) {
                  const key = keyTable[kid]!;
                  const text = segmentCount === 0 ? '' : JSON.stringify(key.slice(0, segmentCount));
                  const c = clusterAt < 0 ? null : (key[clusterAt] ?? null);
                  let id = clusterIds.get(c);
                  if (id === undefined) clusterIds.set(c, (id = clusterIds.size));
                  s = indexOf.get(text) ?? -1;
                  segOf[kid] = s;
                  clusterOf[kid] = id;
                }
                segment[i] = s;
                cluster[i] = clusterOf[kid]!;
              }
              if (thread !== null) return thread.sink(block.values, block.width, block.rows, segment, cluster);
              feedResidualRows(local, block.values, block.width, block.rows, segment, cluster, idAt, heldAt);
              return undefined;
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
    if (thread !== null) threadResults = await thread.finish();
  } finally {
    await thread?.close();
  }

  const out = new Map<string, ModelResiduals>();
  for (const [key, note] of skipped) out.set(key, { errors: [], tests: [], influential: [], holdout: null, notes: [note] });
  const wanted = new Map<string, Set<number>>();
  const found = new Map<string, ResidualFindings>();
  entries.forEach((e, i) => {
    const { rows, findings: f } = thread === null ? segmentResult(e.seg!, contextOf(e.solution)) : threadResults[i]!;
    if (f === null) {
      out.set(e.key, {
        errors: [],
        tests: [],
        influential: [],
        holdout: null,
        notes: [`the residual pass read ${rows} row(s) with a positive weight where the model holds ${e.model.rows}: no robust figures`],
      });
      return;
    }
    found.set(e.key, f);
    if (rp.influential !== null) wanted.set(e.key, new Set([...f.topCooks, ...f.topLeverage].map((r) => r.id)));
  });
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
