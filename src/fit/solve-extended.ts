import { dd, ddAdd, ddDiv, ddMul } from '../numeric/double-double.js';
import { householderFoldDD } from '../numeric/householder-fold-dd.js';
import { packedIndex, packedLength } from '../numeric/packed.js';
import { residualSum } from '../numeric/residual-sums.js';
import { refineTriangularDD } from '../numeric/triangular-dd.js';
import type { Accumulator, RefinementAnchor } from './accumulator.js';
import type { FitSolution } from './fit-solution.js';
import { assembleSolution, emptyUnlessSolvable } from './solve.js';
import type { SolveOptions } from './solve.js';
import { digitsOf, perturbationErrors, stdErrorErrors } from './solve-digits.js';
import { analyseFactor } from './solve-factor.js';

const T = dd();
const S = dd();

/** Unit roundoff of double-double arithmetic, about 2⁻¹⁰⁵ (Hida, Li and Bailey 2001). */
const U_DD = Number.EPSILON * Number.EPSILON;

/**
 * Residual sums formed, in the same pass as the double-double fold, against another
 * solution of the same model (the fast one, under `accuracy: auto`): the independent check
 * of the double-double solution that gives its digit estimate.
 */
export interface ExtendedCheck {
  readonly anchor: RefinementAnchor;
  readonly sums: Float64Array;
}

/**
 * Solves a model whose factor was folded in double-double arithmetic. The rank decision,
 * notes and shape come from the factor's high part (as the ordinary solve makes them); the
 * kept columns' double-double factor — re-triangularised when terms are aliased, so the
 * reduced model gets the digits too — then gives the estimates, standard errors and sums
 * of squares to about 30 digits (triangular solves by iterative refinement against it,
 * sums of squares read off it), rounded once.
 *
 * The digit estimate is a posteriori when `check` is given: one step of refinement from
 * the check's anchor, its exact residual gradient solved against the double-double factor,
 * must land on the same estimates; their distance, per coefficient, is the error taken.
 * Without a check it is the perturbation estimate with double-double's unit roundoff.
 */
