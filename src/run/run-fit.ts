import type { Kysely } from 'kysely';
import { normalEquationsProblem } from '../fit/check-normal-equations.js';
import type { FitSolution } from '../fit/fit-solution.js';
import type { SegmentState, SegmentedFit, SegmentedFitOptions } from '../fit/segmented-fit.js';
import { solve } from '../fit/solve.js';
import { solveExtended } from '../fit/solve-extended.js';
import type { DesignPlan } from '../plan/design-plan.js';
import type { Database, SharedSnapshot } from '../source/database.js';
import { openDatabase } from '../source/open-database.js';
import type { DesignReadCounts } from '../source/read-design.js';
import { loadFitSpec } from '../spec/load-fit-spec.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { SpecError } from '../spec/spec-error.js';
import { specKeyLine } from '../spec/spec-key-line.js';
import { PlanError } from '../plan/plan-error.js';
import { createStoreDb, failRun, migrate, publishRun, startRun, writeFitStates, writeRefitRecord, writeRunResult } from '../store/index.js';
import type { ModelRecord, RunDesign, StoreDatabase } from '../store/index.js';
import { planFit } from './plan-fit.js';
import { finishRefit, startRefit, storedStates } from './refit.js';
import type { RefitOutcome, RefitStart } from './refit.js';
import { certifyDigits } from './accuracy-passes.js';
import { readPass } from './read-pass.js';
import { previousSolutions } from './refit-anchors.js';
import { toolVersion } from '../common/tool-version.js';
import type { RunOutcome } from './fit-document.js';
import type { DatabaseOption } from '../source/open-database.js';

/** The spec file could not be read (missing, unreadable): a usage error, not a failed fit. */
export class SpecFileError extends Error {
  override readonly name = 'SpecFileError';
}

/** What `rowfold fit` was asked to do. */
export interface RunFitRequest {
  /** The spec file; or give the spec itself in `spec`. */
  readonly specPath?: string;
  /** A spec already loaded (the library's spec objects); takes the place of `specPath`. */
  readonly spec?: FitSpec;
  /** `--schema`: the result schema, in place of the spec's `schema`. */
  readonly schema?: string | undefined;
  /** `--db URL` or `embedded:FOLDER`, or a pg pool the caller owns; otherwise DATABASE_URL, then the PG* variables. */
  readonly db?: DatabaseOption;
  readonly env?: NodeJS.ProcessEnv;
  readonly parallel?: number;
  /**
   * Threads that fold blocks beside the reading thread (0: fold on the reading thread).
   * Unset: one when the factor's order is 64 or more and there is a second core.
   */
  readonly threads?: number | undefined;
  /** Overrides the spec's `read`. */
  readonly read?: 'copy' | 'rows' | undefined;
  /** Overrides the spec's `accuracy`. */
  readonly accuracy?: 'auto' | 'fast' | 'extended' | undefined;
  readonly dryRun?: boolean;
  /**
   * False: read, fold and solve, but write nothing to the result tables (no run row, no
   * models; the result's run id is null). Default true. A fit with a watermark or a window
   * needs its stored state, so it always publishes.
   */
  readonly publish?: boolean;
  /** With a watermark: read every row and replace the stored state (late rows are folded in). */
  readonly full?: boolean;
  /** Called once the run's `runs` row is written (so a server can fail it if it must stop). */
  readonly onRunStarted?: (runId: number) => void;
  /** Called now and then while rows stream. */
  readonly onProgress?: (p: { rowsRead: number; segments: number; seconds: number }) => void;
  /**
   * Stops the run at its next step (a read stops at once): no run is started after it aborts,
   * and a started run is marked failed with the signal's reason.
   */
  readonly signal?: AbortSignal | undefined;
}

/** One published model. */
export interface FittedModel {
  readonly segment: Record<string, string | null> | null;
  readonly segmentKey: string;
  readonly solution: FitSolution;
  /** Streamed passes over this model's rows (more than 1 when `auto` refined it or folded it in double-double). */
  readonly passes: number;
}

