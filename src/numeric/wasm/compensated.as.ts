// AssemblyScript source of the WebAssembly compensated-arithmetic kernels (compiled by
// `npm run build` with 128-bit SIMD into dist/kernels/compensated.wasm). Same algorithms and
// layouts as their TypeScript references, which stay the fallback:
//   residualSums — ../residual-sums.ts (addResidualSums), rows of one double per value.
// Pointers are byte offsets into the imported memory.

const SPLITTER: f64 = 134217729.0; // 2^27 + 1, Dekker's splitting constant

// Adds the residual sums of `count` rows (row-major, `width` doubles a row: p terms, y, and
// the weight when `weighted`) against coefficients b (intercept first when icpt = 1), split
// into Dekker halves bh + bl, to `sums` (layout of residual-sums.ts: g's sums, g's error
// sums, then (sum, error) pairs of Σ w r², Σ w (y − c) and Σ w (y − c)²). Rows of weight 0
// are passed over (the caller counts rows). The residual is formed by Dot2 in two lanes
// (even and odd terms) joined at the end, kept as a pair; each product w·r·x_j is exact
// (TwoProduct) before Sum2 adds it to g.
export function residualSums(
  rows: usize,
  count: i32,
  width: i32,
  p: i32,
  icpt: i32,
  weighted: i32,
  b: usize,
  bh: usize,
  bl: usize,
  centre: f64,
  sums: usize,
): void {
  const q = p + icpt;
  const p2 = p & ~1;
  const gs = sums + (<usize>icpt << 3);
  const ge = sums + (<usize>(q + icpt) << 3);
  const at = sums + (<usize>(2 * q) << 3);
  const tb = b + (<usize>icpt << 3);
  const tbh = bh + (<usize>icpt << 3);
  const tbl = bl + (<usize>icpt << 3);
  const split = f64x2.splat(SPLITTER);
  let rssS = load<f64>(at);
  let rssE = load<f64>(at + 8);
  let syS = load<f64>(at + 16);
  let syE = load<f64>(at + 24);
  let syyS = load<f64>(at + 32);
  let syyE = load<f64>(at + 40);
  const b0 = icpt == 1 ? load<f64>(b) : 0;
  for (let i = 0; i < count; i++) {
    const base = rows + (<usize>(i * width) << 3);
    const w = weighted != 0 ? load<f64>(base + (<usize>(p + 1) << 3)) : 1.0;
    if (w == 0) continue;
    // Dot2 of x·b in two lanes: S + C = Σ b_j x_j over the lane's terms, negated below.
    let sv = f64x2.splat(0);
    let cv = f64x2.splat(0);
    for (let j = 0; j < p2; j += 2) {
      const o = <usize>j << 3;
      const x = v128.load(base + o);
      const bj = v128.load(tb + o);
      const sx = f64x2.mul(split, x);
      const xh = f64x2.sub(sx, f64x2.sub(sx, x));
      const xl = f64x2.sub(x, xh);
      const ph = f64x2.mul(x, bj);
      const bhj = v128.load(tbh + o);
      const blj = v128.load(tbl + o);
      const pe = f64x2.add(
        f64x2.add(f64x2.add(f64x2.sub(f64x2.mul(xh, bhj), ph), f64x2.mul(xh, blj)), f64x2.mul(xl, bhj)),
        f64x2.mul(xl, blj),
      );
      const t = f64x2.add(sv, ph);
      const z = f64x2.sub(t, sv);
      cv = f64x2.add(cv, f64x2.add(f64x2.add(f64x2.sub(sv, f64x2.sub(t, z)), f64x2.sub(ph, z)), pe));
      sv = t;
    }
    let s = load<f64>(base + (<usize>p << 3));
    let c: f64 = 0;
    // s + c −= b₀, then the two lanes, then an odd last term: TwoSum each time.
    let a = -b0;
    let t = s + a;
    let z = t - s;
    c += s - (t - z) + (a - z);
    s = t;
    for (let lane = 0; lane < 2; lane++) {
      a = -(lane == 0 ? f64x2.extract_lane(sv, 0) : f64x2.extract_lane(sv, 1));
      c -= lane == 0 ? f64x2.extract_lane(cv, 0) : f64x2.extract_lane(cv, 1);
      t = s + a;
      z = t - s;
      c += s - (t - z) + (a - z);
      s = t;
    }
    if (p2 < p) {
      const x = load<f64>(base + (<usize>p2 << 3));
      const bj = load<f64>(tb + (<usize>p2 << 3));
      const sx = SPLITTER * x;
      const xh = sx - (sx - x);
      const xl = x - xh;
      const ph = x * bj;
      const bhj = load<f64>(tbh + (<usize>p2 << 3));
      const blj = load<f64>(tbl + (<usize>p2 << 3));
      const pe = xh * bhj - ph + xh * blj + xl * bhj + xl * blj;
      t = s - ph;
      z = t - s;
      c += s - (t - z) + (-ph - z) - pe;
      s = t;
    }
    // The residual as a pair rh + rl, then w·r as a pair wr + wrl.
    const rh = s + c;
    const rz = rh - s;
    const rl = s - (rh - rz) + (c - rz);
    let wr = rh;
    let wrl = rl;
    if (weighted != 0) {
      wr = w * rh;
      const sw0 = SPLITTER * w;
      const w0h = sw0 - (sw0 - w);
      const w0l = w - w0h;
      const sr = SPLITTER * rh;
      const rhh = sr - (sr - rh);
      const rhl = rh - rhh;
      wrl = w0h * rhh - wr + w0h * rhl + w0l * rhh + w0l * rhl + w * rl;
    }
    const sw = SPLITTER * wr;
    const wh = sw - (sw - wr);
    const wl = wr - wh;
    if (icpt == 1) {
      const g = load<f64>(sums);
      t = g + wr;
      z = t - g;
      store<f64>(sums + (<usize>q << 3), load<f64>(sums + (<usize>q << 3)) + (g - (t - z) + (wr - z) + wrl));
      store<f64>(sums, t);
    }
    const wrv = f64x2.splat(wr);
    const whv = f64x2.splat(wh);
    const wlv = f64x2.splat(wl);
    const wrlv = f64x2.splat(wrl);
    for (let j = 0; j < p2; j += 2) {
      const o = <usize>j << 3;
      const x = v128.load(base + o);
      const sx = f64x2.mul(split, x);
      const xh = f64x2.sub(sx, f64x2.sub(sx, x));
      const xl = f64x2.sub(x, xh);
      const ph = f64x2.mul(x, wrv);
      const pe = f64x2.add(
        f64x2.add(
          f64x2.add(f64x2.add(f64x2.sub(f64x2.mul(xh, whv), ph), f64x2.mul(xh, wlv)), f64x2.mul(xl, whv)),
          f64x2.mul(xl, wlv),
        ),
        f64x2.mul(x, wrlv),
      );
      const g = v128.load(gs + o);
      const tv = f64x2.add(g, ph);
      const zv = f64x2.sub(tv, g);
      const e = f64x2.add(f64x2.add(f64x2.sub(g, f64x2.sub(tv, zv)), f64x2.sub(ph, zv)), pe);
      v128.store(ge + o, f64x2.add(v128.load(ge + o), e));
      v128.store(gs + o, tv);
    }
    if (p2 < p) {
      const o = <usize>p2 << 3;
      const x = load<f64>(base + o);
      const sx = SPLITTER * x;
      const xh = sx - (sx - x);
      const xl = x - xh;
      const ph = x * wr;
      const pe = xh * wh - ph + xh * wl + xl * wh + xl * wl + x * wrl;
      const g = load<f64>(gs + o);
      t = g + ph;
      z = t - g;
      store<f64>(ge + o, load<f64>(ge + o) + (g - (t - z) + (ph - z) + pe));
      store<f64>(gs + o, t);
    }
    a = wr * rh;
    t = rssS + a;
    z = t - rssS;
    rssE += rssS - (t - z) + (a - z);
    rssS = t;
    const yd = load<f64>(base + (<usize>p << 3)) - centre;
    a = w * yd;
    t = syS + a;
    z = t - syS;
    syE += syS - (t - z) + (a - z);
    syS = t;
    a = w * yd * yd;
    t = syyS + a;
    z = t - syyS;
    syyE += syyS - (t - z) + (a - z);
    syyS = t;
  }
  store<f64>(at, rssS);
  store<f64>(at + 8, rssE);
  store<f64>(at + 16, syS);
  store<f64>(at + 24, syE);
  store<f64>(at + 32, syyS);
  store<f64>(at + 40, syyE);
}

