import { LineCounter, parseDocument } from 'yaml';
import { locateSpecProblem } from './locate-spec-problem.js';

/**
 * The 1-based line of a spec key (`terms[1]`, `window.column`, `categorical[0].reference`)
 * in the spec's text, for errors found after the spec was parsed (when the source is
 * planned). A key the text does not spell out (a default, a single value in place of a list)
 * gives the line of the nearest enclosing key.
 *
 * @example
 * specKeyLine('name: a\nterms:\n  - x\n  - y\n', 'terms[1]'); // 4
 */
export function specKeyLine(text: string, key: string): number {
  const path: (string | number)[] = [];
  for (const m of key.matchAll(/([^.[\]]+)|\[(\d+)\]/g)) path.push(m[2] !== undefined ? Number(m[2]) : m[1]!);
  const lineCounter = new LineCounter();
  const doc = parseDocument(text, { lineCounter, uniqueKeys: false });
  return locateSpecProblem(doc, lineCounter, { path, message: '' }).line;
}
