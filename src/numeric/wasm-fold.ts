import { packedLength } from './packed.js';

/**
 * The WebAssembly (128-bit SIMD) Householder fold and Gram update, instantiated from their
 * compiled bytes.
 * Pure: the bytes come from the caller (see fit/wasm-kernel.ts, which finds the file).
 *
 * The kernel works in its own linear memory: the staging block lives there (views from
 * {@link WasmFold.staging}, so rows are written in place), and R is copied in and out per
 * call (n(n+1)/2 doubles, small beside the 2·m·n² flops of a fold).
 */
export class WasmFold {
  private readonly memory: WebAssembly.Memory;
  private readonly run: (n: number, r: number, b: number, m: number, ld: number) => void;
  private readonly runGram: (n: number, g: number, b: number, m: number, ld: number) => void;
  private readonly runLeverages: (k: number, l: number, x: number, h: number, m: number, ld: number) => void;
  private readonly runMeatGram: (n: number, g: number, b: number, m: number, ld: number) => void;
  /** The bread factor last copied into the kernel's memory, and where (see leverages). */
  private heldFactor: Float64Array | null = null;
  private heldFactorAt = -1;

  constructor(bytes: Uint8Array) {
    this.memory = new WebAssembly.Memory({ initial: 64 });
    const module = new WebAssembly.Module(bytes);
    const instance = new WebAssembly.Instance(module, { env: { memory: this.memory, abort: () => undefined } });
    this.run = instance.exports['fold'] as (n: number, r: number, b: number, m: number, ld: number) => void;
    this.runGram = instance.exports['gram'] as (n: number, g: number, b: number, m: number, ld: number) => void;
    this.runLeverages = instance.exports['leverages'] as WasmFold['runLeverages'];
    this.runMeatGram = instance.exports['meatGram'] as WasmFold['runMeatGram'];
  }

  /**
   * A staging area of at least `length` doubles for a factor of order `n`, in the
   * kernel's memory (after room for R). The view is valid until the next call of staging().
   */
  staging(n: number, length: number): Float64Array {
    const rDoubles = alignedR(n);
    this.ensure((rDoubles + length) * 8);
    this.touched(rDoubles + length);
    return new Float64Array(this.memory.buffer, rDoubles * 8, length);
  }

  /**
   * Folds `m` rows staged (column-major, leading dimension `ld`) in a view obtained from
   * {@link staging} into the packed factor `r` of order `n`.
   */
  fold(n: number, r: Float64Array, staged: Float64Array, m: number, ld: number): void {
    this.onFactor(this.run, n, r, staged, m, ld);
  }

  /**
   * Adds BᵀB of `m` staged rows to the packed Gram matrix `g` of order `n` (the XᵀX
   * option's kernel; see gram-update.ts for the reference).
   */
  gram(n: number, g: Float64Array, staged: Float64Array, m: number, ld: number): void {
    this.onFactor(this.runGram, n, g, staged, m, ld);
  }

  /**
   * {@link gram} blocked two rows of g by four columns (the residual pass's meats: more products
   * per load than gram's 2×2 blocks; the same sums, to rounding, as gram-update.ts).
   */
  meatGram(n: number, g: Float64Array, staged: Float64Array, m: number, ld: number): void {
    this.onFactor(this.runMeatGram, n, g, staged, m, ld);
  }

  /**
   * Leverages h_r = ‖Lᵀ·x_r‖² of `m` rows (column-major `k × ld` in `rows`, ld even) against
   * the lower-triangular row-major factor `lower` (see numeric/leverage.ts for the reference).
   * The rows and the leverages go through the kernel's memory after the staging area of
   * {@link staging}(k, k·ld), so a staging view of that size stays valid; the factor is copied
   * in only when it is another array than the last call's (a segment's factor never changes).
   */
  leverages(k: number, lower: Float64Array, rows: Float64Array, h: Float64Array, m: number, ld: number): void {
    const rowsAt = alignedR(k) + k * ld;
    const lAt = rowsAt + k * ld;
    const hAt = lAt + k * k;
    const grew = this.ensure((hAt + ld) * 8);
    const heap = new Float64Array(this.memory.buffer);
    heap.set(rows.subarray(0, k * ld), rowsAt);
    if (grew || this.heldFactor !== lower || this.heldFactorAt !== lAt) {
      heap.set(lower.subarray(0, k * k), lAt);
      this.heldFactor = lower;
      this.heldFactorAt = lAt;
    }
    this.runLeverages(k, lAt * 8, rowsAt * 8, hAt * 8, m, ld);
    h.set(heap.subarray(hAt, hAt + m));
  }

  /** Copies the packed matrix into the kernel's memory, runs the kernel on it, copies it back. */
  private onFactor(
    kernel: (n: number, r: number, b: number, m: number, ld: number) => void,
    n: number,
    packed: Float64Array,
    staged: Float64Array,
    m: number,
    ld: number,
  ): void {
    const len = packedLength(n);
    this.touched(len);
    const heap = new Float64Array(this.memory.buffer, 0, len);
    heap.set(packed.subarray(0, len));
    kernel(n, 0, staged.byteOffset, m, ld);
    packed.set(heap);
  }

  /** The memory up to `doubles` may be written: a held factor there is forgotten. */
  private touched(doubles: number): void {
    if (this.heldFactor !== null && doubles > this.heldFactorAt) this.heldFactor = null;
  }

  /** Grows the memory to at least `bytes`; true when it grew (contents are kept, views are not). */
  private ensure(bytes: number): boolean {
    const have = this.memory.buffer.byteLength;
    if (have >= bytes) return false;
    this.memory.grow(Math.ceil((bytes - have) / 65536));
    return true;
  }
}

/** Doubles reserved for R, rounded up to an even count so the staging block is 16-byte aligned. */
function alignedR(n: number): number {
  const len = packedLength(n);
  return len + (len % 2);
}
