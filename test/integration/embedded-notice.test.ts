import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { openEmbeddedDatabase } from '../../src/source/embedded-database.js';
import { setNoticeSink } from '../../src/source/notices.js';

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
