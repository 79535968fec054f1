-- How each model's numbers were computed: the arithmetic path, the streamed passes the run
-- took, and the estimated correct significant digits.
alter table models
  add column accuracy text not null default 'fast' check (accuracy in ('fast', 'extended')),
  add column passes int not null default 1 check (passes >= 1),
  add column estimated_digits double precision;

comment on column models.accuracy is
  'Arithmetic of the published numbers: fast (double precision) or extended (double-double factor, refined solves).';
comment on column models.passes is 'Streamed passes over the data the run took (2 when accuracy auto added a double-double pass).';
comment on column models.estimated_digits is
  'Estimated correct significant digits of the least accurate estimate or standard error.';

create or replace view latest_models as
select distinct on (m.fit_name, m.segment_key)
  m.model_id, m.run_id, m.fit_name, m.segment, m.segment_key, m.status, m.notes, m.method,
  m.confidence, m.intercept, m.rows, m.zero_weight_rows, m.sum_weights, m.rank, m.df_residual,
  m.rss, m.sigma, m.r2, m.r2_adjusted, m.f, m.f_df1, m.f_df2, m.f_p, m.loglik, m.aic, m.bic,
  m.condition_number, m.rank_tolerance, m.aliased_terms,
  r.started_at as run_started_at,
  r.ended_at as run_ended_at,
  m.accuracy, m.passes, m.estimated_digits
from models m
join runs r on r.run_id = m.run_id
where r.status = 'succeeded'
order by m.fit_name, m.segment_key, m.run_id desc;

comment on column latest_models.accuracy is
  'Arithmetic of the published numbers: fast (double precision) or extended (double-double factor, refined solves).';
comment on column latest_models.passes is 'Streamed passes over the data the run took (2 when accuracy auto added a double-double pass).';
comment on column latest_models.estimated_digits is
  'Estimated correct significant digits of the least accurate estimate or standard error.';
