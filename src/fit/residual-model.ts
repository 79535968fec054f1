import type { DesignShape } from './accumulator.js';
import { INTERCEPT_TERM } from './fit-solution.js';
import type { FitSolution } from './fit-solution.js';
import type { ResidualContext, } from './residual-results.js';
import type { ResidualModel } from './residual-segment.js';

/**
 * The model a residual pass takes its residuals against, from a solved fit: the kept
 * coefficients (aliased terms are left out, their columns add nothing), their columns in the
 * design block (terms in order, then the response, then the weight), and the bread
 * (XᵀWX)⁻¹ = covariance/σ² held by the solution. Null when the fit has no residual inference
 * (no residual degrees of freedom, or a residual sum of squares of zero).
 */
export function residualModel(solution: FitSolution, shape: DesignShape): ResidualModel | null {
  if (solution.status !== 'ok' || solution.covariance === null || solution.sigma === null || !(solution.sigma > 0)) return null;
  const k = solution.keptTerms.length;
  const columns = new Int32Array(k);
  const estimates = new Float64Array(k);
  const byTerm = new Map(solution.coefficients.map((c) => [c.term, c]));
  solution.keptTerms.forEach((term, j) => {
    columns[j] = term === INTERCEPT_TERM && shape.intercept ? -1 : shape.terms.indexOf(term);
    estimates[j] = byTerm.get(term)?.estimate ?? Number.NaN;
  });
  const s2 = solution.sigma * solution.sigma;
  return { estimates, columns, bread: solution.covariance.map((v) => v / s2), sigma: solution.sigma, rows: solution.rows };
}

/** Layout of a design block row for `shape`: its width, the response's and the weight's places. */
export function blockLayout(shape: DesignShape): { width: number; response: number; weight: number } {
  const p = shape.terms.length;
  return { width: p + 1 + (shape.weight === undefined ? 0 : 1), response: p, weight: shape.weight === undefined ? -1 : p + 1 };
}

/** The solution's side of a segment's findings (see residualFindings). */
export function residualContext(
  solution: FitSolution,
  shape: DesignShape,
  names: { clusterBy: string | null; orderBy: string | null; holdout?: boolean },
): ResidualContext {
  const byTerm = new Map(solution.coefficients.map((c) => [c.term, c]));
  return {
    terms: solution.keptTerms,
    estimates: Float64Array.from(solution.keptTerms, (t) => byTerm.get(t)?.estimate ?? Number.NaN),
    classicalErrors: solution.keptTerms.map((t) => byTerm.get(t)?.stdError ?? null),
    dfResidual: solution.dfResidual,
    confidence: solution.confidence,
    // The whitened design holds a constant column only when the fit has an intercept and no weights.
    constant: shape.intercept && shape.weight === undefined,
    clusterBy: names.clusterBy,
    orderBy: names.orderBy,
    holdout: names.holdout === true,
  };
}
