import { setTimeout as sleep } from 'node:timers/promises';
import type PgBoss from 'pg-boss';
import type { ServeRegistry } from './serve-registry.js';

/**
 * Milliseconds a claim's process must stay without its presence lock before its job is handed
 * back: longer than a process takes to reconnect and take the lock again (it tries every half
 * second), short beside the time a killed worker's job can wait.
 */
export const PRESENCE_GRACE_MS = 2000;

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
 * (or failed when they have no retries left; a process counts as dead when its presence lock
 * is missing on two looks {@link PRESENCE_GRACE_MS} apart), and the schedules of fits nobody serves removed.
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
      const lost = await registry.lostClaims();
      if (lost.length > 0) {
        // A presence lock missing for a moment is a process taking it again on a new connection
        // (the database restarted or ended the old one), not a dead process: look again later.
        await sleep(PRESENCE_GRACE_MS, undefined, { signal: stop }).catch(() => undefined);
        if (stop.aborted) break;
        const still = new Set((await registry.lostClaims()).map((c) => `${c.jobId} ${c.serverId}`));
        for (const claim of lost.filter((c) => still.has(`${c.jobId} ${c.serverId}`))) {
          const done = await registry.handBackLost(claim, () =>
            boss.fail(claim.queue, claim.jobId, { message: `the serve process ${claim.serverId} working it stopped` }),
          );
          if (done !== null) {
            opts.log(`job ${claim.jobId} of ${claim.queue}: the serve process ${claim.serverId} working it stopped; ${done === 'retry' ? 'back on the queue' : 'failed (no retries left)'}`);
          }
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
