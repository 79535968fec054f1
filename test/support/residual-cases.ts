// The residual pass's reference cases: statsmodels 0.13.5 with numpy 1.24.2 and scipy 1.10.1
// (versions recorded in the fixture), written to test/fixtures/reference/residual-cases.json by
// scripts/make-residual-fixtures.py. Read by the reference test and the end-to-end test alike.
import { readFileSync } from 'node:fs';

export interface ResidualCase {
  name: string;
  terms: string[];
  rows: number[][];
  weighted: boolean;
  estimates: number[];
  se_classical: number[];
  se_hc0: number[];
  se_hc1: number[];
  se_hc2: number[];
  se_hc3: number[];
  clusters?: number[];
  se_cluster?: number[];
  n_clusters?: number;
  nw_lag?: number;
  se_newey_west?: number[];
  durbin_watson?: number;
  breusch_pagan: [number, number];
  jarque_bera: [number, number];
  skewness: number;
  kurtosis: number;
  leverage: number[];
  cooks_distance: number[];
  quantiles: Record<string, number>;
  sigma: number;
}

export const fixture = JSON.parse(readFileSync(new URL('../fixtures/reference/residual-cases.json', import.meta.url), 'utf8')) as {
  library: string;
  cases: ResidualCase[];
};
