import { createHash } from 'node:crypto';
import { readdir, readFile } from 'node:fs/promises';
import { join } from 'node:path';

/** One numbered SQL migration file. */
export interface Migration {
  /** The number the file name starts with. */
  readonly version: number;
  /** File name without the number and extension, e.g. `result_tables`. */
  readonly name: string;
  /** File name, e.g. `0001_result_tables.sql`. */
  readonly file: string;
  readonly sql: string;
  /** SHA-256 (hex) of the file text with line endings normalised to LF. */
  readonly checksum: string;
}

const FILE_PATTERN = /^(\d+)_([A-Za-z0-9_-]+)\.sql$/;

/**
 * Reads the migrations of a folder in version order. Files that do not look like
 * `NNNN_name.sql` are ignored; two files with the same number are an error.
 *
 * The checksum ignores CR before LF so that a checkout with Windows line endings does not
 * look like an edited migration.
 */
export async function loadMigrations(dir: string): Promise<Migration[]> {
  const files = (await readdir(dir)).filter((f) => FILE_PATTERN.test(f));
  const migrations: Migration[] = [];
  for (const file of files) {
    const [, number, name] = FILE_PATTERN.exec(file)!;
    const sql = (await readFile(join(dir, file), 'utf8')).replace(/\r\n/g, '\n');
    const checksum = createHash('sha256').update(sql, 'utf8').digest('hex');
    migrations.push({ version: Number(number!), name: name!, file, sql, checksum });
  }
  migrations.sort((a, b) => a.version - b.version);
  for (let i = 1; i < migrations.length; i++) {
    const prev = migrations[i - 1]!;
    const cur = migrations[i]!;
    if (prev.version === cur.version) {
      throw new Error(`migrations ${prev.file} and ${cur.file} in ${dir} have the same number`);
    }
  }
  return migrations;
}