export function solveExtended(acc: Accumulator, options: SolveOptions = {}, check?: ExtendedCheck): FitSolution {
  const low = acc.factorLow;
  if (low === undefined) throw new RangeError('solveExtended needs a double-double accumulator');
  const empty = emptyUnlessSolvable(acc, options);
  if (empty !== null) return empty;
  const f = analyseFactor(acc, options.rankTolerance);
  const { kept, rank: k } = f.qr;
  const { uh, ul, yh, yl } = keptFactor(acc.order, acc.factor, low, kept);

  // Estimates: R β = z, z the response column above the diagonal.
  const [bh, bl] = refineTriangularDD(k, uh, ul, yh.subarray(0, k), yl.subarray(0, k));
  const sumSquares = (from: number, to: number): [number, number] => {
    let sh = 0;
    let sl = 0;
    for (let i = from; i < to; i++) {
      ddMul(yh[i]!, yl[i]!, yh[i]!, yl[i]!, T);
      ddAdd(sh, sl, T.hi, T.lo, S);
      sh = S.hi;
      sl = S.lo;
    }
    return [sh, sl];
  };
  const icpt = f.intercept ? 1 : 0;
  const [rssH, rssL] = sumSquares(k, k + 1);
  const tss = sumSquares(icpt, k + 1).reduce((a, b) => a + b);
  const ess = sumSquares(icpt, k).reduce((a, b) => a + b);
  const rows = acc.rows;
  const df = rows - k;

  // Row j of R⁻¹ gives var(β_j)/σ²; columns of the inverse by refined solves.
  let stdErrors: Float64Array | undefined;
  if (df > 0) {
    const invSq = new Float64Array(k * 2);
    const eh = new Float64Array(k);
    const el = new Float64Array(k);
    for (let c = 0; c < k; c++) {
      eh.fill(0);
      eh[c] = 1;
      const [ch, cl] = refineTriangularDD(k, uh, ul, eh, el);
      for (let j = 0; j <= c; j++) {
        ddMul(ch[j]!, cl[j]!, ch[j]!, cl[j]!, T);
        ddAdd(invSq[2 * j]!, invSq[2 * j + 1]!, T.hi, T.lo, S);
        invSq[2 * j] = S.hi;
        invSq[2 * j + 1] = S.lo;
      }
    }
    // σ² = RSS / df in double-double; standard errors σ·‖row j of R⁻¹‖.
    ddDiv(rssH, rssL, df, 0, S);
    const s2h = S.hi;
    const s2l = S.lo;
    stdErrors = new Float64Array(k);
    for (let j = 0; j < k; j++) {
      ddMul(s2h, s2l, invSq[2 * j]!, invSq[2 * j + 1]!, T);
      const v = T.hi;
      stdErrors[j] = Math.sqrt(v) + (v > 0 ? T.lo / (2 * Math.sqrt(v)) : 0);
    }
  }
  const estimates = bh.map((h, j) => h + bl[j]!);
  const rss = rssH + rssL;

  let errors: Float64Array;
  if (check !== undefined) {
    const q = acc.order - 1;
    const gh = new Float64Array(k);
    const gl = new Float64Array(k);
    kept.forEach((j, pos) => {
      const g = residualSum(check.sums, j, q + j);
      gh[pos] = g.hi;
      gl[pos] = g.lo;
    });
    const [th, tl] = refineTriangularDD(k, uh, ul, gh, gl, true);
    const [dh, dl] = refineTriangularDD(k, uh, ul, th, tl);
    errors = estimates.map((b, pos) => {
      ddAdd(check.anchor.coefficients[kept[pos]!]!, 0, dh[pos]!, dl[pos]!, T);
      ddAdd(T.hi, T.lo, -bh[pos]!, -bl[pos]!, S);
      return Math.abs(S.hi);
    });
  } else {
    const betaScaled = estimates.map((b, pos) => b * f.scale[kept[pos]!]!);
    errors = perturbationErrors(f, betaScaled, rss, rows, U_DD).estimate;
  }
  const estimatedDigits = digitsOf(estimates, { estimate: errors, stdError: stdErrorErrors(f, U_DD) });
  return assembleSolution(acc, f, options, {
    estimates,
    rss,
    ess,
    tss,
    accuracy: 'extended',
    refinementSteps: 0,
    estimatedDigits,
    ...(stdErrors === undefined ? {} : { stdErrors }),
  });
}

/**
 * The double-double triangular factor of the kept design columns and the response: R_X
 * (dense row-major `k × k`, high and low parts) and the response column (`k + 1` entries,
 * the last one √RSS). Without aliased columns that is R itself; otherwise the kept columns
 * of R (a trapezoid) are triangularised again by a double-double Householder fold, so the
 * reduced model is solved to the same digits.
 */
function keptFactor(
  n: number,
  hi: Float64Array,
  lo: Float64Array,
  kept: readonly number[],
): { uh: Float64Array; ul: Float64Array; yh: Float64Array; yl: Float64Array } {
  const k = kept.length;
  const cols = [...kept, n - 1];
  const nk = k + 1;
  let rh: Float64Array;
  let rl: Float64Array;
  if (k === n - 1) {
    rh = hi;
    rl = lo;
  } else {
    // Rows of R as a block of n rows (column-major, leading dimension n), folded into an empty factor.
    const bh = new Float64Array(n * nk);
    const bl = new Float64Array(n * nk);
    cols.forEach((col, c) => {
      for (let i = 0; i <= col; i++) {
        bh[c * n + i] = hi[packedIndex(n, i, col)]!;
        bl[c * n + i] = lo[packedIndex(n, i, col)]!;
      }
    });
    rh = new Float64Array(packedLength(nk));
    rl = new Float64Array(packedLength(nk));
    householderFoldDD(nk, rh, rl, bh, bl, n, n);
  }
  const uh = new Float64Array(k * k);
  const ul = new Float64Array(k * k);
  const yh = new Float64Array(nk);
  const yl = new Float64Array(nk);
  for (let i = 0; i < nk; i++) {
    for (let j = i; j < k; j++) {
      uh[i * k + j] = rh[packedIndex(nk, i, j)]!;
      ul[i * k + j] = rl[packedIndex(nk, i, j)]!;
    }
    yh[i] = rh[packedIndex(nk, i, k)]!;
    yl[i] = rl[packedIndex(nk, i, k)]!;
  }
  return { uh, ul, yh, yl };
}
