import { gramUpdate } from '../numeric/gram-update.js';
import { packedLength, unpackUpper } from '../numeric/packed.js';
import { leveragesBlock } from '../numeric/leverage.js';
import { addOuterUpper, choleskyLower, lowerTransposedTimes, symmetricFromUpper } from '../numeric/sandwich.js';
import { wasmFold } from './wasm-kernel.js';

/** Heteroskedasticity-consistent covariance estimators (White 1980; MacKinnon and White 1985). */
export const ROBUST_METHODS = ['hc0', 'hc1', 'hc2', 'hc3'] as const;
export type RobustMethod = (typeof ROBUST_METHODS)[number];

/** What the residual pass gathers for every segment (from the spec's `residual_pass`). */
export interface ResidualPassOptions {
  readonly robust: readonly RobustMethod[];
  /** Rows carry a cluster id (see {@link ResidualSegment.row}). */
  readonly cluster: boolean;
  /** At most this many cluster ids × kept coefficients per segment (memory bound). */
  readonly maxClusterValues: number;
  /** Rows arrive in the order of the spec's order column within each segment. */
  readonly ordered: boolean;
  /** Rows kept per segment by Cook's distance and by leverage (0: none). */
  readonly influentialTop: number;
}

/** The solved model a segment's residuals are taken against. */
export interface ResidualModel {
  /** Estimates of the kept coefficients, in kept order. */
  readonly estimates: Float64Array;
  /** Per kept coefficient, its column in the design block (-1: the intercept). */
  readonly columns: Int32Array;
  /** (XᵀWX)⁻¹ of the kept coefficients, row-major `k × k` (the covariance over σ²). */
  readonly bread: Float64Array;
  /** Residual standard error of the fit. */
  readonly sigma: number;
  /** Rows with a positive weight that the fit holds. */
  readonly rows: number;
}

/** A row kept among a segment's most influential. */
export interface InfluentialRow {
  /** The row's id (a hash of the spec's key columns, resolved to their values later). */
  readonly id: number;
  readonly residual: number;
  readonly leverage: number;
  readonly cooksDistance: number;
}

/** Meat kinds: ω = ẽ² (HC0, HC1), ẽ²/(1−h) (HC2), ẽ²/(1−h)² (HC3). */
type MeatKind = 'hc0' | 'hc2' | 'hc3';

/**
 * Rows staged before their leverages are taken as one block and each meat gets one rank-B
 * update of its packed upper triangle (the leverage and Gram kernels, in WebAssembly SIMD
 * where built): the rows are written scaled by √ω, so BᵀB adds Σ ω·x̃x̃ᵀ. From
 * {@link STAGE_MORE_FROM} coefficients on, {@link STAGED_ROWS_LARGE} rows (longer blocks keep
 * the SIMD kernels busy; the staging, k·128 doubles, is then smaller than the bread's k² anyway).
 */
export const STAGED_ROWS = 32;
export const STAGED_ROWS_LARGE = 128;
export const STAGE_MORE_FROM = 128;

/**
 * Below this many coefficients a row is added to the meats at once (a few flops; staging
 * blocks would cost a segment more memory than its meats, which matters with millions of
 * segments).
 */
const STAGE_FROM = 12;

/** Bins of the standardised-residual histogram behind the quantiles, over [-Z, Z]. */
export const QUANTILE_RANGE = 8;
export const QUANTILE_BINS = 200;

/** The Newey–West lag for `n` rows: ⌊4·(n/100)^(2/9)⌋ (Newey and West 1994, recalled from memory). */
export function neweyWestLag(n: number): number {
  return Math.max(0, Math.floor(4 * (n / 100) ** (2 / 9)));
}

/**
 * One segment's sums over its residuals, fed one row at a time in a second streamed pass with
 * the solved coefficients. Memory: O(k²) per requested meat, O(lag·k) for Newey–West, O(clusters·k)
 * for cluster sums (bounded by `maxClusterValues`), a fixed histogram and the top rows. Rows are
 * whitened by √w (x̃ = √w·x, ẽ = √w·e), so weighted fits follow weighted least squares.
 */
