import type { FitSolution } from './fit-solution.js';

/**
 * Fewest correct digits a normal-equations result may keep and still be published. The
 * normal equations square the condition number κ of the (column-scaled) design, so about
 * −log10(κ²·ε) digits survive; below 6 the estimates are not worth showing (our threshold,
 * a judgement rather than a published rule).
 */
export const NORMAL_MIN_DIGITS = 6;

/**
 * For a model solved from the normal equations: null when its estimates can be trusted,
 * else a message saying why not and what to do instead.
 */
export function normalEquationsProblem(fit: FitSolution): string | null {
  if (fit.condition === null) return null;
  const digits = -Math.log10(fit.condition * fit.condition * Number.EPSILON);
  if (digits >= NORMAL_MIN_DIGITS && fit.aliased.length === 0) return null;
  const why =
    fit.aliased.length > 0
      ? `terms ${fit.aliased.join(', ')} are (nearly) collinear`
      : `the scaled design has condition number ${fit.condition.toPrecision(3)}, so the normal equations keep about ${Math.max(0, digits).toFixed(1)} correct digits`;
  return `method normal cannot be trusted here: ${why}; use method: qr`;
}
