import { open } from 'node:fs/promises';
import { parse } from 'csv-parse';
import type { RowBlock } from '../numeric/row-block.js';
import { CsvInputError } from './csv-input-error.js';

/** Counts kept while reading a CSV file. */
export interface CsvReadStats {
  rowsRead: number;
  rowsSkipped: number;
  /** Rows skipped because the column was empty, by column. */
  emptyByColumn: Record<string, number>;
}

/**
 * Streams the named numeric columns of a CSV file (with a header row) as row blocks.
 * Rows with an empty field in any selected column are skipped and counted by column;
 * a field that is not a number is an error naming the column and line.
 *
 * @throws CsvInputError with `usage` set when the file cannot be opened or read, has no header
 *   row, or lacks a named column; without `usage` for a field that is not a number.
 */
export async function* readCsvBlocks(
  path: string,
  columns: readonly string[],
  stats: CsvReadStats,
  blockRows = 4096,
): AsyncGenerator<RowBlock> {
  // Opened first, so that a missing or unreadable file is an error of this call rather than an
  // unhandled 'error' event of a stream nobody listens to.
  const handle = await open(path, 'r').catch((e: unknown) => {
    throw new CsvInputError(`cannot read ${path}: ${reason(e)}`, { usage: true, cause: e });
  });
  const input = handle.createReadStream();
  const parser = input.pipe(parse({ columns: false, skip_empty_lines: true, trim: true }));
  // A read error (a folder given as the file, a disk error) ends the parse with that error.
  input.on('error', (e) => parser.destroy(new CsvInputError(`cannot read ${path}: ${reason(e)}`, { usage: true, cause: e })));
  const width = columns.length;
  let index: number[] | undefined;
  let values = new Float64Array(blockRows * width);
  let rows = 0;
  let line = 1;
  try {
    for await (const record of parser as AsyncIterable<string[]>) {
      if (index === undefined) {
        const header = record;
        index = columns.map((c) => {
          const i = header.indexOf(c);
          if (i < 0) throw new CsvInputError(`column ${c} is not in ${path} (columns: ${header.join(', ')})`, { usage: true, column: c });
          return i;
        });
        continue;
      }
      line++;
      stats.rowsRead++;
      let skip = false;
      for (let j = 0; j < width; j++) {
        const field = record[index[j]!] ?? '';
        if (field === '') {
          stats.emptyByColumn[columns[j]!] = (stats.emptyByColumn[columns[j]!] ?? 0) + 1;
          skip = true;
          continue;
        }
        const v = Number(field);
        if (Number.isNaN(v) && field !== 'NaN') {
          throw new CsvInputError(`column ${columns[j]} on line ${line} of ${path} is not a number: ${JSON.stringify(field)}`, {
            usage: false,
            column: columns[j]!,
          });
        }
        values[rows * width + j] = v;
      }
      if (skip) {
        stats.rowsSkipped++;
        continue;
      }
      if (++rows === blockRows) {
        yield { rows, width, values };
        // The consumer has folded the block; a fresh buffer keeps a slow consumer safe.
        values = new Float64Array(blockRows * width);
        rows = 0;
      }
    }
    if (index === undefined) throw new CsvInputError(`${path} is empty: it needs a header row`, { usage: true });
    if (rows > 0) yield { rows, width, values };
  } catch (e) {
    // The parser's own errors (an unclosed quote, a ragged row) are bad data in the file.
    if (e instanceof CsvInputError) throw e;
    throw new CsvInputError(`cannot parse ${path}: ${reason(e)}`, { usage: false, cause: e });
  } finally {
    parser.destroy();
    await handle.close().catch(() => undefined);
  }
}

function reason(e: unknown): string {
  return e instanceof Error ? e.message : String(e);
}
