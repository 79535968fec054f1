import type { Kysely } from 'kysely';
import type { RefinementAnchor } from '../fit/accumulator.js';
import { packedIndex } from '../numeric/packed.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { loadModelEstimates } from '../store/index.js';
import type { StoreDatabase } from '../store/index.js';
import { AUTO_TARGET_DIGITS } from './accuracy-passes.js';
import type { RefitStart } from './refit.js';

/** A previous solution a refit's new rows are summed against, and its error per coefficient. */
export interface SolvedAnchor {
  readonly anchor: RefinementAnchor;
  readonly error: Float64Array;
}

/**
 * The previous run's solutions an incremental refit can refine from without reading the
 * stored rows again (by segment key text): the published estimates of each segment whose
 * model was certified (estimated at 13.5 digits or more) over exactly the rows of its stored
 * state. Their gradient over the stored rows is zero to their own accuracy, so the new rows'
 * residual sums, gathered as they are folded, are all a refinement step needs. None for a
 * window fit (old buckets leave the window, so the stored rows in it are not the ones that
 * were solved) or a full refit.
 */
export async function previousSolutions(db: Kysely<StoreDatabase>, spec: FitSpec, refit: RefitStart): Promise<Map<string, SolvedAnchor>> {
  const out = new Map<string, SolvedAnchor>();
  if (refit.mode !== 'incremental' || spec.window !== null) return out;
  const runIds = [...new Set(refit.prior.map((r) => r.runId).filter((id): id is number => id !== undefined))];
  const models = await loadModelEstimates(db, spec.schema, runIds).catch(() => new Map<string, never>());
  for (const rec of refit.prior) {
    const m = models.get(`${rec.runId}\u0000${rec.segmentKey}`);
    const q = rec.state.order - 1;
    if (m === undefined || m.status !== 'ok' || m.estimatedDigits === null || m.estimatedDigits < AUTO_TARGET_DIGITS) continue;
    if (m.rows !== rec.state.rows || m.estimates.length !== q || rec.state.method !== 'qr') continue;
    const coefficients = Float64Array.from(m.estimates, (e) => e ?? 0);
    const f = rec.state.factor;
    // The weighted mean of the response off the stored factor (R₀,y/R₀₀ plus the response's shift).
    const centre = spec.intercept && f[0]! !== 0 ? f[packedIndex(q + 1, 0, q)]! / f[0]! + (rec.state.shift?.[q - 1] ?? 0) : 0;
    const error = coefficients.map((b) => Math.abs(b) * 10 ** -m.estimatedDigits!);
    const key = JSON.stringify(spec.segmentBy.map((c) => rec.segment?.[c] ?? null));
    out.set(key, { anchor: { coefficients, centre }, error });
  }
  return out;
}
