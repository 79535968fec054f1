import { maskSecrets } from '../common/mask-secrets.js';
import { FitInputError } from '../fit/fit-input-error.js';
import { PlanError } from '../plan/plan-error.js';
import { ReportError } from '../report/report-error.js';
import { ConnectionConfigError } from '../source/connection-config-error.js';
import { ConnectionsFileError } from '../source/connections-file.js';
import { ScoreError } from './score-error.js';
import { CsvInputError } from '../source/csv-input-error.js';
import { DesignReadError } from '../source/design-read-error.js';
import { EmbeddedDatabaseLockedError } from '../source/embedded-database-locked-error.js';
import { SpecError } from '../spec/spec-error.js';
import { MigrationError } from '../store/migration-error.js';
import { FitBusyError } from './run-fit-exclusive.js';
import { SpecFileError } from './run-fit.js';

/** Exit codes of the command line, and the `exit_code` of an error document. */
export const EXIT_CODE = {
  /** Done as asked. */
  ok: 0,
  /** The fit (or another operation) failed: bad data, a database error, nothing to report. */
  failed: 1,
  /** Bad usage or a bad spec: nothing was attempted. */
  usage: 2,
} as const;

/**
 * A failure as one JSON document: what `--json` prints on stdout when a command fails (the
 * exit code is unchanged), with the fields of the typed error that the message is made of.
 */
export interface ErrorDocument {
  readonly error: {
    /** The error's class: SpecError, PlanError, FitInputError, ConnectionConfigError, … or Error. */
    readonly type: string;
    /** The message the command prints on stderr (passwords masked), without the `rowfold: ` prefix. */
    readonly message: string;
    readonly exit_code: number;
    /** The database the command used, when it had opened one (`user@host:port/db` or the embedded folder). */
    readonly database?: string;
    /** SQLSTATE of a database error, or the system's code of a failed connection (ECONNREFUSED). */
    readonly code?: string;
    /** Spec key (`terms[2]`, `segment_by`) of a bad spec or of a spec that does not fit the source. */
    readonly key?: string;
    /** Where in the spec file (1-based), for a bad spec. */
    readonly line?: number;
    readonly spec_column?: number;
    readonly origin?: string;
    /** Every problem of a bad spec. */
    readonly issues?: readonly { readonly key: string; readonly line: number; readonly spec_column: number; readonly message: string }[];
    /** Data column and segment of bad data. */
    readonly column?: string;
    readonly segment?: string;
    readonly fit_name?: string;
    readonly [field: string]: unknown;
  };
}

/** System error codes of a connection that could not be made. */
const CONNECT_CODES = new Set(['ECONNREFUSED', 'ENOTFOUND', 'EHOSTUNREACH', 'ENETUNREACH', 'ETIMEDOUT', 'EAI_AGAIN']);

/** The message line a command prints for a failure (without `rowfold: `), its exit code and its JSON document. */
export interface Failure {
  readonly exitCode: number;
  readonly text: string;
  readonly document: ErrorDocument;
}

/**
 * How the command line reports a thrown value: the exit code, the message line (passwords
 * masked; the database named when one was used) and the same as a JSON document.
 *
 * @example
 * const { exitCode, text } = describeFailure(e);
 * process.stderr.write(`rowfold: ${text}\n`);
 */
export function describeFailure(e: unknown, usage = false): Failure {
  const message = maskSecrets(e instanceof Error ? e.message : String(e));
  const fields: Record<string, unknown> = {};
  let exitCode: number = EXIT_CODE.failed;
  let text = `error: ${message}`;
  if (usage) {
    exitCode = EXIT_CODE.usage;
    text = message;
  } else if (e instanceof SpecFileError || e instanceof ConnectionConfigError || e instanceof ConnectionsFileError) {
    exitCode = EXIT_CODE.usage;
    text = message;
    if (e instanceof ConnectionConfigError) fields.source = e.source;
  } else if (e instanceof SpecError) {
    exitCode = EXIT_CODE.usage;
    text = `bad spec: ${message}`;
    Object.assign(fields, {
      key: e.path,
      line: e.line,
      spec_column: e.column,
      origin: e.origin,
      issues: e.issues.map((i) => ({ key: i.path, line: i.line, spec_column: i.column, message: i.message })),
    });
  } else if (e instanceof PlanError) {
    exitCode = EXIT_CODE.usage;
    text = `spec does not fit the source: ${message}`;
    fields.key = e.key;
    if (e.line !== undefined) Object.assign(fields, { line: e.line, origin: e.origin });
  } else if (e instanceof FitInputError) {
    text = `bad data: ${message}`;
    if (e.column !== undefined) fields.column = e.column;
    if (e.segment !== undefined) fields.segment = e.segment;
  } else if (e instanceof ScoreError) {
    exitCode = EXIT_CODE.usage;
    text = `cannot score: ${message}`;
  } else if (e instanceof ReportError) {
    exitCode = e.usage ? EXIT_CODE.usage : EXIT_CODE.failed;
    text = message;
  } else if (e instanceof CsvInputError) {
    exitCode = e.usage ? EXIT_CODE.usage : EXIT_CODE.failed;
    text = e.usage ? message : `bad data: ${message}`;
    if (e.column !== undefined) fields.column = e.column;
  } else if (e instanceof FitBusyError) {
    fields.fit_name = e.fitName;
  } else if (e instanceof EmbeddedDatabaseLockedError) {
    Object.assign(fields, { dir: e.dir, pid: e.pid });
  } else if (e instanceof MigrationError) {
    Object.assign(fields, { schema: e.schema, version: e.version ?? null });
  } else if (e instanceof DesignReadError) {
    Object.assign(fields, { mode: e.mode, rows_read: e.rowsRead });
  }
  const code = (e as { code?: unknown } | null)?.code;
  if (typeof code === 'string' && text.startsWith('error: ')) {
    fields.code = code;
    // A SQLSTATE is five digits or capitals; anything else is the system's code for a socket that failed.
    if (/^[0-9A-Z]{5}$/.test(code)) text += ` (SQLSTATE ${code})`;
    else text += ` (${code})${CONNECT_CODES.has(code) ? '; cannot reach the database: is the server running, and are its host and port right?' : ''}`;
  }
  const database = (e as { database?: unknown } | null)?.database;
  if (typeof database === 'string') {
    fields.database = database;
    if (!text.includes(database)) text += ` [database: ${database}]`;
  }
  const type = e instanceof Error ? e.name : 'Error';
  return { exitCode, text, document: { error: { type, message, exit_code: exitCode, ...fields } } };
}
