-- The residual pass (spec key residual_pass): standard errors by method in long form beside the
-- classical ones, tests and summaries of each model's residuals, and each model's most
-- influential rows, and the prediction error on held-out rows. Written in the run's transaction with its models; a view per table shows the
-- latest successful model of every fit and segment.

create table coefficient_errors (
  model_id   bigint not null,
  run_id     bigint not null,
  term       text not null,
  method     text not null
               check (method in ('classical', 'hc0', 'hc1', 'hc2', 'hc3', 'cluster', 'newey_west')),
  std_error  double precision,
  t          double precision,
  p          double precision,
  ci_low     double precision,
  ci_high    double precision,
  primary key (model_id, method, term),
  constraint coefficient_errors_model_fkey foreign key (run_id, model_id)
    references models (run_id, model_id) on delete cascade
);

comment on table coefficient_errors is
  'One row per model, term and method of estimating the standard error (residual_pass): classical beside the robust ones, so a dashboard filters by method.';
comment on column coefficient_errors.model_id is 'The model the coefficient belongs to.';
comment on column coefficient_errors.run_id is 'The run that produced the model (copied from models).';
comment on column coefficient_errors.term is 'Name of the term (estimated terms only; aliased terms have no error).';
comment on column coefficient_errors.method is
  'classical (σ²(XᵀWX)⁻¹), hc0, hc1, hc2, hc3 (heteroskedasticity-consistent), cluster (cluster-robust by residual_pass.cluster_by) or newey_west (autocorrelation-robust along residual_pass.order_by).';
comment on column coefficient_errors.std_error is 'Standard error of the estimate by this method; null where undefined (see the model''s residual_tests notes).';
comment on column coefficient_errors.t is 'Estimate over std_error.';
comment on column coefficient_errors.p is 'Two-sided p-value of t (Student t on df_residual degrees of freedom; cluster: clusters − 1).';
comment on column coefficient_errors.ci_low is 'Lower end of the confidence interval at the model''s confidence level.';
comment on column coefficient_errors.ci_high is 'Upper end of the confidence interval at the model''s confidence level.';

create table residual_tests (
  model_id   bigint not null,
  run_id     bigint not null,
  test       text not null,
  statistic  double precision,
  df         double precision,
  p          double precision,
  extras     jsonb not null default '{}' check (jsonb_typeof(extras) = 'object'),
  primary key (model_id, test),
  constraint residual_tests_model_fkey foreign key (run_id, model_id)
    references models (run_id, model_id) on delete cascade
);

comment on table residual_tests is
  'One row per model and test or summary of its residuals (residual_pass): breusch_pagan, durbin_watson, skewness, excess_kurtosis, jarque_bera, residual_quantiles, cluster_robust, newey_west, notes.';
comment on column residual_tests.model_id is 'The model whose residuals were tested.';
comment on column residual_tests.run_id is 'The run that produced the model (copied from models).';
comment on column residual_tests.test is 'Name of the test or summary.';
comment on column residual_tests.statistic is 'The statistic; null for a row that only carries extras.';
comment on column residual_tests.df is 'Degrees of freedom of the statistic''s reference distribution, where it has one.';
comment on column residual_tests.p is 'p-value of the statistic, where it has one.';
comment on column residual_tests.extras is
  'What has no column of its own: the number of clusters, the Newey–West lag and its rule, the quantiles, the auxiliary R², notes.';

create table influential_rows (
  model_id        bigint not null,
  run_id          bigint not null,
  ranked_by       text not null check (ranked_by in ('cooks_distance', 'leverage')),
  rank            integer not null check (rank >= 1),
  row_key         jsonb check (row_key is null or jsonb_typeof(row_key) = 'object'),
  residual        double precision not null,
  leverage        double precision not null,
  cooks_distance  double precision not null,
  primary key (model_id, ranked_by, rank),
  constraint influential_rows_model_fkey foreign key (run_id, model_id)
    references models (run_id, model_id) on delete cascade
);

comment on table influential_rows is
  'The residual_pass.influential.top rows of each model with the largest Cook''s distance, and those with the largest leverage.';
