/**
 * The sums one refinement pass gathers over a model's rows, in compensated arithmetic. For
 * coefficients b (intercept first when there is one, in the coordinates of the data as
 * given) and each row with weight w > 0, the residual r = y − b₀ − Σ b_j x_j is formed with
 * the compensated dot product Dot2 of Ogita, Rump and Oishi ("Accurate sum and dot
 * product", SIAM J. Sci. Comput. 26(6), 2005: as accurate as if computed in twice the
 * working precision) and kept as a pair of doubles; these are summed with Sum2 (the same
 * paper: a running sum and a running sum of its rounding errors):
 *
 * - g = Σ w·r·x̂, x̂ = (1, x) — the gradient Xᵀ W r of the least-squares problem at b,
 *   each product w·r·x_j formed exactly (TwoProduct) before it is summed,
 * - Σ w·r² — the residual sum of squares at b,
 * - Σ w·(y − c) and Σ w·(y − c)² for a centre c near the weighted mean of y (the total
 *   sum of squares is the second minus the first squared over Σ w).
 *
 * Each sum is kept as two doubles (sum, error sum). Layout of `sums`, length 2q + 6 for q
 * coefficients: g's sums at [0, q), g's error sums at [q, 2q), then (sum, error) pairs of
 * Σ w r², Σ w (y − c) and Σ w (y − c)².
 */
export function residualSumsLength(q: number): number {
  return 2 * q + 6;
}

/** Where a block row's values are (see Accumulator.blockWidth). */
export interface ResidualLayout {
  /** Term columns in a row (the intercept is not in the row). */
  readonly terms: number;
  readonly intercept: boolean;
  readonly weighted: boolean;
  /** Values come as (high, low) pairs of doubles. */
  readonly pairs: boolean;
}

/** Dekker's splitting constant 2²⁷ + 1. */
const SPLITTER = 134217729;

/**
 * The coefficients split once per pass for the exact products of Dot2: `hi` has at most 26
 * significant bits, `hi + lo = b` exactly.
 */
export function splitCoefficients(coefficients: Float64Array): { hi: Float64Array; lo: Float64Array } {
  const hi = new Float64Array(coefficients.length);
  const lo = new Float64Array(coefficients.length);
  splitCoefficientsInto(coefficients, hi, lo);
  return { hi, lo };
}

/** {@link splitCoefficients} into arrays the caller holds (of at least the coefficients' length). */
export function splitCoefficientsInto(coefficients: Float64Array, hi: Float64Array, lo: Float64Array): void {
  for (let j = 0; j < coefficients.length; j++) {
    const b = coefficients[j]!;
    const t = SPLITTER * b;
    hi[j] = t - (t - b);
    lo[j] = b - hi[j]!;
  }
}

/**
 * Adds rows `from … to-1` of a checked block (row-major, `width` values a row) to `sums`.
 * Returns nothing; `counts` receives the rows, zero-weight rows and weight sums as a fold
 * does. Unchecked kernel: the caller checked the values (finite, weights ≥ 0).
 */
