// AssemblyScript source of the WebAssembly fold kernel (compiled by `npm run build` with
// 128-bit SIMD into dist/kernels/householder-fold.wasm). Same algorithm and memory layout
// as ../householder-fold.ts, which stays the reference and the fallback:
//   r — packed upper-triangular R of order n (row i holds (i,i)…(i,n−1)), f64
//   b — m rows to fold, column-major with leading dimension ld, f64 (overwritten)
// Pointers are byte offsets into the imported memory.

@inline function rowStart(n: i32, i: i32): i32 {
  return i * n - ((i * (i - 1)) >> 1);
}

// Builds the reflector of column j (block part at cj, diagonal entry at rjp): scales the
// column into the Householder vector v (u = [1; v]), stores beta on the diagonal and
// returns tau; 0 when the column is already zero (the identity; v stays zero).
@inline function reflector(cj: usize, rjp: usize, m: i32): f64 {
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
  if (scale == 0) return 0;
  const sigma = scale * Math.sqrt(ssq);
  const alpha = load<f64>(rjp);
  const norm = Math.hypot(alpha, sigma);
  // Sign opposite to alpha so alpha − beta never cancels.
  const beta = alpha >= 0 ? -norm : norm;
  const inv = 1 / (alpha - beta);
  for (let i = 0; i < m; i++) {
    const p = cj + (<usize>i << 3);
    store<f64>(p, load<f64>(p) * inv);
  }
  store<f64>(rjp, beta);
  return (beta - alpha) / beta;
}

// Sum of a[i]·b[i] over m doubles.
@inline function dot(a: usize, b: usize, m: i32): f64 {
  const m2 = m & ~1;
  let acc = f64x2.splat(0);
  for (let i = 0; i < m2; i += 2) {
    acc = f64x2.add(acc, f64x2.mul(v128.load(a + (<usize>i << 3)), v128.load(b + (<usize>i << 3))));
  }
  let s = f64x2.extract_lane(acc, 0) + f64x2.extract_lane(acc, 1);
  for (let i = m2; i < m; i++) s += load<f64>(a + (<usize>i << 3)) * load<f64>(b + (<usize>i << 3));
  return s;
}

// The four dot products of columns a0, a1 with columns x0, x1 (m doubles each), in one
// pass that loads each column once: d00 = a0·x0, d01 = a0·x1, d10 = a1·x0, d11 = a1·x1.
// Shared by the fold's paired reflectors and the Gram update's 2×2 blocks.
let d00: f64 = 0;
let d01: f64 = 0;
let d10: f64 = 0;
let d11: f64 = 0;
@inline function dots2x2(a0: usize, a1: usize, x0: usize, x1: usize, m: i32): void {
  const m2 = m & ~1;
  let s00 = f64x2.splat(0);
  let s01 = f64x2.splat(0);
  let s10 = f64x2.splat(0);
  let s11 = f64x2.splat(0);
  for (let i = 0; i < m2; i += 2) {
    const o = <usize>i << 3;
    const u0 = v128.load(a0 + o);
    const u1 = v128.load(a1 + o);
    const y0 = v128.load(x0 + o);
    const y1 = v128.load(x1 + o);
    s00 = f64x2.add(s00, f64x2.mul(u0, y0));
    s01 = f64x2.add(s01, f64x2.mul(u0, y1));
    s10 = f64x2.add(s10, f64x2.mul(u1, y0));
    s11 = f64x2.add(s11, f64x2.mul(u1, y1));
  }
  let t00 = f64x2.extract_lane(s00, 0) + f64x2.extract_lane(s00, 1);
  let t01 = f64x2.extract_lane(s01, 0) + f64x2.extract_lane(s01, 1);
  let t10 = f64x2.extract_lane(s10, 0) + f64x2.extract_lane(s10, 1);
  let t11 = f64x2.extract_lane(s11, 0) + f64x2.extract_lane(s11, 1);
  for (let i = m2; i < m; i++) {
    const o = <usize>i << 3;
    const u0 = load<f64>(a0 + o);
    const u1 = load<f64>(a1 + o);
    const y0 = load<f64>(x0 + o);
    const y1 = load<f64>(x1 + o);
    t00 += u0 * y0;
    t01 += u0 * y1;
    t10 += u1 * y0;
    t11 += u1 * y1;
  }
  d00 = t00;
  d01 = t01;
  d10 = t10;
  d11 = t11;
}

