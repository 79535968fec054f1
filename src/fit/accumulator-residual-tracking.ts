import { mergeResidualSums, residualSum, residualSumsLength } from '../numeric/residual-sums.js';
import { dd, ddAdd, twoProd, twoSum } from '../numeric/double-double.js';
import { packedIndex } from '../numeric/packed.js';
import type { FoldCounts, FoldLayout, RefinementAnchor } from './accumulator-state.js';
import { foldRowsResiduals } from './accumulator-fold-residuals.js';
import type { Float64Slab } from './float64-slab.js';

/** Unit roundoff of double precision (2⁻⁵³). */
const U = Number.EPSILON / 2;

/** Rows after which an anchor that follows the solution first moves (see ResidualTracking). */
export const FIRST_ANCHOR_ROWS = 256;

/** Everything residual tracking holds, in plain form (see AccumulatorState.tracking). */
export interface TrackingState {
  readonly coefficients: Float64Array;
  readonly centre: number;
  readonly sums: Float64Array;
  /**
   * Σ over anchor moves of rows·|T·Δc| per coefficient: the moves in the coordinates of the
   * factor as folded (T the shift's transform, so a shifted intercept moves by
   * Δc₀ + Σ c_j Δc_j, signs and all).
   */
  readonly drift: Float64Array;
  /** A bound on the rounding the anchor moves left in the residual sum of squares. */
  readonly rssError: number;
  readonly follow: boolean;
  readonly nextMove: number;
  /** False once tracking was given up (the sums then mean nothing). */
  readonly valid: boolean;
  /** Stored rows taken as solved by the anchor (see solvedTracking), when there are any. */
  readonly seed?: SolvedSeed | undefined;
}

/**
 * Stored rows whose gradient at a fixed anchor was taken as zero (a refit's previous
 * solution): their packed factor (folded with `shift`) and the anchor's error per
 * coefficient (coordinates as given). The gradient left out is G_old·e, which moves the
 * refined solution by (XᵀWX)⁻¹G_old·e: a solve needs both to say what that costs in digits.
 */
export interface SolvedSeed {
  readonly factor: Float64Array;
  readonly shift: Float64Array | undefined;
  readonly error: Float64Array;
}

/**
 * Residual sums gathered in the same pass as the factor — the refinement step of a pass that
 * is read anyway. Rows are summed (numeric/residual-sums.ts) against an anchor: a fixed one
 * (a refit's previous solution), or one that follows the solution of the rows folded so far
 * (`follow`): zero at first, then the double factor's solution after 256 rows, 512, 1024 …
 * When the anchor moves by d, the sums move with it exactly in algebra — g(c + d) =
 * g(c) − G d and RSS(c + d) = RSS(c) − 2dᵀg(c) + dᵀG d, G the Gram matrix of the rows so far
 * read off the factor — and in arithmetic with the factor's error times d, so the moves
 * are kept (`drift`) for the digit estimate: early moves are large but weigh few rows,
 * late ones weigh many rows but are small (the solution settles as rows come).
 */
export class ResidualTracking {
  anchor: RefinementAnchor;
  readonly sums: Float64Array;
  readonly drift: Float64Array;
  rssError: number;
  readonly follow: boolean;
  nextMove: number;
  valid: boolean;
  seed: SolvedSeed | undefined;
  private static readonly scratch: FoldCounts = { rows: 0, zeroWeightRows: 0, sumWeights: 0, sumLogWeights: 0 };

  constructor(q: number, anchor: RefinementAnchor | undefined, state?: TrackingState, slab?: Float64Slab) {
    if (state !== undefined) {
      this.anchor = { coefficients: state.coefficients.slice(), centre: state.centre };
      this.sums = state.sums.slice();
      this.drift = state.drift.slice();
      this.rssError = state.rssError;
      this.follow = state.follow;
      this.nextMove = state.nextMove;
      this.valid = state.valid;
      this.seed = state.seed;
      return;
    }
    const take = (n: number) => (slab === undefined ? new Float64Array(n) : slab.take(n));
    this.anchor = anchor ?? { coefficients: take(q), centre: 0 };
    this.sums = take(residualSumsLength(q));
    this.drift = take(q);
    this.rssError = 0;
    this.follow = anchor === undefined;
    this.nextMove = this.follow ? FIRST_ANCHOR_ROWS : Number.POSITIVE_INFINITY;
    this.valid = true;
    this.seed = undefined;
  }

