/**
 * A thousand gauges in one PostgreSQL database (a fresh one, created and dropped here): each gauge
 * gets YEARS of daily observations, two forcings and MEMBERS member simulations, written by the
 * store's bulk path (COPY) one gauge per transaction, as the ingest routes write them. One more
 * gauge (the demo scenario's) gets a fitted model; with the database full, the bench times runs of
 * MEMBERS members × 240 lead times × 1000 trajectories and reads of the latest forecast.
 * Prints ingest time, database size (pg_database_size), p50/p99 of the latest read and of a run.
 * Usage: DATABASE_URL=postgres://postgres@127.0.0.1:5432/test GAUGES=1000 YEARS=20 MEMBERS=10 npx tsx bench/thousand-gauges.ts
 * With GAUGES below 1000 it also prints the load time and size extrapolated linearly to 1000
 * gauges, labelled as such.
 */
import { buildApp } from '../src/api/app.ts';
import { jobHandlers } from '../src/jobs/handlers.ts';
import { JobRunner } from '../src/jobs/runner.ts';
import { loadConfig } from '../src/config.ts';
import { buildScenario } from '../src/scenario/scenario.ts';
import { loadScenarioArchive, type Send } from '../src/scenario/load-archive.ts';
import { ensureForcingVariable, ensureMembers, upsertForcings, upsertObservations, upsertSimulations } from '../src/store/archive-repo.ts';
import { loadavg, openBenchDb } from './bench-db.ts';

const GAUGES = Number(process.env.GAUGES ?? 1000);
const YEARS = Number(process.env.YEARS ?? 20);
const MEMBERS = Number(process.env.MEMBERS ?? 10);
const RUNS = Number(process.env.RUNS ?? 40);
const READS = Number(process.env.READS ?? 300);
const LEADS = 240;
if (!process.env.DATABASE_URL) {
  console.error('set DATABASE_URL to a PostgreSQL server');
  process.exit(2);
}
const DAY = 86_400_000;
const bench = await openBenchDb(process.env.DATABASE_URL, 'thousand_gauges');
const { db } = bench;
const config = loadConfig({ ...process.env, DATABASE_URL: bench.url!, AUTH: 'off', HOST: '127.0.0.1', DATA_DIR: bench.dataDir, WORKERS: '2', BODY_LIMIT_MB: '128' });
const app = await buildApp({ db, config });
// The fit is a job: a runner picks it up, as in the service.
const runner = new JobRunner(db, jobHandlers, app.log);
await runner.start();
const send: Send = async (method, url, body) => {
  const res = await app.inject({ method, url, ...(body === undefined ? {} : { payload: body as object }) });
  return { status: res.statusCode, body: res.body ? JSON.parse(res.body) : null };
};
const q = (a: number[], p: number) => [...a].sort((x, y) => x - y)[Math.min(a.length - 1, Math.floor(p * a.length))];
const lines: string[][] = [];
const figure = (what: string, value: string) => {
  lines.push([what, value, loadavg()]);
  console.log(`${what}: ${value}  (loadavg ${loadavg()})`);
};

