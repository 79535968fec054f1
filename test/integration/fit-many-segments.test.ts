import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Accumulator } from '../../src/fit/accumulator.js';
import { solve } from '../../src/fit/solve.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 12: one model per segment at many segments. 12,000 segments of 8 rows, rows of the
// segments interleaved in the table (as a real table of meters or stores has them), published
// in batches of 5,000 models: every model and coefficient must land, equal to a fit of that
// segment's rows alone (an Accumulator fed only them, solved by itself) to 1e-10, and a failure
// while the last batch is written must leave no model of the run.

const SEGMENTS = 12_000;
const ROWS_PER_SEGMENT = 8;
const TERMS = ['x1', 'x2'];

let tdb: TestDatabase;
beforeAll(async () => {
  tdb = await createTestDatabase('many_segments');
  // Deterministic values (no random()): the one-by-one fits read the same rows.
  await tdb.query(`
    create table meters as
      select 'm' || lpad((g % ${SEGMENTS})::text, 5, '0') as meter,
             sin(g * 0.7)::float8 as x1, cos(g * 1.3)::float8 as x2,
             (2 + (g % ${SEGMENTS}) * 0.001 + 1.5 * sin(g * 0.7) - 0.5 * cos(g * 1.3) + 0.1 * sin(g * 5.1))::float8 as y
        from generate_series(1, ${SEGMENTS * ROWS_PER_SEGMENT}) g`);
}, 120_000);
afterAll(async () => {
  await tdb?.drop();
});

/** A fit of each segment by itself: its rows read on their own, folded into an accumulator of their own. */
async function oneByOne(): Promise<Map<string, ReturnType<typeof solve>>> {
  const { rows } = await tdb.query<{ meter: string; x1: number; x2: number; y: number }>(
    'select meter, x1, x2, y from meters order by meter',
  );
  const bySegment = new Map<string, number[]>();
  for (const r of rows) {
    let v = bySegment.get(r.meter);
    if (v === undefined) bySegment.set(r.meter, (v = []));
    v.push(r.x1, r.x2, r.y);
  }
  const out = new Map<string, ReturnType<typeof solve>>();
  for (const [meter, v] of bySegment) {
    const acc = new Accumulator({ terms: TERMS, response: 'y', intercept: true });
    acc.fold({ rows: v.length / 3, width: 3, values: Float64Array.from(v) });
    out.set(meter, solve(acc, { confidence: 0.95 }));
  }
  return out;
}

function close(a: number | null, b: number | null): boolean {
  if (a === null || b === null) return a === b;
  return Math.abs(a - b) <= 1e-10 * Math.max(1, Math.abs(b));
}

