import { describe, expect, it } from 'vitest';
import { solve } from '../../src/fit/solve.js';
import { formatSegmentsTable } from '../../src/report/segments-table.js';
import { foldRows } from '../support/fit-rows.js';
import { syntheticRows } from '../support/synthetic.js';

// y = 1 + 0.5·a + 1·b + 1.5·c + N(0, 1), so the true values are known.
const shape = { terms: ['a', 'b', 'c'], response: 'y', intercept: true };
const ok1 = solve(foldRows(shape, syntheticRows(200, 3, 1)));
const ok2 = solve(foldRows(shape, syntheticRows(1500, 3, 2)));
const tiny = solve(foldRows(shape, syntheticRows(3, 3, 3)));
const aliased = solve(
  foldRows({ terms: ['a', 'b', 'b_again', 'c'], response: 'y', intercept: true }, syntheticRows(50, 3, 4).map(([a, b, c, y]) => [a!, b!, b!, c!, y!])),
);

describe('formatSegmentsTable', () => {
  const rows = [
    { label: 'north', solution: ok1 },
    { label: 'south-east', solution: ok2 },
    { label: 'tiny', solution: tiny },
  ];

  it('prints one line per segment under a heading per term', () => {
    const text = formatSegmentsTable(rows, { segmentHeading: 'region', terms: ['a', 'c'] });
    const lines = text.split('\n');
    expect(lines).toHaveLength(3 + rows.length);
    expect(lines[0]).toMatch(/^\s+a\s+c$/);
    expect(lines[1]).toMatch(/^region\s+rows\s+R²\s+σ\s+estimate\s+95% interval\s+estimate\s+95% interval$/);
    expect(lines[2]).toMatch(/^─+ {3}─+ {3}─+$/);
    expect(lines[3]).toMatch(/^north\s+200\s+0\.\d{4}\s+\d\.\d{3}\s+/);
    expect(lines[4]).toMatch(/^south-east\s+1,500\s/);
    expect(lines[5]).toMatch(/^tiny\s+3  too few rows$/);
    // Every line of the table has the same columns: the estimates of term a line up.
    const at = lines[1]!.indexOf('estimate') + 'estimate'.length;
    for (const line of lines.slice(3, 5)) expect(line[at - 1]).toMatch(/\d/);
  });

  it('shows estimates and interval bounds with the decimals of two digits of the standard error', () => {
    const text = formatSegmentsTable(rows.slice(0, 2), { segmentHeading: 'region', terms: ['a'] });
    const se = [ok1, ok2].map((s) => s.coefficients.find((c) => c.term === 'a')!.stdError!).sort((x, y) => x - y);
    const decimals = 1 - Math.floor(Math.log10(se[1]!));
    const a = ok1.coefficients.find((c) => c.term === 'a')!;
    expect(text).toContain(`${a.estimate!.toFixed(decimals)}  [${a.ciLow!.toFixed(decimals)}, ${a.ciHigh!.toFixed(decimals)}]`);
  });

  it('adds the true value, marked ✓ inside the interval and ✗ outside', () => {
    const truth = (label: string, term: string) => (term === 'a' ? (label === 'north' ? 0.5 : 99) : undefined);
    const text = formatSegmentsTable(rows.slice(0, 2), { segmentHeading: 'region', terms: ['a', 'b'], truth });
    const [north, south] = text.split('\n').slice(3);
    expect(text.split('\n')[1]).toMatch(/true/);
    expect(north).toMatch(/0\.50+ ✓/);
    expect(south).toMatch(/99\.0+ ✗/);
  });

  it('says aliased for an aliased term and – for a term the model lacks', () => {
    const text = formatSegmentsTable([{ label: 'x', solution: aliased }], { segmentHeading: 'segment', terms: ['b_again', 'nope'] });
    expect(text.split('\n')[3]).toMatch(/^x\s+50\s+\S+\s+\S+\s+aliased\s+–$/);
  });
});
