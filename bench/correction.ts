/**
 * Correction and read benchmarks against a running service (a child process) on PostgreSQL.
 *  1. Runs of 51 members × 240 lead times, 1000 trajectories: median and p99 latency, runs per second
 *     (goal: median under 60 ms, at least 30 runs/s on a 2-core machine).
 *  2. Latest-forecast reads (200 and 304 paths) with autocannon, against a bare fastify route
 *     (goal: at least half the bare route's requests per second).
 * Usage: DATABASE_URL=postgres://postgres@127.0.0.1:5432/test npx tsx bench/correction.ts
 * Everything is on loopback, bounded in count and time. Loading the archive and fitting the model
 * the first time takes a minute or two; later runs reuse them.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import autocannon from 'autocannon';
import { buildScenario } from '../src/scenario/scenario.ts';
import { loadScenarioArchive, type Send } from '../src/scenario/load-archive.ts';

const DATABASE_URL = process.env.DATABASE_URL;
if (!DATABASE_URL) {
  console.error('set DATABASE_URL to a PostgreSQL server (the goals are stated for a real server)');
  process.exit(2);
}
const PORT = 8097;
const BARE_PORT = 8098;
const base = `http://127.0.0.1:${PORT}`;
const MEMBERS = 51;
const LEADS = 240;
const RUNS = Number(process.env.RUNS ?? 200);
const CONCURRENCY = Number(process.env.CONCURRENCY ?? 4);

function start(args: string[], env: Record<string, string>): Promise<ChildProcess> {
  const child = spawn(process.execPath, ['--import', 'tsx', ...args], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'inherit'] });
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`${args[0]} did not start`)), 60_000);
    const poll = async () => {
      try {
        const res = await fetch(`http://127.0.0.1:${env.PORT}${args[0].includes('bare') ? '/bare' : '/healthz'}`);
        if (res.ok) {
          clearTimeout(timer);
          resolve(child);
          return;
        }
      } catch {
        /* not up yet */
      }
      setTimeout(poll, 200);
    };
    poll();
  });
}

