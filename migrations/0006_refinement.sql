-- Models whose digits iterative refinement recovered: the accuracy path `refined` (the double
-- factor's solution corrected with residuals summed in compensated arithmetic over further
-- passes) and the number of refinement steps a model took.
alter table models drop constraint models_accuracy_check;
alter table models
  add constraint models_accuracy_check check (accuracy in ('fast', 'refined', 'extended')),
  add column refinement_steps int not null default 0 check (refinement_steps >= 0);

comment on column models.accuracy is
  'How the published numbers were computed: fast (double precision, one pass), refined (the double factor''s solution corrected by iterative refinement) or extended (double-double factor, refined solves).';
comment on column models.passes is
  'Streamed passes over the model''s rows: 1, plus one per refinement step, plus one for a double-double fold.';
comment on column models.refinement_steps is
  'Refinement steps taken (each one streamed pass over the model''s rows); 0 unless accuracy is refined.';

create or replace view latest_models as
select distinct on (m.fit_name, m.segment_key)
  m.model_id, m.run_id, m.fit_name, m.segment, m.segment_key, m.status, m.notes, m.method,
  m.confidence, m.intercept, m.rows, m.zero_weight_rows, m.sum_weights, m.rank, m.df_residual,
  m.rss, m.sigma, m.r2, m.r2_adjusted, m.f, m.f_df1, m.f_df2, m.f_p, m.loglik, m.aic, m.bic,
  m.condition_number, m.rank_tolerance, m.aliased_terms,
  r.started_at as run_started_at,
  r.ended_at as run_ended_at,
  m.accuracy, m.passes, m.estimated_digits,
  m.refinement_steps
from models m
join runs r on r.run_id = m.run_id
where r.status = 'succeeded'
order by m.fit_name, m.segment_key, m.run_id desc;

comment on column latest_models.accuracy is
  'How the published numbers were computed: fast (double precision, one pass), refined (the double factor''s solution corrected by iterative refinement) or extended (double-double factor, refined solves).';
comment on column latest_models.passes is
  'Streamed passes over the model''s rows: 1, plus one per refinement step, plus one for a double-double fold.';
comment on column latest_models.refinement_steps is
  'Refinement steps taken (each one streamed pass over the model''s rows); 0 unless accuracy is refined.';
