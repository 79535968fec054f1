import { Accumulator } from '../fit/accumulator.js';
import type { FitSolution } from '../fit/fit-solution.js';
import { solve } from '../fit/solve.js';
import { readCsvBlocks } from '../source/csv-blocks.js';
import type { CsvReadStats } from '../source/csv-blocks.js';

/** What to fit from a local CSV file. */
export interface CsvFitRequest {
  readonly path: string;
  readonly response: string;
  readonly terms: readonly string[];
  readonly weight?: string | undefined;
  readonly intercept: boolean;
  readonly confidence: number;
}

/** A solved CSV fit with its read counts. */
export interface CsvFitResult {
  readonly solution: FitSolution;
  readonly stats: CsvReadStats;
}

/**
 * Fits one model over the columns of a CSV file, streaming it block by block through
 * the same accumulator a database fit uses (memory does not grow with the file).
 */
export async function fitCsvFile(req: CsvFitRequest): Promise<CsvFitResult> {
  const acc = new Accumulator({
    terms: req.terms,
    response: req.response,
    weight: req.weight,
    intercept: req.intercept,
  });
  const columns = [...req.terms, req.response, ...(req.weight === undefined ? [] : [req.weight])];
  const stats: CsvReadStats = { rowsRead: 0, rowsSkipped: 0, emptyByColumn: {} };
  for await (const block of readCsvBlocks(req.path, columns, stats)) acc.fold(block);
  return { solution: solve(acc, { confidence: req.confidence }), stats };
}
