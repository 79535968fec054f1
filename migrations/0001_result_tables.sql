-- Result tables: one row per run, per model (fit × segment × run) and per coefficient,
-- with views that always show the latest successful model of every fit and segment.
--
-- Written without schema qualification: the runner sets search_path to the result schema
-- (default rowfold) for the transaction that applies this file.

create table runs (
  run_id         bigint generated always as identity primary key,
  fit_name       text not null,
  spec_hash      text not null,
  spec_text      text not null,
  design_query   text not null,
  started_at     timestamptz not null default now(),
  ended_at       timestamptz,
  status         text not null default 'running'
                   check (status in ('running', 'succeeded', 'failed')),
  rows_read      bigint check (rows_read >= 0),
  rows_used      bigint check (rows_used >= 0),
  rows_skipped   jsonb check (rows_skipped is null or jsonb_typeof(rows_skipped) = 'object'),
  segment_count  integer check (segment_count >= 0),
  seconds        double precision,
  tool_version   text not null,
  error_message  text,
  -- A run has ended exactly when it is no longer running.
  constraint runs_ended_when_not_running check ((status = 'running') = (ended_at is null)),
  constraint runs_error_only_when_failed check (error_message is null or status = 'failed')
);

create index runs_fit_name_run_id_idx on runs (fit_name, run_id desc);

comment on table runs is
  'One row per execution of a fit: what was fitted, when, how it ended, and how many rows it read.';
comment on column runs.run_id is 'Identifier of the run, increasing in the order runs start.';
comment on column runs.fit_name is 'Name of the fit (from the fit spec).';
comment on column runs.spec_hash is 'Hash of the normalised fit spec; equal hashes mean the same model definition.';
comment on column runs.spec_text is 'The fit spec as used by the run.';
comment on column runs.design_query is 'The SQL query generated from the spec that produced the design rows.';
comment on column runs.started_at is 'When the run started.';
comment on column runs.ended_at is 'When the run succeeded or failed; null while it is running.';
comment on column runs.status is 'running, succeeded or failed. Only succeeded runs appear in the latest_* views.';
comment on column runs.rows_read is 'Rows read from the design query; null until the run succeeds.';
comment on column runs.rows_used is 'Rows that entered a model; null until the run succeeds.';
comment on column runs.rows_skipped is
  'Rows left out, by reason, e.g. {"null:temp_c": 12, "non_finite:humidity": 3, "zero_weight": 5}; null until the run succeeds.';
comment on column runs.segment_count is 'Number of models (segments) the run published; null until the run succeeds.';
comment on column runs.seconds is 'Duration of the fit in seconds as measured by rowfold; null until the run succeeds.';
comment on column runs.tool_version is 'Version of rowfold that ran the fit.';
comment on column runs.error_message is 'Why the run failed (passwords masked); null unless status is failed.';

create table models (
  model_id          bigint generated always as identity primary key,
  run_id            bigint not null references runs (run_id) on delete cascade,
  fit_name          text not null,
  segment           jsonb check (segment is null or jsonb_typeof(segment) = 'object'),
  segment_key       text not null,
  status            text not null
                      check (status in ('ok', 'no_residual_df', 'too_few_rows', 'no_rows')),
  notes             text[] not null default '{}',
  method            text not null check (method in ('qr', 'normal')),
  confidence        double precision not null check (confidence > 0 and confidence < 1),
  intercept         boolean not null,
  rows              bigint not null check (rows >= 0),
  zero_weight_rows  bigint not null check (zero_weight_rows >= 0),
  sum_weights       double precision not null,
  rank              integer not null check (rank >= 0),
  df_residual       bigint not null,
  rss               double precision,
  sigma             double precision,
  r2                double precision,
  r2_adjusted       double precision,
  f                 double precision,
  f_df1             double precision,
  f_df2             double precision,
  f_p               double precision,
  loglik            double precision,
  aic               double precision,
  bic               double precision,
  condition_number  double precision,
  rank_tolerance    double precision,
  aliased_terms     text[] not null default '{}',
  constraint models_run_id_segment_key_key unique (run_id, segment_key),
  -- Target of the coefficients' (run_id, model_id) foreign key, which keeps their run_id honest.
  constraint models_run_id_model_id_key unique (run_id, model_id),
  constraint models_unsegmented_key_is_empty check (segment is not null or segment_key = '')
);

