import { spawn } from 'node:child_process';
import type { ChildProcess } from 'node:child_process';
import { join } from 'node:path';

const ROOT = join(import.meta.dirname, '..', '..');

/** A `rowfold serve` child process running the sources, with its output collected. */
export interface ServeProcess {
  readonly child: ChildProcess;
  readonly log: () => string;
  /** Exit code, or null when ended by a signal. */
  readonly exited: Promise<number | null>;
}

/**
 * The `rowfold serve` processes of a test file: started with short ticks (polls every 0.2 s,
 * pg-boss's clock every second, sweeps every half second unless `args` say otherwise), killed
 * by {@link ServeProcesses.killAll} after each test.
 *
 * @example
 * const serve = new ServeProcesses();
 * afterEach(() => serve.killAll());
 * const a = serve.start([specPath, '--db', url]);
 */
export class ServeProcesses {
  readonly all: ServeProcess[] = [];

  /** Starts `rowfold serve ARGS…` from the sources (no build needed). */
  start(args: readonly string[]): ServeProcess {
    const fast = ['--poll-seconds', '0.2', '--cron-seconds', '1'];
    if (!args.includes('--sweep-seconds')) fast.push('--sweep-seconds', '0.5');
    const child = spawn(
      process.execPath,
      ['--import', './test/support/register-typescript.mjs', 'src/cli/main.ts', 'serve', ...args, ...fast],
      { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'], env: { ...process.env } },
    );
    let text = '';
    child.stderr!.on('data', (b: Buffer) => (text += b.toString()));
    child.stdout!.on('data', (b: Buffer) => (text += b.toString()));
    const exited = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
    const server = { child, log: () => text, exited };
    this.all.push(server);
    return server;
  }

  /** Runs `rowfold --help` once, so the transpile cache is warm before servers start together. */
  async warm(): Promise<void> {
    const child = spawn(process.execPath, ['--import', './test/support/register-typescript.mjs', 'src/cli/main.ts', '--help'], {
      cwd: ROOT,
      stdio: 'ignore',
    });
    await new Promise((resolve) => child.on('exit', resolve));
  }

  /** Everything the servers said, for failure messages. */
  logs(): string {
    return this.all.map((s, i) => `--- serve ${i} (pid ${s.child.pid}) ---\n${s.log()}`).join('\n');
  }

  /** Kills every server still running (SIGKILL) and waits for it. */
  async killAll(): Promise<void> {
    for (const s of this.all.splice(0)) {
      if (s.child.exitCode === null && s.child.signalCode === null) s.child.kill('SIGKILL');
      await s.exited;
    }
  }

  /**
   * Polls `probe` every 100 ms until it gives a value (not undefined or false); fails after
   * `ms` with the servers' output.
   */
  async until<T>(what: string, probe: () => Promise<T | undefined | false> | T | undefined | false, ms = 60_000): Promise<T> {
    const end = Date.now() + ms;
    for (;;) {
      const v = await probe();
      if (v !== undefined && v !== false) return v;
      if (Date.now() > end) throw new Error(`timed out waiting for ${what}; serve said:\n${this.logs()}`);
      await new Promise((r) => setTimeout(r, 100));
    }
  }
}
