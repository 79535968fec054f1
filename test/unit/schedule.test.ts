import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { cronProblem, nextRunTimes } from '../../src/schedule/cron-expression.js';
import { loadFitSchedules } from '../../src/schedule/fit-schedule.js';
import { parseScheduleFile } from '../../src/schedule/schedule-file.js';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';
import { SpecError } from '../../src/spec/spec-error.js';
import { runCli, writeSpec } from '../support/run-cli.js';

const SPEC = 'name: load\nsource: grid.readings\nresponse: load_kw\n';

describe('schedule times, from an injected clock', () => {
  it('lists the next ticks strictly after the given instant, in UTC', () => {
    const from = new Date('2026-12-01T20:07:00Z');
    expect(nextRunTimes('0 3 * * *', from, 3).map((d) => d.toISOString())).toEqual([
      '2026-12-02T03:00:00.000Z',
      '2026-12-03T03:00:00.000Z',
      '2026-12-04T03:00:00.000Z',
    ]);
    // A tick at exactly `from` is not "next".
    expect(nextRunTimes('0 3 * * *', new Date('2026-12-02T03:00:00Z'), 1)[0]!.toISOString()).toBe('2026-12-03T03:00:00.000Z');
    expect(nextRunTimes('*/15 * * * *', from, 2).map((d) => d.toISOString())).toEqual(['2026-12-01T20:15:00.000Z', '2026-12-01T20:30:00.000Z']);
  });

  it('follows weekdays and month ends', () => {
    // 2026-12-04 is a Friday: the next weekday 06:30 runs are Friday, then Monday.
    expect(nextRunTimes('30 6 * * 1-5', new Date('2026-12-04T00:00:00Z'), 2).map((d) => d.toISOString())).toEqual([
      '2026-12-04T06:30:00.000Z',
      '2026-12-07T06:30:00.000Z',
    ]);
    expect(nextRunTimes('0 0 31 * *', new Date('2027-01-31T12:00:00Z'), 2).map((d) => d.toISOString())).toEqual([
      '2027-03-31T00:00:00.000Z',
      '2027-05-31T00:00:00.000Z',
    ]);
  });

  it('accepts five-field cron expressions only', () => {
    expect(cronProblem('0 3 * * *')).toBeNull();
    expect(cronProblem('*/5 8-18 * * mon-fri')).toBeNull();
    expect(cronProblem('* * * * * *')).toMatch(/five fields.*this one has 6 fields/);
    expect(cronProblem('0 25 * * *')).toMatch(/five fields.*expected range 0-23/);
    expect(cronProblem('nightly')).toMatch(/this one has 1 field$/);
    expect(() => nextRunTimes('0 25 * * *', new Date(), 1)).toThrow(RangeError);
  });
});

describe('spec key schedule', () => {
  it('is kept, trimmed', () => {
    expect(parseFitSpec(`${SPEC}schedule: " 0 3 * * * "\n`, 's.yaml').schedule).toBe('0 3 * * *');
    expect(parseFitSpec(SPEC, 's.yaml').schedule).toBeNull();
  });

  it('names the key and the line of a bad expression', () => {
    const error = (() => {
      try {
        parseFitSpec(`${SPEC}schedule: "0 25 * * *"\n`, 's.yaml');
      } catch (e) {
        return e;
      }
      return undefined;
    })();
    expect(error).toBeInstanceOf(SpecError);
    const e = error as SpecError;
    expect([e.path, e.line, e.column]).toEqual(['schedule', 4, 11]);
    expect(e.message).toBe(
      's.yaml:4:11: schedule: must be a cron expression of five fields (minute hour day-of-month month day-of-week, in UTC), ' +
        'e.g. "0 3 * * *": Constraint error, got value 25 expected range 0-23, got "0 25 * * *"',
    );
    expect(() => parseFitSpec(`${SPEC}schedule: 5\n`, 's.yaml')).toThrow(/s\.yaml:4:11: schedule: must be a cron expression/);
  });
});

