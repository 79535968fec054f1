-- Incremental refits, rolling windows and drift: the accumulator state of every segment (and
-- time bucket) with the watermark it reached, written in the same transaction as the run's
-- models; one drift test per segment of every refit; a view of the flagged segments.

alter table runs
  add column refit text check (refit in ('full', 'incremental')),
  add column watermark_from text,
  add column watermark_to text,
  add column notes text[] not null default '{}';

comment on column runs.refit is
  'For a fit with a watermark or window: full (every row up to watermark_to) or incremental (only rows above watermark_from, merged with stored state); null otherwise.';
comment on column runs.watermark_from is 'Watermark of the stored state an incremental run started from (rows above it were read); null for a full run.';
comment on column runs.watermark_to is 'Highest watermark value present in the source when the run started; rows up to it were read.';
comment on column runs.notes is 'Plain-language remarks on the run, e.g. why a full refit was taken instead of an incremental one.';

create table fit_states (
  fit_name          text not null,
  segment_key       text not null,
  bucket            text not null,
  design_hash       text not null,
  segment           jsonb check (segment is null or jsonb_typeof(segment) = 'object'),
  run_id            bigint not null references runs (run_id) on delete cascade,
  watermark         text not null,
  watermark_type    text not null,
  method            text not null check (method in ('qr', 'normal')),
  "order"           integer not null check ("order" >= 1),
  factor            double precision[] not null,
  shift             double precision[],
  rows              bigint not null check (rows >= 0),
  zero_weight_rows  bigint not null check (zero_weight_rows >= 0),
  sum_weights       double precision not null,
  sum_log_weights   double precision not null,
  primary key (fit_name, segment_key, bucket)
);

comment on table fit_states is
  'Accumulator state per fit, segment and time bucket: the packed R factor and counts that a refit merges instead of reading old rows again.';
comment on column fit_states.fit_name is 'Name of the fit.';
comment on column fit_states.segment_key is 'Stable text key of the segment (as in models.segment_key).';
comment on column fit_states.bucket is 'Start of the time bucket (YYYY-MM-DD) for a window fit; empty otherwise.';
comment on column fit_states.design_hash is
  'sha256 of everything that gives the factor its meaning (source, terms, levels, response, weight, intercept, method, segments, watermark, window); state with another hash is not merged.';
comment on column fit_states.segment is 'Segment column → value as a JSON object; null for a fit without segments.';
comment on column fit_states.run_id is 'The run that last wrote the state.';
comment on column fit_states.watermark is 'Highest watermark value the fit has read (as text in the column''s own type); rows above it are new.';
comment on column fit_states.watermark_type is 'SQL type of the watermark column, used to compare against it.';
comment on column fit_states.method is 'qr (factor R of the augmented weighted design) or normal (packed Gram matrix).';
comment on column fit_states."order" is 'Order of the augmented factor: design columns with the intercept, plus the response.';
comment on column fit_states.factor is 'The packed upper triangle, row by row.';
comment on column fit_states.shift is 'Values subtracted from the term and response columns before folding (null when not shifted).';
comment on column fit_states.rows is 'Rows with a positive weight folded into the state.';
comment on column fit_states.zero_weight_rows is 'Rows of weight 0 seen (not folded).';
comment on column fit_states.sum_weights is 'Sum of the weights of the rows folded.';
comment on column fit_states.sum_log_weights is 'Sum of the log weights of the rows folded (for the weighted log-likelihood).';

create table drift_tests (
  run_id          bigint not null references runs (run_id) on delete cascade,
  fit_name        text not null,
  segment         jsonb check (segment is null or jsonb_typeof(segment) = 'object'),
  segment_key     text not null,
  previous_run_id bigint,
  rows_before     bigint not null,
  rows_new        bigint not null,
  level           double precision not null,
  test            text check (test in ('chow', 'chow_predictive')),
  f               double precision,
  f_df1           double precision,
  f_df2           double precision,
  f_p             double precision,
  z_critical      double precision,
  max_abs_z       double precision,
  flagged_terms   text[] not null default '{}',
  term_changes    jsonb not null default '[]',
  flagged         boolean not null,
  primary key (run_id, segment_key)
);

