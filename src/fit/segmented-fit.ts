import type { RowBlock } from '../numeric/row-block.js';
import { Accumulator } from './accumulator.js';
import { Float64Slab } from './float64-slab.js';
import type { DesignShape, FoldMethod, FoldPrecision, LabelSource, RefinementAnchor } from './accumulator.js';

/** How the accumulators of a SegmentedFit fold, and which segments it keeps. */
export interface SegmentedFitOptions {
  readonly method?: FoldMethod;
  readonly precision?: FoldPrecision;
  /** Block values come as (hi, lo) pairs (double-double only). */
  readonly pairs?: boolean;
  /** Fold only these segments (by key text); rows of others are passed over. */
  readonly only?: ReadonlySet<string>;
  /** Per segment (by key text), coefficients to sum residuals against (see RefinementAnchor). */
  readonly anchors?: ReadonlyMap<string, RefinementAnchor>;
  /** Fold the factors (default true); false: residual sums against `anchors` only. */
  readonly factor?: boolean;
  /**
   * Gather residual sums with each factor (see ResidualTracking): against the solution so far
   * (`'follow'`), or against a fixed anchor per segment (by key text; segments without one
   * are not tracked).
   */
  readonly track?: 'follow' | ReadonlyMap<string, RefinementAnchor>;
}

/** One segment's accumulator with its key. */
export interface SegmentState {
  /** Values of the segment columns (empty without segmentation). */
  readonly key: readonly (string | null)[];
  /** Stable text form of the key: the JSON array of its values. */
  readonly keyText: string;
  readonly acc: Accumulator;
}

/** A segment's state as SegmentedFit keeps it: its label is made from the key only when asked for. */
class Segment implements SegmentState, LabelSource {
  acc!: Accumulator;
  constructor(
    readonly key: readonly (string | null)[],
    readonly keyText: string,
    private readonly names: readonly string[],
  ) {}

  labelText(): string {
    return this.names.map((n, i) => `${n}=${this.key[i] ?? 'NULL'}`).join(', ');
  }
}

/** Rows of one segment held back to be folded together (see SegmentedFit's `held`). */
interface Held {
  readonly values: Float64Array;
  rows: number;
}

/** How many rows a segment holds back at most: a few kB of them. */
function heldRows(width: number): number {
  return Math.max(4, Math.min(32, Math.floor(2048 / width)));
}

/** Above this many segments, each holds back fewer rows (memory over kernel calls). */
const MANY_SEGMENTS = 4096;
/** Bytes of held rows per segment when there are many. */
const MANY_SEGMENTS_HELD_BYTES = 256;

/** A block whose rows carry a segment key id (as a decoded COPY block does). */
export interface KeyedBlock extends RowBlock {
  readonly keys: Int32Array;
}

/**
 * One accumulator per segment, fed with keyed blocks. Each reader (partition) feeds its
 * own instance, because key ids belong to the reader's key table; instances merge by
 * key text at the end.
 */
export class SegmentedFit {
  readonly shape: DesignShape;
  /** Names of the segment columns, for labels in error messages. */
  readonly keyNames: readonly string[];
  readonly options: SegmentedFitOptions;
  private readonly segments = new Map<string, SegmentState>();
  /** Key id → segment, for the key table of the reader feeding this instance. */
  /** Key id → segment, or null for a segment this instance passes over. */
  private byId: (SegmentState | null | undefined)[] = [];
  /** The held rows of {@link held}, by key id of the reader feeding this instance. */
  private heldById: (Held | undefined)[] = [];
  /**
   * Rows held back per segment: when segments interleave (many segments, rows in no
   * particular order) a block brings each segment a row or two, and one kernel call per row
   * costs more than the row's arithmetic. Short runs are checked at once, copied here, and
   * folded a few dozen at a time; {@link states} and {@link merge} fold what is left.
   */
  private readonly held = new Map<SegmentState, Held>();
  /** The segments' factors and sums, in shared buffers (see Float64Slab). */
  private readonly slab = new Float64Slab();
  /** The held rows, in buffers of their own kind: let go at {@link flush}. */
  private heldSlab = new Float64Slab();

  constructor(shape: DesignShape, keyNames: readonly string[] = [], options: SegmentedFitOptions = {}) {
    this.shape = shape;
    this.keyNames = keyNames;
    this.options = options;
  }

  /** Number of segments seen so far. */
  get size(): number {
    return this.segments.size;
  }

  /** Segments in order of their key text (rows held back are folded first). */
  states(): SegmentState[] {
    this.flush();
    return [...this.segments.values()].sort((a, b) => (a.keyText < b.keyText ? -1 : a.keyText > b.keyText ? 1 : 0));
  }

