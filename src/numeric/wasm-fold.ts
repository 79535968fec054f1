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

  constructor(bytes: Uint8Array) {
    this.memory = new WebAssembly.Memory({ initial: 64 });
    const module = new WebAssembly.Module(bytes);
    const instance = new WebAssembly.Instance(module, { env: { memory: this.memory, abort: () => undefined } });
    this.run = instance.exports['fold'] as (n: number, r: number, b: number, m: number, ld: number) => void;
    this.runGram = instance.exports['gram'] as (n: number, g: number, b: number, m: number, ld: number) => void;
  }

  /**
   * A staging area of at least `length` doubles for a factor of order `n`, in the
   * kernel's memory (after room for R). The view is valid until the next call of staging().
   */
  staging(n: number, length: number): Float64Array {
    const rDoubles = alignedR(n);
    this.ensure((rDoubles + length) * 8);
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
    const heap = new Float64Array(this.memory.buffer, 0, len);
    heap.set(packed.subarray(0, len));
    kernel(n, 0, staged.byteOffset, m, ld);
    packed.set(heap);
  }

  private ensure(bytes: number): void {
    const have = this.memory.buffer.byteLength;
    if (have < bytes) this.memory.grow(Math.ceil((bytes - have) / 65536));
  }
}

/** Doubles reserved for R, rounded up to an even count so the staging block is 16-byte aligned. */
function alignedR(n: number): number {
  const len = packedLength(n);
  return len + (len % 2);
}
