import { createHash } from 'node:crypto';
import type { Kysely } from 'kysely';
import { Accumulator } from '../fit/accumulator.js';
import type { DesignShape, FoldMethod } from '../fit/accumulator.js';
import { driftTest } from '../fit/drift-test.js';
import { SegmentedFit } from '../fit/segmented-fit.js';
import type { DesignPlan, DesignScope } from '../plan/design-plan.js';
import { bucketExpression, parseRefitBounds, refitBoundsQuery, refitFilter } from '../plan/refit-scope.js';
import type { RefitBounds } from '../plan/refit-scope.js';
import type { DbSession } from '../source/database.js';
import type { SolvedAnchor } from './refit-anchors.js';
import { queryAll } from '../source/query-helpers.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { loadFitStates } from '../store/index.js';
import type { DriftRecord, FitStateRecord, RefitRecord, StoreDatabase } from '../store/index.js';

/**
 * What an incremental or window run starts from: the stored states it merges, the rows it
 * reads (above the stored watermark, up to the highest one present now), and why it is a
 * full refit when it is one.
 */
export interface RefitStart {
  readonly mode: 'full' | 'incremental';
  readonly notes: readonly string[];
  readonly bounds: RefitBounds;
  /** Stored watermark the run reads above; null for a full refit. */
  readonly from: string | null;
  readonly designHash: string;
  /** Stored states of this design (for a window: every stored bucket, inside the new window or not). */
  readonly prior: readonly FitStateRecord[];
  /** Scopes of the first (state) pass and of a double-double pass over every row. */
  readonly scope: { readonly first: DesignScope; readonly extended: DesignScope };
  /** Previous solutions the new rows' residuals are summed against (see previousSolutions). */
  readonly solved?: ReadonlyMap<string, SolvedAnchor>;
}

/** The model accumulators of a refit, and what it stores and records besides. */
export interface RefitOutcome {
  /** One accumulator per segment: stored state (inside the window) merged with the new rows. */
  readonly fit: SegmentedFit;
  readonly states: readonly FitStateRecord[];
  readonly drift: readonly DriftRecord[];
  readonly record: RefitRecord;
}

/**
 * sha256 of everything that gives a stored factor its meaning: the source, response, terms
 * and the design columns they expand to (categorical levels included), weight, intercept,
 * method, segment columns, watermark (and its type) and window. Confidence, accuracy, the
 * result schema and how rows are read do not change the factor and are left out.
 */
export function designHash(spec: FitSpec, plan: DesignPlan, watermarkType: string): string {
  const design = {
    source: spec.source,
    response: spec.response,
    terms: spec.terms,
    columns: plan.columns,
    levels: plan.levels.map((l) => ({ column: l.column, reference: l.reference, levels: l.levels })),
    interactions: spec.interactions,
    weight: spec.weight,
    intercept: spec.intercept,
    method: spec.method,
    segmentBy: spec.segmentBy,
    watermark: spec.watermark,
    watermarkType,
    window: spec.window,
  };
  return createHash('sha256').update(JSON.stringify(design), 'utf8').digest('hex');
}

/**
 * The stored states of a fit; none when the result schema or its state table does not
 * exist yet (a first run, or a dry run before any run).
 */
export async function storedStates(db: Kysely<StoreDatabase>, spec: FitSpec): Promise<FitStateRecord[]> {
  return loadFitStates(db, spec.schema, spec.name).catch((e: unknown) => {
    const code = (e as { code?: unknown }).code;
    if (code === '42P01' || code === '3F000') return [];
    throw e;
  });
}

/**
 * Decides how a fit with a watermark runs: incremental from the stored states when there
 * are some of the same design and no full refit was asked for, else full (with a note that
 * says why). `base` is the plan without scope, whose columns and levels make the design hash.
 */
export async function startRefit(
  session: DbSession,
  stored: readonly FitStateRecord[],
  spec: FitSpec,
  base: DesignPlan,
  full: boolean,
): Promise<RefitStart> {
  const bounds = parseRefitBounds(spec, (await queryAll(session, refitBoundsQuery(spec)))[0]);
  const hash = designHash(spec, base, bounds.type);
  const same = stored.filter((s) => s.designHash === hash);
  const notes: string[] = [];
  let mode: 'full' | 'incremental' = 'incremental';
  if (full) {
    mode = 'full';
    notes.push('full refit: asked for with --full; stored state replaced');
  } else if (stored.length === 0) {
    mode = 'full';
    notes.push('full refit: no stored state for this fit');
  } else if (same.length === 0) {
    mode = 'full';
    const runs = [...new Set(stored.map((s) => s.runId))].join(', ');
    notes.push(
      `full refit: the design changed since run ${runs} (source, terms, levels, weight, intercept, method, segments, watermark or window); stored state dropped`,
    );
  }
  const from = mode === 'incremental' ? same[0]!.watermark : null;
  if (mode === 'incremental') {
    notes.push(`incremental refit: rows with ${spec.watermark} above ${from} merged with stored state; rows at or below it that arrived late are ignored (rowfold fit --full reads them)`);
  }
  const prior = mode === 'incremental' ? same : [];
  return {
    mode,
    notes,
    bounds,
    from,
    designHash: hash,
    prior,
    scope: {
      first: { filter: refitFilter(spec, bounds, from), bucket: spec.window === null ? undefined : bucketExpression(spec) },
      extended: { filter: refitFilter(spec, bounds, null) },
    },
  };
}