  /** A plain copy, for storage or transfer to another thread. */
  state(): TrackingState {
    return {
      coefficients: this.anchor.coefficients.slice(),
      centre: this.anchor.centre,
      sums: this.sums.slice(),
      drift: this.drift.slice(),
      rssError: this.rssError,
      follow: this.follow,
      nextMove: this.nextMove,
      valid: this.valid,
      ...(this.seed === undefined ? {} : { seed: this.seed }),
    };
  }

  /** Adds rows `from … to-1` of a checked block to the sums (the factor's fold counts them). */
  fold(layout: FoldLayout, v: Float64Array, width: number, from: number, to: number): void {
    if (this.valid) foldRowsResiduals(layout, this.anchor, this.sums, v, width, from, to, ResidualTracking.scratch);
  }

  /** Gives tracking up (the sums are dropped; a later pass must refine instead). */
  abandon(): void {
    this.valid = false;
    this.sums.fill(0);
  }

  /**
   * Moves the anchor to `next` over `rows` rows whose Gram matrix the packed factor `factor`
   * (order `order`, folded from columns shifted by `shift`) holds.
   */
  moveTo(next: RefinementAnchor, factor: Float64Array, order: number, shift: Float64Array | undefined, rows: number): void {
    if (!this.valid) {
      this.anchor = next;
      return;
    }
    const q = order - 1;
    shiftSums(this, foldedMove(this.anchor.coefficients, next.coefficients, shift), factor, order, shift, rows);
    // The centre only shifts Σw(y − c) and Σw(y − c)²: re-centred in the same algebra.
    const dc = next.centre - this.anchor.centre;
    if (dc !== 0) recentre(this.sums, q, dc, factorWeightSum(factor, order));
    // A following anchor is this tracking's own: the next one is copied into its coefficients
    // (held in the slab with the factor), so that a hundred thousand small models do not each
    // keep an array of their own.
    if (this.follow && this.anchor.coefficients.length === next.coefficients.length) {
      this.anchor.coefficients.set(next.coefficients);
      this.anchor = { coefficients: this.anchor.coefficients, centre: next.centre };
    } else this.anchor = next;
  }

  /**
   * Adds another tracking of the same model over other rows. The sums of the side with fewer
   * rows are moved to the other side's anchor first (with their own rows' factor), so the
   * move weighs as few rows as it can.
   */
  mergeFrom(
    other: ResidualTracking,
    mine: { factor: Float64Array; shift: Float64Array | undefined; rows: number },
    theirs: { factor: Float64Array; shift: Float64Array | undefined; rows: number },
    order: number,
  ): void {
    // Two sets of stored rows taken as solved cannot be told apart afterwards: given up.
    if (!other.valid || !this.valid || (other.seed !== undefined && this.seed !== undefined)) {
      this.abandon();
      return;
    }
    if (mine.rows === 0) {
      this.adopt(other);
      return;
    }
    if (theirs.rows === 0) return;
    const q = order - 1;
    if (mine.rows < theirs.rows) this.moveTo(other.anchor, mine.factor, order, mine.shift, mine.rows);
    const moved = new ResidualTracking(q, undefined, other.state());
    moved.moveTo(this.anchor, theirs.factor, order, theirs.shift, theirs.rows);
    mergeResidualSums(this.sums, moved.sums);
    for (let j = 0; j < q; j++) this.drift[j] = this.drift[j]! + moved.drift[j]!;
    this.rssError += moved.rssError;
    this.nextMove = Math.max(this.nextMove, other.nextMove);
    this.seed ??= other.seed;
  }

  /** Takes another tracking's state as its own (this one holds no rows). */
  private adopt(other: ResidualTracking): void {
    const s = other.state();
    this.anchor = { coefficients: s.coefficients, centre: s.centre };
    this.sums.set(s.sums);
    this.drift.set(s.drift);
    this.rssError = s.rssError;
    this.nextMove = s.nextMove;
    this.valid = s.valid;
    this.seed = s.seed;
  }
}

/**
 * The move of an anchor from `from` to `to` (coordinates as given) in the coordinates of the
 * factor as folded with `shift`: v = T(to − from), T₀ⱼ = c_j, so v₀ = d₀ + Σ c_j d_j and
 * v_j = d_j. Each d_j is the exact difference (TwoSum) and v₀ is summed in double-double:
 * with large shifts d₀ and Σ c_j d_j cancel almost entirely (the intercept as given moves by
 * about −Σ c_j d_j while the folded one barely moves), and a rounded v₀ would move the sums
 * by G times an error of u·|c|·|d| that no digit estimate accounts for.
 */
