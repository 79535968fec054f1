import { execFile } from 'node:child_process';
import { chmodSync, chownSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir, userInfo } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';

const run = promisify(execFile);

/**
 * A PostgreSQL cluster of the bench's own (the machine's initdb and pg_ctl, in a temporary
 * folder, on 127.0.0.1:`port`), as the shards of bench:shards. As root, the server runs as
 * the postgres user.
 */
export class LocalCluster {
  private constructor(
    readonly port: number,
    readonly dir: string,
    private readonly bin: string,
    private readonly asPostgres: boolean,
  ) {}

  static async create(port: number): Promise<LocalCluster> {
    const bin = (await run('pg_config', ['--bindir'])).stdout.trim();
    const asPostgres = userInfo().uid === 0;
    const root = mkdtempSync(join(tmpdir(), `rowfold-bench-shard-${port}-`));
    chmodSync(root, 0o755);
    if (asPostgres) {
      const [uid, gid] = await Promise.all([run('id', ['-u', 'postgres']), run('id', ['-g', 'postgres'])]);
      chownSync(root, Number(uid.stdout.trim()), Number(gid.stdout.trim()));
    }
    const cluster = new LocalCluster(port, join(root, 'data'), bin, asPostgres);
    await cluster.ctl('initdb', ['-D', cluster.dir, '-U', 'postgres', '--auth=trust', '--no-sync', '-E', 'UTF8', '--locale=C']);
    const options = `-p ${port} -c listen_addresses=127.0.0.1 -k ${cluster.dir} -c fsync=off -c shared_buffers=256MB`;
    await cluster.ctl('pg_ctl', ['-D', cluster.dir, '-o', options, '-l', join(root, 'server.log'), '-w', '-t', '120', 'start']);
    return cluster;
  }

  url(database = 'postgres'): string {
    return `postgres://postgres@127.0.0.1:${this.port}/${database}`;
  }

  async destroy(): Promise<void> {
    await this.ctl('pg_ctl', ['-D', this.dir, '-m', 'immediate', '-w', 'stop']).catch(() => undefined);
    rmSync(join(this.dir, '..'), { recursive: true, force: true });
  }

  private async ctl(program: string, args: readonly string[]): Promise<void> {
    const path = join(this.bin, program);
    if (this.asPostgres) await run('runuser', ['-u', 'postgres', '--', path, ...args], { cwd: tmpdir() });
    else await run(path, [...args], { cwd: tmpdir() });
  }
}
