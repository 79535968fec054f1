/** The result store: schema migrations, run lifecycle, published models and coefficients. */
export { createStoreDb } from './create-store-db.js';
export { describeError } from './describe-error.js';
export { failRun } from './fail-run.js';
export { loadMigrations } from './load-migrations.js';
export type { Migration } from './load-migrations.js';
export { migrate } from './migrate.js';
export type { MigrateOptions, MigrateResult } from './migrate.js';
export { MigrationError } from './migration-error.js';
export { defaultMigrationsDir } from './migrations-dir.js';
export type { ModelRecord } from './model-record.js';
export { publishRun, writeRunResult } from './publish-run.js';
export type { PublishOptions, RunResult } from './publish-run.js';
export { DEFAULT_STORE_SCHEMA, checkSchemaName } from './schema-name.js';
export { startRun } from './start-run.js';
export type { RunStart } from './start-run.js';
export type * from './store-database.js';
