import { formatCount } from '../report/format-number.js';

/**
 * Progress of a streaming read on stderr: one line rewritten in place on a terminal,
 * plain periodic lines (every `intervalSeconds`) when stderr is a file or pipe.
 */
export function progressReporter(
  stream: NodeJS.WriteStream = process.stderr,
  intervalSeconds = 10,
): { update: (p: { rowsRead: number; segments: number; seconds: number }) => void; done: () => void } {
  let lastLine = -Infinity;
  let drawn = false;
  const text = (p: { rowsRead: number; segments: number; seconds: number }) =>
    `rowfold: ${formatCount(p.rowsRead)} rows · ${formatCount(Math.round(p.rowsRead / Math.max(p.seconds, 1e-3)))} rows/s · ${formatCount(p.segments)} segments · ${p.seconds.toFixed(1)} s`;
  return {
    update(p) {
      if (stream.isTTY) {
        stream.write(`\r${text(p)}\x1b[K`);
        drawn = true;
      } else if (p.seconds - lastLine >= intervalSeconds) {
        lastLine = p.seconds;
        stream.write(`${text(p)}\n`);
      }
    },
    done() {
      if (drawn) stream.write('\r\x1b[K');
    },
  };
}