  /**
   * Folds a block: contiguous runs of a segment's rows are folded in place; rows of
   * segments that interleave are held per segment and folded in batches.
   */
  consume(block: KeyedBlock, keyTable: ReadonlyArray<ReadonlyArray<string | null>>): void {
    const n = block.rows;
    if (n === 0) return;
    const keys = block.keys;
    let runs = 1;
    for (let i = 1; i < n; i++) if (keys[i] !== keys[i - 1]) runs++;
    if (runs * 8 <= n) {
      let start = 0;
      for (let i = 1; i <= n; i++) {
        if (i === n || keys[i] !== keys[start]) {
          const s = this.segment(keys[start]!, keyTable);
          if (s !== null) this.foldRun(s, block, start, i);
          start = i;
        }
      }
      return;
    }
    // Interleaved segments: each row is checked and goes straight to its segment's held rows.
    const width = block.width;
    for (let i = 0; i < n; i++) {
      const id = keys[i]!;
      const s = this.segment(id, keyTable);
      if (s === null) continue;
      if (width !== s.acc.blockWidth) s.acc.fold(block, i, i + 1); // throws, naming the columns
      s.acc.check(block, i, i + 1);
      this.hold(s, (this.heldById[id] ??= this.heldFor(s, width)), block, i, i + 1);
    }
  }

  /** Folds a run of one segment's rows, or holds it back when it is short (see {@link held}). */
  private foldRun(s: SegmentState, block: RowBlock, from: number, to: number): void {
    const width = block.width;
    if (to - from >= this.heldRowsOf(width) || width !== s.acc.blockWidth) {
      s.acc.fold(block, from, to);
      return;
    }
    s.acc.check(block, from, to);
    this.hold(s, this.heldFor(s, width), block, from, to);
  }

  /**
   * Rows a segment holds back: fewer once there are many segments, whose held rows would
   * otherwise outweigh their factors (a 20-row segment would hold all its rows to the end).
   */
  private heldRowsOf(width: number): number {
    const most = heldRows(width);
    return this.segments.size <= MANY_SEGMENTS ? most : Math.max(2, Math.min(most, Math.floor(MANY_SEGMENTS_HELD_BYTES / (8 * width))));
  }

  /** The held rows of a segment, made on first use. */
  private heldFor(s: SegmentState, width: number): Held {
    let h = this.held.get(s);
    if (h === undefined) {
      h = { values: this.heldSlab.take(this.heldRowsOf(width) * width), rows: 0 };
      this.held.set(s, h);
    }
    return h;
  }

  /** Copies checked rows into a segment's held rows, folding them whenever they fill up. */
  private hold(s: SegmentState, h: Held, block: RowBlock, from: number, to: number): void {
    const width = block.width;
    const src = block.values;
    const dst = h.values;
    for (let row = from; row < to; row++) {
      const a = row * width;
      const b = h.rows * width;
      for (let j = 0; j < width; j++) dst[b + j] = src[a + j]!;
      if (++h.rows * width === dst.length) {
        s.acc.fold({ rows: h.rows, width, values: dst });
        h.rows = 0;
      }
    }
  }

  /** Folds the rows held back. */
  private flush(): void {
    for (const [s, h] of this.held) {
      if (h.rows > 0) s.acc.fold({ rows: h.rows, width: s.acc.blockWidth, values: h.values });
    }
    this.held.clear();
    this.heldById = [];
    this.heldSlab = new Float64Slab();
  }

  /** Merges another instance (another partition) into this one, segment by segment. */
  merge(other: SegmentedFit): void {
    this.flush();
    other.flush();
    for (const s of other.segments.values()) {
      const mine = this.segments.get(s.keyText);
      if (mine) mine.acc.merge(s.acc);
      else this.segments.set(s.keyText, s);
    }
  }

  /** Makes sure a segment exists (for example one known from earlier state). */
  ensure(key: readonly (string | null)[]): SegmentState {
    const keyText = JSON.stringify(key);
    let s = this.segments.get(keyText);
    if (!s) {
      const { method, precision, pairs, factor } = this.options;
      const anchor = this.options.anchors?.get(keyText);
      const track = this.options.track instanceof Map ? this.options.track.get(keyText) : this.options.track;
      const slab = this.slab;
      const state = new Segment(key, keyText, this.keyNames);
      state.acc = new Accumulator(this.shape, { label: this.keyNames.length === 0 ? undefined : state, slab, method, precision, pairs, anchor, track, ...(factor === undefined ? {} : { factor }) });
      s = state;
      this.segments.set(keyText, s);
    }
    return s;
  }

  private segment(id: number, keyTable: ReadonlyArray<ReadonlyArray<string | null>>): SegmentState | null {
    let s = this.byId[id];
    if (s === undefined) {
      const key = keyTable[id];
      if (key === undefined) throw new RangeError(`key id ${id} is not in the key table`);
      const only = this.options.only;
      s = only !== undefined && !only.has(JSON.stringify(key)) ? null : this.ensure(key);
      this.byId[id] = s;
    }
    return s;
  }
}
