import { readFile } from 'node:fs/promises';
import type { FitSpec } from '../spec/fit-spec.js';
import { parseFitSpec } from '../spec/parse-fit-spec.js';
import { isScheduleFileText, parseScheduleFile } from './schedule-file.js';

/** A fit to refit on a schedule: its spec (as read here) and the cron in force. */
export interface FitSchedule {
  readonly specPath: string;
  readonly spec: FitSpec;
  /** Five-field cron in UTC: the schedule file's, else the spec's `schedule`. */
  readonly cron: string;
}

/** How {@link loadFitSchedules} reads the specs. */
export interface LoadSchedulesOptions {
  /** `serve --schema`: the result schema of every fit, in place of each spec's `schema`. */
  readonly schema?: string | undefined;
}

/** A schedule that cannot be used: no cron for a spec, or two schedules for one fit. */
export class ScheduleError extends Error {
  override readonly name = 'ScheduleError';
}

/**
 * The schedules of the given files, each a fit spec (with `schedule:`) or a schedule file (a
 * list of `{spec, cron}`). Every spec is read and validated now, so a bad one stops `serve`
 * before it registers anything.
 *
 * @throws SpecError for a bad spec or schedule file; ScheduleError for a spec without a
 *   schedule, or one fit scheduled twice.
 * @example
 * const schedules = await loadFitSchedules(['config/schedules.yaml']);
 */
export async function loadFitSchedules(paths: readonly string[], options: LoadSchedulesOptions = {}): Promise<FitSchedule[]> {
  const out: FitSchedule[] = [];
  for (const path of paths) {
    const text = await readText(path);
    const entries = isScheduleFileText(text) ? parseScheduleFile(text, path) : [{ spec: path, cron: null, text }];
    for (const entry of entries) {
      const specText = 'text' in entry ? entry.text : await readText(entry.spec);
      const parsed = parseFitSpec(specText, entry.spec);
      const spec = options.schema === undefined ? parsed : { ...parsed, schema: options.schema };
      const cron = entry.cron ?? spec.schedule;
      if (cron === null) {
        throw new ScheduleError(
          `${entry.spec}: fit ${spec.name} has no schedule: add "schedule: <cron>" to the spec, or list it with a cron in a schedule file`,
        );
      }
      const twice = out.find((s) => s.spec.name === spec.name && s.spec.schema === spec.schema);
      if (twice !== undefined) {
        throw new ScheduleError(`fit ${spec.name} is scheduled twice (${twice.specPath} and ${entry.spec}); keep one`);
      }
      out.push({ specPath: entry.spec, spec, cron });
    }
  }
  return out;
}

async function readText(path: string): Promise<string> {
  try {
    return await readFile(path, 'utf8');
  } catch (e) {
    throw new ScheduleError(`cannot read ${path}: ${e instanceof Error ? e.message : String(e)}`, { cause: e });
  }
}