describe(`${SEGMENTS.toLocaleString('en-US')} segments through rowfold fit (issue 12)`, () => {
  it('publishes every model and coefficient, equal to fits of the segments one by one to 1e-10', async () => {
    const spec = writeSpec({ name: 'meters', source: 'meters', response: 'y', terms: TERMS, segment_by: 'meter' });
    const res = await runCli(['fit', spec, '--db', tdb.url]);
    expect(res.code, res.stderr).toBe(0);
    // Many models: the summary is the distribution and the first models, not a line each.
    expect(res.stdout).toContain(`estimates across ${SEGMENTS.toLocaleString('en-US')} models`);
    expect(res.stdout.split('\n').length).toBeLessThan(60);

    const run = await tdb.query<{ run_id: string; segment_count: number; status: string }>(
      `select run_id, segment_count, status from rowfold.runs where fit_name = 'meters' order by run_id desc limit 1`,
    );
    expect(run.rows[0]).toMatchObject({ segment_count: SEGMENTS, status: 'succeeded' });
    const runId = run.rows[0]!.run_id;
    const coefs = await tdb.query<{ meter: string; term_index: number; term: string; estimate: number; std_error: number; p: number; ci_low: number; ci_high: number }>(
      `select m.segment->>'meter' as meter, c.term_index, c.term, c.estimate, c.std_error, c.p, c.ci_low, c.ci_high
         from rowfold.models m join rowfold.coefficients c using (model_id)
        where m.run_id = $1 order by 1, 2`,
      [runId],
    );
    expect(coefs.rows).toHaveLength(SEGMENTS * 3);
    const expected = await oneByOne();
    expect(expected.size).toBe(SEGMENTS);
    let worst = 0;
    for (const c of coefs.rows) {
      const e = expected.get(c.meter)!.coefficients[c.term_index]!;
      expect(c.term).toBe(e.term);
      for (const [got, want] of [
        [c.estimate, e.estimate],
        [c.std_error, e.stdError],
        [c.p, e.p],
        [c.ci_low, e.ciLow],
        [c.ci_high, e.ciHigh],
      ] as const) {
        if (!close(got, want)) throw new Error(`segment ${c.meter} term ${c.term}: ${got} against ${want} one by one`);
        if (got !== null && want !== null) worst = Math.max(worst, Math.abs(got - want) / Math.max(1, Math.abs(want)));
      }
    }
    console.log(`${SEGMENTS} segments: largest difference from the one-by-one fits ${worst.toExponential(1)}`);
    // The latest_* views show the same models.
    const latest = await tdb.query<{ n: string }>(`select count(*) as n from rowfold.latest_coefficients where fit_name = 'meters'`);
    expect(Number(latest.rows[0]!.n)).toBe(SEGMENTS * 3);
  }, 300_000);

  it('a failure while the last batch of models is written leaves no model of the run, and the run failed', async () => {
    // The result schema exists (made by a small fit, should this test run alone).
    const maker = await runCli(['fit', writeSpec({ name: 'schema_maker', source: 'select x1, y from meters limit 10', response: 'y', terms: ['x1'] }), '--db', tdb.url]);
    expect(maker.code, maker.stderr).toBe(0);
    // The last segment's model is in the third batch of 5,000: the first two are written by then.
    await tdb.exec(`
      create function rowfold.fail_on_last() returns trigger language plpgsql as $$
      begin
        if new.segment_key = '["m${String(SEGMENTS - 1).padStart(5, '0')}"]' then
          raise exception 'injected failure while publishing';
        end if;
        return new;
      end $$;
      create trigger fail_on_last before insert on rowfold.models for each row execute function rowfold.fail_on_last();`);
    try {
      const spec = writeSpec({ name: 'meters_fail', source: 'meters', response: 'y', terms: TERMS, segment_by: 'meter' });
      const res = await runCli(['fit', spec, '--db', tdb.url]);
      expect(res.code).not.toBe(0);
      expect(res.stderr).toContain('injected failure while publishing');
      const run = await tdb.query<{ run_id: string; status: string }>(`select run_id, status from rowfold.runs where fit_name = 'meters_fail'`);
      expect(run.rows).toHaveLength(1);
      expect(run.rows[0]!.status).toBe('failed');
      const models = await tdb.query<{ n: string }>(`select count(*) as n from rowfold.models where run_id = $1`, [run.rows[0]!.run_id]);
      expect(models.rows[0]!.n).toBe('0');
      const coefs = await tdb.query<{ n: string }>(`select count(*) as n from rowfold.coefficients where run_id = $1`, [run.rows[0]!.run_id]);
      expect(coefs.rows[0]!.n).toBe('0');
    } finally {
      await tdb.exec('drop trigger fail_on_last on rowfold.models; drop function rowfold.fail_on_last();');
    }
  }, 300_000);

  it('an incremental refit of every segment (state written and read in batches) equals a full fit to 1e-10', async () => {
    await tdb.query(`create table meters_w as select meter, x1, x2, y, 1 as batch from meters`);
    const spec = writeSpec({ name: 'meters_refit', source: 'meters_w', response: 'y', terms: TERMS, segment_by: 'meter', watermark: 'batch' });
    const first = await runCli(['fit', spec, '--db', tdb.url]);
    expect(first.code, first.stderr).toBe(0);
    const stored = await tdb.query<{ n: string }>(`select count(*) as n from rowfold.fit_states where fit_name = 'meters_refit'`);
    expect(Number(stored.rows[0]!.n)).toBe(SEGMENTS);
    // New rows for about a quarter of the old ones (most segments get some), then a refit that reads only them.
    await tdb.query(`insert into meters_w select meter, x1 * 0.9, x2 + 0.1, y + 0.05, 2 from meters where (hashtext(meter || x1::text) & 7) < 2`);
    const second = await runCli(['fit', spec, '--db', tdb.url, '--json']);
    expect(second.code, second.stderr).toBe(0);
    const doc = JSON.parse(second.stdout) as { run: { refit: string; rows_read: number }; models: { segment: { meter: string }; coefficients: { estimate: number }[] }[] };
    expect(doc.run.refit).toBe('incremental');
    const added = await tdb.query<{ n: string }>('select count(*) as n from meters_w where batch = 2');
    expect(doc.run.rows_read).toBe(Number(added.rows[0]!.n));
    const full = await runCli(['fit', writeSpec({ name: 'meters_full', source: 'meters_w', response: 'y', terms: TERMS, segment_by: 'meter' }), '--db', tdb.url, '--json']);
    expect(full.code, full.stderr).toBe(0);
    const all = JSON.parse(full.stdout) as typeof doc;
    expect(doc.models).toHaveLength(SEGMENTS);
    expect(all.models).toHaveLength(SEGMENTS);
    doc.models.forEach((m, i) => {
      const o = all.models[i]!;
      expect(m.segment).toEqual(o.segment);
      m.coefficients.forEach((c, j) => {
        if (!close(c.estimate, o.coefficients[j]!.estimate)) throw new Error(`segment ${m.segment.meter}: ${c.estimate} against ${o.coefficients[j]!.estimate}`);
      });
    });
  }, 600_000);
});
