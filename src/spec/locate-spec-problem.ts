import { isAlias, isMap, isNode, isScalar, isSeq, type Document, type LineCounter, type Node } from 'yaml';
import type { SpecProblem } from './spec-problem.js';

/**
 * The 1-based line and column a spec problem points at, found by walking its key path
 * through the parsed YAML document (see {@link SpecProblem} for what is pointed at).
 * Aliases are followed to their anchors. When the path leaves the document (a missing
 * key), the nearest enclosing node is used; an empty document gives 1:1.
 *
 * @example
 * const lineCounter = new LineCounter();
 * const doc = parseDocument('name: a\nterms:\n  - x\n  - x\n', { lineCounter });
 * locateSpecProblem(doc, lineCounter, { path: ['terms', 1], message: '' }); // { line: 4, column: 5 }
 */
export function locateSpecProblem(
  doc: Document,
  lineCounter: LineCounter,
  problem: SpecProblem,
): { line: number; column: number } {
  if (problem.offset !== undefined) return position(lineCounter, problem.offset);
  let node: Node | null = isNode(doc.contents) ? doc.contents : null;
  const { path } = problem;
  for (let i = 0; i < path.length && node !== null; i++) {
    const segment = path[i];
    const last = i === path.length - 1;
    node = followAlias(doc, node);
    if (isMap(node)) {
      const pair = [...node.items].reverse().find((item) => keyText(item.key) === String(segment));
      if (pair === undefined) break;
      const key = isNode(pair.key) ? pair.key : null;
      const value = isNode(pair.value) && !isEmptyScalar(pair.value) ? pair.value : null;
      if (last && problem.at === 'key' && key !== null) return start(lineCounter, key);
      if (value === null) {
        if (key !== null) node = key;
        break;
      }
      node = value;
    } else if (isSeq(node) && typeof segment === 'number') {
      const item: unknown = node.items[segment];
      if (!isNode(item)) break;
      node = item;
    } else {
      break;
    }
  }
  return node === null ? { line: 1, column: 1 } : start(lineCounter, node);
}

function followAlias(doc: Document, node: Node): Node {
  if (!isAlias(node)) return node;
  const target: unknown = node.resolve(doc);
  return isNode(target) ? target : node;
}

function keyText(key: unknown): string | undefined {
  if (isScalar(key)) return String(key.value);
  return typeof key === 'string' ? key : undefined;
}

function isEmptyScalar(node: Node): boolean {
  return isScalar(node) && node.value === null && node.range !== undefined && node.range !== null && node.range[0] === node.range[1];
}

function start(lineCounter: LineCounter, node: Node): { line: number; column: number } {
  return position(lineCounter, node.range?.[0] ?? 0);
}

function position(lineCounter: LineCounter, offset: number): { line: number; column: number } {
  const { line, col } = lineCounter.linePos(offset);
  return { line, column: col };
}
