/**
 * Height per category of a chart with one row per segment: roomy for a few segments,
 * tighter for many, so a chart of hundreds of segments stays a few screens tall. Labels are
 * only legible (and shown) down to 9 px a row.
 */
export function segmentRowStep(segments: number): { step: number; labels: boolean } {
  const step = Math.max(3, Math.min(18, Math.floor(720 / Math.max(1, segments))));
  return { step, labels: step >= 9 };
}
