-- One row per model, however many segments: the coefficients of a run published from now on
-- travel as arrays on their model's row (one array per column, element i for term i), so a run
-- of a hundred thousand segments writes a hundred thousand rows, not half a million with a
-- foreign-key check each. Readers keep the long form: `coefficients` becomes a view with the
-- same columns, one row per model and term, over the rows of earlier runs (kept as they were, in
-- coefficient_rows) and the arrays of later ones. Filter the view by run_id or model_id with
-- constants (they reach into it and use the keys); a join condition alone does not, so join
-- through LATERAL as latest_coefficients does.

alter table models
  add column terms text[],
  add column term_aliased boolean[],
  add column estimates double precision[],
  add column std_errors double precision[],
  add column t_values double precision[],
  add column p_values double precision[],
  add column ci_lows double precision[],
  add column ci_highs double precision[],
  add column vifs double precision[],
  -- The arrays come together or not at all, and have one element per term.
  add constraint models_coefficient_arrays_check check (
    (terms is null and term_aliased is null and estimates is null and std_errors is null and t_values is null
      and p_values is null and ci_lows is null and ci_highs is null and vifs is null)
    or (cardinality(term_aliased) = cardinality(terms) and cardinality(estimates) = cardinality(terms)
      and cardinality(std_errors) = cardinality(terms) and cardinality(t_values) = cardinality(terms)
      and cardinality(p_values) = cardinality(terms) and cardinality(ci_lows) = cardinality(terms)
      and cardinality(ci_highs) = cardinality(terms) and cardinality(vifs) = cardinality(terms))
  );

comment on column models.terms is 'Names of the model''s terms in order (element i is coefficient term_index i); read them in long form from the coefficients view. Null for models of runs before migration 7, whose coefficients are rows of coefficient_rows.';
comment on column models.term_aliased is 'Per term: true when it is a linear combination of earlier terms and was not estimated (see coefficients.aliased).';
comment on column models.estimates is 'Per term: the estimated coefficient, null when aliased or not estimated (see coefficients.estimate).';
comment on column models.std_errors is 'Per term: standard error of the estimate (see coefficients.std_error).';
comment on column models.t_values is 'Per term: t statistic estimate / std_error (see coefficients.t).';
comment on column models.p_values is 'Per term: two-sided p-value of t (see coefficients.p).';
comment on column models.ci_lows is 'Per term: lower bound of the confidence interval (see coefficients.ci_low).';
comment on column models.ci_highs is 'Per term: upper bound of the confidence interval (see coefficients.ci_high).';
comment on column models.vifs is 'Per term: variance inflation factor (see coefficients.vif).';

alter table coefficients rename to coefficient_rows;
comment on table coefficient_rows is
  'Coefficients of runs published before migration 7, one row per model and term; read them (and those of later runs) through the coefficients view.';

create view coefficients as
select c.model_id, c.run_id, c.term_index, c.term, c.aliased, c.estimate, c.std_error, c.t, c.p,
  c.ci_low, c.ci_high, c.vif
from coefficient_rows c
union all
select m.model_id, m.run_id, (u.ord - 1)::integer as term_index, u.term, u.aliased, u.estimate,
  u.std_error, u.t, u.p, u.ci_low, u.ci_high, u.vif
from models m
cross join lateral unnest(m.terms, m.term_aliased, m.estimates, m.std_errors, m.t_values, m.p_values,
  m.ci_lows, m.ci_highs, m.vifs) with ordinality as u(term, aliased, estimate, std_error, t, p, ci_low, ci_high, vif, ord)
where m.terms is not null;

comment on view coefficients is 'One row per model and term, in the order of the terms in the model.';

-- latest_coefficients read the table by its identity: point it at the coefficients of each
-- latest model through LATERAL, so that a dashboard reading one fit reads that fit's models by
-- their keys (a join with the coefficients view would unnest every model of every run first).
create or replace view latest_coefficients as
select
  lm.fit_name, lm.segment, lm.segment_key,
  c.model_id, c.run_id, c.term_index, c.term, c.aliased, c.estimate, c.std_error, c.t, c.p,
  c.ci_low, c.ci_high, c.vif,
  lm.run_started_at, lm.run_ended_at
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

-- The view's columns mean what the table's did: copy their comments.
do $$
declare
  col record;
begin
  for col in
    select a.attname as column_name, col_description(t.oid, a.attnum) as description
    from pg_class t
    join pg_namespace n on n.oid = t.relnamespace
    join pg_attribute a on a.attrelid = t.oid and a.attnum > 0 and not a.attisdropped
    where n.nspname = current_schema() and t.relname = 'coefficient_rows'
  loop
    execute format('comment on column %I.coefficients.%I is %L', current_schema(), col.column_name, col.description);
  end loop;
end
$$;
