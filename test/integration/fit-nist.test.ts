// Reference: NIST/ITL StRD linear least-squares regression, certified values
// (test/fixtures/nist-strd), fitted from PostgreSQL tables through `rowfold fit`. The data
// are stored as numeric, exactly as NIST printed them, and the powers are computed by the
// server in numeric.
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { lre } from '../support/lre.js';
import { NIST_SETS, loadNistSet } from '../support/nist.js';
import type { NistSet } from '../support/nist.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// accuracy: fast keeps the floors of the engine test (test/reference/nist-strd-engine.test.ts).
const FAST_FLOOR: Record<string, number> = {
  Norris: 11.5, Pontius: 11.5, NoInt1: 14, NoInt2: 14, Filip: 7, Longley: 10,
  Wampler1: 8.5, Wampler2: 12.5, Wampler3: 8.5, Wampler4: 7, Wampler5: 5,
};

let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createTestDatabase('nist');
  for (const name of NIST_SETS) {
    const set = loadNistSet(name);
    const table = pg.escapeIdentifier(name.toLowerCase());
    await tdb.query(`create table ${table} (${set.columns.map((c) => `${c} numeric`).join(', ')})`);
    await tdb.query(
      `insert into ${table} select * from unnest(${set.columns.map((_, j) => `$${j + 1}::numeric[]`).join(', ')})`,
      set.columns.map((_, j) => set.textRows.map((r) => r[j])),
    );
  }
});

afterAll(() => tdb?.drop());

interface Model {
  sigma: number;
  r2: number;
  f: number | string;
  accuracy: string;
  estimated_digits: number;
  passes: number;
  coefficients: { estimate: number; std_error: number }[];
}

async function fitSet(set: NistSet, extra: string[]): Promise<{ model: Model; min: number }> {
  const spec = writeSpec({
    name: `nist_${set.name.toLowerCase()}`,
    source: set.name.toLowerCase(),
    response: 'y',
    // Powers as products: numeric multiplication is exact, while numeric ^ rounds to about
    // 20 significant digits, which Filip's conditioning (about 5e9 scaled) turns into 11.
    terms: set.terms.map((t) => {
      const power = /^(\w+)\^(\d+)$/.exec(t);
      return power ? { name: t, sql: Array.from({ length: Number(power[2]) }, () => power[1]).join(' * ') } : t;
    }),
    intercept: set.intercept,
  });
  const res = await runCli(['fit', spec, '--db', tdb.url, '--json', ...extra]);
  expect(res.stderr).toBe('');
  expect(res.code).toBe(0);
  const m = (JSON.parse(res.stdout) as { models: Model[] }).models[0]!;
  const c = set.certified;
  const f = typeof m.f === 'string' ? Number(m.f) : m.f;
  const all = [
    ...c.parameters.map((p, i) => lre(m.coefficients[i]!.estimate, p.estimate)),
    ...c.parameters.map((p, i) => lre(m.coefficients[i]!.std_error, p.std_dev)),
    lre(m.sigma, c.residual_std_dev),
    lre(m.r2, c.r_squared),
    lre(f, c.anova.f_statistic),
  ];
  return { model: m, min: Math.min(...all) };
}

describe('NIST StRD through rowfold fit from PostgreSQL (certified values: NIST StRD)', () => {
  const table: string[] = [];
  for (const name of NIST_SETS) {
    it(`${name}: default settings give LRE ≥ 13 on every certified value, as estimated (±2); fast keeps its floor`, async () => {
      const set = loadNistSet(name);
      const auto = await fitSet(set, []);
      const fast = await fitSet(set, ['--accuracy', 'fast']);
      table.push(
        `${name.padEnd(9)} default ${auto.min.toFixed(1).padStart(5)} (estimated ${auto.model.estimated_digits.toFixed(1).padStart(4)}, ` +
          `${auto.model.accuracy}, ${auto.model.passes} pass${auto.model.passes > 1 ? 'es' : ''})  ` +
          `fast ${fast.min.toFixed(1).padStart(5)} (estimated ${fast.model.estimated_digits.toFixed(1).padStart(4)})`,
      );
      if (name === 'Wampler5') console.log(`minimum LRE by set (rowfold fit from PostgreSQL)\n${table.join('\n')}`);
      expect(auto.min).toBeGreaterThanOrEqual(13);
      expect(Math.abs(auto.model.estimated_digits - auto.min)).toBeLessThanOrEqual(2);
      expect(fast.model.passes).toBe(1);
      expect(fast.min).toBeGreaterThanOrEqual(FAST_FLOOR[name]!);
    });
  }
});