// ---------------------------------------------------------------------------------------
// Double-double Householder fold: ../householder-fold-dd.ts (householderFoldDD), the same
// reflectors in the same order, the loops over the block's rows two at a time in SIMD lanes.
// r — packed R of order n, high parts at rh, low parts at rl; b — m rows column-major with
// leading dimension ld, high parts at bh, low parts at bl (overwritten).

@inline function rowStart(n: i32, i: i32): i32 {
  return i * n - ((i * (i - 1)) >> 1);
}

// Scalar double-double results pass through these (no allocation).
let H: f64 = 0;
let L: f64 = 0;

@inline function twoSumS(a: f64, b: f64): void {
  const s = a + b;
  const bb = s - a;
  H = s;
  L = a - (s - bb) + (b - bb);
}

@inline function ddAddS(ah: f64, al: f64, bh: f64, bl: f64): void {
  twoSumS(ah, bh);
  const s1 = H;
  const e1 = L;
  twoSumS(al, bl);
  const s2 = H;
  const e2 = L;
  let e = e1 + s2;
  const s = s1 + e;
  e = e - (s - s1);
  e += e2;
  const h = s + e;
  L = e - (h - s);
  H = h;
}

@inline function ddMulS(ah: f64, al: f64, bh: f64, bl: f64): void {
  const p = ah * bh;
  let t = SPLITTER * ah;
  const ahh = t - (t - ah);
  const ahl = ah - ahh;
  t = SPLITTER * bh;
  const bhh = t - (t - bh);
  const bhl = bh - bhh;
  const e = ahh * bhh - p + ahh * bhl + ahl * bhh + ahl * bhl + (ah * bl + al * bh);
  const h = p + e;
  L = e - (h - p);
  H = h;
}

