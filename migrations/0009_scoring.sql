-- Models in use: the covariance of every model's estimates (packed, with its term order), the
-- design levels a run fitted with (so rows can be put through the same design later), and the
-- record of every scoring: counts by reason, out-of-sample error per segment and a sample of
-- actual against predicted values.

alter table runs add column design_levels jsonb
  check (design_levels is null or jsonb_typeof(design_levels) = 'array');

comment on column runs.design_levels is
  'Levels of every categorical column as the run fitted them: [{"column", "levels", "reference"}] in spec order; null for runs written before scoring existed.';

create table covariances (
  model_id     bigint primary key,
  run_id       bigint not null,
  term_index   integer[] not null,
  terms        text[] not null,
  packed       double precision[] not null,
  constraint covariances_model_fkey foreign key (run_id, model_id)
    references models (run_id, model_id) on delete cascade,
  constraint covariances_terms_match check (cardinality(terms) = cardinality(term_index)),
  constraint covariances_packed_length
    check (cardinality(packed) = cardinality(terms) * (cardinality(terms) + 1) / 2)
);

comment on table covariances is
  'Covariance σ²(XᵀWX)⁻¹ of the estimated (non-aliased) coefficients of every model with inference, packed.';
comment on column covariances.model_id is 'The model.';
comment on column covariances.run_id is 'The run that produced the model.';
comment on column covariances.term_index is 'term_index (as in coefficients) of each estimated term, in the order of the matrix.';
comment on column covariances.terms is 'Name of each estimated term, in the order of the matrix.';
comment on column covariances.packed is
  'Upper triangle row by row: (0,0), (0,1), …, (0,k−1), (1,1), …, (k−1,k−1) for k terms.';

-- Entry (i, j) of a packed upper triangle of order k, i ≤ j, 1-based: row i starts after
-- the (i−1) longer rows above it.
create function covariance_entry(packed double precision[], k integer, i integer, j integer)
returns double precision
language sql immutable strict parallel safe
return packed[(least(i, j) - 1) * k - (least(i, j) - 1) * (least(i, j) - 2) / 2 + (greatest(i, j) - least(i, j)) + 1];

comment on function covariance_entry(double precision[], integer, integer, integer) is
  'Entry (i, j) (1-based, either order) of a packed upper triangle of order k.';

-- xᵀCx for a design row x (in coefficient order: term_index 0 is x[1]) and a packed
-- covariance over the terms at term_index: the variance of the fitted mean at x.
create function covariance_quadratic(packed double precision[], term_index integer[], x double precision[])
returns double precision
language sql immutable strict parallel safe
begin atomic
  select sum(x[term_index[a] + 1] * x[term_index[b] + 1]
             * covariance_entry(packed, cardinality(term_index), a, b))
    from generate_subscripts(term_index, 1) a, generate_subscripts(term_index, 1) b;
end;

comment on function covariance_quadratic(double precision[], integer[], double precision[]) is
  'xᵀCx: the variance of the fitted mean at the design row x (in coefficient order) under the packed covariance C.';

create view covariance_entries as
select c.model_id, c.run_id, c.terms[a] as term_a, c.terms[b] as term_b,
       covariance_entry(c.packed, cardinality(c.terms), a, b) as value
  from covariances c,
       generate_subscripts(c.terms, 1) a,
       generate_subscripts(c.terms, 1) b;

comment on view covariance_entries is
  'Every model''s covariance in long form: one row per pair of estimated terms (both orders).';
comment on column covariance_entries.model_id is 'The model.';
comment on column covariance_entries.run_id is 'The run that produced the model.';
comment on column covariance_entries.term_a is 'Row term.';
comment on column covariance_entries.term_b is 'Column term.';
comment on column covariance_entries.value is 'Covariance of the two estimates (the variance when term_a = term_b).';

create view latest_covariances as
select lm.fit_name, lm.segment, lm.segment_key, e.model_id, e.run_id, e.term_a, e.term_b, e.value
  from latest_models lm
  join covariance_entries e on e.model_id = lm.model_id;

comment on view latest_covariances is 'The covariance of every model in latest_models, in long form.';
comment on column latest_covariances.fit_name is 'Name of the fit.';
comment on column latest_covariances.segment is 'Segment column → value as a JSON object; null for a fit without segments.';
comment on column latest_covariances.segment_key is 'Stable text key of the segment.';
comment on column latest_covariances.model_id is 'The model.';
comment on column latest_covariances.run_id is 'The run that produced the model.';
comment on column latest_covariances.term_a is 'Row term.';
comment on column latest_covariances.term_b is 'Column term.';
comment on column latest_covariances.value is 'Covariance of the two estimates.';

create table scorings (
  scoring_id     bigint generated always as identity primary key,
  fit_name       text not null,
  run_id         bigint,
  source         text not null,
  target         text not null,
  level          double precision not null check (level > 0 and level < 1),
  started_at     timestamptz not null default now(),
  ended_at       timestamptz not null default clock_timestamp(),
  rows_read      bigint not null check (rows_read >= 0),
  rows_scored    bigint not null check (rows_scored >= 0),
  rows_skipped   jsonb not null check (jsonb_typeof(rows_skipped) = 'object'),
  seconds        double precision not null,
  tool_version   text not null
);

