/**
 * A migration problem: a changed or unknown migration, a bad file, or a migration that
 * failed to apply. `cause` keeps the database error (with its SQLSTATE `code`) when there is one.
 */
export class MigrationError extends Error {
  override readonly name = 'MigrationError';
  /** Result schema being migrated. */
  readonly schema: string;
  /** Version of the migration concerned, when one is. */
  readonly version: number | undefined;

  constructor(message: string, schema: string, version?: number, options?: ErrorOptions) {
    super(message, options);
    this.schema = schema;
    this.version = version;
  }
}
