import { escapeLiteral } from 'pg';

import { checkExpressionTypes } from '../plan/check-expression-types.js';
import type { FloatCast } from '../plan/check-expression-types.js';
import { probeQuery, probedExpressions } from '../plan/probe-queries.js';
import type { ProbedExpression } from '../plan/probe-queries.js';
import type { CategoricalLevels } from '../plan/resolve-levels.js';
import { buildScoreQuery } from '../plan/score-query.js';
import type { ScoreQuery } from '../plan/score-query.js';
import { SOURCE_ALIAS, sourceRelation } from '../plan/source-relation.js';
import { quoteIdent } from '../plan/sql-template.js';
import { CopyBinaryWriter } from '../source/copy-binary-writer.js';
import type { DbSession } from '../source/database.js';
import { openDatabase } from '../source/open-database.js';
import type { DatabaseOption } from '../source/open-database.js';
import { describeQuery } from '../source/query-helpers.js';
import { ScoreRowDecoder } from '../source/score-row-decoder.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { parseFitSource } from '../spec/parse-fit-source.js';
import { parseFitSpec } from '../spec/parse-fit-spec.js';
import { DEFAULT_STORE_SCHEMA } from '../store/schema-name.js';
import { loadScoringFit } from '../store/load-scoring-fit.js';
import { loadScoringModels } from '../store/load-scoring-models.js';
import { SCORE_COLUMNS, prepareScoreTarget, targetName } from '../store/score-target.js';
import type { ScoreTarget } from '../store/score-target.js';
import { writeScoring } from '../store/write-scoring.js';
import type { ScoringSegmentRecord } from '../store/write-scoring.js';
import { RowScorer } from './row-scorer.js';
import { ScoreError } from './score-error.js';
import { toolVersion } from '../common/tool-version.js';

/** What `rowfold score` was asked to do. */
export interface ScoreRequest {
  /** Name of the fit whose models score the rows. */
  readonly fit: string;
  /** A table name or a query: the rows to score. */
  readonly source: string;
  /** Table the scores go to (`table` or `schema.table`); created when missing. */
  readonly into: string;
  /** Columns of the source copied to the target beside each score (in their own types). */
  readonly keys?: readonly string[];
  /** Level of the prediction intervals (default 0.95). */
  readonly level?: number;
  /** Score with the models of this run instead of every segment's latest. */
  readonly runId?: number | null;
  /** Schema of the fit's result tables (default rowfold). */
  readonly schema?: string;
  /** Add to the target's rows instead of replacing them. */
  readonly append?: boolean;
  /** The database: a URL, `embedded:FOLDER`, or a pg pool of the caller's (left open); default as `fit`. */
  readonly db?: DatabaseOption;
  readonly env?: NodeJS.ProcessEnv;
  /** Bytes of output gathered before each COPY FROM (default 4 MiB). */
  readonly batchBytes?: number;
}

/** The outcome of a scoring. */
export interface ScoreResult {
  readonly fit: string;
  /** The run whose spec and levels made the design (the named run, or the newest succeeded one). */
  readonly designRunId: number;
  readonly runId: number | null;
  readonly target: string;
  readonly created: boolean;
  readonly connection: string;
  readonly level: number;
  readonly rowsRead: number;
  readonly rowsScored: number;
  readonly rowsSkipped: Record<string, number>;
  readonly seconds: number;
  readonly scoringId: number;
  /** Whether the source had the response, so errors against actual values were computed. */
  readonly actual: boolean;
  readonly segments: readonly ScoringSegmentRecord[];
}

const DEFAULT_BATCH_BYTES = 4 << 20;

/**
 * The flow of one scoring: look up the fit's run, spec, levels and models; probe the new source
 * for the columns the design needs; then, in one transaction on the target's connection, make
 * the target ready, stream the source by binary COPY through the fit's own design expressions,
 * score every row with its segment's model and copy the scores in by COPY FROM in batches, and
 * record the scoring. A failure rolls everything back: the target is as it was.
 */
