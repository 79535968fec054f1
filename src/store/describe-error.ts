import { maskSecrets } from '../common/mask-secrets.js';

const MAX_LENGTH = 8000;
const MAX_CAUSES = 5;

/**
 * A one-paragraph description of a thrown value for the `runs.error_message` column: the
 * message with its code (`[23505] duplicate key …`), the messages of an AggregateError (whose
 * own message is often empty, e.g. a refused connection to every address of a host), and the
 * chain of causes. Passwords are masked; the text is capped at 8000 characters.
 */
export function describeError(error: unknown): string {
  const parts: string[] = [];
  const seen = new Set<unknown>();
  let current: unknown = error;
  for (let depth = 0; depth <= MAX_CAUSES && current !== undefined && !seen.has(current); depth++) {
    seen.add(current);
    parts.push(describeOne(current));
    current = current instanceof Error ? current.cause : undefined;
  }
  const text = maskSecrets(parts.filter((p) => p !== '').join('; caused by: ') || 'unknown error');
  return text.length > MAX_LENGTH ? `${text.slice(0, MAX_LENGTH - 1)}…` : text;
}

function describeOne(error: unknown): string {
  if (!(error instanceof Error)) {
    if (typeof error === 'string') return error;
    try {
      return JSON.stringify(error) ?? String(error);
    } catch {
      return String(error);
    }
  }
  let message = error.message;
  if (message === '' && error instanceof AggregateError) {
    message = error.errors.map((e: unknown) => describeOne(e)).join('; ');
  }
  if (message === '') message = error.name;
  const code = (error as { code?: unknown }).code;
  return typeof code === 'string' && code !== '' ? `[${code}] ${message}` : message;
}
