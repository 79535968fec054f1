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
