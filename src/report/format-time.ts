/**
 * A timestamp for the report, in UTC to the millisecond so the audit trail is unambiguous.
 *
 * @example
 * formatTime(new Date(Date.UTC(2025, 0, 2, 3, 4, 5, 6))); // '2025-01-02 03:04:05.006 UTC'
 */
export function formatTime(d: Date): string {
  return Number.isNaN(d.getTime()) ? '–' : `${d.toISOString().replace('T', ' ').replace('Z', '')} UTC`;
}

/**
 * A duration in seconds as people read it: `0.84 s`, `12.3 s`, `4 min 05 s`, `2 h 03 min`.
 */
export function formatDuration(seconds: number | null): string {
  if (seconds === null || !Number.isFinite(seconds)) return '–';
  if (seconds < 10) return `${seconds.toFixed(2)} s`;
  if (seconds < 60) return `${seconds.toFixed(1)} s`;
  const s = Math.round(seconds);
  if (s < 3600) return `${Math.floor(s / 60)} min ${String(s % 60).padStart(2, '0')} s`;
  return `${Math.floor(s / 3600)} h ${String(Math.floor((s % 3600) / 60)).padStart(2, '0')} min`;
}
