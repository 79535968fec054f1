/** Small seeded generator (mulberry32) so property tests and fixtures are repeatable. */
export function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Standard normal draw by Box–Muller from a uniform generator. */
export function normal(u: () => number): number {
  return Math.sqrt(-2 * Math.log(1 - u())) * Math.cos(2 * Math.PI * u());
}

/**
 * Well-conditioned synthetic rows `[x_0 … x_{p-1}, y(, w)]` with y = 1 + Σ (j+1)·x_j + noise.
 */
export function syntheticRows(count: number, p: number, seed: number, weighted = false): number[][] {
  const u = rng(seed);
  const rows: number[][] = [];
  for (let i = 0; i < count; i++) {
    const x = Array.from({ length: p }, (_, j) => normal(u) * (j + 1) + j);
    let y = 1;
    x.forEach((v, j) => (y += (j + 1) * 0.5 * v));
    y += normal(u);
    const row = [...x, y];
    if (weighted) row.push(0.2 + 3 * u());
    rows.push(row);
  }
  return rows;
}
