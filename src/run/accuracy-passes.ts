import type { RefinementAnchor } from '../fit/accumulator.js';
import type { FitSolution } from '../fit/fit-solution.js';
import type { SegmentState, SegmentedFit, SegmentedFitOptions } from '../fit/segmented-fit.js';
import { solveExtended } from '../fit/solve-extended.js';
import { MAX_REFINEMENT_STEPS, refinementAnchor, remedyFor, solveRefined } from '../fit/solve-refined.js';
import type { DesignPlan } from '../plan/design-plan.js';
import { restrictToSegments } from '../plan/segment-filter.js';
import type { Database } from '../source/database.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { readPass } from './read-pass.js';
import type { RunFitRequest } from './run-fit.js';

/** Estimated correct digits below which `accuracy: auto` takes more passes for a model. */
export const AUTO_TARGET_DIGITS = 13.5;

/** What the passes after the first need to know. */
export interface AccuracyPassInput {
  readonly database: Database;
  readonly spec: FitSpec;
  readonly req: RunFitRequest;
  /** `auto`, or `extended` for a refit (whose stored state is double): which segments need more. */
  readonly accuracy: 'auto' | 'extended';
  /** The plan of the extra passes (numeric columns kept numeric over COPY) and its read options. */
  readonly plan: DesignPlan;
  readonly pairs: boolean;
  /** The models' accumulators after the first pass (double factors; stored state merged). */
  readonly models: readonly SegmentState[];
  readonly progress: { rows: number; last: number; started: number };
}

/**
 * The passes after the first that bring models short of {@link AUTO_TARGET_DIGITS} estimated
 * digits up to them, the cheapest remedy first, decided per model from its factor
 * (remedyFor): iterative refinement — one streamed pass per step, each summing the residuals
 * against the current estimates in compensated arithmetic, solved with the double factor
 * already held — for as long as it converges (at most {@link MAX_REFINEMENT_STEPS} steps);
 * and a double-double fold for models whose conditioning defeats refinement, whose
 * refinement stalls, or whose pass saw other rows than the factor holds (a refit's late
 * rows, rows that landed between passes). Every pass reads only the segments that need it,
 * filtered in the database. `solutions` is updated in place; the passes over each model's
 * rows (the first included) are returned by segment key text for the models that took more.
 */
