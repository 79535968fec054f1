-- Split runs: a fit cut into partition jobs that `rowfold serve` processes work on any machine.
-- The run's plan is stored once, every partition job writes the partial factors of its
-- segments once, and the merge job publishes the run and removes the partials in one
-- transaction.

create table split_runs (
  run_id      bigint primary key references runs (run_id) on delete cascade,
  fit_name    text not null,
  partitions  integer not null check (partitions >= 2),
  plan        jsonb not null,
  created_at  timestamptz not null default now(),
  alive_until timestamptz not null
);

comment on table split_runs is
  'Runs cut into partition jobs: how many partitions, and the design plan (queries per partition) every job folds.';
comment on column split_runs.run_id is 'The run.';
comment on column split_runs.fit_name is 'Name of the fit.';
comment on column split_runs.partitions is 'Number of partition jobs the run was cut into.';
comment on column split_runs.plan is 'The design plan of the run as planned once (queries per partition, columns, levels), so every worker folds the same design.';
comment on column split_runs.created_at is 'When the run was cut into jobs.';
comment on column split_runs.alive_until is
  'Lease of the run, extended by every worker while it works one of the run''s jobs: a run still running past it was abandoned, and the next run of the fit marks it failed.';

create table split_partitions (
  run_id      bigint not null references split_runs (run_id) on delete cascade,
  partition   integer not null check (partition >= 0),
  counts      jsonb not null check (jsonb_typeof(counts) = 'object'),
  worker      text not null,
  written_at  timestamptz not null default now(),
  primary key (run_id, partition)
);

comment on table split_partitions is
  'One row per partition whose partial factors are written (at most once): what its read counted. Removed when the run publishes or fails.';
comment on column split_partitions.run_id is 'The split run.';
comment on column split_partitions.partition is 'Partition number, from 0.';
comment on column split_partitions.counts is 'Rows read, emitted and skipped (by column) in this partition.';
comment on column split_partitions.worker is 'The serve process that folded the partition (host:pid).';
comment on column split_partitions.written_at is 'When the partial factors were written.';

create table partial_factors (
  run_id            bigint not null,
  partition         integer not null,
  segment_key       text not null,
  segment_values    jsonb not null check (jsonb_typeof(segment_values) = 'array'),
  method            text not null check (method in ('qr', 'normal')),
  "order"           integer not null check ("order" >= 1),
  factor            double precision[] not null,
  factor_low        double precision[],
  shift             double precision[],
  rows              bigint not null check (rows >= 0),
  zero_weight_rows  bigint not null check (zero_weight_rows >= 0),
  sum_weights       double precision not null,
  sum_log_weights   double precision not null,
  primary key (run_id, partition, segment_key),
  foreign key (run_id, partition) references split_partitions (run_id, partition) on delete cascade
);

comment on table partial_factors is
  'Accumulator state of one segment folded by one partition job of a split run, merged by the run''s merge job.';
comment on column partial_factors.run_id is 'The split run.';
comment on column partial_factors.partition is 'Partition number, from 0.';
comment on column partial_factors.segment_key is 'Stable text key of the segment (the JSON array of its values).';
comment on column partial_factors.segment_values is 'Values of the segment columns in order, as a JSON array (empty for a fit without segments).';
comment on column partial_factors.method is 'qr (factor R of the augmented weighted design) or normal (packed Gram matrix).';
comment on column partial_factors."order" is 'Order of the augmented factor: design columns with the intercept, plus the response.';
comment on column partial_factors.factor is 'The packed upper triangle, row by row.';
comment on column partial_factors.factor_low is 'Low parts of a double-double factor; null in double precision.';
comment on column partial_factors.shift is 'Values subtracted from the term and response columns before folding (null when not shifted).';
comment on column partial_factors.rows is 'Rows with a positive weight folded.';
comment on column partial_factors.zero_weight_rows is 'Rows of weight 0 seen (not folded).';
comment on column partial_factors.sum_weights is 'Sum of the weights of the rows folded.';
comment on column partial_factors.sum_log_weights is 'Sum of the log weights of the rows folded.';
