import { execFile } from 'node:child_process';
import { chmodSync, chownSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir, userInfo } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';

const run = promisify(execFile);

/**
 * A PostgreSQL cluster of a test's own, made with the installed server's `initdb` and `pg_ctl`
 * in a temporary folder and listening on 127.0.0.1 at `port`, for tests that stop, restart or
 * fill a server: the shared server is never touched. Run as root (CI and this machine), the
 * server runs as the `postgres` user; otherwise as the user running the tests.
 *
 * @example
 * const cluster = await ThrowawayCluster.create(55410);
 * try {
 *   await cluster.restart();
 * } finally {
 *   await cluster.destroy();
 * }
 */
export class ThrowawayCluster {
  readonly port: number;
  readonly dir: string;
  readonly #bin: string;
  readonly #asPostgres: boolean;

  private constructor(port: number, dir: string, bin: string, asPostgres: boolean) {
    this.port = port;
    this.dir = dir;
    this.#bin = bin;
    this.#asPostgres = asPostgres;
  }

  /** Whether the machine can make one: PostgreSQL's binaries are installed (`pg_config` answers). */
  static async available(): Promise<boolean> {
    return run('pg_config', ['--bindir']).then(
      () => true,
      () => false,
    );
  }

  /** initdb (trust authentication for local connections) and start, at `port`. */
  static async create(port: number): Promise<ThrowawayCluster> {
    const cluster = await ThrowawayCluster.#inNewFolder(port);
    await cluster.#ctl('initdb', ['-D', cluster.dir, '-U', 'postgres', '--auth=trust', '--no-sync', '-E', 'UTF8', '--locale=C']);
    await cluster.start();
    return cluster;
  }

  /**
   * A hot standby of `primary` at `port`: `pg_basebackup -R` (streaming the WAL it needs, and
   * writing the standby signal and the primary's connection), then started; it serves read-only
   * queries and replays what the primary writes. initdb's trust rules let local replication in.
   */
  static async standbyOf(primary: ThrowawayCluster, port: number): Promise<ThrowawayCluster> {
    const cluster = await ThrowawayCluster.#inNewFolder(port);
    await cluster.#ctl('pg_basebackup', ['-h', '127.0.0.1', '-p', String(primary.port), '-U', 'postgres', '-D', cluster.dir, '-R', '-X', 'stream', '--no-sync', '-c', 'fast']);
    await cluster.start();
    return cluster;
  }

  /** A cluster at `port` whose data folder is to be made in a fresh temporary folder (owned by postgres when run as root). */
  static async #inNewFolder(port: number): Promise<ThrowawayCluster> {
    const bin = (await run('pg_config', ['--bindir'])).stdout.trim();
    const asPostgres = userInfo().uid === 0;
    const root = mkdtempSync(join(tmpdir(), `rowfold-cluster-${port}-`));
    chmodSync(root, 0o755);
    if (asPostgres) chownSync(root, ...(await postgresIds()));
    return new ThrowawayCluster(port, join(root, 'data'), bin, asPostgres);
  }

  /** A connection URL to `database` as the superuser `postgres`. */
  url(database = 'postgres', user = 'postgres'): string {
    return `postgres://${encodeURIComponent(user)}@127.0.0.1:${this.port}/${encodeURIComponent(database)}`;
  }

  /** Starts the server and waits until it accepts connections. */
  async start(): Promise<void> {
    const options = `-p ${this.port} -c listen_addresses=127.0.0.1 -k ${this.dir} -c fsync=off -c max_connections=60`;
    await this.#ctl('pg_ctl', ['-D', this.dir, '-o', options, '-l', join(this.dir, '..', 'server.log'), '-w', '-t', '120', 'start']);
  }

  /** Stops the server: `fast` ends every session (rolling back their transactions), `immediate` aborts. */
  async stop(mode: 'fast' | 'immediate' = 'fast'): Promise<void> {
    await this.#ctl('pg_ctl', ['-D', this.dir, '-m', mode, '-w', '-t', '120', 'stop']);
  }

  /** Stops and removes the cluster (whatever state it is in). */
  async destroy(): Promise<void> {
    await this.stop('immediate').catch(() => undefined);
    rmSync(join(this.dir, '..'), { recursive: true, force: true });
  }

  /** Runs a program of the server's, as the `postgres` user when the tests run as root. */
  async #ctl(program: string, args: readonly string[]): Promise<void> {
    const path = join(this.#bin, program);
    if (this.#asPostgres) await run('runuser', ['-u', 'postgres', '--', path, ...args], { cwd: tmpdir() });
    else await run(path, [...args], { cwd: tmpdir() });
  }

  /** Runs a shell command as root (a tmpfs mount); only when the tests run as root. */
  async asRoot(command: string, args: readonly string[]): Promise<void> {
    if (!this.#asPostgres) throw new Error(`${command} needs root`);
    await run(command, [...args]);
  }

  /** Whether this cluster's tests run as root (and so can mount a tmpfs). */
  get root(): boolean {
    return this.#asPostgres;
  }
}

/** The uid and gid of the `postgres` user. */
export async function postgresIds(): Promise<[number, number]> {
  const [uid, gid] = await Promise.all([run('id', ['-u', 'postgres']), run('id', ['-g', 'postgres'])]);
  return [Number(uid.stdout.trim()), Number(gid.stdout.trim())];
}
