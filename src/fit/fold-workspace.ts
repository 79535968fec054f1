/**
 * Scratch memory for folding: the column-major staging buffer the Householder kernel
 * works on. One workspace can serve any number of accumulators on one thread (they fold
 * one at a time), so many segments do not each carry a staging buffer.
 */
export class FoldWorkspace {
  private buffer = new Float64Array(0);

  /**
   * Rows per kernel call for a factor of order `n`: the staging block is kept near
   * 256 KiB so that it stays in a core's L2 cache while the n reflections sweep it
   * (measured in bench/kernel-probe: 3.0–3.7 GFLOP/s from 64 to 256 rows at p = 200).
   */
  static rowsFor(n: number): number {
    return Math.max(32, Math.min(512, Math.floor(32768 / n)));
  }

  /** A buffer of at least `length` doubles, grown when needed, reused otherwise. */
  take(length: number): Float64Array {
    if (this.buffer.length < length) this.buffer = new Float64Array(length);
    return this.buffer;
  }
}

/** The workspace used when an accumulator is not given one. */
export const sharedWorkspace = new FoldWorkspace();
