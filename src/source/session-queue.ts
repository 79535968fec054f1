import { AsyncLocalStorage } from 'node:async_hooks';

/** Exclusive use of the resource behind a {@link SessionQueue}, until `release()` is called. */
export interface SessionLease {
  /** Gives the resource to the next waiter; calling it again does nothing. */
  release(): void;
}

/**
 * First come, first served, one at a time: the embedded database has a single backend, so
 * every session (a read, a kysely connection, a test's setup query) waits for the one before
 * it to finish. A session is a lease, not a single query, so a transaction is never
 * interleaved with another caller's statements.
 *
 * {@link run} marks its callback's async context; a nested `run` or `acquire` from inside it
 * would wait for itself forever, so it throws instead.
 *
 * @example
 * const queue = new SessionQueue('embedded database .rowfold/db');
 * const rows = await queue.run(() => pglite.query('select 1'));
 */
export class SessionQueue {
  readonly #label: string;
  readonly #holder = new AsyncLocalStorage<SessionQueue>();
  #tail: Promise<void> = Promise.resolve();
  #active = 0;

  /** @param label - names the resource in the nested-use error */
  constructor(label: string) {
    this.#label = label;
  }

  /** True while a lease is held. */
  get busy(): boolean {
    return this.#active > 0;
  }

  /** Waits for the resource; the caller must release the lease (in a `finally`). */
  async acquire(): Promise<SessionLease> {
    if (this.#holder.getStore() === this) {
      throw new Error(`${this.#label} serves one session at a time, and this call already holds it`);
    }
    let release!: () => void;
    const done = new Promise<void>((resolve) => (release = resolve));
    const before = this.#tail;
    this.#tail = before.then(() => done);
    await before;
    this.#active++;
    let released = false;
    return {
      release: () => {
        if (released) return;
        released = true;
        this.#active--;
        release();
      },
    };
  }

  /** Runs `fn` with the resource to itself, then releases it whatever happens. */
  async run<T>(fn: () => Promise<T>): Promise<T> {
    const lease = await this.acquire();
    try {
      return await this.#holder.run(this, fn);
    } finally {
      lease.release();
    }
  }
}
