import { isAlias, isMap, isNode, isScalar, isSeq, type Document, type LineCounter } from 'yaml';
import type { SpecProblem } from './spec-problem.js';

/**
 * Problems in a syntactically valid YAML document that would otherwise be lost when it
 * is turned into data: a key repeated in one mapping (the parser is run with
 * `uniqueKeys: false` so that the key path can be named here) and aliases without a
 * matching anchor.
 *
 * @example
 * const lineCounter = new LineCounter();
 * const doc = parseDocument('name: a\nname: b\n', { lineCounter, uniqueKeys: false });
 * findYamlStructureProblems(doc, lineCounter);
 * // [{ path: ['name'], offset: 8, message: 'duplicate key "name" (first on line 1)' }]
 */
export function findYamlStructureProblems(doc: Document, lineCounter: LineCounter): SpecProblem[] {
  const problems: SpecProblem[] = [];
  const visit = (node: unknown, path: readonly (string | number)[]): void => {
    if (isAlias(node)) {
      if (node.resolve(doc) === undefined) {
        problems.push({ path, offset: node.range?.[0] ?? 0, message: `unknown alias "*${node.source}"` });
      }
    } else if (isMap(node)) {
      const seen = new Map<string, number>();
      for (const pair of node.items) {
        const key = isScalar(pair.key) ? String(pair.key.value) : undefined;
        if (key !== undefined) {
          const offset = isNode(pair.key) ? (pair.key.range?.[0] ?? 0) : 0;
          const first = seen.get(key);
          if (first !== undefined) {
            const line = lineCounter.linePos(first).line;
            problems.push({ path: [...path, key], offset, message: `duplicate key "${key}" (first on line ${line})` });
          } else {
            seen.set(key, offset);
          }
        }
        visit(pair.value, key === undefined ? path : [...path, key]);
      }
    } else if (isSeq(node)) {
      node.items.forEach((item, index) => visit(item, [...path, index]));
    }
  };
  visit(doc.contents, []);
  return problems;
}