create index drift_tests_fit_name_segment_key_run_id_idx on drift_tests (fit_name, segment_key, run_id desc);

comment on table drift_tests is
  'One row per segment of a refit that had earlier state: the new rows compared with the fit before them.';
comment on column drift_tests.run_id is 'The refit that made the comparison.';
comment on column drift_tests.fit_name is 'Name of the fit.';
comment on column drift_tests.segment is 'Segment column → value as a JSON object; null for a fit without segments.';
comment on column drift_tests.segment_key is 'Stable text key of the segment.';
comment on column drift_tests.previous_run_id is 'The run that wrote the state compared against (the previous fit).';
comment on column drift_tests.rows_before is 'Rows of the previous fit (its stored state).';
comment on column drift_tests.rows_new is 'Rows this refit read for the segment.';
comment on column drift_tests.level is 'Significance level of both tests (0.01): family-wise over the terms, and of the F test.';
comment on column drift_tests.test is
  'chow: F test of equal coefficients before and after (Chow 1960, Econometrica 28(3), first test); chow_predictive: too few new rows for a fit of their own, so F test of the new rows against the previous model (Chow 1960, second test); null when neither is possible.';
comment on column drift_tests.f is 'F statistic of the Chow test.';
comment on column drift_tests.f_df1 is 'Numerator degrees of freedom of f.';
comment on column drift_tests.f_df2 is 'Denominator degrees of freedom of f.';
comment on column drift_tests.f_p is 'p-value of f.';
comment on column drift_tests.z_critical is
  'Two-sided normal quantile at level / (number of compared terms) (Bonferroni); a term whose |z| exceeds it is flagged.';
comment on column drift_tests.max_abs_z is 'Largest |z| over the compared terms.';
comment on column drift_tests.flagged_terms is 'Terms whose change exceeds z_critical.';
comment on column drift_tests.term_changes is
  'Per term: {term, before, after, z} with before the previous fit, after the fit of the new rows alone, z = (after − before) / √(se_before² + se_after²).';
comment on column drift_tests.flagged is 'True when a term is flagged or the Chow test rejects at level.';

-- For every fit and segment, the newest drift test of a succeeded run, when it flagged drift.
create view drift as
select *
from (
  select distinct on (d.fit_name, d.segment_key)
    d.fit_name, d.segment, d.segment_key, d.run_id, d.previous_run_id, d.rows_before, d.rows_new,
    d.test, d.f, d.f_p, d.max_abs_z, d.flagged_terms, d.term_changes, d.flagged,
    r.ended_at as run_ended_at
  from drift_tests d
  join runs r on r.run_id = d.run_id
  where r.status = 'succeeded'
  order by d.fit_name, d.segment_key, d.run_id desc
) newest
where flagged;

comment on view drift is 'Segments whose newest refit flagged drift: coefficients moved beyond their standard errors, or the Chow test rejected.';
comment on column drift.fit_name is 'Name of the fit.';
comment on column drift.segment is 'Segment column → value as a JSON object.';
comment on column drift.segment_key is 'Stable text key of the segment.';
comment on column drift.run_id is 'The refit that flagged drift.';
comment on column drift.previous_run_id is 'The run of the previous fit.';
comment on column drift.rows_before is 'Rows of the previous fit.';
comment on column drift.rows_new is 'Rows the refit read for the segment.';
comment on column drift.test is 'chow or chow_predictive (see drift_tests.test).';
comment on column drift.f is 'F statistic of the Chow test.';
comment on column drift.f_p is 'p-value of f.';
comment on column drift.max_abs_z is 'Largest |z| over the compared terms.';
comment on column drift.flagged_terms is 'Terms whose change exceeds the Bonferroni critical value.';
comment on column drift.term_changes is 'Per term: before, after and z.';
comment on column drift.flagged is 'Always true here.';
comment on column drift.run_ended_at is 'When the refit succeeded.';