export class ResidualSegment {
  readonly k: number;
  readonly lag: number;
  /** Lower Cholesky factor of the bread (null: not numerically positive definite; no leverages). */
  readonly breadFactor: Float64Array | null;
  rows = 0;
  /** Rows whose leverage was 1 to rounding (HC2, HC3 and Cook's distance undefined there). */
  fullLeverageRows = 0;
  /** Packed upper-triangle meats Σ ω·x̃x̃ᵀ with ω = ẽ² (hc0/hc1), ẽ²/(1−h) (hc2), ẽ²/(1−h)² (hc3). */
  private readonly meats: Partial<Record<MeatKind, Float64Array>> = {};
  /** Rows staged column-major (k × ld) with their residuals and ids (k ≥ STAGE_FROM). */
  private readonly raw: Float64Array | null;
  /** Rows a block of staged rows holds (the leading dimension of `raw`). */
  readonly ld: number;
  private readonly zs: Float64Array | null;
  private readonly scaled: Float64Array | null;
  private readonly stagedE: Float64Array;
  private readonly stagedId: Float64Array;
  private readonly stagedH: Float64Array;
  private readonly stagedScale: Float64Array;
  private readonly stagedFull: Uint8Array;
  private staged = 0;
  /** Cluster id → Σ ẽ·x̃ over its rows. */
  readonly clusters = new Map<number, Float64Array>();
  /** Newey–West: A = Σ_t u_t·v_tᵀ with u_t = ẽ_t·x̃_t and v_t = Σ_l w_l·u_{t−l} (full k × k). */
  readonly nwCross: Float64Array | null;
  readonly nwMeat: Float64Array | null;
  private readonly ring: Float64Array | null;
  private ringNext = 0;
  /** Durbin–Watson sums: Σ(ẽ_t − ẽ_{t−1})², and the previous residual. */
  dwNumerator = 0;
  private previous: number | null = null;
  /** Breusch–Pagan: Σ x̃·ẽ², Σ ẽ², Σ ẽ⁴. */
  readonly bpCross: Float64Array;
  sumE2 = 0;
  sumE4 = 0;
  /** Central moments of ẽ (streamed; Pébay 2008 updates): mean, M2, M3, M4. */
  mean = 0;
  m2 = 0;
  m3 = 0;
  m4 = 0;
  min = Number.POSITIVE_INFINITY;
  max = Number.NEGATIVE_INFINITY;
  /** Histogram of ẽ/σ over [−8, 8] (4 bytes a bin), with the rows below and above it at the ends. */
  readonly histogram = new Uint32Array(QUANTILE_BINS + 2);
  /** Sums over the rows held out of the fit (spec residual_pass.holdout). */
  readonly holdout = { rows: 0, sumWeights: 0, sse: 0, sae: 0, meanY: 0, sst: 0 };
  readonly topCooks: InfluentialRow[] = [];
  readonly topLeverage: InfluentialRow[] = [];
  private readonly x: Float64Array;
  private readonly z: Float64Array;
  private readonly u: Float64Array;
  private readonly v: Float64Array;

