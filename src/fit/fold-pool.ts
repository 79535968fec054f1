import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';

import type { DesignShape } from './accumulator.js';
import { FitInputError } from './fit-input-error.js';
import type { FoldWorkerData, FoldWorkerReply, FoldWorkerRequest } from './fold-worker.js';
import { SegmentedFit } from './segmented-fit.js';
import type { KeyedBlock, SegmentedFitOptions } from './segmented-fit.js';

/** Blocks a thread may have queued before the reader waits (each about 1–6 MB). */
const IN_FLIGHT_PER_THREAD = 3;

/**
 * The compiled fold thread (dist/src/fit/fold-worker.js under the package root), found by
 * walking up from this module, which runs from src/ under the test runner and from dist/src/
 * when built; null when it is not built.
 */
export function foldWorkerScript(): URL | null {
  const here = fileURLToPath(import.meta.url);
  if (here.endsWith('.js')) return new URL('./fold-worker.js', import.meta.url);
  let dir = dirname(here);
  for (let i = 0; i < 5; i++) {
    const file = join(dir, 'dist', 'src', 'fit', 'fold-worker.js');
    if (existsSync(file)) return new URL(`file://${file}`);
    dir = dirname(dir);
  }
  return null;
}

/**
 * How many fold threads a read should use when the caller leaves it to us (`threads` unset):
 * one, beside the reading thread, when the kernel rather than the socket bounds the read
 * (a factor of order 64 or more costs 2·n² flops a row, several times the cost of receiving
 * and decoding the row's 8·n bytes) and there is a second core; none otherwise. Common
 * practice, measured on this machine: at order 22 the thread hand-off costs more than it saves.
 */
export function autoFoldThreads(order: number): number {
  return order >= 64 && availableParallelism() >= 2 && foldWorkerScript() !== null ? 1 : 0;
}

interface Slot {
  readonly worker: Worker;
  inFlight: number;
  readonly free: { values: Float64Array; keys: Int32Array }[];
}

/**
 * Folds blocks on worker threads while the calling thread goes on receiving and decoding.
 * Each block is copied into a buffer of the pool (the buffers travel to a thread and back,
 * so none is allocated once the pool is warm), blocks go to the threads in turn, and the
 * reader waits (the promise the sink returns) while any thread has its share queued.
 * At the end each thread sends its segments' states and {@link finish} merges them.
 *
 * Rows of one segment may fold on different threads: the merged factor equals a
 * single-threaded fold up to rounding (about 1e-15 relative on a well-conditioned design).
 *
 * @example
 * const pool = new FoldPool(1, shape, keyNames, options);
 * await readDesign(client, req, (block, keyTable) => pool.sink(0, block, keyTable));
 * const fit = await pool.finish();
 */
export class FoldPool {
  private readonly slots: Slot[];
  private readonly shape: DesignShape;
  private readonly keyNames: readonly string[];
  private readonly options: SegmentedFitOptions;
  /** Per reader, per thread: key-table entries already sent. */
  private readonly sentKeys = new Map<number, number[]>();
  private next = 0;
  private failure: Error | undefined;
  private waiters: (() => void)[] = [];
  /** Per thread, the promise of its final states while {@link finish} waits for them. */
  private readonly finishing = new Map<Slot, { resolve: (r: FoldWorkerReply & { type: 'states' }) => void; reject: (e: Error) => void }>();
  /** Set by {@link close}: the threads' exits are then expected. */
  private closing = false;

  constructor(threads: number, shape: DesignShape, keyNames: readonly string[], options: SegmentedFitOptions) {
    if (!Number.isInteger(threads) || threads < 1) throw new RangeError(`a fold pool needs at least one thread, got ${threads}`);
    const script = foldWorkerScript();
    if (script === null) throw new Error('fold threads need the compiled code: run `npm run build` first');
    this.shape = shape;
    this.keyNames = keyNames;
    this.options = options;
    const data: FoldWorkerData = {
      shape,
      keyNames,
      options: {
        ...(options.method === undefined ? {} : { method: options.method }),
        ...(options.precision === undefined ? {} : { precision: options.precision }),
        ...(options.pairs === undefined ? {} : { pairs: options.pairs }),
        ...(options.only === undefined ? {} : { only: [...options.only] }),
        ...(options.anchors === undefined ? {} : { anchors: [...options.anchors] }),
        ...(options.factor === undefined ? {} : { factor: options.factor }),
        ...(options.track === undefined ? {} : { track: options.track === 'follow' ? options.track : [...options.track] }),
      },
    };
    this.slots = Array.from({ length: threads }, () => {
      const slot: Slot = { worker: new Worker(script, { workerData: data }), inFlight: 0, free: [] };
      slot.worker.on('message', (reply: FoldWorkerReply) => this.onReply(slot, reply));
      slot.worker.on('error', (e: Error) => this.fail(e));
      slot.worker.on('exit', (code) => {
        if (!this.closing) this.fail(new Error(`a fold thread stopped${code === 0 ? '' : ` with exit code ${code}`} before the read finished`));
      });
      return slot;
    });
  }

