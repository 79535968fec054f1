import type { FoldCounts, FoldLayout } from './accumulator-state.js';

const zeroShifts = new Map<number, Float64Array>();

/** A shared all-zero shift for `terms` term columns and the response. */
function zeroShift(terms: number): Float64Array {
  let z = zeroShifts.get(terms);
  if (z === undefined) zeroShifts.set(terms, (z = new Float64Array(terms + 1)));
  return z;
}

/**
 * Stages rows `from … to-1` of a checked block (one double per value) column-major in
 * `buf` — the intercept column √w, each term (x − c)·√w, the response (y − c)·√w — and
 * calls `flush(rows)` whenever `m` rows are staged and once for the rest. Rows of weight
 * exactly zero mean "not in this fit": counted, not staged. The common body of the
 * double-precision folds (Householder QR and the Gram update).
 */
export function stageRows(
  layout: FoldLayout,
  v: Float64Array,
  width: number,
  from: number,
  to: number,
  shift: Float64Array | undefined,
  counts: FoldCounts,
  buf: Float64Array,
  m: number,
  flush: (rows: number) => void,
): void {
  const n = layout.order;
  const p = layout.terms;
  const weighted = layout.weighted;
  const icpt = layout.intercept ? 1 : 0;
  const c = shift ?? zeroShift(p);
  const yCol = (n - 1) * m;
  let fill = 0;
  for (let row = from; row < to; row++) {
    const base = row * width;
    const w = weighted ? v[base + width - 1]! : 1;
    if (w === 0) {
      counts.zeroWeightRows++;
      continue;
    }
    const sw = weighted ? Math.sqrt(w) : 1;
    if (icpt === 1) buf[fill] = sw;
    for (let j = 0; j < p; j++) buf[(j + icpt) * m + fill] = (v[base + j]! - c[j]!) * sw;
    buf[yCol + fill] = (v[base + p]! - c[p]!) * sw;
    counts.rows++;
    counts.sumWeights += w;
    if (weighted) counts.sumLogWeights += Math.log(w);
    if (++fill === m) {
      flush(m);
      fill = 0;
    }
  }
  if (fill > 0) flush(fill);
}
