import { readdirSync, readFileSync } from 'node:fs';
import { join, relative, resolve, sep } from 'node:path';
import { describe, expect, it } from 'vitest';

// Pins issue 14: every import points one way (../shared/design.md, Rooms; DEVELOPERS.md).
// A room may import its own files and the rooms ranked below it, never one at its rank or above
// (source/ and store/ share a rank: the two rooms that talk to a database use neither the other).
// `common/` holds the few pure helpers that every room may use (masking passwords in messages,
// the package's version); `numeric/` is pure and ranks with it at the bottom.
const RANK: Record<string, number> = {
  common: 0,
  numeric: 0,
  spec: 1,
  fit: 1,
  plan: 2,
  source: 3,
  store: 3,
  report: 4,
  run: 6,
  schedule: 7,
  cli: 8,
  'index.ts': 9,
};

const SRC = resolve(import.meta.dirname, '../../src');

function sourceFiles(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) => {
    const path = join(dir, e.name);
    if (e.isDirectory()) return sourceFiles(path);
    return e.name.endsWith('.ts') && !e.name.endsWith('.as.ts') && !e.name.endsWith('.d.ts') ? [path] : [];
  });
}

/** The room of a file under src/: its first folder, or the file itself at the top. */
function roomOf(path: string): string {
  return relative(SRC, path).split(sep)[0]!;
}

/** Relative imports and re-exports of a file (type-only ones included: they are arrows too). */
function importsOf(path: string): string[] {
  const text = readFileSync(path, 'utf8');
  const out: string[] = [];
  for (const m of text.matchAll(/^\s*(?:import|export)\b[^'"]*?from\s+'([^']+)'/gm)) out.push(m[1]!);
  for (const m of text.matchAll(/\bimport\(\s*'([^']+)'\s*\)/g)) out.push(m[1]!);
  return out;
}

describe('room arrows (design.md, Rooms)', () => {
  const files = sourceFiles(SRC);

  it('knows every room under src/', () => {
    const rooms = new Set(files.map(roomOf));
    expect([...rooms].filter((r) => RANK[r] === undefined)).toEqual([]);
  });

  it('has no import from a room at the same rank or above', () => {
    const wrong: string[] = [];
    for (const file of files) {
      const from = roomOf(file);
      for (const spec of importsOf(file)) {
        if (!spec.startsWith('.')) continue;
        const to = roomOf(resolve(file, '..', spec));
        if (to === from) continue;
        if (!(RANK[to]! < RANK[from]!)) wrong.push(`${relative(SRC, file)} → ${spec}`);
      }
    }
    expect(wrong).toEqual([]);
  });

  it('keeps numeric/ pure: no database client, no file system, no clock of its own beyond its math library', () => {
    const wrong: string[] = [];
    for (const file of files.filter((f) => roomOf(f) === 'numeric')) {
      for (const spec of importsOf(file)) {
        if (spec.startsWith('.') ? roomOf(resolve(file, '..', spec)) !== 'numeric' : !spec.startsWith('@stdlib/')) {
          wrong.push(`${relative(SRC, file)} → ${spec}`);
        }
      }
    }
    expect(wrong).toEqual([]);
  });

  it('lets only source/ open a PostgreSQL client or the embedded database', () => {
    const wrong: string[] = [];
    for (const file of files) {
      const room = roomOf(file);
      for (const spec of importsOf(file)) {
        if (/^(@electric-sql\/pglite|pg-query-stream)(\/|$)/.test(spec) && room !== 'source') wrong.push(`${relative(SRC, file)} → ${spec}`);
      }
    }
    expect(wrong).toEqual([]);
  });

  it('ranks the arrows this issue removed as wrong (the check can fail)', () => {
    const allowed = (from: string, to: string) => RANK[to]! < RANK[from]!;
    expect(allowed('store', 'source')).toBe(false);
    expect(allowed('report', 'run')).toBe(false);
    expect(allowed('spec', 'schedule')).toBe(false);
    expect(allowed('run', 'report')).toBe(true);
  });
});
