import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { openEmbeddedDatabase } from '../../src/source/embedded-database.js';
import { setNoticeSink } from '../../src/source/notices.js';
import { openDatabase } from '../../src/source/open-database.js';

const dir = mkdtempSync(join(tmpdir(), 'rowfold-notice-'));
afterAll(() => {
  setNoticeSink(() => undefined);
  rmSync(dir, { recursive: true, force: true });
});

describe('the embedded database on its first run', () => {
  it('says it is being created (it takes seconds), and says nothing when it reopens', async () => {
    const seen: string[] = [];
    setNoticeSink((m) => seen.push(m));
    const folder = join(dir, 'db');
    const first = await openEmbeddedDatabase(folder);
    await first.close();
    expect(seen).toEqual([`creating the embedded database in ${folder} (first run; a few seconds)`]);
    const again = await openEmbeddedDatabase(folder);
    await again.close();
    expect(seen).toHaveLength(1);
  }, 120_000);
});

describe('the embedded database chosen because nothing names a server (issue 14)', () => {
  it('is named on stderr (once per process), so a forgotten --db does not pass unnoticed; --db embedded: says nothing more', async () => {
    const seen: string[] = [];
    setNoticeSink((m) => seen.push(m));
    const cwd = join(dir, 'unconfigured');
    const database = await openDatabase({ env: {}, sessions: 1, cwd });
    await database.close();
    const folder = join(cwd, '.rowfold', 'db');
    expect(seen).toContain(`no server configured (--db, DATABASE_URL, PG* variables): using the embedded database in ${folder}`);
    // Opened again in the same process (as demo does: load, then fit): not said twice.
    seen.length = 0;
    const again = await openDatabase({ env: {}, sessions: 1, cwd });
    await again.close();
    expect(seen).toEqual([]);
    const named = await openDatabase({ db: `embedded:${folder}`, env: {}, sessions: 1 });
    await named.close();
    expect(seen).toEqual([]);
  }, 120_000);
});