// Applies one reflector (vector at cj, tau, R row entry at rk) to the column at ck.
@inline function applyOne(cj: usize, tau: f64, rk: usize, ck: usize, m: i32): void {
  const s = tau * (load<f64>(rk) + dot(cj, ck, m));
  store<f64>(rk, load<f64>(rk) - s);
  const m2 = m & ~1;
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

// Reflectors are taken two at a time (j, j+1): each sweep over a remaining column then
// reads it once for both dot products and once for both updates, which halves the
// traffic through the cache that bounds this loop. With u_a = [1; va] at R row j and
// u_b = [1; vb] at row j+1, H_b sees column k after H_a, whose product with u_b is
// r[j+1,k] + vb·c_k − s_a·(vb·va): one extra scalar per column.
export function fold(n: i32, r: usize, b: usize, m: i32, ld: i32): void {
  const m2 = m & ~1;
  let j = 0;
  for (; j + 1 < n; j += 2) {
    const ca = b + (<usize>(j * ld) << 3);
    const cb = ca + (<usize>ld << 3);
    const ra = r + (<usize>rowStart(n, j) << 3);
    const rb = r + (<usize>rowStart(n, j + 1) << 3);
    const tauA = reflector(ca, ra, m);
    applyOne(ca, tauA, ra + 8, cb, m);
    const tauB = reflector(cb, rb, m);
    const cab = dot(ca, cb, m);
    let k = j + 2;
    for (; k + 1 < n; k += 2) {
      const c0 = b + (<usize>(k * ld) << 3);
      const c1 = c0 + (<usize>ld << 3);
      dots2x2(ca, cb, c0, c1, m);
      const da0 = d00;
      const da1 = d01;
      const db0 = d10;
      const db1 = d11;
      const pa = ra + (<usize>(k - j) << 3);
      const pb = rb + (<usize>(k - j - 1) << 3);
      const sa0 = tauA * (load<f64>(pa) + da0);
      const sa1 = tauA * (load<f64>(pa + 8) + da1);
      store<f64>(pa, load<f64>(pa) - sa0);
      store<f64>(pa + 8, load<f64>(pa + 8) - sa1);
      const sb0 = tauB * (load<f64>(pb) + db0 - sa0 * cab);
      const sb1 = tauB * (load<f64>(pb + 8) + db1 - sa1 * cab);
      store<f64>(pb, load<f64>(pb) - sb0);
      store<f64>(pb + 8, load<f64>(pb + 8) - sb1);
      const sa0v = f64x2.splat(sa0);
      const sb0v = f64x2.splat(sb0);
      const sa1v = f64x2.splat(sa1);
      const sb1v = f64x2.splat(sb1);
      for (let i = 0; i < m2; i += 2) {
        const o = <usize>i << 3;
        const va = v128.load(ca + o);
        const vb = v128.load(cb + o);
        v128.store(c0 + o, f64x2.sub(v128.load(c0 + o), f64x2.add(f64x2.mul(sa0v, va), f64x2.mul(sb0v, vb))));
        v128.store(c1 + o, f64x2.sub(v128.load(c1 + o), f64x2.add(f64x2.mul(sa1v, va), f64x2.mul(sb1v, vb))));
      }
      for (let i = m2; i < m; i++) {
        const o = <usize>i << 3;
        const va = load<f64>(ca + o);
        const vb = load<f64>(cb + o);
        store<f64>(c0 + o, load<f64>(c0 + o) - (sa0 * va + sb0 * vb));
        store<f64>(c1 + o, load<f64>(c1 + o) - (sa1 * va + sb1 * vb));
      }
    }
    for (; k < n; k++) {
      const ck = b + (<usize>(k * ld) << 3);
      applyOne(ca, tauA, ra + (<usize>(k - j) << 3), ck, m);
      applyOne(cb, tauB, rb + (<usize>(k - j - 1) << 3), ck, m);
    }
  }
  if (j < n) {
    // The last column alone: its reflector has nothing to its right.
    reflector(b + (<usize>(j * ld) << 3), r + (<usize>rowStart(n, j) << 3), m);
  }
}

// Adds BᵀB to the packed upper-triangular Gram matrix g of order n (the normal-equations
// counterpart of fold; same layout as ../gram-update.ts). Entries are formed two rows by
// two columns at a time, so each load of a column feeds two products.
export function gram(n: i32, g: usize, b: usize, m: i32, ld: i32): void {
  let i = 0;
  for (; i + 1 < n; i += 2) {
    const c0 = b + (<usize>(i * ld) << 3);
    const c1 = c0 + (<usize>ld << 3);
    const g0 = g + (<usize>rowStart(n, i) << 3);
    const g1 = g + (<usize>rowStart(n, i + 1) << 3);
    // The 2×2 diagonal corner: (i,i), (i,i+1), (i+1,i+1).
    addTo(g0, dot(c0, c0, m));
    addTo(g0 + 8, dot(c0, c1, m));
    addTo(g1, dot(c1, c1, m));
    let j = i + 2;
    for (; j + 1 < n; j += 2) {
      const d0 = b + (<usize>(j * ld) << 3);
      const d1 = d0 + (<usize>ld << 3);
      dots2x2(c0, c1, d0, d1, m);
      addTo(g0 + (<usize>(j - i) << 3), d00);
      addTo(g0 + (<usize>(j + 1 - i) << 3), d01);
      addTo(g1 + (<usize>(j - i - 1) << 3), d10);
      addTo(g1 + (<usize>(j - i) << 3), d11);
    }
    if (j < n) {
      const d = b + (<usize>(j * ld) << 3);
      addTo(g0 + (<usize>(j - i) << 3), dot(c0, d, m));
      addTo(g1 + (<usize>(j - i - 1) << 3), dot(c1, d, m));
    }
  }
  if (i < n) {
    const c = b + (<usize>(i * ld) << 3);
    addTo(g + (<usize>rowStart(n, i) << 3), dot(c, c, m));
  }
}

@inline function addTo(p: usize, v: f64): void {
  store<f64>(p, load<f64>(p) + v);
}