-- Serves latest_models: per fit and segment, the newest run first.
create index models_fit_name_segment_key_run_id_idx on models (fit_name, segment_key, run_id desc);

comment on table models is 'One row per model: a fit on one segment in one run, with its fit statistics.';
comment on column models.model_id is 'Identifier of the model.';
comment on column models.run_id is 'The run that produced the model.';
comment on column models.fit_name is 'Name of the fit (copied from the run for filtering).';
comment on column models.segment is 'Segment column → value as a JSON object; null for a fit without segments.';
comment on column models.segment_key is 'Stable text form of the segment, unique within a run; empty for a fit without segments.';
comment on column models.status is
  'ok (estimates and inference), no_residual_df (estimates only), too_few_rows or no_rows (nothing estimated).';
comment on column models.notes is 'Plain-language remarks: why inference is missing, which terms are aliased.';
comment on column models.method is 'How the model was solved: qr (QR of the factor) or normal (normal equations).';
comment on column models.confidence is 'Confidence level of the coefficient intervals, e.g. 0.95.';
comment on column models.intercept is 'Whether the model has an intercept (R² and F are then about the mean).';
comment on column models.rows is 'Rows with a positive weight that entered the model.';
comment on column models.zero_weight_rows is 'Rows of the segment with weight exactly 0, left out of the model.';
comment on column models.sum_weights is 'Sum of the weights of the rows used (their count for an unweighted fit).';
comment on column models.rank is 'Number of estimated (non-aliased) coefficients, the intercept included.';
comment on column models.df_residual is 'Residual degrees of freedom: rows − rank.';
comment on column models.rss is 'Residual (weighted) sum of squares.';
comment on column models.sigma is 'Residual standard error √(rss / df_residual).';
comment on column models.r2 is 'R²; with an intercept about the (weighted) mean, without one about zero.';
comment on column models.r2_adjusted is 'R² adjusted for the number of coefficients.';
comment on column models.f is 'Overall F statistic against the intercept-only (or, without intercept, the empty) model; Infinity for an exact fit.';
comment on column models.f_df1 is 'Numerator degrees of freedom of f.';
comment on column models.f_df2 is 'Denominator degrees of freedom of f.';
comment on column models.f_p is 'p-value of f.';
comment on column models.loglik is 'Gaussian log-likelihood at the maximum-likelihood variance.';
comment on column models.aic is 'Akaike information criterion (coefficients plus the error variance counted).';
comment on column models.bic is 'Bayesian information criterion (coefficients plus the error variance counted).';
comment on column models.condition_number is '2-norm condition number of the column-scaled design (estimated terms).';
comment on column models.rank_tolerance is 'Relative tolerance on unit-norm columns used to decide the rank; NaN when nothing was solved.';
comment on column models.aliased_terms is 'Terms that are linear combinations of earlier terms and were not estimated.';

create table coefficients (
  model_id    bigint not null,
  run_id      bigint not null,
  term_index  integer not null check (term_index >= 0),
  term        text not null,
  aliased     boolean not null,
  estimate    double precision,
  std_error   double precision,
  t           double precision,
  p           double precision,
  ci_low      double precision,
  ci_high     double precision,
  vif         double precision,
  primary key (model_id, term_index),
  constraint coefficients_model_fkey foreign key (run_id, model_id)
    references models (run_id, model_id) on delete cascade
);

