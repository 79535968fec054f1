import type PgBoss from 'pg-boss';
import { jobIdOf, mergeQueueName, partitionQueueName } from './fit-queue.js';
import type { MergeJobData, PartitionJobData } from './fit-queue.js';
import type { JobSender } from './serve-fits.js';

/**
 * Sends the jobs of split runs through pg-boss, each with an id fixed by the run (and
 * partition): sent twice, a job still exists once.
 */
export function splitJobSender(boss: PgBoss): JobSender {
  return {
    async partitions(schedule, runId, partitions, timeoutSeconds, signal) {
      const queue = partitionQueueName(schedule.spec.schema, schedule.spec.name);
      for (let partition = 0; partition < partitions; partition++) {
        signal?.throwIfAborted();
        const data: PartitionJobData = { fit: schedule.spec.name, schema: schedule.spec.schema, runId, partition, partitions };
        await boss.send(queue, data, { id: jobIdOf(queue, runId, partition), expireInSeconds: timeoutSeconds });
      }
    },
    async merge(schedule, runId, timeoutSeconds) {
      const queue = mergeQueueName(schedule.spec.schema, schedule.spec.name);
      const data: MergeJobData = { fit: schedule.spec.name, schema: schedule.spec.schema, runId };
      await boss.send(queue, data, { id: jobIdOf(queue, runId), expireInSeconds: timeoutSeconds });
    },
  };
}