  /** Number of fold threads. */
  get threads(): number {
    return this.slots.length;
  }

  /**
   * Hands a block of reader `reader` to a thread. Returns a promise when a thread has its
   * share of blocks queued (wait for it before decoding more), undefined otherwise.
   * Throws the first error a thread met (a FitInputError keeps its column and segment).
   */
  sink(reader: number, block: KeyedBlock, keyTable: ReadonlyArray<ReadonlyArray<string | null>>): Promise<void> | undefined {
    if (this.failure !== undefined) throw this.failure;
    const t = this.next;
    this.next = (this.next + 1) % this.slots.length;
    const slot = this.slots[t]!;
    const size = block.rows * block.width;
    let buf = slot.free.pop();
    if (buf === undefined || buf.values.length < size || buf.keys.length < block.rows) {
      buf = { values: new Float64Array(size), keys: new Int32Array(block.rows) };
    }
    buf.values.set(block.values.subarray(0, size));
    buf.keys.set(block.keys.subarray(0, block.rows));
    let sent = this.sentKeys.get(reader);
    if (sent === undefined) {
      sent = this.slots.map(() => 0);
      this.sentKeys.set(reader, sent);
    }
    const newKeys = sent[t]! < keyTable.length ? keyTable.slice(sent[t]) : [];
    sent[t] = keyTable.length;
    const msg: FoldWorkerRequest = {
      type: 'block',
      reader,
      rows: block.rows,
      width: block.width,
      values: buf.values,
      keys: buf.keys,
      newKeys,
    };
    slot.worker.postMessage(msg, [buf.values.buffer as ArrayBuffer, buf.keys.buffer as ArrayBuffer]);
    slot.inFlight++;
    if (this.slots.every((s) => s.inFlight < IN_FLIGHT_PER_THREAD)) return undefined;
    return new Promise<void>((resolve) => this.waiters.push(resolve));
  }

  /** Waits for the threads, merges their segments into one SegmentedFit and stops them. */
  async finish(): Promise<SegmentedFit> {
    try {
      const replies = await Promise.all(
        this.slots.map(
          (slot) =>
            new Promise<FoldWorkerReply & { type: 'states' }>((resolve, reject) => {
              if (this.failure !== undefined) {
                reject(this.failure);
                return;
              }
              this.finishing.set(slot, { resolve, reject });
              slot.worker.postMessage({ type: 'finish' } satisfies FoldWorkerRequest);
            }),
        ),
      );
      if (this.failure !== undefined) throw this.failure;
      const fit = new SegmentedFit(this.shape, this.keyNames, this.options);
      for (const reply of replies) for (const s of reply.segments) fit.ensure(s.key).acc.mergeState(s.state);
      return fit;
    } finally {
      await this.close();
    }
  }

  /** Stops the threads (also after a failed read). */
  async close(): Promise<void> {
    this.closing = true;
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
    this.release();
  }

  private onReply(slot: Slot, reply: FoldWorkerReply): void {
    if (reply.type === 'ack') {
      slot.inFlight--;
      slot.free.push({ values: reply.values, keys: reply.keys });
      if (this.slots.every((s) => s.inFlight < IN_FLIGHT_PER_THREAD)) this.release();
    } else if (reply.type === 'error') {
      const options = {
        ...(reply.column === undefined ? {} : { column: reply.column }),
        ...(reply.segment === undefined ? {} : { segment: reply.segment }),
      };
      const e = reply.name === 'FitInputError' ? new FitInputError(reply.message, options) : new Error(reply.message);
      if (reply.name !== 'FitInputError') e.name = reply.name;
      this.fail(e);
    } else {
      const waiting = this.finishing.get(slot);
      this.finishing.delete(slot);
      waiting?.resolve(reply);
    }
  }

  private fail(e: Error): void {
    this.failure ??= e;
    this.release();
    for (const waiting of this.finishing.values()) waiting.reject(this.failure);
    this.finishing.clear();
  }

  /** Lets a waiting reader go on (it then sees any failure at its next block). */
  private release(): void {
    const waiting = this.waiters;
    this.waiters = [];
    for (const w of waiting) w();
  }
}
