import { didYouMean } from './did-you-mean.js';
import type { FitCategorical, FitInteraction, FitInteractionFactor, FitSpec, FitTerm } from './fit-spec.js';
import type { FitSpecDocument } from './fit-spec-schema.js';
import { parseFitSource } from './parse-fit-source.js';
import type { SpecProblem } from './spec-problem.js';

/** A normalised fit spec without the fields that describe where it came from. */
export type FitSpecBody = Omit<FitSpec, 'origin' | 'text' | 'hash'>;

/**
 * Turns a schema-valid spec document into the normalised {@link FitSpec} body, making
 * the checks that span keys:
 *
 * - `source` is a query (not ending in `;`) or a table name (see `parseFitSource`);
 * - term names (the collapsed expression text, or the explicit `name`) are unique, are
 *   not `intercept` (any case) and are not also a categorical column;
 * - categorical columns are unique and not also `segment_by` columns;
 * - `segment_by` columns are unique;
 * - each interaction names two different known factors (a term name or a categorical
 *   column, whitespace collapsed), and no pair appears twice in either order;
 * - a product of two terms, named `a*b`, is not also the name of a term or of another
 *   product (the plan checks names that carry a categorical level);
 * - the model has at least one column (intercept, term, categorical or interaction).
 *
 * `presentKeys` are the top-level keys written in the file; a model without columns is
 * reported at `terms` when that key was written, otherwise at `intercept`.
 *
 * @example
 * const checked = validateFitSpecDocument(data);
 * if (checked.ok) normaliseFitSpec(checked.value, new Set(Object.keys(data)));
 */
