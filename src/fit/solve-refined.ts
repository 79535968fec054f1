import { dd, ddAdd, ddDiv, ddMul, twoProd } from '../numeric/double-double.js';
import type { DD } from '../numeric/double-double.js';
import { residualSum } from '../numeric/residual-sums.js';
import { solveUpper, solveUpperTransposed } from '../numeric/triangular.js';
import type { Accumulator, RefinementAnchor } from './accumulator.js';
import type { FitSolution } from './fit-solution.js';
import { assembleSolution } from './solve.js';
import type { SolveOptions } from './solve.js';
import { analyseFactor } from './solve-factor.js';
import type { FactorAnalysis } from './solve-factor.js';
import { digitsOf, stdErrorErrors } from './solve-digits.js';
import { seedErrors } from './seed-errors.js';
import type { SolvedSeed } from './accumulator-residual-tracking.js';

/** Unit roundoff of double precision (2⁻⁵³). */
const U = Number.EPSILON / 2;

/** Most refinement steps (streamed passes) a model is given before the double-double fold is cheaper. */
export const MAX_REFINEMENT_STEPS = 3;

/**
 * The rate at which a refinement step shrinks the error, from the factor's conditioning.
 * A step of the corrected semi-normal equations with exact residuals leaves the error
 * e' = (RᵀR)⁻¹(RᵀR − AᵀA)e, and with R the exact factor of A + ΔA, ‖ΔA‖ ≈ u‖A‖, that is
 * (AᵀA)⁻¹(AᵀΔA + ΔAᵀA)e: at most about u·κ² of e, but about u·κ when e lies, as a
 * least-squares solution's error does, mostly along the weak directions of A, and less when
 * the rounding errors behind ΔA are spread over many rows (Björck, "Numerical Methods for
 * Least Squares Problems", SIAM 1996, on the corrected semi-normal equations and iterative
 * refinement — cited from memory, the section not checked). We take u·κ, κ the condition
 * number of the scaled factor as folded: a typical rather than a worst-case rate, checked
 * against what refinement measured — within a digit of the errors left on the synthetic
 * designs of test/reference (one step, and sums gathered in the first pass), on the NIST
 * sets that refine, and on a quartic near 1000 (κ 1.8e8); Filip's measured contraction,
 * 4e-6, is ten times this (Filip takes the double-double fold).
 */
export function refinementRate(f: FactorAnalysis): number {
  return f.factorCondition === null ? 0 : U * f.factorCondition;
}

/** Fastest rate at which refinement is worth its passes (two digits gained per step). */
const SLOWEST_RATE = 1e-2;

/**
 * How a model that the double fold leaves short of `target` digits gets them, decided from
 * its factor: `refine` when refinement converges fast enough to reach the target within
 * {@link MAX_REFINEMENT_STEPS} passes and the standard errors — which refinement does not
 * touch — already have the digits; `extend` (the double-double fold) otherwise.
 */
export function remedyFor(acc: Accumulator, solution: FitSolution, target: number, options: SolveOptions = {}): 'refine' | 'extend' {
  const f = analyseFactor(acc, options.rankTolerance);
  const rate = refinementRate(f);
  if (!(rate < SLOWEST_RATE)) return 'extend';
  const seWorst = Math.max(U, ...stdErrorErrors(f, Number.EPSILON));
  if (-Math.log10(seWorst) < target) return 'extend';
  const short = target - (solution.estimatedDigits ?? 0);
  return Math.ceil(short / -Math.log10(rate)) <= MAX_REFINEMENT_STEPS ? 'refine' : 'extend';
}

/** What a refinement step starts from, and what it measured. */
export interface RefinementInput {
  /** The coefficients the pass formed residuals against (coordinates as given, aliased 0). */
  readonly anchor: RefinementAnchor;
  /** The pass's residual sums (numeric/residual-sums.ts). */
  readonly sums: Float64Array;
  /** Steps taken so far, this one included. */
  readonly step: number;
  /** Norm of the previous step's scaled correction, when there was one. */
  readonly previousCorrection?: number | undefined;
  /**
   * For sums gathered while the anchor moved (ResidualTracking): Σ rows·|Δc| per coefficient,
   * and a bound on the rounding of the residual sum of squares the moves left.
   */
  readonly drift?: Float64Array | undefined;
  readonly rssError?: number | undefined;
  /** Stored rows whose gradient at the anchor was taken as zero (a refit's; see seedErrors). */
  readonly seed?: SolvedSeed | undefined;
}

/** A refined solution, and the norm of its scaled correction (for the next step's rate). */
export interface RefinedSolution {
  readonly solution: FitSolution;
  readonly correction: number;
}

