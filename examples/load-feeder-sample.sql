-- Loads examples/feeder-sample.csv (synthetic hourly load of one feeder) into a table.
-- Run from the repository root: psql -f examples/load-feeder-sample.sql
DROP TABLE IF EXISTS feeder_sample;
CREATE TABLE feeder_sample (
  hour_start   timestamptz,
  temp_c       float8,
  humidity_pct float8,
  is_weekday   int,
  is_holiday   int,
  is_daytime   int,
  load_mw      float8
);
\copy feeder_sample FROM 'examples/feeder-sample.csv' WITH (FORMAT csv, HEADER true)
