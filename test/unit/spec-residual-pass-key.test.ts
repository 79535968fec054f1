import { describe, expect, it } from 'vitest';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';
import { SpecError } from '../../src/spec/spec-error.js';

const lines = (...l: string[]) => l.join('\n') + '\n';
const head = ['name: load', 'source: readings', 'response: load_kw', 'terms: [temp_c]'];

function error(text: string): string {
  try {
    parseFitSpec(text, 's.yaml');
  } catch (e) {
    if (e instanceof SpecError) return e.message;
    throw e;
  }
  return '';
}

describe('spec key residual_pass (issue 16)', () => {
  it('is off by default; every sub-key is optional, robust defaults to hc0–hc3', () => {
    expect(parseFitSpec(lines(...head), 'a.yaml').residualPass).toBeNull();
    expect(parseFitSpec(lines(...head, 'residual_pass: {}'), 'b.yaml').residualPass).toEqual({
      robust: ['hc0', 'hc1', 'hc2', 'hc3'],
      clusterBy: null,
      orderBy: null,
      influential: null,
      holdout: null,
    });
    expect(
      parseFitSpec(
        lines(...head, 'residual_pass:', '  robust: [hc3, hc1, hc3]', '  cluster_by: feeder_id', '  order_by: reading_hour', '  influential: {keys: [feeder_id, reading_hour]}', '  holdout: {key: reading_day, fraction: 0.2}'),
        'c.yaml',
      ).residualPass,
    ).toEqual({ robust: ['hc3', 'hc1'], clusterBy: 'feeder_id', orderBy: 'reading_hour', influential: { keys: ['feeder_id', 'reading_hour'], top: 10 }, holdout: { key: 'reading_day', fraction: 0.2 } });
  });

  it('names the key and line of a bad value', () => {
    expect(error(lines(...head, 'residual_pass: {robust: [hc4]}'))).toMatch(/s\.yaml:5:\d+: residual_pass\.robust\[0\]: must be hc0, hc1, hc2 or hc3/);
    expect(error(lines(...head, 'residual_pass: {cluster_by: "feeder id"}'))).toMatch(/residual_pass\.cluster_by: must be a column name/);
    expect(error(lines(...head, 'residual_pass: {influential: {keys: []}}'))).toMatch(/residual_pass\.influential\.keys: must name at least one column/);
    expect(error(lines(...head, 'residual_pass: {influential: {keys: [id], top: 0}}'))).toMatch(/residual_pass\.influential\.top: must be a whole number from 1 to 1000/);
    expect(error(lines(...head, 'residual_pass: {holdout: {key: day, fraction: 0.7}}'))).toMatch(/residual_pass\.holdout\.fraction: must be a number above 0 and at most 0\.5/);
    expect(error(lines(...head, 'residual_pass: {holdout: {fraction: 0.2}}'))).toMatch(/residual_pass\.holdout\.key: required key is missing/);
    expect(error(lines(...head, 'residual_pass: {lags: 4}'))).toMatch(/residual_pass\.lags: unknown key "lags"/);
  });
});
