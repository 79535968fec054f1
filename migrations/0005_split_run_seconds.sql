-- Where the time of a split run went. `runs.seconds` of a split run is its whole duration, from
-- its start to its publication; these are its parts, written when the run publishes.

alter table split_runs
  add column partition_seconds double precision,
  add column slowest_partition_seconds double precision,
  add column merge_seconds double precision;

comment on column split_runs.partition_seconds is
  'Seconds the partition jobs spent reading and folding their partitions, summed over the partitions (they may run at once, on several machines); null until the run publishes.';
comment on column split_runs.slowest_partition_seconds is
  'Seconds the slowest partition job spent reading and folding its partition; null until the run publishes.';
comment on column split_runs.merge_seconds is
  'Seconds the merge job spent merging the partial factors, solving (with any double-double pass over the partitions) and preparing the models; null until the run publishes.';
