import { fitJobRunner } from '../../src/schedule/fit-job-runner.js';
import type { JobSender, ServedJob } from '../../src/schedule/serve-fits.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import { loadFitSpec } from '../../src/spec/load-fit-spec.js';
import { randomSuffix } from './pg-database.js';

/** How {@link driveSplit} works a split run. */
export interface DriveSplitOptions {
  /** The database the run is started in and published to (`--db`). */
  readonly storeUrl: string;
  /** The connections file (given as ROWFOLD_CONNECTIONS). */
  readonly connectionsFile?: string;
  /** Times a failed job is tried again (default 2); the last attempt is `final`. */
  readonly retries?: number;
  /** Called before each partition job's first attempt. */
  readonly beforePartition?: (p: number) => Promise<void> | void;
}

/**
 * Works a split run's jobs as rowfold serve would, in this process: the fit job starts the run,
 * every partition job and the merge job are tried up to `retries` more times (pg-boss retries a
 * failed job; the last attempt is `final`). Returns the run id and every job error.
 */
export async function driveSplit(specPath: string, opts: DriveSplitOptions): Promise<{ runId: number; errors: Error[] }> {
  const spec = await loadFitSpec(specPath);
  const schedule = { specPath, spec, cron: '0 0 * * *' };
  const env = opts.connectionsFile === undefined ? { ...process.env } : { ...process.env, ROWFOLD_CONNECTIONS: opts.connectionsFile };
  const runner = fitJobRunner({ target: resolveConnection({ db: opts.storeUrl, env: {} }), db: opts.storeUrl, env });
  const queue: { kind: 'partition' | 'merge'; data: Record<string, unknown> }[] = [];
  const send: JobSender = {
    partitions: async (_s, runId, n) => {
      for (let p = 0; p < n; p++) queue.push({ kind: 'partition', data: { fit: spec.name, schema: spec.schema, runId, partition: p, partitions: n } });
    },
    merge: async (_s, runId) => {
      queue.push({ kind: 'merge', data: { fit: spec.name, schema: spec.schema, runId } });
    },
  };
  const job = (kind: ServedJob['kind'], data: Record<string, unknown>, final: boolean): ServedJob =>
    ({ kind, queue: kind, id: randomSuffix(), schedule, data, final, signal: new AbortController().signal, onDrop: () => undefined }) as unknown as ServedJob;
  const started = (await runner(job('fit', { fit: spec.name, schema: spec.schema }, true), send)) as { run_id: number };
  const errors: Error[] = [];
  const retries = opts.retries ?? 2;
  while (queue.length > 0) {
    const next = queue.shift()!;
    if (next.kind === 'partition') await opts.beforePartition?.(next.data['partition'] as number);
    for (let attempt = 0; attempt <= retries; attempt++) {
      try {
        await runner(job(next.kind, next.data, attempt === retries), send);
        break;
      } catch (e) {
        errors.push(e as Error);
      }
    }
  }
  return { runId: started.run_id, errors };
}