/** The outcome of a run (or of a dry run: the plan only). */
export interface RunFitResult {
  readonly spec: FitSpec;
  readonly plan: DesignPlan;
  readonly connection: string;
  readonly runId: number | null;
  readonly rowsRead: number;
  readonly rowsUsed: number;
  readonly rowsSkipped: Record<string, number>;
  readonly seconds: number;
  readonly models: readonly FittedModel[];
  /** For a fit with a watermark or window: full or incremental, notes, watermarks, drift tests. */
  readonly refit?: RefitOutcome | undefined;
}

const TOOL_VERSION = toolVersion();

/**
 * Loads a spec file: a SpecError (a bad spec) passes through; a file that cannot be read
 * becomes a SpecFileError (a usage error, not a failed fit).
 */
export function loadSpecFile(specPath: string): Promise<FitSpec> {
  return loadSpecPath(specPath);
}

/** The spec of a request: the one given, else the file's, with `schema` in place of the spec's when given. */
export async function requestSpec(req: Pick<RunFitRequest, 'spec' | 'specPath' | 'schema'>): Promise<FitSpec> {
  let spec: FitSpec;
  if (req.spec !== undefined) spec = req.spec;
  else if (req.specPath !== undefined) spec = await loadSpecPath(req.specPath);
  else throw new SpecFileError('no spec: give a spec file or a spec object');
  return req.schema === undefined || req.schema === spec.schema ? spec : { ...spec, schema: req.schema };
}

function loadSpecPath(specPath: string): Promise<FitSpec> {
  return loadFitSpec(specPath).catch((e: unknown) => {
    if (e instanceof SpecError) throw e;
    throw new SpecFileError(`cannot read the spec ${specPath}: ${e instanceof Error ? e.message : String(e)}`, { cause: e });
  });
}

/** Writes the `runs` row of a run about to read `plan`: the audit trail of what it will fit. */
export function startFitRun(db: Kysely<StoreDatabase>, spec: FitSpec, plan: DesignPlan): Promise<number> {
  return startRun(db, spec.schema, {
    fitName: spec.name,
    specHash: spec.hash,
    specText: spec.text,
    designQuery: plan.queries.map((q) => q.toBound().text).join('\n-- next partition --\n'),
    toolVersion: TOOL_VERSION,
    design: specDesign(spec),
  });
}

/** The design of a spec as the `runs` table records it (response, weight, terms, categorical, segment_by). */
export function specDesign(spec: FitSpec): RunDesign {
  return {
    response: spec.response,
    weight: spec.weight,
    terms: [
      ...spec.terms.map((t) => t.name),
      ...spec.categorical.map((c) => c.column),
      ...spec.interactions.map(([a, b]) => `${a.name}*${b.name}`),
    ],
    categorical: spec.categorical.map((c) => c.column),
    segmentBy: spec.segmentBy,
  };
}

/**
 * The flow of one fit: spec → plan → read (N partitions over N connections) → fold →
 * solve → publish in one transaction. A failure after the run has started leaves only
 * its `runs` row, marked failed with the error.
 */
export async function runFit(req: RunFitRequest): Promise<RunFitResult> {
  const spec = await requestSpec(req);
  const parallel = req.parallel ?? 1;
  const database = await openDatabase({ db: req.db, env: req.env ?? process.env, sessions: parallel + 1 });
  const db = createStoreDb(database.dialect());
  let reads: SharedSnapshot | undefined;
  try {
    return await runFitOn(database, db, spec, parallel, req, (r) => (reads = r));
  } catch (e) {
    throw withDatabaseNamed(placePlanError(e, spec), database.display);
  } finally {
    await reads?.release();
    await db.destroy();
    await database.close();
  }
}

