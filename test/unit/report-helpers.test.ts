import { describe, expect, it } from 'vitest';
import { normalQuantile } from '../../src/numeric/normal-quantile.js';
import { SqlTemplate } from '../../src/plan/sql-template.js';
import { segmentSampleQuery } from '../../src/plan/segment-sample-query.js';
import { chooseSegment } from '../../src/report/choose-segment.js';
import { showsZero } from '../../src/report/coefficient-chart.js';
import { escapeHtml } from '../../src/report/escape-html.js';
import { normalBins, normalCdf, residualBands } from '../../src/report/residual-summaries.js';
import { renderChartSvg } from '../../src/report/render-chart-svg.js';
import { coefficientChartSpec } from '../../src/report/coefficient-chart.js';
import { conditionChartSpec } from '../../src/report/condition-chart.js';
import { predictedActualChartSpec } from '../../src/report/predicted-actual-chart.js';
import { residualBandChartSpec } from '../../src/report/residual-band-chart.js';
import { residualTailChartSpec } from '../../src/report/residual-tail-chart.js';
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

describe('residualBands (issue 14: the residual spread chart)', () => {
  it('cuts the rows into slices of equal count along the fitted values, with type-7 quantiles of their residuals', () => {
    const residuals = [0.5, -1, 2, 4, -3, 0.2, 1.5, -0.5, 3, -2.2];
    // One slice: its quantiles are numpy 2.4.6's np.percentile(x, [10, 25, 50, 75, 90]) (linear, the default).
    const [one] = residualBands(residuals.map((r, i) => ({ fitted: 10 - i, residual: r })), 1);
    expect(one).toMatchObject({ rows: 10, fittedLow: 1, fittedHigh: 10, fittedMid: 5.5 });
    expect(one!.q10).toBeCloseTo(-2.28, 12);
    expect(one!.q25).toBeCloseTo(-0.875, 12);
    expect(one!.median).toBeCloseTo(0.35, 12);
    expect(one!.q75).toBeCloseTo(1.875, 12);
    expect(one!.q90).toBeCloseTo(3.1, 12);
    // Five slices of two rows, in order of fitted value; NaN left out.
    const five = residualBands([...residuals.map((r, i) => ({ fitted: i, residual: r })), { fitted: Number.NaN, residual: 1 }], 5);
    expect(five.map((b) => b.rows)).toEqual([2, 2, 2, 2, 2]);
    [-0.25, 3, -1.4, 0.5, 0.4].forEach((m, i) => expect(five[i]!.median).toBeCloseTo(m, 14));
    expect(residualBands([], 20)).toEqual([]);
    expect(residualBands([{ fitted: 1, residual: 2 }], 20)).toHaveLength(1);
  });
});

describe('normalBins (issue 14: the standardised residuals beside the normal)', () => {
  it('Φ from the χ² tail matches scipy 1.17.1 (scipy.stats.norm.cdf) to 1e-14', () => {
    expect(normalCdf(1)).toBeCloseTo(0.8413447460685429, 14);
    expect(normalCdf(-2.5)).toBeCloseTo(0.006209665325776132, 14);
    expect(normalCdf(3.7)).toBeCloseTo(0.9998922002665226, 14);
    expect(normalCdf(0)).toBe(0.5);
  });

  it('counts values in half-σ intervals with a tail bin each side, and the normal counts sum to n', () => {
    const bins = normalBins([-5, -0.2, 0.1, 0.49, 0.5, 2.7, 9, Number.NaN]);
    expect(bins).toHaveLength(18);
    expect(bins[0]).toMatchObject({ from: -Infinity, to: -4, observed: 1 });
    expect(bins[17]).toMatchObject({ from: 4, to: Infinity, observed: 1 });
    expect(bins.find((b) => b.from === 0)!.observed).toBe(2);
    expect(bins.find((b) => b.from === 0.5)!.observed).toBe(1);
    expect(bins.find((b) => b.from === 2.5)!.observed).toBe(1);
    expect(bins.reduce((n, b) => n + b.observed, 0)).toBe(7);
    expect(bins.reduce((n, b) => n + b.expected, 0)).toBeCloseTo(7, 12);
    // Symmetric expectations; [0, 0.5) holds n · (Φ(0.5) − 0.5) = 7 · 0.19146… (scipy 1.17.1: norm.cdf(0.5) = 0.6914624612740131).
    expect(bins.find((b) => b.from === 0)!.expected).toBeCloseTo(7 * (0.6914624612740131 - 0.5), 12);
    expect(bins[1]!.expected).toBeCloseTo(bins[16]!.expected, 14);
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

  it('every chart of the report compiles and draws without a warning, and keeps the tail chart\'s intervals in order', async () => {
    // vega-lite once warned on stderr, in the middle of `rowfold demo`, that the tail chart's two
    // layers sorted their shared axis in conflicting ways.
    const residuals = Array.from({ length: 400 }, (_, i) => normalQuantile((i + 0.5) / 400) * (1 + (i % 7) / 10));
    const points = residuals.map((r, i) => ({ fitted: (i * 37) % 400, residual: r }));
    const segments = ['F01', 'F02', 'F03'];
    const specs = [
      coefficientChartSpec('temp_c', segments.map((g, i) => ({ segment: g, estimate: i - 1, low: i - 1.5, high: i - 0.5 })), segments, 'MW per °C', 'feeder'),
      conditionChartSpec(segments.map((g, i) => ({ segment: g, condition: 10 ** (i + 1), aliased: i === 2 ? 1 : 0 })), 'feeder'),
      predictedActualChartSpec(points.slice(0, 50).map((p) => ({ actual: p.fitted + p.residual, predicted: p.fitted }))),
      residualBandChartSpec(residualBands(points, 20), 'residual (MW)', points.length),
      residualTailChartSpec(normalBins(residuals)),
    ];
    for (const spec of specs) {
      const warnings: string[] = [];
      const svg = await renderChartSvg(spec, 'chart', warnings);
      expect(warnings, JSON.stringify(spec).slice(0, 120)).toEqual([]);
      expect(svg).toMatch(/^<svg role="img"/);
    }
    // The intervals run from −∞ up, left to right, in the drawn axis.
    const tail = await renderChartSvg(residualTailChartSpec(normalBins(residuals)), 'tail');
    const labels = [...tail.matchAll(/>([^<]*) to ([^<]*)</g)].map((m) => m[1]);
    expect(labels[0]).toBe('−∞');
    expect(labels.length).toBeGreaterThan(4);
  });
});