function foldedMove(from: Float64Array, to: Float64Array, shift: Float64Array | undefined): Float64Array {
  const q = from.length;
  const v = new Float64Array(q);
  const t = dd();
  const acc = dd();
  twoSum(to[0]!, -from[0]!, acc);
  for (let j = 1; j < q; j++) {
    twoSum(to[j]!, -from[j]!, t);
    const dh = t.hi;
    const dl = t.lo;
    v[j] = dh + dl;
    if (shift === undefined) continue;
    const c = shift[j - 1]!;
    twoProd(c, dh, t);
    ddAdd(acc.hi, acc.lo, t.hi, t.lo + c * dl, acc);
  }
  v[0] = acc.hi + acc.lo;
  return v;
}

/**
 * Moves the sums by the folded move `v` (see foldedMove): g(c + d) = g(c) − G d and
 * RSS(c + d) = RSS(c) − 2dᵀg(c) + dᵀGd. G d is formed in the folded coordinates, G'v =
 * R_XᵀR_X v, and taken back to the coordinates as given (G d = TᵀG'v: component j gains
 * c_j·(G'v)₀) with exact products added to the compensated sums, so that the folded
 * gradient a solve recovers, g'_j = g_j − c_j·g₀, moves by exactly −(G'v)_j. dᵀg(c) is
 * vᵀg'(c) and dᵀGd is ‖R_X v‖². The move's size per coefficient joins the drift.
 */
function shiftSums(t: ResidualTracking, v: Float64Array, factor: Float64Array, order: number, shift: Float64Array | undefined, rows: number): void {
  const q = v.length;
  const s = t.sums;
  const rv = new Float64Array(q);
  let dgd = 0;
  for (let i = 0; i < q; i++) {
    let sum = 0;
    for (let j = i; j < q; j++) sum += factor[packedIndex(order, i, j)]! * v[j]!;
    rv[i] = sum;
    dgd += sum * sum;
  }
  const gv = new Float64Array(q);
  for (let j = 0; j < q; j++) {
    let sum = 0;
    for (let i = 0; i <= j; i++) sum += factor[packedIndex(order, i, j)]! * rv[i]!;
    gv[j] = sum;
  }
  // vᵀg'(c), the folded gradient before the move.
  const g0 = residualSum(s, 0, q);
  const p = dd();
  let dg = v[0]! * (g0.hi + g0.lo);
  for (let j = 1; j < q; j++) {
    const g = residualSum(s, j, q + j);
    if (shift === undefined) {
      dg += v[j]! * (g.hi + g.lo);
      continue;
    }
    twoProd(-shift[j - 1]!, g0.hi, p);
    ddAdd(p.hi, p.lo - shift[j - 1]! * g0.lo, g.hi, g.lo, p);
    dg += v[j]! * (p.hi + p.lo);
  }
  addTo(s, 0, q, -gv[0]!);
  for (let j = 1; j < q; j++) {
    addTo(s, j, q + j, -gv[j]!);
    if (shift === undefined) continue;
    twoProd(shift[j - 1]!, gv[0]!, p);
    addTo(s, j, q + j, -p.hi);
    addTo(s, j, q + j, -p.lo);
  }
  for (let j = 0; j < q; j++) t.drift[j] = t.drift[j]! + rows * Math.abs(v[j]!);
  const rss = residualSum(s, 2 * q, 2 * q + 1);
  t.rssError += U * (Math.abs(rss.hi) + 2 * Math.abs(dg) + dgd);
  addTo(s, 2 * q, 2 * q + 1, -2 * dg);
  addTo(s, 2 * q, 2 * q + 1, dgd);
}

/** Adds `a` to the (sum, error) pair at `sumAt`, `errAt` with TwoSum. */
function addTo(s: Float64Array, sumAt: number, errAt: number, a: number): void {
  const x = s[sumAt]!;
  const t = x + a;
  const z = t - x;
  s[errAt] = s[errAt]! + (x - (t - z) + (a - z));
  s[sumAt] = t;
}

