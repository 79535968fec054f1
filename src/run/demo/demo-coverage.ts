import type { FittedModel } from '../run-fit.js';
import { DEMO_TERMS } from './feeder-profiles.js';
import type { FeederProfile } from './feeder-profiles.js';

/** How many true values of one term fell inside their intervals. */
export interface TermCoverage {
  readonly term: string;
  readonly covered: number;
  /** Intervals of this term that were estimated (aliased terms and failed models have none). */
  readonly total: number;
}

/** How many true coefficients fell inside the fitted confidence intervals. */
export interface DemoCoverage {
  readonly confidence: number;
  readonly covered: number;
  readonly total: number;
  /** True coefficients without an interval to check (aliased, or the model had too few rows). */
  readonly unchecked: number;
  readonly byTerm: readonly TermCoverage[];
}

/**
 * Checks every fitted interval against the true value the generator used, matching models
 * to feeders by the `feeder_id` segment. At a confidence of 95% and a true model, about 95%
 * of the intervals should cover their true value.
 */
export function demoCoverage(models: readonly FittedModel[], feeders: readonly FeederProfile[]): DemoCoverage {
  const byId = new Map(models.map((m) => [m.segment?.['feeder_id'] ?? null, m]));
  const counts = DEMO_TERMS.map((term) => ({ term, covered: 0, total: 0 }));
  let unchecked = 0;
  let confidence = 0.95;
  for (const f of feeders) {
    const m = byId.get(f.id);
    if (m !== undefined) confidence = m.solution.confidence;
    const fitted = new Map((m?.solution.coefficients ?? []).map((c) => [c.term, c]));
    counts.forEach((count, j) => {
      const c = fitted.get(count.term);
      if (c === undefined || c.ciLow === null || c.ciHigh === null) {
        unchecked++;
        return;
      }
      const truth = f.coefficients[j]!;
      count.total++;
      if (c.ciLow <= truth && truth <= c.ciHigh) count.covered++;
    });
  }
  return {
    confidence,
    covered: counts.reduce((s, c) => s + c.covered, 0),
    total: counts.reduce((s, c) => s + c.total, 0),
    unchecked,
    byTerm: counts,
  };
}
