/**
 * Runs one statement with bound parameters, rows as arrays: what a store function needs of a
 * connection when it must run on one the caller holds (a session in the middle of a COPY
 * transaction, say) rather than through kysely.
 */
export interface SqlRunner {
  query(text: string, values?: readonly unknown[]): Promise<{ readonly rows: unknown[][] }>;
}

/** Quotes an identifier for SQL text (doubles any double quote). */
export function quoteName(name: string): string {
  if (name.includes('\u0000')) throw new RangeError('an identifier cannot contain a NUL character');
  return `"${name.replaceAll('"', '""')}"`;
}
