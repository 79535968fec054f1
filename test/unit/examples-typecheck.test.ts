import { execFileSync } from 'node:child_process';
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';

// Issue 14: the TypeScript examples in examples/ are type-checked against the library's
// types on the test path too (npm run typecheck does the same), so an example that no longer
// matches the API fails the suite.
const root = join(import.meta.dirname, '../..');

describe('examples/', () => {
  it('has TypeScript examples, and they type-check against src/index.ts', () => {
    const examples = readdirSync(join(root, 'examples')).filter((f) => f.endsWith('.ts'));
    expect(examples.length).toBeGreaterThan(0);
    const tsc = join(root, 'node_modules/typescript/bin/tsc');
    let output = '';
    try {
      execFileSync(process.execPath, [tsc, '-p', join(root, 'examples/tsconfig.json')], { encoding: 'utf8', stdio: 'pipe' });
    } catch (e) {
      output = String((e as { stdout?: string }).stdout ?? e);
    }
    expect(output).toBe('');
  }, 120_000);
});
