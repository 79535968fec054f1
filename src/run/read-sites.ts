import type { DesignPlan } from '../plan/design-plan.js';
import { PlanOutdatedError } from '../plan/plan-outdated-error.js';
import type { ReadSite } from '../plan/shard-layout.js';
import { connectionNamed } from '../source/connections-file.js';
import type { Connections } from '../source/connections-file.js';
import type { Database } from '../source/database.js';
import { maskSecrets } from '../common/mask-secrets.js';
import { openServerDatabase } from '../source/server-database.js';

/** A partition job on a shard failed: the message names the shard, its server and its table. */
export class ShardReadError extends Error {
  override readonly name = 'ShardReadError';
  readonly server: string;
  /** SQLSTATE or Node code of the failure underneath. */
  readonly code: string | undefined;
  constructor(message: string, server: string, code: string | undefined, cause: unknown) {
    super(message, { cause });
    this.server = server;
    this.code = code;
  }
}

/** SQLSTATEs that mean the shard's table is not shaped as the coordinator's foreign table says. */
const SCHEMA_MISMATCH = new Set(['42703', '42P01', '42883', '42804', '22P02', '42846']);

/**
 * The error of a read on `site`, naming the shard. A shard whose table does not match the plan
 * (a missing table or column, a column of another type) gives a {@link PlanOutdatedError}, which
 * no retry can mend; anything else (the shard is down, its connection broke) a
 * {@link ShardReadError}, which a split run's job retries.
 */
export function shardReadError(site: ReadSite, error: unknown): Error {
  if (error instanceof ShardReadError || error instanceof PlanOutdatedError) return error;
  const code = (error as { code?: unknown } | null)?.code;
  const text = maskSecrets(error instanceof Error ? error.message : String(error));
  const where = `shard ${site.server} (foreign partition ${site.partition}, table ${site.remote} at ${site.where})`;
  if (typeof code === 'string' && SCHEMA_MISMATCH.has(code)) {
    return new PlanOutdatedError(
      `${where} does not match the plan: ${text}; the shard's table must have the columns and types of the coordinator's foreign table`,
      { cause: error, code },
    );
  }
  return new ShardReadError(`${where} could not be read: ${text}`, site.server, typeof code === 'string' ? code : undefined, error);
}

/**
 * The databases a run reads its shards from: one pool per foreign server named in the plan's
 * `sites`, over the connection of the same name in the connections file, opened when first
 * read and closed by {@link ReadSites.close}.
 */
export class ReadSites {
  readonly #connections: Connections;
  readonly #jobs = new Map<string, number>();
  readonly #open = new Map<string, Database>();

  /**
   * @throws ConnectionsFileError when a foreign server of the plan has no connection of its name.
   */
  constructor(connections: Connections, plan: DesignPlan) {
    this.#connections = connections;
    for (const site of plan.sites ?? []) {
      if (site === null) continue;
      connectionNamed(connections, site.server, `foreign partition ${site.partition} (foreign server ${site.server})`);
      this.#jobs.set(site.server, (this.#jobs.get(site.server) ?? 0) + 1);
    }
  }

  /** The servers read, each with the place its connection points at (never a password). */
  describe(): string[] {
    return [...this.#jobs.keys()].map((s) => `${s} (${this.#connections.targets.get(s)!.display})`);
  }

  /** The database of `site`'s shard. */
  database(site: ReadSite): Database {
    let db = this.#open.get(site.server);
    if (db === undefined) {
      const target = connectionNamed(this.#connections, site.server, `foreign partition ${site.partition} (foreign server ${site.server})`);
      db = openServerDatabase(target, Math.max(1, this.#jobs.get(site.server) ?? 1));
      this.#open.set(site.server, db);
    }
    return db;
  }

  /** Closes every pool opened. */
  async close(): Promise<void> {
    const open = [...this.#open.values()];
    this.#open.clear();
    await Promise.all(open.map((db) => db.close()));
  }
}
