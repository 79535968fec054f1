import { describe, expect, it } from 'vitest';
import { normalQuantile } from '../../src/numeric/normal-quantile.js';
import { SqlTemplate } from '../../src/plan/sql-template.js';
import { segmentSampleQuery } from '../../src/plan/segment-sample-query.js';
import { chooseSegment } from '../../src/report/choose-segment.js';
import { showsZero } from '../../src/report/coefficient-chart.js';
import { escapeHtml } from '../../src/report/escape-html.js';
import { normalQuantilePoints } from '../../src/report/normal-quantile-points.js';
import { renderChartSvg } from '../../src/report/render-chart-svg.js';
import { ReportError } from '../../src/report/report-error.js';
import type { ReportCoefficient, ReportModel } from '../../src/report/report-run.js';
import { residualPoints } from '../../src/report/residual-points.js';
import { segmentLabel, segmentShortLabel } from '../../src/report/segment-label.js';

function coef(term: string, estimate: number | null, aliased = false): ReportCoefficient {
  return { termIndex: 0, term, aliased, estimate, stdError: null, t: null, p: null, ciLow: null, ciHigh: null, vif: null };
}

function model(over: Partial<ReportModel>): ReportModel {
  return {
    modelId: '1', segment: null, segmentKey: '', label: 'all rows', shortLabel: 'all rows', status: 'ok', notes: [], method: 'qr',
    confidence: 0.95, intercept: true, rows: 10, zeroWeightRows: 0, sumWeights: 10, rank: 2, dfResidual: 8, rss: 1, sigma: 2,
    r2: 0.5, r2Adjusted: 0.4, f: 1, fDf1: 1, fDf2: 8, fP: 0.3, logLik: -1, aic: 1, bic: 1, conditionNumber: 1, aliasedTerms: [],
    coefficients: [], ...over,
  };
}

describe('normalQuantile (t quantile at 1e12 df)', () => {
  // Reference: scipy 1.17.1, scipy.stats.norm.ppf (values printed by it on this machine; it
  // agrees with −√2·erfcinv(2p) from stdlib to 1e-15).
  it.each([
    [0.975, 1.959963984540054],
    [0.001, -3.090232306167813],
    [1e-10, -6.361340902404057],
    [0.3, -0.5244005127080409],
  ])('Φ⁻¹(%s) to 1e-9 relative', (p, z) => {
    expect(Math.abs(normalQuantile(p) - z) / Math.abs(z)).toBeLessThan(1e-9);
  });
  it('is 0 at ½ and infinite at the ends, NaN outside [0, 1]', () => {
    expect(Math.abs(normalQuantile(0.5))).toBeLessThan(1e-15);
    expect(normalQuantile(0)).toBe(Number.NEGATIVE_INFINITY);
    expect(normalQuantile(1)).toBe(Number.POSITIVE_INFINITY);
    expect(normalQuantile(1.5)).toBeNaN();
  });
});

describe('normalQuantilePoints', () => {
  it('sorts the values and pairs them with symmetric plotting positions', () => {
    const pts = normalQuantilePoints([0.3, -1.2, Number.NaN, 0.8]);
    expect(pts.map((p) => p.observed)).toEqual([-1.2, 0.3, 0.8]);
    expect(pts[0]!.expected).toBeCloseTo(-pts[2]!.expected, 12);
    expect(Math.abs(pts[1]!.expected)).toBeLessThan(1e-12);
    // (1 − 3/8) / (3 + 1/4) = 0.1923…, Φ⁻¹ of which is −0.8694 (scipy 1.17.1, scipy.stats.norm.ppf).
    expect(pts[0]!.expected).toBeCloseTo(-0.8694237, 6);
  });
});

describe('segmentSampleQuery', () => {
  it('binds the segment values and the limit, and keeps NULL keys as IS NULL', () => {
    const design = new SqlTemplate(['SELECT a::text AS "k0", b::text AS "k1", x AS "v0", y AS "v1" FROM t WHERE c = ', { value: 'lit' }]);
    const { text, values } = segmentSampleQuery(design, { keyValues: ["it's", null], valueCount: 2, limit: 500 }).toBound();
    expect(values).toEqual(['lit', "it's", 500]);
    expect(text).toBe(
      'SELECT * FROM (SELECT a::text AS "k0", b::text AS "k1", x AS "v0", y AS "v1" FROM t WHERE c = $1\n) d\n' +
        ' WHERE d."k0" = $2\n   AND d."k1" IS NULL\n   AND d."v0" IS NOT NULL\n   AND d."v1" IS NOT NULL\n ORDER BY random()\n LIMIT $3',
    );
  });
  it('rejects a limit that is not a positive whole number', () => {
    expect(() => segmentSampleQuery(new SqlTemplate(['SELECT 1']), { keyValues: [], valueCount: 0, limit: 0 })).toThrow(RangeError);
  });
});

