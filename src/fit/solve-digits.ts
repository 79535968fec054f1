import type { FactorAnalysis } from './solve-factor.js';

/** The most digits a published double can be credited with. */
export const MAX_DIGITS = 15;

/** Unit roundoff of double precision (2⁻⁵³). */
const U = Number.EPSILON / 2;

/** Expected errors of a solution, per kept coefficient (kept order). */
export interface SolutionErrors {
  /** Absolute error of each estimate, in the coordinates as given (unshifted). */
  readonly estimate: Float64Array;
  /** Relative error of each standard error. */
  readonly stdError: Float64Array;
}

/**
 * Errors to expect from a backward-stable QR solve whose factor carries a relative
 * backward error `eps` in each entry of the column-scaled design, from first-order
 * least-squares perturbation theory (Higham, "Accuracy and Stability of Numerical
 * Algorithms", 2nd ed., §20.1): the scaled solution moves by δβ = −R⁻¹QᵀΔAβ + R⁻¹R⁻ᵀΔAᵀr.
 * Coefficient j's share, as typical errors (independent roundings added in quadrature,
 * and an m-row sum of random-signed roundings √m smaller than its worst case), is about
 * eps·(‖(|R⁻¹|·|R|)_j ∘ β‖ + ‖β‖·‖(R⁻¹)_j‖/√m + ‖r‖/√m·‖(R⁻¹R⁻ᵀ)_j‖): the first term is
 * Skeel's componentwise condition, the second what the other coefficients' errors leak
 * into j — the term that leaves a coefficient near zero beside large ones few correct
 * digits — and the third the residual's. With shifted columns the published intercept
 * b₀ = b₀' + c_y − Σ b_j c_j gathers the slopes' errors times |c_j|. Standard errors: see
 * {@link stdErrorErrors}.
 */
export function perturbationErrors(f: FactorAnalysis, betaScaled: Float64Array, rss: number, rows: number, eps: number): SolutionErrors {
  const { r11, rank: k } = f.qr;
  const rInv = f.rInv;
  // M = |R⁻¹|·|R| (both upper triangular).
  const m = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let l = i; l < k; l++) {
      const a = Math.abs(rInv[i * k + l]!);
      for (let j = l; j < k; j++) m[i * k + j]! += a * Math.abs(r11[l * k + j]!);
    }
  }
  // The residual term of the bound adds up m rounding errors of random sign, one per row;
  // their typical sum is √m smaller than the worst case the bound assumes.
  const rootRows = Math.sqrt(Math.max(1, rows));
  const typicalResidual = Math.sqrt(rss) / rootRows;
  let betaNorm = 0;
  for (let l = 0; l < k; l++) betaNorm = Math.hypot(betaNorm, betaScaled[l]!);
  const scaledErr = new Float64Array(k);
  for (let j = 0; j < k; j++) {
    let consistent = 0;
    let leak = 0;
    let residual = 0;
    for (let l = 0; l < k; l++) {
      consistent = Math.hypot(consistent, m[j * k + l]! * betaScaled[l]!);
      leak = Math.hypot(leak, rInv[j * k + l]!);
      residual = Math.hypot(residual, f.unitScaled[j * k + l]!);
    }
    scaledErr[j] = eps * (consistent + (betaNorm * leak) / rootRows + typicalResidual * residual);
  }
  return { estimate: unshiftErrors(f, scaledErr), stdError: stdErrorErrors(f, eps) };
}

/**
 * Relative errors of the standard errors when the factor carries a relative backward error
 * `eps` per entry. A standard error is σ‖v‖ for v = hᵀR⁻¹ (h the unit vector of the
 * coefficient, or for a shifted intercept g = (1, −c_1, …) over the column scales), and
 * R + ΔR moves v by −vᵀΔR R⁻¹; with |ΔR| ≤ eps·|R| that is at most eps·‖|v|ᵀ|R||R⁻¹|‖, relative
 * to ‖v‖. σ itself is taken as exact (its error is the residual sum's).
 */
