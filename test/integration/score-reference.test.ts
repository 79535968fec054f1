// Reference: statsmodels 0.13.5 (WLS cov_params and get_prediction with unit weights), numpy,
// scipy fixtures made by scripts/make-scoring-fixtures.py (test/fixtures/reference/scoring-cases.json;
// the exact versions are in its "library" field): the stored covariance, and the predictions,
// standard errors of the mean and prediction intervals that `rowfold score` writes.
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { expectClose } from '../support/close.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

interface Score {
  id: number;
  reason?: string;
  prediction?: number;
  prediction_se?: number;
  interval_low?: number;
  interval_high?: number;
  actual?: number;
}
interface Table {
  columns: { name: string; sql_type: string }[];
  rows: unknown[][];
}
const fx = JSON.parse(readFileSync(new URL('../fixtures/reference/scoring-cases.json', import.meta.url), 'utf8')) as {
  library: string;
  readings: Table;
  tomorrow: Table;
  cases: {
    name: string;
    spec: Record<string, unknown>;
    level: number;
    models: { segment: Record<string, string> | null; terms: string[]; kept_terms: string[]; covariance: number[][] }[];
    scores: Score[];
  }[];
};
const SOURCE = `${fx.library} (scripts/make-scoring-fixtures.py)`;

let tdb: TestDatabase;
async function load(name: string, t: Table): Promise<void> {
  await tdb.query(`create table ${name} (${t.columns.map((c) => `${c.name} ${c.sql_type}`).join(', ')})`);
  await tdb.query(
    `insert into ${name} select * from unnest(${t.columns.map((c, j) => `$${j + 1}::${c.sql_type}[]`).join(', ')})`,
    t.columns.map((_, j) => t.rows.map((r) => r[j])),
  );
}
beforeAll(async () => {
  tdb = await createTestDatabase('score_ref');
  await load('readings', fx.readings);
  await load('tomorrow', fx.tomorrow);
});
afterAll(() => tdb?.drop());

const REL = 1e-10;

describe(`scoring against ${SOURCE}`, () => {
  for (const c of fx.cases) {
    describe(c.name, () => {
      const fit = `score_${c.name}`;
      beforeAll(async () => {
        const res = await runCli(['fit', writeSpec({ name: fit, source: 'readings', ...c.spec }), '--db', tdb.url, '--json']);
        expect(res.stderr).toBe('');
        expect(res.code).toBe(0);
      });

      it(`stores the covariance σ²(XᵀWX)⁻¹ of every model to 1e-10 relative (${SOURCE})`, async () => {
        const { rows } = await tdb.query<{ segment: string | null; term_a: string; term_b: string; value: number }>(
          `select segment::text, term_a, term_b, value from rowfold.latest_covariances where fit_name = $1`,
          [fit],
        );
        for (const m of c.models) {
          const key = (seg: unknown) => JSON.stringify(seg);
          const mine = rows.filter((r) => key(r.segment === null ? null : JSON.parse(r.segment)) === key(m.segment));
          expect(mine).toHaveLength(m.kept_terms.length ** 2);
          m.kept_terms.forEach((a, i) =>
            m.kept_terms.forEach((b, j) => {
              const got = mine.find((r) => r.term_a === a && r.term_b === b);
              expectClose(got?.value ?? null, m.covariance[i]![j]!, REL, `${c.name} ${JSON.stringify(m.segment)} cov(${a}, ${b}) (${SOURCE})`);
            }),
          );
        }
      });

      it(`writes predictions, SE of the mean and prediction intervals to 1e-10 relative, and counts the rows it cannot score (${SOURCE})`, async () => {
        const res = await runCli(['score', fit, '--source', 'tomorrow', '--into', `out_${c.name}`, '--keys', 'id', '--level', String(c.level), '--db', tdb.url, '--json']);
        expect(res.stderr).toBe('');
        expect(res.code).toBe(0);
        const doc = JSON.parse(res.stdout) as { rows_read: number; rows_scored: number; rows_skipped: Record<string, number>; actual: boolean };
        const reasons: Record<string, number> = {};
        for (const s of c.scores) if (s.reason !== undefined) reasons[s.reason] = (reasons[s.reason] ?? 0) + 1;
        expect(doc.rows_skipped).toEqual(reasons);
        expect(doc.rows_read).toBe(fx.tomorrow.rows.length);
        expect(doc.rows_scored).toBe(c.scores.filter((s) => s.reason === undefined).length);
        expect(doc.actual).toBe(true);
        const out = (await tdb.query<Score & { segment_key: string }>(`select * from out_${c.name} order by id`)).rows;
        const want = c.scores.filter((s) => s.reason === undefined);
        expect(out.map((r) => r.id)).toEqual(want.map((s) => s.id));
        want.forEach((s, i) => {
          const g = out[i]!;
          for (const k of ['prediction', 'prediction_se', 'interval_low', 'interval_high'] as const) {
            expectClose(g[k]!, s[k]!, REL, `${c.name} row ${s.id} ${k} (${SOURCE})`);
          }
        });
      });

      it('scores inside the database by a view that equals the table scoring to 1e-12', async () => {
        const res = await runCli(['score', fit, '--source', 'tomorrow', '--view', `view_${c.name}`, '--keys', 'id', '--level', String(c.level), '--db', tdb.url]);
        expect(res.stderr).toBe('');
        expect(res.code).toBe(0);
        const cols = 'id, segment_key, run_id::int, prediction, prediction_se, interval_low, interval_high';
        const table = (await tdb.query<Record<string, unknown>>(`select ${cols} from out_${c.name} order by id`)).rows;
        const view = (await tdb.query<Record<string, unknown>>(`select ${cols} from view_${c.name} order by id`)).rows;
        expect(view.map((r) => r['id'])).toEqual(table.map((r) => r['id']));
        view.forEach((v, i) => {
          const t = table[i]!;
          expect(v['segment_key']).toBe(t['segment_key']);
          expect(v['run_id']).toBe(t['run_id']);
          expectClose(v['prediction'] as number, t['prediction'] as number, 1e-12, `view prediction row ${String(v['id'])}`);
          for (const k of ['prediction_se', 'interval_low', 'interval_high']) {
            // Both NULL where a model has no inference (no residual degrees of freedom).
            if (t[k] === null) expect(v[k], `view ${k} row ${String(v['id'])}`).toBeNull();
            else expectClose(v[k] as number, t[k] as number, 1e-12, `view ${k} row ${String(v['id'])}`);
          }
        });
      });
    });
  }
});