export async function scoreRows(req: ScoreRequest): Promise<ScoreResult> {
  const started = performance.now();
  const level = req.level ?? 0.95;
  if (!(level > 0 && level < 1)) throw new ScoreError(`--level must lie strictly between 0 and 1, got ${level}`);
  const schema = req.schema ?? DEFAULT_STORE_SCHEMA;
  const runId = req.runId ?? null;
  const keys = req.keys ?? [];
  const target = parseTarget(req.into, keys);
  const source = parseFitSource(req.source);
  if (!source.ok) throw new ScoreError(`--source ${source.message}`);

  const database = await openDatabase({ db: req.db, env: req.env ?? process.env, sessions: 2 });
  try {
    const { spec, levels, designRunId, models } = await database.withSession(async (s) => {
      const found = await loadScoringFit(s, schema, req.fit, runId);
      if (!found.ok) throw new ScoreError(lookupMessage(found.reason, req.fit, schema, runId, found.status));
      const spec = parseFitSpec(found.fit.specText, `the spec of run ${found.fit.runId}`);
      if (found.fit.levels === null && spec.categorical.length > 0) {
        throw new ScoreError(`run ${found.fit.runId} of fit ${req.fit} was made before runs recorded their levels; fit it again to score with it`);
      }
      const models = await loadScoringModels(s, schema, req.fit, runId);
      return { spec, levels: (found.fit.levels ?? []) as CategoricalLevels[], designRunId: found.fit.runId, models };
    });
    const scoring: FitSpec = { ...spec, source: source.source };
    const { query } = await database.withSession((s) => planScoreQuery(s, scoring, levels, keys));

    const writer = new CopyBinaryWriter(keys.length + SCORE_COLUMNS.length);
    const scorer = new RowScorer(query, models, level, spec.intercept, writer);
    const columns = [...keys, ...SCORE_COLUMNS.map((c) => c.name)].map(quoteIdent);
    const name = targetName(target);
    const batch = req.batchBytes ?? DEFAULT_BATCH_BYTES;
    const recorded = await database.withSession(async (write) => {
      await write.exec('BEGIN');
      try {
        const { created } = await prepareTarget(write, target, scoring, req.append === true);
        const decoder = new ScoreRowDecoder({ passThrough: keys.length, texts: query.segmentColumns.length, floats: query.design.length + query.categorical.length + (query.actual ? 1 : 0) });
        // On a server one batch is copied in while the next is read and scored (two connections,
        // so the server's COPY out and COPY in run side by side); at most two batches are held.
        const overlap = database.kind === 'server';
        let inFlight: Promise<number> | null = null;
        const send = async (data: Uint8Array) => {
          if (inFlight !== null) await inFlight;
          inFlight = write.copyIn(name, columns, data);
          // Handled when awaited; marked handled now so a failure while reading is not unhandled.
          inFlight.catch(() => undefined);
          if (!overlap) await inFlight;
        };
        const pump = async (read: DbSession) => {
          for await (const pieces of read.copyOut(query.query)) {
            decoder.write(pieces, scorer.onRow);
            if (writer.size >= batch) await send(writer.take());
          }
          decoder.end();
          if (writer.rows > 0) await send(writer.take());
          if (inFlight !== null) await inFlight;
        };
        // A server reads on a second connection while the first holds the target's transaction;
        // the embedded database has one session, whose COPY output arrives whole before any is written.
        if (database.kind === 'embedded') await pump(write);
        else await database.withSession(pump);
        const segments = scorer.segmentRecords();
        const seconds = (performance.now() - started) / 1000;
        const scoringId = await writeScoring(write, schema, {
          fitName: req.fit,
          runId,
          source: req.source,
          target: name,
          level,
          rowsRead: scorer.rowsRead,
          rowsScored: scorer.rowsScored,
          rowsSkipped: scorer.rowsSkipped(),
          seconds,
          toolVersion: toolVersion(),
          segments,
        });
        await write.exec('COMMIT');
        return { created, segments, scoringId, seconds };
      } catch (e) {
        await write.exec('ROLLBACK').catch(() => undefined);
        throw e;
      }
    });
    return {
      fit: req.fit,
      designRunId,
      runId,
      target: name,
      created: recorded.created,
      connection: database.display,
      level,
      rowsRead: scorer.rowsRead,
      rowsScored: scorer.rowsScored,
      rowsSkipped: scorer.rowsSkipped(),
      seconds: recorded.seconds,
      scoringId: recorded.scoringId,
      actual: query.actual,
      segments: recorded.segments,
    };
  } finally {
    await database.close();
  }
}

