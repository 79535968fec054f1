import { PlanError } from './plan-error.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/**
 * Where a partition job reads its rows when that is not the run's own source connection: a
 * postgres_fdw foreign partition, read directly from the server that holds it, over the
 * connection named like its foreign server.
 */
export interface ReadSite {
  /** The foreign server (and the name of the connection to read over). */
  readonly server: string;
  /** The foreign table on the coordinator, for messages. */
  readonly partition: string;
  /** The remote table, quoted and schema-qualified, as the shard knows it. */
  readonly remote: string;
  /** host:port/dbname from the foreign server's options, for messages. */
  readonly where: string;
}

/** One leaf partition of a table source. */
export interface LeafPartition {
  /** The leaf as the coordinator names it (quoted, schema-qualified). */
  readonly relation: string;
  /** Null for a local partition (or a foreign table of another wrapper): read as today. */
  readonly site: ReadSite | null;
}

/**
 * The leaf partitions of a table source with, for the postgres_fdw foreign ones, their foreign
 * server and remote table (from the options of `pg_foreign_server` and `pg_foreign_table`,
 * postgres_fdw's own defaults filled in: the remote schema and table are the local ones unless
 * `schema_name`/`table_name` say otherwise) and the columns the foreign table renames
 * (`column_name`). Bind the qualified table name as $1.
 */
export const LEAF_PARTITIONS_SQL = `
  SELECT format('%I.%I', n.nspname, c.relname) AS relation,
         c.relkind::text AS relkind,
         s.srvname::text AS server,
         w.fdwname::text AS wrapper,
         coalesce((SELECT substr(o, 13) FROM unnest(ft.ftoptions) o WHERE o LIKE 'schema\_name=%'), n.nspname) AS remote_schema,
         coalesce((SELECT substr(o, 12) FROM unnest(ft.ftoptions) o WHERE o LIKE 'table\_name=%'), c.relname) AS remote_table,
         coalesce((SELECT substr(o, 6) FROM unnest(s.srvoptions) o WHERE o LIKE 'host=%'), 'localhost') AS host,
         coalesce((SELECT substr(o, 6) FROM unnest(s.srvoptions) o WHERE o LIKE 'port=%'), '5432') AS port,
         coalesce((SELECT substr(o, 8) FROM unnest(s.srvoptions) o WHERE o LIKE 'dbname=%'), '') AS dbname,
         (SELECT string_agg(a.attname || ' as ' || substr(o, 13), ', ')
            FROM pg_catalog.pg_attribute a, unnest(a.attfdwoptions) o
           WHERE a.attrelid = c.oid AND o LIKE 'column\_name=%' AND substr(o, 13) <> a.attname) AS renamed
    FROM pg_catalog.pg_partition_tree($1::regclass) t
    JOIN pg_catalog.pg_class c ON c.oid = t.relid
    JOIN pg_catalog.pg_namespace n ON n.oid = c.relnamespace
    LEFT JOIN pg_catalog.pg_foreign_table ft ON ft.ftrelid = c.oid
    LEFT JOIN pg_catalog.pg_foreign_server s ON s.oid = ft.ftserver
    LEFT JOIN pg_catalog.pg_foreign_data_wrapper w ON w.oid = s.srvfdw
   WHERE t.isleaf
   ORDER BY 1`;

/**
 * The leaves of {@link LEAF_PARTITIONS_SQL}'s rows, or null when none is a postgres_fdw foreign
 * table (the source is read as today).
 *
 * @throws PlanError (key `source`) for a foreign partition that renames columns: its rows are read
 *   from the remote table by the coordinator's column names.
 */
export function leafPartitions(rows: readonly (readonly unknown[])[]): LeafPartition[] | null {
  const leaves: LeafPartition[] = rows.map((r) => {
    const [relation, relkind, server, wrapper, schema, table, host, port, dbname, renamed] = r.map((v) => (v === null ? null : String(v)));
    if (relkind !== 'f' || wrapper !== 'postgres_fdw') return { relation: relation!, site: null };
    if (renamed !== null && renamed !== undefined) {
      throw new PlanError(
        'source',
        `foreign partition ${relation} renames columns on its server (${renamed}; the column_name option): rowfold reads each shard's table by the coordinator's column names, so give the remote columns the same names`,
      );
    }
    return {
      relation: relation!,
      site: {
        server: server!,
        partition: relation!,
        remote: `${quoteIdent(schema!)}.${quoteIdent(table!)}`,
        where: `${host}:${port}/${dbname}`,
      },
    };
  });
  return leaves.some((l) => l.site !== null) ? leaves : null;
}

/** The FROM item of a partition job that reads one leaf (its remote table on a shard, or the local leaf itself). */
export function leafRelation(leaf: LeafPartition, alias: string): SqlTemplate {
  return new SqlTemplate([`${leaf.site === null ? leaf.relation : leaf.site.remote} AS ${alias}`]);
}