/**
 * Merges the rows a refit read (`read`, keyed by segment and, for a window, bucket) with
 * the stored states: the model accumulator of each segment, the states to store (per
 * bucket inside the window; older buckets are pruned), and a drift test for every segment
 * that has both a previous fit and new rows.
 */
export function finishRefit(
  start: RefitStart,
  spec: FitSpec,
  shape: DesignShape,
  method: FoldMethod,
  read: SegmentedFit,
  rowsRead: number,
): RefitOutcome {
  const windowed = spec.window !== null;
  const keyOf = (segment: Readonly<Record<string, string | null>> | null) =>
    spec.segmentBy.map((c) => segment?.[c] ?? null);
  const solved = start.solved ?? new Map<string, SolvedAnchor>();
  const track = new Map([...solved].map(([k, s]) => [k, s.anchor]));
  const fit = new SegmentedFit(shape, spec.segmentBy, { method, ...(track.size > 0 ? { track } : {}) });
  const fresh = new SegmentedFit(shape, spec.segmentBy, { method });
  const before = new Map<string, { acc: Accumulator; runId: number | null }>();
  const buckets = new Map<string, { key: (string | null)[]; bucket: string; acc: Accumulator }>();
  const labelOf = (key: readonly (string | null)[]) =>
    spec.segmentBy.length === 0 ? undefined : spec.segmentBy.map((n, i) => `${n}=${key[i] ?? 'NULL'}`).join(', ');
  const inWindow = (bucket: string) => !windowed || start.bounds.windowStart === null || bucket >= start.bounds.windowStart;
  const bucketOf = (key: readonly (string | null)[], bucket: string) => {
    const id = JSON.stringify([key, bucket]);
    let b = buckets.get(id);
    if (b === undefined) {
      buckets.set(id, (b = { key: [...key], bucket, acc: new Accumulator(shape, { label: labelOf(key), method }) }));
    }
    return b;
  };

  for (const rec of start.prior) {
    const key = keyOf(rec.segment);
    const keyText = JSON.stringify(key);
    let b = before.get(keyText);
    if (b === undefined) {
      before.set(keyText, (b = { acc: new Accumulator(shape, { label: labelOf(key), method }), runId: rec.runId ?? null }));
    }
    b.acc.mergeState(rec.state);
    if (inWindow(rec.bucket)) {
      const previous = solved.get(keyText);
      if (previous !== undefined) fit.ensure(key).acc.mergeSolvedState(rec.state, previous.error);
      else fit.ensure(key).acc.mergeState(rec.state);
      bucketOf(key, rec.bucket).acc.mergeState(rec.state);
    }
  }
  for (const s of read.states()) {
    const key = windowed ? s.key.slice(0, -1) : s.key;
    const bucket = windowed ? (s.key.at(-1) ?? '') : '';
    fit.ensure(key).acc.merge(s.acc);
    fresh.ensure(key).acc.merge(s.acc);
    if (windowed) bucketOf(key, bucket).acc.merge(s.acc);
  }
  // A segment that has neither state in the window nor new rows has no model this run.
  if (spec.segmentBy.length === 0) fit.ensure([]);

  const high = start.from === null || rowsRead > 0 ? start.bounds.high : start.from;
  const segmentOf = (key: readonly (string | null)[]) =>
    spec.segmentBy.length === 0 ? null : Object.fromEntries(spec.segmentBy.map((c, i) => [c, key[i] ?? null]));
  const segmentKeyOf = (key: readonly (string | null)[]) => (spec.segmentBy.length === 0 ? '' : JSON.stringify(key));
  const record = (key: readonly (string | null)[], bucket: string, acc: Accumulator): FitStateRecord => ({
    segmentKey: segmentKeyOf(key),
    bucket,
    segment: segmentOf(key),
    designHash: start.designHash,
    watermark: high ?? '',
    watermarkType: start.bounds.type,
    state: acc.state(),
  });
  const states: FitStateRecord[] =
    high === null
      ? []
      : windowed
        ? [...buckets.values()].filter((b) => inWindow(b.bucket) && b.acc.rows + b.acc.zeroWeightRows > 0).map((b) => record(b.key, b.bucket, b.acc))
        : fit.states().filter((s) => s.acc.rows + s.acc.zeroWeightRows > 0).map((s) => record(s.key, '', s.acc));

  const drift: DriftRecord[] = [];
  for (const s of fresh.states()) {
    const b = before.get(s.keyText);
    if (b === undefined || s.acc.rows === 0 || b.acc.rows === 0) continue;
    drift.push({ segment: segmentOf(s.key), segmentKey: segmentKeyOf(s.key), previousRunId: b.runId, test: driftTest(b.acc, s.acc) });
  }
  return {
    fit,
    states,
    drift,
    record: { refit: start.mode, watermarkFrom: start.from, watermarkTo: high, notes: start.notes },
  };
}
