// Reference: numpy 2.4.6 / scipy 1.17.1 fixtures made by scripts/make-design-fixtures.py
// (test/fixtures/reference/design-cases.json): weights, categoricals with a chosen
// reference, interactions, segments — fitted from PostgreSQL through `rowfold fit`.
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { expectClose } from '../support/close.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import type { ReferenceCoefficient, ReferenceExpected } from '../support/reference-case.js';
import { runCli, writeSpec } from '../support/run-cli.js';

type Coef = ReferenceCoefficient;
type Expected = ReferenceExpected;
const fx = JSON.parse(readFileSync(new URL('../fixtures/reference/design-cases.json', import.meta.url), 'utf8')) as {
  library: string;
  table: { columns: { name: string; sql_type: string }[]; rows: unknown[][] };
  cases: { name: string; spec: Record<string, unknown>; models: { segment: Record<string, string> | null; expected: Expected }[] }[];
};

let tdb: TestDatabase;
beforeAll(async () => {
  tdb = await createTestDatabase('design');
  const cols = fx.table.columns;
  await tdb.query(`create table readings (${cols.map((c) => `${c.name} ${c.sql_type}`).join(', ')})`);
  await tdb.query(
    `insert into readings select * from unnest(${cols.map((c, j) => `$${j + 1}::${c.sql_type}[]`).join(', ')})`,
    cols.map((_, j) => fx.table.rows.map((r) => r[j])),
  );
});
afterAll(() => tdb?.drop());

const REL = 1e-9;

describe(`design columns against ${fx.library} (scripts/make-design-fixtures.py)`, () => {
  for (const c of fx.cases) {
    for (const read of ['copy', 'rows'] as const) {
      it(`${c.name} (${read}): every statistic to 1e-9 relative`, async () => {
        const spec = writeSpec({ name: `design_${c.name}`, source: 'readings', ...c.spec });
        const res = await runCli(['fit', spec, '--db', tdb.url, '--json', '--read', read]);
        expect(res.stderr).toBe('');
        expect(res.code).toBe(0);
        const doc = JSON.parse(res.stdout) as { models: (Record<string, unknown> & { segment: unknown; coefficients: Coef[] })[] };
        expect(doc.models).toHaveLength(c.models.length);
        c.models.forEach((want, i) => {
          const got = doc.models[i]!;
          expect(got.segment).toEqual(want.segment);
          const e = want.expected;
          expect(got['rows']).toBe(e.n);
          expect(got['rank']).toBe(e.rank);
          for (const k of ['sigma', 'r2', 'r2_adjusted', 'f', 'f_p', 'loglik', 'aic', 'bic'] as const) {
            expectClose(got[k] as number, e[k], REL, `${c.name} ${k}`);
          }
          expect(got.coefficients.map((x) => x.term)).toEqual(e.coefficients.map((x) => x.term));
          e.coefficients.forEach((x, j) => {
            const g = got.coefficients[j]!;
            for (const k of ['estimate', 'std_error', 't', 'p', 'ci_low', 'ci_high', 'vif'] as const) {
              expectClose(g[k], x[k], REL, `${c.name} ${x.term} ${k}`);
            }
          });
        });
      });
    }
  }
});