describe('residualPoints', () => {
  const m = model({
    sigma: 0.5,
    coefficients: [coef('intercept', 1), coef('x', 2), coef('z', null, true), coef('gone', 7)],
  });
  it('computes fitted = Xβ with aliased terms as 0 and residuals y − fitted, standardised by σ', () => {
    const rows = [
      ['seg', 1, 5, 3.5],
      ['seg', 2, -1, 4],
    ];
    const r = residualPoints(rows, { keyCount: 1, columns: ['x', 'z'], weighted: false }, m);
    expect(r.points).toEqual([
      { fitted: 3, residual: 0.5, standardized: 1 },
      { fitted: 5, residual: -1, standardized: -2 },
    ]);
    expect(r.vanishedTerms).toEqual(['gone']);
  });
  it('scales residuals by √w, and leaves out non-finite rows, non-positive weights and rows in new columns', () => {
    const rows = [
      [1, 0, 0, 7, 4], // fitted 3, residual 2·4
      [1, 0, 0, Number.NaN, 1],
      [1, 0, 0, 3, 0],
      [1, 0, 1, 3, 1], // non-zero in the new column
    ];
    const r = residualPoints(rows, { keyCount: 0, columns: ['x', 'z', 'new=level'], weighted: true }, m);
    expect(r.points).toEqual([{ fitted: 3, residual: 8, standardized: 16 }]);
    expect(r.unusable).toBe(2);
    expect(r.outsideModel).toBe(1);
    expect(r.newColumns).toEqual(['new=level']);
  });
});

describe('chooseSegment', () => {
  const models = [
    model({ segment: { feeder: 'F1', region: 'north' }, segmentKey: '["F1","north"]', rows: 50 }),
    model({ segment: { feeder: 'F2', region: 'north' }, segmentKey: '["F2","north"]', rows: 90 }),
    model({ segment: { feeder: 'F3', region: 'a,b' }, segmentKey: '["F3","a,b"]', rows: 10 }),
    model({ segment: { feeder: 'F9', region: null }, segmentKey: '["F9",null]', rows: 500, status: 'too_few_rows' }),
  ];
  it('defaults to the estimated model with the most rows', () => {
    expect(chooseSegment(models, undefined).segmentKey).toBe('["F2","north"]');
  });
  it('takes a stored key or col=value pairs, a value may contain a comma', () => {
    expect(chooseSegment(models, '["F9",null]').rows).toBe(500);
    expect(chooseSegment(models, 'feeder=F1').rows).toBe(50);
    expect(chooseSegment(models, 'region=north, feeder=F2').rows).toBe(90);
    expect(chooseSegment(models, 'region=a,b').rows).toBe(10);
  });
  it('refuses an ambiguous or unknown segment as a usage error', () => {
    expect(() => chooseSegment(models, 'region=north')).toThrow(/matches 2 segments/);
    try {
      chooseSegment(models, 'feeder=F7');
      expect.unreachable();
    } catch (e) {
      expect(e).toBeInstanceOf(ReportError);
      expect((e as ReportError).usage).toBe(true);
      expect((e as Error).message).toContain('["F1","north"]');
    }
  });
  it('takes the bare value of a single segment column', () => {
    const one = [model({ segment: { feeder: 'F1' }, segmentKey: '["F1"]' }), model({ segment: { feeder: 'F2' }, segmentKey: '["F2"]' })];
    expect(chooseSegment(one, 'F2').segmentKey).toBe('["F2"]');
  });
});

describe('segment labels', () => {
  it('follow segment_by order, not the jsonb key order', () => {
    expect(segmentLabel(['region', 'feeder'], '["north","F07"]', { feeder: 'F07', region: 'north' })).toBe('region=north, feeder=F07');
    expect(segmentShortLabel('["north",null]', { feeder: null, region: 'north' })).toBe('north · NULL');
    expect(segmentLabel([], '', null)).toBe('all rows');
  });
});

describe('chart helpers', () => {
  it('draw zero only when the estimates come near it', () => {
    expect(showsZero([{ segment: 'a', estimate: 1, low: -0.5, high: 2 }])).toBe(true);
    expect(showsZero([{ segment: 'a', estimate: 10, low: 9, high: 11 }])).toBe(false);
    expect(showsZero([{ segment: 'a', estimate: 1, low: 0.5, high: 1.5 }])).toBe(true);
  });
  it('render SVG in Node with no URL and an escaped label', async () => {
    const svg = await renderChartSvg(
      { data: { values: [{ a: 1, b: 2 }, { a: 2, b: 1 }] }, mark: 'point', encoding: { x: { field: 'a', type: 'quantitative' }, y: { field: 'b', type: 'quantitative' } } },
      'a < b & "c"',
    );
    expect(svg.startsWith('<svg role="img" aria-label="a &lt; b &amp; &quot;c&quot;" ')).toBe(true);
    expect(svg).not.toMatch(/https?:/);
    expect(svg.match(/<path/g)?.length).toBeGreaterThan(2);
    expect(escapeHtml(`<a href='x'>&</a>`)).toBe('&lt;a href=&#39;x&#39;&gt;&amp;&lt;/a&gt;');
  });
});