export function addResidualSums(
  layout: ResidualLayout,
  v: Float64Array,
  width: number,
  from: number,
  to: number,
  b: Float64Array,
  bHi: Float64Array,
  bLo: Float64Array,
  centre: number,
  sums: Float64Array,
  counts: { rows: number; zeroWeightRows: number; sumWeights: number; sumLogWeights: number },
): void {
  const p = layout.terms;
  const icpt = layout.intercept ? 1 : 0;
  const q = p + icpt;
  const stride = layout.pairs ? 2 : 1;
  const yOff = p * stride;
  const wOff = (p + 1) * stride;
  const ge = q;
  const at = 2 * q;
  let rssS = sums[at]!;
  let rssE = sums[at + 1]!;
  let syS = sums[at + 2]!;
  let syE = sums[at + 3]!;
  let syyS = sums[at + 4]!;
  let syyE = sums[at + 5]!;
  for (let row = from; row < to; row++) {
    const base = row * width;
    const w = layout.weighted ? (stride === 2 ? v[base + wOff]! + v[base + wOff + 1]! : v[base + wOff]!) : 1;
    if (w === 0) {
      counts.zeroWeightRows++;
      continue;
    }
    counts.rows++;
    counts.sumWeights += w;
    if (layout.weighted) counts.sumLogWeights += Math.log(w);
    const yHi = v[base + yOff]!;
    const yLo = stride === 2 ? v[base + yOff + 1]! : 0;
    // Dot2: s + c = y − b₀ − Σ b_j x_j, c gathering every rounding error.
    let s = yHi;
    let c = yLo;
    if (icpt === 1) {
      const t = s - b[0]!;
      const z = t - s;
      c += s - (t - z) + (-b[0]! - z);
      s = t;
    }
    for (let j = 0; j < p; j++) {
      const x = v[base + j * stride]!;
      const bj = b[icpt + j]!;
      // TwoProduct(x, b_j) = ph + pe exactly, b_j's halves split once per pass.
      const sx = SPLITTER * x;
      const xh = sx - (sx - x);
      const xl = x - xh;
      const ph = x * bj;
      const pe = xh * bHi[icpt + j]! - ph + xh * bLo[icpt + j]! + xl * bHi[icpt + j]! + xl * bLo[icpt + j]!;
      // TwoSum(s, −ph).
      const t = s - ph;
      const z = t - s;
      c += s - (t - z) + (-ph - z) - pe;
      if (stride === 2) c -= v[base + j * 2 + 1]! * bj;
      s = t;
    }
    // The residual stays a pair rh + rl (TwoSum of s and c): rounding it to one double would
    // leave an error of u·|r| per row, which moves a coefficient by about u times its standard
    // error — most of its digits when it is far smaller than its standard error.
    const rh = s + c;
    const rz = rh - s;
    const rl = s - (rh - rz) + (c - rz);
    let wr = rh;
    let wrl = rl;
    if (layout.weighted) {
      // w·(rh + rl) as a pair: TwoProduct(w, rh) plus w·rl.
      wr = w * rh;
      const sw0 = SPLITTER * w;
      const w0h = sw0 - (sw0 - w);
      const w0l = w - w0h;
      const sr = SPLITTER * rh;
      const rhh = sr - (sr - rh);
      const rhl = rh - rhh;
      wrl = w0h * rhh - wr + w0h * rhl + w0l * rhh + w0l * rhl + w * rl;
    }
    const r = rh;
    const sw = SPLITTER * wr;
    const wh = sw - (sw - wr);
    const wl = wr - wh;
    // Sum2 of the exact products w·r·x̂ into g, one (sum, error) pair per coefficient: a
    // rounded product would add an independent error to each component, which the
    // correction solve would amplify by κ².
    if (icpt === 1) {
      const g = sums[0]!;
      const t = g + wr;
      const z = t - g;
      sums[ge] = sums[ge]! + (g - (t - z) + (wr - z) + wrl);
      sums[0] = t;
    }
    for (let j = 0; j < p; j++) {
      const x = v[base + j * stride]!;
      const sx = SPLITTER * x;
      const xh = sx - (sx - x);
      const xl = x - xh;
      const ph = x * wr;
      let pe = xh * wh - ph + xh * wl + xl * wh + xl * wl + x * wrl;
      if (stride === 2) pe += v[base + j * 2 + 1]! * wr;
      const k = icpt + j;
      const g = sums[k]!;
      const t = g + ph;
      const z = t - g;
      sums[ge + k] = sums[ge + k]! + (g - (t - z) + (ph - z) + pe);
      sums[k] = t;
    }
    {
      const a = wr * r;
      const t = rssS + a;
      const z = t - rssS;
      rssE += rssS - (t - z) + (a - z);
      rssS = t;
    }
    const yd = yHi - centre + yLo;
    {
      const a = w * yd;
      const t = syS + a;
      const z = t - syS;
      syE += syS - (t - z) + (a - z);
      syS = t;
    }
    {
      const a = w * yd * yd;
      const t = syyS + a;
      const z = t - syyS;
      syyE += syyS - (t - z) + (a - z);
      syyS = t;
    }
  }
  sums[at] = rssS;
  sums[at + 1] = rssE;
  sums[at + 2] = syS;
  sums[at + 3] = syE;
  sums[at + 4] = syyS;
  sums[at + 5] = syyE;
}

/**
 * Adds the sums of the same pass over other rows (the same coefficients and centre): each
 * pair of sums is added with TwoSum and its rounding error joins the error sums.
 */
export function mergeResidualSums(into: Float64Array, other: Float64Array): void {
  const q = (into.length - 6) / 2;
  const add = (sumAt: number, errAt: number) => {
    const a = into[sumAt]!;
    const b = other[sumAt]!;
    const t = a + b;
    const z = t - a;
    into[errAt] = into[errAt]! + other[errAt]! + (a - (t - z) + (b - z));
    into[sumAt] = t;
  };
  for (let k = 0; k < q; k++) add(k, q + k);
  for (let i = 2 * q; i < into.length; i += 2) add(i, i + 1);
}

/** A sum kept as (sum, error sum) read as one double-double value, normalised. */
export function residualSum(sums: Float64Array, sumAt: number, errAt: number): { hi: number; lo: number } {
  const a = sums[sumAt]!;
  const b = sums[errAt]!;
  const hi = a + b;
  return { hi, lo: b - (hi - a) };
}
