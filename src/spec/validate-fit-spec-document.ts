import * as z from 'zod';
import { didYouMean } from './did-you-mean.js';
import { fitSpecSchema, type FitSpecDocument } from './fit-spec-schema.js';
import type { SpecProblem } from './spec-problem.js';

type Path = readonly (string | number)[];

/**
 * Checks a plain JavaScript value (the YAML document as data) against
 * {@link fitSpecSchema} and turns zod's issues into located-by-path spec problems:
 * one problem per unknown key (pointing at the key, with a "did you mean" suggestion
 * when a known key is close), the matching branch's problems for a value that fits
 * one alternative of a union in shape, "required key is missing" for absent keys, and
 * the offending value appended to every other message (`…, got "svd"`).
 *
 * @example
 * const result = validateFitSpecDocument({ name: 'f', source: 't', response: 'y', metod: 'qr' });
 * // { ok: false, problems: [{ path: ['metod'], at: 'key', message: 'unknown key "metod" (did you mean "method"?)' }] }
 */
export function validateFitSpecDocument(
  data: unknown,
): { ok: true; value: FitSpecDocument } | { ok: false; problems: SpecProblem[] } {
  const result = fitSpecSchema.safeParse(data, { error: fallbackMessage });
  if (result.success) return { ok: true, value: result.data };
  const problems = result.error.issues.flatMap((issue) => toProblems(issue, [], data));
  const seen = new Set<string>();
  const unique = problems.filter((problem) => {
    const id = JSON.stringify([problem.path, problem.at ?? 'value']);
    if (seen.has(id)) return false;
    seen.add(id);
    return true;
  });
  return { ok: false, problems: unique };
}

/** Messages for schemas that do not set their own. */
const fallbackMessage: z.core.$ZodErrorMap = (issue) => {
  switch (issue.code) {
    case 'invalid_type':
      return `must be ${expectedText(issue.expected)}`;
    case 'invalid_value':
      return `must be one of ${issue.values.map((value) => JSON.stringify(value)).join(', ')}`;
    case 'too_small':
      return `must be ${issue.inclusive === false ? 'greater than' : 'at least'} ${String(issue.minimum)}`;
    case 'too_big':
      return `must be ${issue.inclusive === false ? 'less than' : 'at most'} ${String(issue.maximum)}`;
    default:
      return undefined;
  }
};

function expectedText(expected: string): string {
  switch (expected) {
    case 'array':
    case 'tuple':
      return 'a list';
    case 'object':
      return 'a mapping';
    case 'boolean':
      return 'true or false';
    case 'int':
      return 'an integer';
    default:
      return `a ${expected}`;
  }
}

function toProblems(issue: z.core.$ZodIssue, base: Path, data: unknown): SpecProblem[] {
  const path: Path = [...base, ...issue.path.map((segment) => (typeof segment === 'number' ? segment : String(segment)))];
  if (issue.code === 'unrecognized_keys') {
    const known = knownKeysAt(path);
    return issue.keys.map((key) => {
      const suggestion = didYouMean(key, known);
      const hint = suggestion === undefined ? '' : ` (did you mean "${suggestion}"?)`;
      return { path: [...path, key], at: 'key', message: `unknown key "${key}"${hint}` };
    });
  }
  if (issue.code === 'invalid_union') {
    const branch = matchingBranch(issue.errors);
    if (branch !== undefined) return branch.flatMap((inner) => toProblems(inner, path, data));
  }
  const value = valueAt(data, path);
  const last = path[path.length - 1];
  if (value === undefined && typeof last === 'string' && isMapping(valueAt(data, path.slice(0, -1)))) {
    return [{ path, message: 'required key is missing' }];
  }
  let message = `${issue.message}, got ${describeValue(value)}`;
  if (issue.code === 'invalid_value' && typeof value === 'string') {
    const suggestion = didYouMean(
      value,
      issue.values.filter((option): option is string => typeof option === 'string'),
    );
    if (suggestion !== undefined) message += ` (did you mean "${suggestion}"?)`;
  }
  return [{ path, message }];
}

/**
 * The branch of a failed union whose shape fits the value: the only one that did not
 * fail on the value's type itself. `undefined` when none (or more than one) does.
 */
function matchingBranch(branches: readonly (readonly z.core.$ZodIssue[])[]): readonly z.core.$ZodIssue[] | undefined {
  const fitting = branches.filter(
    (issues) => !issues.some((issue) => issue.path.length === 0 && issue.code === 'invalid_type'),
  );
  return fitting.length === 1 ? fitting[0] : undefined;
}

function valueAt(data: unknown, path: Path): unknown {
  let current = data;
  for (const segment of path) {
    if (Array.isArray(current) && typeof segment === 'number') current = current[segment];
    else if (isMapping(current) && typeof segment === 'string') current = current[segment];
    else return undefined;
  }
  return current;
}

function isMapping(value: unknown): value is Record<string, unknown> {
  return typeof value === 'object' && value !== null && !Array.isArray(value);
}

/** How a value is shown after "got" in messages. */
function describeValue(value: unknown): string {
  if (value === undefined) return 'nothing';
  if (value === null) return 'an empty value';
  if (typeof value === 'string') {
    const shown = value.length > 60 ? `${value.slice(0, 57)}...` : value;
    return JSON.stringify(shown);
  }
  if (typeof value === 'number') {
    if (Number.isNaN(value)) return '.nan';
    if (value === Infinity) return '.inf';
    if (value === -Infinity) return '-.inf';
    return String(value);
  }
  if (typeof value === 'boolean') return String(value);
  if (Array.isArray(value)) return 'a list';
  return 'a mapping';
}

/** Keys of every object schema that can sit at `path` in {@link fitSpecSchema}. */
function knownKeysAt(path: Path): string[] {
  let schemas: z.core.$ZodType[] = [fitSpecSchema];
  for (const segment of path) {
    schemas = schemas.flatMap(unwrap).flatMap((schema) => childAt(schema, segment));
  }
  return schemas.flatMap(unwrap).flatMap((schema) => (schema instanceof z.ZodObject ? Object.keys(schema.shape) : []));
}

function unwrap(schema: z.core.$ZodType): z.core.$ZodType[] {
  if (schema instanceof z.ZodOptional || schema instanceof z.ZodDefault) return unwrap(schema.unwrap());
  if (schema instanceof z.ZodUnion) return schema.options.flatMap(unwrap);
  return [schema];
}

function childAt(schema: z.core.$ZodType, segment: string | number): z.core.$ZodType[] {
  if (schema instanceof z.ZodObject && typeof segment === 'string') {
    const child: z.core.$ZodType | undefined = schema.shape[segment];
    return child === undefined ? [] : [child];
  }
  if (schema instanceof z.ZodArray && typeof segment === 'number') return [schema.element];
  if (schema instanceof z.ZodTuple && typeof segment === 'number') {
    const item: z.core.$ZodType | undefined = schema.def.items[segment];
    return item === undefined ? [] : [item];
  }
  return [];
}
