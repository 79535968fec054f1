import { ReportError } from './report-error.js';
import type { ReportModel } from './report-run.js';

/**
 * The model whose residuals the report plots.
 *
 * `wanted` is the stored segment key (`["F07"]`), or `col=value` pairs separated by commas
 * (`feeder=F07`, `region=north,feeder=F07`; `col=NULL` never matches a NULL segment,
 * use the key `[null]` for that), or, for a fit with one segment column, the bare value.
 * Without it, the model with the most rows among those with estimates (any model if none
 * has them).
 *
 * @throws ReportError (usage) when nothing, or more than one model, matches.
 */
export function chooseSegment(models: readonly ReportModel[], wanted: string | undefined): ReportModel {
  if (models.length === 0) throw new ReportError('the run published no models');
  if (wanted === undefined) return mostRows(models);

  const exact = models.find((m) => m.segmentKey === wanted);
  if (exact !== undefined) return exact;
  const matches = (pairs: [string, string][]) =>
    models.filter((m) => m.segment !== null && pairs.every(([k, v]) => m.segment?.[k] === v));
  const candidates: ReportModel[][] = [];
  if (wanted.includes('=')) {
    candidates.push(matches(wanted.split(',').map(splitPair)));
    // A value may itself contain commas: try the whole text as one pair as well.
    candidates.push(matches([splitPair(wanted)]));
  }
  candidates.push(models.filter((m) => m.segment !== null && Object.keys(m.segment).length === 1 && Object.values(m.segment)[0] === wanted));
  for (const found of candidates) {
    if (found.length === 1) return found[0]!;
    if (found.length > 1) {
      throw new ReportError(`--segment ${wanted} matches ${found.length} segments (${sample(found)}); name every segment column`, { usage: true });
    }
  }
  throw new ReportError(
    `--segment ${wanted} matches no segment of the run; give a segment key or col=value, e.g. ${sample(models)}`,
    { usage: true },
  );
}

function mostRows(models: readonly ReportModel[]): ReportModel {
  const estimated = models.filter((m) => m.status === 'ok' || m.status === 'no_residual_df');
  const pool = estimated.length > 0 ? estimated : models;
  return pool.reduce((best, m) => (m.rows > best.rows ? m : best));
}

function splitPair(text: string): [string, string] {
  const at = text.indexOf('=');
  return at < 0 ? [text.trim(), ''] : [text.slice(0, at).trim(), text.slice(at + 1)];
}

function sample(models: readonly ReportModel[]): string {
  const shown = models.slice(0, 3).map((m) => (m.segmentKey === '' ? "'' (no segments)" : m.segmentKey));
  return shown.join(', ') + (models.length > 3 ? ', …' : '');
}