@inline function ddDivS(ah: f64, al: f64, bh: f64, bl: f64): void {
  // Two correction steps, as ../double-double.ts (ddDiv).
  const q1 = ah / bh;
  ddMulS(bh, bl, q1, 0);
  ddAddS(ah, al, -H, -L);
  const rh = H;
  const rl = L;
  const q2 = rh / bh;
  ddMulS(bh, bl, q2, 0);
  ddAddS(rh, rl, -H, -L);
  const q3 = H / bh;
  twoSumS(q1, q2);
  ddAddS(H, L, q3, 0);
}

@inline function ddSqrtS(ah: f64, al: f64): void {
  if (!(ah > 0)) {
    H = ah == 0 ? 0 : NaN;
    L = 0;
    return;
  }
  const x = Math.sqrt(ah);
  const p = x * x;
  const t = SPLITTER * x;
  const xh = t - (t - x);
  const xl = x - xh;
  const pe = xh * xh - p + 2 * xh * xl + xl * xl;
  const diff = (ah - p - pe + al) / (2 * x);
  const h = x + diff;
  L = diff - (h - x);
  H = h;
}

// Vector double-double values: (VH, VL) lanes.
let VH: v128 = f64x2.splat(0);
let VL: v128 = f64x2.splat(0);

@inline function twoProdV(a: v128, b: v128): void {
  const split = f64x2.splat(SPLITTER);
  const p = f64x2.mul(a, b);
  let t = f64x2.mul(split, a);
  const ah = f64x2.sub(t, f64x2.sub(t, a));
  const al = f64x2.sub(a, ah);
  t = f64x2.mul(split, b);
  const bh = f64x2.sub(t, f64x2.sub(t, b));
  const bl = f64x2.sub(b, bh);
  VH = p;
  VL = f64x2.add(f64x2.add(f64x2.add(f64x2.sub(f64x2.mul(ah, bh), p), f64x2.mul(ah, bl)), f64x2.mul(al, bh)), f64x2.mul(al, bl));
}

// (VH, VL) = a · b for vector double-doubles a = (ah, al), b = (bh, bl).
@inline function ddMulV(ah: v128, al: v128, bh: v128, bl: v128): void {
  twoProdV(ah, bh);
  const p = VH;
  const e = f64x2.add(VL, f64x2.add(f64x2.mul(ah, bl), f64x2.mul(al, bh)));
  const h = f64x2.add(p, e);
  VL = f64x2.sub(e, f64x2.sub(h, p));
  VH = h;
}

// (VH, VL) = a + b.
@inline function ddAddV(ah: v128, al: v128, bh: v128, bl: v128): void {
  let s1 = f64x2.add(ah, bh);
  let bb = f64x2.sub(s1, ah);
  const e1 = f64x2.add(f64x2.sub(ah, f64x2.sub(s1, bb)), f64x2.sub(bh, bb));
  const s2 = f64x2.add(al, bl);
  bb = f64x2.sub(s2, al);
  const e2 = f64x2.add(f64x2.sub(al, f64x2.sub(s2, bb)), f64x2.sub(bl, bb));
  let e = f64x2.add(e1, s2);
  const s = f64x2.add(s1, e);
  e = f64x2.add(f64x2.sub(e, f64x2.sub(s, s1)), e2);
  const h = f64x2.add(s, e);
  VL = f64x2.sub(e, f64x2.sub(h, s));
  VH = h;
}