export function parseTarget(into: string, keys: readonly string[]): ScoreTarget {
  const parsed = parseFitSource(into);
  if (!parsed.ok || parsed.source.kind !== 'table') {
    throw new ScoreError(`--into must be a table name (table or schema.table), got ${JSON.stringify(into)}`);
  }
  const clash = keys.find((k) => SCORE_COLUMNS.some((c) => c.name === k));
  if (clash !== undefined) throw new ScoreError(`--keys ${clash}: the target has a column of that name for the scores; rename it in a query source`);
  const dup = keys.find((k, i) => keys.indexOf(k) !== i);
  if (dup !== undefined) throw new ScoreError(`--keys names ${dup} twice`);
  return { schema: parsed.source.schema, table: parsed.source.table, keys };
}

export function lookupMessage(reason: string, fit: string, schema: string, runId: number | null, status?: string): string {
  switch (reason) {
    case 'no_schema':
      return `no result tables in schema "${schema}": no fit has run there (is --schema right?)`;
    case 'unknown_fit':
      return `no fit named ${JSON.stringify(fit)} has run in schema "${schema}"; \`rowfold runs\` lists the fits`;
    case 'no_succeeded_run':
      return `fit ${JSON.stringify(fit)} has no succeeded run to score with`;
    case 'unknown_run':
      return `run ${runId} is not a run of fit ${JSON.stringify(fit)}`;
    default:
      return `run ${runId} of fit ${JSON.stringify(fit)} is ${status ?? 'not succeeded'}; only a succeeded run can score`;
  }
}

/**
 * Probes the new source for everything the design reads (terms, segment and categorical
 * columns, the keys), naming the first that does not evaluate; the response is read too when
 * the source has it as a number (for the error against actual values).
 */
export async function planScoreQuery(
  session: DbSession,
  spec: FitSpec,
  levels: readonly CategoricalLevels[],
  keys: readonly string[],
): Promise<{ query: ScoreQuery; casts: ReadonlyMap<string, FloatCast> }> {
  const needed: ProbedExpression[] = [
    ...probedExpressions(spec).filter((e) => e.role === 'term' || e.role === 'segment' || e.role === 'categorical'),
    ...keys.map((k, i): ProbedExpression => ({ key: `--keys[${i}]`, name: k, role: 'segment', sql: quoteIdent(k) })),
  ];
  let types: string[];
  try {
    types = (await describeQuery(session, probeQuery(spec, needed))).map((f) => f.typeName);
  } catch (e) {
    throw await locateScoreProbeFailure(session, spec, needed, e);
  }
  let casts: Map<string, FloatCast>;
  try {
    casts = checkExpressionTypes(needed, types);
  } catch (e) {
    throw new ScoreError(`the source does not fit the design: ${e instanceof Error ? e.message : String(e)}`, { cause: e });
  }
  let actual = false;
  const response: ProbedExpression = { key: 'response', name: spec.response, role: 'response', sql: spec.response };
  try {
    const t = await describeQuery(session, probeQuery(spec, [response]));
    casts.set('response', checkExpressionTypes([response], [t[0]!.typeName]).get('response') ?? '::float8');
    actual = true;
  } catch {
    // No response in the source (rows of the future): scores only, no error against actual values.
  }
  return { query: buildScoreQuery(spec, casts, levels, keys, actual), casts };
}

async function locateScoreProbeFailure(session: DbSession, spec: FitSpec, needed: readonly ProbedExpression[], error: unknown): Promise<Error> {
  const reason = (e: unknown) => (e instanceof Error ? e.message : String(e));
  try {
    await describeQuery(session, probeQuery(spec, []));
  } catch (e) {
    return new ScoreError(`--source does not run: ${reason(e)}`, { cause: e });
  }
  for (const expr of needed) {
    try {
      await describeQuery(session, probeQuery(spec, [expr]));
    } catch (e) {
      const what = expr.key.startsWith('--keys') ? `key column ${expr.name}` : `${expr.key} (${expr.role} ${expr.name})`;
      return new ScoreError(`the source lacks what the fit's design needs: ${what} does not evaluate over it: ${reason(e)}`, { cause: e });
    }
  }
  return error instanceof Error ? error : new Error(String(error));
}

async function prepareTarget(session: DbSession, target: ScoreTarget, spec: FitSpec, append: boolean): Promise<{ created: boolean }> {
  try {
    return await prepareScoreTarget(session, target, sourceRelation(spec).toInline(escapeLiteral), SOURCE_ALIAS, append);
  } catch (e) {
    if (e instanceof Error && e.name === 'ScoreTargetShapeError') throw new ScoreError(e.message, { cause: e });
    throw e;
  }
}