/** The run of {@link runFit} on an open database; `holdReads` hands the shared snapshot back for release. */
async function runFitOn(
  database: Database,
  db: Kysely<StoreDatabase>,
  spec: FitSpec,
  parallel: number,
  req: RunFitRequest,
  holdReads: (reads: SharedSnapshot) => void,
): Promise<RunFitResult> {
  if (parallel > database.maxSessions) {
    throw new SpecFileError(`--parallel ${parallel}: the ${database.kind} database serves ${database.maxSessions} reader(s) at once`);
  }
  let refit: RefitStart | null = null;
  // Read before the session opens: the embedded database serves one session at a time.
  const stored = spec.watermark === null ? [] : await storedStates(db, spec);
  // Every read of the run (the plan's probes, each partition, a second pass) sees one snapshot,
  // and the plan's locks keep the source from being altered or truncated until the run ends.
  const reads = await database.shareSnapshot();
  holdReads(reads);
  // Without a shared snapshot (the embedded database), a level the plan did not find fails the read.
  const guard = reads.snapshotId === null;
  const plan = await reads.withHoldingSession(async (session) => {
    if (spec.watermark === null) return planFit(session, spec, parallel, {}, guard);
    // The unscoped plan gives the design (columns, levels) that stored state must match.
    refit = await startRefit(session, stored, spec, await planFit(session, spec, parallel), req.full === true);
    return planFit(session, spec, parallel, refit.scope, guard);
  });
  // An incremental refit refines from the previous solutions (no pass over the stored rows).
  if (refit !== null) refit = { ...(refit as RefitStart), solved: await previousSolutions(db, spec, refit) };
  const base = { spec, plan, connection: database.display };
  if (req.dryRun) {
    return { ...base, runId: null, rowsRead: 0, rowsUsed: 0, rowsSkipped: {}, seconds: 0, models: [] };
  }
  if (req.publish === false && spec.watermark === null) {
    req.signal?.throwIfAborted();
    const out = await readAndSolve(reads, spec, plan, req, refit);
    return { ...base, runId: null, ...out };
  }
  await migrate(db, spec.schema);
  req.signal?.throwIfAborted();
  const runId = await startFitRun(db, spec, plan);
  req.onRunStarted?.(runId);
  try {
    const out = await readAndSolve(reads, spec, plan, req, refit);
    req.signal?.throwIfAborted();
    const result = {
      rowsRead: out.rowsRead,
      rowsUsed: out.rowsUsed,
      rowsSkipped: out.rowsSkipped,
      seconds: out.seconds,
      models: out.models.map(
        (m): ModelRecord => ({
          segment: m.segment,
          segmentKey: m.segmentKey,
          method: spec.method,
          solution: m.solution,
          passes: m.passes,
        }),
      ),
    };
    const done = out.refit;
    if (done === undefined) await publishRun(db, spec.schema, runId, result);
    else {
      // State, drift tests and models in one transaction: a refit never merges state of an unpublished run.
      await db.transaction().execute(async (trx) => {
        await writeRunResult(trx, spec.schema, runId, result);
        await writeFitStates(trx, spec.schema, spec.name, runId, done.states);
        await writeRefitRecord(trx, spec.schema, runId, spec.name, done.record, done.drift);
      });
    }
    return { ...base, runId, ...out };
  } catch (e) {
    await failRun(db, spec.schema, runId, req.signal?.aborted === true ? req.signal.reason : e).catch(() => undefined);
    throw e;
  }
}

/**
 * Names the database on an error that escapes a run (`error.database`, `user@host:port/db` or
 * the embedded folder), so that a message such as "relation … does not exist" says where it
 * was looked for. An error that already names one keeps it.
 */
export function withDatabaseNamed(e: unknown, display: string): unknown {
  if (e instanceof Error && (e as { database?: unknown }).database === undefined) {
    Object.defineProperty(e, 'database', { value: display, enumerable: true, configurable: true, writable: true });
  }
  return e;
}

/** A PlanError placed at the line of its key in the spec (`spec.yaml:7: terms[2]: …`); other errors as they are. */
export function placePlanError(e: unknown, spec: FitSpec): unknown {
  if (!(e instanceof PlanError) || e.line !== undefined) return e;
  return e.at(spec.origin, specKeyLine(spec.text, e.key));
}

