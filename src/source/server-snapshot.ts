import pg from 'pg';
import type { Database, DbSession, QueryOutcome, SharedSnapshot } from './database.js';
import { maskSecrets } from '../common/mask-secrets.js';
import { pgSession } from './pg-session.js';
import { withClient } from './with-client.js';

/** The snapshot a view's session was to read could not be imported. */
export class SnapshotImportError extends Error {
  override readonly name = 'SnapshotImportError';
  /** SQLSTATE of the server's refusal, when there was one. */
  readonly code: string | undefined;
  constructor(message: string, options: { cause: unknown; code: string | undefined }) {
    super(message, { cause: options.cause });
    this.code = options.code;
  }
}

/**
 * {@link Database.shareSnapshot} on a server: a connection of its own (outside `pool`, so the
 * readers keep every pooled connection) opens a REPEATABLE READ transaction, exports its
 * snapshot and stays idle in it until the view is released; each session of the view imports
 * the snapshot in a REPEATABLE READ transaction on a pooled connection, committed when the
 * session ends.
 *
 * The holding transaction sets `idle_in_transaction_session_timeout` to 0 for itself: a server
 * that ends idle transactions would otherwise end it in the middle of a long read, and later
 * sessions (a second pass) could no longer import the snapshot. Reads already under way keep
 * their snapshot whatever happens to the holder. It writes nothing and is rolled back at the end.
 */
export async function shareServerSnapshot(base: Database, pool: pg.Pool, config: pg.ClientConfig): Promise<SharedSnapshot> {
  const holder = new pg.Client({ ...config });
  // Its end is noticed by the sessions that can no longer import the snapshot.
  holder.on('error', () => undefined);
  let released = false;
  // Ending the connection rolls the holding transaction back.
  const release = async (): Promise<void> => {
    if (released) return;
    released = true;
    await holder.end().catch(() => undefined);
  };
  let id: string;
  let holderPid: number;
  try {
    await holder.connect();
    await holder.query('BEGIN ISOLATION LEVEL REPEATABLE READ');
    await holder.query('SET LOCAL idle_in_transaction_session_timeout = 0');
    const row = (await holder.query<{ id: string; pid: number }>('SELECT pg_export_snapshot() AS id, pg_backend_pid() AS pid')).rows[0]!;
    id = row.id;
    holderPid = row.pid;
  } catch (e) {
    await release();
    throw e;
  }
  let turn: Promise<unknown> = Promise.resolve();
  const view: SharedSnapshot = {
    kind: base.kind,
    display: base.display,
    maxSessions: base.maxSessions,
    dialect: () => base.dialect(),
    close: () => base.close(),
    snapshotId: id,
    withSession: (session) => withClient(pool, (client) => importing(client, id, holderPid, session)),
    // A view of a view is the same snapshot, released by its first owner.
    shareSnapshot: async () => ({ ...view, release: async () => undefined }),
    withHoldingSession: <R>(session: (s: DbSession) => Promise<R>): Promise<R> => {
      const mine = turn.then(() => session(holdingSession(holder)));
      turn = mine.catch(() => undefined);
      return mine;
    },
    release,
  };
  return view;
}

/**
 * Tables and views the holding transaction has locked (the plan's probes took them), outside the
 * system schemas: the relations a read of the run will lock too.
 */
const HELD_RELATIONS = `
  SELECT c.oid::regclass::text
    FROM pg_catalog.pg_locks l
    JOIN pg_catalog.pg_class c ON c.oid = l.relation
   WHERE l.pid = $1 AND l.locktype = 'relation' AND l.granted
     AND l.database = (SELECT oid FROM pg_catalog.pg_database WHERE datname = current_database())
     AND c.relkind IN ('r', 'p', 'v')
     AND c.relnamespace NOT IN ('pg_catalog'::regnamespace, 'information_schema'::regnamespace)`;

async function importing<T>(client: pg.PoolClient, id: string, holderPid: number, fn: (session: DbSession) => Promise<T>): Promise<T> {
  await client.query('BEGIN ISOLATION LEVEL REPEATABLE READ');
  try {
    await client.query(`SET TRANSACTION SNAPSHOT ${client.escapeLiteral(id)}`);
  } catch (e) {
    throw new SnapshotImportError(
      `cannot read the run's snapshot ${id}: ${maskSecrets(e instanceof Error ? e.message : String(e))} ` +
        '(the connection holding it ended: the server restarted, or its session was terminated); run the fit again',
      { cause: e, code: codeOf(e) },
    );
  }
  // A statement that would alter, truncate or drop the source waits for the holding transaction,
  // and a read that asked for the source's lock after it would wait behind it: for ever, since the
  // holder lets go only when the run ends. Taking the locks at once (NOWAIT) turns that wait into
  // a clear error.
  const held = (await client.query<[string]>({ text: HELD_RELATIONS, values: [holderPid], rowMode: 'array' })).rows.map((r) => r[0]);
  if (held.length > 0) {
    try {
      await client.query(`LOCK TABLE ${held.join(', ')} IN ACCESS SHARE MODE NOWAIT`);
    } catch (e) {
      if (codeOf(e) !== '55P03') throw e;
      throw new SnapshotImportError(
        `another session is waiting to alter, truncate or drop ${held.join(', ')}, which this run has held since it planned: ` +
          'a read that waited for it would wait for ever, so the run stops here; run it again once that change is done',
        { cause: e, code: '55P03' },
      );
    }
  }
  // A failure leaves the transaction to withClient, which discards the connection.
  const out = await fn(pgSession(client));
  await client.query('COMMIT');
  return out;
}

/** Queries on the holding transaction, each behind a savepoint so that a failure leaves it usable. */
function holdingSession(client: pg.Client): DbSession {
  const guarded = async (run: () => Promise<QueryOutcome>): Promise<QueryOutcome> => {
    await client.query('SAVEPOINT rowfold_hold');
    try {
      const out = await run();
      await client.query('RELEASE SAVEPOINT rowfold_hold');
      return out;
    } catch (e) {
      await client.query('ROLLBACK TO SAVEPOINT rowfold_hold').catch(() => undefined);
      throw e;
    }
  };
  const plain = pgSession(client);
  return {
    query: (text, values) => guarded(() => plain.query(text, values)),
    exec: async (sql) => {
      await guarded(async () => {
        await plain.exec(sql);
        return { fields: [], rows: [] };
      });
    },
    readDesign: () => Promise.reject(new Error('the session holding a shared snapshot does not read design rows; read on a session of the view')),
    copyOut: () => {
      throw new Error('the session holding a shared snapshot does not copy rows; use a session of the view');
    },
    copyIn: () => Promise.reject(new Error('the session holding a shared snapshot does not copy rows; use a session of the view')),
  };
}

function codeOf(e: unknown): string | undefined {
  const code = (e as { code?: unknown } | null)?.code;
  return typeof code === 'string' ? code : undefined;
}
