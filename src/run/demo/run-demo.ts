import { writeFitReport } from '../write-fit-report.js';
import type { Database } from '../../source/database.js';
import { openDatabase } from '../../source/open-database.js';
import { runFit } from '../run-fit.js';
import type { RunFitResult } from '../run-fit.js';
import { demoCoverage } from './demo-coverage.js';
import type { DemoCoverage } from './demo-coverage.js';
import { writeDemoSpec } from './demo-spec.js';
import { generateFeederScenario } from './feeder-scenario.js';
import type { FeederScenario, FeederScenarioOptions } from './feeder-scenario.js';
import { loadFeederScenario } from './load-feeder-scenario.js';

/** What `rowfold demo` was asked to do. */
export interface RunDemoRequest extends FeederScenarioOptions {
  /** `--db URL`; otherwise DATABASE_URL, the PG* variables, or the embedded database. */
  readonly db?: string | undefined;
  readonly env?: NodeJS.ProcessEnv;
  /** Where to write the demo's fit spec (it is fitted from there). */
  readonly specPath: string;
  /** Result schema in place of the spec's (`rowfold`). */
  readonly schema?: string | undefined;
  /** Where to write the HTML report; null for none. */
  readonly reportPath: string | null;
  readonly onProgress?: (p: DemoProgress) => void;
}

/** Progress of the two long steps: loading the readings, then reading them back to fit. */
export type DemoProgress =
  | { readonly phase: 'load'; readonly rowsLoaded: number; readonly rowsTotal: number; readonly seconds: number }
  | { readonly phase: 'fit'; readonly rowsRead: number; readonly segments: number; readonly seconds: number };

/** What the demo did, with the time of each step in seconds. */
export interface RunDemoResult {
  readonly scenario: FeederScenario;
  readonly databaseKind: Database['kind'];
  readonly generateSeconds: number;
  /** Opening the database (for a new embedded database, creating it: several seconds). */
  readonly openSeconds: number;
  /** Loading the scenario into schema `rowfold_demo` (tables, inserts, ANALYZE, commit). */
  readonly loadSeconds: number;
  /** The whole of `runFit`: open, plan, read and fold, solve, publish. */
  readonly fitSeconds: number;
  readonly reportSeconds: number;
  readonly fit: RunFitResult;
  readonly coverage: DemoCoverage;
  /** The HTML report written, or null when none was asked for. */
  readonly reportPath: string | null;
}

/**
 * The demo: generate the feeder-load scenario, load it (replacing earlier demo data),
 * write its fit spec, fit one model per feeder with {@link runFit}, check the intervals
 * against the generator's true coefficients, and write the HTML report.
 */
export async function runDemo(req: RunDemoRequest): Promise<RunDemoResult> {
  const env = req.env ?? process.env;
  let t = performance.now();
  const lap = () => {
    const now = performance.now();
    const seconds = (now - t) / 1000;
    t = now;
    return seconds;
  };
  const scenario = generateFeederScenario(req);
  const generateSeconds = lap();

  // Held until the end: the embedded database is opened (and its folder locked) once, and
  // runFit's own open shares that instance rather than starting it again.
  const database = await openDatabase({ db: req.db, env, sessions: 2 });
  const openSeconds = lap();
  try {
    await database.withSession((session) =>
      loadFeederScenario(session, scenario, (p) =>
        req.onProgress?.({ phase: 'load', ...p, seconds: (performance.now() - t) / 1000 }),
      ),
    );
    const loadSeconds = lap();

    await writeDemoSpec(req.specPath);
    const fit = await runFit({
      specPath: req.specPath,
      schema: req.schema,
      db: req.db,
      env,
      onProgress: (p) => req.onProgress?.({ phase: 'fit', ...p }),
    });
    const fitSeconds = lap();
    const coverage = demoCoverage(fit.models, scenario.feeders);

    const reportPath =
      req.reportPath === null
        ? null
        : (await writeFitReport(database, { fit: fit.spec.name, schema: fit.spec.schema, out: req.reportPath })).path;
    const reportSeconds = lap();
    const seconds = { generateSeconds, openSeconds, loadSeconds, fitSeconds, reportSeconds };
    return { scenario, databaseKind: database.kind, ...seconds, fit, coverage, reportPath };
  } finally {
    await database.close();
  }
}
