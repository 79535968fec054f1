-- Where a run read its rows when that was not the database it publishes to: the connection
-- named by the spec's read_from (a standby, a read-only role, another database) and the shards
-- whose foreign partitions were read directly. Connection names and user@host:port/database
-- only: never a password.

alter table runs add column read_from text;

comment on column runs.read_from is
  'Where the rows were read when not from this database: the read_from connection and the shards read directly, each as name (user@host:port/database); never a password. Null: read from this database.';