/** Σw(y − c) and Σw(y − c)² re-centred from c to c + dc: S₁ − dc·W and S₂ − 2dc·S₁ + dc²·W. */
function recentre(s: Float64Array, q: number, dc: number, w: number): void {
  const s1 = residualSum(s, 2 * q + 2, 2 * q + 3);
  const one = s1.hi + s1.lo;
  addTo(s, 2 * q + 4, 2 * q + 5, -2 * dc * one);
  addTo(s, 2 * q + 4, 2 * q + 5, dc * dc * w);
  addTo(s, 2 * q + 2, 2 * q + 3, -dc * w);
}

/** Σw read off a factor with an intercept (R₀₀²), else 0 (no centring without an intercept). */
function factorWeightSum(factor: Float64Array, order: number): number {
  return order > 1 ? factor[packedIndex(order, 0, 0)]! ** 2 : 0;
}

/**
 * The solution of the rows a packed factor holds, as the next anchor of a following tracking:
 * back-substitution on R (no rank decision: undefined when a diagonal entry is below 1e-12
 * of its column's norm, and the anchor then waits for more rows), the intercept recovered
 * from the shift, and the weighted mean of the response as the centre. An anchor needs no
 * accuracy of its own: the sums are exact about any anchor.
 */
export function anchorOfFactor(
  factor: Float64Array,
  order: number,
  shift: Float64Array | undefined,
  intercept: boolean,
): RefinementAnchor | undefined {
  const q = order - 1;
  const b = new Float64Array(q);
  for (let i = q - 1; i >= 0; i--) {
    let s = factor[packedIndex(order, i, q)]!;
    for (let j = i + 1; j < q; j++) s -= factor[packedIndex(order, i, j)]! * b[j]!;
    const diag = factor[packedIndex(order, i, i)]!;
    let column = 0;
    for (let r = 0; r <= i; r++) column = Math.hypot(column, factor[packedIndex(order, r, i)]!);
    if (!(Math.abs(diag) > 1e-12 * column)) return undefined;
    b[i] = s / diag;
  }
  let centre = 0;
  if (intercept) {
    centre = factor[packedIndex(order, 0, q)]! / factor[0]! + (shift?.[q - 1] ?? 0);
    if (shift !== undefined) {
      b[0] = b[0]! + shift[q - 1]!;
      for (let j = 1; j < q; j++) b[0] = b[0]! - shift[j - 1]! * b[j]!;
    }
  }
  return { coefficients: b, centre };
}

/**
 * Residual tracking over the rows a packed factor holds, against `anchor` taken as their
 * solution (a refit's previous, certified solution): the gradient there is taken as zero —
 * off by G_old·error, kept as the tracking's `seed` so that the solve can say what it
 * costs (it is not a move's rounding, which the factor's rate shrinks: the refined solution
 * inherits it in full) — the residual sum of squares is the factor's last diagonal squared,
 * and Σw(y − c), Σw(y − c)² are read off its response column (c the anchor's centre).
 */
export function solvedTracking(
  factor: Float64Array,
  order: number,
  shift: Float64Array | undefined,
  intercept: boolean,
  rows: number,
  anchor: RefinementAnchor,
  error: Float64Array,
): TrackingState {
  const q = order - 1;
  const sums = new Float64Array(residualSumsLength(q));
  const rss = factor[packedIndex(order, q, q)]! ** 2;
  sums[2 * q] = rss;
  let s2 = 0;
  for (let i = 0; i <= q; i++) s2 += factor[packedIndex(order, i, q)]! ** 2;
  if (intercept) {
    // Row 0: R₀₀ = ±√Σw and R₀,y = Σw(y − c_y)/R₀₀, c_y the response's shift.
    const w = factor[0]! ** 2;
    const s1 = factor[0]! * factor[packedIndex(order, 0, q)]!;
    const d = anchor.centre - (shift?.[q - 1] ?? 0);
    sums[2 * q + 2] = s1 - d * w;
    sums[2 * q + 4] = s2 - 2 * d * s1 + d * d * w;
  } else {
    sums[2 * q + 4] = s2;
  }
  return {
    coefficients: anchor.coefficients.slice(),
    centre: anchor.centre,
    sums,
    drift: new Float64Array(q),
    rssError: U * rss * Math.sqrt(Math.max(1, rows)),
    follow: false,
    nextMove: Number.POSITIVE_INFINITY,
    valid: true,
    seed: { factor: factor.slice(), shift: shift?.slice(), error: error.slice() },
  };
}
