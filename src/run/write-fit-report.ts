import { mkdir, writeFile } from 'node:fs/promises';
import { dirname, resolve } from 'node:path';
import { toolVersion } from '../common/tool-version.js';
import { maskSecrets } from '../common/mask-secrets.js';
import { connectionNamed, loadConnections, NO_CONNECTIONS } from '../source/connections-file.js';
import type { Connections } from '../source/connections-file.js';
import type { Database } from '../source/database.js';
import { openServerDatabase } from '../source/server-database.js';
import { parseFitSpec } from '../spec/parse-fit-spec.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { createStoreDb, DEFAULT_STORE_SCHEMA, loadResidualReport } from '../store/index.js';
import type { ResidualReport } from '../store/index.js';
import { loadLatestScoring } from '../store/load-latest-scoring.js';
import type { StoredScoring } from '../store/load-latest-scoring.js';
import { chooseSegment } from '../report/choose-segment.js';
import { loadReportRun } from '../report/load-report-run.js';
import type { ResidualOutcome } from '../report/render-residual-section.js';
import { renderReportHtml } from '../report/render-report-html.js';
import { ROBUST_SECTION_QUERY } from '../report/render-robust-section.js';
import type { ReportModel, ReportRun } from '../report/report-run.js';
import { sampleResiduals } from './sample-residuals.js';
import { withResultsDatabase } from './read-results.js';
import type { ReadOptions } from './read-results.js';

/** What {@link writeFitReport} should report on, and where to write it. */
export interface WriteFitReportOptions {
  /** The fit's name. */
  readonly fit: string;
  /** Result schema; default `rowfold`. */
  readonly schema?: string;
  /** Segment for the residual plots: its key (`["F07"]`) or `col=value`; default the segment with most rows. */
  readonly segment?: string | undefined;
  /** The HTML file to write (its folder is created when missing). */
  readonly out: string;
  /** Most rows sampled for the residual plots; default 2000. */
  readonly sampleRows?: number;
  /** Named connections: a spec with `read_from` has its sample read over that connection. */
  readonly connections?: Connections | undefined;
}

const DEFAULT_SAMPLE_ROWS = 2000;

/**
 * Writes the HTML report of a fit's newest succeeded run: audit trail, coefficient tables
 * per segment, each coefficient across segments, residual plots of one segment from a
 * random sample of its rows, conditioning and aliased terms, and cautions on reading them.
 *
 * Results are read through kysely over `database.dialect()`, the sample through a
 * {@link Database} session, so any back end serves. When the sample cannot be read (the
 * source was dropped or changed type) the report is still written and says why.
 *
 * @throws ReportError when there is no succeeded run, or `segment` matches no model.
 *
 * @example
 * const database = await openDatabase({ env: process.env, sessions: 2 });
 * try {
 *   const { path } = await writeFitReport(database, { fit: 'feeder_load', out: 'feeder_load.html' });
 * } finally { await database.close(); }
 */
export async function writeFitReport(database: Database, opts: WriteFitReportOptions): Promise<{ path: string; segments: number }> {
  const schema = opts.schema ?? DEFAULT_STORE_SCHEMA;
  const sampleRows = opts.sampleRows ?? DEFAULT_SAMPLE_ROWS;
  if (!Number.isInteger(sampleRows) || sampleRows < 1) throw new RangeError(`sampleRows must be a positive whole number, got ${sampleRows}`);
  const db = createStoreDb(database.dialect());
  let run: ReportRun;
  let scoring: StoredScoring | null;
  let model: ReportModel;
  let robust: ResidualReport | null;
  try {
    run = await loadReportRun(db, schema, opts.fit, (text) => tryParseSpec(text, opts.fit)?.segmentBy ?? [], opts.segment);
    // Many segments: the loader found the segment in the tables (run.models are the shown ones).
    model = run.many?.chosen ?? chooseSegment(run.models, opts.segment);
    scoring = await loadLatestScoring(db, schema, opts.fit, model.segmentKey);
    robust = await loadResidualReport(db, schema, run.runId, model.modelId, ROBUST_SECTION_QUERY);
  } finally {
    await db.destroy();
  }
  const residuals = await residualOutcome(database, run.specText, opts.fit, run.runId, model, sampleRows, opts.connections ?? NO_CONNECTIONS);
  const html = await renderReportHtml({
    run,
    context: { database: database.display, generatedAt: new Date(), toolVersion: toolVersion() },
    residualModel: model,
    residuals,
    scoring,
    robust,
  });
  const path = resolve(opts.out);
  await mkdir(dirname(path), { recursive: true });
  await writeFile(path, html, 'utf8');
  return { path, segments: run.modelCount };
}

