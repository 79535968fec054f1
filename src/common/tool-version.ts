import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * The version in rowfold's package.json, found by walking up from this module (it runs
 * from `src/` under the test runner and from `dist/src/` when built).
 */
export function toolVersion(): string {
  let dir = dirname(fileURLToPath(import.meta.url));
  for (let i = 0; i < 5; i++) {
    const file = join(dir, 'package.json');
    if (existsSync(file)) {
      const pkg = JSON.parse(readFileSync(file, 'utf8')) as { name?: string; version?: string };
      if (pkg.name === 'rowfold' && pkg.version !== undefined) return pkg.version;
    }
    dir = dirname(dir);
  }
  return 'unknown';
}
