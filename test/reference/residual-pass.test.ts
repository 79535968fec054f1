// Reference: statsmodels 0.13.5 with numpy 1.24.2 and scipy 1.10.1 (versions recorded in the
// fixture), values committed in test/fixtures/reference/residual-cases.json by
// scripts/make-residual-fixtures.py: OLS/WLS fit(cov_type=HC0…HC3, cluster, HAC).bse,
// het_breuschpagan(robust=True), durbin_watson, jarque_bera, OLSInfluence (hat_matrix_diag,
// cooks_distance), numpy.quantile. Every check below names its source.
import { describe, expect, it } from 'vitest';
import type { DesignShape } from '../../src/fit/accumulator.js';
import { blockLayout, residualContext, residualModel } from '../../src/fit/residual-model.js';
import { residualFindings, residualQuantile } from '../../src/fit/residual-results.js';
import type { ResidualFindings } from '../../src/fit/residual-results.js';
import { QUANTILE_BINS, QUANTILE_RANGE, ResidualSegment } from '../../src/fit/residual-segment.js';
import type { ResidualPassOptions } from '../../src/fit/residual-segment.js';
import { solve } from '../../src/fit/solve.js';
import { expectClose } from '../support/close.js';
import { foldRows, toBlock } from '../support/fit-rows.js';
import { fixture } from '../support/residual-cases.js';
import type { ResidualCase } from '../support/residual-cases.js';

const SOURCE = fixture.library;

function pass(c: ResidualCase, top: number): { seg: ResidualSegment; findings: ResidualFindings } {
  const shape: DesignShape = { terms: c.terms, response: 'y', intercept: true, ...(c.weighted ? { weight: 'w' } : {}) };
  const solution = solve(foldRows(shape, c.rows));
  const model = residualModel(solution, shape)!;
  const options: ResidualPassOptions = {
    robust: ['hc0', 'hc1', 'hc2', 'hc3'],
    cluster: c.clusters !== undefined,
    maxClusterValues: 1_000_000,
    ordered: c.nw_lag !== undefined,
    influentialTop: top,
  };
  const layout = blockLayout(shape);
  const seg = new ResidualSegment(model, options, layout, c.name);
  const block = toBlock(c.rows, layout.width);
  for (let i = 0; i < block.rows; i++) seg.row(block.values, i * layout.width, c.clusters?.[i] ?? 0, i);
  const ctx = residualContext(solution, shape, { clusterBy: c.clusters === undefined ? null : 'g', orderBy: c.nw_lag === undefined ? null : 't' });
  return { seg, findings: residualFindings(seg, ctx) };
}

function errorsOf(f: ResidualFindings, method: string): (number | null)[] {
  return f.errors.filter((e) => e.method === method).map((e) => e.stdError);
}

function testOf(f: ResidualFindings, test: string) {
  const t = f.tests.find((x) => x.test === test);
  expect(t, test).toBeDefined();
  return t!;
}

