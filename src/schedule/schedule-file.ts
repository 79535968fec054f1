import { readFile } from 'node:fs/promises';
import { dirname, resolve } from 'node:path';
import { isMap, isNode, isSeq, LineCounter, parseDocument } from 'yaml';
import { formatSpecPath } from '../spec/format-spec-path.js';
import { locateSpecProblem } from '../spec/locate-spec-problem.js';
import { SpecError } from '../spec/spec-error.js';
import type { SpecProblem } from '../spec/spec-problem.js';
import { cronProblem } from '../spec/cron-rule.js';

/** One line of a schedule file: a fit spec and, optionally, the cron that overrides its `schedule`. */
export interface ScheduleFileEntry {
  /** The spec's path, resolved against the schedule file's folder. */
  readonly spec: string;
  /** Five-field cron in UTC, or `null` to use the spec's own `schedule`. */
  readonly cron: string | null;
}

/**
 * True when YAML text is a schedule file (a list at the top) rather than a fit spec (a mapping).
 *
 * @example
 * isScheduleFileText('- spec: a.yaml\n  cron: "0 3 * * *"\n'); // true
 */
export function isScheduleFileText(text: string): boolean {
  return isSeq(parseDocument(text).contents);
}

/**
 * Reads a schedule file (e.g. `config/schedules.yaml`): a YAML list of `{spec, cron}` mappings,
 * `spec` a path relative to the file's folder, `cron` optional when the spec has `schedule:`.
 * Problems are reported like spec errors, with key path and line
 * (`schedules.yaml:3:9: [0].cron: must be a cron expression …`).
 *
 * @throws SpecError for a file that is not such a list; file system errors pass through.
 * @example
 * const entries = await loadScheduleFile('config/schedules.yaml');
 */
export async function loadScheduleFile(path: string): Promise<ScheduleFileEntry[]> {
  const text = await readFile(path, 'utf8');
  return parseScheduleFile(text, path);
}

/** {@link loadScheduleFile} on text already read; `origin` names the file in messages and anchors relative paths. */
export function parseScheduleFile(text: string, origin: string): ScheduleFileEntry[] {
  const lineCounter = new LineCounter();
  const doc = parseDocument(text, { lineCounter, prettyErrors: false });
  const problems: SpecProblem[] = [];
  const fail = (): SpecError =>
    new SpecError(
      origin,
      problems.map((p) => ({ path: formatSpecPath(p.path), ...locateSpecProblem(doc, lineCounter, p), message: p.message })),
    );
  if (doc.errors.length > 0) {
    problems.push(...doc.errors.map((e) => ({ path: [], offset: e.pos[0], message: `invalid YAML: ${e.message}` })));
    throw fail();
  }
  if (!isNode(doc.contents) || !isSeq(doc.contents)) {
    problems.push({ path: [], message: 'a schedule file must be a YAML list of {spec, cron} mappings' });
    throw fail();
  }
  const nodes = doc.contents.items;
  const data = doc.toJS() as unknown[];
  const entries: ScheduleFileEntry[] = [];
  data.forEach((item, i) => {
    if (!isMap(nodes[i]) || typeof item !== 'object' || item === null) {
      problems.push({ path: [i], message: 'must be a mapping with "spec" (a fit spec file) and optionally "cron"' });
      return;
    }
    const entry = item as Record<string, unknown>;
    for (const key of Object.keys(entry)) {
      if (key !== 'spec' && key !== 'cron') problems.push({ path: [i, key], at: 'key', message: `unknown key "${key}" (a schedule has "spec" and "cron")` });
    }
    const spec = entry['spec'];
    if (typeof spec !== 'string' || spec.trim() === '') {
      problems.push({ path: [i, 'spec'], message: spec === undefined ? 'required key is missing' : 'must be the path of a fit spec file' });
      return;
    }
    const cron = entry['cron'];
    if (cron !== undefined && cron !== null) {
      const problem = typeof cron === 'string' ? cronProblem(cron) : 'must be a cron expression (a string)';
      if (problem !== null) {
        problems.push({ path: [i, 'cron'], message: `${problem}, got ${JSON.stringify(cron)}` });
        return;
      }
    }
    entries.push({ spec: resolve(dirname(origin), spec.trim()), cron: typeof cron === 'string' ? cron.trim() : null });
  });
  if (problems.length > 0) throw fail();
  return entries;
}
