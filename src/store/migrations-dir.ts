import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * The folder of the numbered SQL migrations (`migrations/` at the package root).
 *
 * Found by walking up from this module to the first folder that has both a `package.json`
 * and a `migrations/` folder, so it works from `src/store/` (tests run the sources) as well
 * as from the compiled `dist/src/store/`, and from an installed package.
 */
export function defaultMigrationsDir(moduleUrl: string = import.meta.url): string {
  const start = dirname(fileURLToPath(moduleUrl));
  for (let dir = start; ; ) {
    const candidate = join(dir, 'migrations');
    if (existsSync(join(dir, 'package.json')) && existsSync(candidate)) return candidate;
    const parent = dirname(dir);
    if (parent === dir) break;
    dir = parent;
  }
  throw new Error(
    `cannot find the rowfold migrations folder: no folder above ${start} has both package.json and migrations/`,
  );
}
