import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { stringify } from 'yaml';
import { runFit } from '../src/run/run-fit.js';
import { foldPartition } from '../src/run/split-partition.js';
import { startSplitFit } from '../src/run/split-start.js';
import { resolveConnection } from '../src/source/connection-target.js';
import { prepareReadSession } from '../src/source/read-design.js';
import { streamCopyChunks } from '../src/source/stream-copy-chunks.js';
import { benchUrl } from './bench-url.js';
import { LocalCluster } from './local-cluster.js';

// `npm run bench:shards`: the cost model of reading a sharded table (README, "Past one machine"),
// checked against 1, 2 and 3 local shards (throwaway clusters on ports 55450-55452), and the
// memory of merging 1,024 partitions × 10,000 segments.
//   ROWFOLD_BENCH_SHARD_ROWS   rows per shard (default 1,000,000)
//   ROWFOLD_BENCH_MERGE        merge rows: PARTITIONSxSEGMENTS[xPAGE|xall], comma-separated
//   ROWFOLD_BENCH_SKIP         "read" or "merge" to skip a part
const PORTS = [55450, 55451, 55452];
const ROWS = Number(process.env['ROWFOLD_BENCH_SHARD_ROWS'] ?? 1_000_000);
// partitions × segments [× states per page; default the merge's own]; "all" reads every state at once.
const MERGE_CONFIGS = (process.env['ROWFOLD_BENCH_MERGE'] ?? '64x10000xall,64x10000,256x10000,1024x1000,1024x10000').split(',').map((c) => {
  const [p, sgm, page] = c.split('x');
  return { partitions: Number(p), segments: Number(sgm), page: page === undefined ? 20_000 : page === 'all' ? 1e12 : Number(page) };
});
const SKIP = process.env['ROWFOLD_BENCH_SKIP'] ?? '';
const DB = `rowfold_bench_shards_${process.pid}`;
const dist = new URL('.', import.meta.url);
const tmp = mkdtempSync(join(os.tmpdir(), 'rowfold-bench-shards-'));

// Feeders' hourly load: 100 feeders, four terms.
const rowsSql = (lo: number, hi: number, feeders = 100) => `
  select g as id, 'F' || lpad((g % ${feeders})::text, 5, '0') as feeder,
         (10 + 15 * sin(g * 0.37))::float8 as temp_c, (50 + 30 * cos(g * 0.11))::float8 as humidity,
         ((g / 7) % 24)::float8 as hour, greatest(0, 18 - (10 + 15 * sin(g * 0.37)))::float8 as cooling,
         (100 + 2.5 * (10 + 15 * sin(g * 0.37)) + 0.3 * (50 + 30 * cos(g * 0.11)) + 0.8 * ((g / 7) % 24) + 3 * sin(g * 12.9898))::float8 as load_kw
    from generate_series(${lo}, ${hi}) g`;
const MODEL = { segment_by: 'feeder', response: 'load_kw', terms: ['temp_c', 'humidity', 'hour', 'cooling'] };

async function withClient<T>(url: string, fn: (c: pg.Client) => Promise<T>): Promise<T> {
  const c = new pg.Client({ connectionString: url });
  await c.connect();
  try {
    return await fn(c);
  } finally {
    await c.end();
  }
}

function spec(name: string, doc: Record<string, unknown>): string {
  const path = join(tmp, `${name}.yaml`);
  writeFileSync(path, stringify({ name, ...doc }));
  return path;
}

/** One fit in a process of its own under /usr/bin/time: wall seconds and peak RSS. */
function fitOnce(specPath: string, parallel: number, env: NodeJS.ProcessEnv): { seconds: number; rows: number; rssMb: number; passes: number } {
  const p = spawnSync('/usr/bin/time', ['-f', 'ROWFOLD_TIME %M', process.execPath, new URL('fit-once.js', dist).pathname, specPath, benchUrl(DB), String(parallel), '-', 'fast'], {
    encoding: 'utf8',
    env,
    maxBuffer: 1 << 20,
  });
  if (p.status !== 0) throw new Error(`fit failed: ${p.stderr}`);
  const out = JSON.parse(p.stdout.trim().split('\n').pop()!) as { seconds: number; rows: number; models: { passes: number }[] };
  const rss = /ROWFOLD_TIME (\d+)/.exec(p.stderr);
  return { seconds: out.seconds, rows: out.rows, passes: Math.max(...out.models.map((m) => m.passes)), rssMb: rss === null ? NaN : Number(rss[1]) / 1024 };
}

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)]!;

