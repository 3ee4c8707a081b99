/**
 * Load figures of one service process on PostgreSQL (printed, never asserted):
 *  - GET the latest forecast, 200 and 304 (If-None-Match) paths, 16 connections for 8 s each;
 *  - POST runs with 4, 16 and 64 connections (2,000 runs in all, each a new run);
 *  - p50/p99 latency and requests per second of each, and the service's RSS before and after the runs.
 * The machine's load average (/proc/loadavg) is printed beside each figure: the bench shares its
 * cores with whatever else runs.
 * Usage: DATABASE_URL=postgres://postgres@127.0.0.1:5432/test npx tsx bench/load.ts
 * A fresh database is created on that server for the bench and dropped at the end. Runs are corrected
 * in degraded mode on the raw-error archive (no model is fitted, to keep the set-up short); the
 * correction bench (bench/correction.ts) times runs through a fitted model.
 */
import { spawn } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { readFileSync } from 'node:fs';
import autocannon from 'autocannon';
import pg from 'pg';
import { loadScenarioArchive, type Send } from '../src/scenario/load-archive.ts';
import { buildScenario } from '../src/scenario/scenario.ts';

const SERVER = process.env.DATABASE_URL;
if (!SERVER) {
  console.error('set DATABASE_URL to a PostgreSQL server; the bench makes its own database there');
  process.exit(2);
}
const PORT = Number(process.env.PORT ?? 8093);
const base = `http://127.0.0.1:${PORT}`;
const PHASES = [
  { connections: 4, runs: 400 },
  { connections: 16, runs: 600 },
  { connections: 64, runs: 1000 },
];

const loadavg = () => readFileSync('/proc/loadavg', 'utf8').split(' ').slice(0, 3).join(' ');
const rssMb = (pid: number) => Math.round(Number(/VmRSS:\s+(\d+)/.exec(readFileSync(`/proc/${pid}/status`, 'utf8'))![1]) / 1024);

const name = `sft_bench_load_${randomBytes(4).toString('hex')}`;
const admin = new pg.Client({ connectionString: SERVER });
await admin.connect();
await admin.query(`create database ${name}`);
const u = new URL(SERVER);
u.pathname = `/${name}`;

const service = spawn(process.execPath, ['--import', 'tsx', 'src/main.ts'], {
  env: { ...process.env, DATABASE_URL: u.toString(), PORT: String(PORT), HOST: '127.0.0.1', AUTH: 'off', LOG_LEVEL: 'warn', WORKERS: '2', CORRECTION_QUEUE: '128' },
  stdio: ['ignore', 'inherit', 'inherit'],
});
const cannon = (opts: Parameters<typeof autocannon>[0]) =>
  new Promise<autocannon.Result>((resolve, reject) => autocannon(opts, (err, r) => (err ? reject(err) : resolve(r))));

try {
  for (let i = 0; ; i++) {
    if (i > 300) throw new Error('the service did not start within 60 s');
    const up = await fetch(`${base}/healthz`).then((r) => r.ok, () => false);
    if (up) break;
    await new Promise((r) => setTimeout(r, 200));
  }
  const send: Send = async (method, path, body) => {
    const res = await fetch(`${base}${path}`, { method, headers: body === undefined ? {} : { 'content-type': 'application/json' }, body: body === undefined ? undefined : JSON.stringify(body) });
    const text = await res.text();
    return { status: res.status, body: text ? JSON.parse(text) : null };
  };
  const scenario = buildScenario({ seed: 9, years: 3, members: 10 });
  const g = scenario.gauge;
  await loadScenarioArchive(send, scenario);
  const job = await send('POST', `/gauges/${g.id}/raw-archive`, { templateLength: 20 });
  for (;;) {
    const j = (await send('GET', `/jobs/${(job.body as { id: string }).id}`)).body as { status: string; error?: string };
    if (j.status === 'succeeded') break;
    if (j.status === 'failed') throw new Error(`raw archive: ${j.error}`);
    await new Promise((r) => setTimeout(r, 200));
  }
  const last = scenario.times.length - 1;
  const run = scenario.forecastRun(last - 20);
  const runBody = (source: string) =>
    JSON.stringify({
      issueTime: run.issueTime,
      source,
      unit: 'm3/s',
      warmupSteps: run.warmupSteps,
      members: run.members.map((m) => ({ id: m.id, values: m.values })),
    });
  const first = await fetch(`${base}/gauges/${g.id}/runs`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: runBody('bench-first') });
  if (first.status !== 201) throw new Error(`first run: ${first.status} ${await first.text()}`);
  const etag = first.headers.get('etag')!;
  const latestUrl = `${base}/gauges/${g.id}/forecasts/latest`;

  const rows: string[][] = [];
  const row = (what: string, r: autocannon.Result, extra = '') => {
    rows.push([what, `${Math.round(r.requests.average)}`, `${r.latency.p50}`, `${r.latency.p99}`, `${r['2xx']}/${r['3xx']}/${r.non2xx - r['3xx']}`, extra, loadavg()]);
  };
  row('GET latest, 200', await cannon({ url: latestUrl, connections: 16, duration: 8 }));
  row('GET latest, 304 (If-None-Match)', await cannon({ url: latestUrl, connections: 16, duration: 8, headers: { 'if-none-match': etag } }));

  const rssBefore = rssMb(service.pid!);
  const loadBefore = loadavg();
  let n = 0;
  for (const phase of PHASES) {
    const r = await cannon({
      url: `${base}/gauges/${g.id}/runs`,
      connections: phase.connections,
      amount: phase.runs,
      requests: [{ method: 'POST', headers: { 'content-type': 'application/json' }, setupRequest: (req) => ({ ...req, body: runBody(`bench-${n++}`) }) }],
    });
    row(`POST runs, ${phase.connections} connections (${phase.runs} runs)`, r, r['5xx'] ? `${r['5xx']} answered 503 busy` : '');
  }
  const rssAfter = rssMb(service.pid!);

  const head = ['what', 'req/s', 'p50 ms', 'p99 ms', '2xx/3xx/other', 'note', 'loadavg (1, 5, 15 min)'];
  const widths = head.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
  const line = (cells: string[]) => cells.map((c, i) => c.padEnd(widths[i])).join('  ');
  console.log(`\nload bench: ${scenario.memberIds.length} members × ${run.members[0].values.length - run.warmupSteps} lead times per run, degraded mode (raw-error archive), 1000 trajectories; service WORKERS=2, CORRECTION_QUEUE=128`);
  console.log(line(head));
  for (const r of rows) console.log(line(r));
  console.log(`\nservice RSS before the runs: ${rssBefore} MB (loadavg ${loadBefore}); after ${n} runs: ${rssAfter} MB (loadavg ${loadavg()})`);
} finally {
  service.kill('SIGTERM');
  await new Promise((r) => service.once('exit', r));
  await admin.query(`drop database if exists ${name} with (force)`);
  await admin.end();
}
