import { tQuantile } from '../numeric/distributions.js';
import { dd, ddAdd, ddDiv, ddMul } from '../numeric/double-double.js';
import { packedIndex } from '../numeric/packed.js';
import { solveUpper } from '../numeric/triangular.js';
import type { Accumulator } from './accumulator.js';
import type { CoefficientResult, FitSolution } from './fit-solution.js';
import { coefficientInference, modelStatistics } from './fit-statistics.js';
import { solve } from './solve.js';
import type { SolveOptions } from './solve.js';

const T = dd();
const S = dd();

/**
 * Solves a model whose factor was folded in double-double arithmetic: the rank decision,
 * notes and shape come from the ordinary solve of the rounded factor; then estimates,
 * standard errors and the sums of squares are recomputed to about 30 digits — triangular
 * solves by iterative refinement against the double-double factor (each step gains about
 * −log10(κ·ε) digits, κ the column-scaled condition), sums of squares read off the
 * factor in double-double — and rounded once.
 *
 * A model with aliased terms keeps the ordinary solution (the reduced factor would need a
 * double-double rank-revealing step, which is not built); its notes say so.
 */
export function solveExtended(acc: Accumulator, options: SolveOptions = {}): FitSolution {
  const base = solve(acc, options);
  const low = acc.factorLow;
  if (low === undefined) throw new RangeError('solveExtended needs a double-double accumulator');
  if (base.status !== 'ok' && base.status !== 'no_residual_df') return base;
  if (base.aliased.length > 0) {
    return { ...base, notes: [...base.notes, 'extended precision not applied: the model has aliased terms'] };
  }
  const n = acc.order;
  const pd = n - 1;
  const hi = acc.factor;
  const at = (i: number, j: number) => packedIndex(n, i, j);
  // Dense double copy of R_X for the correction solves.
  const rx = new Float64Array(pd * pd);
  for (let i = 0; i < pd; i++) for (let j = i; j < pd; j++) rx[i * pd + j] = hi[at(i, j)]!;

  /** Solves R_X x = b (b double-double) by refinement; returns x as hi/lo arrays. */
  const refinedSolve = (bh: Float64Array, bl: Float64Array): [Float64Array, Float64Array] => {
    const xh = new Float64Array(pd);
    const xl = new Float64Array(pd);
    const r = new Float64Array(pd);
    for (let iter = 0; iter < 8; iter++) {
      // r = b − R x, accumulated in double-double.
      for (let i = 0; i < pd; i++) {
        let sh = bh[i]!;
        let sl = bl[i]!;
        for (let j = i; j < pd; j++) {
          const o = at(i, j);
          ddMul(hi[o]!, low[o]!, xh[j]!, xl[j]!, T);
          ddAdd(sh, sl, -T.hi, -T.lo, S);
          sh = S.hi;
          sl = S.lo;
        }
        r[i] = sh;
      }
      solveUpper(pd, rx, pd, r);
      let change = 0;
      for (let i = 0; i < pd; i++) {
        ddAdd(xh[i]!, xl[i]!, r[i]!, 0, S);
        xh[i] = S.hi;
        xl[i] = S.lo;
        const rel = Math.abs(r[i]!) / Math.max(Math.abs(S.hi), Number.MIN_VALUE);
        if (rel > change) change = rel;
      }
      if (change < 1e-31) break;
    }
    return [xh, xl];
  };

  // Estimates: R_X β = z, z the response column above the diagonal.
  const zh = new Float64Array(pd);
  const zl = new Float64Array(pd);
  for (let i = 0; i < pd; i++) {
    zh[i] = hi[at(i, pd)]!;
    zl[i] = low[at(i, pd)]!;
  }
  const [betaH] = refinedSolve(zh, zl);

  // Sums of squares off the factor, in double-double.
  const sumSquares = (rows: number[]): [number, number] => {
    let sh = 0;
    let sl = 0;
    for (const i of rows) {
      const o = at(i, pd);
      ddMul(hi[o]!, low[o]!, hi[o]!, low[o]!, T);
      ddAdd(sh, sl, T.hi, T.lo, S);
      sh = S.hi;
      sl = S.lo;
    }
    return [sh, sl];
  };
  const icpt = acc.shape.intercept ? 1 : 0;
  const range = (a: number, b: number) => Array.from({ length: Math.max(0, b - a) }, (_, i) => a + i);
  const [rssH, rssL] = sumSquares([pd]);
  const [tssH, tssL] = sumSquares(range(icpt, n));
  const [essH, essL] = sumSquares(range(icpt, pd));
  const rows = acc.rows;
  const df = rows - pd;
  const notes = [...base.notes];

  if (df <= 0) {
    const coefficients = base.coefficients.map((c, j) => ({ ...c, estimate: betaH[j]! }));
    return { ...base, coefficients, notes, accuracy: 'extended', estimatedDigits: extendedDigits(base) };
  }

  // Row j of R_X⁻¹ gives var(β_j)/σ²; columns of the inverse by refined solves.
  const invSq = new Float64Array(pd * 2); // per row j: Σ_k (R⁻¹)_jk² as hi/lo
  const eh = new Float64Array(pd);
  const el = new Float64Array(pd);
  for (let k = 0; k < pd; k++) {
    eh.fill(0);
    eh[k] = 1;
    const [ch, cl] = refinedSolve(eh, el);
    for (let j = 0; j <= k; j++) {
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
  const q = tQuantile(1 - (1 - base.confidence) / 2, df);
  const coefficients: CoefficientResult[] = base.coefficients.map((c, j) => {
    ddMul(s2h, s2l, invSq[2 * j]!, invSq[2 * j + 1]!, T);
    const v = T.hi;
    const se = Math.sqrt(v) + (v > 0 ? T.lo / (2 * Math.sqrt(v)) : 0);
    return coefficientInference(c, betaH[j]!, se, q, df);
  });
  const rss = rssH + rssL;
  return {
    ...base,
    notes,
    accuracy: 'extended',
    estimatedDigits: extendedDigits(base),
    rss,
    ...modelStatistics({ rss, ess: essH + essL, tss: tssH + tssL, rows, rank: pd, intercept: icpt === 1, sumLogWeights: acc.sumLogWeights }),
    coefficients,
  };
}

/**
 * The same perturbation estimate as the double path with the unit roundoff of
 * double-double (about ε²) in place of ε: −log10 of the error gains −log10 ε ≈ 15.65
 * digits, and the published doubles cap it at 15.
 */
function extendedDigits(base: FitSolution): number | null {
  if (base.estimatedDigits === null) return null;
  return Math.min(15, base.estimatedDigits - Math.log10(Number.EPSILON));
}