let bare: ChildProcess | null = null;
const service = await start(['src/main.ts'], { PORT: String(PORT), HOST: '127.0.0.1', AUTH: 'off', LOG_LEVEL: 'warn', DATABASE_URL, WORKERS: '2', CORRECTION_QUEUE: '64' });
try {
  const send: Send = async (method, path, body) => {
    const res = await fetch(`${base}${path}`, { method, headers: body === undefined ? {} : { 'content-type': 'application/json' }, body: body === undefined ? undefined : JSON.stringify(body) });
    const text = await res.text();
    return { status: res.status, body: text ? JSON.parse(text) : null };
  };
  const scenario = buildScenario({ seed: 9, members: MEMBERS });
  const g = scenario.gauge;
  const models = await send('GET', `/gauges/${g.id}/models`);
  const active = models.status === 200 && (models.body as { versions: { active: boolean; featureSpec: { simLags: number } }[] }).versions.find((v) => v.active);
  if (!active) {
    console.log('loading the archive and fitting a model (first time only)…');
    await loadScenarioArchive(send, scenario);
    const job = (await send('POST', `/gauges/${g.id}/models/fit`, { params: { nRounds: 200, patience: 20 }, templateLength: LEADS, maxTrainRows: 80_000, forcings: [] })).body as { id: string };
    for (;;) {
      const j = (await send('GET', `/jobs/${job.id}`)).body as { status: string; error: string };
      if (j.status === 'succeeded') break;
      if (j.status !== 'queued' && j.status !== 'running') throw new Error(`fit ${j.status}: ${j.error}`);
      await new Promise((r) => setTimeout(r, 500));
    }
  }
  // Raw runs: 51 members over 240 lead times, from the members' continuous simulations (a
  // pseudo-forecast), each with its own issue time so none is an idempotent replay.
  const warm = 10;
  const source = `bench-${Date.now()}`;
  const bodies = Array.from({ length: RUNS }, (_, r) => {
    const i = 400 + r * 7;
    return JSON.stringify({
      issueTime: scenario.times[i],
      source,
      unit: 'm3/s',
      warmupSteps: warm,
      members: scenario.memberIds.map((id) => ({ id, values: scenario.memberSimulations[id].slice(i - warm + 1, i + 1 + LEADS) })),
      trajectories: 1000,
    });
  });
  // One warm-up run loads the model and archive into the workers.
  const first = await fetch(`${base}/gauges/${g.id}/runs`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: bodies[0] });
  if (first.status !== 201) throw new Error(await first.text());
  const latencies: number[] = [];
  const stageTimes: number[] = [];
  let next = 1;
  const t0 = performance.now();
  await Promise.all(
    Array.from({ length: CONCURRENCY }, async () => {
      while (next < bodies.length) {
        const body = bodies[next++];
        const s = performance.now();
        const res = await fetch(`${base}/gauges/${g.id}/runs`, { method: 'POST', headers: { 'content-type': 'application/json' }, body });
        const json = (await res.json()) as { timings?: { stochasticMs: number; inferenceMs: number } };
        if (res.status !== 201) throw new Error(JSON.stringify(json));
        latencies.push(performance.now() - s);
        stageTimes.push(json.timings!.stochasticMs + json.timings!.inferenceMs);
      }
    }),
  );
  const seconds = (performance.now() - t0) / 1000;
  const q = (a: number[], p: number) => [...a].sort((x, y) => x - y)[Math.min(a.length - 1, Math.floor(p * a.length))];

  // Sequential latency (no queueing): the figure a single forecast system sees.
  const sequential: number[] = [];
  for (let r = 0; r < 30; r++) {
    const body = JSON.parse(bodies[(r % (bodies.length - 1)) + 1]);
    body.source = `${source}-seq`;
    const s = performance.now();
    const res = await fetch(`${base}/gauges/${g.id}/runs`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
    await res.arrayBuffer();
    sequential.push(performance.now() - s);
  }

  const latest = await fetch(`${base}/gauges/${g.id}/forecasts/latest`);
  const etag = latest.headers.get('etag')!;
  const latestBytes = (await latest.arrayBuffer()).byteLength;
  bare = await start(['bench/bare-server.ts'], { PORT: String(BARE_PORT), BODY_BYTES: String(latestBytes) });
  const cannon = (url: string, headers: Record<string, string> = {}) =>
    new Promise<autocannon.Result>((resolve, reject) => autocannon({ url, connections: 20, duration: 5, headers }, (err, r) => (err ? reject(err) : resolve(r))));
  const bareResult = await cannon(`http://127.0.0.1:${BARE_PORT}/bare`);
  const ok = await cannon(`${base}/gauges/${g.id}/forecasts/latest`);
  const notModified = await cannon(`${base}/gauges/${g.id}/forecasts/latest`, { 'if-none-match': etag });

  const row = (a: string, b: string, c: string) => console.log(a.padEnd(44) + b.padStart(14) + '  ' + c);
  console.log('');
  row('figure', 'value', 'goal');
  row(`runs ${MEMBERS}×${LEADS}, 1000 traj., ${CONCURRENCY} at once: median`, `${q(latencies, 0.5).toFixed(1)} ms`, '');
  row('  p99', `${q(latencies, 0.99).toFixed(1)} ms`, '');
  row('  runs per second', `${((bodies.length - 1) / seconds).toFixed(1)}`, '≥ 30');
  row('  inference + stochastic stage, median', `${q(stageTimes, 0.5).toFixed(1)} ms`, '');
  row('one run at a time: median', `${q(sequential, 0.5).toFixed(1)} ms`, '< 60 ms');
  row('  p99', `${q(sequential, 0.99).toFixed(1)} ms`, '');
  row(`bare fastify route, same body (${(latestBytes / 1024).toFixed(0)} KB)`, `${Math.round(bareResult.requests.average)} req/s`, '');
  row('latest forecast, 200', `${Math.round(ok.requests.average)} req/s`, `≥ ${Math.round(bareResult.requests.average / 2)} (half of bare)`);
  row('latest forecast, 304 (If-None-Match)', `${Math.round(notModified.requests.average)} req/s`, `≥ ${Math.round(bareResult.requests.average / 2)}`);
  row('  answers other than 200 / 304', String(ok.non2xx + notModified.non2xx - notModified['3xx']), '');
} finally {
  service.kill('SIGTERM');
  bare?.kill('SIGTERM');
}
