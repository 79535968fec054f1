import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { runFit } from '../src/run/run-fit.js';
import { SERVER_ALLOCATOR_WARMUP } from '../src/source/read-design.js';
import { BENCH_SCHEMA, benchUrl } from './bench-url.js';
import { ensureAccuracyTable, ensureUniformTable } from './tables.js';
import type { ResponseKind } from './tables.js';

export { benchUrl } from './bench-url.js';

/** One end-to-end workload of the speed targets. */
export interface Workload {
  readonly name: string;
  readonly table: string;
  readonly rows: number;
  readonly terms: number;
  readonly segments: number;
  readonly method: 'qr' | 'normal';
  readonly parallel: number;
  /** Target for fit time / psql binary COPY into /dev/null. */
  readonly target: number;
  /** The table is an accuracy table of this kind (bench/tables.ts); else uniform columns. */
  readonly kind?: ResponseKind;
  /** Target for the fit's peak RSS (MB), where the issue sets one. */
  readonly rssTargetMb?: number;
}

/** What was measured for a workload (medians of the repeats; floors measured in the same run). */
export interface WorkloadFigure extends Workload {
  readonly copyFloorSeconds: number;
  readonly receiveFloorSeconds: number;
  readonly fitSeconds: number;
  readonly ratioToCopy: number;
  readonly ratioToReceive: number;
  readonly peakRssMb: number;
  /** Client CPU of the fit process (user + system, all threads), seconds. */
  readonly fitCpuSeconds: number;
  /** CPU of the server's backends during the fit (null where the postmaster is not readable). */
  readonly serverCpuSeconds: number | null;
  /** Kernel flops of the fit (QR 2·m·n², XᵀX m·n·(n+1), n the factor order) over fit seconds. */
  readonly gflops: number;
}

/**
 * The workloads of the speed targets (issues 6 and 11). T200 and T20 read the zero-intercept
 * tables of the accuracy bench (their values do not change the speed of one pass).
 */
export const WORKLOADS: readonly Workload[] = [
  { name: 'T200 QR', table: 'z1000000x200', kind: 'zero-intercept', rows: 1_000_000, terms: 200, segments: 1, method: 'qr', parallel: 1, target: 0.85 },
  { name: 'T20 QR', table: 'z10000000x20', kind: 'zero-intercept', rows: 10_000_000, terms: 20, segments: 1, method: 'qr', parallel: 2, target: 0.7 },
  { name: '10,000 segments QR', table: 's10000x1000x10', rows: 10_000_000, terms: 10, segments: 10_000, method: 'qr', parallel: 2, target: 0.8 },
  { name: 'T200 XᵀX', table: 'z1000000x200', kind: 'zero-intercept', rows: 1_000_000, terms: 200, segments: 1, method: 'normal', parallel: 2, target: 0.55 },
  // Issue 12: one small model per segment, rows of the segments interleaved (g % segments).
  { name: '100,000 segments', table: 's100000x20x3', rows: 2_000_000, terms: 3, segments: 100_000, method: 'qr', parallel: 1, target: 4, rssTargetMb: 300 },
  { name: '1,000,000 segments', table: 's1000000x10x3', rows: 10_000_000, terms: 3, segments: 1_000_000, method: 'qr', parallel: 1, target: 4, rssTargetMb: 400 },
];

/** The report bench of issue 12: `rowfold report` on the fit of a workload (run by measureWorkload first). */
export const REPORT_WORKLOAD = { workload: '100,000 segments', secondsTarget: 30, rssTargetMb: 400, htmlTargetMb: 10 } as const;

/** What was measured of `rowfold report` (medians of the repeats, largest RSS). */
export interface ReportFigure {
  readonly workload: string;
  readonly seconds: number;
  readonly peakRssMb: number;
  readonly htmlMb: number;
}

/** Times `rowfold report` on a workload's fit (in a process of its own), `repeats` times. */
export function measureReport(w: Workload, repeats = 3): ReportFigure {
  const dir = mkdtempSync(join(tmpdir(), 'rowfold-bench-report-'));
  const out = join(dir, 'report.html');
  const cli = new URL('../src/cli/main.js', new URL('.', import.meta.url)).pathname;
  const seconds: number[] = [];
  const rss: number[] = [];
  for (let r = 0; r < repeats; r++) {
    const t = timed(process.execPath, [cli, 'report', `bench_${w.table}_${w.method}`, '--db', benchUrl(), '--schema', BENCH_SCHEMA, '--out', out]);
    seconds.push(t.seconds);
    rss.push(t.rssMb);
  }
  return { workload: w.name, seconds: median(seconds), peakRssMb: Math.max(...rss), htmlMb: statSync(out).size / 1e6 };
}

/** Creates a workload's table when missing. */
async function ensureWorkloadTable(w: Workload): Promise<void> {
  if (w.kind === undefined) await ensureUniformTable(w);
  else await ensureAccuracyTable({ rows: w.rows, terms: w.terms, kind: w.kind });
}

export function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)]!;
}

/** CPU seconds of the server's exited backends so far (the postmaster's children), or null. */
function serverChildCpu(): number | null {
  for (const file of ['/var/run/postgresql/15-main.pid', '/var/lib/postgresql/15/main/postmaster.pid']) {
    try {
      if (!existsSync(file)) continue;
      const pid = readFileSync(file, 'utf8').split('\n')[0]!.trim();
      const fields = readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1]!.split(' ');
      // cutime and cstime: fields 16 and 17 of /proc/PID/stat, in clock ticks (100 per second).
      return (Number(fields[13]) + Number(fields[14])) / 100;
    } catch {
      // not readable here
    }
  }
  return null;
}

