import type { FitSolution } from '../fit/fit-solution.js';

/** JSON has no ±Infinity or NaN: such values become strings ("Infinity") so they are not lost. */
function num(v: number | null): number | string | null {
  if (v === null) return null;
  return Number.isFinite(v) ? v : String(v);
}

/**
 * The JSON form of one solved model (snake_case keys, as the command's `--json` output
 * documents them).
 */
export function solutionToJson(s: FitSolution): Record<string, unknown> {
  return {
    status: s.status,
    notes: s.notes,
    rows: s.rows,
    rank: s.rank,
    df_residual: s.dfResidual,
    sigma: num(s.sigma),
    r2: num(s.r2),
    r2_adjusted: num(s.r2Adjusted),
    f: num(s.f),
    f_p: num(s.fP),
    loglik: num(s.logLik),
    aic: num(s.aic),
    bic: num(s.bic),
    condition: num(s.condition),
    accuracy: s.accuracy,
    refinement_steps: s.refinementSteps,
    estimated_digits: num(s.estimatedDigits),
    aliased: s.aliased,
    coefficients: s.coefficients.map((c) => ({
      term: c.term,
      estimate: num(c.estimate),
      std_error: num(c.stdError),
      t: num(c.t),
      p: num(c.p),
      ci_low: num(c.ciLow),
      ci_high: num(c.ciHigh),
      vif: num(c.vif),
      aliased: c.aliased,
    })),
  };
}
