import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { vi } from 'vitest';
import { stringify } from 'yaml';
import { main } from '../../src/cli/cli.js';

/** Runs the rowfold command in-process and captures what it writes. */
export async function runCli(args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  const out: string[] = [];
  const err: string[] = [];
  const o = vi.spyOn(process.stdout, 'write').mockImplementation((s) => (out.push(String(s)), true));
  const e = vi.spyOn(process.stderr, 'write').mockImplementation((s) => (err.push(String(s)), true));
  try {
    const code = await main(args);
    return { code, stdout: out.join(''), stderr: err.join('') };
  } finally {
    o.mockRestore();
    e.mockRestore();
  }
}

const dir = mkdtempSync(join(tmpdir(), 'rowfold-specs-'));
let counter = 0;

/** Writes a spec (an object, dumped as YAML, or raw text) to a temporary file. */
export function writeSpec(spec: Record<string, unknown> | string): string {
  const path = join(dir, `spec-${++counter}.yaml`);
  writeFileSync(path, typeof spec === 'string' ? spec : stringify(spec));
  return path;
}
