/**
 * How a segment is named for readers: `col=value, col=value` in `segment_by` order (NULL as
 * `NULL`), or `all rows` for a fit without segments.
 *
 * The stored `segment` is jsonb, which does not keep key order, so the order comes from the
 * spec's `segment_by` and the values from the segment key (the JSON array of the values in
 * that order); when the two disagree the jsonb object is used as it comes.
 *
 * @example
 * segmentLabel(['feeder', 'region'], '["F07",null]', { region: null, feeder: 'F07' }); // 'feeder=F07, region=NULL'
 */
export function segmentLabel(
  keyNames: readonly string[],
  segmentKey: string,
  segment: Readonly<Record<string, string | null>> | null,
): string {
  if (segment === null) return 'all rows';
  let pairs: [string, string | null][] = Object.entries(segment);
  const values = segmentKeyValues(segmentKey);
  if (values !== null && values.length === keyNames.length && keyNames.every((k) => k in segment)) {
    pairs = keyNames.map((k, i) => [k, values[i] ?? null]);
  }
  return pairs.length === 0 ? 'all rows' : pairs.map(([k, v]) => `${k}=${v ?? 'NULL'}`).join(', ');
}

/**
 * The segment's values alone, joined by ` · ` (NULL as `NULL`): short enough for chart axes
 * whose title names the columns. `all rows` without segments.
 */
export function segmentShortLabel(segmentKey: string, segment: Readonly<Record<string, string | null>> | null): string {
  if (segment === null) return 'all rows';
  const values = segmentKeyValues(segmentKey) ?? Object.values(segment);
  return values.length === 0 ? 'all rows' : values.map((v) => v ?? 'NULL').join(' · ');
}

/** Axis title for segments: the segment columns, joined as the short labels join values. */
export function segmentTitleOf(columns: readonly string[]): string {
  return columns.length === 0 ? 'segment' : columns.join(' · ');
}

/** The values of a stored segment key (a JSON array of text or null), or null if it is not one. */
export function segmentKeyValues(segmentKey: string): (string | null)[] | null {
  if (segmentKey === '') return [];
  try {
    const parsed: unknown = JSON.parse(segmentKey);
    if (Array.isArray(parsed) && parsed.every((v) => v === null || typeof v === 'string')) return parsed as (string | null)[];
  } catch {
    // Not JSON: not a key rowfold wrote.
  }
  return null;
}
