import PgBoss from 'pg-boss';
import { JOBS_SCHEMA } from '../../src/schedule/fit-queue.js';

/**
 * A test's own pg-boss client on the jobs schema: no clock, no maintenance, no migration (the
 * serve processes under test own those), started on first use, once serve has made the schema.
 *
 * @example
 * const jobs = new TestQueue(() => tdb.url);
 * afterAll(() => jobs.stop());
 * await (await jobs.get()).send(queueName, data);
 */
export class TestQueue {
  readonly #url: () => string;
  #boss: PgBoss | undefined;

  constructor(url: () => string) {
    this.#url = url;
  }

  async get(): Promise<PgBoss> {
    if (this.#boss === undefined) {
      const boss = new PgBoss({ connectionString: this.#url(), schema: JOBS_SCHEMA, supervise: false, schedule: false, migrate: false });
      boss.on('error', () => undefined);
      await boss.start();
      this.#boss = boss;
    }
    return this.#boss;
  }

  async stop(): Promise<void> {
    await this.#boss?.stop({ graceful: false, close: true }).catch(() => undefined);
    this.#boss = undefined;
  }
}
