import { escapeLiteral } from 'pg';

import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import { tQuantile } from '../numeric/distributions.js';
import type { CategoricalLevels } from '../plan/resolve-levels.js';
import { scoreViewSql } from '../plan/score-view-sql.js';
import { quoteIdent } from '../plan/sql-template.js';
import { openDatabase } from '../source/open-database.js';
import type { DatabaseOption } from '../source/open-database.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { parseFitSource } from '../spec/parse-fit-source.js';
import { parseFitSpec } from '../spec/parse-fit-spec.js';
import { loadResidualDfs } from '../store/load-residual-dfs.js';
import { loadScoringFit } from '../store/load-scoring-fit.js';
import { DEFAULT_STORE_SCHEMA } from '../store/schema-name.js';
import { targetName } from '../store/score-target.js';
import { ScoreError } from './score-error.js';
import { lookupMessage, parseTarget, planScoreQuery } from './score-rows.js';

/** What `rowfold score --view` was asked to do. */
export interface ScoreViewRequest {
  readonly fit: string;
  readonly source: string;
  /** The view to create or replace (`view` or `schema.view`). */
  readonly view: string;
  readonly keys?: readonly string[];
  readonly level?: number;
  readonly runId?: number | null;
  readonly schema?: string;
  /** The database: a URL, `embedded:FOLDER`, or a pg pool of the caller's (left open); default as `fit`. */
  readonly db?: DatabaseOption;
  readonly env?: NodeJS.ProcessEnv;
}

/** The view made. */
export interface ScoreViewResult {
  readonly fit: string;
  readonly view: string;
  readonly runId: number | null;
  /** Level of the view's prediction intervals. */
  readonly level: number;
  readonly connection: string;
  /** The statement that made it. */
  readonly sql: string;
}

/**
 * Creates (or replaces) a view that scores the source inside the database with the fit's own
 * design expressions and levels, joined at query time to each segment's latest model (or to
 * one run's), so a dashboard can score rows without rowfold running. Its predictions, standard
 * errors and prediction intervals (at `level`) equal those `scoreRows` writes for the same rows
 * and models. The t quantiles are computed here, for the residual degrees of freedom of the
 * models at creation, and bound into the view; a model refitted since with other degrees of
 * freedom gets NULL intervals until the view is made again.
 */
export async function scoreView(req: ScoreViewRequest): Promise<ScoreViewResult> {
  const level = req.level ?? 0.95;
  if (!(level > 0 && level < 1)) throw new ScoreError(`--level must lie strictly between 0 and 1, got ${level}`);
  const schema = req.schema ?? DEFAULT_STORE_SCHEMA;
  const runId = req.runId ?? null;
  const keys = req.keys ?? [];
  const target = parseTarget(req.view, keys);
  const source = parseFitSource(req.source);
  if (!source.ok) throw new ScoreError(`--source ${source.message}`);
  const database = await openDatabase({ db: req.db, env: req.env ?? process.env, sessions: 1 });
  try {
    return await database.withSession(async (s) => {
      const found = await loadScoringFit(s, schema, req.fit, runId);
      if (!found.ok) throw new ScoreError(lookupMessage(found.reason, req.fit, schema, runId, found.status));
      const spec = parseFitSpec(found.fit.specText, `the spec of run ${found.fit.runId}`);
      if (found.fit.levels === null && spec.categorical.length > 0) {
        throw new ScoreError(`run ${found.fit.runId} of fit ${req.fit} was made before runs recorded their levels; fit it again to score with it`);
      }
      const levels = (found.fit.levels ?? []) as CategoricalLevels[];
      const scoring: FitSpec = { ...spec, source: source.source };
      // The casts of the design expressions over the new source, as table scoring finds them.
      const { casts } = await planScoreQuery(s, scoring, levels, keys);
      // The t quantile of every residual degrees of freedom among the models now, as table
      // scoring computes it (ModelScorer): the view looks it up by the model's degrees of freedom.
      const quantiles = (await loadResidualDfs(s, schema, req.fit, runId)).map((df) => ({ dfResidual: df, t: tQuantile((1 + level) / 2, df) }));
      const sql = scoreViewSql(scoring, casts, levels, { view: targetName(target), schema: quoteIdent(schema), fitName: req.fit, runId, keys, interceptTerm: INTERCEPT_TERM, quantiles }).toInline(escapeLiteral);
      await s.exec(sql);
      return { fit: req.fit, view: targetName(target), runId, level, connection: database.display, sql };
    });
  } finally {
    await database.close();
  }
}
