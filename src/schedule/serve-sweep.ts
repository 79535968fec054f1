import { setTimeout as sleep } from 'node:timers/promises';
import type PgBoss from 'pg-boss';
import type { HandBackOutcome, LostClaim, ServeRegistry } from './serve-registry.js';

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
 * (it is alive and serves `fitQueues`); jobs that ran past their expiry put back on the queue (a
 * worker that hangs without dying keeps its presence lock: its job comes back within one sweep of
 * its expiry, whichever live process sweeps first, without waiting for pg-boss's maintenance);
 * the jobs of processes that died put back on the queue (a process counts as dead when its
 * presence lock is missing on two looks {@link PRESENCE_GRACE_MS} apart); a job with no retries
 * left is failed instead; and the schedules of fits nobody serves removed. A failed sweep is
 * logged and the next one tries again.
 */
export async function sweepServe(boss: PgBoss, registry: ServeRegistry, fitQueues: readonly string[], opts: SweepOptions): Promise<void> {
  const every = opts.sweepSeconds * 1000;
  const forget = opts.forgetAfterSeconds;
  const stop = opts.stop;
  const said = (claim: LostClaim, what: string, done: HandBackOutcome) => {
    if (done !== null) opts.log(`job ${claim.jobId} of ${claim.queue}: ${what}; ${done === 'retry' ? 'back on the queue' : 'failed (no retries left)'}`);
  };
  while (!stop.aborted) {
    await sleep(every, undefined, { signal: stop }).catch(() => undefined);
    if (stop.aborted) break;
    try {
      await registry.heartbeat(fitQueues);
      for (const claim of await registry.expiredClaims()) {
        const what = `ran past its expiry on the serve process ${claim.serverId} (hung, or slower than its timeout)`;
        said(claim, what, await registry.handBack(boss, claim, 'expired', `the job ${what}`));
      }
      const lost = await registry.lostClaims();
      if (lost.length > 0) {
        // A presence lock missing for a moment is a process taking it again on a new connection
        // (the database restarted or ended the old one), not a dead process: look again later.
        await sleep(PRESENCE_GRACE_MS, undefined, { signal: stop }).catch(() => undefined);
        if (stop.aborted) break;
        const still = new Set((await registry.lostClaims()).map((c) => `${c.jobId} ${c.serverId}`));
        for (const claim of lost.filter((c) => still.has(`${c.jobId} ${c.serverId}`))) {
          const what = `the serve process ${claim.serverId} working it stopped`;
          said(claim, what, await registry.handBack(boss, claim, 'lost', what));
        }
      }
      for (const queue of await registry.unscheduleStale(boss, forget)) {
        opts.log(`${queue}: schedule removed: no serve process has served this fit for ${forget} s`);
      }
    } catch (e) {
      opts.log(`sweep failed: ${e instanceof Error ? e.message : String(e)}`);
    }
  }
}