try {
  // 1. One gauge with a model (fitted first, while the database is small: the fit is not what is measured).
  const scenario = buildScenario({ seed: 5, years: 6, members: MEMBERS });
  const sg = scenario.gauge.id;
  const fitStart = performance.now();
  await loadScenarioArchive(send, scenario);
  const job = (await send('POST', `/gauges/${sg}/models/fit`, { params: { nRounds: 60, patience: 10 }, templateLength: LEADS, maxTrainRows: 30_000, forcings: [] })).body as { id: string };
  for (;;) {
    const j = (await send('GET', `/jobs/${job.id}`)).body as { status: string; error: string };
    if (j.status === 'succeeded') break;
    if (j.status !== 'queued' && j.status !== 'running') throw new Error(`fit ${j.status}: ${j.error}`);
    await new Promise((r) => setTimeout(r, 500));
  }
  console.log(`  scenario gauge loaded and fitted in ${((performance.now() - fitStart) / 1000).toFixed(0)} s`);
  // 2. The archive: GAUGES gauges × YEARS daily.
  const n = Math.round((YEARS * 365.25 * DAY) / DAY);
  const t0 = Date.parse('2000-01-01T00:00:00Z');
  const times = Float64Array.from({ length: n }, (_, i) => t0 + i * DAY);
  const memberIds = Array.from({ length: MEMBERS }, (_, m) => `p${String(m).padStart(2, '0')}`);
  const perGauge = n * (3 + MEMBERS);
  const loadStart = performance.now();
  for (let g = 0; g < GAUGES; g++) {
    const id = `gauge-${String(g).padStart(4, '0')}`;
    const created = await send('POST', '/gauges', { id, name: `Gauge ${g}`, catchmentAreaKm2: 50 + g, timeStep: 'P1D', flowUnit: 'm3/s' });
    if (created.status !== 201) throw new Error(JSON.stringify(created.body));
    const phase = g * 0.37;
    const flow = (i: number, m: number) => Math.round((20 + 15 * Math.sin((2 * Math.PI * i) / 365.25 + phase) + 4 * Math.sin(i / 5 + m)) * 1000) / 1000;
    await db.transaction(async (tx) => {
      await ensureMembers(tx, id, memberIds);
      await ensureForcingVariable(tx, id, 'precipitation', 'mm');
      await ensureForcingVariable(tx, id, 'air_temperature', 'degC');
      await upsertObservations(tx, id, times, Float64Array.from(times, (_, i) => flow(i, 0.5)), null);
      await upsertForcings(tx, id, times, [
        { name: 'precipitation', values: Float64Array.from(times, (_, i) => Math.max(0, Math.round(20 * Math.sin(i * 1.7 + g)) / 2)) },
        { name: 'air_temperature', values: Float64Array.from(times, (_, i) => Math.round(100 * (8 + 10 * Math.sin((2 * Math.PI * i) / 365.25))) / 100) },
      ]);
      await upsertSimulations(tx, id, times, memberIds.map((m, k) => ({ id: m, values: Float64Array.from(times, (_, i) => flow(i, k)) })));
    });
    if ((g + 1) % Math.max(1, Math.round(GAUGES / 10)) === 0) {
      const s = (performance.now() - loadStart) / 1000;
      console.log(`  ${g + 1} gauges, ${((g + 1) * perGauge).toLocaleString('en')} values, ${s.toFixed(0)} s, ${Math.round(((g + 1) * perGauge) / s).toLocaleString('en')} values/s (loadavg ${loadavg()})`);
    }
  }
  const loadSeconds = (performance.now() - loadStart) / 1000;
  const values = GAUGES * perGauge;
  figure(`ingest of ${GAUGES} gauges × ${YEARS} years daily (${(3 + MEMBERS)} series each, ${values.toLocaleString('en')} values)`, `${loadSeconds.toFixed(0)} s, ${Math.round(values / loadSeconds).toLocaleString('en')} values/s`);
  await db.query('analyze');
  const size = Number((await db.query<{ n: number }>('select pg_database_size(current_database())::float8 as n')).rows[0].n);
  figure('database size', `${(size / 2 ** 30).toFixed(2)} GiB (${(size / values).toFixed(0)} bytes per value)`);
  if (GAUGES < 1000) {
    figure(`EXTRAPOLATED linearly to 1000 gauges (measured ${GAUGES}): ingest`, `${((loadSeconds * 1000) / GAUGES / 60).toFixed(0)} min`);
    figure(`EXTRAPOLATED linearly to 1000 gauges (measured ${GAUGES}): database size`, `${((size * 1000) / GAUGES / 2 ** 30).toFixed(1)} GiB`);
  }

  // 3. With the database full: runs and latest reads of the gauge with a model.
  const warm = 10;
  const runTimes: number[] = [];
  for (let r = 0; r <= RUNS; r++) {
    const i = 400 + r * 5;
    const body = {
      issueTime: scenario.times[i],
      source: 'thousand-gauges',
      unit: 'm3/s',
      warmupSteps: warm,
      members: scenario.memberIds.map((id) => ({ id, values: scenario.memberSimulations[id].slice(i - warm + 1, i + 1 + LEADS) })),
      trajectories: 1000,
    };
    const s = performance.now();
    const res = await app.inject({ method: 'POST', url: `/gauges/${sg}/runs`, payload: body });
    if (res.statusCode !== 201) throw new Error(res.body);
    if (r > 0) runTimes.push(performance.now() - s); // the first run loads the model into the workers
  }
  figure(`run (${MEMBERS} members × ${LEADS} leads × 1000 trajectories), ${RUNS} one at a time`, `p50 ${q(runTimes, 0.5).toFixed(0)} ms, p99 ${q(runTimes, 0.99).toFixed(0)} ms`);
  const readTimes: number[] = [];
  for (let r = 0; r < READS; r++) {
    const s = performance.now();
    const res = await app.inject({ method: 'GET', url: `/gauges/${sg}/forecasts/latest` });
    if (res.statusCode !== 200) throw new Error(res.body);
    readTimes.push(performance.now() - s);
  }
  figure(`latest-forecast read, ${READS} one at a time`, `p50 ${q(readTimes, 0.5).toFixed(1)} ms, p99 ${q(readTimes, 0.99).toFixed(1)} ms`);
} finally {
  await runner.stop();
  await app.close();
  await bench.drop();
}
console.log('');
const widths = [Math.max(...lines.map((l) => l[0].length)) + 2, Math.max(...lines.map((l) => l[1].length)) + 2];
for (const l of lines) console.log(l[0].padEnd(widths[0]) + l[1].padEnd(widths[1]) + 'loadavg ' + l[2]);
