import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parentPort, Worker, workerData } from 'node:worker_threads';

import { residualFindings } from './residual-results.js';
import type { ResidualContext, ResidualFindings } from './residual-results.js';
import { ResidualSegment } from './residual-segment.js';
import type { ResidualModel, ResidualPassOptions } from './residual-segment.js';

/** One segment of a residual pass: its model, its label for errors, and its side of the findings. */
export interface ResidualThreadSegment {
  readonly model: ResidualModel;
  readonly label: string;
  readonly context: ResidualContext;
}

/** What a residual thread is started with. */
export interface ResidualThreadData {
  readonly options: ResidualPassOptions;
  readonly layout: { readonly width: number; readonly response: number; readonly weight: number };
  /** Where a row's id and hold-out flag are in the block (−1: none). */
  readonly idAt: number;
  readonly heldAt: number;
  readonly segments: readonly ResidualThreadSegment[];
}

/** What the pass found in one segment: the rows it read, and its findings (null: rows ≠ the model's). */
export interface ResidualThreadResult {
  readonly rows: number;
  readonly findings: ResidualFindings | null;
}

type Request =
  | { readonly type: 'block'; readonly rows: number; readonly values: Float64Array; readonly segment: Int32Array; readonly cluster: Int32Array }
  | { readonly type: 'finish' };
type Reply =
  | { readonly type: 'ack'; readonly values: Float64Array; readonly segment: Int32Array; readonly cluster: Int32Array }
  | { readonly type: 'error'; readonly message: string }
  | { readonly type: 'results'; readonly results: readonly ResidualThreadResult[] };

/** Blocks queued on the thread before the reader waits. */
const IN_FLIGHT = 3;

/**
 * Feeds rows to each segment's sums: the one loop of a residual pass, on whichever thread
 * holds the segments. `segment[i]` is row i's segment (−1: not a model's), `cluster[i]` its
 * cluster id.
 */
export function feedResidualRows(
  segments: readonly ResidualSegment[],
  values: Float64Array,
  width: number,
  rows: number,
  segment: Int32Array,
  cluster: Int32Array,
  idAt: number,
  heldAt: number,
): void {
  for (let i = 0; i < rows; i++) {
    const s = segment[i]!;
    if (s < 0) continue;
    const o = i * width;
    segments[s]!.row(values, o, cluster[i]!, idAt < 0 ? 0 : values[o + idAt]!, heldAt >= 0 && values[o + heldAt] === 1);
  }
}

/** A segment's findings once every row is in: null when it read another number of rows than its model holds. */
export function segmentResult(seg: ResidualSegment, context: ResidualContext): ResidualThreadResult {
  return { rows: seg.rows, findings: seg.rows === seg.model.rows ? residualFindings(seg, context) : null };
}

/**
 * The compiled residual thread (dist/src/fit/residual-thread.js under the package root), found
 * as the fold thread's is; null when it is not built.
 */
export function residualThreadScript(): URL | null {
  const here = fileURLToPath(import.meta.url);
  if (here.endsWith('.js')) return new URL(import.meta.url);
  let dir = dirname(here);
  for (let i = 0; i < 5; i++) {
    const file = join(dir, 'dist', 'src', 'fit', 'residual-thread.js');
    if (existsSync(file)) return new URL(`file://${file}`);
    dir = dirname(dir);
  }
  return null;
}

/**
 * Whether a residual pass should take its rows on a thread of its own. When the caller leaves it
 * to us (`threads` unset): when its largest model has 64 coefficients or more (its leverages and
 * meats then cost 2·k² flops a row, several times receiving and decoding the row, as for the
 * fold threads; see autoFoldThreads) and there is a second core. `threads: 0` keeps the pass on
 * the reading thread; `threads` of 1 or more gives it a thread whatever the size of the models.
 * Never when the thread is not built.
 */
export function residualThreadWanted(largestK: number, threads: number | undefined): boolean {
  if (threads === 0 || residualThreadScript() === null) return false;
  return threads !== undefined || (largestK >= 64 && availableParallelism() >= 2);
}

/**
 * The residual pass's sums on a worker thread while the calling thread receives and decodes:
 * each block is copied with its rows' segment and cluster ids into buffers that travel to the
 * thread and back; the reader waits (the promise {@link sink} returns) while the thread has
 * {@link IN_FLIGHT} blocks queued. Blocks are taken in the order sent, so an ordered pass
 * (`order_by`) stays in order. At the end the thread returns every segment's findings.
 */