  constructor(
    readonly model: ResidualModel,
    readonly options: ResidualPassOptions,
    /** Values per block row, and where the response and weight (−1: none) are. */
    readonly layout: { readonly width: number; readonly response: number; readonly weight: number },
    /** Label for errors (the segment). */
    readonly label: string,
  ) {
    const k = model.estimates.length;
    this.k = k;
    this.breadFactor = choleskyLower(k, model.bread);
    const hc = new Set(options.robust);
    const kinds: MeatKind[] = [];
    if (hc.has('hc0') || hc.has('hc1')) kinds.push('hc0');
    if (this.breadFactor !== null && hc.has('hc2')) kinds.push('hc2');
    if (this.breadFactor !== null && hc.has('hc3')) kinds.push('hc3');
    for (const kind of kinds) this.meats[kind] = new Float64Array(packedLength(k));
    const staging = k >= STAGE_FROM;
    this.ld = k >= STAGE_MORE_FROM ? STAGED_ROWS_LARGE : STAGED_ROWS;
    // With the WebAssembly kernels, z and the scaled rows live in the kernel's memory.
    const inTs = wasmFold() === null;
    this.raw = staging ? new Float64Array(k * this.ld) : null;
    this.zs = staging && inTs && this.breadFactor !== null ? new Float64Array(k * this.ld) : null;
    this.scaled = staging && inTs ? new Float64Array(k * this.ld) : null;
    // Small models (the millions-of-segments case) keep no staging arrays at all.
    const rows = staging ? this.ld : 0;
    this.stagedE = new Float64Array(rows);
    this.stagedId = new Float64Array(rows);
    this.stagedH = new Float64Array(rows);
    this.stagedScale = new Float64Array(rows);
    this.stagedFull = new Uint8Array(rows);
    this.lag = options.ordered ? neweyWestLag(model.rows) : 0;
    this.nwCross = options.ordered ? new Float64Array(k * k) : null;
    this.nwMeat = options.ordered && this.meats.hc0 === undefined ? new Float64Array(k * k) : null;
    this.ring = options.ordered && this.lag > 0 ? new Float64Array(this.lag * k) : null;
    this.bpCross = new Float64Array(k);
    this.x = new Float64Array(k);
    this.z = new Float64Array(k);
    this.u = new Float64Array(k);
    this.v = new Float64Array(k);
  }

  /**
   * Folds one row (values at `values[offset …]`, in the block layout) with its cluster id
   * (ignored unless clustering) and its id (for influential rows). Zero-weight rows add nothing.
   */
  row(values: Float64Array, offset: number, cluster: number, id: number, heldOut = false): void {
    const { k, model, x } = this;
    const w = this.layout.weight < 0 ? 1 : values[offset + this.layout.weight]!;
    if (!(w > 0)) return;
    if (heldOut) {
      this.holdOut(values, offset, w);
      return;
    }
    const sw = Math.sqrt(w);
    let fitted = 0;
    for (let j = 0; j < k; j++) {
      const c = model.columns[j]!;
      const xj = c < 0 ? 1 : values[offset + c]!;
      fitted += model.estimates[j]! * xj;
      x[j] = sw * xj;
    }
    const e = sw * (values[offset + this.layout.response]! - fitted);
    this.rows++;
    const e2 = e * e;
    if (k >= STAGE_FROM) {
      // Leverages, the meats and influence wait for a block of rows (see flush).
      const r = this.staged;
      const raw = this.raw!;
      const ld = this.ld;
      for (let j = 0; j < k; j++) raw[j * ld + r] = x[j]!;
      this.stagedE[r] = e;
      this.stagedId[r] = id;
      if (++this.staged === ld) this.flush();
    } else {
      let h = Number.NaN;
      if (this.breadFactor !== null) {
        lowerTransposedTimes(k, this.breadFactor, x, 0, this.z);
        h = 0;
        for (let j = 0; j < k; j++) h += this.z[j]! ** 2;
      }
      const oneMinusH = 1 - h;
      const full = this.leverageTaken(e, h, id);
      this.addNow('hc0', e2);
      // A row of leverage 1 adds nothing to HC2 and HC3; fullLeverageRows makes them undefined.
      if (!full) {
        this.addNow('hc2', e2 / oneMinusH);
        this.addNow('hc3', e2 / (oneMinusH * oneMinusH));
      }
    }
    if (this.options.cluster) this.addCluster(cluster, e);
    if (this.nwCross !== null) this.addNeweyWest(e);
    if (this.options.ordered) {
      if (this.previous !== null) this.dwNumerator += (e - this.previous) ** 2;
      this.previous = e;
    }
    for (let j = 0; j < k; j++) this.bpCross[j] = this.bpCross[j]! + x[j]! * e2;
    this.sumE2 += e2;
    this.sumE4 += e2 * e2;
    this.addMoments(e);
    const bin = model.sigma > 0 ? Math.floor(((e / model.sigma + QUANTILE_RANGE) / (2 * QUANTILE_RANGE)) * QUANTILE_BINS) : 0;
    const slot = bin < 0 ? 0 : bin >= QUANTILE_BINS ? QUANTILE_BINS + 1 : bin + 1;
    this.histogram[slot] = this.histogram[slot]! + 1;
  }

