import { parentPort, workerData } from 'node:worker_threads';

import type { AccumulatorState, DesignShape, RefinementAnchor } from './accumulator.js';
import { SegmentedFit } from './segmented-fit.js';
import type { SegmentedFitOptions } from './segmented-fit.js';

/** What a fold thread is started with (see FoldPool). */
export interface FoldWorkerData {
  readonly shape: DesignShape;
  readonly keyNames: readonly string[];
  readonly options: Omit<SegmentedFitOptions, 'only' | 'anchors' | 'track'> & {
    readonly only?: readonly string[];
    readonly anchors?: readonly (readonly [string, RefinementAnchor])[];
    readonly track?: 'follow' | readonly (readonly [string, RefinementAnchor])[];
  };
}

/** A message to a fold thread. */
export type FoldWorkerRequest =
  | {
      readonly type: 'block';
      /** Which reader (partition) the block comes from: key ids belong to its key table. */
      readonly reader: number;
      readonly rows: number;
      readonly width: number;
      readonly values: Float64Array;
      readonly keys: Int32Array;
      /** Entries the reader's key table gained since this thread last heard from it. */
      readonly newKeys: ReadonlyArray<ReadonlyArray<string | null>>;
    }
  | { readonly type: 'finish' };

/** One segment's state as a fold thread reports it at the end. */
export interface FoldedSegment {
  readonly key: readonly (string | null)[];
  readonly state: AccumulatorState;
}

/** A message from a fold thread. */
export type FoldWorkerReply =
  | { readonly type: 'ack'; readonly values: Float64Array; readonly keys: Int32Array }
  | { readonly type: 'error'; readonly name: string; readonly message: string; readonly column?: string; readonly segment?: string }
  | { readonly type: 'states'; readonly segments: readonly FoldedSegment[] };

// The body of a fold thread: folds the blocks it is sent into one SegmentedFit per reader
// (key ids are per reader), returns each block's buffers for reuse, and at the end merges
// its readers' fits and sends every segment's state back.
if (parentPort !== null) {
  const port = parentPort;
  const data = workerData as FoldWorkerData;
  const { only, anchors, track, ...rest } = data.options;
  const options: SegmentedFitOptions = {
    ...rest,
    ...(only === undefined ? {} : { only: new Set(only) }),
    ...(anchors === undefined ? {} : { anchors: new Map(anchors) }),
    ...(track === undefined ? {} : { track: track === 'follow' ? track : new Map(track) }),
  };
  const fits = new Map<number, SegmentedFit>();
  const keyTables = new Map<number, (readonly (string | null)[])[]>();
  let failed = false;
  port.on('message', (msg: FoldWorkerRequest) => {
    if (msg.type === 'block') {
      if (!failed) {
        try {
          let fit = fits.get(msg.reader);
          let table = keyTables.get(msg.reader);
          if (fit === undefined || table === undefined) {
            fit = new SegmentedFit(data.shape, data.keyNames, options);
            table = [];
            fits.set(msg.reader, fit);
            keyTables.set(msg.reader, table);
          }
          for (const k of msg.newKeys) table.push(k);
          fit.consume({ rows: msg.rows, width: msg.width, values: msg.values, keys: msg.keys }, table);
        } catch (e) {
          failed = true;
          const err = e instanceof Error ? e : new Error(String(e));
          const extra = err as Error & { column?: string; segment?: string };
          const reply: FoldWorkerReply = {
            type: 'error',
            name: err.name,
            message: err.message,
            ...(typeof extra.column === 'string' ? { column: extra.column } : {}),
            ...(typeof extra.segment === 'string' ? { segment: extra.segment } : {}),
          };
          port.postMessage(reply);
        }
      }
      const ack: FoldWorkerReply = { type: 'ack', values: msg.values, keys: msg.keys };
      port.postMessage(ack, [msg.values.buffer as ArrayBuffer, msg.keys.buffer as ArrayBuffer]);
      return;
    }
    const all = new SegmentedFit(data.shape, data.keyNames, options);
    for (const fit of fits.values()) all.merge(fit);
    const segments = all.states().map((s) => ({ key: s.key, state: s.acc.state() }));
    const reply: FoldWorkerReply = { type: 'states', segments };
    port.postMessage(
      reply,
      segments.flatMap((s) =>
        [s.state.factor, s.state.factorLow, s.state.residuals, s.state.tracking?.sums].filter((a) => a !== undefined).map((a) => a.buffer as ArrayBuffer),
      ),
    );
  });
}