export function stdErrorErrors(f: FactorAnalysis, eps: number): Float64Array {
  const { r11, rank: k, kept } = f.qr;
  const rInv = f.rInv;
  const out = new Float64Array(k);
  const h = new Float64Array(k);
  const v = new Float64Array(k);
  const w = new Float64Array(k);
  const z = new Float64Array(k);
  const shift = f.shift;
  for (let j = 0; j < k; j++) {
    h.fill(0);
    if (j === 0 && shift !== undefined) kept.forEach((c, pos) => (h[pos] = (c === 0 ? 1 : -shift[c - 1]!) / f.scale[c]!));
    else h[j] = 1;
    v.fill(0);
    for (let l = 0; l < k; l++) {
      const a = h[l]!;
      if (a !== 0) for (let c = l; c < k; c++) v[c]! += a * rInv[l * k + c]!;
    }
    w.fill(0);
    for (let l = 0; l < k; l++) {
      const a = Math.abs(v[l]!);
      if (a !== 0) for (let c = l; c < k; c++) w[c]! += a * Math.abs(r11[l * k + c]!);
    }
    z.fill(0);
    for (let l = 0; l < k; l++) {
      const a = w[l]!;
      if (a !== 0) for (let c = l; c < k; c++) z[c]! += a * Math.abs(rInv[l * k + c]!);
    }
    let nz = 0;
    let nv = 0;
    for (let l = 0; l < k; l++) {
      nz = Math.hypot(nz, z[l]!);
      nv = Math.hypot(nv, v[l]!);
    }
    out[j] = nv > 0 ? (eps * nz) / nv : 0;
  }
  return out;
}

/**
 * Absolute errors in the coordinates as given from absolute errors of the scaled (folded)
 * coefficients: divided by the column scales, and with shifted columns the intercept's
 * error gathers the slopes' errors times |c_j| (as worst case: the same rounding moves
 * every slope).
 */
export function unshiftErrors(f: FactorAnalysis, scaledErr: Float64Array): Float64Array {
  const { kept } = f.qr;
  const out = scaledErr.map((e, pos) => e / f.scale[kept[pos]!]!);
  const shift = f.shift;
  if (shift === undefined) return out;
  let e0 = out[0]!;
  for (let pos = 1; pos < kept.length; pos++) e0 += out[pos]! * Math.abs(shift[kept[pos]! - 1]!);
  out[0] = e0;
  return out;
}

/**
 * Correct significant digits of the least accurate estimate or standard error, from
 * expected absolute errors of the estimates and relative errors of the standard errors,
 * with `floor` the relative error no published double escapes (its own rounding) and at most
 * {@link MAX_DIGITS}.
 */
export function digitsOf(estimates: Float64Array, errors: SolutionErrors, floor: number = U): number | null {
  const k = estimates.length;
  if (k === 0) return null;
  let worst = floor;
  for (let j = 0; j < k; j++) {
    worst = Math.max(worst, errors.stdError[j]!, errors.estimate[j]! / Math.abs(estimates[j]!));
  }
  if (!Number.isFinite(worst)) return 0;
  return Math.max(0, Math.min(MAX_DIGITS, -Math.log10(worst)));
}

/**
 * Correct digits to expect from the double-precision solve: {@link perturbationErrors} with
 * ε, bounded by the normwise digits at risk, log10 κ of the scaled factor as folded —
 * structured designs such as raw polynomials lose them even where the componentwise
 * estimate looks kinder. test/reference/nist-strd-extended.test.ts holds it to never
 * promising more than a digit beyond what the NIST sets measure.
 */
export function fastDigits(f: FactorAnalysis, betaScaled: Float64Array, estimates: Float64Array, rss: number, rows: number): number | null {
  const errors = perturbationErrors(f, betaScaled, rss, rows, Number.EPSILON);
  const normwise = f.factorCondition === null ? Number.EPSILON : Number.EPSILON * f.factorCondition;
  return digitsOf(estimates, errors, Math.max(U, normwise));
}
