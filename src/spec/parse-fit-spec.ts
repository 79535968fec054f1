import { createHash } from 'node:crypto';
import { isMap, isNode, isScalar, isSeq, LineCounter, parseDocument, type Document } from 'yaml';
import { findYamlStructureProblems } from './find-yaml-structure-problems.js';
import type { FitSpec } from './fit-spec.js';
import { formatSpecPath } from './format-spec-path.js';
import { locateSpecProblem } from './locate-spec-problem.js';
import { normaliseFitSpec } from './normalise-fit-spec.js';
import { SpecError, type SpecIssue } from './spec-error.js';
import type { SpecProblem } from './spec-problem.js';
import { validateFitSpecDocument } from './validate-fit-spec-document.js';

/**
 * Parses and validates a fit spec (YAML text) into a normalised, fully defaulted,
 * deeply frozen {@link FitSpec}.
 *
 * Checks run in stages and the first stage that finds problems throws a
 * {@link SpecError} listing all of that stage's problems with their lines: YAML syntax;
 * the document being a mapping; repeated keys and unknown aliases; each value against
 * the schema (unknown keys, types, ranges, missing keys); then the checks spanning keys
 * (source form, duplicate names, interaction references, a model with no columns).
 *
 * @param text the spec text; `hash` is the sha256 of exactly this text.
 * @param origin the file name (or another label) used in error messages and kept as `origin`.
 * @throws SpecError when the spec is not valid.
 *
 * @example
 * const spec = parseFitSpec('name: load\nsource: grid.readings\nresponse: load_kw\nterms: [temperature_c]\n', 'load.yaml');
 * spec.source;     // { kind: 'table', schema: 'grid', table: 'readings' }
 * spec.terms;      // [{ name: 'temperature_c', sql: 'temperature_c' }]
 * spec.confidence; // 0.95
 */
export function parseFitSpec(text: string, origin: string): FitSpec {
  const lineCounter = new LineCounter();
  const doc = parseDocument(text, { lineCounter, prettyErrors: false, uniqueKeys: false });
  const fail = (problems: readonly SpecProblem[]): SpecError =>
    new SpecError(origin, problems.map((problem) => locate(doc, lineCounter, problem)));

  if (doc.errors.length > 0) {
    throw fail(doc.errors.map((error) => ({ path: [], offset: error.pos[0], message: `invalid YAML: ${error.message}` })));
  }
  if (!isNode(doc.contents) || (isScalar(doc.contents) && doc.contents.value === null)) {
    throw fail([{ path: [], offset: 0, message: 'the spec is empty: expected a mapping with at least name, source and response' }]);
  }
  if (!isMap(doc.contents)) {
    const kind = isSeq(doc.contents) ? 'a list' : 'a single value';
    throw fail([{ path: [], message: `the spec must be a YAML mapping of keys to values, got ${kind}` }]);
  }
  const structural = findYamlStructureProblems(doc, lineCounter);
  if (structural.length > 0) throw fail(structural);

  let data: unknown;
  try {
    data = doc.toJS();
  } catch (error) {
    throw fail([{ path: [], message: `cannot read the YAML document: ${error instanceof Error ? error.message : String(error)}` }]);
  }

  const checked = validateFitSpecDocument(data);
  if (!checked.ok) throw fail(checked.problems);

  const presentKeys = new Set(typeof data === 'object' && data !== null ? Object.keys(data) : []);
  const normalised = normaliseFitSpec(checked.value, presentKeys);
  if (!normalised.ok) throw fail(normalised.problems);

  const hash = createHash('sha256').update(text, 'utf8').digest('hex');
  return deepFreeze({ ...normalised.value, origin, text, hash });
}

function locate(doc: Document, lineCounter: LineCounter, problem: SpecProblem): SpecIssue {
  const { line, column } = locateSpecProblem(doc, lineCounter, problem);
  return { path: formatSpecPath(problem.path), line, column, message: problem.message };
}

function deepFreeze<T>(value: T): T {
  if (typeof value === 'object' && value !== null && !Object.isFrozen(value)) {
    Object.freeze(value);
    for (const inner of Object.values(value)) deepFreeze(inner);
  }
  return value;
}
