// Reference: NIST/ITL StRD linear least-squares regression, certified values
// (test/fixtures/nist-strd), fitted from PostgreSQL tables through `rowfold fit`.
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { lre } from '../support/lre.js';
import { NIST_SETS, loadNistSet } from '../support/nist.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Same floors as the engine test (test/reference/nist-strd-engine.test.ts).
const FLOOR: Record<string, number> = {
  Norris: 11.5, Pontius: 11.5, NoInt1: 14, NoInt2: 14, Filip: 7, Longley: 10,
  Wampler1: 8.5, Wampler2: 12.5, Wampler3: 8.5, Wampler4: 7, Wampler5: 5,
};

let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createTestDatabase('nist');
  const client = new pg.Client({ connectionString: tdb.url });
  await client.connect();
  try {
    for (const name of NIST_SETS) {
      const set = loadNistSet(name);
      // Store the raw columns (y and x or x1..x6); powers are computed by the server.
      const raw = set.terms.filter((t) => !t.includes('^'));
      const cols = [...raw, 'y'];
      await client.query(`create table ${pg.escapeIdentifier(name.toLowerCase())} (${cols.map((c) => `${c} float8`).join(', ')})`);
      const values = set.rows.map((r) => [...raw.map((t) => r[set.terms.indexOf(t)]!), r[r.length - 1]!]);
      await client.query(
        `insert into ${pg.escapeIdentifier(name.toLowerCase())} select * from unnest(${cols.map((_, j) => `$${j + 1}::float8[]`).join(', ')})`,
        cols.map((_, j) => values.map((v) => v[j])),
      );
    }
  } finally {
    await client.end();
  }
});

afterAll(() => tdb?.drop());

describe('NIST StRD through rowfold fit from PostgreSQL (certified values: NIST StRD)', () => {
  const table: string[] = [];
  for (const name of NIST_SETS) {
    it(`${name}: LRE ≥ ${FLOOR[name]} for every certified value`, async () => {
      const set = loadNistSet(name);
      const spec = writeSpec({
        name: `nist_${name.toLowerCase()}`,
        source: name.toLowerCase(),
        response: 'y',
        terms: set.terms.map((t) => (t.includes('^') ? { name: t, sql: t.replace(/\^(\d+)$/, ' ^ $1') } : t)),
        intercept: set.intercept,
      });
      const res = await runCli(['fit', spec, '--db', tdb.url, '--json']);
      expect(res.stderr).toBe('');
      expect(res.code).toBe(0);
      const doc = JSON.parse(res.stdout) as {
        models: { sigma: number; r2: number; f: number | string; coefficients: { estimate: number; std_error: number }[] }[];
      };
      const m = doc.models[0]!;
      const c = set.certified;
      const f = typeof m.f === 'string' ? Number(m.f) : m.f;
      const all = [
        ...c.parameters.map((p, i) => lre(m.coefficients[i]!.estimate, p.estimate)),
        ...c.parameters.map((p, i) => lre(m.coefficients[i]!.std_error, p.std_dev)),
        lre(m.sigma, c.residual_std_dev),
        lre(m.r2, c.r_squared),
        lre(f, c.anova.f_statistic),
      ];
      const min = Math.min(...all);
      table.push(`${name.padEnd(9)} min LRE ${min.toFixed(1).padStart(5)} (floor ${FLOOR[name]})`);
      if (name === 'Wampler5') console.log(`LRE by set (rowfold fit from PostgreSQL)\n${table.join('\n')}`);
      expect(min).toBeGreaterThanOrEqual(FLOOR[name]!);
    });
  }
});
