/** Doubles per slab: 64 kB, a few hundred small factors. */
const SLAB_DOUBLES = 8192;

/**
 * Small Float64Arrays carved out of shared 64 kB buffers. A typed array of its own costs a few
 * hundred bytes beyond its values (its buffer, the buffer's backing store and bookkeeping); a
 * hundred thousand segments' factors would spend more on that than on the factors. The arrays
 * live as long as their slab: use one for arrays that all live about as long (the segments of
 * one read). Never transfer such an array's `buffer`: it is shared (copy with `slice()`).
 *
 * @example
 * const slab = new Float64Slab();
 * const r = slab.take(15); // zeroed, r.length === 15
 */
export class Float64Slab {
  private slab = new Float64Array(0);
  private used = 0;

  /** A zeroed array of `n` doubles (one of its own when `n` is large). */
  take(n: number): Float64Array {
    if (n > SLAB_DOUBLES / 8) return new Float64Array(n);
    if (this.used + n > this.slab.length) {
      this.slab = new Float64Array(SLAB_DOUBLES);
      this.used = 0;
    }
    const out = this.slab.subarray(this.used, this.used + n);
    this.used += n;
    return out;
  }
}
