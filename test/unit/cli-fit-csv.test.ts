import { afterEach, describe, expect, it, vi } from 'vitest';
import { main } from '../../src/cli/cli.js';

const SAMPLE = new URL('../../examples/feeder-sample.csv', import.meta.url).pathname;
// True coefficients the generator used (examples/make-feeder-sample.mjs).
const TRUTH: Record<string, number> = {
  temp_c: 0.11,
  humidity_pct: 0.012,
  is_weekday: 0.65,
  is_holiday: -0.4,
  is_daytime: 0.9,
};

function capture() {
  const out: string[] = [];
  const err: string[] = [];
  vi.spyOn(process.stdout, 'write').mockImplementation((s) => (out.push(String(s)), true));
  vi.spyOn(process.stderr, 'write').mockImplementation((s) => (err.push(String(s)), true));
  return { out, err };
}

afterEach(() => vi.restoreAllMocks());

describe('rowfold fit-csv', () => {
  it('fits the feeder sample; 99% intervals cover the generator’s true coefficients', async () => {
    const io = capture();
    const code = await main(['fit-csv', SAMPLE, '--response', 'load_mw', '--terms', Object.keys(TRUTH).join(','), '--confidence', '0.99', '--json']);
    expect(code).toBe(0);
    // Issue 14: the document of `rowfold fit --json` (rows_skipped by reason and column).
    const doc = JSON.parse(io.out.join('')) as {
      run: { run_id: null; rows_read: number; rows_used: number; rows_skipped: Record<string, number>; segment_count: number; response: string };
      models: { rows: number; coefficients: { term: string; ci_low: number; ci_high: number }[] }[];
    };
    expect(doc.run).toMatchObject({ run_id: null, rows_read: 1344, segment_count: 1, response: 'load_mw' });
    const model = doc.models[0]!;
    const skipped = Object.values(doc.run.rows_skipped).reduce((a, b) => a + b, 0);
    expect(model.rows + skipped).toBe(1344);
    expect(doc.run.rows_used).toBe(model.rows);
    for (const [term, truth] of Object.entries(TRUTH)) {
      const c = model.coefficients.find((x) => x.term === term)!;
      expect(c.ci_low, term).toBeLessThan(truth);
      expect(c.ci_high, term).toBeGreaterThan(truth);
    }
  });

  it('prints a table with every term', async () => {
    const io = capture();
    expect(await main(['fit-csv', SAMPLE, '--response', 'load_mw', '--terms', 'temp_c', 'is_daytime'])).toBe(0);
    const text = io.out.join('');
    expect(text).toMatch(/intercept\s+\d/);
    expect(text).toMatch(/temp_c\s+-?\d/);
    expect(text).toMatch(/is_daytime\s+-?\d/);
    expect(text).toMatch(/skipped 15 \(15 empty in load_mw\)/);
  });

  it('exits 2 on bad usage, a column that is not in the file and a file that cannot be read (issue 13), with a message and no stack trace', async () => {
    const io = capture();
    expect(await main(['fit-csv'])).toBe(2);
    expect(await main(['fit-csv', SAMPLE, '--response', 'nope'])).toBe(2);
    expect(io.err.join('')).toContain('column nope is not in');
    const missing = `${SAMPLE}.missing`;
    expect(await main(['fit-csv', missing, '--response', 'load_mw'])).toBe(2);
    expect(io.err.join('')).toContain(`rowfold: cannot read ${missing}: ENOENT`);
    expect(io.err.join('')).not.toMatch(/\n\s+at /);
  });
});
