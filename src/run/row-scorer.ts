import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import { ModelScorer } from '../fit/scoring-model.js';
import type { RowScore, ScoringModel } from '../fit/scoring-model.js';
import type { ScoreQuery } from '../plan/score-query.js';
import type { CopyBinaryWriter } from '../source/copy-binary-writer.js';
import type { ScoreRow } from '../source/score-row-decoder.js';
import type { ScoringSegmentRecord } from '../store/write-scoring.js';
import { SegmentErrorStats } from './segment-error-stats.js';

/** A segment's model with its scorer and error so far. */
interface SegmentScoring {
  readonly scorer: ModelScorer | null;
  /** Why the segment's rows are not scored when `scorer` is null. */
  readonly reason: string;
  readonly stats: SegmentErrorStats;
  /** The segment key as UTF-8, encoded once for every row of the segment. */
  readonly keyBytes: Uint8Array;
}

/**
 * Scores decoded rows one at a time: checks the row (NULLs and non-finite values in design
 * columns, levels the fit never saw, a segment without a model or without estimates, each
 * counted by reason), applies the segment's model and writes the output row (the key fields
 * as they came, segment key, run, prediction, standard error, interval).
 */
export class RowScorer {
  rowsRead = 0;
  rowsScored = 0;
  readonly skipped = new Map<string, number>();
  private readonly segments = new Map<string, SegmentScoring | null>();
  private readonly x: Float64Array;
  private readonly offset: number;
  private readonly out: RowScore = { prediction: 0, predictionSe: 0, intervalLow: 0, intervalHigh: 0 };
  private readonly nullReasons: string[];
  private readonly nonFiniteReasons: string[];
  private readonly levelReasons: string[];
  private readonly levelNullReasons: string[];
  private readonly terms: string;
  private lastSegment: SegmentScoring | null | undefined = undefined;
  private lastKey = '';
  private readonly lastTexts: (string | null)[] = [];

  constructor(
    private readonly query: ScoreQuery,
    private readonly models: ReadonlyMap<string, ScoringModel>,
    private readonly level: number,
    intercept: boolean,
    private readonly writer: CopyBinaryWriter,
  ) {
    this.offset = intercept ? 1 : 0;
    this.x = new Float64Array(this.offset + query.design.length);
    if (intercept) this.x[0] = 1;
    this.nullReasons = query.origins.map((o) => `null:${o}`);
    this.nonFiniteReasons = query.origins.map((o) => `non_finite:${o}`);
    this.levelReasons = query.categorical.map((c) => `new_level:${c}`);
    this.levelNullReasons = query.categorical.map((c) => `null:${c}`);
    this.terms = JSON.stringify([...(intercept ? [INTERCEPT_TERM] : []), ...query.design]);
  }

  /** Scores one row (the decoder's callback). */
  readonly onRow = (row: ScoreRow): void => {
    this.rowsRead++;
    const v = this.query.design.length;
    const values = row.values;
    for (let j = 0; j < v; j++) {
      if (row.isNull[j] === 1) return this.skip(this.nullReasons[j]!);
      if (!Number.isFinite(values[j]!)) return this.skip(this.nonFiniteReasons[j]!);
    }
    for (let c = 0; c < this.levelReasons.length; c++) {
      if (row.isNull[v + c] === 1) return this.skip(this.levelNullReasons[c]!);
      if (values[v + c] === 0) return this.skip(this.levelReasons[c]!);
    }
    // Rows of one segment often come together: the previous row's segment is tried first,
    // without building its key.
    let seg: SegmentScoring | null | undefined;
    let key: string;
    if (this.lastSegment !== undefined && sameTexts(row.texts, this.lastTexts)) {
      seg = this.lastSegment;
      key = this.lastKey;
    } else {
      key = this.query.segmentColumns.length === 0 ? '' : JSON.stringify(row.texts);
      seg = this.segments.get(key);
      if (seg === undefined) {
        seg = this.segmentOf(key);
        this.segments.set(key, seg);
      }
      this.lastSegment = seg;
      this.lastKey = key;
      for (let i = 0; i < row.texts.length; i++) this.lastTexts[i] = row.texts[i]!;
    }
    if (seg === null) return this.skip('no_model');
    if (seg.scorer === null) return this.skip(seg.reason);
    const x = this.x;
    for (let j = 0; j < v; j++) x[this.offset + j] = values[j]!;
    const out = this.out;
    seg.scorer.score(x, out);
    const w = this.writer;
    w.beginRow();
    for (let f = 0; f < row.passStart.length; f++) w.raw(row.bytes, row.passStart[f]!, row.passLength[f]!);
    w.raw(seg.keyBytes, 0, seg.keyBytes.length);
    w.int8(seg.scorer.model.runId);
    w.float8OrNull(out.prediction);
    w.float8OrNull(out.predictionSe);
    w.float8OrNull(out.intervalLow);
    w.float8OrNull(out.intervalHigh);
    this.rowsScored++;
    seg.stats.rowsScored++;
    if (this.query.actual) {
      const a = v + this.levelReasons.length;
      if (row.isNull[a] === 0 && Number.isFinite(values[a]!)) seg.stats.add(values[a]!, out.prediction, out.intervalLow, out.intervalHigh);
    }
  };

  /** Rows not scored, by reason. */
  rowsSkipped(): Record<string, number> {
    return Object.fromEntries([...this.skipped].sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0)));
  }

  /** Per segment that scored rows: its error against the actual response and its sample. */
  segmentRecords(): ScoringSegmentRecord[] {
    const out: ScoringSegmentRecord[] = [];
    for (const [key, seg] of [...this.segments].sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0))) {
      if (seg === null || seg.scorer === null || seg.stats.rowsScored === 0) continue;
      const m = seg.scorer.model;
      out.push(seg.stats.record(m.segment, key, m.runId));
    }
    return out;
  }

  private skip(reason: string): void {
    this.skipped.set(reason, (this.skipped.get(reason) ?? 0) + 1);
  }

  private segmentOf(key: string): SegmentScoring | null {
    const model = this.models.get(key);
    if (model === undefined) return null;
    let seed = 2166136261;
    for (let i = 0; i < key.length; i++) seed = Math.imul(seed ^ key.charCodeAt(i), 16777619);
    // A segment whose latest model came from a run with other terms (levels that changed since,
    // say) cannot be applied to this design.
    const sameDesign = JSON.stringify(model.terms) === this.terms;
    return {
      scorer: model.estimates === null || !sameDesign ? null : new ModelScorer(model, this.level),
      reason: sameDesign ? 'no_estimates' : 'other_design',
      stats: new SegmentErrorStats(seed),
      keyBytes: new TextEncoder().encode(key),
    };
  }
}

function sameTexts(a: readonly (string | null)[], b: readonly (string | null)[]): boolean {
  for (let i = 0; i < a.length; i++) if (a[i] !== b[i]) return false;
  return true;
}
