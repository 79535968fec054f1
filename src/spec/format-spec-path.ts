const PLAIN_KEY = /^[A-Za-z0-9_$-]+$/;

/**
 * Renders a key path the way spec errors name it: mapping keys joined with `.`, list
 * indexes in brackets. Keys that are not plain words are quoted in brackets.
 *
 * @example
 * formatSpecPath(['terms', 2, 'sql']);        // 'terms[2].sql'
 * formatSpecPath(['interactions', 1, 0]);     // 'interactions[1][0]'
 * formatSpecPath(['odd key']);                // '["odd key"]'
 * formatSpecPath([]);                         // ''
 */
export function formatSpecPath(path: readonly (string | number)[]): string {
  let out = '';
  for (const segment of path) {
    if (typeof segment === 'number') out += `[${segment}]`;
    else if (PLAIN_KEY.test(segment)) out += out === '' ? segment : `.${segment}`;
    else out += `[${JSON.stringify(segment)}]`;
  }
  return out;
}