/** A run's result in the terms of {@link fitDocument} (the one vocabulary). */
export function runOutcome(r: RunFitResult): RunOutcome {
  return {
    runId: r.runId,
    fitName: r.spec.name,
    schema: r.spec.schema,
    database: r.connection,
    rowsRead: r.rowsRead,
    rowsUsed: r.rowsUsed,
    rowsSkipped: r.rowsSkipped,
    seconds: r.seconds,
    toolVersion: TOOL_VERSION,
    design: specDesign(r.spec),
    models: r.models.map((m) => ({ ...m, method: r.spec.method })),
    refit: r.refit,
  };
}

/**
 * The arithmetic and plan of a run's passes: the first pass (double precision, or double-double
 * when `accuracy: extended` and the run is not a refit) and the double-double pass that `auto`
 * and `extended` may take. A split run's partition jobs fold their first pass by it too.
 */
export function passesOf(
  spec: FitSpec,
  plan: DesignPlan,
  req: Pick<RunFitRequest, 'read' | 'accuracy'>,
  refit: RefitStart | null,
  /** False for a split run's partitions, whose stored partial factors keep no residual sums. */
  tracking = true,
): {
  accuracy: 'auto' | 'fast' | 'extended';
  extendedPlan: DesignPlan;
  extendedOptions: SegmentedFitOptions;
  firstPlan: DesignPlan;
  firstOptions: SegmentedFitOptions;
} {
  const accuracy = spec.method === 'normal' ? 'fast' : (req.accuracy ?? spec.accuracy);
  // Numeric columns travel as numeric only over COPY; the row stream carries float8.
  const extendedPlan = (req.read ?? spec.read) === 'copy' ? (plan.extended ?? plan) : (plan.extendedFloat ?? plan);
  const extendedOptions: SegmentedFitOptions = {
    precision: 'double-double',
    pairs: extendedPlan.valueTypes.includes('numeric'),
  };
  // A refit folds its first pass in double precision, the arithmetic of stored state.
  const ddFirst = accuracy === 'extended' && refit === null;
  // auto gathers a refinement step in the first pass when its values are the data's own
  // (numeric columns arrive rounded to float8 in the first pass: their step needs a pass of its own).
  const exact = tracking && accuracy === 'auto' && spec.method === 'qr' && extendedOptions.pairs !== true;
  // A refit's new rows are summed against the previous solutions, a fresh fit's against the solution so far.
  const solved = refit?.solved === undefined ? undefined : new Map([...refit.solved].map(([k, s]) => [k, s.anchor]));
  const track = !exact ? undefined : refit === null ? ('follow' as const) : solved !== undefined && solved.size > 0 ? solved : undefined;
  return {
    accuracy,
    extendedPlan,
    extendedOptions,
    firstPlan: ddFirst ? extendedPlan : plan,
    firstOptions: ddFirst ? extendedOptions : { method: spec.method, ...(track === undefined ? {} : { track }) },
  };
}

/**
 * Read (unless `folded` brings the first pass already folded, as the merge of a split run
 * does), solve, take the double-double pass `accuracy` asks for, and gather the models and
 * counts to publish.
 */
