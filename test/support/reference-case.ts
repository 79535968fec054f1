/** One coefficient as the numpy/scipy fixtures write it (scripts/reference_ols.py). */
export interface ReferenceCoefficient {
  term: string;
  aliased: boolean;
  estimate: number | null;
  std_error: number | null;
  t: number | null;
  p: number | null;
  ci_low: number | null;
  ci_high: number | null;
  vif: number | null;
}

/** The expected statistics of one model in the numpy/scipy fixtures. */
export interface ReferenceExpected {
  rank: number;
  aliased: string[];
  n: number;
  df_residual: number;
  rss: number;
  sigma: number;
  r2: number;
  r2_adjusted: number;
  f: number | null;
  f_p: number | null;
  loglik: number;
  aic: number;
  bic: number;
  coefficients: ReferenceCoefficient[];
}
