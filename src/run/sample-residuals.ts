import { segmentSampleQuery } from '../plan/segment-sample-query.js';
import { planFit } from './plan-fit.js';
import type { Database } from '../source/database.js';
import type { FitSpec } from '../spec/fit-spec.js';
import type { ReportModel } from '../report/report-run.js';
import { residualPoints } from '../report/residual-points.js';
import type { ResidualSample } from '../report/residual-points.js';
import { segmentKeyValues } from '../report/segment-label.js';

export type { ResidualSample } from '../report/residual-points.js';

/**
 * Re-plans the run's spec over the source as it is now (categorical levels are discovered
 * again), reads a bounded random sample of the segment's rows from the design query, and
 * computes fitted values and residuals from the stored coefficients.
 *
 * The rows are those of the source today: if rows were added or changed since the run,
 * the sample is not of the rows the run read.
 */
export async function sampleResiduals(database: Database, spec: FitSpec, model: ReportModel, limit: number): Promise<ResidualSample> {
  const keyValues = segmentKeyValues(model.segmentKey);
  if (keyValues === null || keyValues.length !== spec.segmentBy.length) {
    throw new Error(`segment key ${model.segmentKey} does not match segment_by [${spec.segmentBy.join(', ')}] of the spec`);
  }
  const { plan, rows } = await database.withSession(async (session) => {
    const plan = await planFit(session, spec, 1);
    const design = plan.queries[0];
    if (design === undefined) throw new Error('the plan has no design query');
    const { text, values } = segmentSampleQuery(design, { keyValues, valueCount: plan.valueNames.length, limit }).toBound();
    return { plan, rows: (await session.query(text, values)).rows };
  });
  const weighted = spec.weight !== null;
  const points = residualPoints(rows, { keyCount: plan.keyNames.length, columns: plan.columns, weighted }, model);
  return { ...points, limit, rowsRead: rows.length, weighted };
}