/** What bench/fit-once.js reports of each model. */
export interface FitOnceModel {
  readonly accuracy: string;
  readonly passes: number;
  readonly refinementSteps: number;
  readonly estimatedDigits: number | null;
}

/**
 * One fit of `spec` in a process of its own (bench/fit-once.js) under /usr/bin/time: wall
 * seconds, peak RSS, CPU, and what it reports of its models.
 */
export function timedFit(
  spec: string,
  parallel: number,
  accuracy: 'fast' | 'auto',
): { seconds: number; rssMb: number; cpu: number; rows: number; models: FitOnceModel[] } {
  const dist = new URL('.', import.meta.url);
  const t = timed(process.execPath, [new URL('fit-once.js', dist).pathname, spec, benchUrl(), String(parallel), '-', accuracy]);
  const out = JSON.parse(t.stdout) as { rows: number; models: FitOnceModel[] };
  return { seconds: t.seconds, rssMb: t.rssMb, cpu: t.cpu, rows: out.rows, models: out.models };
}

/** Runs a command under /usr/bin/time: wall seconds, peak RSS (MB), user + system CPU. */
export function timed(cmd: string, args: string[]): { seconds: number; rssMb: number; cpu: number; stdout: string } {
  const t0 = performance.now();
  const p = spawnSync('/usr/bin/time', ['-f', 'ROWFOLD_TIME %M %U %S', cmd, ...args], { encoding: 'utf8', maxBuffer: 1 << 20 });
  const seconds = (performance.now() - t0) / 1000;
  if (p.status !== 0) throw new Error(`${cmd} ${args.slice(0, 2).join(' ')} failed: ${p.stderr.slice(-500)}`);
  const line = p.stderr.split('\n').find((l) => l.startsWith('ROWFOLD_TIME '));
  const [, rss, user, sys] = (line ?? 'ROWFOLD_TIME 0 0 0').split(' ');
  return { seconds, rssMb: Number(rss) / 1024, cpu: Number(user) + Number(sys), stdout: p.stdout };
}

/**
 * Measures a workload `repeats` times, each time: psql streaming the fit's design query as
 * binary COPY into /dev/null (one connection, as the anchor), a process that only
 * receives the same bytes over the same connections, and the fit in a process of its own.
 */
export async function measureWorkload(w: Workload, repeats = 3): Promise<WorkloadFigure> {
  await ensureWorkloadTable(w);
  const dir = mkdtempSync(join(tmpdir(), 'rowfold-bench-'));
  const spec = join(dir, 'workload.yaml');
  const terms = Array.from({ length: w.terms }, (_, j) => `x${j + 1}`).join(', ');
  writeFileSync(
    spec,
    `name: bench_${w.table}_${w.method}\nschema: ${BENCH_SCHEMA}\nsource: ${w.table}\nresponse: y\nterms: [${terms}]\nmethod: ${w.method}\n` +
      (w.segments > 1 ? 'segment_by: [s]\n' : ''),
  );
  const dry = await runFit({ specPath: spec, db: benchUrl(), dryRun: true });
  const query = dry.plan.queries[0]!.toBound().text;
  const dist = new URL('.', import.meta.url);
  const copy: number[] = [];
  const receive: number[] = [];
  const fit: number[] = [];
  const rss: number[] = [];
  const cpu: number[] = [];
  const server: number[] = [];
  for (let r = 0; r < repeats; r++) {
    // The session first runs the allocator warm-up every rowfold read runs (see
    // prepareReadSession): without it the server can fall into a brk() per wide row, in
    // psql as in any client, and the floor would measure that instead.
    copy.push(
      timed('psql', ['-X', '-q', '-o', '/dev/null', '-d', benchUrl(), '-c', SERVER_ALLOCATOR_WARMUP, '-c', `COPY (${query}) TO STDOUT (FORMAT binary)`])
        .seconds,
    );
    receive.push(timed(process.execPath, [new URL('receive-only.js', dist).pathname, spec, benchUrl(), String(w.parallel)]).seconds);
    const s0 = serverChildCpu();
    const f = timed(process.execPath, [new URL('fit-once.js', dist).pathname, spec, benchUrl(), String(w.parallel)]);
    const s1 = serverChildCpu();
    const out = JSON.parse(f.stdout) as { seconds: number; rows: number };
    if (out.rows !== w.rows) throw new Error(`${w.name}: the fit read ${out.rows} rows, expected ${w.rows}`);
    fit.push(f.seconds);
    rss.push(f.rssMb);
    cpu.push(f.cpu);
    if (s0 !== null && s1 !== null) server.push(s1 - s0);
  }
  const n = w.terms + 2;
  const flops = w.method === 'qr' ? 2 * w.rows * n * n : w.rows * n * (n + 1);
  const fitSeconds = median(fit);
  const copyFloorSeconds = median(copy);
  const receiveFloorSeconds = median(receive);
  return {
    ...w,
    copyFloorSeconds,
    receiveFloorSeconds,
    fitSeconds,
    ratioToCopy: fitSeconds / copyFloorSeconds,
    ratioToReceive: fitSeconds / receiveFloorSeconds,
    peakRssMb: Math.max(...rss),
    fitCpuSeconds: median(cpu),
    serverCpuSeconds: server.length === 0 ? null : median(server),
    gflops: flops / fitSeconds / 1e9,
  };
}
