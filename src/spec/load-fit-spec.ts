import { readFile } from 'node:fs/promises';
import type { FitSpec } from './fit-spec.js';
import { parseFitSpec } from './parse-fit-spec.js';

/**
 * Reads a fit spec file (UTF-8) and parses it with {@link parseFitSpec}, using `path`
 * as written for `origin` in messages.
 *
 * @throws SpecError when the spec is not valid; file system errors (e.g. `ENOENT`)
 * are passed through unchanged.
 *
 * @example
 * const spec = await loadFitSpec('config/examples/feeder-load.yaml');
 * console.log(spec.name, spec.hash);
 */
export async function loadFitSpec(path: string): Promise<FitSpec> {
  const text = await readFile(path, 'utf8');
  return parseFitSpec(text, path);
}
