import type { Kysely } from 'kysely';
import { normalEquationsProblem } from '../fit/check-normal-equations.js';
import type { FitSolution } from '../fit/fit-solution.js';
import type { SegmentState, SegmentedFit, SegmentedFitOptions } from '../fit/segmented-fit.js';
import { solve } from '../fit/solve.js';
import { solveExtended } from '../fit/solve-extended.js';
import type { DesignPlan } from '../plan/design-plan.js';
import type { Database, SharedSnapshot } from '../source/database.js';
import { connectionNamed, loadConnections } from '../source/connections-file.js';
import type { Connections } from '../source/connections-file.js';
import { openDatabase } from '../source/open-database.js';
import { openServerDatabase } from '../source/server-database.js';
import type { DesignReadCounts } from '../source/read-design.js';
import { loadFitSpec } from '../spec/load-fit-spec.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { SpecError } from '../spec/spec-error.js';
import { specKeyLine } from '../spec/spec-key-line.js';
import { PlanError } from '../plan/plan-error.js';
import {
  createStoreDb,
  failRun,
  migrate,
  publishRun,
  startRun,
  writeFitStates,
  writeRefitRecord,
  writeResidualResults,
  writeRunResult,
} from '../store/index.js';
import type { ModelRecord, RunDesign, RunResult, StoreDatabase } from '../store/index.js';
import { planFit } from './plan-fit.js';
import { finishRefit, startRefit, storedStates } from './refit.js';
import type { RefitOutcome, RefitStart } from './refit.js';
import { AUTO_TARGET_DIGITS, certifyDigits } from './accuracy-passes.js';
import { readPass } from './read-pass.js';
import { ReadSites } from './read-sites.js';
import { residualPass } from './residual-pass.js';
import type { ModelResiduals } from './residual-pass.js';
import { previousSolutions } from './refit-anchors.js';
import { toolVersion } from '../common/tool-version.js';
import { collectGarbage, MODELS_PER_COLLECTION } from './collect-garbage.js';
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
  /**
   * `--connections FILE`: the connections file that names shards and the spec's `read_from`
   * (otherwise ROWFOLD_CONNECTIONS), see loadConnections.
   */
  readonly connections?: string | undefined;
  /** The shards a run reads its foreign partitions from; opened by the run itself (not for callers). */
  readonly sites?: ReadSites | undefined;
  /** Reads of a shard's partition before the run fails (default SHARD_READ_ATTEMPTS; a split run's job: 1, the queue retries). */
  readonly shardAttempts?: number | undefined;
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
  /**
   * Models the result keeps (the first in key order). Default {@link DEFAULT_KEEP_MODELS}: a
   * run of a million segments publishes them all without holding them.
   */
  readonly keepModels?: number | undefined;
  /** Called with every model as it is published (inside the run's transaction, before it commits). */
  readonly onModel?: ((model: FittedModel) => void) | undefined;
}

/** Models a {@link RunFitResult} keeps unless the request says otherwise. */
export const DEFAULT_KEEP_MODELS = 1000;

