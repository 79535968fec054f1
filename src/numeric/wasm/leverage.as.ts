// AssemblyScript source of the residual pass's leverage kernel (compiled by `npm run build`
// with 128-bit SIMD into dist/kernels/householder-fold.wasm, beside the fold and Gram kernels,
// so that the rows it reads and the Gram update's rows share one memory). The TypeScript
// reference and fallback is ../leverage.ts (leveragesBlock):
//   l — lower-triangular L of order k, row-major k × k, f64 (L·Lᵀ = the bread)
//   x — m rows, column-major with leading dimension ld, f64 (ld even, ld ≥ m rounded up to even)
//   h — m leverages out, h_r = ‖Lᵀ·x_r‖² = Σ_i (Σ_{j≥i} L[j,i]·x_j,r)²
// z = Lᵀ·x is never stored: each pair of its entries is squared into h as soon as it is summed.
// Blocked over rows: eight rows (four SIMD lanes pairs) and two entries of z at a time, so each
// load of a row block of column j feeds two products and L (k²/2 doubles) is swept once per
// eight rows. Pointers are byte offsets into the imported memory.

@inline function at(base: usize, i: i32): usize {
  return base + (<usize>i << 3);
}

export function leverages(k: i32, l: usize, x: usize, h: usize, m: i32, ld: i32): void {
  const mEven = (m + 1) & ~1;
  const ldBytes = <usize>ld << 3;
  let r = 0;
  for (; r + 8 <= mEven; r += 8) {
    const xr = at(x, r);
    let h0 = f64x2.splat(0);
    let h1 = f64x2.splat(0);
    let h2 = f64x2.splat(0);
    let h3 = f64x2.splat(0);
    let i = 0;
    for (; i + 1 < k; i += 2) {
      // z_i and z_{i+1} of the eight rows; the diagonal term of z_i first (L[i, i+1] = 0).
      const a = f64x2.splat(load<f64>(at(l, i * k + i)));
      const xi = xr + <usize>i * ldBytes;
      let a0 = f64x2.mul(a, v128.load(xi));
      let a1 = f64x2.mul(a, v128.load(xi, 16));
      let a2 = f64x2.mul(a, v128.load(xi, 32));
      let a3 = f64x2.mul(a, v128.load(xi, 48));
      let b0 = f64x2.splat(0);
      let b1 = f64x2.splat(0);
      let b2 = f64x2.splat(0);
      let b3 = f64x2.splat(0);
      for (let j = i + 1; j < k; j++) {
        const lj = at(l, j * k + i);
        const ca = f64x2.splat(load<f64>(lj));
        const cb = f64x2.splat(load<f64>(lj, 8));
        const xj = xr + <usize>j * ldBytes;
        const x0 = v128.load(xj);
        const x1 = v128.load(xj, 16);
        const x2 = v128.load(xj, 32);
        const x3 = v128.load(xj, 48);
        a0 = f64x2.add(a0, f64x2.mul(ca, x0));
        a1 = f64x2.add(a1, f64x2.mul(ca, x1));
        a2 = f64x2.add(a2, f64x2.mul(ca, x2));
        a3 = f64x2.add(a3, f64x2.mul(ca, x3));
        b0 = f64x2.add(b0, f64x2.mul(cb, x0));
        b1 = f64x2.add(b1, f64x2.mul(cb, x1));
        b2 = f64x2.add(b2, f64x2.mul(cb, x2));
        b3 = f64x2.add(b3, f64x2.mul(cb, x3));
      }
      h0 = f64x2.add(h0, f64x2.add(f64x2.mul(a0, a0), f64x2.mul(b0, b0)));
      h1 = f64x2.add(h1, f64x2.add(f64x2.mul(a1, a1), f64x2.mul(b1, b1)));
      h2 = f64x2.add(h2, f64x2.add(f64x2.mul(a2, a2), f64x2.mul(b2, b2)));
      h3 = f64x2.add(h3, f64x2.add(f64x2.mul(a3, a3), f64x2.mul(b3, b3)));
    }
    if (i < k) {
      // The last entry of z alone: only its diagonal term.
      const a = f64x2.splat(load<f64>(at(l, i * k + i)));
      const xi = xr + <usize>i * ldBytes;
      const a0 = f64x2.mul(a, v128.load(xi));
      const a1 = f64x2.mul(a, v128.load(xi, 16));
      const a2 = f64x2.mul(a, v128.load(xi, 32));
      const a3 = f64x2.mul(a, v128.load(xi, 48));
      h0 = f64x2.add(h0, f64x2.mul(a0, a0));
      h1 = f64x2.add(h1, f64x2.mul(a1, a1));
      h2 = f64x2.add(h2, f64x2.mul(a2, a2));
      h3 = f64x2.add(h3, f64x2.mul(a3, a3));
    }
    const hr = at(h, r);
    v128.store(hr, h0);
    v128.store(hr, h1, 16);
    v128.store(hr, h2, 32);
    v128.store(hr, h3, 48);
  }
  // The remaining rows two at a time (the last of an odd m computes a row the caller ignores).
  for (; r < mEven; r += 2) {
    const xr = at(x, r);
    let hh = f64x2.splat(0);
    for (let i = 0; i < k; i++) {
      let z = f64x2.splat(0);
      for (let j = i; j < k; j++) {
        z = f64x2.add(z, f64x2.mul(f64x2.splat(load<f64>(at(l, j * k + i))), v128.load(xr + <usize>j * ldBytes)));
      }
      hh = f64x2.add(hh, f64x2.mul(z, z));
    }
    v128.store(at(h, r), hh);
  }
}
