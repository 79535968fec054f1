// Reference: exact least-squares solutions in rational arithmetic (Python's fractions
// module; scripts/make-refinement-fixtures.py), fitted here from PostgreSQL tables through
// `rowfold fit` with default settings: models with coefficients near zero beside large ones
// are refined in one more pass that reads only their segments, and reach LRE ≥ 13.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { FitSolution } from '../../src/fit/fit-solution.js';
import { restrictToSegments } from '../../src/plan/segment-filter.js';
import { escapeLiteral } from 'pg';
import { runFit } from '../../src/run/run-fit.js';
import { EXACT, exactLres, rowsOf } from '../support/exact-cases.js';
import type { ExactCase } from '../support/exact-cases.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;

const tableOf = (c: ExactCase) => `exact_${c.name.replaceAll('-', '_')}`;

async function load(table: string, c: ExactCase, segment?: (i: number) => string | null): Promise<void> {
  const cols = [...c.terms, 'y', ...(c.weighted ? ['w'] : [])];
  const seg = segment === undefined ? '' : 'seg text, ';
  await tdb.query(`create table if not exists ${table} (${seg}${cols.map((n) => `${n} float8`).join(', ')})`);
  const params: unknown[] = cols.map((_, j) => rowsOf(c).map((r) => r[j]));
  if (segment !== undefined) params.unshift(rowsOf(c).map((_, i) => segment(i)));
  const arrays = params.map((_, j) => `$${j + 1}::${segment !== undefined && j === 0 ? 'text' : 'float8'}[]`).join(', ');
  await tdb.query(`insert into ${table} select * from unnest(${arrays})`, params);
}

beforeAll(async () => {
  tdb = await createTestDatabase('refine');
  for (const c of EXACT.cases) await load(tableOf(c), c);
}, 120_000);
afterAll(() => tdb?.drop());

interface Model {
  segment: Record<string, string | null> | null;
  sigma: number;
  r2: number;
  f: number | string;
  accuracy: string;
  estimated_digits: number;
  passes: number;
  refinement_steps: number;
  coefficients: { estimate: number; std_error: number }[];
}

async function fitJson(spec: Record<string, unknown>, extra: string[] = []): Promise<Model[]> {
  const res = await runCli(['fit', writeSpec(spec), '--db', tdb.url, '--json', ...extra]);
  expect(res.stderr).toBe('');
  expect(res.code).toBe(0);
  return (JSON.parse(res.stdout) as { models: Model[] }).models;
}

function specOf(c: ExactCase, source = tableOf(c)): Record<string, unknown> {
  return { name: `refine_${c.name.replaceAll('-', '_')}`, source, response: 'y', terms: [...c.terms], intercept: c.intercept, ...(c.weighted ? { weight: 'w' } : {}) };
}

function lresOf(c: ExactCase, m: Model) {
  const asFit = {
    sigma: m.sigma,
    r2: m.r2,
    f: typeof m.f === 'string' ? Number(m.f) : m.f,
    coefficients: m.coefficients.map((k) => ({ estimate: k.estimate, stdError: k.std_error })),
  } as unknown as FitSolution;
  return exactLres(c, asFit);
}

