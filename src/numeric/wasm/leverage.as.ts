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

// The residual pass's meats: adds BᵀB of m rows (column-major, leading dimension ld) to the
// packed upper-triangular matrix g of order n, as the fold module's `gram` does (reference:
// ../gram-update.ts), but two rows of g by four columns at a time, so each load of a row block of
// a column feeds four (or two) products where `gram`'s 2×2 blocks feed two.
@inline function packedRow(n: i32, i: i32): i32 {
  return i * n - ((i * (i - 1)) >> 1);
}

@inline function dotOf(a: usize, b: usize, m: i32): f64 {
  const m2 = m & ~1;
  let acc = f64x2.splat(0);
  for (let r = 0; r < m2; r += 2) acc = f64x2.add(acc, f64x2.mul(v128.load(at(a, r)), v128.load(at(b, r))));
  let s = f64x2.extract_lane(acc, 0) + f64x2.extract_lane(acc, 1);
  for (let r = m2; r < m; r++) s += load<f64>(at(a, r)) * load<f64>(at(b, r));
  return s;
}

@inline function addAt(p: usize, v: f64): void {
  store<f64>(p, load<f64>(p) + v);
}

@inline function sum2(v: v128): f64 {
  return f64x2.extract_lane(v, 0) + f64x2.extract_lane(v, 1);
}

export function meatGram(n: i32, g: usize, b: usize, m: i32, ld: i32): void {
  const m2 = m & ~1;
  const ldBytes = <usize>ld << 3;
  let i = 0;
  for (; i + 1 < n; i += 2) {
    const c0 = b + <usize>i * ldBytes;
    const c1 = c0 + ldBytes;
    const g0 = at(g, packedRow(n, i));
    const g1 = at(g, packedRow(n, i + 1));
    addAt(g0, dotOf(c0, c0, m));
    addAt(g0 + 8, dotOf(c0, c1, m));
    addAt(g1, dotOf(c1, c1, m));
    let j = i + 2;
    for (; j + 3 < n; j += 4) {
      const d0 = b + <usize>j * ldBytes;
      const d1 = d0 + ldBytes;
      const d2 = d1 + ldBytes;
      const d3 = d2 + ldBytes;
      let s00 = f64x2.splat(0);
      let s01 = f64x2.splat(0);
      let s02 = f64x2.splat(0);
      let s03 = f64x2.splat(0);
      let s10 = f64x2.splat(0);
      let s11 = f64x2.splat(0);
      let s12 = f64x2.splat(0);
      let s13 = f64x2.splat(0);
      for (let r = 0; r < m2; r += 2) {
        const o = <usize>r << 3;
        const a0 = v128.load(c0 + o);
        const a1 = v128.load(c1 + o);
        const x0 = v128.load(d0 + o);
        const x1 = v128.load(d1 + o);
        const x2 = v128.load(d2 + o);
        const x3 = v128.load(d3 + o);
        s00 = f64x2.add(s00, f64x2.mul(a0, x0));
        s01 = f64x2.add(s01, f64x2.mul(a0, x1));
        s02 = f64x2.add(s02, f64x2.mul(a0, x2));
        s03 = f64x2.add(s03, f64x2.mul(a0, x3));
        s10 = f64x2.add(s10, f64x2.mul(a1, x0));
        s11 = f64x2.add(s11, f64x2.mul(a1, x1));
        s12 = f64x2.add(s12, f64x2.mul(a1, x2));
        s13 = f64x2.add(s13, f64x2.mul(a1, x3));
      }
      let e00 = sum2(s00);
      let e01 = sum2(s01);
      let e02 = sum2(s02);
      let e03 = sum2(s03);
      let e10 = sum2(s10);
      let e11 = sum2(s11);
      let e12 = sum2(s12);
      let e13 = sum2(s13);
      if (m2 < m) {
        const o = <usize>m2 << 3;
        const a0 = load<f64>(c0 + o);
        const a1 = load<f64>(c1 + o);
        const x0 = load<f64>(d0 + o);
        const x1 = load<f64>(d1 + o);
        const x2 = load<f64>(d2 + o);
        const x3 = load<f64>(d3 + o);
        e00 += a0 * x0;
        e01 += a0 * x1;
        e02 += a0 * x2;
        e03 += a0 * x3;
        e10 += a1 * x0;
        e11 += a1 * x1;
        e12 += a1 * x2;
        e13 += a1 * x3;
      }
      const p0 = g0 + (<usize>(j - i) << 3);
      const p1 = g1 + (<usize>(j - i - 1) << 3);
      addAt(p0, e00);
      addAt(p0 + 8, e01);
      addAt(p0 + 16, e02);
      addAt(p0 + 24, e03);
      addAt(p1, e10);
      addAt(p1 + 8, e11);
      addAt(p1 + 16, e12);
      addAt(p1 + 24, e13);
    }
    for (; j < n; j++) {
      const d = b + <usize>j * ldBytes;
      addAt(g0 + (<usize>(j - i) << 3), dotOf(c0, d, m));
      addAt(g1 + (<usize>(j - i - 1) << 3), dotOf(c1, d, m));
    }
  }
  if (i < n) {
    const c = b + <usize>i * ldBytes;
    addAt(at(g, packedRow(n, i)), dotOf(c, c, m));
  }
}