comment on table coefficients is 'One row per model and term, in the order of the terms in the model.';
comment on column coefficients.model_id is 'The model the coefficient belongs to.';
comment on column coefficients.run_id is 'The run that produced the model (copied from models).';
comment on column coefficients.term_index is 'Position of the term in the model, from 0 (the intercept, when the model has one).';
comment on column coefficients.term is 'Name of the term: intercept, a column, a categorical level or an interaction.';
comment on column coefficients.aliased is 'True when the term is a linear combination of earlier terms and was not estimated.';
comment on column coefficients.estimate is 'Estimated coefficient; null when aliased or not estimated.';
comment on column coefficients.std_error is 'Standard error of the estimate; null without inference.';
comment on column coefficients.t is 't statistic estimate / std_error.';
comment on column coefficients.p is 'Two-sided p-value of t.';
comment on column coefficients.ci_low is 'Lower bound of the confidence interval (level in models.confidence).';
comment on column coefficients.ci_high is 'Upper bound of the confidence interval (level in models.confidence).';
comment on column coefficients.vif is 'Variance inflation factor; null for the intercept and aliased terms.';

-- The newest succeeded run that has the segment wins. "Newest" is the run that started last
-- (highest run_id), so it read the freshest data; runs that are running or failed are ignored,
-- and a segment missing from a newer run keeps showing its last model.
create view latest_models as
select distinct on (m.fit_name, m.segment_key)
  m.model_id, m.run_id, m.fit_name, m.segment, m.segment_key, m.status, m.notes, m.method,
  m.confidence, m.intercept, m.rows, m.zero_weight_rows, m.sum_weights, m.rank, m.df_residual,
  m.rss, m.sigma, m.r2, m.r2_adjusted, m.f, m.f_df1, m.f_df2, m.f_p, m.loglik, m.aic, m.bic,
  m.condition_number, m.rank_tolerance, m.aliased_terms,
  r.started_at as run_started_at,
  r.ended_at as run_ended_at
from models m
join runs r on r.run_id = m.run_id
where r.status = 'succeeded'
order by m.fit_name, m.segment_key, m.run_id desc;

comment on view latest_models is
  'For every fit and segment, its model from the newest succeeded run that has the segment.';

create view latest_coefficients as
select
  lm.fit_name, lm.segment, lm.segment_key,
  c.model_id, c.run_id, c.term_index, c.term, c.aliased, c.estimate, c.std_error, c.t, c.p,
  c.ci_low, c.ci_high, c.vif,
  lm.run_started_at, lm.run_ended_at
from latest_models lm
join coefficients c on c.model_id = lm.model_id;

comment on view latest_coefficients is
  'The coefficients of every model in latest_models, with the fit and segment they belong to.';

-- View columns carry the same meaning as the table columns they come from: copy the comments
-- rather than repeat them, then document the columns that come from runs.
do $$
declare
  col record;
begin
  for col in
    select v.relname as view_name, va.attname as column_name, col_description(t.oid, ta.attnum) as description
    from pg_class v
    join pg_namespace n on n.oid = v.relnamespace
    join pg_attribute va on va.attrelid = v.oid and va.attnum > 0 and not va.attisdropped
    join pg_class t on t.relnamespace = v.relnamespace
      and t.relname = case v.relname when 'latest_models' then 'models' else
        case when va.attname in ('fit_name', 'segment', 'segment_key') then 'models' else 'coefficients' end end
    join pg_attribute ta on ta.attrelid = t.oid and ta.attname = va.attname
    where n.nspname = current_schema()
      and v.relname in ('latest_models', 'latest_coefficients')
  loop
    execute format('comment on column %I.%I.%I is %L', current_schema(), col.view_name, col.column_name, col.description);
  end loop;
end
$$;

comment on column latest_models.run_started_at is 'When the run that produced the model started.';
comment on column latest_models.run_ended_at is 'When the run that produced the model succeeded.';
comment on column latest_coefficients.run_started_at is 'When the run that produced the model started.';
comment on column latest_coefficients.run_ended_at is 'When the run that produced the model succeeded.';
