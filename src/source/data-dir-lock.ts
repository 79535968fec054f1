import { closeSync, openSync, readFileSync, statSync, unlinkSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import { setTimeout as sleep } from 'node:timers/promises';

import { EmbeddedDatabaseLockedError } from './embedded-database-locked-error.js';

/** Name of the lock file inside the database folder. */
export const LOCK_FILE = 'rowfold.lock';

/** An exclusive hold on a database folder; see {@link lockDataDir}. */
export interface DataDirLock {
  /** The lock file. */
  readonly path: string;
  /** Deletes the lock file if it is still ours; synchronous, so it can run at process exit. */
  release(): void;
}

/** A lock file whose writer has not yet written its PID is given this long. */
const EMPTY_LOCK_GRACE_MS = 1000;
/** A breaker file older than this was left by a process that died while breaking a lock. */
const STALE_BREAKER_MS = 10_000;
const RETRY_MS = 25;
const MAX_ATTEMPTS = 200;

const held = new Set<DataDirLock>();
let exitHookInstalled = false;

/**
 * Takes the folder's lock file, `rowfold.lock`, holding this process's PID: created with the
 * `wx` flag, so of two processes that race for it exactly one succeeds. A lock whose PID is
 * not alive (the holder crashed or was killed) is taken over; the takeover itself is guarded
 * by a second file, so two processes that find the same stale lock cannot both break it.
 * Every lock still held when the process exits is released by an `exit` hook.
 *
 * A lock naming this process's own PID is treated as held: it belongs to another thread or
 * to an instance that was never closed. Sharing within one process is the caller's job
 * (see openEmbeddedDatabase).
 *
 * @throws EmbeddedDatabaseLockedError when a live process holds the folder
 * @example
 * const lock = await lockDataDir('/home/me/.rowfold/db');
 * try { ... } finally { lock.release(); }
 */
export async function lockDataDir(dir: string): Promise<DataDirLock> {
  const path = join(dir, LOCK_FILE);
  const mine = `${process.pid}\n`;
  for (let attempt = 0; attempt < MAX_ATTEMPTS; attempt++) {
    if (tryCreate(path, mine)) return remember(path, mine);
    const content = readIfExists(path);
    if (content === undefined) continue; // released meanwhile: try again at once
    const pid = parsePid(content);
    if (pid === undefined) {
      // Created but not yet written, or garbage: wait for the writer, then call it stale.
      if (ageMs(path) < EMPTY_LOCK_GRACE_MS) {
        await sleep(RETRY_MS);
        continue;
      }
    } else if (pid === process.pid || isAlive(pid)) {
      throw new EmbeddedDatabaseLockedError(dir, pid, path);
    }
    if (!(await breakStaleLock(path, content))) await sleep(RETRY_MS);
  }
  throw new Error(`could not take the lock file ${path}: it kept changing hands; try again`);
}

function tryCreate(path: string, content: string): boolean {
  let fd: number;
  try {
    fd = openSync(path, 'wx');
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code === 'EEXIST') return false;
    throw error;
  }
  try {
    writeSync(fd, content);
  } finally {
    closeSync(fd);
  }
  return true;
}

/** Removes `path` if it still holds `staleContent`; false when another process is breaking it. */
async function breakStaleLock(path: string, staleContent: string): Promise<boolean> {
  const breaker = `${path}.break`;
  if (!tryCreate(breaker, `${process.pid}\n`)) {
    if (ageMs(breaker) > STALE_BREAKER_MS) unlinkQuietly(breaker);
    return false;
  }
  try {
    // Checked again under the breaker: another process may have broken it and locked anew.
    if (readIfExists(path) === staleContent) unlinkQuietly(path);
  } finally {
    unlinkQuietly(breaker);
  }
  return true;
}

function remember(path: string, content: string): DataDirLock {
  const lock: DataDirLock = {
    path,
    release() {
      if (!held.delete(lock)) return;
      // Never delete a lock that another process took over after ours was judged stale.
      if (readIfExists(path) === content) unlinkQuietly(path);
    },
  };
  held.add(lock);
  if (!exitHookInstalled) {
    exitHookInstalled = true;
    process.on('exit', () => {
      for (const l of [...held]) l.release();
    });
  }
  return lock;
}

function readIfExists(path: string): string | undefined {
  try {
    return readFileSync(path, 'utf8');
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code === 'ENOENT') return undefined;
    throw error;
  }
}

function parsePid(content: string): number | undefined {
  const text = content.trim();
  if (!/^\d+$/.test(text)) return undefined;
  const pid = Number(text);
  return Number.isSafeInteger(pid) && pid > 0 ? pid : undefined;
}

/** Signal 0 checks for existence; EPERM means it exists but belongs to another user. */
function isAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (error) {
    return (error as NodeJS.ErrnoException).code === 'EPERM';
  }
}

function ageMs(path: string): number {
  try {
    return Date.now() - statSync(path).mtimeMs;
  } catch {
    return 0;
  }
}

function unlinkQuietly(path: string): void {
  try {
    unlinkSync(path);
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code !== 'ENOENT') throw error;
  }
}
