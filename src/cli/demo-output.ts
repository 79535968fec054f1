import { formatCount } from '../report/format-number.js';
import { formatSegmentsTable } from '../report/segments-table.js';
import { fitDocument } from '../run/fit-document.js';
import { runOutcome } from '../run/run-fit.js';
import type { DemoCoverage } from '../run/demo/demo-coverage.js';
import { DEMO_SCHEMA } from '../run/demo/demo-spec.js';
import { COOLING_BASE_C, DEMO_TERMS, HEATING_BASE_C } from '../run/demo/feeder-profiles.js';
import { missingReadings, trueCoefficientRows } from '../run/demo/feeder-scenario.js';
import type { RunDemoResult } from '../run/demo/run-demo.js';

/** Terms the demo's table shows for every feeder. */
const SHOWN_TERMS = ['heating_degrees', 'cooling_degrees'];

const HOUR_MS = 3_600_000;

/** The terminal summary of `rowfold demo`: what was made and timed, a line per feeder, coverage. */
export function demoText(r: RunDemoResult, specPath: string): string {
  const s = r.scenario;
  const f = r.fit;
  const missing = missingReadings(s);
  const truth = new Map(s.feeders.map((p) => [p.id, p.coefficients]));
  const outageFrom = new Date(s.startMs + s.outage.fromHour * HOUR_MS).toISOString().slice(0, 16).replace('T', ' ');
  const seconds = [
    `generate ${r.generateSeconds.toFixed(1)}`,
    `open ${r.openSeconds.toFixed(1)}`,
    `load ${r.loadSeconds.toFixed(1)}`,
    `fit ${r.fitSeconds.toFixed(1)}`,
    ...(r.reportPath === null ? [] : [`report ${r.reportSeconds.toFixed(1)}`]),
  ];
  const out = [
    `rowfold demo · ${s.feeders.length} feeders × ${s.days} days of hourly load from ${isoDate(s.startMs)} (seed ${s.seed})`,
    `  ${'database'.padEnd(9)} ${r.databaseKind} ${f.connection}`,
    `  ${`run ${f.runId}`.padEnd(9)} ${formatCount(f.rowsRead)} readings read, ${formatCount(f.rowsUsed)} used;` +
      ` ${formatCount(missing)} have no load (${formatCount(missing - s.outage.hours)} at random,` +
      ` ${s.outage.hours} in an outage of ${s.outage.feederId} from ${outageFrom})`,
    `  ${'seconds'.padEnd(9)} ${seconds.join(' · ')}`,
    '',
    `MW per °C below ${HEATING_BASE_C} °C (heating_degrees) and above ${COOLING_BASE_C} °C (cooling_degrees), one model per feeder:`,
    formatSegmentsTable(
      f.models.map((m) => ({ label: m.segment?.['feeder_id'] ?? 'NULL', solution: m.solution })),
      {
        segmentHeading: 'feeder',
        terms: SHOWN_TERMS,
        truth: (label, term) => truth.get(label)?.[DEMO_TERMS.indexOf(term)],
      },
    ),
    '',
    ...coverageLines(r.coverage),
    '',
    `  spec     ${specPath}   (fit it again: rowfold fit ${specPath})`,
    `  data     ${DEMO_SCHEMA}.feeder_hourly, weather_hourly, feeders, holidays, true_coefficients`,
    `  results  ${f.spec.schema}.latest_models, ${f.spec.schema}.latest_coefficients (fit ${f.spec.name})`,
  ];
  if (r.reportPath !== null) out.push(`  report   ${r.reportPath}`);
  return out.join('\n') + '\n';
}

/** The `--json` document of `rowfold demo`. */
export function demoJson(r: RunDemoResult, specPath: string): unknown {
  const s = r.scenario;
  const f = r.fit;
  const document = fitDocument(runOutcome(f));
  return {
    scenario: {
      feeders: s.feeders.length,
      days: s.days,
      seed: s.seed,
      start: new Date(s.startMs).toISOString(),
      readings: s.loadMw.length,
      missing_readings: missingReadings(s),
      outage: {
        feeder_id: s.outage.feederId,
        from: new Date(s.startMs + s.outage.fromHour * HOUR_MS).toISOString(),
        hours: s.outage.hours,
      },
    },
    database: r.databaseKind,
    seconds: { generate: r.generateSeconds, open: r.openSeconds, load: r.loadSeconds, fit: r.fitSeconds, report: r.reportSeconds },
    run: document.run,
    coverage: {
      confidence: r.coverage.confidence,
      covered: r.coverage.covered,
      total: r.coverage.total,
      unchecked: r.coverage.unchecked,
      by_term: r.coverage.byTerm,
    },
    spec: specPath,
    report: r.reportPath,
    models: document.models,
    true_coefficients: trueCoefficientRows(s).map((t) => ({ feeder_id: t.feederId, term: t.term, value: t.value })),
  };
}

/**
 * Coverage overall, then split: the weather and calendar terms, and the hours, whose
 * estimates in one feeder all lean on the same reference hour and so miss together.
 */
function coverageLines(c: DemoCoverage): string[] {
  const level = `${Math.round(c.confidence * 1000) / 10}%`;
  const sum = (hours: boolean) => {
    const terms = c.byTerm.filter((t) => t.term.startsWith('hour_of_day=') === hours);
    return { covered: terms.reduce((n, t) => n + t.covered, 0), total: terms.reduce((n, t) => n + t.total, 0) };
  };
  const share = (x: { covered: number; total: number }) =>
    `${formatCount(x.covered)} of ${formatCount(x.total)} (${x.total === 0 ? '–' : `${((100 * x.covered) / x.total).toFixed(1)}%`})`;
  return [
    `true coefficients inside their ${level} intervals: ${share(c)}` +
      (c.unchecked > 0 ? `; ${formatCount(c.unchecked)} not estimated` : ''),
    `  intercept, heating, cooling, humidity, weekday, holiday: ${share(sum(false))}`,
    `  hours of day 1–23: ${share(sum(true))} (a feeder's hour estimates share the midnight reference, so they miss together;`,
    `  over many seeds both average ${level})`,
  ];
}

const isoDate = (ms: number) => new Date(ms).toISOString().slice(0, 10);
