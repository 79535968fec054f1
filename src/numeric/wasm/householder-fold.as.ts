// AssemblyScript source of the WebAssembly fold kernel (compiled by `npm run build` with
// 128-bit SIMD into dist/kernels/householder-fold.wasm). Same algorithm and memory layout
// as ../householder-fold.ts, which stays the reference and the fallback:
//   r — packed upper-triangular R of order n (row i holds (i,i)…(i,n−1)), f64
//   b — m rows to fold, column-major with leading dimension ld, f64 (overwritten)
// Pointers are byte offsets into the imported memory.

@inline function rowStart(n: i32, i: i32): i32 {
  return i * n - ((i * (i - 1)) >> 1);
}

export function fold(n: i32, r: usize, b: usize, m: i32, ld: i32): void {
  const m2 = m & ~1;
  for (let j = 0; j < n; j++) {
    const cj = b + (<usize>(j * ld) << 3);
    // Overflow-safe 2-norm of the block column (scaled sum of squares, as LAPACK's dnrm2).
    let scale: f64 = 0;
    let ssq: f64 = 1;
    for (let i = 0; i < m; i++) {
      const v = load<f64>(cj + (<usize>i << 3));
      if (v != 0) {
        const a = abs(v);
        if (scale < a) {
          const q = scale / a;
          ssq = 1 + ssq * q * q;
          scale = a;
        } else {
          const q = a / scale;
          ssq += q * q;
        }
      }
    }
    // A column that is already zero needs no reflection (the identity is exact).
    if (scale == 0) continue;
    const sigma = scale * Math.sqrt(ssq);
    const rjp = r + (<usize>rowStart(n, j) << 3);
    const alpha = load<f64>(rjp);
    const norm = Math.hypot(alpha, sigma);
    // Sign opposite to alpha so alpha − beta never cancels.
    const beta = alpha >= 0 ? -norm : norm;
    const tau = (beta - alpha) / beta;
    const inv = 1 / (alpha - beta);
    for (let i = 0; i < m; i++) {
      const p = cj + (<usize>i << 3);
      store<f64>(p, load<f64>(p) * inv);
    }
    store<f64>(rjp, beta);
    for (let k = j + 1; k < n; k++) {
      const ck = b + (<usize>(k * ld) << 3);
      const rk = rjp + (<usize>(k - j) << 3);
      // Two rows per SIMD lane pair.
      let acc = f64x2.splat(0);
      for (let i = 0; i < m2; i += 2) {
        acc = f64x2.add(acc, f64x2.mul(v128.load(cj + (<usize>i << 3)), v128.load(ck + (<usize>i << 3))));
      }
      let s = load<f64>(rk) + f64x2.extract_lane(acc, 0) + f64x2.extract_lane(acc, 1);
      for (let i = m2; i < m; i++) s += load<f64>(cj + (<usize>i << 3)) * load<f64>(ck + (<usize>i << 3));
      s *= tau;
      store<f64>(rk, load<f64>(rk) - s);
      const sv = f64x2.splat(s);
      for (let i = 0; i < m2; i += 2) {
        const pk = ck + (<usize>i << 3);
        v128.store(pk, f64x2.sub(v128.load(pk), f64x2.mul(sv, v128.load(cj + (<usize>i << 3)))));
      }
      for (let i = m2; i < m; i++) {
        const pk = ck + (<usize>i << 3);
        store<f64>(pk, load<f64>(pk) - s * load<f64>(cj + (<usize>i << 3)));
      }
    }
  }
}

// Adds BᵀB to the packed upper-triangular Gram matrix g of order n (the normal-equations
// counterpart of fold; same layout as ../gram-update.ts).
export function gram(n: i32, g: usize, b: usize, m: i32, ld: i32): void {
  const m2 = m & ~1;
  for (let i = 0; i < n; i++) {
    const ci = b + (<usize>(i * ld) << 3);
    const gi = g + (<usize>rowStart(n, i) << 3);
    for (let j = i; j < n; j++) {
      const cj = b + (<usize>(j * ld) << 3);
      let acc = f64x2.splat(0);
      for (let r = 0; r < m2; r += 2) {
        acc = f64x2.add(acc, f64x2.mul(v128.load(ci + (<usize>r << 3)), v128.load(cj + (<usize>r << 3))));
      }
      let s = f64x2.extract_lane(acc, 0) + f64x2.extract_lane(acc, 1);
      for (let r = m2; r < m; r++) s += load<f64>(ci + (<usize>r << 3)) * load<f64>(cj + (<usize>r << 3));
      const p = gi + (<usize>(j - i) << 3);
      store<f64>(p, load<f64>(p) + s);
    }
  }
}