describe(`residual pass against ${SOURCE}`, () => {
  for (const c of fixture.cases) {
    describe(c.name, () => {
      const { seg, findings } = pass(c, c.rows.length);
      it(`HC0–HC3 standard errors to 1e-8 relative (${SOURCE}: fit(cov_type='HC0'…'HC3').bse)`, () => {
        for (const m of ['hc0', 'hc1', 'hc2', 'hc3'] as const) {
          const got = errorsOf(findings, m);
          const want = c[`se_${m}`];
          expect(got.length).toBe(want.length);
          want.forEach((v, j) => expectClose(got[j], v, 1e-8, `${m} ${j}`));
        }
        // Classical errors: the factor's own, same source (fit().bse).
        c.se_classical.forEach((v, j) => expectClose(errorsOf(findings, 'classical')[j], v, 1e-9, `classical ${j}`));
      });
      if (c.se_cluster !== undefined) {
        it(`cluster-robust standard errors to 1e-8 relative and the cluster count (${SOURCE}: fit(cov_type='cluster').bse)`, () => {
          c.se_cluster!.forEach((v, j) => expectClose(errorsOf(findings, 'cluster')[j], v, 1e-8, `cluster ${j}`));
          expect(testOf(findings, 'cluster_robust').extras.clusters).toBe(c.n_clusters);
        });
      }
      if (c.se_newey_west !== undefined) {
        it(`Newey–West standard errors to 1e-8 relative and Durbin–Watson (${SOURCE}: fit(cov_type='HAC', maxlags=${c.nw_lag}).bse, durbin_watson)`, () => {
          expect(seg.lag).toBe(c.nw_lag);
          c.se_newey_west!.forEach((v, j) => expectClose(errorsOf(findings, 'newey_west')[j], v, 1e-8, `newey_west ${j}`));
          expectClose(testOf(findings, 'durbin_watson').statistic, c.durbin_watson!, 1e-10, 'durbin_watson');
        });
      }
      it(`Breusch–Pagan (studentized) statistic and p, Jarque–Bera, skewness and kurtosis (${SOURCE}: het_breuschpagan, jarque_bera)`, () => {
        const bp = testOf(findings, 'breusch_pagan');
        expectClose(bp.statistic, c.breusch_pagan[0], 1e-8, 'bp statistic');
        expectClose(bp.p, c.breusch_pagan[1], 1e-7, 'bp p');
        expect(bp.df).toBe(c.terms.length);
        const jb = testOf(findings, 'jarque_bera');
        expectClose(jb.statistic, c.jarque_bera[0], 1e-8, 'jb statistic');
        expectClose(jb.p, c.jarque_bera[1], 1e-7, 'jb p');
        expectClose(testOf(findings, 'skewness').statistic, c.skewness, 1e-8, 'skewness');
        expectClose(testOf(findings, 'excess_kurtosis').statistic, c.kurtosis - 3, 1e-8, 'excess kurtosis');
      });
      it(`leverage and Cook's distance of every row to 1e-8 relative (${SOURCE}: OLSInfluence of the whitened rows)`, () => {
        expect(findings.topLeverage.length).toBe(c.rows.length);
        for (const r of findings.topLeverage) expectClose(r.leverage, c.leverage[r.id]!, 1e-8, `leverage row ${r.id}`);
        for (const r of findings.topCooks) expectClose(r.cooksDistance, c.cooks_distance[r.id]!, 1e-8, `cooks row ${r.id}`);
        // Largest first.
        expect(findings.topCooks[0]!.cooksDistance).toBe(Math.max(...c.cooks_distance.map((_, i) => findings.topCooks.find((r) => r.id === i)!.cooksDistance)));
      });
      it(`residual quantiles within the histogram's resolution 0.08σ plus the gap of the order statistics there (${SOURCE}: numpy.quantile, linear)`, () => {
        const resolution = (2 * QUANTILE_RANGE * c.sigma) / QUANTILE_BINS;
        // The whitened residuals from the reference's estimates, sorted: numpy's quantile
        // interpolates between neighbouring order statistics, the histogram within a bin.
        const e = c.rows
          .map((r) => {
            const p = c.terms.length;
            const fitted = c.estimates[0]! + c.terms.reduce((s, _, j) => s + c.estimates[j + 1]! * r[j]!, 0);
            return Math.sqrt(c.weighted ? r[p + 1]! : 1) * (r[p]! - fitted);
          })
          .sort((a, b) => a - b);
        for (const [q, v] of Object.entries(c.quantiles)) {
          const at = Number(q) * (e.length - 1);
          const gap = e[Math.min(e.length - 1, Math.ceil(at) + 1)]! - e[Math.max(0, Math.floor(at) - 1)]!;
          expect(Math.abs(residualQuantile(seg, Number(q))! - v), `q${q}`).toBeLessThanOrEqual(resolution + gap);
        }
        expectClose(residualQuantile(seg, 0), e[0]!, 1e-9, 'minimum');
        expectClose(residualQuantile(seg, 1), e[e.length - 1]!, 1e-9, 'maximum');
      });
    });
  }

  it('keeps only the top rows by Cook\'s distance and by leverage when asked for fewer', () => {
    const c = fixture.cases[0]!;
    const { findings } = pass(c, 5);
    const cooks = [...c.cooks_distance].sort((a, b) => b - a).slice(0, 5);
    expect(findings.topCooks.map((r) => r.cooksDistance).map((v, i) => Math.abs(v - cooks[i]!) <= 1e-8 * cooks[i]!)).toEqual([true, true, true, true, true]);
    const lev = [...c.leverage].sort((a, b) => b - a).slice(0, 5);
    expect(findings.topLeverage.map((r) => Math.abs(r.leverage - lev[findings.topLeverage.indexOf(r)]!) <= 1e-8)).toEqual([true, true, true, true, true]);
  });

  it('stops with an error naming the segment and the bound past the cluster limit', () => {
    const c = fixture.cases.find((x) => x.clusters !== undefined)!;
    const shape: DesignShape = { terms: c.terms, response: 'y', intercept: true };
    const model = residualModel(solve(foldRows(shape, c.rows)), shape)!;
    const layout = blockLayout(shape);
    const seg = new ResidualSegment(model, { robust: [], cluster: true, maxClusterValues: 30, ordered: false, influentialTop: 0 }, layout, '["north"]');
    const block = toBlock(c.rows, layout.width);
    expect(() => {
      for (let i = 0; i < block.rows; i++) seg.row(block.values, i * layout.width, c.clusters![i]!, i);
    }).toThrow(/segment \["north"\]: residual_pass.cluster_by has more than 10 clusters/);
  });

  it(`an aliased term is left out and the kept terms' robust errors are the reduced model's (${SOURCE})`, () => {
    const c = fixture.cases[0]!;
    const p = c.terms.length;
    // One more column, the sum of the first two: aliased, so the kept model is the fixture's.
    const rows = c.rows.map((r) => [...r.slice(0, p), r[0]! + r[1]!, ...r.slice(p)]);
    const shape: DesignShape = { terms: [...c.terms, 'x01'], response: 'y', intercept: true };
    const solution = solve(foldRows(shape, rows));
    expect(solution.aliased).toEqual(['x01']);
    const layout = blockLayout(shape);
    const seg = new ResidualSegment(residualModel(solution, shape)!, { robust: ['hc3'], cluster: false, maxClusterValues: 0, ordered: false, influentialTop: 0 }, layout, 'aliased');
    const block = toBlock(rows, layout.width);
    for (let i = 0; i < block.rows; i++) seg.row(block.values, i * layout.width, 0, i);
    const f = residualFindings(seg, residualContext(solution, shape, { clusterBy: null, orderBy: null }));
    const hc3 = f.errors.filter((e) => e.method === 'hc3');
    expect(hc3.map((e) => e.term)).toEqual(['intercept', ...c.terms]);
    c.se_hc3.forEach((v, j) => expectClose(hc3[j]!.stdError, v, 1e-7, `hc3 ${j}`));
  });
});