/**
 * One step of iterative refinement by the corrected semi-normal equations: with g = XᵀWr
 * the gradient at the anchor, summed exactly enough over the rows by a refinement pass,
 * solve RᵀR δ = g with the double factor R already held (two triangular solves on the
 * column-scaled factor), and publish b + δ. The residual sum of squares is the pass's own
 * at b, less δᵀg (the decrease to first order); the total sum of squares is the pass's,
 * so σ, R², F and the likelihood carry the digits of the data. Standard errors are σ times
 * the double factor's (XᵀWX)⁻¹.
 *
 * The digit estimate is a posteriori: the error left after the step is about ρ·‖δ̃‖ in
 * the scaled coordinates (ρ the rate of {@link refinementRate}, or the measured ratio of
 * this correction to the previous one when that is larger; plus ρ times the anchor's moves,
 * weighted by their rows, for sums gathered while it moved), spread over the coefficients
 * by the rows of (XᵀX)⁻¹ (see propagatedErrors), with each estimate's own rounding as a
 * floor; the standard errors keep the double factor's perturbation estimate, and σ the
 * rounding of the pass's residual sum of squares.
 */
export function solveRefined(acc: Accumulator, input: RefinementInput, options: SolveOptions = {}): RefinedSolution {
  const f = analyseFactor(acc, options.rankTolerance);
  const { kept, rank: k, r11 } = f.qr;
  const { anchor, sums } = input;
  const q = acc.order - 1;
  const gradient: DD[] = Array.from({ length: q }, (_, j) => residualSum(sums, j, q + j));
  // g in the folded (shifted) coordinates: with x_j = x'_j + c_j, g'_j = g_j − c_j·g₀.
  const shift = f.shift;
  const t = dd();
  const gs = gradient.map((g, j) => {
    if (shift === undefined || j === 0) return g.hi + g.lo;
    twoProd(-shift[j - 1]!, gradient[0]!.hi, t);
    ddAdd(t.hi, t.lo - shift[j - 1]! * gradient[0]!.lo, g.hi, g.lo, t);
    return t.hi + t.lo;
  });
  // Scaled: (R̃ᵀR̃) δ̃ = D⁻¹g', δ' = D⁻¹δ̃.
  const scaled = new Float64Array(k);
  kept.forEach((j, pos) => (scaled[pos] = gs[j]! / f.scale[j]!));
  solveUpperTransposed(k, r11, k, scaled);
  solveUpper(k, r11, k, scaled);
  let correction = 0;
  for (let pos = 0; pos < k; pos++) correction = Math.hypot(correction, scaled[pos]!);
  const delta = scaled.map((d, pos) => d / f.scale[kept[pos]!]!);
  if (shift !== undefined) {
    // Back to the coordinates as given: the intercept absorbs −Σ c_j δ_j.
    for (let pos = 1; pos < k; pos++) delta[0] = delta[0]! - shift[kept[pos]! - 1]! * delta[pos]!;
  }
  const estimates = delta.map((d, pos) => anchor.coefficients[kept[pos]!]! + d);

  // RSS at b + δ: RSS(b) − 2δᵀg + δᵀGδ with Gδ = g, i.e. RSS(b) − δᵀg.
  let decrease = 0;
  kept.forEach((j, pos) => (decrease += delta[pos]! * (gradient[j]!.hi + gradient[j]!.lo)));
  const rssAt = residualSum(sums, 2 * q, 2 * q + 1);
  const rssDD = ddAdd(rssAt.hi, rssAt.lo, -decrease, 0, dd());
  const rss = Math.max(0, rssDD.hi + rssDD.lo);
  const tssDD = totalSumOfSquares(f.intercept, sums, q, acc.sumWeights);
  const tss = tssDD.hi + tssDD.lo;
  const essDD = ddAdd(tssDD.hi, tssDD.lo, -rssDD.hi, -rssDD.lo, dd());
  const ess = f.intercept ? essDD.hi + essDD.lo : tss - rss;

  const solution = assembleSolution(acc, f, options, {
    estimates,
    rss,
    ess,
    tss,
    accuracy: 'refined',
    refinementSteps: input.step,
    estimatedDigits: null,
  });
  // A posteriori: the error left is about the rate times this step's correction. The
  // measured rate (this correction over the previous one) replaces the predicted one when it
  // is larger and the correction is above the level at which the estimates' own rounding
  // moves them (u·‖D|T||b|‖, see scaledSize), where the ratio says nothing.
  let rate = refinementRate(f);
  const rounding = U * scaledSize(f, estimates, true);
  if (input.previousCorrection !== undefined && correction > 16 * rounding) rate = Math.max(rate, correction / input.previousCorrection);
  // Sums gathered while the anchor moved carry each move's error, the factor's error times
  // the move, weighted by the share of the rows it was made over.
  let moved = 0;
  if (input.drift !== undefined) kept.forEach((j, pos) => (moved = Math.hypot(moved, input.drift![j]! * f.scale[j]!)));
  moved /= Math.max(1, acc.rows);
  // What the pass's arithmetic leaves: residuals formed as pairs (about (k·u)² relative to
  // the terms they cancel) whose gradient's error the solve amplifies by up to κ².
  const kappa = f.factorCondition ?? 1;
  const floor = (k * U) ** 2 * kappa * kappa * (scaledSize(f, estimates, false) + Math.sqrt(rss));
  const errors = propagatedErrors(f, rate * (correction + moved) + floor);
  if (input.seed !== undefined) {
    const inherited = seedErrors(acc, f, input.seed);
    errors.forEach((e, pos) => (errors[pos] = e + inherited[pos]!));
  }
  // σ² comes from the pass's residual sum of squares: its rounding moves every standard error.
  const sigmaErr = rss > 0 ? (input.rssError ?? 0) / (2 * rss) : 0;
  const seErrors = stdErrorErrors(f, Number.EPSILON).map((e) => e + sigmaErr);
  return { solution: { ...solution, estimatedDigits: digitsOf(estimates, { estimate: errors, stdError: seErrors }) }, correction };
}

