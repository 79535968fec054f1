/**
 * The candidate closest to `input`, if it is close enough to be a likely typo.
 *
 * A candidate matches when it equals the input ignoring case, `_` and `-` (so
 * `segmentBy` and `segment-by` suggest `segment_by`), or when its edit distance
 * (insertions, deletions, substitutions and swaps of adjacent characters) is at most
 * one third of the longer of the two, and at least 1. Ties go to the earlier candidate.
 *
 * @example
 * didYouMean('segmnt_by', ['segment_by', 'weight']); // 'segment_by'
 * didYouMean('colour', ['segment_by', 'weight']);    // undefined
 */
export function didYouMean(input: string, candidates: Iterable<string>): string | undefined {
  const loose = squash(input);
  let best: string | undefined;
  let bestDistance = Infinity;
  for (const candidate of candidates) {
    if (candidate === input) continue;
    if (squash(candidate) === loose && loose !== '') return candidate;
    const limit = Math.max(1, Math.floor(Math.max(input.length, candidate.length) / 3));
    const distance = editDistance(input.toLowerCase(), candidate.toLowerCase());
    if (distance <= limit && distance < bestDistance) {
      best = candidate;
      bestDistance = distance;
    }
  }
  return best;
}

function squash(text: string): string {
  return text.toLowerCase().replace(/[-_\s]/g, '');
}

/** Optimal string alignment distance (Levenshtein plus adjacent transpositions). */
function editDistance(a: string, b: string): number {
  const rows = a.length + 1;
  const cols = b.length + 1;
  const d = new Array<number>(rows * cols).fill(0);
  const at = (i: number, j: number): number => d[i * cols + j] ?? 0;
  for (let i = 0; i < rows; i++) d[i * cols] = i;
  for (let j = 0; j < cols; j++) d[j] = j;
  for (let i = 1; i < rows; i++) {
    for (let j = 1; j < cols; j++) {
      const cost = a[i - 1] === b[j - 1] ? 0 : 1;
      let value = Math.min(at(i - 1, j) + 1, at(i, j - 1) + 1, at(i - 1, j - 1) + cost);
      if (i > 1 && j > 1 && a[i - 1] === b[j - 2] && a[i - 2] === b[j - 1]) {
        value = Math.min(value, at(i - 2, j - 2) + 1);
      }
      d[i * cols + j] = value;
    }
  }
  return at(a.length, b.length);
}