  /**
   * Counts a row of leverage 1 and keeps the row among the influential ones; true when its
   * leverage is 1 to rounding (1 − h ≤ 1e-12: the row alone determines a coefficient).
   */
  private leverageTaken(e: number, h: number, id: number): boolean {
    if (Number.isNaN(h)) return false;
    const oneMinusH = 1 - h;
    if (!(oneMinusH > 1e-12)) {
      this.fullLeverageRows++;
      return true;
    }
    if (this.options.influentialTop > 0) {
      const s = this.model.sigma;
      const cooks = (e * e * h) / (this.k * s * s * oneMinusH * oneMinusH);
      const r: InfluentialRow = { id, residual: e, leverage: h, cooksDistance: cooks };
      keepTop(this.topCooks, r, cooks, this.options.influentialTop, (a) => a.cooksDistance);
      keepTop(this.topLeverage, r, h, this.options.influentialTop, (a) => a.leverage);
    }
    return false;
  }

  /** A row held out of the fit: its prediction error, weighted (see holdout). */
  private holdOut(values: Float64Array, offset: number, w: number): void {
    let fitted = 0;
    for (let j = 0; j < this.k; j++) {
      const c = this.model.columns[j]!;
      fitted += this.model.estimates[j]! * (c < 0 ? 1 : values[offset + c]!);
    }
    const y = values[offset + this.layout.response]!;
    const e = y - fitted;
    const h = this.holdout;
    h.rows++;
    h.sumWeights += w;
    h.sse += w * e * e;
    h.sae += w * Math.abs(e);
    // Weighted mean and spread of y (West 1979 update), for R² out of sample.
    const d = y - h.meanY;
    h.meanY += (w / h.sumWeights) * d;
    h.sst += w * d * (y - h.meanY);
  }

  /** Adds ω·x̃x̃ᵀ to a packed meat at once (small k). */
  private addNow(kind: MeatKind, omega: number): void {
    const g = this.meats[kind];
    if (g === undefined) return;
    const { k, x } = this;
    let o = 0;
    for (let i = 0; i < k; i++) {
      const a = omega * x[i]!;
      for (let j = i; j < k; j++) g[o + j - i] = g[o + j - i]! + a * x[j]!;
      o += k - i;
    }
  }

  /**
   * The staged rows' leverages, as one block: hᵣ = ‖Lᵀx̃ᵣ‖² blocked over rows (each entry of L
   * read once per eight rows; the WebAssembly SIMD kernel, or numeric/leverage.ts); then their
   * influence, and each meat's rows scaled by √ω added by one rank-`staged` update (the Gram kernel).
   */
  private flush(): void {
    const m = this.staged;
    if (m === 0) return;
    const { k } = this;
    const raw = this.raw!;
    const h = this.stagedH;
    const l = this.breadFactor;
    const wasm = wasmFold();
    const ld = this.ld;
    if (l === null) h.fill(Number.NaN);
    else if (wasm === null) leveragesBlock(k, l, raw, h, m, ld, this.zs!);
    else wasm.leverages(k, l, raw, h, m, ld);
    const scale = this.stagedScale;
    for (let r = 0; r < m; r++) this.stagedFull[r] = this.leverageTaken(this.stagedE[r]!, h[r]!, this.stagedId[r]!) ? 1 : 0;
    for (const kind of ['hc0', 'hc2', 'hc3'] as const) {
      const g = this.meats[kind];
      if (g === undefined) continue;
      for (let r = 0; r < m; r++) {
        const ae = Math.abs(this.stagedE[r]!);
        const oneMinusH = 1 - h[r]!;
        scale[r] = kind === 'hc0' ? ae : this.stagedFull[r] === 1 ? 0 : kind === 'hc2' ? ae / Math.sqrt(oneMinusH) : ae / oneMinusH;
      }
      // The kernel reads its rows from its own memory; the view lasts until the next staging().
      const st = wasm === null ? this.scaled! : wasm.staging(k, k * ld);
      for (let j = 0; j < k; j++) {
        const o = j * ld;
        for (let r = 0; r < m; r++) st[o + r] = scale[r]! * raw[o + r]!;
      }
      if (wasm === null) gramUpdate(k, g, st, m, ld);
      else wasm.meatGram(k, g, st, m, ld);
    }
    this.staged = 0;
  }