// Σ over the m rows of a_i·b_i in double-double (columns at ah/al and bh/bl), into (H, L).
@inline function dotDD(ah: usize, al: usize, bh: usize, bl: usize, m: i32): void {
  const m2 = m & ~1;
  let sh = f64x2.splat(0);
  let sl = f64x2.splat(0);
  for (let i = 0; i < m2; i += 2) {
    const o = <usize>i << 3;
    ddMulV(v128.load(ah + o), v128.load(al + o), v128.load(bh + o), v128.load(bl + o));
    ddAddV(sh, sl, VH, VL);
    sh = VH;
    sl = VL;
  }
  ddAddS(f64x2.extract_lane(sh, 0), f64x2.extract_lane(sl, 0), f64x2.extract_lane(sh, 1), f64x2.extract_lane(sl, 1));
  for (let i = m2; i < m; i++) {
    const o = <usize>i << 3;
    const th = H;
    const tl = L;
    ddMulS(load<f64>(ah + o), load<f64>(al + o), load<f64>(bh + o), load<f64>(bl + o));
    ddAddS(th, tl, H, L);
  }
}

export function foldDD(n: i32, rh: usize, rl: usize, bh: usize, bl: usize, m: i32, ld: i32): void {
  const m2 = m & ~1;
  for (let j = 0; j < n; j++) {
    const rj = <usize>rowStart(n, j) << 3;
    const cjh = bh + (<usize>(j * ld) << 3);
    const cjl = bl + (<usize>(j * ld) << 3);
    dotDD(cjh, cjl, cjh, cjl, m);
    const sh = H;
    const sl = L;
    // A column that is already zero needs no reflection (the identity is exact).
    if (sh == 0) continue;
    const alphaH = load<f64>(rh + rj);
    const alphaL = load<f64>(rl + rj);
    ddMulS(alphaH, alphaL, alphaH, alphaL);
    ddAddS(H, L, sh, sl);
    ddSqrtS(H, L);
    // Sign opposite to alpha so alpha − beta never cancels.
    let betaH = H;
    let betaL = L;
    if (alphaH >= 0) {
      betaH = -betaH;
      betaL = -betaL;
    }
    ddAddS(betaH, betaL, -alphaH, -alphaL);
    ddDivS(H, L, betaH, betaL);
    const tauH = H;
    const tauL = L;
    ddAddS(alphaH, alphaL, -betaH, -betaL);
    // v = b_j / (alpha − beta), as a product with the double-double reciprocal.
    ddDivS(1, 0, H, L);
    const invH = f64x2.splat(H);
    const invL = f64x2.splat(L);
    for (let i = 0; i < m2; i += 2) {
      const o = <usize>i << 3;
      ddMulV(v128.load(cjh + o), v128.load(cjl + o), invH, invL);
      v128.store(cjh + o, VH);
      v128.store(cjl + o, VL);
    }
    const iH = f64x2.extract_lane(invH, 0);
    const iL = f64x2.extract_lane(invL, 0);
    for (let i = m2; i < m; i++) {
      const o = <usize>i << 3;
      ddMulS(load<f64>(cjh + o), load<f64>(cjl + o), iH, iL);
      store<f64>(cjh + o, H);
      store<f64>(cjl + o, L);
    }
    store<f64>(rh + rj, betaH);
    store<f64>(rl + rj, betaL);
    for (let k = j + 1; k < n; k++) {
      const ckh = bh + (<usize>(k * ld) << 3);
      const ckl = bl + (<usize>(k * ld) << 3);
      const o = rj + (<usize>(k - j) << 3);
      dotDD(cjh, cjl, ckh, ckl, m);
      ddAddS(load<f64>(rh + o), load<f64>(rl + o), H, L);
      ddMulS(H, L, tauH, tauL);
      const svH = H;
      const svL = L;
      ddAddS(load<f64>(rh + o), load<f64>(rl + o), -svH, -svL);
      store<f64>(rh + o, H);
      store<f64>(rl + o, L);
      const nsH = f64x2.splat(-svH);
      const nsL = f64x2.splat(-svL);
      for (let i = 0; i < m2; i += 2) {
        const p = <usize>i << 3;
        ddMulV(nsH, nsL, v128.load(cjh + p), v128.load(cjl + p));
        ddAddV(v128.load(ckh + p), v128.load(ckl + p), VH, VL);
        v128.store(ckh + p, VH);
        v128.store(ckl + p, VL);
      }
      for (let i = m2; i < m; i++) {
        const p = <usize>i << 3;
        ddMulS(-svH, -svL, load<f64>(cjh + p), load<f64>(cjl + p));
        ddAddS(load<f64>(ckh + p), load<f64>(ckl + p), H, L);
        store<f64>(ckh + p, H);
        store<f64>(ckl + p, L);
      }
    }
  }
}
