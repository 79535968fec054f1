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
  /** Rows `[terms…, y(, w)]`. */
  readonly rows: readonly number[][];
  /** The exact least-squares solution (rational arithmetic), 40 significant digits; null for aliased terms. */
  readonly exact: {
    readonly estimates: readonly (string | null)[];
    readonly std_errors: readonly (string | null)[];
    readonly sigma: string;
    readonly r2: string;
    readonly f: string | null;
  };
}

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
