-- The design of a fit in columns a dashboard can filter on (until now only inside
-- runs.spec_text): the response, the weight, the terms, the categorical columns and the
-- segment columns; and the confidence level beside the intervals in latest_coefficients.
alter table runs
  add column response text,
  add column weight text,
  add column terms text[],
  add column categorical text[],
  add column segment_by text[];

comment on column runs.response is 'The response (the column or expression explained), as the spec names it; null for runs recorded before it was kept.';
comment on column runs.weight is 'The weight column or expression; null for an unweighted fit (and for runs recorded before it was kept).';
comment on column runs.terms is
  'The terms of the spec in model order: its terms, then its categorical columns, then its interactions (a*b); without the intercept and without levels.';
comment on column runs.categorical is 'The columns the spec lists as categorical (one coefficient per level but the reference).';
comment on column runs.segment_by is 'The segment columns (one model per distinct combination); empty for a fit without segments.';

-- New columns go at the end, so create or replace keeps every earlier column where it was.
create or replace view latest_models as
select distinct on (m.fit_name, m.segment_key)
  m.model_id, m.run_id, m.fit_name, m.segment, m.segment_key, m.status, m.notes, m.method,
  m.confidence, m.intercept, m.rows, m.zero_weight_rows, m.sum_weights, m.rank, m.df_residual,
  m.rss, m.sigma, m.r2, m.r2_adjusted, m.f, m.f_df1, m.f_df2, m.f_p, m.loglik, m.aic, m.bic,
  m.condition_number, m.rank_tolerance, m.aliased_terms,
  r.started_at as run_started_at,
  r.ended_at as run_ended_at,
  m.accuracy, m.passes, m.estimated_digits,
  m.refinement_steps,
  r.response, r.weight, r.terms, r.categorical, r.segment_by
from models m
join runs r on r.run_id = m.run_id
where r.status = 'succeeded'
order by m.fit_name, m.segment_key, m.run_id desc;

-- latest_coefficients as migration 7 left it (each latest model's coefficients through
-- LATERAL, from coefficient_rows or the model's arrays), with the confidence level at the end.
create or replace view latest_coefficients as
select
  lm.fit_name, lm.segment, lm.segment_key,
  c.model_id, c.run_id, c.term_index, c.term, c.aliased, c.estimate, c.std_error, c.t, c.p,
  c.ci_low, c.ci_high, c.vif,
  lm.run_started_at, lm.run_ended_at,
  lm.confidence
from latest_models lm
cross join lateral (
  select cr.model_id, cr.run_id, cr.term_index, cr.term, cr.aliased, cr.estimate, cr.std_error, cr.t, cr.p,
    cr.ci_low, cr.ci_high, cr.vif
  from coefficient_rows cr
  where cr.model_id = lm.model_id
  union all
  select m.model_id, m.run_id, (u.ord - 1)::integer, u.term, u.aliased, u.estimate, u.std_error, u.t, u.p,
    u.ci_low, u.ci_high, u.vif
  from models m
  cross join lateral unnest(m.terms, m.term_aliased, m.estimates, m.std_errors, m.t_values, m.p_values,
    m.ci_lows, m.ci_highs, m.vifs) with ordinality as u(term, aliased, estimate, std_error, t, p, ci_low, ci_high, vif, ord)
  where m.model_id = lm.model_id and m.terms is not null
) c;

comment on column latest_models.response is 'The response of the run''s spec (runs.response).';
comment on column latest_models.weight is 'The weight of the run''s spec; null for an unweighted fit (runs.weight).';
comment on column latest_models.terms is 'The terms of the run''s spec in model order, as the spec names them (runs.terms); the model''s own coefficient terms, with levels, are models.terms.';
comment on column latest_models.categorical is 'The categorical columns of the run''s spec (runs.categorical).';
comment on column latest_models.segment_by is 'The segment columns of the run''s spec (runs.segment_by).';
comment on column latest_coefficients.confidence is 'Confidence level of ci_low and ci_high, e.g. 0.95 (models.confidence).';
