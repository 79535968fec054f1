import { scoreDocument, scoreViewDocument } from './score-document.js';
import type { ScoreDocument, ScoreViewDocument } from './score-document.js';
import { scoreRows } from './score-rows.js';
import type { ScoreRequest } from './score-rows.js';
import { scoreView as createScoreView } from './score-view.js';
import type { ScoreViewRequest } from './score-view.js';

/**
 * Scores the rows of a source with a fit's models into a table, in one transaction, and
 * resolves to the document `rowfold score --json` prints (the names of the `scorings` table).
 *
 * @throws ScoreError for an unknown fit, a fit with no succeeded run, a source lacking a term's
 *   column or a target of another shape; nothing is written then.
 * @example
 * const s = await score({ fit: 'feeder_load', source: 'feeder_forecast', into: 'feeder_predicted', keys: ['feeder_id', 'hour'], db: process.env.DATABASE_URL });
 * console.log(`${s.rows_scored} rows scored, ${JSON.stringify(s.rows_skipped)} not`);
 */
export async function score(request: ScoreRequest): Promise<ScoreDocument> {
  return scoreDocument(await scoreRows(request));
}

/**
 * Creates (or replaces) a view that scores a source inside the database with the fit's own
 * expressions and each segment's latest model, and resolves to the document
 * `rowfold score --view --json` prints.
 *
 * @example
 * await scoreView({ fit: 'feeder_load', source: 'feeder_forecast', view: 'feeder_predicted_now', db: process.env.DATABASE_URL });
 */
export async function scoreView(request: ScoreViewRequest): Promise<ScoreViewDocument> {
  return scoreViewDocument(await createScoreView(request));
}
