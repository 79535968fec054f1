import { Socket } from 'node:net';

/** Which database the integration tests run against. */
export type TestBackend = 'server' | 'embedded';

declare module 'vitest' {
  // Filled in once per run by test/support/global-setup.ts.
  export interface ProvidedContext {
    rowfoldTestBackend: TestBackend;
    /** A freshly initialised, closed embedded database folder to copy (never opened by tests). */
    rowfoldEmbeddedTemplate: string;
  }
}

/** Variables that point the tests at a particular server. */
const SERVER_VARIABLES = ['PGHOST', 'PGHOSTADDR', 'PGPORT', 'PGUSER', 'PGPASSWORD', 'PGDATABASE'] as const;

/**
 * The back end for this run: `ROWFOLD_TEST_DB=server|embedded` when set; otherwise the server
 * when a PG* variable names one or 127.0.0.1:5432 accepts a connection within a second, and the
 * embedded database (PGlite) when there is no server to be found.
 */
export async function chooseTestBackend(env: NodeJS.ProcessEnv = process.env): Promise<TestBackend> {
  const forced = env['ROWFOLD_TEST_DB'];
  if (forced === 'server' || forced === 'embedded') return forced;
  if (forced !== undefined && forced !== '') {
    throw new Error(`ROWFOLD_TEST_DB must be "server" or "embedded", got ${JSON.stringify(forced)}`);
  }
  if (SERVER_VARIABLES.some((name) => (env[name] ?? '') !== '')) return 'server';
  return (await acceptsConnection('127.0.0.1', 5432, 1000)) ? 'server' : 'embedded';
}

function acceptsConnection(host: string, port: number, timeoutMs: number): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = new Socket();
    const done = (ok: boolean): void => {
      socket.destroy();
      resolve(ok);
    };
    socket.setTimeout(timeoutMs, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
    socket.connect(port, host);
  });
}