/** One published model. */
export interface FittedModel {
  readonly segment: Record<string, string | null> | null;
  readonly segmentKey: string;
  readonly solution: FitSolution;
  /** Streamed passes over this model's rows (more than 1 when `auto` refined it or folded it in double-double). */
  readonly passes: number;
  /** What the residual pass found (spec key `residual_pass`); absent without one. */
  readonly residuals?: ModelResiduals | undefined;
  /** The model's `model_id` once it is written; absent when nothing is published. */
  readonly modelId?: number | undefined;
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
  /** How many models the run published. */
  readonly modelCount: number;
  /**
   * The first models published (in order of their key text), at most `keepModels` of them;
   * every model goes to `onModel` and to the result tables.
   */
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

/**
 * Writes the `runs` row of a run about to read `plan`: the audit trail of what it will fit, and
 * where it reads (`readFrom`, see {@link readFromText}).
 */
export function startFitRun(db: Kysely<StoreDatabase>, spec: FitSpec, plan: DesignPlan, readFrom: string | null = null): Promise<number> {
  return startRun(db, spec.schema, {
    fitName: spec.name,
    specHash: spec.hash,
    specText: spec.text,
    designQuery: plan.queries
      .map((q, i) => {
        const site = plan.sites?.[i] ?? null;
        return (site === null ? '' : `-- on shard ${site.server}\n`) + q.toBound().text;
      })
      .join('\n-- next partition --\n'),
    toolVersion: TOOL_VERSION,
    readFrom,
    designLevels: plan.levels,
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
 * Where a run reads its rows, for `runs.read_from`: the `read_from` connection and the shards read
 * directly, each as `name (user@host:port/database)`; null when every row is read from the
 * database the run publishes to. Never a password (a connection's display has none).
 */
export function readFromText(spec: FitSpec, connections: Connections, sites: ReadSites | undefined): string | null {
  const parts: string[] = [];
  if (spec.readFrom !== null) {
    const target = connectionNamed(connections, spec.readFrom, 'read_from');
    parts.push(`${spec.readFrom} (${target.display})`);
  }
  const shards = sites?.describe() ?? [];
  if (shards.length > 0) parts.push(`shards ${shards.join(', ')}`);
  return parts.length === 0 ? null : parts.join('; ');
}

/**
 * The database a run reads its source from: the spec's `read_from` connection (a server of
 * `sessions` connections), or `database` itself.
 */
export function openSourceDatabase(spec: FitSpec, connections: Connections, database: Database, sessions: number): Database {
  if (spec.readFrom === null) return database;
  return openServerDatabase(connectionNamed(connections, spec.readFrom, `read_from: ${spec.readFrom} (spec ${spec.origin})`), sessions);
}

/**
 * The flow of one fit: spec → plan → read (N partitions over N connections) → fold →
 * solve → publish in one transaction. A failure after the run has started leaves only
 * its `runs` row, marked failed with the error.
 */
export async function runFit(req: RunFitRequest): Promise<RunFitResult> {
  const spec = await requestSpec(req);
  const parallel = req.parallel ?? 1;
  const connections = loadConnections({ file: req.connections, env: req.env ?? process.env });
  // Checked before anything opens: a read_from name the file lacks is a usage error.
  if (spec.readFrom !== null) connectionNamed(connections, spec.readFrom, `read_from: ${spec.readFrom} (spec ${spec.origin})`);
  const database = await openDatabase({ db: req.db, env: req.env ?? process.env, sessions: parallel + 1 });
  const db = createStoreDb(database.dialect());
  // Rows are read over read_from when the spec names one; results go to `database` either way.
  const source = openSourceDatabase(spec, connections, database, parallel + 1);
  let reads: SharedSnapshot | undefined;
  let sites: ReadSites | undefined;
  try {
    return await runFitOn(database, source, db, spec, parallel, req, connections, (r) => (reads = r), (s) => (sites = s));
  } catch (e) {
    throw withDatabaseNamed(placePlanError(e, spec), database.display);
  } finally {
    await reads?.release();
    await sites?.close();
    if (source !== database) await source.close();
    await db.destroy();
    await database.close();
  }
}

/**
 * The run of {@link runFit} on an open database (rows read from `source`, the spec's `read_from`
 * or the database itself); `holdReads` and `holdSites` hand the shared snapshot and the shards
 * back for release.
 */
async function runFitOn(
  database: Database,
  source: Database,
  db: Kysely<StoreDatabase>,
  spec: FitSpec,
  parallel: number,
  req: RunFitRequest,
  connections: Connections,
  holdReads: (reads: SharedSnapshot) => void,
  holdSites: (sites: ReadSites) => void,
): Promise<RunFitResult> {
  if (parallel > source.maxSessions) {
    throw new SpecFileError(`--parallel ${parallel}: the ${source.kind} database serves ${source.maxSessions} reader(s) at once`);
  }
  let refit: RefitStart | null = null;
  // Read before the session opens: the embedded database serves one session at a time.
  const stored = spec.watermark === null ? [] : await storedStates(db, spec);
  // Every read of the run (the plan's probes, each partition, a second pass) sees one snapshot,
  // and the plan's locks keep the source from being altered or truncated until the run ends.
  const reads = await source.shareSnapshot();
  holdReads(reads);
  // Without a shared snapshot (the embedded database), a level the plan did not find fails the read.
  const guard = reads.snapshotId === null;
  const plan = await reads.withHoldingSession(async (session) => {
    if (spec.watermark === null) return planFit(session, spec, parallel, {}, guard, connections);
    // The unscoped plan gives the design (columns, levels) that stored state must match.
    refit = await startRefit(session, stored, spec, await planFit(session, spec, parallel, {}, false, connections), req.full === true);
    return planFit(session, spec, parallel, refit.scope, guard, connections);
  });
  // An incremental refit refines from the previous solutions (no pass over the stored rows).
  if (refit !== null) refit = { ...(refit as RefitStart), solved: await previousSolutions(db, spec, refit) };
  // Foreign partitions are read on their shards: every foreign server needs a connection of its name.
  let sites: ReadSites | undefined;
  if (plan.sites !== undefined) {
    sites = new ReadSites(connections, plan);
    holdSites(sites);
  }
  const base = { spec, plan, connection: database.display };
  if (req.dryRun) {
    return { ...base, runId: null, rowsRead: 0, rowsUsed: 0, rowsSkipped: {}, seconds: 0, modelCount: 0, models: [] };
  }
  if (req.publish === false && spec.watermark === null) {
    req.signal?.throwIfAborted();
    const out = await readAndSolve(reads, spec, plan, { ...req, sites }, refit);
    // Nothing is written: the models still stream (to onModel), and the first keepModels are kept.
    const kept: FittedModel[] = [];
    let seconds = 0;
    const result = publishable(spec, out, req, kept, (t) => (seconds = t), false);
    for await (const _ of result.models) void _;
    if (typeof result.seconds === 'function') result.seconds();
    const { rowsRead, rowsUsed, rowsSkipped, modelCount } = out;
    return { ...base, runId: null, rowsRead, rowsUsed, rowsSkipped, seconds, modelCount, models: kept, refit: out.refit };
  }
  await migrate(db, spec.schema);
  req.signal?.throwIfAborted();
  const runId = await startFitRun(db, spec, plan, readFromText(spec, connections, sites));
  req.onRunStarted?.(runId);
  try {
    const solved = await readAndSolve(reads, spec, plan, { ...req, sites }, refit);
    req.signal?.throwIfAborted();
    // The residual pass reads over the same snapshot and read sites as the first pass.
    const out = await withResiduals(reads, spec, plan, { ...req, sites }, solved);
    req.signal?.throwIfAborted();
    const kept: FittedModel[] = [];
    let seconds = 0;
    const result = publishable(spec, out, req, kept, (t) => (seconds = t));
    const done = out.refit;
    const residuals = out.residuals;
    if (done === undefined && residuals.size === 0) await publishRun(db, spec.schema, runId, result);
    else {
      // State, drift tests, models and residual results in one transaction: a refit never merges
      // state of an unpublished run, and a dashboard never sees models without their robust errors.
      await db.transaction().execute(async (trx) => {
        await writeRunResult(trx, spec.schema, runId, result);
        if (done !== undefined) {
          await writeFitStates(trx, spec.schema, spec.name, runId, done.states);
          await writeRefitRecord(trx, spec.schema, runId, spec.name, done.record, done.drift);
        }
        await writeResidualResults(trx, spec.schema, runId, residuals, spec.residualPass?.holdout ?? null);
      });
    }
    const { rowsRead, rowsUsed, rowsSkipped, modelCount } = out;
    return { ...base, runId, rowsRead, rowsUsed, rowsSkipped, seconds, modelCount, models: kept, refit: done };
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
    modelCount: r.modelCount,
    refit: r.refit,
  };
}

/**
 * The run result to publish from a solved run: its models as a one-time iterable that hands
 * each to `req.onModel`, keeps the first `req.keepModels` in `kept` and stops at an abort;
 * `seconds` is told the run's duration once every model is taken.
 */
export function publishable(
  spec: FitSpec,
  out: SolvedRun,
  req: Pick<RunFitRequest, 'keepModels' | 'onModel' | 'signal'>,
  kept: FittedModel[],
  onSeconds: (seconds: number) => void = () => undefined,
  /** False when nothing is written (`publish: false`): the models have no model_id then. */
  publishing = true,
): RunResult {
  const keep = req.keepModels ?? DEFAULT_KEEP_MODELS;
  // Taken but not yet written: handed on (with their model_id) once their batch is written.
  const pending: FittedModel[] = [];
  const handOn = (m: FittedModel) => {
    req.onModel?.(m);
    if (kept.length < keep) kept.push(m);
  };
  const wanted = req.onModel !== undefined || keep > 0;
  function* records(): Generator<ModelRecord> {
    let n = 0;
    for (const m of out.models()) {
      if ((++n & 1023) === 0) req.signal?.throwIfAborted();
      if (n % MODELS_PER_COLLECTION === 0) collectGarbage();
      if (!publishing) handOn(m);
      else if (wanted) pending.push(m);
      yield { segment: m.segment, segmentKey: m.segmentKey, method: spec.method, solution: m.solution, passes: m.passes };
    }
    req.signal?.throwIfAborted();
  }
  return {
    rowsRead: out.rowsRead,
    rowsUsed: out.rowsUsed,
    rowsSkipped: out.rowsSkipped,
    seconds: () => {
      const s = out.seconds();
      onSeconds(s);
      return s;
    },
    models: records(),
    ...(publishing && wanted
      ? {
          published: (ids: readonly number[]) => {
            for (const id of ids) {
              const m = pending.shift();
              if (m === undefined) throw new Error('a model id came back for a model that was not taken');
              handOn({ ...m, modelId: id });
            }
          },
        }
      : {}),
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
 * A run read and ready to publish: its counts, and its models solved one by one as they are
 * taken ({@link SolvedRun.models} runs once), so that no more than a batch of solved models is
 * held at any segment count.
 */
export interface SolvedRun {
  readonly rowsRead: number;
  readonly rowsUsed: number;
  readonly rowsSkipped: Record<string, number>;
  /** Seconds since the run's first read began (call once every model is published). */
  readonly seconds: () => number;
  readonly modelCount: number;
  /** The models in order of their key text, each solved as it is taken. */
  readonly models: () => Generator<FittedModel>;
  readonly refit?: RefitOutcome | undefined;
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
): Promise<SolvedRun> {
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
  const states = all.states();
  // The read's garbage (blocks, key buffers) goes before the models' comes.
  if (states.length >= MODELS_PER_COLLECTION) collectGarbage();
  // Solutions held across the passes: only of the models the passes after the first take up
  // (auto: short of the target digits; extended refit: every solved model). The others are
  // solved as they are published.
  const solutions = new Map<string, FitSolution>();
  const more = accuracy === 'auto' || (accuracy === 'extended' && refit !== null);
  if (more) {
    for (const s of states) {
      const fit = solveOne(s);
      if (fit.status !== 'ok' && fit.status !== 'no_residual_df') continue;
      if (accuracy === 'extended' || (fit.estimatedDigits !== null && fit.estimatedDigits < AUTO_TARGET_DIGITS)) {
        solutions.set(s.keyText, fit);
      }
    }
  }

  // auto: more passes for the models double precision cannot vouch for (refinement, or a
  // double-double fold). With a refit, `extended` is a double-double pass for every segment.
  const passes =
    more && solutions.size > 0
      ? await certifyDigits(
          { database, spec, req, accuracy: accuracy as 'auto' | 'extended', plan: extendedPlan, pairs: extendedOptions.pairs === true, models: states, progress },
          solutions,
        )
      : new Map<string, number>();

  let rowsUsed = 0;
  let zeroWeight = 0;
  for (const s of done === undefined ? states : first.fit.states()) {
    // A refit's counts are of the rows it read; its models also hold the stored rows.
    rowsUsed += s.acc.rows;
    zeroWeight += s.acc.zeroWeightRows;
  }
  let taken = false;
  function* models(): Generator<FittedModel> {
    if (taken) throw new Error('the models of a run are solved once');
    taken = true;
    for (let i = 0; i < states.length; i++) {
      const s = states[i]!;
      const solution = solutions.get(s.keyText) ?? solveOne(s);
      if (spec.method === 'normal') {
        const problem = normalEquationsProblem(solution);
        if (problem !== null) throw new Error(`${s.acc.label === undefined ? '' : `segment ${s.acc.label}: `}${problem}`);
      }
      const segment = keyNames.length === 0 ? null : Object.fromEntries(keyNames.map((n, j) => [n, s.key[j] ?? null]));
      yield { segment, segmentKey: keyNames.length === 0 ? '' : s.keyText, solution, passes: passes.get(s.keyText) ?? 1 };
    }
  }
  return {
    rowsRead,
    rowsUsed,
    rowsSkipped: skippedByReason(plan, counts, zeroWeight),
    seconds: () => (performance.now() - started) / 1000,
    modelCount: states.length,
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

/**
 * The residual pass after the solve, when the spec asks for one (`residual_pass`): its findings
 * join each model as it is published (`residuals`, also by segment key for the result tables).
 * It reads every row the models hold, so an incremental refit, which folds only new rows, still
 * takes this pass over all of them; its time counts in the run's `seconds`.
 *
 * The pass needs every segment's solved coefficients before its read, so with a residual pass
 * the models are solved at once (once each: they are not solved again when published) and held
 * until published, each let go as it is taken. Memory grows with segments × terms² (a solution's
 * covariance beside the pass's per-segment sums, of the same order as the factors the run holds
 * anyway); without a residual pass the models are solved as they are published, as before.
 */
export async function withResiduals(
  database: Database,
  spec: FitSpec,
  plan: DesignPlan,
  req: RunFitRequest,
  solved: SolvedRun,
): Promise<SolvedRun & { readonly residuals: ReadonlyMap<string, ModelResiduals> }> {
  if (spec.residualPass === null || plan.residual === undefined) return { ...solved, residuals: new Map() };
  const held: (FittedModel | undefined)[] = [];
  for (const m of solved.models()) {
    if ((held.length & 1023) === 1023) req.signal?.throwIfAborted();
    held.push(m);
  }
  const found = await residualPass(database, spec, plan, req, held as FittedModel[]);
  let taken = false;
  function* models(): Generator<FittedModel> {
    if (taken) throw new Error('the models of a run are solved once');
    taken = true;
    for (let i = 0; i < held.length; i++) {
      const m = held[i]!;
      held[i] = undefined;
      yield { ...m, residuals: found.get(m.segmentKey) };
    }
  }
  return { ...solved, models, residuals: found };
}