/**
 * The size of coefficients (kept, coordinates as given) in the scaled coordinates of the
 * factor as folded, ‖D·v‖. With `rounded`, v = |T|·|b| (the intercept's entry |b₀| + Σ|c_j b_j|):
 * the size their rounding has there — an anchor is held in the coordinates as given and
 * rounded there, and with large shifts its slopes' rounding times the shifts is a large error
 * of the folded intercept, however small that is itself. Otherwise v has the intercept
 * b₀ + Σ c_j b_j (the response's shift left in), the measure the residual floor below was
 * calibrated with on the exact and NIST designs.
 */
function scaledSize(f: FactorAnalysis, estimates: Float64Array, rounded: boolean): number {
  const { kept } = f.qr;
  let intercept = rounded ? Math.abs(estimates[0]!) : estimates[0]!;
  if (f.shift !== undefined) {
    for (let pos = 1; pos < kept.length; pos++) {
      const t = f.shift[kept[pos]! - 1]! * estimates[pos]!;
      intercept += rounded ? Math.abs(t) : t;
    }
  }
  let size = 0;
  kept.forEach((j, pos) => (size = Math.hypot(size, (pos === 0 ? intercept : estimates[pos]!) * f.scale[j]!)));
  return size;
}

/**
 * Per coefficient, in the coordinates as given, the error left when the scaled estimates are
 * off by `total` in norm. An error left by the correction solve is (R̃ᵀR̃)⁻¹ξ for a gradient
 * error ξ of no preferred direction, so it follows the rows of C̃ = R̃⁻¹R̃⁻ᵀ: coefficient j's
 * share is ‖G_j‖·‖ξ‖/√k, with G = T⁻¹D⁻¹C̃ the map back to the coordinates as given (the
 * column scales D, and for shifted columns T, which makes the intercept b₀' − Σ c_j b_j — a
 * combination whose errors partly cancel), and ‖ξ‖ chosen so the scaled error's norm is
 * `total`.
 */
function propagatedErrors(f: FactorAnalysis, total: number): Float64Array {
  const { kept, rank: k } = f.qr;
  const c = f.unitScaled;
  let frob = 0;
  for (let i = 0; i < k * k; i++) frob = Math.hypot(frob, c[i]!);
  if (!(frob > 0)) return new Float64Array(k);
  const xi = (total * Math.sqrt(k)) / frob;
  const row = new Float64Array(k);
  return Float64Array.from(kept, (j, pos) => {
    for (let l = 0; l < k; l++) row[l] = c[pos * k + l]! / f.scale[j]!;
    if (pos === 0 && f.shift !== undefined) {
      for (let q = 1; q < k; q++) {
        const cq = f.shift[kept[q]! - 1]! / f.scale[kept[q]!]!;
        for (let l = 0; l < k; l++) row[l] = row[l]! - cq * c[q * k + l]!;
      }
    }
    let norm = 0;
    for (let l = 0; l < k; l++) norm = Math.hypot(norm, row[l]!);
    return (norm * xi) / Math.sqrt(k);
  });
}

/**
 * The total sum of squares from a refinement pass's sums: Σw(y − c)² − (Σw(y − c))²/Σw
 * about the weighted mean with an intercept; Σw y² (the centre is 0) without.
 */
function totalSumOfSquares(intercept: boolean, sums: Float64Array, q: number, sumWeights: number): DD {
  const syy = residualSum(sums, 2 * q + 4, 2 * q + 5);
  if (!intercept) return dd(syy.hi, syy.lo);
  const sy = residualSum(sums, 2 * q + 2, 2 * q + 3);
  const sq = ddMul(sy.hi, sy.lo, sy.hi, sy.lo, dd());
  const mean = ddDiv(sq.hi, sq.lo, sumWeights, 0, dd());
  return ddAdd(syy.hi, syy.lo, -mean.hi, -mean.lo, dd());
}

/**
 * The anchor of a refinement pass: a solution's estimates in the coordinates as given (0
 * for aliased terms), and the weighted mean of the response read off the factor as the
 * centre (0 without an intercept, where the total sum of squares is about zero).
 */
export function refinementAnchor(acc: Accumulator, solution: FitSolution): RefinementAnchor {
  const coefficients = Float64Array.from(solution.coefficients, (c) => c.estimate ?? 0);
  let centre = 0;
  const r = acc.factor;
  if (acc.shape.intercept && r[0]! !== 0) {
    // Row 0 of R: R₀₀ = √Σw, R₀,y = Σw(y − c_y)/√Σw.
    centre = r[acc.order - 1]! / r[0]! + (acc.shift?.[acc.order - 2] ?? 0);
  }
  return { coefficients, centre };
}
