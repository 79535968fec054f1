import { createReadStream } from 'node:fs';
import { parse } from 'csv-parse';
import type { RowBlock } from '../numeric/row-block.js';

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
 */
export async function* readCsvBlocks(
  path: string,
  columns: readonly string[],
  stats: CsvReadStats,
  blockRows = 4096,
): AsyncGenerator<RowBlock> {
  const parser = createReadStream(path).pipe(parse({ columns: false, skip_empty_lines: true, trim: true }));
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
          if (i < 0) throw new Error(`column ${c} is not in ${path} (columns: ${header.join(', ')})`);
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
          throw new Error(`column ${columns[j]} on line ${line} of ${path} is not a number: ${JSON.stringify(field)}`);
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
    if (index === undefined) throw new Error(`${path} is empty: it needs a header row`);
    if (rows > 0) yield { rows, width, values };
  } finally {
    parser.destroy();
  }
}