console.log(`rowfold bench:shards · ${os.cpus()[0]?.model ?? 'cpu'} × ${os.cpus().length} · node ${process.version} · shared machine`);
await withClient(benchUrl('postgres'), (c) => c.query(`create database ${DB} template template0`));
const shards: LocalCluster[] = [];
try {
  const coordinator = benchUrl(DB);
  const results: Record<string, unknown> = {};
  if (!SKIP.includes('read')) {
    const made = await Promise.allSettled(PORTS.map((p) => LocalCluster.create(p)));
    shards.push(...made.flatMap((m) => (m.status === 'fulfilled' ? [m.value] : [])));
    const failed = made.find((m) => m.status === 'rejected');
    if (failed !== undefined) throw failed.reason;
    for (const [i, s] of shards.entries()) {
      await withClient(s.url(), async (c) => {
        await c.query(`create table meter_load as ${rowsSql(i * ROWS + 1, (i + 1) * ROWS)}`);
        await c.query('vacuum analyze meter_load');
      });
    }
    const connections = join(tmp, 'connections.yaml');
    writeFileSync(connections, shards.map((s, i) => `shard_${i + 1}: ${s.url()}`).join('\n') + '\n');
    const env = { ...process.env, ROWFOLD_CONNECTIONS: connections };
    const columns = '(id int not null, feeder text, temp_c float8, humidity float8, hour float8, cooling float8, load_kw float8)';
    await withClient(coordinator, async (c) => {
      await c.query('create extension postgres_fdw');
      for (const [i, s] of shards.entries()) {
        await c.query(`create server shard_${i + 1} foreign data wrapper postgres_fdw options (host '127.0.0.1', port '${s.port}', dbname 'postgres')`);
        await c.query(`create user mapping for current_user server shard_${i + 1} options (user 'postgres')`);
      }
      for (let n = 1; n <= shards.length; n++) {
        await c.query(`create table sharded_${n} ${columns} partition by range (id)`);
        for (let i = 0; i < n; i++) {
          await c.query(`create foreign table sharded_${n}_s${i + 1} partition of sharded_${n} for values from (${i * ROWS + 1}) to (${(i + 1) * ROWS + 1})
                           server shard_${i + 1} options (table_name 'meter_load')`);
        }
        // An empty local partition beside them (a sharded table is read leaf by leaf when it has two or more).
        await c.query(`create table sharded_${n}_local partition of sharded_${n} for values from (${10 * ROWS + 1}) to (${11 * ROWS + 1})`);
      }
      await c.query(`create table tiny as ${rowsSql(1, 2000)}`);
    });

    // The read floor of one shard: its design query's binary COPY received and dropped.
    const dry = await runFit({ specPath: spec('floor', { source: 'sharded_1', ...MODEL }), db: coordinator, parallel: 2, dryRun: true, env });
    const shardQuery = dry.plan.queries[dry.plan.sites!.findIndex((s) => s !== null)]!;
    const floors: number[] = [];
    for (let k = 0; k < 3; k++) {
      floors.push(
        await withClient(shards[0]!.url(), async (c) => {
          await prepareReadSession(c);
          const t0 = performance.now();
          for await (const pieces of streamCopyChunks(c, shardQuery)) void pieces;
          return (performance.now() - t0) / 1000;
        }),
      );
    }
    const readRate = ROWS / median(floors);
    const t0 = median([0, 1, 2].map(() => fitOnce(spec('tiny', { source: 'tiny', ...MODEL }), 1, env).seconds));
    console.log(`\nper-run overhead t0 (a 2,000-row fit): ${t0.toFixed(2)} s; one shard's read floor r_read: ${(readRate / 1e6).toFixed(2)} M rows/s (${ROWS.toLocaleString('en-US')} rows in ${median(floors).toFixed(2)} s)`);
    console.log('shards  rows        direct (fit --parallel)  predicted  measured/predicted  thread folded   through the coordinator  predicted  measured/predicted  peak RSS');
    const points: Record<string, number>[] = [];
    let jobRate = 0;
    let funnelRate = 0;
    for (let n = 1; n <= shards.length; n++) {
      const s = spec(`direct_${n}`, { source: `sharded_${n}`, ...MODEL });
      const direct = [0, 1, 2].map(() => fitOnce(s, n + 1, env));
      const funnel = [0, 1, 2].map(() => fitOnce(s, 1, env));
      const d = median(direct.map((x) => x.seconds));
      const f = median(funnel.map((x) => x.seconds));
      // The rate of one job (a shard read and folded), and of the funnel, fitted at N = 1. Direct:
      // every shard at once, so T = t0 + R / r_job while the one folding thread keeps up (N · r_job
      // below its rate). Through the coordinator: one backend carries every row, T = t0 + N R / r_funnel.
      if (n === 1) {
        jobRate = ROWS / (d - t0);
        funnelRate = ROWS / (f - t0);
      }
      const predicted = t0 + ROWS / jobRate;
      const predictedFunnel = t0 + (n * ROWS) / funnelRate;
      const folded = (n * ROWS) / (d - t0);
      points.push({ shards: n, rows: n * ROWS, direct: d, predicted, through: f, predictedFunnel, threadRowsPerSecond: folded, rss: median(direct.map((x) => x.rssMb)), passes: Math.max(...direct.map((x) => x.passes)) });
      if (process.env['ROWFOLD_BENCH_VERBOSE']) console.log(JSON.stringify({ direct, funnel }));
      console.log(
        `${String(n).padStart(6)}  ${(n * ROWS).toLocaleString('en-US').padStart(10)}  ${d.toFixed(2).padStart(10)} s             ${predicted.toFixed(2).padStart(6)} s  ${(d / predicted).toFixed(2).padStart(10)}          ` +
          `${(folded / 1e6).toFixed(2).padStart(5)} M rows/s  ${f.toFixed(2).padStart(10)} s (${(f / d).toFixed(2)}×)  ${predictedFunnel.toFixed(2).padStart(6)} s  ${(f / predictedFunnel).toFixed(2).padStart(10)}          ${median(direct.map((x) => x.rssMb)).toFixed(0)} MB`,
      );
    }
    console.log(`one job (a shard read and folded) r_job = min(r_read, r_fold): ${(jobRate / 1e6).toFixed(2)} M rows/s; through the coordinator r_funnel: ${(funnelRate / 1e6).toFixed(2)} M rows/s`);

    // A split run of the three shards, its jobs worked in this process: partition and merge seconds.
    const target = resolveConnection({ db: coordinator, env: {} });
    const splitSpec = spec('split_3', { source: `sharded_${shards.length}`, ...MODEL, accuracy: 'fast', split: { partitions: 2 } });
    const start = await startSplitFit({ specPath: splitSpec, target, env, enqueue: async () => undefined });
    const jobs: number[] = [];
    for (let p = 0; p < start.partitions; p++) {
      const t = performance.now();
      await foldPartition({ target, env, schema: 'rowfold', runId: start.runId, partition: p, worker: 'bench' });
      jobs.push((performance.now() - t) / 1000);
    }
    const m = spawnSync(process.execPath, [new URL('merge-once.js', dist).pathname, coordinator, 'rowfold', String(start.runId), '20000'], { encoding: 'utf8', env });
    const merged = JSON.parse(m.stdout.trim()) as { seconds: number; segments: number };
    const parts = await withClient(coordinator, (c) => c.query(`select partition_seconds, slowest_partition_seconds, merge_seconds from rowfold.split_runs where run_id = $1`, [start.runId]));
    const row = parts.rows[0] as { partition_seconds: number; merge_seconds: number };
    const jobOverhead = jobs.reduce((a, b) => a + b, 0) - row.partition_seconds;
    console.log(
      `split run of ${shards.length} shards + 1 local leaf (${start.partitions} jobs, one after another): reading and folding ${row.partition_seconds.toFixed(2)} s, ` +
        `job bookkeeping ${(jobOverhead / start.partitions).toFixed(3)} s per job, merge job ${merged.seconds.toFixed(2)} s (${merged.segments} segments, ` +
        `merge ${row.merge_seconds.toFixed(2)} s)`,
    );
    results['read'] = { rowsPerShard: ROWS, t0, readRate, jobRate, funnelRate, points, jobOverheadSeconds: jobOverhead / start.partitions, mergeJobSeconds: merged.seconds };
  }

  if (!SKIP.includes('merge')) {
    // The merge of P partitions × S segments: a real split run of 2 partitions writes the partial
    // factors; partition 0's are copied to partitions 2 … P-1; the merge job runs in a process of its own.
    const target = resolveConnection({ db: coordinator, env: {} });
    console.log('\nmerge job of P partitions × S segments (order 6), in a process of its own');
    console.log('partitions  segments  page (states)  partial states  seconds  peak RSS  largest page held');
    const merges: Record<string, number>[] = [];
    for (const { partitions, segments, page } of MERGE_CONFIGS) {
      await withClient(coordinator, (c) => c.query(`drop table if exists seg; create table seg as ${rowsSql(1, 4 * segments, segments)}`));
      const start = await startSplitFit({ specPath: spec(`merge_${partitions}_${segments}`, { source: 'seg', ...MODEL, accuracy: 'fast', split: { partitions: 2 } }), target, enqueue: async () => undefined });
      for (let p = 0; p < 2; p++) await foldPartition({ target, schema: 'rowfold', runId: start.runId, partition: p, worker: 'bench' });
      await withClient(coordinator, async (c) => {
        await c.query('begin');
        await c.query(`update rowfold.split_runs set partitions = $2 where run_id = $1`, [start.runId, partitions]);
        await c.query(
          `insert into rowfold.split_partitions (run_id, partition, counts, worker)
             select run_id, g, counts, worker from rowfold.split_partitions, generate_series(2, $2 - 1) g where run_id = $1 and partition = 0`,
          [start.runId, partitions],
        );
        await c.query(
          `insert into rowfold.partial_factors
             select run_id, g, segment_key, segment_values, method, "order", factor, factor_low, shift, rows, zero_weight_rows, sum_weights, sum_log_weights
               from rowfold.partial_factors, generate_series(2, $2 - 1) g where run_id = $1 and partition = 0`,
          [start.runId, partitions],
        );
        await c.query('commit');
      });
      const m = spawnSync('/usr/bin/time', ['-f', 'ROWFOLD_TIME %M', process.execPath, new URL('merge-once.js', dist).pathname, coordinator, 'rowfold', String(start.runId), String(page)], {
        encoding: 'utf8',
        maxBuffer: 1 << 20,
      });
      if (m.status !== 0) throw new Error(`merge failed: ${m.stderr}`);
      const out = JSON.parse(m.stdout.trim().split('\n').pop()!) as { outcome: string; seconds: number; segments: number; largestBatch: number };
      const rss = Number(/ROWFOLD_TIME (\d+)/.exec(m.stderr)?.[1] ?? NaN) / 1024;
      merges.push({ partitions, segments, page, seconds: out.seconds, rssMb: rss, largestPage: out.largestBatch });
      console.log(
        `${String(partitions).padStart(10)}  ${String(segments).padStart(8)}  ${(page >= 1e12 ? 'all' : page.toLocaleString('en-US')).padStart(13)}  ${(partitions * segments).toLocaleString('en-US').padStart(14)}  ${out.seconds.toFixed(1).padStart(7)}  ${rss.toFixed(0).padStart(5)} MB  ${out.largestBatch.toLocaleString('en-US')} states (${out.outcome})`,
      );
      await withClient(coordinator, (c) => c.query(`delete from rowfold.runs where run_id = $1`, [start.runId]));
    }
    results['merge'] = merges;
  }
  writeFileSync(new URL('shards-results.json', dist), JSON.stringify(results, null, 2));
} finally {
  await Promise.all(shards.map((s) => s.destroy()));
  await withClient(benchUrl('postgres'), (c) => c.query(`drop database if exists ${DB} with (force)`));
}