export function normaliseFitSpec(
  doc: FitSpecDocument,
  presentKeys: ReadonlySet<string>,
): { ok: true; value: FitSpecBody } | { ok: false; problems: SpecProblem[] } {
  const problems: SpecProblem[] = [];

  const source = parseFitSource(doc.source);
  if (!source.ok) problems.push({ path: ['source'], message: source.message });

  const segmentBy = typeof doc.segment_by === 'string' ? [doc.segment_by] : doc.segment_by;
  const segmentSeen = new Map<string, number>();
  segmentBy.forEach((column, i) => {
    const first = segmentSeen.get(column);
    const path = typeof doc.segment_by === 'string' ? ['segment_by'] : ['segment_by', i];
    if (first !== undefined) {
      problems.push({ path, message: `duplicate segment_by column "${column}" (also segment_by[${first}])` });
    } else {
      segmentSeen.set(column, i);
    }
  });

  const categorical: FitCategorical[] = [];
  const categoricalSeen = new Map<string, number>();
  doc.categorical.forEach((entry, i) => {
    const item: FitCategorical =
      typeof entry === 'string'
        ? { column: entry, reference: null, maxLevels: 50 }
        : { column: entry.column, reference: entry.reference ?? null, maxLevels: entry.max_levels };
    const path = typeof entry === 'string' ? ['categorical', i] : ['categorical', i, 'column'];
    const first = categoricalSeen.get(item.column);
    if (first !== undefined) {
      problems.push({ path, message: `duplicate categorical column "${item.column}" (also categorical[${first}])` });
      return;
    }
    if (segmentSeen.has(item.column)) {
      problems.push({
        path,
        message: `"${item.column}" is also a segment_by column; it is constant within each segment, so it cannot be categorical`,
      });
    }
    categoricalSeen.set(item.column, i);
    categorical.push(item);
  });

  const terms: FitTerm[] = [];
  const termSeen = new Map<string, number>();
  doc.terms.forEach((entry, i) => {
    const term: FitTerm =
      typeof entry === 'string'
        ? { name: collapse(entry), sql: entry.trim() }
        : { name: entry.name.trim(), sql: entry.sql.trim() };
    const path = typeof entry === 'string' ? ['terms', i] : ['terms', i, 'name'];
    const first = termSeen.get(term.name);
    const clash = categoricalSeen.get(term.name);
    if (first !== undefined) {
      problems.push({ path, message: `duplicate term name "${term.name}" (also terms[${first}])` });
      return;
    }
    if (term.name.toLowerCase() === 'intercept') {
      problems.push({ path, message: `term name "${term.name}" is reserved for the intercept column` });
    } else if (clash !== undefined) {
      problems.push({ path, message: `term name "${term.name}" is also a categorical column (categorical[${clash}])` });
    }
    termSeen.set(term.name, i);
    terms.push(term);
  });

  const interactions: FitInteraction[] = [];
  const pairSeen = new Map<string, number>();
  // Names after expansion: a product of two terms is named `a*b`, which a term or another
  // product may already be called. (Names with a categorical level are checked by the plan,
  // once the levels are known.)
  const columnSeen = new Map<string, string>([...termSeen].map(([name, i]) => [name, `terms[${i}]`]));
  doc.interactions.forEach((pair, i) => {
    const factors: FitInteractionFactor[] = [];
    pair.forEach((reference, j) => {
      const name = collapse(reference);
      if (termSeen.has(name)) factors.push({ kind: 'term', name });
      else if (categoricalSeen.has(name)) factors.push({ kind: 'categorical', name });
      else {
        const suggestion = didYouMean(name, [...termSeen.keys(), ...categoricalSeen.keys()]);
        const hint = suggestion === undefined ? '' : ` (did you mean "${suggestion}"?)`;
        problems.push({
          path: ['interactions', i, j],
          message: `unknown term or categorical column "${name}"${hint}`,
        });
      }
    });
    const [a, b] = factors;
    if (a === undefined || b === undefined) return;
    if (a.name === b.name) {
      problems.push({
        path: ['interactions', i, 1],
        message: `an interaction needs two different factors, got "${a.name}" twice (for a square, add a term such as "x * x")`,
      });
      return;
    }
    const id = JSON.stringify([a.name, b.name].sort());
    const first = pairSeen.get(id);
    if (first !== undefined) {
      problems.push({ path: ['interactions', i], message: `duplicate interaction (also interactions[${first}])` });
      return;
    }
    pairSeen.set(id, i);
    if (a.kind === 'term' && b.kind === 'term') {
      const name = `${a.name}*${b.name}`;
      const other = columnSeen.get(name);
      if (other !== undefined) {
        problems.push({
          path: ['interactions', i],
          message: `the product of "${a.name}" and "${b.name}" is named "${name}", and so is ${other}: give a term another name ({name, sql}) or drop one of them`,
        });
        return;
      }
      columnSeen.set(name, `interactions[${i}]`);
    }
    interactions.push([a, b]);
  });

  if (!doc.intercept && doc.terms.length === 0 && doc.categorical.length === 0 && doc.interactions.length === 0) {
    problems.push({
      path: [presentKeys.has('terms') ? 'terms' : 'intercept'],
      message: 'the model has no columns: add terms, categorical columns or interactions, or set intercept: true',
    });
  }

  if (doc.split !== undefined) {
    if (doc.watermark !== undefined || doc.window !== undefined) {
      problems.push({
        path: ['split'],
        message: `a split run cannot be combined with ${doc.watermark !== undefined ? 'watermark' : 'window'} yet: incremental and window refits run whole; remove split`,
      });
    } else if (source.ok && source.source.kind === 'query' && doc.partition_key === undefined) {
      problems.push({
        path: ['split'],
        message: 'a query source is split by a hash of partition_key: name a partition_key column (a table source is split by pages)',
      });
    }
  }

  if (problems.length > 0 || !source.ok) return { ok: false, problems };
  return {
    ok: true,
    value: {
      name: doc.name,
      source: source.source,
      response: doc.response.trim(),
      terms,
      categorical,
      interactions,
      segmentBy,
      weight: doc.weight === undefined ? null : doc.weight.trim(),
      intercept: doc.intercept,
      confidence: doc.confidence,
      method: doc.method,
      accuracy: doc.accuracy,
      schema: doc.schema,
      read: doc.read,
      nonFinite: doc.non_finite,
      partitionKey: doc.partition_key ?? null,
      readFrom: doc.read_from ?? null,
      schedule: doc.schedule === undefined ? null : doc.schedule.trim(),
      split:
        doc.split === undefined
          ? null
          : { partitions: doc.split.partitions, jobTimeoutSeconds: doc.split.job_timeout_seconds, cutoff: doc.split.cutoff ?? null },
      watermark: doc.watermark ?? doc.window?.column ?? null,
      window: doc.window === undefined ? null : { ...doc.window },
      residualPass:
        doc.residual_pass === undefined
          ? null
          : {
              robust: [...new Set(doc.residual_pass.robust)],
              clusterBy: doc.residual_pass.cluster_by ?? null,
              orderBy: doc.residual_pass.order_by ?? null,
              influential: doc.residual_pass.influential === undefined ? null : { ...doc.residual_pass.influential },
              holdout: doc.residual_pass.holdout === undefined ? null : { ...doc.residual_pass.holdout },
            },
    },
  };
}

function collapse(text: string): string {
  return text.trim().replace(/\s+/g, ' ');
}
