import { spawn, spawnSync } from 'node:child_process';
import type { ChildProcess } from 'node:child_process';
import { existsSync, readFileSync, utimesSync, writeFileSync } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';

import { EmbeddedDatabaseLockedError } from '../../src/source/embedded-database-locked-error.js';
import { openEmbeddedDatabase } from '../../src/source/embedded-database.js';
import { copyEmbeddedTemplate } from '../support/embedded-template.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Two processes on one PGlite folder would silently lose each other's writes, so the folder's
// rowfold.lock keeps out a second process, names the holder, and is taken over when its
// holder is gone; within one process the folder is shared. The other processes here are real
// `node` processes running the TypeScript sources.

const REPO = fileURLToPath(new URL('../../', import.meta.url));
const REGISTER = join(REPO, 'test/support/register-typescript.mjs');
const EMBEDDED_MODULE = pathToFileURL(join(REPO, 'src/source/embedded-database.ts')).href;

let scratch: string;
const children: ChildProcess[] = [];

beforeAll(async () => {
  scratch = await mkdtemp(join(tmpdir(), 'rowfold-lock-'));
});
afterAll(async () => {
  for (const child of children) if (child.exitCode === null && child.signalCode === null) child.kill('SIGKILL');
  await rm(scratch, { recursive: true, force: true });
});

async function freshFolder(name: string): Promise<string> {
  const dir = join(scratch, name);
  await copyEmbeddedTemplate(inject('rowfoldEmbeddedTemplate'), dir);
  return dir;
}

/** A node process that opens `dir`, prints "open", then waits (or exits at once with `exit`). */
function holder(dir: string, then: 'wait' | 'exit'): { child: ChildProcess; opened: Promise<void> } {
  const script = join(scratch, `holder-${children.length}.mjs`);
  writeFileSync(
    script,
    `import { openEmbeddedDatabase } from ${JSON.stringify(EMBEDDED_MODULE)};
     await openEmbeddedDatabase(process.argv[2]);
     process.stdout.write('open\\n');
     ${then === 'exit' ? 'process.exit(0);' : 'setInterval(() => {}, 1000);'}`,
  );
  const child = spawn(process.execPath, ['--import', REGISTER, script, dir], { stdio: ['ignore', 'pipe', 'pipe'] });
  children.push(child);
  let stderr = '';
  child.stderr!.on('data', (d: Buffer) => (stderr += d.toString()));
  const opened = new Promise<void>((resolve, reject) => {
    child.stdout!.on('data', (d: Buffer) => {
      if (d.toString().includes('open')) resolve();
    });
    child.once('exit', (code) => reject(new Error(`holder exited with ${code} before opening: ${stderr}`)));
  });
  return { child, opened };
}

function exited(child: ChildProcess): Promise<void> {
  if (child.exitCode !== null || child.signalCode !== null) return Promise.resolve();
  return new Promise((resolve) => child.once('exit', () => resolve()));
}

describe('another process', () => {
  it('holding the folder keeps this one out, naming its PID (rowfold fit exits 1); once it is killed its lock is taken over', async () => {
    const dir = await freshFolder('killed');
    const { child, opened } = holder(dir, 'wait');
    await opened;
    const error = await openEmbeddedDatabase(dir).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(EmbeddedDatabaseLockedError);
    expect((error as Error).message).toMatch(new RegExp(`^embedded database ${dir} is in use by PID ${child.pid}`));
    expect((error as EmbeddedDatabaseLockedError).pid).toBe(child.pid);

    const spec = writeSpec({ name: 'locked_out', source: 'select 1::float8 as x, 2::float8 as y', response: 'y', terms: ['x'] });
    const cli = await runCli(['fit', spec, '--db', `embedded:${dir}`]);
    expect(cli.stderr).toContain(`rowfold: error: embedded database ${dir} is in use by PID ${child.pid}`);
    expect(cli.code).toBe(1);
    expect(cli.stdout).toBe('');

    child.kill('SIGKILL'); // no exit hook runs: the lock file stays behind, stale
    await exited(child);
    expect(readFileSync(join(dir, 'rowfold.lock'), 'utf8').trim()).toBe(String(child.pid));
    const database = await openEmbeddedDatabase(dir);
    try {
      expect(readFileSync(join(dir, 'rowfold.lock'), 'utf8').trim()).toBe(String(process.pid));
      expect((await database.withSession((s) => s.query('select 1'))).rows).toEqual([[1]]);
    } finally {
      await database.close();
    }
  });

  it('that exits without closing gives the lock back', async () => {
    const dir = await freshFolder('exit');
    const { child, opened } = holder(dir, 'exit');
    await opened;
    await exited(child);
    expect(child.exitCode).toBe(0);
    expect(existsSync(join(dir, 'rowfold.lock'))).toBe(false);
  });
});

describe('a stale lock file', () => {
  it('naming a process that is gone is taken over', async () => {
    const dir = await freshFolder('stale');
    const gone = spawnSync(process.execPath, ['-e', '0']).pid!;
    writeFileSync(join(dir, 'rowfold.lock'), `${gone}\n`);
    const database = await openEmbeddedDatabase(dir);
    try {
      expect(readFileSync(join(dir, 'rowfold.lock'), 'utf8').trim()).toBe(String(process.pid));
    } finally {
      await database.close();
    }
  });

  it('that is empty and old (a writer that died between creating and writing it) is taken over', async () => {
    const dir = await freshFolder('empty');
    const lockFile = join(dir, 'rowfold.lock');
    writeFileSync(lockFile, '');
    utimesSync(lockFile, new Date(Date.now() - 60_000), new Date(Date.now() - 60_000));
    const database = await openEmbeddedDatabase(dir);
    await database.close();
    expect(existsSync(lockFile)).toBe(false);
  });
});

describe('within one process', () => {
  it('opening a folder twice shares one instance, closed and unlocked with the last handle', async () => {
    const dir = await freshFolder('shared');
    const lockFile = join(dir, 'rowfold.lock');
    const [a, b] = await Promise.all([openEmbeddedDatabase(dir), openEmbeddedDatabase(join(dir, '.'))]);
    await a.withSession((s) => s.exec('create temporary table only_in_this_backend (x int)'));
    // A temporary table is visible only in the backend that made it: b shares a's backend.
    expect((await b.withSession((s) => s.query("select to_regclass('only_in_this_backend') is not null"))).rows).toEqual([[true]]);
    await a.close();
    expect(existsSync(lockFile)).toBe(true);
    expect((await b.withSession((s) => s.query('select 2'))).rows).toEqual([[2]]);
    await b.close();
    expect(existsSync(lockFile)).toBe(false);
  });
});