describe(`rowfold fit refines near-zero coefficients (reference: exact solutions, ${EXACT.library})`, () => {
  for (const c of EXACT.cases) {
    // Small tables refine in a pass of their own; 100,000 rows in the first pass already.
    const passes = (c.generated?.rows ?? 0) >= 100_000 ? 1 : 2;
    it(`${c.name}: default settings refine to LRE ≥ 13 in ${passes} pass${passes > 1 ? 'es' : ''}, as estimated (±2); fast stays short`, async () => {
      const [auto] = await fitJson(specOf(c));
      const [fast] = await fitJson(specOf(c), ['--accuracy', 'fast']);
      const got = lresOf(c, auto!);
      expect(auto).toMatchObject({ accuracy: 'refined', passes });
      expect(auto!.refinement_steps).toBeGreaterThanOrEqual(1);
      expect(got.min).toBeGreaterThanOrEqual(13);
      expect(Math.abs(auto!.estimated_digits - got.min)).toBeLessThanOrEqual(2);
      expect(fast).toMatchObject({ accuracy: 'fast', passes: 1, refinement_steps: 0 });
      expect(lresOf(c, fast!).min).toBeLessThan(13);
    });
  }

  it('numeric source columns: the first pass reads them rounded, so the refinement takes a pass of its own that reads them exact', async () => {
    const c = EXACT.cases.find((x) => x.name === 'generated-100k')!;
    // The doubles' exact values as decimals (a float8 cast to numeric keeps only 15 digits).
    const cols = [...c.terms, 'y'];
    await tdb.query(`create table generated_numeric (${cols.map((n) => `${n} numeric`).join(', ')})`);
    const rows = rowsOf(c);
    await tdb.query(
      `insert into generated_numeric select * from unnest(${cols.map((_, j) => `$${j + 1}::numeric[]`).join(', ')})`,
      cols.map((_, j) => rows.map((r) => exactDecimal(r[j]!))),
    );
    const [model] = await fitJson({ ...specOf(c, 'generated_numeric'), name: 'refine_numeric' });
    expect(model).toMatchObject({ accuracy: 'refined', passes: 2, refinement_steps: 1 });
    expect(lresOf(c, model!).min).toBeGreaterThanOrEqual(13);
  });

  it('an incremental refit refines from the previous certified solution: one pass over the new rows only, LRE ≥ 13 over all rows', async () => {
    // The 100,000 generated rows in two parts: 90,000 fitted first, 10,000 arriving later.
    const c = EXACT.cases.find((x) => x.name === 'generated-100k')!;
    const rows = rowsOf(c);
    const cols = [...c.terms, 'y'];
    await tdb.query(`create table arriving (n int, ${cols.map((x) => `${x} float8`).join(', ')})`);
    const insert = (from: number, to: number) =>
      tdb.query(
        `insert into arriving select * from unnest($1::int[], ${cols.map((_, j) => `$${j + 2}::float8[]`).join(', ')})`,
        [Array.from({ length: to - from }, (_, i) => from + i), ...cols.map((_, j) => rows.slice(from, to).map((r) => r[j]))],
      );
    await insert(0, 90_000);
    const spec = { ...specOf(c, 'arriving'), name: 'refine_refit', watermark: 'n' };
    const [first] = await fitJson(spec);
    expect(first!.estimated_digits).toBeGreaterThanOrEqual(13.5);
    await insert(90_000, 100_000);
    const res = await runCli(['fit', writeSpec(spec), '--db', tdb.url, '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as { run: { rows_read: number; refit: string }; models: Model[] };
    expect(doc.run).toMatchObject({ rows_read: 10_000, refit: 'incremental' });
    const model = doc.models[0]!;
    expect(model).toMatchObject({ accuracy: 'refined', passes: 1, refinement_steps: 1 });
    const got = lresOf(c, model);
    expect(got.min).toBeGreaterThanOrEqual(13);
    expect(Math.abs(model.estimated_digits - got.min)).toBeLessThanOrEqual(2);
  });

  it('with a fold thread the refinement pass gives the same model', async () => {
    const c = EXACT.cases.find((x) => x.name === 'weighted-zeros')!;
    const spec = specOf(c);
    const threads = await runFit({ specPath: writeSpec(spec), db: tdb.url, threads: 1 });
    const inline = await runFit({ specPath: writeSpec(spec), db: tdb.url, threads: 0 });
    const a = threads.models[0]!;
    const b = inline.models[0]!;
    expect(a.solution.accuracy).toBe('refined');
    expect(a.passes).toBe(2);
    a.solution.coefficients.forEach((k, i) => {
      const w = b.solution.coefficients[i]!;
      expect(Math.abs(k.estimate! - w.estimate!)).toBeLessThanOrEqual(1e-13 * Math.abs(w.estimate!));
    });
    expect(lresOf(c, { ...solutionModel(a.solution) }).min).toBeGreaterThanOrEqual(13);
  });

  it('only the segments that need it are read again: the others keep one pass and their fast models', async () => {
    // Segment "near" (and the NULL segment) hold a design with coefficients near zero; "plain"
    // holds the same predictors with a response every coefficient of which is well determined.
    const c = EXACT.cases.find((x) => x.name === 'zero-intercept')!;
    await load('mixed', c, () => 'near');
    await load('mixed', c, () => null);
    const plain: ExactCase = {
      ...c,
      rows: rowsOf(c).map((r, i) => [...r.slice(0, -1), 10 + r.slice(0, -1).reduce((s, x, j) => s + (j + 1) * x, 0) + 0.1 * Math.sin(i)]),
    };
    await load('mixed', plain, () => 'plain');
    const models = await fitJson({ ...specOf(c, 'mixed'), name: 'refine_mixed', segment_by: 'seg' });
    const bySegment = new Map(models.map((m) => [m.segment?.['seg'] ?? null, m]));
    expect(bySegment.get('plain')).toMatchObject({ accuracy: 'fast', passes: 1 });
    for (const key of ['near', null]) {
      const m = bySegment.get(key)!;
      expect(m).toMatchObject({ accuracy: 'refined', passes: 2, refinement_steps: 1 });
      expect(lresOf(c, m).min).toBeGreaterThanOrEqual(13);
    }
  });

  it('the segment filter runs in the database: the narrowed design query returns only those segments, NULL keys included', async () => {
    await tdb.query(`create table keyed as select (array['a','b',null])[1 + g % 3] as k1, (array['x',null])[1 + g % 2] as k2,
                       g::float8 as x, (2 * g)::float8 as y from generate_series(1, 60) g`);
    const dry = await runFit({ specPath: writeSpec({ name: 'keyed', source: 'keyed', response: 'y', terms: ['x'], segment_by: ['k1', 'k2'] }), db: tdb.url, dryRun: true });
    const wanted: (string | null)[][] = [['a', null], [null, 'x'], ['b', 'x']];
    const narrowed = restrictToSegments(dry.plan, wanted);
    for (const query of [narrowed.queries[0]!.toBound(), { text: narrowed.queries[0]!.toInline(escapeLiteral), values: [] }]) {
      const rows = (await tdb.query<{ k0: string | null; k1: string | null }>(query.text, query.values)).rows;
      const seen = new Set(rows.map((r) => JSON.stringify([r.k0, r.k1])));
      expect([...seen].sort()).toEqual(wanted.map((k) => JSON.stringify(k)).sort());
      expect(rows).toHaveLength(30);
    }
    // One segment column: a NULL segment is matched by IS NULL.
    const one = await runFit({ specPath: writeSpec({ name: 'keyed1', source: 'keyed', response: 'y', terms: ['x'], segment_by: ['k1'] }), db: tdb.url, dryRun: true });
    const q = restrictToSegments(one.plan, [[null], ['b']]).queries[0]!.toBound();
    const rows = (await tdb.query<{ k0: string | null }>(q.text, q.values)).rows;
    expect(new Set(rows.map((r) => r.k0))).toEqual(new Set([null, 'b']));
    expect(rows).toHaveLength(40);
  });
});

function solutionModel(s: FitSolution): Model {
  return {
    segment: null,
    sigma: s.sigma!,
    r2: s.r2!,
    f: s.f!,
    accuracy: s.accuracy,
    estimated_digits: s.estimatedDigits!,
    passes: 2,
    refinement_steps: s.refinementSteps,
    coefficients: s.coefficients.map((k) => ({ estimate: k.estimate!, std_error: k.stdError! })),
  };
}

/** The exact value of a finite double as a decimal string (a double is m·2^e, so a finite decimal). */
function exactDecimal(x: number): string {
  const view = new DataView(new ArrayBuffer(8));
  view.setFloat64(0, x);
  const bits = view.getBigUint64(0);
  const negative = bits >> 63n === 1n;
  const biased = Number((bits >> 52n) & 0x7ffn);
  const fraction = bits & ((1n << 52n) - 1n);
  const mantissa = biased === 0 ? fraction : fraction | (1n << 52n);
  const exponent = (biased === 0 ? 1 : biased) - 1075;
  let text: string;
  if (exponent >= 0) text = (mantissa << BigInt(exponent)).toString();
  else {
    const digits = (mantissa * 5n ** BigInt(-exponent)).toString().padStart(-exponent + 1, '0');
    text = `${digits.slice(0, exponent)}.${digits.slice(exponent)}`;
  }
  return negative ? `-${text}` : text;
}