export class ResidualThread {
  private readonly worker: Worker;
  private inFlight = 0;
  private readonly free: { values: Float64Array; segment: Int32Array; cluster: Int32Array }[] = [];
  private failure: Error | undefined;
  private waiters: (() => void)[] = [];
  private finishing: { resolve: (r: readonly ResidualThreadResult[]) => void; reject: (e: Error) => void } | null = null;
  private closing = false;

  constructor(data: ResidualThreadData) {
    const script = residualThreadScript();
    if (script === null) throw new Error('the residual thread needs the compiled code: run `npm run build` first');
    this.worker = new Worker(script, { workerData: { ...data, residualThread: true } });
    this.worker.on('message', (reply: Reply) => this.onReply(reply));
    this.worker.on('error', (e: Error) => this.fail(e));
    this.worker.on('exit', (code) => {
      if (!this.closing) this.fail(new Error(`the residual thread stopped${code === 0 ? '' : ` with exit code ${code}`} before the pass finished`));
    });
  }

  /** Hands `rows` rows (row-major, `width` values each) with their segment and cluster ids to the thread. */
  sink(values: Float64Array, width: number, rows: number, segment: Int32Array, cluster: Int32Array): Promise<void> | undefined {
    if (this.failure !== undefined) throw this.failure;
    const size = rows * width;
    let buf = this.free.pop();
    if (buf === undefined || buf.values.length < size || buf.segment.length < rows) {
      buf = { values: new Float64Array(size), segment: new Int32Array(rows), cluster: new Int32Array(rows) };
    }
    buf.values.set(values.subarray(0, size));
    buf.segment.set(segment.subarray(0, rows));
    buf.cluster.set(cluster.subarray(0, rows));
    const msg: Request = { type: 'block', rows, values: buf.values, segment: buf.segment, cluster: buf.cluster };
    this.worker.postMessage(msg, [buf.values.buffer as ArrayBuffer, buf.segment.buffer as ArrayBuffer, buf.cluster.buffer as ArrayBuffer]);
    this.inFlight++;
    if (this.inFlight < IN_FLIGHT) return undefined;
    return new Promise<void>((resolve) => this.waiters.push(resolve));
  }

  /** Waits for the thread's findings, segment by segment in the order of the data's segments, and stops it. */
  async finish(): Promise<readonly ResidualThreadResult[]> {
    try {
      return await new Promise<readonly ResidualThreadResult[]>((resolve, reject) => {
        if (this.failure !== undefined) {
          reject(this.failure);
          return;
        }
        this.finishing = { resolve, reject };
        this.worker.postMessage({ type: 'finish' } satisfies Request);
      });
    } finally {
      await this.close();
    }
  }

  /** Stops the thread (also after a failed read). */
  async close(): Promise<void> {
    this.closing = true;
    await this.worker.terminate();
    this.release();
  }

  private onReply(reply: Reply): void {
    if (reply.type === 'ack') {
      this.inFlight--;
      this.free.push({ values: reply.values, segment: reply.segment, cluster: reply.cluster });
      this.release();
    } else if (reply.type === 'error') {
      this.fail(new Error(reply.message));
    } else {
      const f = this.finishing;
      this.finishing = null;
      f?.resolve(reply.results);
    }
  }

  private fail(e: Error): void {
    this.failure ??= e;
    this.release();
    this.finishing?.reject(this.failure);
    this.finishing = null;
  }

  private release(): void {
    const waiting = this.waiters;
    this.waiters = [];
    for (const w of waiting) w();
  }
}

// The body of a residual thread: one ResidualSegment per segment of the data, fed the blocks
// it is sent (their buffers go back for reuse); at the end, every segment's findings.
if (parentPort !== null && (workerData as { residualThread?: unknown } | null)?.residualThread === true) {
  const port = parentPort;
  const data = workerData as ResidualThreadData;
  const segments = data.segments.map((s) => new ResidualSegment(s.model, data.options, data.layout, s.label));
  let failed = false;
  port.on('message', (msg: Request) => {
    if (failed) return;
    try {
      if (msg.type === 'block') {
        feedResidualRows(segments, msg.values, data.layout.width, msg.rows, msg.segment, msg.cluster, data.idAt, data.heldAt);
        const reply: Reply = { type: 'ack', values: msg.values, segment: msg.segment, cluster: msg.cluster };
        port.postMessage(reply, [msg.values.buffer as ArrayBuffer, msg.segment.buffer as ArrayBuffer, msg.cluster.buffer as ArrayBuffer]);
      } else {
        const results = segments.map((seg, i) => segmentResult(seg, data.segments[i]!.context));
        port.postMessage({ type: 'results', results } satisfies Reply);
      }
    } catch (e) {
      failed = true;
      port.postMessage({ type: 'error', message: e instanceof Error ? e.message : String(e) } satisfies Reply);
    }
  });
}
