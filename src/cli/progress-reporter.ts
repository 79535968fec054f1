import { formatCount } from '../report/format-number.js';

/** A status line on stderr, for progress that the caller words itself. */
export interface StatusLine {
  /** Shows `text`; `seconds` since the work started decides when a plain line is due. */
  show(text: string, seconds: number): void;
  /** Clears the line (on a terminal). */
  done(): void;
}

/**
 * A status line on `stream`: one line rewritten in place on a terminal, plain periodic lines
 * (every `intervalSeconds`, the first at once) when the stream is a file or pipe.
 */
export function statusLine(stream: NodeJS.WriteStream = process.stderr, intervalSeconds = 10): StatusLine {
  let lastLine = -Infinity;
  let drawn = false;
  return {
    show(text, seconds) {
      if (stream.isTTY) {
        stream.write(`\r${text}\x1b[K`);
        drawn = true;
      } else if (seconds - lastLine >= intervalSeconds) {
        lastLine = seconds;
        stream.write(`${text}\n`);
      }
    },
    done() {
      if (drawn) stream.write('\r\x1b[K');
      drawn = false;
    },
  };
}

/**
 * Progress of a streaming read on stderr: one line rewritten in place on a terminal,
 * plain periodic lines (every `intervalSeconds`) when stderr is a file or pipe.
 */
export function progressReporter(
  stream: NodeJS.WriteStream = process.stderr,
  intervalSeconds = 10,
): { update: (p: { rowsRead: number; segments: number; seconds: number }) => void; done: () => void } {
  const line = statusLine(stream, intervalSeconds);
  return {
    update: (p) => line.show(readProgressText(p), p.seconds),
    done: () => line.done(),
  };
}

/** `rowfold: 1,200,000 rows · 400,000 rows/s · 24 segments · 3.0 s`. */
export function readProgressText(p: { rowsRead: number; segments: number; seconds: number }): string {
  return `rowfold: ${formatCount(p.rowsRead)} rows · ${formatCount(Math.round(p.rowsRead / Math.max(p.seconds, 1e-3)))} rows/s · ${formatCount(p.segments)} segment${p.segments === 1 ? '' : 's'} · ${p.seconds.toFixed(1)} s`;
}
