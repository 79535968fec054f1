import { dd, ddAdd, ddDiv, ddMul, ddSqrt } from './double-double.js';
import { packedRowStart } from './packed.js';

const A = dd();
const S = dd();
const T = dd();
const TAU = dd();
const BETA = dd();

/**
 * {@link householderFold} in double-double arithmetic: the factor (`rh` + `rl`) and the
 * staged block (`bh` + `bl`, column-major, leading dimension `ld`) are double-double, so
 * the fold keeps about 32 digits. Used where the condition of the design is too close to
 * 1/ε for double precision to deliver certified digits; about 20–30 times the cost of the
 * double kernel.
 *
 * Unchecked kernel; magnitudes are assumed far from overflow (squares are formed directly).
 */
export function householderFoldDD(
  n: number,
  rh: Float64Array,
  rl: Float64Array,
  bh: Float64Array,
  bl: Float64Array,
  m: number,
  ld: number,
): void {
  for (let j = 0; j < n; j++) {
    const rj = packedRowStart(n, j);
    const cj = j * ld;
    // σ² = Σ b_ij²
    let sh = 0;
    let sl = 0;
    for (let i = 0; i < m; i++) {
      ddMul(bh[cj + i]!, bl[cj + i]!, bh[cj + i]!, bl[cj + i]!, T);
      ddAdd(sh, sl, T.hi, T.lo, S);
      sh = S.hi;
      sl = S.lo;
    }
    // A column that is already zero needs no reflection (the identity is exact).
    if (sh === 0) continue;
    const alphaH = rh[rj]!;
    const alphaL = rl[rj]!;
    ddMul(alphaH, alphaL, alphaH, alphaL, T);
    ddAdd(T.hi, T.lo, sh, sl, T);
    ddSqrt(T.hi, T.lo, BETA);
    // Sign opposite to alpha so alpha − beta never cancels.
    if (alphaH >= 0) {
      BETA.hi = -BETA.hi;
      BETA.lo = -BETA.lo;
    }
    const betaH = BETA.hi;
    const betaL = BETA.lo;
    ddAdd(betaH, betaL, -alphaH, -alphaL, T);
    ddDiv(T.hi, T.lo, betaH, betaL, TAU);
    const tauH = TAU.hi;
    const tauL = TAU.lo;
    ddAdd(alphaH, alphaL, -betaH, -betaL, A);
    const denH = A.hi;
    const denL = A.lo;
    for (let i = 0; i < m; i++) {
      ddDiv(bh[cj + i]!, bl[cj + i]!, denH, denL, T);
      bh[cj + i] = T.hi;
      bl[cj + i] = T.lo;
    }
    rh[rj] = betaH;
    rl[rj] = betaL;
    for (let k = j + 1; k < n; k++) {
      const ck = k * ld;
      const o = rj + (k - j);
      let ah = rh[o]!;
      let al = rl[o]!;
      for (let i = 0; i < m; i++) {
        ddMul(bh[cj + i]!, bl[cj + i]!, bh[ck + i]!, bl[ck + i]!, T);
        ddAdd(ah, al, T.hi, T.lo, S);
        ah = S.hi;
        al = S.lo;
      }
      ddMul(ah, al, tauH, tauL, S);
      const svH = S.hi;
      const svL = S.lo;
      ddAdd(rh[o]!, rl[o]!, -svH, -svL, T);
      rh[o] = T.hi;
      rl[o] = T.lo;
      for (let i = 0; i < m; i++) {
        ddMul(svH, svL, bh[cj + i]!, bl[cj + i]!, T);
        ddAdd(bh[ck + i]!, bl[ck + i]!, -T.hi, -T.lo, S);
        bh[ck + i] = S.hi;
        bl[ck + i] = S.lo;
      }
    }
  }
}