describe('schedule files', () => {
  it('resolve spec paths against their folder; cron is optional', () => {
    const entries = parseScheduleFile('- spec: a.yaml\n  cron: "0 3 * * *"\n- spec: sub/b.yaml\n', '/etc/rowfold/schedules.yaml');
    expect(entries).toEqual([
      { spec: '/etc/rowfold/a.yaml', cron: '0 3 * * *' },
      { spec: '/etc/rowfold/sub/b.yaml', cron: null },
    ]);
  });

  it('report problems with the key path and line', () => {
    expect(() => parseScheduleFile('- spec: a.yaml\n  cron: "* * * * * *"\n  every: day\n- cron: "0 3 * * *"\n', 'sch.yaml')).toThrow(
      new RegExp(
        [
          'sch.yaml:2:9: \\[0\\].cron: must be a cron expression .* this one has 6 fields, got "\\* \\* \\* \\* \\* \\*"',
          'sch.yaml:3:3: \\[0\\].every: unknown key "every" \\(a schedule has "spec" and "cron"\\)',
          'sch.yaml:4:3: \\[1\\].spec: required key is missing',
        ].join('\n'),
      ),
    );
    expect(() => parseScheduleFile('spec: a.yaml\n', 'sch.yaml')).toThrow('sch.yaml:1:1: a schedule file must be a YAML list');
  });

  it('take the file cron over the spec schedule, and refuse a fit scheduled twice or not at all', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'rowfold-sched-'));
    writeFileSync(join(dir, 'a.yaml'), `${SPEC}schedule: "0 3 * * *"\n`);
    writeFileSync(join(dir, 'b.yaml'), SPEC.replace('load', 'other'));
    writeFileSync(join(dir, 'schedules.yaml'), '- spec: a.yaml\n  cron: "15 4 * * *"\n- spec: b.yaml\n  cron: "0 * * * *"\n');
    const got = await loadFitSchedules([join(dir, 'schedules.yaml')]);
    expect(got.map((s) => [s.spec.name, s.cron])).toEqual([
      ['load', '15 4 * * *'],
      ['other', '0 * * * *'],
    ]);
    expect((await loadFitSchedules([join(dir, 'a.yaml')])).map((s) => s.cron)).toEqual(['0 3 * * *']);
    await expect(loadFitSchedules([join(dir, 'a.yaml'), join(dir, 'schedules.yaml')])).rejects.toThrow(/fit load is scheduled twice/);
    await expect(loadFitSchedules([join(dir, 'b.yaml')])).rejects.toThrow(/fit other has no schedule: add "schedule: <cron>"/);
  });
});

describe('rowfold schedule and serve (no database)', () => {
  it('reads the schedule file shipped in config/', async () => {
    const file = join(import.meta.dirname, '..', '..', 'config', 'schedules.yaml');
    const res = await runCli(['schedule', file, '--next', '1', '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as { schedules: { fit_name: string; cron: string }[] };
    expect(doc.schedules.map((s) => s.cron)).toEqual(['0 3 * * *', '30 * * * *']);
  });

  it('prints the next run times of a spec', async () => {
    const spec = writeSpec(`${SPEC}schedule: "0 3 * * *"\n`);
    const res = await runCli(['schedule', spec, '--next', '2', '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as { schedules: { fit_name: string; schema: string; cron: string; next: string[] }[] };
    expect(doc.schedules).toHaveLength(1);
    expect(doc.schedules[0]!.fit_name).toBe('load');
    expect(doc.schedules[0]!.schema).toBe('rowfold');
    expect(doc.schedules[0]!.next).toHaveLength(2);
    const [a, b] = doc.schedules[0]!.next.map((t) => new Date(t).getTime());
    expect(b! - a!).toBe(86_400_000);
    expect(new Date(a!).getUTCHours()).toBe(3);
    const text = await runCli(['schedule', spec, '--next', '1']);
    expect(text.stdout).toMatch(/^fit load \(.*\) · cron "0 3 \* \* \*" \(UTC\) · results in schema rowfold\n  \d{4}-\d\d-\d\d 03:00 UTC\n$/);
    // --schema puts every fit's results elsewhere, as serve --schema does (issue 14).
    const moved = JSON.parse((await runCli(['schedule', spec, '--next', '1', '--schema', 'elsewhere', '--json'])).stdout) as { schedules: { schema: string }[] };
    expect(moved.schedules[0]!.schema).toBe('elsewhere');
  });

  it('a spec without a schedule or a bad --next is a usage error', async () => {
    const res = await runCli(['schedule', writeSpec(SPEC)]);
    expect(res.code).toBe(2);
    expect(res.stderr).toMatch(/fit load has no schedule/);
    expect((await runCli(['schedule', writeSpec(`${SPEC}schedule: "0 3 * * *"\n`), '--next', '0'])).code).toBe(2);
  });

  it('serve refuses the embedded database', async () => {
    const res = await runCli(['serve', writeSpec(`${SPEC}schedule: "0 3 * * *"\n`), '--db', 'embedded:/tmp/nowhere']);
    expect(res.code).toBe(2);
    expect(res.stderr).toMatch(/rowfold serve needs a PostgreSQL server: the embedded database serves one process at a time/);
  });
});
