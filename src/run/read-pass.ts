import { SegmentedFit } from '../fit/segmented-fit.js';
import type { SegmentedFitOptions } from '../fit/segmented-fit.js';
import type { DesignPlan } from '../plan/design-plan.js';
import type { Database } from '../source/database.js';
import type { DesignReadCounts } from '../source/read-design.js';
import type { FitSpec } from '../spec/fit-spec.js';
import type { RunFitRequest } from './run-fit.js';

/** One streamed pass over the design query into per-segment accumulators. */
export async function readPass(
  database: Database,
  plan: DesignPlan,
  spec: FitSpec,
  req: RunFitRequest,
  options: SegmentedFitOptions,
  progress: { rows: number; last: number; started: number },
): Promise<{ fit: SegmentedFit; counts: DesignReadCounts[] }> {
  const shape = {
    terms: plan.columns,
    response: spec.response,
    weight: spec.weight ?? undefined,
    intercept: spec.intercept,
  };
  const fits = plan.queries.map(() => new SegmentedFit(shape, plan.keyNames, options));
  const counts = await Promise.all(
    plan.queries.map((query, i) =>
      // A session whose stream broke is discarded, not used again.
      database.withSession((session) =>
        session.readDesign(
          {
            query,
            keyNames: plan.keyNames,
            valueNames: plan.valueNames,
            valueTypes: plan.valueTypes,
            mode: req.read ?? spec.read,
            nonFinite: spec.nonFinite === 'skip' ? 'skip' : 'pass',
          },
          (block, keyTable) => {
            fits[i]!.consume(block, keyTable);
            progress.rows += block.rows;
            const now = performance.now();
            if (req.onProgress && now - progress.last > 250) {
              progress.last = now;
              req.onProgress({
                rowsRead: progress.rows,
                segments: fits.reduce((n, f) => n + f.size, 0),
                seconds: (now - progress.started) / 1000,
              });
            }
          },
        ),
      ),
    ),
  );
  const fit = fits[0]!;
  for (const f of fits.slice(1)) fit.merge(f);
  return { fit, counts };
}