export async function certifyDigits(input: AccuracyPassInput, solutions: Map<string, FitSolution>): Promise<Map<string, number>> {
  const passes = new Map<string, number>();
  const byKey = new Map(input.models.map((s) => [s.keyText, s]));
  const refine = new Set<string>();
  const extend = new Set<string>();
  const corrections = new Map<string, number>();
  const steps = new Map<string, number>();
  for (const s of input.models) {
    let fit = solutions.get(s.keyText)!;
    if (fit.status !== 'ok' && fit.status !== 'no_residual_df') continue;
    if (input.accuracy === 'extended') {
      extend.add(s.keyText);
      continue;
    }
    if (fit.estimatedDigits === null || fit.estimatedDigits >= AUTO_TARGET_DIGITS) continue;
    // The refinement step gathered in the first pass (residual tracking), when there is one.
    const tracked = s.acc.tracked;
    if (tracked !== undefined) {
      const { solution, correction } = solveRefined(
        s.acc,
        { anchor: tracked.anchor, sums: tracked.sums, step: 1, drift: tracked.drift, rssError: tracked.rssError, seed: tracked.seed },
        { confidence: input.spec.confidence },
      );
      steps.set(s.keyText, 1);
      if ((solution.estimatedDigits ?? 0) >= AUTO_TARGET_DIGITS) {
        solutions.set(s.keyText, solution);
        continue;
      }
      // Short still: the next pass starts from the better of the two solutions.
      if ((solution.estimatedDigits ?? 0) > fit.estimatedDigits) {
        solutions.set(s.keyText, solution);
        corrections.set(s.keyText, correction);
        fit = solution;
      } else steps.delete(s.keyText);
    }
    (remedyFor(s.acc, fit, AUTO_TARGET_DIGITS) === 'refine' ? refine : extend).add(s.keyText);
  }
  // The check of the double-double solution: residuals against the first pass's estimates.
  const firstAnchors = new Map<string, RefinementAnchor>();
  const read1 = (key: string) => passes.set(key, (passes.get(key) ?? 1) + 1);
  for (let step = 1; step <= MAX_REFINEMENT_STEPS && refine.size > 0; step++) {
    const anchors = new Map<string, RefinementAnchor>();
    for (const key of refine) {
      const anchor = refinementAnchor(byKey.get(key)!.acc, solutions.get(key)!);
      anchors.set(key, anchor);
      if (!firstAnchors.has(key)) firstAnchors.set(key, anchor);
    }
    const read = (await readSegments(input, refine, { anchors, factor: false, pairs: input.pairs })).states();
    const found = new Set(read.map((s) => s.keyText));
    for (const s of read) {
      const acc = byKey.get(s.keyText)!.acc;
      read1(s.keyText);
      // The factor is only a good preconditioner for the very rows it holds.
      if (s.acc.rows !== acc.rows || s.acc.zeroWeightRows !== acc.zeroWeightRows || !sameSum(s.acc.sumWeights, acc.sumWeights)) {
        refine.delete(s.keyText);
        extend.add(s.keyText);
        continue;
      }
      const taken = (steps.get(s.keyText) ?? 0) + 1;
      steps.set(s.keyText, taken);
      const { solution, correction } = solveRefined(
        acc,
        { anchor: anchors.get(s.keyText)!, sums: s.acc.residuals!, step: taken, previousCorrection: corrections.get(s.keyText) },
        { confidence: input.spec.confidence },
      );
      const before = corrections.get(s.keyText);
      corrections.set(s.keyText, correction);
      solutions.set(s.keyText, solution);
      if ((solution.estimatedDigits ?? 0) >= AUTO_TARGET_DIGITS) refine.delete(s.keyText);
      else if (taken >= MAX_REFINEMENT_STEPS || (before !== undefined && !(correction < before))) {
        // Short after the last step, or no longer converging: the double-double fold.
        refine.delete(s.keyText);
        extend.add(s.keyText);
      }
    }
    // A segment the pass found no rows of (they were deleted meanwhile) is taken in full.
    for (const key of refine) {
      if (!found.has(key)) {
        refine.delete(key);
        extend.add(key);
      }
    }
  }
  if (extend.size > 0) {
    const anchors = new Map<string, RefinementAnchor>();
    for (const key of extend) anchors.set(key, firstAnchors.get(key) ?? refinementAnchor(byKey.get(key)!.acc, solutions.get(key)!));
    const read = await readSegments(input, extend, { precision: 'double-double', pairs: input.pairs, anchors });
    for (const s of read.states()) {
      const anchor = anchors.get(s.keyText)!;
      solutions.set(s.keyText, solveExtended(s.acc, { confidence: input.spec.confidence }, { anchor, sums: s.acc.residuals! }));
      read1(s.keyText);
    }
  }
  return passes;
}

/** Reads the extra pass's plan for `keys` only (filtered in the database unless that is every model). */
async function readSegments(input: AccuracyPassInput, keys: ReadonlySet<string>, options: SegmentedFitOptions): Promise<SegmentedFit> {
  const all = keys.size === input.models.length || input.plan.keyNames.length === 0;
  const plan = all ? input.plan : restrictToSegments(input.plan, [...keys].map((k) => JSON.parse(k) as (string | null)[]));
  const { fit } = await readPass(input.database, plan, input.spec, input.req, { ...options, only: keys }, input.progress);
  return fit;
}

/** Weight sums of the same rows agree to rounding (they may be summed in another order). */
function sameSum(a: number, b: number): boolean {
  return Math.abs(a - b) <= 1e-12 * Math.max(Math.abs(a), Math.abs(b));
}