export async function readAndSolve(
  database: Database,
  spec: FitSpec,
  plan: DesignPlan,
  req: RunFitRequest,
  refit: RefitStart | null = null,
  folded?: { fit: SegmentedFit; counts: DesignReadCounts[] },
): Promise<Omit<RunFitResult, 'spec' | 'plan' | 'connection' | 'runId'>> {
  const started = performance.now();
  const progress = { rows: 0, last: started, started };
  const { accuracy, extendedPlan, extendedOptions, firstPlan, firstOptions } = passesOf(spec, plan, req, refit);
  const first = folded ?? (await readPass(database, firstPlan, spec, req, firstOptions, progress));
  const counts = first.counts;
  const rowsRead = counts.reduce((n, c) => n + c.rowsRead, 0);
  const done = refit === null ? undefined : finishRefit(refit, spec, first.fit.shape, spec.method, first.fit, rowsRead);
  const all = done?.fit ?? first.fit;
  if (rowsRead === 0 && (done === undefined || all.states().every((s) => s.acc.rows + s.acc.zeroWeightRows === 0))) {
    throw new Error(
      done === undefined || done.record.refit === 'full'
        ? 'the source returned no rows; there is nothing to fit'
        : 'the source returned no new rows and no stored state is left in the window; there is nothing to fit',
    );
  }
  // Segment columns of the models (a window plan reads one more key, the bucket).
  const keyNames = done === undefined ? plan.keyNames : spec.segmentBy;
  if (keyNames.length === 0) all.ensure([]);

  const solveOne = (s: SegmentState): FitSolution =>
    s.acc.precision === 'double-double'
      ? solveExtended(s.acc, { confidence: spec.confidence })
      : solve(s.acc, { confidence: spec.confidence });
  const solutions = new Map<string, FitSolution>();
  for (const s of all.states()) solutions.set(s.keyText, solveOne(s));

  // auto: more passes for the models double precision cannot vouch for (refinement, or a
  // double-double fold). With a refit, `extended` is a double-double pass for every segment.
  const passes =
    accuracy === 'auto' || (accuracy === 'extended' && refit !== null)
      ? await certifyDigits(
          { database, spec, req, accuracy, plan: extendedPlan, pairs: extendedOptions.pairs === true, models: all.states(), progress },
          solutions,
        )
      : new Map<string, number>();

  const models: FittedModel[] = [];
  let rowsUsed = 0;
  let zeroWeight = 0;
  for (const s of all.states()) {
    const solution = solutions.get(s.keyText)!;
    if (spec.method === 'normal') {
      const problem = normalEquationsProblem(solution);
      if (problem !== null) throw new Error(`${s.acc.label === undefined ? '' : `segment ${s.acc.label}: `}${problem}`);
    }
    rowsUsed += solution.rows;
    zeroWeight += solution.zeroWeightRows;
    const segment = keyNames.length === 0 ? null : Object.fromEntries(keyNames.map((n, i) => [n, s.key[i] ?? null]));
    models.push({ segment, segmentKey: keyNames.length === 0 ? '' : s.keyText, solution, passes: passes.get(s.keyText) ?? 1 });
  }
  if (done !== undefined) {
    // A refit's counts are of the rows it read; its models also hold the stored rows.
    rowsUsed = 0;
    zeroWeight = 0;
    for (const s of first.fit.states()) {
      rowsUsed += s.acc.rows;
      zeroWeight += s.acc.zeroWeightRows;
    }
  }
  return {
    rowsRead,
    rowsUsed,
    rowsSkipped: skippedByReason(plan, counts, zeroWeight),
    seconds: (performance.now() - started) / 1000,
    models,
    refit: done,
  };
}

/**
 * Skip counts by reason and spec name. A NULL category makes every indicator of that
 * column NULL at once, so counts of columns with the same origin are combined by their
 * maximum rather than their sum.
 */
function skippedByReason(plan: DesignPlan, counts: readonly DesignReadCounts[], zeroWeight: number): Record<string, number> {
  const out: Record<string, number> = {};
  const add = (reason: string, byColumn: (c: DesignReadCounts) => Record<string, number>) => {
    for (const c of counts) {
      const perOrigin = new Map<string, number>();
      plan.valueNames.forEach((name, j) => {
        const origin = plan.origins[j]!;
        perOrigin.set(origin, Math.max(perOrigin.get(origin) ?? 0, byColumn(c)[name] ?? 0));
      });
      for (const [origin, n] of perOrigin) if (n > 0) out[`${reason}:${origin}`] = (out[`${reason}:${origin}`] ?? 0) + n;
    }
  };
  add('null', (c) => c.nullCounts);
  add('non_finite', (c) => c.nonFiniteCounts);
  if (zeroWeight > 0) out.zero_weight = zeroWeight;
  return out;
}
