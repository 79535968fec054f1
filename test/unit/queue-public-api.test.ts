import { readdirSync, readFileSync } from 'node:fs';
import { join, relative } from 'node:path';
import { describe, expect, it } from 'vitest';

// Issue 13: rowfold wrote pg-boss's own `job` and `schedule` tables, which pinned pg-boss at one
// minor version and would break silently on any change of its schema. The queue is now used
// through pg-boss's public API only; rowfold's own tables in the jobs schema are `rowfold_*`.
const ROOT = join(import.meta.dirname, '..', '..');

function sources(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) =>
    e.isDirectory() ? sources(join(dir, e.name)) : e.name.endsWith('.ts') ? [join(dir, e.name)] : [],
  );
}

describe('the job queue', () => {
  it('no source file names a table of the jobs schema other than rowfold\'s own', () => {
    const foreign: string[] = [];
    for (const file of sources(join(ROOT, 'src'))) {
      const text = readFileSync(file, 'utf8');
      // The jobs schema is referred to by name, as ${JOBS_SCHEMA}, or (in a module that imports
      // JOBS_SCHEMA) as its quoted form ${S}.
      const quoted = /\bJOBS_SCHEMA\b/.test(text) ? '|\\$\\{S\\}' : '';
      const names = new RegExp(`(?:\\$\\{JOBS_SCHEMA\\}|rowfold_jobs${quoted})\\s*\\.\\s*"?(\\w+)`, 'g');
      for (const m of text.matchAll(names)) {
        if (!m[1]!.startsWith('rowfold_')) foreign.push(`${relative(ROOT, file)}: ${m[0]}`);
      }
    }
    expect(foreign).toEqual([]);
  });

  it('pg-boss is taken from its 10.x line, which runs on Node.js 20', () => {
    const pkg = JSON.parse(readFileSync(join(ROOT, 'package.json'), 'utf8')) as { dependencies: Record<string, string> };
    expect(pkg.dependencies['pg-boss']).toMatch(/^\^10\.\d+\.\d+$/);
    const installed = JSON.parse(readFileSync(join(ROOT, 'node_modules', 'pg-boss', 'package.json'), 'utf8')) as { version: string; engines: { node: string } };
    expect(installed.version).toMatch(/^10\./);
    expect(installed.engines.node).toBe('>=20');
  });
});