create index scorings_fit_name_scoring_id_idx on scorings (fit_name, scoring_id desc);

comment on table scorings is 'One row per scoring of rows by a fit''s models, written in the transaction that wrote the scores.';
comment on column scorings.scoring_id is 'Identifier of the scoring.';
comment on column scorings.fit_name is 'Name of the fit whose models scored the rows.';
comment on column scorings.run_id is 'The run asked for (--run); null when every segment took its latest model.';
comment on column scorings.source is 'The source the rows came from (a table name or a query).';
comment on column scorings.target is 'The table the scores were written to.';
comment on column scorings.level is 'Level of the prediction intervals.';
comment on column scorings.started_at is 'When the scoring transaction started.';
comment on column scorings.ended_at is 'When the scores were written.';
comment on column scorings.rows_read is 'Rows read from the source.';
comment on column scorings.rows_scored is 'Rows written with a prediction.';
comment on column scorings.rows_skipped is
  'Rows not scored, by reason: {"no_model": 3, "new_level:region": 2, "null:temp_c": 1, "non_finite:humidity": 1, "no_estimates": 4}.';
comment on column scorings.seconds is 'Duration of the scoring in seconds.';
comment on column scorings.tool_version is 'Version of rowfold that scored.';

create table scoring_segments (
  scoring_id   bigint not null references scorings (scoring_id) on delete cascade,
  segment      jsonb check (segment is null or jsonb_typeof(segment) = 'object'),
  segment_key  text not null,
  run_id       bigint not null,
  rows_scored  bigint not null,
  rows_actual  bigint not null,
  mean_error   double precision,
  mae          double precision,
  rmse         double precision,
  outside_interval bigint not null,
  primary key (scoring_id, segment_key)
);

comment on table scoring_segments is
  'Per scoring and segment: how the predictions compare with the actual response, where the source has it (out-of-sample error when the rows were not fitted).';
comment on column scoring_segments.scoring_id is 'The scoring.';
comment on column scoring_segments.segment is 'Segment column → value as a JSON object; null for a fit without segments.';
comment on column scoring_segments.segment_key is 'Stable text key of the segment.';
comment on column scoring_segments.run_id is 'The run whose model scored the segment.';
comment on column scoring_segments.rows_scored is 'Rows of the segment scored.';
comment on column scoring_segments.rows_actual is 'Scored rows whose response was present (the error statistics are over these).';
comment on column scoring_segments.mean_error is 'Mean of actual − predicted.';
comment on column scoring_segments.mae is 'Mean absolute error.';
comment on column scoring_segments.rmse is 'Root mean squared error.';
comment on column scoring_segments.outside_interval is 'Rows whose actual value fell outside the prediction interval.';

create table scoring_samples (
  scoring_id   bigint not null references scorings (scoring_id) on delete cascade,
  segment_key  text not null,
  actual       double precision not null,
  predicted    double precision not null,
  interval_low double precision,
  interval_high double precision
);

create index scoring_samples_scoring_id_segment_key_idx on scoring_samples (scoring_id, segment_key);

comment on table scoring_samples is
  'A uniform sample (reservoir, at most 200 rows per segment) of actual against predicted values of a scoring, for plots.';
comment on column scoring_samples.scoring_id is 'The scoring.';
comment on column scoring_samples.segment_key is 'Stable text key of the segment.';
comment on column scoring_samples.actual is 'The actual response.';
comment on column scoring_samples.predicted is 'The prediction.';
comment on column scoring_samples.interval_low is 'Lower end of the prediction interval.';
comment on column scoring_samples.interval_high is 'Upper end of the prediction interval.';

-- The newest scoring of every fit, per segment: predicted against actual for dashboards.
create view latest_scoring_segments as
select s.fit_name, s.scoring_id, s.target, s.ended_at, g.segment, g.segment_key, g.run_id,
       g.rows_scored, g.rows_actual, g.mean_error, g.mae, g.rmse, g.outside_interval
  from (select distinct on (fit_name) * from scorings order by fit_name, scoring_id desc) s
  join scoring_segments g on g.scoring_id = s.scoring_id;

comment on view latest_scoring_segments is 'The per-segment error of the newest scoring of every fit.';
comment on column latest_scoring_segments.fit_name is 'Name of the fit.';
comment on column latest_scoring_segments.scoring_id is 'The newest scoring of the fit.';
comment on column latest_scoring_segments.target is 'The table the scores were written to.';
comment on column latest_scoring_segments.ended_at is 'When the scores were written.';
comment on column latest_scoring_segments.segment is 'Segment column → value as a JSON object; null for a fit without segments.';
comment on column latest_scoring_segments.segment_key is 'Stable text key of the segment.';
comment on column latest_scoring_segments.run_id is 'The run whose model scored the segment.';
comment on column latest_scoring_segments.rows_scored is 'Rows of the segment scored.';
comment on column latest_scoring_segments.rows_actual is 'Scored rows whose response was present.';
comment on column latest_scoring_segments.mean_error is 'Mean of actual − predicted.';
comment on column latest_scoring_segments.mae is 'Mean absolute error.';
comment on column latest_scoring_segments.rmse is 'Root mean squared error.';
comment on column latest_scoring_segments.outside_interval is 'Rows whose actual value fell outside the prediction interval.';
