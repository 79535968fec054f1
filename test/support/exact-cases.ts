import { readFileSync } from 'node:fs';
import type { FitSolution } from '../../src/fit/fit-solution.js';
import { lre } from './lre.js';

/** One design of test/fixtures/reference/exact-cases.json (scripts/make-refinement-fixtures.py). */
export interface ExactCase {
  readonly name: string;
  readonly description: string;
  readonly intercept: boolean;
  readonly weighted: boolean;
  readonly terms: readonly string[];
  readonly aliased: readonly string[];
  /** Rows `[terms…, y(, w)]` (see {@link rowsOf}); absent for a generated case. */
  readonly rows?: readonly number[][];
  /** How a generated case's rows are made (see {@link rowsOf}). */
  readonly generated?: {
    readonly seed: number;
    readonly rows: number;
    readonly coefficients: readonly number[];
    readonly noise: number;
    /** Added to every predictor's draw (default 0). */
    readonly offset?: number;
    /** Where y's sum starts (default 0). */
    readonly constant?: number;
  };
  /** The exact least-squares solution (rational arithmetic), 40 significant digits; null for aliased terms. */
  readonly exact: {
    readonly estimates: readonly (string | null)[];
    readonly std_errors: readonly (string | null)[];
    readonly sigma: string;
    readonly r2: string;
    readonly f: string | null;
  };
}

/**
 * The rows of a case: stored, or generated as scripts/make-refinement-fixtures.py makes them
 * (Park–Miller draws over 2³¹ plus the offset, y summed left to right from the constant), the
 * same doubles in both languages.
 */
export function rowsOf(c: ExactCase): readonly number[][] {
  if (c.rows !== undefined) return c.rows;
  const made = generatedRows.get(c);
  if (made !== undefined) return made;
  const g = c.generated!;
  let state = g.seed;
  const draw = () => {
    state = (16807 * state) % 2147483647;
    return state / 2147483648;
  };
  const rows: number[][] = [];
  for (let i = 0; i < g.rows; i++) {
    const x = g.coefficients.map(() => (g.offset ?? 0) + draw());
    let y = g.constant ?? 0;
    g.coefficients.forEach((c, j) => (y += c * x[j]!));
    y += (draw() - 0.5) * g.noise;
    rows.push([...x, y]);
  }
  generatedRows.set(c, rows);
  return rows;
}

const generatedRows = new WeakMap<ExactCase, number[][]>();

/** The fixture: exact solutions from Python's fractions module. */
export const EXACT = JSON.parse(readFileSync(new URL('../fixtures/reference/exact-cases.json', import.meta.url), 'utf8')) as {
  readonly library: string;
  readonly cases: readonly ExactCase[];
};

/** LREs of a solution against the exact one: estimates and standard errors by term, then σ, R², F. */
export function exactLres(c: ExactCase, fit: Pick<FitSolution, 'sigma' | 'r2' | 'f'> & { coefficients: readonly { estimate: number | null; stdError: number | null }[] }) {
  const estimates: number[] = [];
  const stdErrors: number[] = [];
  c.exact.estimates.forEach((e, i) => {
    if (e === null) return;
    estimates.push(lre(fit.coefficients[i]!.estimate, e));
    stdErrors.push(lre(fit.coefficients[i]!.stdError, c.exact.std_errors[i]!));
  });
  const stats = [lre(fit.sigma, c.exact.sigma), lre(fit.r2, c.exact.r2), ...(c.exact.f === null ? [] : [lre(fit.f, c.exact.f)])];
  return { estimates, stdErrors, stats, min: Math.min(...estimates, ...stdErrors, ...stats) };
}