function tryParseSpec(text: string, fit: string): FitSpec | null {
  try {
    return parseFitSpec(text, `stored spec of ${fit}`);
  } catch {
    return null;
  }
}

async function residualOutcome(
  database: Database,
  specText: string,
  fit: string,
  runId: string,
  model: ReportModel,
  sampleRows: number,
  connections: Connections,
): Promise<ResidualOutcome> {
  if (model.status !== 'ok' && model.status !== 'no_residual_df') {
    return { problem: `The model of this segment has no estimates (${model.status}): there are no fitted values to plot.` };
  }
  let spec: FitSpec;
  try {
    spec = parseFitSpec(specText, `stored spec of run ${runId}`);
  } catch (e) {
    return { problem: `The stored spec of run ${runId} no longer parses, so the design query cannot be planned again: ${message(e)}` };
  }
  try {
    // The rows are where the run read them: over its read_from connection, if it named one.
    if (spec.readFrom === null) return { sample: await sampleResiduals(database, spec, model, sampleRows) };
    const source = openServerDatabase(connectionNamed(connections, spec.readFrom, `read_from: ${spec.readFrom} (the spec of run ${runId})`), 1);
    try {
      return { sample: await sampleResiduals(source, spec, model, sampleRows) };
    } finally {
      await source.close();
    }
  } catch (e) {
    return { problem: `Could not read a sample of the rows of fit ${fit} from the source: ${message(e)}` };
  }
}

function message(e: unknown): string {
  return maskSecrets(e instanceof Error ? e.message : String(e));
}

/** Options of {@link writeReport}. */
export interface WriteReportOptions extends ReadOptions {
  /** The HTML file to write (default `FIT-report.html`). */
  readonly out?: string;
  /** Segment for the residual charts: its key or `col=value` (default the one with most rows). */
  readonly segment?: string;
  /** Most rows sampled for the residual charts (default 2000). */
  readonly sampleRows?: number;
  /**
   * The connections file (YAML, name: URL; default ROWFOLD_CONNECTIONS in `env`): a fit whose
   * spec has `read_from` has its residual sample read over that connection.
   */
  readonly connections?: string;
}

/**
 * Writes the HTML report of a fit's newest succeeded run (see {@link writeFitReport}) to
 * `out`, reading the results from the database `db` names.
 *
 * @throws ReportError when the fit has no succeeded run, or `segment` matches no model
 * @example
 * const { path } = await writeReport('feeder_load', { db: 'embedded:.rowfold/db', out: 'feeder_load.html' });
 */
export async function writeReport(fitName: string, opts: WriteReportOptions = {}): Promise<{ path: string; segment_count: number }> {
  const out = opts.out ?? `${fitName}-report.html`;
  return withResultsDatabase(opts, 2, async (database) => {
    const { path, segments } = await writeFitReport(database, {
      fit: fitName,
      schema: opts.schema ?? DEFAULT_STORE_SCHEMA,
      segment: opts.segment,
      out,
      ...(opts.sampleRows === undefined ? {} : { sampleRows: opts.sampleRows }),
      connections: loadConnections({ file: opts.connections, env: opts.env ?? process.env }),
    });
    return { path, segment_count: segments };
  });
}