comment on column influential_rows.model_id is 'The model the row entered.';
comment on column influential_rows.run_id is 'The run that produced the model (copied from models).';
comment on column influential_rows.ranked_by is 'cooks_distance or leverage: the list the row belongs to.';
comment on column influential_rows.rank is 'Position in that list, from 1 (the largest).';
comment on column influential_rows.row_key is
  'The row''s values of residual_pass.influential.keys as a JSON object; null if the row could no longer be found.';
comment on column influential_rows.residual is 'The row''s residual y − ŷ (times √w for a weighted fit).';
comment on column influential_rows.leverage is 'The row''s leverage hᵢᵢ, the diagonal of the hat matrix.';
comment on column influential_rows.cooks_distance is 'The row''s Cook''s distance.';

create table holdout_errors (
  model_id   bigint not null primary key,
  run_id     bigint not null,
  hold_key   text not null,
  fraction   double precision not null check (fraction > 0 and fraction <= 0.5),
  rows       bigint not null check (rows >= 0),
  rmse       double precision,
  mae        double precision,
  r2         double precision,
  constraint holdout_errors_model_fkey foreign key (run_id, model_id)
    references models (run_id, model_id) on delete cascade
);

comment on table holdout_errors is
  'Prediction error of each model on the rows held out of its fit (residual_pass.holdout): a deterministic hash split on a key column.';
comment on column holdout_errors.model_id is 'The model whose predictions were scored.';
comment on column holdout_errors.run_id is 'The run that produced the model (copied from models).';
comment on column holdout_errors.hold_key is 'The column whose hash decided which rows were held out.';
comment on column holdout_errors.fraction is 'Share of the key''s values held out.';
comment on column holdout_errors.rows is 'Held-out rows of the segment with a positive weight.';
comment on column holdout_errors.rmse is 'Root mean squared prediction error (weighted by the fit''s weights); null without held-out rows.';
comment on column holdout_errors.mae is 'Mean absolute prediction error (weighted); null without held-out rows.';
comment on column holdout_errors.r2 is 'R² out of sample: 1 − SSE/SST about the held-out rows'' own mean; null with fewer than 2 rows.';

create view latest_coefficient_errors as
select e.*, m.fit_name, m.segment, m.segment_key
from coefficient_errors e
join latest_models m on m.model_id = e.model_id;

comment on view latest_coefficient_errors is 'coefficient_errors of the latest successful model of every fit and segment.';
comment on column latest_coefficient_errors.model_id is 'The model the coefficient belongs to.';
comment on column latest_coefficient_errors.run_id is 'The run that produced the model.';
comment on column latest_coefficient_errors.term is 'Name of the term.';
comment on column latest_coefficient_errors.method is 'How the standard error was estimated (see coefficient_errors.method).';
comment on column latest_coefficient_errors.std_error is 'Standard error by this method.';
comment on column latest_coefficient_errors.t is 'Estimate over std_error.';
comment on column latest_coefficient_errors.p is 'Two-sided p-value of t.';
comment on column latest_coefficient_errors.ci_low is 'Lower end of the confidence interval.';
comment on column latest_coefficient_errors.ci_high is 'Upper end of the confidence interval.';
comment on column latest_coefficient_errors.fit_name is 'Name of the fit.';
comment on column latest_coefficient_errors.segment is 'Segment column → value as a JSON object.';
comment on column latest_coefficient_errors.segment_key is 'Stable text form of the segment.';

create view latest_residual_tests as
select t.*, m.fit_name, m.segment, m.segment_key
from residual_tests t
join latest_models m on m.model_id = t.model_id;

comment on view latest_residual_tests is 'residual_tests of the latest successful model of every fit and segment.';
comment on column latest_residual_tests.model_id is 'The model whose residuals were tested.';
comment on column latest_residual_tests.run_id is 'The run that produced the model.';
comment on column latest_residual_tests.test is 'Name of the test or summary.';
comment on column latest_residual_tests.statistic is 'The statistic.';
comment on column latest_residual_tests.df is 'Degrees of freedom of the reference distribution.';
comment on column latest_residual_tests.p is 'p-value of the statistic.';
comment on column latest_residual_tests.extras is 'What has no column of its own (see residual_tests.extras).';
comment on column latest_residual_tests.fit_name is 'Name of the fit.';
comment on column latest_residual_tests.segment is 'Segment column → value as a JSON object.';
comment on column latest_residual_tests.segment_key is 'Stable text form of the segment.';
