import { createHash } from 'node:crypto';

/**
 * Key of the transaction-level advisory lock that serialises migrations of one schema:
 * the first 8 bytes of SHA-256 of `rowfold:migrate:<schema>` as a signed 64-bit integer,
 * in decimal (bind it as `::bigint`). Different schemas migrate independently; a collision
 * with another application's key would only make one wait for the other.
 */
export function migrationLockKey(schema: string): string {
  const digest = createHash('sha256').update(`rowfold:migrate:${schema}`, 'utf8').digest();
  return digest.readBigInt64BE(0).toString();
}
