import type { householderFoldDD } from './householder-fold-dd.js';
import type { addResidualSums, ResidualLayout } from './residual-sums.js';

/**
 * The WebAssembly (128-bit SIMD) compensated-arithmetic kernels, instantiated from their
 * compiled bytes (src/numeric/wasm/compensated.as.ts). Pure: the bytes come from the caller
 * (see fit/wasm-kernel.ts, which finds the file). Arguments are copied into the kernel's
 * own linear memory per call and the results copied back.
 */
export class WasmCompensated {
  private readonly memory: WebAssembly.Memory;
  private readonly runResidualSums: (
    rows: number,
    count: number,
    width: number,
    p: number,
    icpt: number,
    weighted: number,
    b: number,
    bh: number,
    bl: number,
    centre: number,
    sums: number,
  ) => void;

  private readonly runFoldDD: (n: number, rh: number, rl: number, bh: number, bl: number, m: number, ld: number) => void;

  constructor(bytes: Uint8Array) {
    this.memory = new WebAssembly.Memory({ initial: 16 });
    const module = new WebAssembly.Module(bytes);
    const instance = new WebAssembly.Instance(module, { env: { memory: this.memory, abort: () => undefined } });
    this.runResidualSums = instance.exports['residualSums'] as WasmCompensated['runResidualSums'];
    this.runFoldDD = instance.exports['foldDD'] as WasmCompensated['runFoldDD'];
  }

  /**
   * {@link addResidualSums} of numeric/residual-sums.ts for one double per value (no pairs):
   * adds the residual sums of rows `from … to-1` of `v` to `sums`. Counting rows is the caller's.
   */
  residualSums(
    layout: ResidualLayout,
    v: Float64Array,
    width: number,
    from: number,
    to: number,
    b: Float64Array,
    bh: Float64Array,
    bl: Float64Array,
    centre: number,
    sums: Float64Array,
  ): void {
    if (layout.pairs) throw new RangeError('the WebAssembly residual sums take one double per value');
    const q = b.length;
    const rowsAt = 3 * q + sums.length;
    const length = (to - from) * width;
    this.ensure((rowsAt + length) * 8);
    const heap = new Float64Array(this.memory.buffer, 0, rowsAt + length);
    heap.set(b, 0);
    heap.set(bh, q);
    heap.set(bl, 2 * q);
    heap.set(sums, 3 * q);
    heap.set(v.subarray(from * width, to * width), rowsAt);
    this.runResidualSums(rowsAt * 8, to - from, width, layout.terms, layout.intercept ? 1 : 0, layout.weighted ? 1 : 0, 0, q * 8, 2 * q * 8, centre, 3 * q * 8);
    sums.set(heap.subarray(3 * q, 3 * q + sums.length));
  }

  /**
   * {@link householderFoldDD} of numeric/householder-fold-dd.ts: folds `m` rows staged
   * column-major (leading dimension `ld`, high parts `bh`, low parts `bl`) into the packed
   * double-double factor `rh` + `rl` of order `n`. The block is not modified.
   */
  foldDD(n: number, rh: Float64Array, rl: Float64Array, bh: Float64Array, bl: Float64Array, m: number, ld: number): void {
    const len = rh.length;
    const block = n * ld;
    this.ensure((2 * len + 2 * block) * 8);
    const heap = new Float64Array(this.memory.buffer, 0, 2 * len + 2 * block);
    heap.set(rh, 0);
    heap.set(rl, len);
    heap.set(bh.subarray(0, block), 2 * len);
    heap.set(bl.subarray(0, block), 2 * len + block);
    this.runFoldDD(n, 0, len * 8, 2 * len * 8, (2 * len + block) * 8, m, ld);
    rh.set(heap.subarray(0, len));
    rl.set(heap.subarray(len, 2 * len));
  }

  private ensure(bytes: number): void {
    const have = this.memory.buffer.byteLength;
    if (have < bytes) this.memory.grow(Math.ceil((bytes - have) / 65536));
  }
}
