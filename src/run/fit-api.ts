import { stringify } from 'yaml';
import type { FitSpecDocumentInput } from '../spec/fit-spec-schema.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { parseFitSpec } from '../spec/parse-fit-spec.js';
import type { DatabaseOption } from '../source/open-database.js';
import { fitDocument, modelDocument } from './fit-document.js';
import type { FitDocument, ModelDocument } from './fit-document.js';
import { runFitExclusive } from './run-fit-exclusive.js';
import { DEFAULT_KEEP_MODELS, loadSpecFile, runOutcome } from './run-fit.js';
import type { FittedModel, RunFitResult } from './run-fit.js';

/** A fit spec as an object: the keys and values of a spec file (snake_case, as in YAML). */
export type FitSpecObject = FitSpecDocumentInput;

/** How far a fit has got, now and then while rows stream. */
export interface FitProgress {
  readonly rows_read: number;
  readonly segment_count: number;
  readonly seconds: number;
}

/** Options of {@link fit}. */
export interface FitOptions {
  /**
   * Where the data is and the results go: a PostgreSQL URL, `embedded:FOLDER` (the embedded
   * database in FOLDER), or a `pg.Pool` you own (rowfold checks connections out of it and
   * leaves it open). Default: DATABASE_URL, then the PG* variables, then the embedded
   * database in `.rowfold/db`.
   */
  readonly db?: DatabaseOption;
  /** Result schema, in place of the spec's `schema` (default `rowfold`). */
  readonly schema?: string;
  /**
   * False: fit and return the models (with their `residuals` when the spec has a
   * `residual_pass`) without writing to the result tables (`run.run_id` is null). Default true. A fit with a watermark or a window always publishes: its next run
   * needs the state this one stores.
   */
  readonly publish?: boolean;
  /** Read N disjoint partitions over N connections (default 1). */
  readonly parallel?: number;
  /** Threads folding rows beside the reading thread (default: as `rowfold fit`). */
  readonly threads?: number;
  /** In place of the spec's `read`. */
  readonly read?: 'copy' | 'rows';
  /** In place of the spec's `accuracy`. */
  readonly accuracy?: 'auto' | 'fast' | 'extended';
  /** With a watermark: read every row and replace the stored state. */
  readonly full?: boolean;
  /** Environment for DATABASE_URL and the PG* variables (default `process.env`). */
  readonly env?: NodeJS.ProcessEnv;
  /** Called now and then while rows stream. */
  readonly onProgress?: (progress: FitProgress) => void;
  /** Stops the fit at its next step; a started run is marked failed. */
  readonly signal?: AbortSignal;
  /**
   * The connections file (YAML, name: URL) naming the spec's `read_from` and the shards of a
   * sharded source (default: ROWFOLD_CONNECTIONS in `env`).
   */
  readonly connections?: string | undefined;
  /**
   * Models the resolved document holds in `models`: the first this many in key order (default
   * 1000), so that a fit of a million segments does not hold a million models in memory.
   * `run.segment_count` counts every model; `onModel` receives every one.
   */
  readonly keepModels?: number;
  /**
   * Called with every model, in key order, as it is solved and published (inside the run's
   * transaction, before it commits): the streamed form of `models` for runs of many segments.
   */
  readonly onModel?: (model: ModelDocument) => void;
}

/** {@link FitOptions} of the command line: also the dry run and each model as the fit computed it. */
export interface FitRunOptions extends FitOptions {
  readonly dryRun?: boolean;
  readonly onFittedModel?: (model: FittedModel) => void;
}

/** A spec object as a spec: through the same YAML parser and checks as a spec file. */
export function specFromObject(spec: FitSpecObject, origin = 'spec object'): FitSpec {
  return parseFitSpec(stringify(spec), origin);
}

/**
 * {@link fit}, also handing back the run as the fit computed it (solutions, plan), for the
 * command line's text output. Not part of the package's exports.
 */
export async function fitRun(spec: FitSpecObject | string, options: FitRunOptions = {}): Promise<{ document: FitDocument; result: RunFitResult }> {
  const onProgress = options.onProgress;
  const { onModel, onFittedModel } = options;
  const loaded = typeof spec === 'string' ? await loadSpecFile(spec) : specFromObject(spec);
  const result = await runFitExclusive({
    spec: loaded,
    db: options.db,
    env: options.env ?? process.env,
    schema: options.schema,
    parallel: options.parallel ?? 1,
    threads: options.threads,
    read: options.read,
    accuracy: options.accuracy,
    full: options.full === true,
    publish: options.publish !== false,
    dryRun: options.dryRun === true,
    signal: options.signal,
    connections: options.connections,
    keepModels: options.keepModels ?? DEFAULT_KEEP_MODELS,
    onModel:
      onModel === undefined && onFittedModel === undefined
        ? undefined
        : (m) => {
            onFittedModel?.(m);
            if (onModel !== undefined) onModel(modelDocument({ ...m, method: loaded.method }));
          },
    onProgress: onProgress === undefined ? undefined : (p) => onProgress({ rows_read: p.rowsRead, segment_count: p.segments, seconds: p.seconds }),
  });
  return { document: fitDocument(runOutcome(result)), result };
}

/**
 * Fits the models a spec describes where the data lives and, unless `publish: false`,
 * publishes them to the result tables in one transaction. Resolves to the same document
 * `rowfold fit --json` prints: the run (`run_id`, `rows_read`, `rows_skipped`, …) and one
 * model per segment with its coefficients, under the names of the result tables.
 *
 * @param spec a spec object (the keys of a spec file) or the path of a spec file (YAML)
 * @throws SpecError (a bad spec: key, line), PlanError (the spec does not fit the source),
 *   FitInputError (bad data: column, segment), ConnectionConfigError, FitBusyError; any
 *   error of a run names the database it used in `error.database`
 * @example
 * import { fit } from 'rowfold';
 * const { run, models } = await fit('config/feeder-load.yaml', { db: process.env.DATABASE_URL });
 * console.log(run.run_id, models[0]?.r2);
 */
export async function fit(spec: FitSpecObject | string, options: FitOptions = {}): Promise<FitDocument> {
  return (await fitRun(spec, options)).document;
}