  /** Takes the rows still staged (call before reading influence, leverage counts or meats). */
  finish(): void {
    this.flush();
  }

  /** A meat as a dense symmetric `k × k` matrix (staged rows added first), or undefined when not gathered. */
  meat(kind: MeatKind): Float64Array | undefined {
    this.flush();
    const g = this.meats[kind];
    if (g === undefined) return undefined;
    return symmetricFromUpper(this.k, unpackUpper(this.k, g));
  }

  private addCluster(cluster: number, e: number): void {
    let s = this.clusters.get(cluster);
    if (s === undefined) {
      if ((this.clusters.size + 1) * this.k > this.options.maxClusterValues) {
        throw new Error(
          `segment ${this.label}: residual_pass.cluster_by has more than ${Math.floor(this.options.maxClusterValues / this.k)} clusters ` +
            `for ${this.k} coefficients (the bound is ${this.options.maxClusterValues} cluster sums per segment); cluster by a coarser column`,
        );
      }
      s = new Float64Array(this.k);
      this.clusters.set(cluster, s);
    }
    for (let j = 0; j < this.k; j++) s[j] = s[j]! + e * this.x[j]!;
  }

  private addNeweyWest(e: number): void {
    const { k, u, v, lag } = this;
    for (let j = 0; j < k; j++) u[j] = e * this.x[j]!;
    if (this.nwMeat !== null) addOuterUpper(k, this.nwMeat, e * e, this.x);
    if (this.ring === null) return;
    // v = Σ_{l=1..L} (1 − l/(L+1))·u_{t−l} (Bartlett weights), from the ring of the last L scores.
    v.fill(0);
    const seen = Math.min(this.rows - 1, lag);
    for (let l = 1; l <= seen; l++) {
      const slot = (this.ringNext - l + lag) % lag;
      const wl = 1 - l / (lag + 1);
      const o = slot * k;
      for (let j = 0; j < k; j++) v[j] = v[j]! + wl * this.ring[o + j]!;
    }
    const a = this.nwCross!;
    for (let i = 0; i < k; i++) {
      const ui = u[i]!;
      if (ui === 0) continue;
      const row = i * k;
      for (let j = 0; j < k; j++) a[row + j] = a[row + j]! + ui * v[j]!;
    }
    this.ring.set(u, this.ringNext * k);
    this.ringNext = (this.ringNext + 1) % lag;
  }

  private addMoments(e: number): void {
    // One-pass central moments (Pébay 2008, "Formulas for robust, one-pass parallel computation
    // of covariances and arbitrary-order statistical moments", eq. 1.5 for n1 = n−1, n2 = 1).
    const n = this.rows;
    const delta = e - this.mean;
    const dn = delta / n;
    const dn2 = dn * dn;
    const t = delta * dn * (n - 1);
    this.mean += dn;
    this.m4 += t * dn2 * (n * n - 3 * n + 3) + 6 * dn2 * this.m2 - 4 * dn * this.m3;
    this.m3 += t * dn * (n - 2) - 3 * dn * this.m2;
    this.m2 += t;
    if (e < this.min) this.min = e;
    if (e > this.max) this.max = e;
  }
}

/** Keeps the `top` largest rows by `value` in `list`, largest first. */
function keepTop(list: InfluentialRow[], r: InfluentialRow, value: number, top: number, of: (a: InfluentialRow) => number): void {
  if (list.length === top && !(value > of(list[list.length - 1]!))) return;
  let i = list.length;
  while (i > 0 && of(list[i - 1]!) < value) i--;
  list.splice(i, 0, r);
  if (list.length > top) list.pop();
}
