import { constants } from 'node:fs';
import { cp, mkdtemp } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

import { openEmbeddedDatabase } from '../../src/source/embedded-database.js';

/**
 * Creates an empty embedded database (initdb inside WebAssembly takes seconds) in a new
 * temporary folder and closes it, so that tests can copy it instead (a fraction of a second).
 */
export async function makeEmbeddedTemplate(): Promise<string> {
  const dir = join(await mkdtemp(join(tmpdir(), 'rowfold-template-')), 'db');
  const database = await openEmbeddedDatabase(dir);
  await database.close();
  return dir;
}

/** Copies a template folder to `dir` (a copy-on-write clone where the file system has them). */
export async function copyEmbeddedTemplate(template: string, dir: string): Promise<void> {
  await cp(template, dir, { recursive: true, mode: constants.COPYFILE_FICLONE });
}
