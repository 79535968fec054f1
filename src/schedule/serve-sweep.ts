import { setTimeout as sleep } from 'node:timers/promises';
import type PgBoss from 'pg-boss';
import type { ServeRegistry } from './serve-registry.js';

/** How often and how {@link sweepServe} sweeps. */
export interface SweepOptions {
  readonly sweepSeconds: number;
  /** A schedule whose fit nobody has served for this long is removed. */
  readonly forgetAfterSeconds: number;
  readonly log: (line: string) => void;
  /** Ends the loop. */
  readonly stop: AbortSignal;
}

/**
 * The housekeeping loop of one serve process, every `sweepSeconds` until `stop`: its heartbeat
 * (it is alive and serves `fitQueues`), the jobs of processes that died put back on the queue
 * (or failed when they have no retries left), and the schedules of fits nobody serves removed.
 * A failed sweep is logged and the next one tries again.
 */
export async function sweepServe(boss: PgBoss, registry: ServeRegistry, fitQueues: readonly string[], opts: SweepOptions): Promise<void> {
  const every = opts.sweepSeconds * 1000;
  const forget = opts.forgetAfterSeconds;
  const stop = opts.stop;
  while (!stop.aborted) {
    await sleep(every, undefined, { signal: stop }).catch(() => undefined);
    if (stop.aborted) break;
    try {
      await registry.heartbeat(fitQueues);
      for (const claim of await registry.lostClaims()) {
        const done = await registry.releaseJob(claim.queue, claim.jobId, () =>
          boss.fail(claim.queue, claim.jobId, { message: `the serve process ${claim.serverId} working it stopped` }),
        );
        await registry.dropClaim(claim);
        if (done !== null) {
          opts.log(`job ${claim.jobId} of ${claim.queue}: the serve process ${claim.serverId} working it stopped; ${done === 'retry' ? 'back on the queue' : 'failed (no retries left)'}`);
        }
      }
      for (const queue of await registry.unscheduleStale(forget)) {
        opts.log(`${queue}: schedule removed: no serve process has served this fit for ${forget} s`);
      }
    } catch (e) {
      opts.log(`sweep failed: ${e instanceof Error ? e.message : String(e)}`);
    }
  }
}
